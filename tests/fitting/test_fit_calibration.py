"""Calibration of the error models on simulated scans with known truth.

Each scan: 2θ (and 1θ) signal + a linear trend + a random walk + AR(1) noise + white noise,
simulated here with plain numpy/scipy (independent of ``nullfit.simulation.scans``).  The random walk
and the AR(1) noise make the residuals correlated within a turn, which is what real scans do.

Claims tested (fixed seeds; χ² and binomial tests at the 10⁻³ level):

* ``errors="turns"``: the pulls (ĉ₂ − c₂)/σ follow Student-t with ``dof = N − 1``
  degrees of freedom; mapped through the t CDF to normal scores their mean square is 1
  (χ²_R test), and the Hotelling T² region for (c₂, s₂) covers the truth at its nominal rate.
* ``errors="ols"`` on the *same* scans under-covers: its pulls are far wider than 1.  The
  white-noise formula uses the residual variance, but correlated noise has more power at 2θ
  than its average — a lesson for the docs: never quote OLS errors for a real scan.
* With few turns (N = 6) the covariance from the scatter has 5 dof: Student-t intervals cover,
  normal (1.96 σ) intervals under-cover.
"""

import functools
import math
import warnings

import numpy as np
import pytest
from scipy import stats
from scipy.signal import lfilter

from nullfit.fitting.design import FitWarning
from nullfit.fitting.fit import fit_scan
from nullfit.reading.scan import Scan

C2, S2 = 0.02, -0.01
M = 64  # readings per turn


def simulate(rng, n_turns, *, white=0.01, walk=0.002, phi=0.5, sigma_ar=0.01):
    n = n_turns * M
    t = np.arange(n) * 0.5
    ang = np.arange(n) * 360.0 / M
    th = np.deg2rad(ang)
    ar = lfilter([sigma_ar * math.sqrt(1 - phi ** 2)], [1.0, -phi], rng.normal(size=n),
                 zi=[phi * sigma_ar * rng.normal()])[0]
    y = (1e-4 * t + np.cumsum(walk * rng.normal(size=n)) + ar + white * rng.normal(size=n)
         + C2 * np.cos(2 * th) + S2 * np.sin(2 * th) + 0.01 * np.cos(th))
    return Scan.from_arrays(t, np.mod(ang, 360.0), y)


@functools.lru_cache(maxsize=None)
def study(n_scans, n_turns, seed, errors=("turns", "ols")):
    """Fit the same simulated scans with each error model; returns pulls and joint statistics."""
    rng = np.random.default_rng(seed)
    out = {e: {"pc": [], "ps": [], "t2": [], "dof": None} for e in errors}
    for _ in range(n_scans):
        scan = simulate(rng, n_turns)
        for e in errors:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", FitWarning)
                h = fit_scan(scan, errors=e).harmonic(2)
            d = np.array([h.c - C2, h.s - S2])
            out[e]["pc"].append(d[0] / h.sigma_c)
            out[e]["ps"].append(d[1] / h.sigma_s)
            out[e]["t2"].append(d @ np.linalg.solve(h.cov, d))
            out[e]["dof"] = h.dof
    return {e: {k: (np.array(v) if isinstance(v, list) else v) for k, v in d.items()} for e, d in out.items()}


def normal_scores(pulls, dof):
    """Map Student-t(dof) pulls to N(0, 1) scores (identity when dof is None)."""
    return pulls if dof is None else stats.norm.ppf(stats.t.cdf(pulls, dof))


def chi2_two_sided(z):
    chi = float(np.sum(z ** 2))
    return 2 * min(stats.chi2.cdf(chi, z.size), stats.chi2.sf(chi, z.size)), chi / z.size


def hotelling_covered(t2, dof, confidence_level=0.95):
    """T²·(ν−1)/(2ν) ~ F(2, ν−1) for a mean of ν+1 bivariate normal vectors (Hotelling)."""
    return stats.f.cdf(t2 * (dof - 1) / (2 * dof), 2, dof - 1) < confidence_level


def check_turns_calibrated(res):
    tr = res["turns"]
    for key in ("pc", "ps"):
        p, ms = chi2_two_sided(normal_scores(tr[key], tr["dof"]))
        assert p > 1e-3, f"{key}: mean square of normal scores {ms:.3f}"
    covered = int(hotelling_covered(tr["t2"], tr["dof"]).sum())
    n = tr["t2"].size
    assert stats.binomtest(covered, n, 0.95).pvalue > 1e-3, covered / n


def check_ols_under_covers(res):
    ols = res["ols"]
    z = ols["pc"]
    chi = float(np.sum(z ** 2))
    assert stats.chi2.sf(chi, z.size) < 1e-6, chi / z.size  # pulls wider than unit spread
    assert chi / z.size > 1.5
    covered = int((np.abs(z) < stats.norm.ppf(0.975)).sum())
    assert covered / z.size < 0.9
    assert stats.binomtest(covered, z.size, 0.95, alternative="less").pvalue < 1e-6


