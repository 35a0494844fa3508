"""The truth of simulated scans is true (nullfit.simulation.scans).

Independent references: numpy.linalg.lstsq for the harmonics, scipy.stats distributions for the
sampling laws of variance estimators, statsmodels' AutoReg/acf for the AR(1) coefficient,
scipy.signal.welch for the flicker spectrum, pandas for ISO-8601 parsing.  Every random check uses
fixed seeds; tolerances are quantiles of the estimator's sampling law (stated beside each check),
with two-sided false-alarm probability ≤ 1e-3 per check.
"""

import json
import math

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from scipy.signal import welch

from nullfit.simulation.scans import (
    DEFAULT_EPOCH_UNIX,
    Drift,
    ar1_noise,
    flicker_noise,
    simulate_frame,
    simulate_scan,
)

P_MIN = 1e-3  # two-sided false-alarm probability accepted per statistical check


def _design(time, theta, ks, poly=2):
    """Columns 1, τ, τ², cos kθ, sin kθ (τ = time scaled to [0, 1] for conditioning)."""
    tau = time / time[-1]
    cols = [tau**p for p in range(poly + 1)]
    for k in ks:
        cols += [np.cos(k * theta), np.sin(k * theta)]
    return np.column_stack(cols)


# ------------------------------------------------------------------------------- harmonics
@pytest.mark.parametrize(
    "kw",
    [
        dict(),
        dict(marks=16, repeat_start_mark=True),
        dict(marks=16, sense=-1),
        dict(sense=-1, start_angle_deg=37.0, angles_mod_360=False),
        dict(samples_per_turn=50, start_angle_deg=90.0, n_turns=7.5, epoch_unix=None),
    ],
)
def test_noiseless_scan_reproduces_harmonics_and_drift_exactly(kw):
    harm = {1: (0.31, 20.0), 2: (0.047, 130.0), 3: (0.012, 300.0)}
    drift = Drift(offset=0.5, slope=2e-4, quadratic=-3e-8)
    scan, truth = simulate_scan(harmonics=harm, drift=drift, sigma=0.0, rng=3, **kw)
    np.testing.assert_array_equal(scan.signal, truth.model)
    # independent reference: ordinary least squares with numpy on the scan's own columns
    x = _design(scan.time, scan.angle, (1, 2, 3))
    beta = np.linalg.lstsq(x, scan.signal, rcond=None)[0]
    T = scan.time[-1]
    np.testing.assert_allclose(beta[:3], [0.5, 2e-4 * T, -3e-8 * T**2], rtol=0, atol=1e-12)
    for i, k in enumerate((1, 2, 3)):
        h = truth.harmonic(k)
        np.testing.assert_allclose(beta[3 + 2 * i: 5 + 2 * i], [h.c, h.s], rtol=0, atol=1e-12)


def test_harmonic_terms_follow_the_phase_convention():
    # docs/conventions.md: the term equals A cos(k(θ − φ)); computed here directly, not via nullfit.core.conventions
    harm = {1: (0.2, 350.0), 2: (0.05, 200.0)}  # 200° for k = 2 is reported as 20° (period 180°)
    scan, truth = simulate_scan(harmonics=harm, sigma=0.0, drift={"offset": 1.0}, rng=1)
    th = truth.theta
    direct = 0.2 * np.cos(th - np.deg2rad(350.0)) + 0.05 * np.cos(2 * (th - np.deg2rad(200.0)))
    # rounding bound: arguments up to |kθ| ≈ 2·126 rad carry an error of ~eps·|kθ| ≈ 6e-14 rad,
    # times amplitudes ≤ 0.2 — so agreement to 1e-13 is all double precision allows
    np.testing.assert_allclose(truth.harmonic_signal, direct, rtol=0, atol=1e-13)
    h2 = truth.harmonic(2)
    assert h2.phase_deg == pytest.approx(20.0, abs=1e-12)
    assert h2.peak_to_peak == pytest.approx(2 * 0.05)  # peak-to-peak is twice the amplitude
    # maximum of the 2θ term at θ = φ: c cos 2φ + s sin 2φ = A
    phi = np.deg2rad(h2.phase_deg)
    assert h2.c * np.cos(2 * phi) + h2.s * np.sin(2 * phi) == pytest.approx(0.05, abs=1e-15)
    assert truth.harmonic(4).amplitude == 0.0


