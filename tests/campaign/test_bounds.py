"""Runs known only by a quoted bound (nullfit.campaign.bounds) beside analysed runs in the run table.

Reference: the classical-wind amplitude A₂ = L v²/(λ c²) (fringe) and (v/c)²/2 (fractional), and
peak-to-peak = 2·A (docs/conventions.md), evaluated here by hand."""

import subprocess
import sys
import warnings
from pathlib import Path

import pandas as pd
import pytest

from nullfit import compare_runs, simulate_scan
from nullfit.core.conventions import SPEED_OF_LIGHT
from nullfit.core.errors import ScanError

HEADER = "run,arm_length_m,wavelength_m,signal,bound,bound_kind,confidence_level,speed_m_s\n"


def table(tmp_path, body, name="bounds.csv"):
    p = tmp_path / name
    p.write_text(HEADER + body)
    return p


def test_like_with_like_for_both_bound_kinds(tmp_path):
    p = table(tmp_path, "amp,11,5.5e-7,fringe,0.01,amplitude,0.95,30000\n"
                        "p2p,11,5.5e-7,fringe,0.02,peak-to-peak,0.95,30000\n"
                        "res,,,fractional,1e-15,amplitude,0.95,\n")
    t = compare_runs([], bounds=p, speed_m_s=30_000.0)
    expected = 11.0 * 30_000.0 ** 2 / (5.5e-7 * SPEED_OF_LIGHT ** 2)  # classical wind, fringe
    amp, p2p, res = (t[t["run"] == r].iloc[0] for r in ("amp", "p2p", "res"))
    assert amp["expected_amplitude"] == pytest.approx(expected, rel=1e-12)
    # a peak-to-peak bound of 2X is an amplitude bound of X: same ratio, same speed bound
    assert p2p["upper_amplitude"] == pytest.approx(0.01, rel=1e-15)
    assert amp["ratio_expected_to_bound"] == pytest.approx(expected / 0.01, rel=1e-12)
    assert p2p["ratio_expected_to_bound"] == pytest.approx(amp["ratio_expected_to_bound"], rel=1e-12)
    assert p2p["speed_bound_m_s"] == pytest.approx(SPEED_OF_LIGHT * (5.5e-7 * 0.01 / 11.0) ** 0.5, rel=1e-12)
    # the fractional row takes the default speed: (v/c)²/2
    assert res["expected_amplitude"] == pytest.approx((30_000.0 / SPEED_OF_LIGHT) ** 2 / 2, rel=1e-12)
    assert res["unit"] == "fractional" and amp["unit"] == "fringe"
    assert set(t["source"]) == {"quoted bound"} and "halved" in p2p["note"]


def test_quoted_and_analysed_runs_share_one_table_and_one_figure(tmp_path):
    import matplotlib

    matplotlib.use("Agg")
    from nullfit.figures import plot_expected_vs_bound
    from nullfit.reading.manifest import Manifest
    from nullfit.reading.scan import Scan

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s, _ = simulate_scan(n_turns=20, samples_per_turn=32, sigma=0.01, rng=2, run_id="A1")
    s = Scan.from_arrays(s.time, s.angle_deg, s.signal, epoch_unix=s.epoch_unix,
                         meta=Manifest(apparatus={"arm_length_m": 11.0, "wavelength_m": 5.5e-7}, run_id="A1"))
    p = table(tmp_path, "Q1,11,5.5e-7,fringe,0.02,peak-to-peak,0.95,30000\n")
    t = compare_runs([s], bounds=p, rng=1)
    assert list(t["run"]) == ["A1", "Q1"] and list(t["source"]) == ["analysed", "quoted bound"]
    assert t["ratio_expected_to_bound"].notna().all()
    ax = plot_expected_vs_bound(t)
    assert ax.get_figure() is not None


@pytest.mark.parametrize("row,column", [
    ("x,11,5.5e-7,fringe,abc,amplitude,0.95,30000", "bound"),
    ("x,11,5.5e-7,fringe,0.01,rms,0.95,30000", "bound_kind"),
    ("x,11,5.5e-7,fringe,-1,amplitude,0.95,30000", "bound"),
    ("x,,5.5e-7,fringe,0.01,amplitude,0.95,30000", "arm_length_m"),
    ("x,11,5.5e-7,fringe,0.01,amplitude,95,30000", "confidence_level"),
    ("x,11,5.5e-7,volts,0.01,amplitude,0.95,30000", "signal"),
    (",11,5.5e-7,fringe,0.01,amplitude,0.95,30000", "run"),
])
def test_bad_rows_name_file_row_and_column(tmp_path, row, column):
    p = table(tmp_path, "ok,11,5.5e-7,fringe,0.01,amplitude,0.95,30000\n" + row + "\n")
    with pytest.raises(ScanError) as err:
        compare_runs([], bounds=p)
    msg = str(err.value)
    assert "bounds.csv" in msg and "row 2" in msg and repr(column) in msg and "\n" not in msg


def test_missing_column_and_the_command_line(tmp_path):
    p = tmp_path / "b.csv"
    p.write_text("run,bound\nx,1\n")
    with pytest.raises(ScanError, match="arm_length_m"):
        compare_runs([], bounds=p)
    good = table(tmp_path, "Q1,11,5.5e-7,fringe,0.02,peak-to-peak,0.95,30000\n")
    r = subprocess.run([sys.executable, "-m", "nullfit.cli", "compare", "--bounds", str(good), "--csv"],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    out = pd.read_csv(__import__("io").StringIO(r.stdout))
    assert out["upper_amplitude"].iloc[0] == pytest.approx(0.01)
    bad = table(tmp_path, "Q1,11,5.5e-7,fringe,zero,amplitude,0.95,30000\n", name="bad.csv")
    r = subprocess.run([sys.executable, "-m", "nullfit.cli", "compare", "--bounds", str(bad)],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 2 and len(r.stderr.strip().splitlines()) == 1
    assert "bad.csv, row 1, column 'bound'" in r.stderr and "Traceback" not in r.stderr
    assert Path(bad).read_text().startswith("run,")  # an input is never written to
