"""The README's main command (`nullfit demo`) and `nullfit report`, end to end on the demo data."""

import hashlib
import subprocess
import sys
from pathlib import Path

import pytest

DEMO = Path(__file__).resolve().parents[2] / "data_demo"


def run_cli(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "nullfit.cli", *map(str, args)], capture_output=True, text=True,
                          timeout=900, cwd=cwd)


@pytest.fixture(scope="module")
def demo_out(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "out"
    r = run_cli("demo", "-o", out)
    assert r.returncode == 0, r.stderr
    return out, r


def test_demo_prints_summary_and_writes_report_and_figures(demo_out):
    out, r = demo_out
    assert "INVENTED" in r.stdout
    for needle in ("feldman-cousins", "ratio expected / bound", "Lab-frame combination", "Sky-frame scale fit"):
        assert needle in r.stdout, needle
    from nullfit.output.demo import FIGURES, REPORT, TABLE

    written = {p.name for p in out.iterdir()}
    assert {REPORT, TABLE} <= written
    assert {"scan.png", "folded.png", "plane.png", "belt.png", "posterior.png"} <= written
    assert written <= set(FIGURES) | {REPORT, TABLE}
    html = (out / REPORT).read_text(encoding="utf-8")
    # provenance: the SHA-256 of an input (hashlib as reference) and the dependency versions
    assert hashlib.sha256((DEMO / "quiet.csv").read_bytes()).hexdigest() in html
    assert "numpy" in html and "data:image/png;base64," in html


def test_demo_refuses_to_overwrite_without_force(demo_out):
    out, _ = demo_out
    before = (out / "report.html").stat().st_mtime_ns
    r = run_cli("demo", "-o", out)
    assert r.returncode == 2 and "--force" in r.stderr and "Traceback" not in r.stderr
    assert (out / "report.html").stat().st_mtime_ns == before


def test_report_command(tmp_path):
    target = tmp_path / "r.html"
    r = run_cli("report", DEMO / "injected_2theta.csv", "-o", target, "--seed", "3", "--speed", "30000")
    assert r.returncode == 0, r.stderr
    html = target.read_text(encoding="utf-8")
    assert hashlib.sha256((DEMO / "injected_2theta.csv").read_bytes()).hexdigest() in html
    assert hashlib.sha256((DEMO / "injected_2theta.toml").read_bytes()).hexdigest() in html
    assert "seed: run" in html and "rows: dropped while reading" in html
    r2 = run_cli("report", DEMO / "injected_2theta.csv", "-o", target)
    assert r2.returncode == 2
    # never over an input, even with --force
    r3 = run_cli("report", DEMO / "injected_2theta.csv", "-o", DEMO / "injected_2theta.csv", "--force")
    assert r3.returncode == 2 and "input" in r3.stderr