def test_signal_is_the_sum_of_its_parts_and_scan_matches_truth():
    scan, truth = simulate_scan(harmonics={2: (0.01, 45.0)}, drift=Drift(slope=1e-5, walk_step=1e-3),
                                noise="ar1", ar1_coef=0.6, sigma=0.02, outliers=(0.01, 0.3), gaps=0.05, rng=7)
    parts = truth.drift_signal + truth.harmonic_signal + truth.noise_signal + truth.outlier_signal
    np.testing.assert_array_equal(scan.signal, parts)
    np.testing.assert_array_equal(scan.time, truth.time)
    # the scan's unwrapped angle differs from the true angle by whole turns only
    d = (scan.angle - truth.theta) / (2 * np.pi)
    np.testing.assert_allclose(d, np.round(d[0]), atol=1e-12)
    assert scan.epoch_unix == DEFAULT_EPOCH_UNIX


# ------------------------------------------------------------------------------- noise laws
def test_white_noise_variance_mean_and_normality():
    n, sigma = 20_000, 0.013
    scan, truth = simulate_scan(n_turns=n / 64, noise="white", sigma=sigma, rng=11)
    x = truth.noise_signal
    assert x.size == n
    # (n−1)s²/σ² ~ χ²(n−1) for iid normal readings (textbook sampling law of the variance)
    q = (n - 1) * x.var(ddof=1) / sigma**2
    p = 2 * min(stats.chi2.cdf(q, n - 1), stats.chi2.sf(q, n - 1))
    assert p > P_MIN
    # mean: z = x̄ / (σ/√n) ~ N(0, 1)
    assert abs(x.mean() / (sigma / math.sqrt(n))) < stats.norm.isf(P_MIN / 2)
    # Kolmogorov–Smirnov against N(0, σ²) (scipy.stats.kstest as the reference)
    assert stats.kstest(x / sigma, "norm").pvalue > P_MIN
    # white: lag-one autocorrelation ≈ N(0, 1/n) (Bartlett, common practice)
    r1 = np.corrcoef(x[:-1], x[1:])[0, 1]
    assert abs(r1) * math.sqrt(n) < stats.norm.isf(P_MIN / 2)


def test_ar1_coefficient_and_variances_recovered():
    from statsmodels.tsa.ar_model import AutoReg
    from statsmodels.tsa.stattools import acf

    n, rho, sigma = 20_000, 0.8, 0.02
    _, truth = simulate_scan(n_turns=n / 64, noise="ar1", ar1_coef=rho, sigma=sigma, rng=12)
    x = truth.noise_signal
    z = stats.norm.isf(P_MIN / 2)
    fit = AutoReg(x, lags=1, trend="n").fit()
    # asymptotic law of the AR(1) estimate: Var ρ̂ ≈ (1 − ρ²)/n (Box–Jenkins; common practice)
    se_rho = math.sqrt((1 - rho**2) / n)
    assert abs(fit.params[0] - rho) < z * se_rho
    assert abs(acf(x, nlags=1, fft=True)[1] - rho) < z * se_rho + (1 + 3 * rho) / n  # + known O(1/n) bias
    # innovation variance σ²(1 − ρ²); its estimate has relative sd ≈ √(2/n)
    s2 = sigma**2 * (1 - rho**2)
    assert abs(fit.sigma2 / s2 - 1) < z * math.sqrt(2 / n)
    assert truth.noise.innovation_sigma == pytest.approx(math.sqrt(s2))
    # marginal variance σ²: Var(s²) ≈ 2σ⁴(1 + ρ²)/(n(1 − ρ²)) (Bartlett's formula for AR(1), recalled
    # from memory; the sample mean's O(1/n) effect is negligible here)
    sd_var = sigma**2 * math.sqrt(2 * (1 + rho**2) / (n * (1 - rho**2)))
    assert abs(x.var() - sigma**2) < z * sd_var


