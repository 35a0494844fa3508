"""The command line: the JSON shape the README promises, exit code 2 with one line on bad input."""

import json
import subprocess
import sys
from pathlib import Path

import pytest

from nullfit.cli import main

DEMO = Path(__file__).resolve().parents[2] / "data_demo"


def run_cli(*args):
    """Run the real console entry point in a subprocess (no traceback may leak)."""
    return subprocess.run([sys.executable, "-m", "nullfit.cli", *map(str, args)], capture_output=True, text=True,
                          timeout=600)


def test_help_and_version(capsys):
    assert main(["--version"]) == 0
    assert "nullfit" in capsys.readouterr().out
    r = run_cli("--help")
    assert r.returncode == 0 and "demo" in r.stdout


def test_fit_json_shape():
    r = run_cli("fit", DEMO / "quiet.csv", "--json", "--seed", "5")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    for key, typ in (("n_samples", int), ("n_turns", int), ("dropped_rows", int), ("drift", str), ("errors", str)):
        assert isinstance(d[key], typ)
    h2 = d["harmonics"]["2"]
    assert set(h2) >= {"c", "s", "cov", "amplitude", "phase_deg"}
    assert len(h2["cov"]) == 2 and len(h2["cov"][0]) == 2
    assert "1" in d["harmonics"]


def test_fit_limits_and_expected_json():
    r = run_cli("fit", DEMO / "injected_2theta.csv", "--json", "--seed", "7", "--cl", "0.9",
                "--limits", "feldman-cousins,neyman,bayes,bootstrap", "--speed", "30000")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    lim = d["limits"]
    assert set(lim["feldman-cousins"]) >= {"confidence_level", "lower", "upper"}
    assert set(lim["neyman"]) >= {"confidence_level", "upper", "empty"}
    assert set(lim["bayes"]) >= {"confidence_level", "upper", "prior"}
    assert set(lim["bootstrap"]) >= {"confidence_level", "upper", "block_length", "replicates", "seed"}
    assert all(v["confidence_level"] == 0.9 for v in lim.values())
    assert 0 <= d["significance"]["p_value"] <= 1
    e = d["expected"]
    assert set(e) >= {"amplitude", "peak_to_peak", "ratio", "speed_bound_m_s"}
    # ratio: expected amplitude over the first listed limit's upper amplitude (same convention)
    assert e["ratio"] == pytest.approx(e["amplitude"] / lim["feldman-cousins"]["upper"], rel=1e-12)
    assert e["peak_to_peak"] == pytest.approx(2 * e["amplitude"], rel=1e-12)
    # the seed makes the bootstrap reproducible
    r2 = run_cli("fit", DEMO / "injected_2theta.csv", "--json", "--seed", "7", "--cl", "0.9",
                 "--limits", "bootstrap")
    assert json.loads(r2.stdout)["limits"]["bootstrap"]["upper"] == lim["bootstrap"]["upper"]


@pytest.mark.parametrize("content,needle", [
    ("", "empty"),
    ("time_s;angle_deg;fringe\n0;0;1\n1;10;2\n", "semicolons"),
    ("time_s,angle_deg,fringe\n0,0,1\n1,abc,2\n", "angle_deg"),
])
def test_bad_input_exits_2_with_one_line(tmp_path, content, needle):
    p = tmp_path / "bad.csv"
    p.write_text(content)
    r = run_cli("fit", p)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in r.stderr
    assert "bad.csv" in lines[0]
    assert needle.lower() in lines[0].lower()


def test_missing_file_and_bad_options_exit_2(tmp_path):
    r = run_cli("fit", tmp_path / "nope.csv")
    assert r.returncode == 2 and len(r.stderr.strip().splitlines()) == 1
    r = run_cli("fit", DEMO / "quiet.csv", "--drift", "wiggle")
    assert r.returncode == 2 and "drift" in r.stderr and "Traceback" not in r.stderr
    r = run_cli("fit", DEMO / "quiet.csv", "--cl", "95")
    assert r.returncode == 2 and "confidence_level" in r.stderr


def test_compare_csv(tmp_path):
    runs = sorted((DEMO / "campaign").glob("C0[12].csv"))
    r = run_cli("compare", *runs, "--csv", "--seed", "3")
    assert r.returncode == 0, r.stderr
    lines = r.stdout.strip().splitlines()
    assert len(lines) == 3 and "ratio_expected_to_bound" in lines[0]


def test_info_json_is_the_scan_description():
    r = run_cli("info", DEMO / "injected_2theta.csv", "--json")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    assert d["marks"] == 16 and d["n_complete_turns"] == 60 and d["dropped_rows"] == 0
    assert d["epoch_utc"] == "2026-03-12T20:00:00Z"  # data_demo/README.md: S01 starts 2026-03-12 20:00 UTC


def test_compare_takes_one_limit_method():
    runs = sorted((DEMO / "campaign").glob("C01.csv"))
    r = run_cli("compare", *runs, "--limits", "neyman,bayes")
    assert r.returncode == 2 and "one limit method" in r.stderr and "Traceback" not in r.stderr
