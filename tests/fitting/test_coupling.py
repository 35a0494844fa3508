"""Turn-level coupling fits of auxiliary channels (nullfit.fitting.coupling), both routes.

Test scans are built here with plain numpy (``Scan.from_arrays(..., aux={...})``): a tilt-like
channel whose 2θ part changes in amplitude and phase from turn to turn, plus a slow wander and
reading noise; the signal carries a true 2θ term and the channel's coupling.  Claims (binomial
tests, fixed seeds): the coupling's Student-t interval covers the injected coupling at its
nominal rate; with no coupling the corrected 2θ is unbiased and its Hotelling region covers;
a channel proportional to the signal is reported as degenerate and not subtracted.
"""

import math
import warnings

import numpy as np
import pytest
from scipy import stats

from nullfit.core.errors import AnalysisError, FitWarning
from nullfit.fitting.coupling import fit_coupling
from nullfit.fitting.fit import fit_scan
from nullfit.limits import limits_table
from nullfit.reading.scan import Scan

CL = 0.95
C2, S2 = 0.003, -0.001


def tilt_scan(rng, *, n_turns=40, per_turn=16, gain=0.002, phase=0.0, white=0.005, copy=False, steady=False):
    """Signal = (C2, S2) 2θ + coupling of the tilt's 2θ part with complex gain ``gain·e^{−i·phase}``
    + ``gain`` × the tilt's non-rotating part + white noise + drift.  ``steady``: the tilt's 2θ
    part is the same in every turn (nothing to separate it from the signal)."""
    n = n_turns * per_turn
    t = np.arange(n) * 0.5
    ang = np.arange(n) * 360.0 / per_turn
    th = np.deg2rad(ang)
    amp = np.repeat(5.0 + (0.0 if steady else 2.0) * rng.standard_normal(n_turns), per_turn)
    ph = np.repeat(0.3 + (0.0 if steady else 0.3) * rng.standard_normal(n_turns), per_turn)
    rest = 0.0 if steady else 0.02 * np.cumsum(rng.standard_normal(n)) + 0.2 * rng.standard_normal(n)
    tilt = amp * np.cos(2 * th + ph) + rest
    y = (C2 * np.cos(2 * th) + S2 * np.sin(2 * th) + gain * amp * np.cos(2 * th + ph + phase) + gain * rest
         + white * rng.standard_normal(n) + 1e-5 * t)
    aux = {"tilt": tilt}
    if copy:
        aux["copy"] = 3.0 * y
    return Scan.from_arrays(t, np.mod(ang, 360.0), y, aux=aux)


def quiet_coupling(scan, aux, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)
        return fit_coupling(scan, aux, **kw)


def binom_exact(k, n, p=CL):
    return stats.binomtest(int(k), n, p).pvalue > 0.01


# ------------------------------------------------------------------ reference implementation
def test_turn_level_regression_matches_statsmodels():
    # statsmodels OLS on the stacked per-turn rows (cos and sin rows of every turn) as the
    # independent reference for the estimate, and a plain loop refitting it with each turn left
    # out for the jackknife covariance.
    import statsmodels.api as sm

    from nullfit.fitting.demodulate import demodulate

    rng = np.random.default_rng(1)
    scan = tilt_scan(rng, gain=0.002)
    cf = quiet_coupling(scan, "tilt", dependence="warn")
    sig = demodulate(scan)
    ch = demodulate(Scan.from_arrays(scan.time, scan.angle, scan.aux["tilt"], angle_unit="rad"))
    n = len(sig)
    Y = np.r_[sig["c2"], sig["s2"]]
    X = np.column_stack([np.r_[np.ones(n), np.zeros(n)], np.r_[np.zeros(n), np.ones(n)], np.r_[ch["c2"], ch["s2"]]])
    res = sm.OLS(Y, X).fit()
    np.testing.assert_allclose(cf.theta, res.params, rtol=1e-9, atol=1e-15)
    assert cf.block_turns == 1
    rows = np.r_[np.arange(n), np.arange(n)]
    loo = np.array([sm.OLS(Y[rows != i], X[rows != i]).fit().params for i in range(n)])
    jack = (n - 1) / n * (loo - loo.mean(axis=0)).T @ (loo - loo.mean(axis=0))
    np.testing.assert_allclose(cf.cov, jack, rtol=1e-7)
    assert cf.dof == math.floor(n - 1 - 1 / 2)
    # the corrected estimate is β̂ = ȳ − κ̂ x̄
    h = cf.corrected
    assert h.c == pytest.approx(sig["c2"].mean() - cf.theta[2] * ch["c2"].mean(), rel=1e-9)