def test_ar1_is_stationary_from_the_first_reading():
    # across independent series the first and the last reading both have variance σ²:
    # (m−1)s²/σ² ~ χ²(m−1) for m independent draws
    m, sigma, rho = 4000, 1.5, 0.95
    xs = np.array([ar1_noise(30, rho, sigma, rng=s) for s in range(m)])
    for col in (0, 29):
        q = (m - 1) * xs[:, col].var(ddof=1) / sigma**2
        assert 2 * min(stats.chi2.cdf(q, m - 1), stats.chi2.sf(q, m - 1)) > P_MIN
    # lag-one correlation across series is ρ: Fisher's z has sd 1/√(m − 3)
    r = np.corrcoef(xs[:, 0], xs[:, 1])[0, 1]
    assert abs(np.arctanh(r) - np.arctanh(rho)) * math.sqrt(m - 3) < stats.norm.isf(P_MIN / 2)


@pytest.mark.parametrize("alpha", [0.5, 1.0, 1.5])
def test_flicker_psd_slope_from_welch(alpha):
    # log-log slope of the Welch periodogram (scipy.signal.welch, Hann, 1024-point segments) over
    # 8/1024 … 0.25 cycles per reading, for 10 independent series; the mean slope must equal −α by a
    # one-sample t-test (its tolerance comes from the spread of the 10 independent slopes)
    slopes = []
    for seed in range(10):
        x = flicker_noise(2**15, alpha, 1.0, rng=100 + seed)
        f, p = welch(x, fs=1.0, nperseg=1024)
        sel = (f >= 8 / 1024) & (f <= 0.25)
        slopes.append(stats.linregress(np.log10(f[sel]), np.log10(p[sel])).slope)
    slopes = np.array(slopes)
    assert stats.ttest_1samp(slopes, -alpha).pvalue > P_MIN
    assert np.all(np.abs(slopes + alpha) < 0.1)  # each slope near −α (sd ≈ 0.012 per series)


def test_flicker_marginal_variance_is_sigma_squared():
    # the normalisation makes Var x_t = σ² over realisations at every t: χ² test on m series
    m, sigma = 3000, 2.0
    xs = np.array([flicker_noise(500, 1.0, sigma, rng=s) for s in range(m)])
    for col in (0, 250, 499):
        q = (m - 1) * xs[:, col].var(ddof=1) / sigma**2
        assert 2 * min(stats.chi2.cdf(q, m - 1), stats.chi2.sf(q, m - 1)) > P_MIN
    # flicker through simulate_scan: default α = 1, recorded in the truth
    _, truth = simulate_scan(noise="flicker", sigma=0.01, rng=5)
    assert truth.noise.flicker_alpha == 1.0 and truth.noise.kind == "flicker"


def test_random_walk_increments_have_the_stated_step():
    n, step = 20_000, 0.003
    _, truth = simulate_scan(n_turns=n / 64, sigma=0.0, harmonics={1: (0.1, 0.0)},
                             drift=Drift(slope=1e-4, walk_step=step), rng=13)
    walk = truth.drift_signal - truth.drift.polynomial(truth.time)
    assert walk[0] == 0.0
    inc = np.diff(walk)
    q = (n - 1) * np.mean(inc**2) / step**2  # Σ inc²/step² ~ χ²(n − 1) (mean known to be zero)
    assert 2 * min(stats.chi2.cdf(q, n - 1), stats.chi2.sf(q, n - 1)) > P_MIN


