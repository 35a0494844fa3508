"""The turn-to-turn dependence check (nullfit.fitting.dependence) against statsmodels and theory."""

import math

import numpy as np
import pytest
from scipy.stats import binomtest

from nullfit.fitting.dependence import (
    BLOCK_TAUS,
    MIN_BLOCKS,
    autocorrelation,
    block_edges,
    block_rule,
    check_dependence,
    integrated_time,
    ljung_box,
    ljung_box_lags,
)


def ar1(rng, n, rho, size=(), cols=2):
    e = rng.standard_normal((*size, n, cols))
    x = np.empty_like(e)
    x[..., 0, :] = e[..., 0, :] / math.sqrt(1 - rho**2)
    for t in range(1, n):
        x[..., t, :] = rho * x[..., t - 1, :] + e[..., t, :]
    return x


def test_autocorrelation_and_ljung_box_match_statsmodels():
    # statsmodels as the independent reference: acf (denominator N, demeaned) and acorr_ljungbox
    from statsmodels.stats.diagnostic import acorr_ljungbox
    from statsmodels.tsa.stattools import acf

    rng = np.random.default_rng(1)
    for n, rho in [(37, 0.0), (200, 0.4), (1000, 0.9)]:
        x = ar1(rng, n, rho)
        h = ljung_box_lags(n)
        r = autocorrelation(x, 20)
        q, p = ljung_box(r, n, h)
        for j in range(2):
            np.testing.assert_allclose(r[:, j], acf(x[:, j], nlags=20, fft=False), rtol=1e-10, atol=1e-12)
            ref = acorr_ljungbox(x[:, j], lags=[h])
            assert q[j] == pytest.approx(float(ref["lb_stat"].iloc[0]), rel=1e-10)
            assert p[j] == pytest.approx(float(ref["lb_pvalue"].iloc[0]), rel=1e-8, abs=1e-300)
        # statsmodels' default lag rule is min(10, nobs // 5)
        assert h == min(10, n // 5)


def test_integrated_time_window_by_a_plain_loop():
    # Sokal's automatic window re-implemented as a plain loop (the definition in the docstring)
    rng = np.random.default_rng(2)
    x = ar1(rng, 3000, 0.7)
    r = autocorrelation(x, 1500)
    tau, win, reached = integrated_time(r, 3000)
    for j in range(2):
        t = 1.0
        for m in range(1, 1501):
            t += 2 * r[m, j]
            if m >= 5 * t:
                break
        assert win[j] == m and tau[j] == pytest.approx(t, rel=1e-12) and reached[j]


def test_integrated_time_of_ar1_is_its_theoretical_value():
    # AR(1): τ = (1 + ρ)/(1 − ρ) (common practice); Sokal's estimate has relative variance
    # ≈ 2(2M + 1)/N for a window of M lags (the usual large-N variance of a windowed
    # autocorrelation sum, recalled from memory): 5 σ tolerance.
    rng = np.random.default_rng(3)
    n, rho = 200_000, 0.6
    x = ar1(rng, n, rho)
    tau, win, _ = integrated_time(autocorrelation(x, 5000), n)
    true = (1 + rho) / (1 - rho)
    sd = true * np.sqrt(2 * (2 * win + 1) / n)
    assert np.all(np.abs(tau - true) < 5 * sd)


@pytest.mark.parametrize("n,n_sims", [(24, 1000), (400, 600)])
def test_false_alarm_rate_for_independent_turns(n, n_sims):
    # Claim (dependence.py, docs/limits.md): with 4 independent series the Bonferroni-combined
    # Ljung–Box test rejects independent turns in at most 8 % of scans (nominal 5 %; the test is
    # slightly liberal at small N).
    rng = np.random.default_rng(10 + n)
    x = rng.standard_normal((n_sims, n, 4))
    hits = sum(check_dependence(x[i]).detected for i in range(n_sims))
    assert binomtest(hits, n_sims, 0.08, alternative="greater").pvalue > 0.01, hits / n_sims


def test_strong_dependence_is_detected_and_sets_blocks():
    rng = np.random.default_rng(4)
    for n in (100, 400, 1600):
        for _ in range(20):
            dep = check_dependence(ar1(rng, n, 0.95), ("c2", "s2"))
            assert dep.detected and dep.p_value < 1e-6
            b, nb = block_rule(dep)
            assert b == min(math.ceil(BLOCK_TAUS * dep.tau_max), n // MIN_BLOCKS)
            assert nb == n // b >= MIN_BLOCKS


def test_not_checked_below_ten_turns_and_with_constant_series():
    dep = check_dependence(np.random.default_rng(0).standard_normal((9, 2)))
    assert not dep.checked and "fewer than 10" in dep.reason and not dep.detected
    assert block_rule(dep) == (1, 9)
    x = np.random.default_rng(0).standard_normal((30, 2))
    x[:, 1] = 1.0
    dep = check_dependence(x, ("c", "s"))
    assert dep.checked and dep.names == ("c",)


def test_negative_dependence_keeps_the_turn_scatter():
    # alternating turns (ρ = −0.8): detected, τ̂ < 1, the turn scatter over-estimates the error
    rng = np.random.default_rng(5)
    dep = check_dependence(ar1(rng, 400, -0.8))
    assert dep.detected and dep.tau_max < 1
    assert block_rule(dep) == (1, 400)


def test_block_edges_are_near_equal():
    e = block_edges(403, 5)
    assert e[0] == 0 and e[-1] == 403 and np.ptp(np.diff(e)) <= 1


def test_gaps_are_counted_and_the_report_renders():
    rng = np.random.default_rng(6)
    turn = np.r_[np.arange(50), np.arange(60, 110)]
    dep = check_dependence(ar1(rng, 100, 0.9), ("c2", "s2"), turn=turn)
    assert dep.n_gaps == 1
    d = dep.to_dict()
    assert d["detected"] and set(d["lag1_autocorrelation"]) == {"c2", "s2"} and d["ljung_box_lags"] == 10
    assert "Ljung–Box" in dep.statement() and "Turn-to-turn dependence" in str(dep)


def test_gaps_from_mid_times_when_turn_numbers_are_missing():
    from nullfit.fitting.dependence import count_gaps

    t = np.r_[np.arange(30) * 40.0, 3 * 86400 + np.arange(30) * 40.0]  # a 3-day jump in a 40 s/turn log
    assert count_gaps(time_mid=t) == 1
    assert count_gaps(turn=np.r_[0:30, 31:61], time_mid=t) == 1
    assert count_gaps() == 0


@pytest.mark.parametrize("rho", [0.0, 0.5, 0.97])
def test_window_found_among_the_first_lags_is_that_of_the_whole_series(monkeypatch, rho):
    # the check looks for the Sokal window among the first lags before it takes all N/2 by FFT;
    # with the direct lags switched off it takes all of them at once: the results must agree
    import nullfit.fitting.dependence as D

    x = ar1(np.random.default_rng(5), 4000, rho)
    quick = D.check_dependence(x, ["a", "b"])
    monkeypatch.setattr(D, "DIRECT_LAGS", 0)
    full = D.check_dependence(x, ["a", "b"])
    assert quick.window == full.window and quick.reached == full.reached
    np.testing.assert_allclose(quick.tau, full.tau, rtol=1e-10)
    np.testing.assert_allclose(quick.q, full.q, rtol=1e-10)
    assert quick.block_turns == full.block_turns and quick.suggested_block_turns == full.suggested_block_turns