# ------------------------------------------------------------------ coverage
def coupling_coverage(n_scans, seed, model="scalar", gain=0.002, phase=0.0):
    rng = np.random.default_rng(seed)
    truth = {"scalar": [gain], "complex": [gain * math.cos(phase), -gain * math.sin(phase)]}[model]
    hits = np.zeros(len(truth), int)
    for _ in range(n_scans):
        cf = quiet_coupling(tilt_scan(rng, gain=gain, phase=phase), "tilt", model=model, reading_level=False)
        for i, v in enumerate(truth):
            lo, hi = cf.coupling_interval("tilt", i, CL)
            hits[i] += lo <= v <= hi
    return hits


def test_injected_coupling_is_recovered_within_its_errors_fast():
    n = 100
    hits = coupling_coverage(n, 2)
    assert all(binom_exact(k, n) for k in hits), hits / n
    hits = coupling_coverage(n, 3, model="complex", phase=0.6)  # a lagging response: gain and phase
    assert all(binom_exact(k, n) for k in hits), hits / n


@pytest.mark.slow
@pytest.mark.parametrize("model,phase", [("scalar", 0.0), ("complex", 0.6)])
def test_injected_coupling_is_recovered_within_its_errors_full(model, phase):
    n = 2000
    hits = coupling_coverage(n, 20 + int(10 * phase), model=model, phase=phase)
    assert all(binom_exact(k, n) for k in hits), hits / n


def no_coupling_study(n_scans, seed):
    rng = np.random.default_rng(seed)
    dev, hits = [], 0
    for _ in range(n_scans):
        h = quiet_coupling(tilt_scan(rng, gain=0.0), "tilt", reading_level=False).corrected
        d = np.array([h.c - C2, h.s - S2])
        dev.append(d / np.sqrt(np.diag(h.cov)))
        t2 = d @ np.linalg.solve(h.cov, d)
        hits += stats.f.cdf(t2 * (h.dof - 1) / (2 * h.dof), 2, h.dof - 1) < CL
    return np.array(dev), int(hits)


def test_without_coupling_the_corrected_estimate_is_unbiased_and_covers_fast():
    n = 150
    dev, hits = no_coupling_study(n, 4)
    assert np.all(stats.ttest_1samp(dev, 0.0).pvalue > 1e-3)
    assert binom_exact(hits, n), hits / n


@pytest.mark.slow
def test_without_coupling_the_corrected_estimate_is_unbiased_and_covers_full():
    n = 2000
    dev, hits = no_coupling_study(n, 5)
    assert np.all(stats.ttest_1samp(dev, 0.0).pvalue > 1e-3)
    assert binom_exact(hits, n), hits / n


# ------------------------------------------------------------------ degenerate channels
def test_channel_proportional_to_the_signal_is_degenerate_not_subtracted():
    cf = quiet_coupling(tilt_scan(np.random.default_rng(6), copy=True), "copy")
    assert not cf.ok and "copy" in cf.degenerate and "proportional" in cf.degenerate["copy"]
    with pytest.raises(AnalysisError, match="degenerate"):
        cf.corrected
    text = cf.summary().as_text()
    assert "DEGENERATE copy" in text and "no correction made" in text
    assert cf.to_dict()["degenerate"] and "turn_level" not in cf.to_dict()
    assert abs(cf.turn_correlation["copy"]) > 1 - 1e-9


def test_channel_with_a_steady_2theta_part_cannot_be_separated():
    scan = tilt_scan(np.random.default_rng(7), steady=True)
    cf = quiet_coupling(scan, "tilt")
    assert not cf.ok and "could not run" in cf.summary().as_text()  # neither route can fit it
    with pytest.raises(AnalysisError, match="turn level"):
        fit_scan(scan, aux="tilt")
    with pytest.raises(AnalysisError, match="degenerate"):
        cf.corrected