# ------------------------------------------------------------------------------- randomness
def test_reproducible_with_a_seed_and_different_seeds_differ():
    kw = dict(harmonics={2: (0.01, 10.0)}, noise="ar1", ar1_coef=0.5, sigma=0.01,
              drift=Drift(walk_step=1e-3), outliers=(0.02, 0.2), gaps=0.1)
    state = np.random.get_state()[1].copy()
    s1, t1 = simulate_scan(rng=42, **kw)
    s2, t2 = simulate_scan(rng=42, **kw)
    s3, t3 = simulate_scan(rng=43, **kw)
    np.testing.assert_array_equal(np.random.get_state()[1], state)  # global state untouched
    assert t1.seed == t2.seed == 42 and t3.seed == 43
    np.testing.assert_array_equal(s1.signal, s2.signal)
    np.testing.assert_array_equal(t1.outlier_rows, t2.outlier_rows)
    np.testing.assert_array_equal(t1.kept, t2.kept)
    assert not np.array_equal(t1.noise_signal[:100], t3.noise_signal[:100])
    assert not np.array_equal(t1.kept, t3.kept)
    # no seed: one is drawn and recorded, and it reproduces the scan
    s4, t4 = simulate_scan(rng=None, **kw)
    assert isinstance(t4.seed, int)
    np.testing.assert_array_equal(simulate_scan(rng=t4.seed, **kw)[0].signal, s4.signal)
    # a Generator is used as is; its seed is the caller's
    s5, t5 = simulate_scan(rng=np.random.default_rng(42), **kw)
    assert t5.seed is None
    np.testing.assert_array_equal(s5.signal, s1.signal)


def test_outliers_and_gaps_leave_the_noise_realisation_unchanged():
    base = dict(noise="ar1", ar1_coef=0.7, sigma=0.01, rng=21)
    _, t0 = simulate_scan(**base)
    _, t1 = simulate_scan(outliers=(0.05, 0.5), gaps=0.2, **base)
    np.testing.assert_array_equal(t1.noise_signal, t0.noise_signal[t1.kept])


# ------------------------------------------------------------------------------- turns and marks
def test_marks_with_repeated_start_mark_give_documented_turns():
    n_turns, M, period = 5, 16, 120.0
    scan, truth = simulate_scan(n_turns=n_turns, marks=M, repeat_start_mark=True, period_s=period, rng=1)
    assert scan.n_samples == n_turns * (M + 1)
    assert scan.n_turns == n_turns and scan.turn_complete.all()
    assert scan.marks == M
    np.testing.assert_array_equal(scan.turn, truth.turn)
    np.testing.assert_array_equal(np.bincount(scan.turn), np.full(n_turns, M + 1))
    logged = truth.angle_logged_deg
    for k in range(n_turns):
        a = logged[scan.turn == k]
        np.testing.assert_array_equal(a, np.arange(M + 1) * 360.0 / M % 360.0)  # 0, 22.5, …, 337.5, 0
    # readings are one reading interval apart, the re-read included (the table stands at the mark)
    np.testing.assert_allclose(np.diff(scan.time), period / M, rtol=0, atol=1e-9)
    assert truth.reading_interval_s == period / M


@pytest.mark.parametrize("sense", [1, -1])
def test_marks_without_repeat_and_either_sense(sense):
    scan, truth = simulate_scan(n_turns=4, marks=16, sense=sense, rng=2)
    assert scan.n_samples == 64 and scan.n_turns == 4 and scan.turn_complete.all()
    np.testing.assert_array_equal(np.bincount(scan.turn), [16] * 4)
    np.testing.assert_array_equal(scan.turn, truth.turn)
    assert set(scan.turn_sense.tolist()) == {sense}
    assert np.all(np.sign(np.diff(truth.theta)) == sense)


def test_start_off_the_reference_mark_gives_partial_first_and_last_turns():
    # 64 samples per turn from 90°: the first turn holds 48 readings (90° … 354.375°), then 19 full
    # turns, and the last 16 readings (0° … 84.375°) form a partial 21st turn
    scan, truth = simulate_scan(n_turns=20, samples_per_turn=64, start_angle_deg=90.0, rng=3)
    assert scan.n_turns == 21 and scan.n_complete_turns == 19
    assert not scan.turn_complete[0] and not scan.turn_complete[-1]
    np.testing.assert_array_equal(scan.turn, truth.turn)
    np.testing.assert_array_equal(scan.turn_complete, truth.turn_complete)
    counts = np.bincount(scan.turn)
    assert counts[0] == 48 and counts[-1] == 16 and np.all(counts[1:-1] == 64)


def test_start_angle_must_be_on_a_mark_and_repeat_needs_marks():
    with pytest.raises(ValueError, match="not on a mark"):
        simulate_scan(marks=16, start_angle_deg=10.0)
    with pytest.raises(ValueError, match="needs marks"):
        simulate_scan(repeat_start_mark=True)


