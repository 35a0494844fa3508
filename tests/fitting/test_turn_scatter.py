"""Turn-scatter errors from per-turn arrays: dependence-aware blocks, χ² of the scatter, refusals.

Coverage claims (fixed seeds, binomial tests):

* per-turn series with AR(1) dependence ρ = 0.95 across turns: the default errors cover at
  least 0.90 (400 turns) and 0.93 (1600 turns) at 95 % — Student-t for one coefficient and
  Hotelling's T² for (c, s) jointly;
* independent turns: still exactly nominal (the check rejects by chance in ≈ 5 % of scans, and
  batch means of independent turns are exactly calibrated).
"""

import math
import warnings

import numpy as np
import pytest
from scipy import stats

from nullfit.core.errors import AnalysisError, FitWarning
from nullfit.fitting.demodulate import demodulate
from nullfit.fitting.fit import fit_scan
from nullfit.fitting.turn_errors import turn_scatter
from nullfit.limits import limits_table, upper_limit
from nullfit.reading.scan import Scan

CL = 0.95


def ar1(rng, n, rho, size=()):
    e = rng.standard_normal((*size, n, 2))
    x = np.empty_like(e)
    x[..., 0, :] = e[..., 0, :] / math.sqrt(1 - rho**2)
    for t in range(1, n):
        x[..., t, :] = rho * x[..., t - 1, :] + e[..., t, :]
    return x


def sd_of_mean(n, rho):
    """Exact σ of the mean of a stationary unit-innovation AR(1) series of length n."""
    j = np.arange(1, n)
    return math.sqrt((n + 2 * np.sum((n - j) * rho**j)) / (1 - rho**2)) / n


def wander_scan(rng, n_turns, *, per_turn=16, rho=0.95, wander=0.01, white=0.01, c2=0.0, s2=0.0):
    """A scan whose 2θ coefficients wander from turn to turn as AR(1) (ρ per turn), plus white
    reading noise and a linear drift."""
    n = n_turns * per_turn
    t = np.arange(n) * 0.5
    ang = np.arange(n) * 360.0 / per_turn
    th = np.deg2rad(ang)
    w = np.repeat(ar1(rng, n_turns, rho) * wander, per_turn, axis=0)
    y = (white * rng.standard_normal(n) + (c2 + w[:, 0]) * np.cos(2 * th) + (s2 + w[:, 1]) * np.sin(2 * th)
         + 1e-4 * t)
    return Scan.from_arrays(t, np.mod(ang, 360.0), y)


# ------------------------------------------------------------------ the array interface
def test_turn_scatter_from_the_per_turn_table_reproduces_the_fit():
    rng = np.random.default_rng(1)
    for rho in (0.0, 0.95):
        scan = wander_scan(rng, 200, rho=rho)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FitWarning)
            f = fit_scan(scan)
        df = demodulate(scan)
        cols = ["c1", "s1", "c2", "s2"]
        ts = turn_scatter(df[cols].to_numpy(), turn=df["turn"].to_numpy(), names=cols)
        np.testing.assert_allclose(ts.coef, f.coef, rtol=1e-12)
        np.testing.assert_allclose(ts.cov, f.cov, rtol=1e-10)
        assert ts.dof == f.dof and ts.block_turns == f.block_turns
        assert ts.dependence.to_dict() == f.dependence.to_dict()
        assert (f.block_turns > 1) == (rho > 0)


def test_block_covariance_is_the_scatter_of_block_means():
    rng = np.random.default_rng(2)
    x = ar1(rng, 500, 0.9)
    ts = turn_scatter(x)
    assert ts.dependence.action == "widened" and ts.block_turns > 1
    edges = (np.arange(ts.n_blocks + 1) * 500) // ts.n_blocks
    means = np.array([x[a:b].mean(axis=0) for a, b in zip(edges[:-1], edges[1:])])
    w = np.diff(edges) / 500  # blocks of near-equal length: weighted scatter about the mean
    dev = (means - x.mean(axis=0)) * w[:, None]
    ref = ts.n_blocks / (ts.n_blocks - 1) * dev.T @ dev
    np.testing.assert_allclose(ts.cov, ref, rtol=1e-12)
    assert ts.dof == ts.n_blocks - 1


def test_fewer_than_three_turns_or_blocks_are_refused():
    rng = np.random.default_rng(3)
    scan = wander_scan(rng, 2, rho=0.0)
    with pytest.raises(AnalysisError, match=r"2 usable turn\(s\).*at least 3 turns.*errors='hac' or errors='ols'"):
        fit_scan(scan)
    fit_scan(scan, errors="ols")  # the alternatives named in the message do run
    with pytest.raises(AnalysisError, match="at least 3 blocks"):
        fit_scan(wander_scan(rng, 8, rho=0.0), errors="blocks:4")
    with pytest.raises(AnalysisError, match="at least 3 turns"):
        turn_scatter(np.zeros((2, 2)))
    with pytest.raises(ValueError, match="non-finite"):
        turn_scatter(np.array([[0.0, 1.0], [np.nan, 1.0], [1.0, 2.0]]))


