"""A run analysed with auxiliary channels: the limits and the run table use the corrected 2θ
estimate and say so; both coupling routes are reported.

References: the coupling stage called directly (nullfit.fitting.coupling.fit_coupling, itself
checked against statsmodels and by simulation in tests/fitting) and the limit registry."""

import warnings

import pytest

from nullfit import amplitude_limit, analyse, fit_coupling, fit_scan, read_scan
from nullfit.campaign.runs import run_row
from nullfit.core.errors import AnalysisError
from nullfit.simulation.logs import simulate_log, tilt


@pytest.fixture(scope="module")
def scan():
    # a tilt that follows the rotation (2θ part 0.5 µrad) coupled at 0.004 per µrad, no true 2θ signal
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        df, _ = simulate_log(aux=[tilt(0.004, amplitude_2theta=0.5, phase_2theta_deg=30.0, walk_step=0.05)],
                             n_turns=60, samples_per_turn=32, sigma=0.002, rng=4)
        return read_scan(df, aux=["tilt_urad"])


@pytest.mark.parametrize("route", ["reading", "turn"])
def test_limits_and_run_table_use_the_corrected_estimate(scan, route):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        run = analyse(scan, aux=["tilt_urad"], coupling=route, limits=("feldman-cousins", "neyman"), rng=1)
        raw = fit_scan(scan).harmonic(2)
        coup = fit_coupling(scan, ["tilt_urad"], harmonic=2)
    expect = coup.corrected if route == "turn" else fit_scan(scan, aux=["tilt_urad"]).harmonic(2)
    assert (run.estimate.c, run.estimate.s) == pytest.approx((expect.c, expect.s), rel=1e-12)
    for m, lim in run.limits.items():
        assert lim.upper == pytest.approx(amplitude_limit(expect, method=m).upper, rel=1e-12)
        assert any("corrected estimate" in n for n in lim.notes)
    # the uncorrected 2θ carries the tilt's 0.004 × 0.5 = 2e-3; the corrected one is compatible with 0
    assert raw.amplitude > 5 * raw.sigma and run.estimate.amplitude < 4 * run.estimate.sigma
    row = run_row(run)
    assert row["c2"] == run.estimate.c and row["corrected_for"] == f"tilt_urad ({route} level)"
    text = str(run)
    assert f"corrected for tilt_urad ({route} level)" in text and "its own 2θ amplitude" in text
    d = run.to_dict()
    assert d["corrected_for"] == row["corrected_for"] and "turn_level" in d["coupling"]


def test_a_degenerate_channel_is_refused_for_the_turn_route(scan):
    df = scan.to_frame().rename(columns={"signal": "fringe"})
    df["copy"] = df["fringe"]  # the channel's 2θ is exactly the signal's
    s = read_scan(df[["time_s", "angle_deg", "fringe", "copy"]], aux=["copy"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(AnalysisError, match="degenerate"):
            analyse(s, aux=["copy"], coupling="turn", limits=("feldman-cousins",))
