"""Block bootstrap: exact bootstrap moments, arch as reference, and an end-to-end scan simulation."""

import math

import numpy as np
import pytest

from nullfit.limits import amplitude_limit
from nullfit.limits.bootstrap import block_means, politis_white_block_length


def _ar1(rng, n, phi, size=None, sd=1.0):
    shape = (n, 2) if size is None else (size, n, 2)
    e = sd * rng.standard_normal(shape)
    x = np.empty_like(e)
    x[..., 0, :] = e[..., 0, :] / math.sqrt(1 - phi**2)
    for t in range(1, n):
        x[..., t, :] = phi * x[..., t - 1, :] + e[..., t, :]
    return x


def _block_mean_moments(x, b, circular):
    """Exact bootstrap mean and variance of the replicate mean (N divisible by b).

    A replicate is the average of k = N/b independent, uniformly chosen block means; the
    starts range over all N positions (circular) or over 0…N−b (moving).  So
    E*[m*] = mean of the block means and Var*[m*] = (population variance of block means)/k.
    """
    n = x.shape[0]
    xx = np.concatenate([x, x]) if circular else x
    starts = range(n) if circular else range(n - b + 1)
    bm = np.array([xx[i:i + b].mean(axis=0) for i in starts])
    return bm.mean(axis=0), bm.var(axis=0) / (n // b)


@pytest.mark.parametrize("scheme", ["circular", "moving"])
def test_block_means_have_the_exact_bootstrap_moments(scheme):
    rng = np.random.default_rng(3)
    x = _ar1(rng, 240, 0.6)
    b, reps = 8, 40_000
    m = block_means(x, b, scheme, reps, np.random.default_rng(4))
    mean, var = _block_mean_moments(x, b, scheme == "circular")
    # Monte Carlo error of the replicate average: sqrt(var/reps); of the variance: var·sqrt(2/reps).
    assert np.all(np.abs(m.mean(axis=0) - mean) < 5 * np.sqrt(var / reps))
    assert np.all(np.abs(m.var(axis=0) / var - 1) < 5 * math.sqrt(2 / reps))
    if scheme == "circular":
        np.testing.assert_allclose(mean, x.mean(axis=0), atol=1e-12)  # every turn equally likely


def test_stationary_scheme_against_arch():
    # arch.bootstrap.StationaryBootstrap as independent reference implementation: the variance
    # of the replicate mean must agree within the Monte Carlo error of both (5 sd, a priori).
    from arch.bootstrap import StationaryBootstrap

    rng = np.random.default_rng(8)
    x = _ar1(rng, 300, 0.5)
    b, reps = 6, 4000
    ours = block_means(x, b, "stationary", reps, np.random.default_rng(9))
    ref = StationaryBootstrap(b, x, seed=10).apply(lambda y: y.mean(axis=0), reps)
    rel = ours.var(axis=0) / ref.var(axis=0) - 1
    assert np.all(np.abs(rel) < 5 * math.sqrt(2 / reps) * math.sqrt(2))
    # each turn equally likely: bootstrap expectation of the mean is the sample mean
    assert np.all(np.abs(ours.mean(axis=0) - x.mean(axis=0)) < 5 * np.sqrt(ours.var(axis=0) / reps))


def test_block_of_whole_series_reproduces_the_mean():
    x = np.random.default_rng(0).standard_normal((50, 2))
    for scheme in ("circular", "moving"):
        m = block_means(x, 50, scheme, 200, np.random.default_rng(1))
        np.testing.assert_allclose(m, np.broadcast_to(x.mean(axis=0), m.shape), atol=1e-12)


def test_politis_white_grows_with_dependence():
    from arch.bootstrap import optimal_block_length

    rng = np.random.default_rng(2)
    b_white, _ = politis_white_block_length(rng.standard_normal((2000, 2)))
    x_ar = _ar1(rng, 2000, 0.8)
    b_ar, raw = politis_white_block_length(x_ar)
    assert b_white <= 3 < b_ar
    # the recorded values are arch's, the larger of the c and s series is used (rounded up)
    ref = optimal_block_length(x_ar)["circular"].to_numpy()
    np.testing.assert_allclose(raw, ref)
    assert b_ar == math.ceil(ref.max())


@pytest.mark.parametrize("n,phi", [(50, 0.0), (300, 0.3), (2000, 0.9), (20000, 0.5), (20000, 0.0)])
def test_politis_white_matches_arch(n, phi):
    # arch.bootstrap.optimal_block_length as the independent reference (its loop over lags; ours
    # uses one FFT): both block lengths agree to rounding.
    from arch.bootstrap import optimal_block_length

    from nullfit.limits.bootstrap import politis_white

    x = _ar1(np.random.default_rng(n + int(10 * phi)), n, phi)
    ref = optimal_block_length(x)
    for j in range(2):
        sb, cb = politis_white(x[:, j])
        assert sb == pytest.approx(ref["stationary"].iloc[j], rel=1e-8)
        assert cb == pytest.approx(ref["circular"].iloc[j], rel=1e-8)


def test_progress_bar_when_asked(capsys):
    x = np.random.default_rng(0).standard_normal((100, 2))
    block_means(x, 5, "circular", 500, np.random.default_rng(1), progress=True)
    assert "block bootstrap" in capsys.readouterr().err


# ------------------------------------------------------------------ end to end on scans


def _simulate_scans(rng, n_scans, n_turns, marks, amp, phase, noise_sd, ar, drift):
    """Invented two-arm-interferometer scans: readings at ``marks`` equally spaced table angles
    per turn, a 2θ signal, a slow quadratic drift plus per-turn offsets, and AR(1) reading
    noise that runs across turn boundaries.  Returns readings (scans, turns, marks) and θ."""
    theta = 2 * math.pi * np.arange(marks) / marks
    t = np.arange(n_turns * marks) / (n_turns * marks)
    e = noise_sd * rng.standard_normal((n_scans, n_turns * marks))
    noise = np.empty_like(e)
    noise[:, 0] = e[:, 0] / math.sqrt(1 - ar**2)
    for i in range(1, e.shape[1]):
        noise[:, i] = ar * noise[:, i - 1] + e[:, i]
    y = drift * (3 * t - 2 * t**2)[None, :] + noise
    y = y.reshape(n_scans, n_turns, marks) + rng.normal(0, drift, (n_scans, n_turns, 1))
    y += amp * np.cos(2 * (theta - phase))[None, None, :]
    return y, theta


def _demodulate(y, theta):
    """Per-turn least squares on [1, t, cos 2θ, sin 2θ] (drift removed turn by turn)."""
    marks = theta.size
    X = np.column_stack([np.ones(marks), np.arange(marks) / marks, np.cos(2 * theta), np.sin(2 * theta)])
    coef = y @ np.linalg.pinv(X).T
    return coef[..., 2:]


def test_bootstrap_end_to_end_on_simulated_scans():
    rng = np.random.default_rng(2024)
    n_scans, n_turns, marks = 120, 200, 16
    y, theta = _simulate_scans(rng, n_scans, n_turns, marks, amp=0.0, phase=0.3, noise_sd=0.05, ar=0.97,
                               drift=0.5)
    turns = _demodulate(y, theta)  # (scans, turns, 2)
    means = turns.mean(axis=1)
    sd_true = means.std(axis=0, ddof=1).mean()  # Monte Carlo σ of the mean coefficient
    # inject a signal of 5 true σ and compute the limits
    amp = 5 * sd_true
    sig = amp * np.array([math.cos(0.6), math.sin(0.6)])
    results = [amplitude_limit(*(means[i] + sig), np.eye(2), method="bootstrap", turns=turns[i] + sig, rng=i,
                               replicates=1000) for i in range(n_scans)]
    # the per-turn coefficients of AR(1) readings are correlated: the rule picks blocks > 1
    assert np.median([r.block_length for r in results]) > 1
    assert all(r.seed == i and r.replicates == 1000 and r.scheme == "circular" for i, r in enumerate(results))
    # bootstrap σ agrees with the Monte Carlo σ of the mean (block bootstrap variance is biased
    # low by O(b/N); 20 % allowed, set before running)
    sd_boot = np.mean([r.sigma for r in results])
    assert sd_boot == pytest.approx(sd_true, rel=0.2)
    # coverage of the percentile limit at A = 5σ: documented as near nominal, at worst ~0.93 with
    # few turns; it must not be significantly below 0.93 (one-sided binomial test, 1 %)
    from scipy.stats import binomtest

    k = sum(r.upper >= amp for r in results)
    assert binomtest(k, n_scans, 0.93, alternative="less").pvalue > 0.01
    # and the limit is an upper bound of the estimate itself
    assert all(r.upper > r.estimate for r in results)


def test_bare_turns_with_strong_dependence_carry_the_calibration_caveat():
    # no fit behind the series: the bootstrap's own dependence check finds few independent blocks
    x = _ar1(np.random.default_rng(12), 400, 0.95) * 0.01
    lim = amplitude_limit(*x.mean(axis=0), np.cov(x.T) / 400, method="bootstrap", turns=x, rng=1, replicates=500)
    assert any("cannot be calibrated" in n for n in lim.notes)
    assert lim.block_length > 20  # ⌈6 τ̂⌉, far above Politis–White
    white = np.random.default_rng(13).standard_normal((400, 2)) * 0.01
    lim = amplitude_limit(*white.mean(axis=0), np.cov(white.T) / 400, method="bootstrap", turns=white, rng=1,
                          replicates=500)
    assert not any("cannot be calibrated" in n for n in lim.notes)