# ------------------------------------------------------------------ default run (fast)
def test_turn_errors_calibrated_fast():
    check_turns_calibrated(study(500, 24, 1))


def test_ols_errors_under_cover_on_the_same_scans_fast():
    check_ols_under_covers(study(500, 24, 1))


def test_few_turns_need_student_t_fast():
    res = study(400, 6, 2, errors=("turns",))["turns"]
    assert res["dof"] == 5
    z = res["pc"]
    cov_t = int((np.abs(z) < stats.t.ppf(0.975, 5)).sum())
    cov_n = int((np.abs(z) < stats.norm.ppf(0.975)).sum())
    assert stats.binomtest(cov_t, z.size, 0.95).pvalue > 1e-3, cov_t / z.size
    # treating a 5-dof covariance as exact: expected coverage P(|t₅| < 1.96) = 0.893
    assert stats.binomtest(cov_n, z.size, 0.95, alternative="less").pvalue < 1e-3, cov_n / z.size


# ------------------------------------------------------------------ full studies (slow)
@pytest.mark.slow
def test_turn_errors_calibrated_and_ols_under_covers_full():
    res = study(2000, 24, 11, errors=("turns", "ols", "hac", "blocks:4"))
    check_turns_calibrated(res)
    check_ols_under_covers(res)
    # blocks of 4 turns: 6 blocks, 5 dof, still calibrated with Student-t scaling
    blk = res["blocks:4"]
    assert blk["dof"] == 5
    p, ms = chi2_two_sided(normal_scores(blk["pc"], blk["dof"]))
    assert p > 1e-3, ms
    # HAC with the automatic lag (7 readings here, against 64 per turn) cannot see the
    # correlation the random walk leaves inside a turn: it under-covers as well.
    hac = res["hac"]["pc"]
    assert stats.chi2.sf(float(np.sum(hac ** 2)), hac.size) < 1e-6


@pytest.mark.slow
def test_few_turns_need_student_t_full():
    for n_turns in (5, 10, 20):
        res = study(2000, n_turns, 100 + n_turns, errors=("turns",))["turns"]
        assert res["dof"] == n_turns - 1
        p, ms = chi2_two_sided(normal_scores(res["pc"], res["dof"]))
        assert p > 1e-3, (n_turns, ms)
        covered = int(hotelling_covered(res["t2"], res["dof"]).sum())
        assert stats.binomtest(covered, res["t2"].size, 0.95).pvalue > 1e-3, (n_turns, covered)


# ------------------------------------------------------------------ aux regressor with turn errors
def aux_study(n_scans, seed, n_turns=12, per_turn=32):
    """A tilt-like aux column that follows the table (a 2θ component) plus a slow wander; the
    signal responds to it.  Its fitted coefficient is uncertain and that uncertainty moves ĉ₂:
    the turn-error covariance must carry it (influence of each turn on the aux coefficient)."""
    rng = np.random.default_rng(seed)
    n = n_turns * per_turn
    t = np.arange(n) * 0.5
    ang = np.arange(n) * 360.0 / per_turn
    th = np.deg2rad(ang)
    ours, naive, dof = [], [], None
    for _ in range(n_scans):
        tilt = np.cos(2 * th + 0.3) + 0.005 * np.cumsum(rng.normal(size=n)) + 0.05 * rng.normal(size=n)
        y = C2 * np.cos(2 * th) + 0.5 * tilt + 0.01 * rng.normal(size=n) + 1e-4 * t
        f = fit_scan(Scan.from_arrays(t, np.mod(ang, 360.0), y, aux={"tilt": tilt}), aux="tilt")
        h = f.harmonic(2)
        dof = h.dof
        ours.append((h.c - C2) / h.sigma_c)
        c2_turns = f.per_turn["c2"].to_numpy()
        naive.append((h.c - C2) / math.sqrt(c2_turns.var(ddof=1) / c2_turns.size))
    return normal_scores(np.array(ours), dof), normal_scores(np.array(naive), dof)


def check_aux(ours, naive):
    p, ms = chi2_two_sided(ours)
    assert p > 1e-3, ms
    # the scatter of the aux-corrected per-turn coefficients alone misses the aux uncertainty
    assert stats.chi2.sf(float(np.sum(naive ** 2)), naive.size) < 1e-6


def test_aux_uncertainty_propagates_into_turn_errors_fast():
    check_aux(*aux_study(400, 31))


@pytest.mark.slow
def test_aux_uncertainty_propagates_into_turn_errors_full():
    check_aux(*aux_study(3000, 32))