def test_logged_angles_modulo_360_or_continuous():
    _, t_mod = simulate_scan(n_turns=3, sense=-1, rng=1)
    assert t_mod.angle_logged_deg.min() >= 0 and t_mod.angle_logged_deg.max() < 360
    _, t_cont = simulate_scan(n_turns=3, sense=-1, angles_mod_360=False, rng=1)
    assert np.all(np.diff(t_cont.angle_logged_deg) < 0)
    np.testing.assert_allclose(np.mod(t_cont.angle_logged_deg, 360.0) % 360.0, t_mod.angle_logged_deg, atol=1e-9)


# ------------------------------------------------------------------------------- gaps, outliers
def test_gap_fraction_removes_the_stated_number_of_readings():
    scan, truth = simulate_scan(n_turns=20, samples_per_turn=64, gaps=0.1, rng=4)
    assert truth.n_grid == 1280
    assert truth.n_removed == round(0.1 * 1280) == 1280 - scan.n_samples
    assert truth.kept.sum() == scan.n_samples


def test_gap_windows_remove_readings_inside_them():
    dt = 60.0 / 64
    windows = [(100.0, 200.0), (600.0, 601.0)]
    scan, truth = simulate_scan(gaps=windows, rng=4)
    grid = np.arange(1280) * dt
    inside = ((grid >= 100) & (grid < 200)) | ((grid >= 600) & (grid < 601))
    assert truth.n_removed == inside.sum() == 1280 - scan.n_samples
    assert not np.any(((scan.time >= 100) & (scan.time < 200)) | ((scan.time >= 600) & (scan.time < 601)))
    with pytest.raises(ValueError, match="start_s < stop_s"):
        simulate_scan(gaps=[(5.0, 1.0)])


def test_outliers_counted_and_sized_as_documented():
    scan, truth = simulate_scan(outliers=(0.02, 0.4), gaps=0.1, rng=5)
    n_kept = scan.n_samples
    assert truth.n_outliers == round(0.02 * n_kept)
    assert np.unique(truth.outlier_rows).size == truth.n_outliers
    nz = np.flatnonzero(truth.outlier_signal)
    np.testing.assert_array_equal(nz, truth.outlier_rows)
    np.testing.assert_array_equal(np.abs(truth.outlier_signal[nz]), 0.4)
    assert set(np.sign(truth.outlier_signal[nz]).tolist()) == {-1.0, 1.0}
    np.testing.assert_allclose(scan.signal - truth.model - truth.noise_signal, truth.outlier_signal, atol=1e-15)


# ------------------------------------------------------------------------------- frames, epochs
def test_frame_has_the_same_readings_as_the_scan_in_each_time_format():
    kw = dict(n_turns=3, harmonics={2: (0.01, 30.0)}, sigma=0.002, rng=9)
    scan, _ = simulate_scan(**kw)
    df, truth = simulate_frame(**kw)
    assert list(df.columns) == ["time_s", "angle_deg", "fringe"]
    np.testing.assert_array_equal(df["time_s"], scan.time)
    np.testing.assert_array_equal(df["fringe"], scan.signal)
    du, _ = simulate_frame(time_format="unix", **kw)
    np.testing.assert_allclose(du["unix_s"], DEFAULT_EPOCH_UNIX + scan.time, rtol=0, atol=1e-6)
    di, _ = simulate_frame(time_format="iso", **kw)
    assert di["timestamp"].iloc[0] == "2026-03-09T23:46:40.000000Z"  # DEFAULT_EPOCH_UNIX, by pandas below
    parsed = pd.to_datetime(di["timestamp"], utc=True)
    secs = (parsed - pd.Timestamp(DEFAULT_EPOCH_UNIX, unit="s", tz="UTC")).dt.total_seconds().to_numpy()
    np.testing.assert_allclose(secs, scan.time, rtol=0, atol=1e-6)
    df_frac, _ = simulate_frame(signal_unit="fractional", sigma=1e-15, n_turns=2, rng=1)
    assert "frac_freq" in df_frac.columns
    with pytest.raises(ValueError, match="needs an epoch"):
        simulate_frame(time_format="unix", epoch_unix=None)