def test_dependence_warn_keeps_the_turn_scatter_and_flags_every_limit():
    rng = np.random.default_rng(4)
    scan = wander_scan(rng, 400)
    with pytest.warns(FitWarning, match="TURN-TO-TURN DEPENDENCE"):
        f = fit_scan(scan, dependence="warn")
    assert f.block_turns == 1 and f.dof == 399 and f.dependence.action == "warned"
    lim = upper_limit(f)
    assert any("cannot be calibrated" in n for n in lim.notes)
    with pytest.raises(ValueError, match="dependence must be"):
        fit_scan(scan, dependence="ignore")


def test_dependent_scan_is_widened_and_every_limit_says_it_cannot_be_calibrated():
    rng = np.random.default_rng(5)
    scan = wander_scan(rng, 400)
    with pytest.warns(FitWarning, match="turn-to-turn dependence detected"):
        f = fit_scan(scan)
    dep = f.dependence
    assert dep.action == "widened" and f.block_turns == dep.block_turns > 1 and f.dof == dep.n_blocks - 1
    assert dep.n_independent < 10 and not dep.calibrated
    assert "widened" in f.summary().as_text() and f.to_dict()["dependence"]["detected"]
    table = limits_table(f.harmonic(2), rng=1, options={"bootstrap": {"replicates": 500}})
    assert len(table) == 4
    for lim in table.attrs["limits"].values():
        assert any("cannot be calibrated" in n for n in lim.notes), lim.method
    # the bootstrap resamples blocks at least as long as the fit's
    assert table.attrs["limits"]["bootstrap"].block_length >= f.block_turns


def test_joint_fit_reports_dependence_it_does_not_follow():
    rng = np.random.default_rng(6)
    scan = wander_scan(rng, 200)
    with pytest.warns(FitWarning, match="does not cover that; use errors='turns'"):
        f = fit_scan(scan, errors="hac")
    assert f.dependence.action == "ignored" and f.caveats
    indep = fit_scan(wander_scan(rng, 200, rho=0.0, wander=0.0), errors="ols")
    assert indep.dependence.checked and indep.dependence.action in ("none", "ignored")


# ------------------------------------------------------------------ χ² of the scatter
def _loop_chi2(scan, harmonics=(1, 2)):
    """Independent reference: per-turn numpy lstsq, weighted mean, pooled white noise."""
    rows = []
    for tr in np.unique(scan.turn):
        m = scan.turn == tr
        t, a, y = scan.time[m], scan.angle[m], scan.signal[m]
        X = np.column_stack([np.ones(m.sum()), t - 0.5 * (t[0] + t[-1])]
                            + [f(k * a) for k in harmonics for f in (np.cos, np.sin)])
        b, *_ = np.linalg.lstsq(X, y, rcond=None)
        r = y - X @ b
        Xh, Xd = X[:, 2:], X[:, :2]
        W = Xh.T @ Xh - Xh.T @ Xd @ np.linalg.solve(Xd.T @ Xd, Xd.T @ Xh)
        rows.append((b[2:], W, r @ r, m.sum() - X.shape[1]))
    bw = np.linalg.solve(sum(w for _, w, _, _ in rows), sum(w @ b for b, w, _, _ in rows))
    Q = sum((b - bw) @ w @ (b - bw) for b, w, _, _ in rows)
    nu = sum(d for *_, d in rows)
    return Q / (sum(r for _, _, r, _ in rows) / (nu - 2)), 2 * len(harmonics) * (len(rows) - 1)


def test_chi2_matches_a_per_turn_loop():
    rng = np.random.default_rng(7)
    scan = wander_scan(rng, 15, per_turn=20, rho=0.3)
    f = fit_scan(scan)
    chi2, n = _loop_chi2(scan)
    assert f.chi2 == pytest.approx(chi2, rel=1e-9) and f.chi2_dof_n == n


def test_chi2_from_the_kernel_weights_equals_the_chi2_from_inverted_covariances():
    from nullfit.fitting.engine import TurnEngine

    scan = wander_scan(np.random.default_rng(11), 40, per_turn=24, rho=0.2)
    eng = TurnEngine(scan, (1, 2), degree=1, min_samples=7)
    pt = eng.demodulate()
    kw = dict(rss=pt.rss, resid_dof=eng.seg.length - 6, names=["c1", "s1", "c2", "s2"])
    with_w = turn_scatter(pt.harm, pt.cov, weight=pt.weight, **kw)
    inverted = turn_scatter(pt.harm, pt.cov, **kw)  # W_i = σ̂_i² C_i⁻¹ by stacked inverses
    assert with_w.chi2 == pytest.approx(inverted.chi2, rel=1e-10)
    assert (with_w.chi2_n, with_w.resid_dof) == (inverted.chi2_n, inverted.resid_dof)