def test_weakly_varying_channel_inflates_the_error_and_says_so():
    rng = np.random.default_rng(8)
    strong = quiet_coupling(tilt_scan(rng), "tilt")
    assert strong.vif > 1 and 0 < strong.separation < 1
    # the corrected σ includes the coupling's uncertainty: larger than the white-design value
    assert strong.corrected.sigma > strong.before.sigma / math.sqrt(strong.vif) * 0.5


# ------------------------------------------------------------------ what the user sees
def test_corrected_estimate_feeds_every_limit_and_says_it_was_corrected():
    cf = quiet_coupling(tilt_scan(np.random.default_rng(9)), "tilt")
    h = cf.corrected
    assert "corrected" in h.method and h.caveats
    table = limits_table(h, rng=1, options={"bootstrap": {"replicates": 500}})
    for lim in table.attrs["limits"].values():
        assert any("corrected estimate" in n for n in lim.notes), lim.method
    # the per-turn pseudo-values average to the corrected estimate
    np.testing.assert_allclose(h.turns.mean(axis=0), [h.c, h.s], rtol=1e-9, atol=1e-15)


def test_pseudo_values_scatter_as_the_jackknife_covariance():
    # Tukey's pseudo-values p_i = θ̂ + (n − 1)(θ̂ − θ̂₍₋ᵢ₎): their sample covariance / n is the
    # delete-one jackknife covariance (n − 1)/n Σ (θ̂₍₋ᵢ₎ − θ̄₍₋₎)² (textbook identity), which is what
    # the bootstrap resamples; with one turn per block it is the reported covariance
    cf = quiet_coupling(tilt_scan(np.random.default_rng(1)), "tilt")
    h = cf.corrected
    assert cf.block_turns == 1
    n = h.turns.shape[0]
    np.testing.assert_allclose(np.cov(h.turns, rowvar=False) / n, cf.cov[:2, :2], rtol=1e-9)


def test_both_routes_side_by_side():
    scan = tilt_scan(np.random.default_rng(10))
    cf = quiet_coupling(scan, "tilt")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)
        ref = fit_scan(scan, aux="tilt")
    assert cf.reading["coef"]["tilt"] == pytest.approx(float(ref.aux_coef[0]), rel=1e-12)
    assert cf.reading["estimate"].c == pytest.approx(ref.harmonic(2).c, rel=1e-12)
    text = cf.summary().as_text()
    for needle in ("before (no correction)", "after, turn level", "after, reading level", "coupling κ (turn level)",
                   "coefficient (reading level)", "turn-to-turn correlation", "its own 2θ amplitude"):
        assert needle in text
    d = cf.to_dict()
    assert set(d) >= {"before", "turn_level", "reading_level", "turn_correlation", "channel_estimates"}
    assert "CouplingFit(2θ on tilt" in repr(cf)


def test_bad_options():
    scan = tilt_scan(np.random.default_rng(11))
    with pytest.raises(ValueError, match="not in the scan"):
        fit_coupling(scan, "temperature")
    with pytest.raises(ValueError, match="model must be"):
        fit_coupling(scan, "tilt", model="tensor")
    with pytest.raises(ValueError, match="at least one"):
        fit_coupling(scan, [])


def test_complex_coupling_is_reported_as_gain_and_phase():
    # simulated truth (tilt_scan): complex gain 0.002·e^{−i·0.6}, i.e. a response 34.4° behind in phase
    import re

    cf = quiet_coupling(tilt_scan(np.random.default_rng(4), phase=0.6, white=0.0005), "tilt", model="complex")
    note = next(n for n in cf.summary().notes if n.startswith("tilt: gain"))
    gain, phase = (float(v) for v in re.search(r"gain ([-\d.e]+) .* phase ([-\d.]+)°", note).groups())
    assert gain == pytest.approx(0.002, rel=0.05) and phase == pytest.approx(-math.degrees(0.6), abs=2.0)
    assert "A2 before" in cf.summary().as_text() and "amplitude A2" in cf.summary().as_text()