def test_epoch_default_and_relative_only():
    scan, truth = simulate_scan(rng=1)
    assert scan.epoch_unix == DEFAULT_EPOCH_UNIX == truth.epoch_unix and scan.time[0] == 0.0
    scan, truth = simulate_scan(rng=1, epoch_unix=None)
    assert scan.epoch_unix is None and truth.epoch_unix is None


# ------------------------------------------------------------------------------- the truth object
def test_truth_describes_itself():
    _, truth = simulate_scan(harmonics={2: (0.003, 12.0)}, noise="ar1", ar1_coef=0.3, rng=8)
    text = str(truth)
    assert "seed" in text and "peak-to-peak" in text and "AR(1)" in text
    d = json.loads(truth.to_json())
    assert d["seed"] == 8 and d["harmonics"]["2"]["amplitude"] == 0.003
    assert d["harmonics"]["2"]["peak_to_peak"] == pytest.approx(0.006)
    assert "<table>" in truth._repr_html_()
    with pytest.raises(AttributeError):
        truth.seed = 3  # frozen


@pytest.mark.parametrize(
    "kw, msg",
    [
        (dict(noise="ar1"), "needs ar1_coef"),
        (dict(noise="ar1", ar1_coef=1.0), "strictly between"),
        (dict(noise="pink"), "noise must be one of"),
        (dict(sense=0), "sense"),
        (dict(sigma=-1.0), "sigma"),
        (dict(harmonics={0: (1.0, 0.0)}), "order"),
        (dict(harmonics={2: (-1.0, 0.0)}), "amplitude"),
        (dict(drift={"slop": 1.0}), "unknown drift"),
        (dict(outliers=(1.5, 1.0)), "outliers"),
        (dict(gaps=1.0), "fraction"),
        (dict(signal_unit="volt"), "signal_unit"),
        (dict(samples_per_turn=2), "samples_per_turn"),
        (dict(marks=16, n_turns=2.01), "whole number of marks"),
    ],
)
def test_bad_parameters_give_clear_errors(kw, msg):
    with pytest.raises(ValueError, match=msg):
        simulate_scan(rng=1, **kw)


# ------------------------------------------------------------------------------- 2θ truth, statistically
@pytest.mark.parametrize("kw", [dict(samples_per_turn=32), dict(marks=16, repeat_start_mark=True)])
def test_2theta_estimates_scatter_about_the_truth_as_normal(kw):
    # Over many seeds, OLS (numpy lstsq; offset, linear drift, 1θ, 2θ) estimates of c₂, s₂ minus the
    # truth, divided by their exact white-noise standard errors σ·sqrt((XᵀX)⁻¹), are N(0, 1): the
    # simulated scans carry exactly the injected 2θ term and nothing else at 2θ (KS test, scipy).
    sigma, n_sim = 0.01, 300
    z = []
    for seed in range(n_sim):
        scan, truth = simulate_scan(n_turns=8, harmonics={1: (0.05, 30.0), 2: (0.004, 70.0)},
                                    drift=Drift(offset=0.2, slope=1e-4), sigma=sigma, rng=500 + seed, **kw)
        x = _design(scan.time, scan.angle, (1, 2), poly=1)
        beta = np.linalg.lstsq(x, scan.signal, rcond=None)[0]
        se = sigma * np.sqrt(np.diag(np.linalg.inv(x.T @ x)))
        h = truth.harmonic(2)
        z.append([(beta[4] - h.c) / se[4], (beta[5] - h.s) / se[5]])
    z = np.array(z)
    for col in range(2):
        assert stats.kstest(z[:, col], "norm").pvalue > P_MIN


def test_reader_turns_across_a_long_gap_match_the_construction():
    # 64 readings per 80 s turn; 600–780 s removed: turn 7 ends at 180°, turn 8 vanishes, turn 9 starts at 270°
    scan, truth = simulate_scan(n_turns=30, period_s=80.0, gaps=[(600.0, 780.0)], rng=1)
    _, relabelled = np.unique(truth.turn, return_inverse=True)
    np.testing.assert_array_equal(scan.turn, relabelled)