@pytest.mark.parametrize("per_turn", [8, 16, 72])
def test_chi2_dof_is_one_for_white_noise_at_any_readings_per_turn(per_turn):
    # Claim (turn_errors.scatter_chi2): mean exactly 1; χ²/n · ν/(ν−2) ~ F(n, ν) (scipy.stats.f).
    rng = np.random.default_rng(100 + per_turn)
    vals, pvals = [], []
    for _ in range(150):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FitWarning)
            f = fit_scan(wander_scan(rng, 12, per_turn=per_turn, rho=0.0, wander=0.0), dependence="warn")
        vals.append(f.chi2_dof)
        pvals.append(f.chi2_p)
    vals = np.array(vals)
    assert stats.ttest_1samp(vals, 1.0).pvalue > 1e-3, vals.mean()
    assert stats.kstest(pvals, "uniform").pvalue > 1e-3


def test_chi2_exceeds_one_when_turns_wander():
    f = fit_scan(wander_scan(np.random.default_rng(8), 100), dependence="warn")
    assert f.chi2_dof > 3 and f.chi2_p < 1e-6
    assert "1 = within-turn white noise" in f.summary().as_text()
    assert "pooled within-turn white-noise" in f.to_dict()["chi2_reference"]


# ------------------------------------------------------------------ coverage of the default errors
def coverage(n_sims, n_turns, rho, seed, white=0.0):
    """Default errors (turn_scatter, dependence-aware) on simulated per-turn series with truth 0:
    hits of the Student-t interval of c and of the Hotelling T² region of (c, s)."""
    rng = np.random.default_rng(seed)
    x = ar1(rng, n_turns, rho, (n_sims,)) + white * rng.standard_normal((n_sims, n_turns, 2))
    t_hits = h_hits = 0
    dofs = []
    for i in range(n_sims):
        ts = turn_scatter(x[i])
        m, cov, dof = ts.coef, ts.cov, ts.dof
        t_hits += abs(m[0]) / math.sqrt(cov[0, 0]) < stats.t.ppf(0.5 + CL / 2, dof)
        t2 = m @ np.linalg.solve(cov, m)
        h_hits += stats.f.cdf(t2 * (dof - 1) / (2 * dof), 2, dof - 1) < CL
        dofs.append(dof)
    return int(t_hits), int(h_hits), np.array(dofs)


def _not_below(k, n, p):
    return stats.binomtest(int(k), n, p, alternative="less").pvalue > 0.01


def _exact(k, n, p=CL):
    return stats.binomtest(int(k), n, p).pvalue > 0.01


def test_dependent_turns_cover_fast():
    n = 400
    t_hits, h_hits, dofs = coverage(n, 400, 0.95, 11)
    assert _not_below(t_hits, n, 0.90) and _not_below(h_hits, n, 0.90), (t_hits / n, h_hits / n)
    assert np.all(dofs < 9)  # fewer than 10 blocks: too few to calibrate, and the caveat says so


def test_independent_turns_stay_calibrated_fast():
    n = 1000
    t_hits, h_hits, dofs = coverage(n, 100, 0.0, 12)
    assert _exact(t_hits, n) and _exact(h_hits, n), (t_hits / n, h_hits / n)
    assert np.mean(dofs == 99) > 0.9  # the turn scatter is kept unless the test rejects by chance


@pytest.mark.slow
@pytest.mark.parametrize("n_turns,target", [(400, 0.90), (1600, 0.93)])
def test_dependent_turns_cover_full(n_turns, target):
    n = 4000
    t_hits, h_hits, _ = coverage(n, n_turns, 0.95, 20 + n_turns)
    assert _not_below(t_hits, n, target) and _not_below(h_hits, n, target), (t_hits / n, h_hits / n)


@pytest.mark.slow
@pytest.mark.parametrize("n_turns", [24, 100, 400])
def test_independent_turns_stay_calibrated_full(n_turns):
    n = 4000
    t_hits, h_hits, _ = coverage(n, n_turns, 0.0, 30 + n_turns)
    assert _exact(t_hits, n) and _exact(h_hits, n), (t_hits / n, h_hits / n)


@pytest.mark.slow
def test_scans_with_wandering_turns_cover_end_to_end():
    # whole scans (400 turns × 16 readings): 2θ coefficients wander as AR(1) 0.95 plus white
    # reading noise; the Hotelling region of the fitted (c2, s2) covers at least 0.90.
    rng = np.random.default_rng(40)
    n, hits = 600, 0
    for _ in range(n):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", FitWarning)
            h = fit_scan(wander_scan(rng, 400, c2=0.003, s2=-0.002)).harmonic(2)
        d = np.array([h.c - 0.003, h.s + 0.002])
        t2 = d @ np.linalg.solve(h.cov, d)
        hits += stats.f.cdf(t2 * (h.dof - 1) / (2 * h.dof), 2, h.dof - 1) < CL
    assert _not_below(hits, n, 0.90), hits / n
