"""``nullfit sidereal``: the JSON it promises, logs and per-turn tables as input, one-line errors."""

import json
import subprocess
import sys

import numpy as np
import pytest

from nullfit.cli import main
from nullfit.hypothesis.apparatus import Apparatus
from nullfit.hypothesis.site import Site
from nullfit.simulation.sky import campaign_schedule, simulate_sky_campaign

SME = ["e_XY", "e_XZ", "e_YZ", "e_XX-YY", "e_ZZ", "o_XY", "o_XZ", "o_YZ"]


def run_cli(*args):
    """The real console entry point in a subprocess (no traceback may leak)."""
    return subprocess.run([sys.executable, "-m", "nullfit.cli", "sidereal", *map(str, args)], capture_output=True,
                          text=True, timeout=600)


def run_main(capsys, *args):
    """In-process (faster): (exit code, stdout, stderr)."""
    code = main(["sidereal", *map(str, args)])
    out = capsys.readouterr()
    return code, out.out, out.err


@pytest.fixture
def year_table(tmp_path, sky_turns):
    table, _ = sky_turns("days", n_runs=20, turn_period_s=1800.0, seed=2, lab_sigma=1e-15)
    return table.write(tmp_path / "turns.parquet")


def _write_logs(folder, n_runs=4, mark=True):
    """CSV logs with TOML manifests (docs/manifest.md) from a simulated sky campaign."""
    site = Site(58.391, 13.845, mark_azimuth_deg=23.5, table_sense="counterclockwise")
    app = Apparatus(None, None, signal="fractional", readout_sign=-1)
    sch = campaign_schedule("scattered", n_runs=n_runs, span_days=60.0, run_hours=3.0, rng=1)
    scans, _ = simulate_sky_campaign("rms", {"P_MM": 1e-9}, site=site, apparatus=app, schedule=sch, period_s=600.0,
                                     samples_per_turn=12, sigma=1e-15, rng=3)
    paths = []
    for scan, slot in zip(scans, sch):
        f = scan.to_frame()
        p = folder / f"{slot.run_id}.csv"
        f[["time_s", "angle_deg", "signal"]].rename(columns={"signal": "frac_freq"}).to_csv(p, index=False)
        start = np.datetime64(slot.start_unix, "s").astype(str) + "Z"
        mark_line = "mark_azimuth_deg = 23.5\n" if mark else ""
        p.with_suffix(".toml").write_text(
            f'[scan]\nrun_id = "{slot.run_id}"\n[columns]\nsignal = "frac_freq"\n[units]\nsignal = "fractional"\n'
            f'[time]\nstart_utc = "{start}"\n[apparatus]\nsignal = "fractional"\nreadout_sign = -1\n'
            f'[site]\nlatitude_deg = 58.391\nlongitude_deg = 13.845\n{mark_line}table_sense = "counterclockwise"\n',
            encoding="utf-8")
        paths.append(p)
    return paths


def test_json_has_the_promised_shape(year_table, capsys):
    code, out, err = run_main(capsys, year_table, "--json")
    assert code == 0, err
    d = json.loads(out)
    assert d["model"] == "sme" and d["route"] == "global"
    assert isinstance(d["span_days"], float) and isinstance(d["n_turns"], int)
    assert list(d["parameters"]) == SME
    for name, v in d["parameters"].items():
        assert set(v) >= {"estimate", "sigma"}
        assert (v["estimate"] is None) == (name == "e_ZZ")
    corr = np.array(d["correlation"])
    assert corr.shape == (7, 7) and d["correlation_names"] == [n for n in SME if n != "e_ZZ"]
    assert isinstance(d["notes"], list) and d["notes"]
    code, out, _ = run_main(capsys, year_table, "--json", "--route", "days", "--use-c0", "--cl", "0.9")
    d2 = json.loads(out)
    assert d2["route"] == "days" and d2["parameters"]["e_ZZ"]["estimate"] is not None
    assert d2["confidence_level"] == 0.9


def test_rms_from_logs_and_text_output(tmp_path, capsys):
    logs = _write_logs(tmp_path)
    code, out, err = run_main(capsys, *logs, "--model", "rms", "--json")
    assert code == 0, err
    d = json.loads(out)
    assert list(d["parameters"]) == ["P_MM"] and d["n_segments"] == 4
    assert np.array(d["correlation"]).shape == (1, 1)
    code, out, _ = run_main(capsys, *logs, "--model", "rms", "--bounds")
    assert code == 0 and "P_MM" in out and "Phys. Rev." in out
    own = tmp_path / "mine.csv"
    own.write_text("parameter,value,sigma,kind,confidence_level,year,span_days,experiment,reference,note\n"
                   "P_MM,1e-10,5e-11,sigma,0.6827,2020,365,test,\"J. Test 1, 2 (2020)\",invented for a test\n",
                   encoding="utf-8")
    code, out, _ = run_main(capsys, *logs, "--model", "rms", "--bounds", "--bounds-table", own, "--json")
    published = json.loads(out)["published"]
    assert [r["source"] for r in published] == ["J. Test 1, 2 (2020)"] and published[0]["estimate"] == 1e-10
    code, _, err = run_main(capsys, *logs, "--model", "rms", "--bounds-table", own)
    assert code == 2 and "--bounds" in err


def test_short_span_warns_on_one_line(tmp_path, sky_turns, capsys):
    table, _ = sky_turns("days", n_runs=10, span_days=10, turn_period_s=1800.0, seed=2)
    p = table.write(tmp_path / "ten_days.parquet")
    code, out, err = run_main(capsys, p)
    assert code == 0, err
    warn = [ln for ln in err.splitlines() if ln.startswith("nullfit: warning:")]
    assert len(warn) == 1 and "degenerate" in warn[0]
    code, out, err = run_main(capsys, p, "--combined", "--json")
    assert code == 0 and "warning" not in err
    assert json.loads(out)["combined"] is True


@pytest.mark.parametrize("args,needle", [
    (["missing.parquet"], "missing.parquet"),
    (["--model", "rms", "--combined"], "--combined"),
])
def test_errors_are_one_line_exit_2(year_table, args, needle):
    r = run_cli(*([year_table] if args[0].startswith("--") else []), *args)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("nullfit: ") and needle in lines[0]


def test_log_without_mark_azimuth_is_refused(tmp_path, capsys):
    logs = _write_logs(tmp_path, mark=False)
    code, _, err = run_main(capsys, *logs, "--model", "rms")
    assert code == 2
    assert len(err.strip().splitlines()) == 1 and "mark_azimuth_deg" in err


def test_output_states_its_convention_and_provenance(capsys, year_table):
    code, out, _ = run_main(capsys, year_table)
    assert code == 0
    assert "Sun-centred celestial equatorial frame" in out and "± is 1σ" in out and "Student-t" in out
    assert "use_c0=" not in out and "--use-c0" in out  # library keywords in command-line terms
    assert "Δν/ν" in out
    code, out, _ = run_main(capsys, year_table, "--json")
    d = json.loads(out)
    assert d["version"] and d["provenance"]["settings"]["model"] == "sme"
    assert "κ̃_e−" in d["convention"] and d["offset_unit"].startswith("fractional")
