"""`fit_scan`: point estimates and covariances against independent references.

References: statsmodels ``OLS`` on dense designs built here with plain numpy/scipy (raw time
powers instead of Legendre polynomials, explicit per-turn dummy columns, B-splines evaluated
coefficient by coefficient), ``numpy.linalg.lstsq`` per turn, and closed-form variances derived
in the docstrings.
"""

import json
import math
import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from nullfit.core.conventions import amplitude_phase
from nullfit.fitting.design import FitWarning
from nullfit.fitting.estimate import HarmonicEstimate
from nullfit.fitting.fit import ScanFit, fit_scan
from nullfit.core.errors import AnalysisError
from nullfit.reading.scan import Scan

DRIFTS = ["per-turn", "per-turn:0", "poly:3", "spline:2", "none"]


@pytest.mark.parametrize("drift", DRIFTS)
@pytest.mark.parametrize("aux", [False, True])
def test_ols_matches_statsmodels_dense(make_scan, reference_design, drift, aux):
    scan = make_scan(1, tilt_coef=0.02)
    f = fit_scan(scan, drift=drift, errors="ols", aux=["tilt"] if aux else None)
    X, y, k0 = reference_design(scan, drift, aux)
    r = sm.OLS(y, X).fit()
    np.testing.assert_allclose(f.coef, r.params[k0:k0 + 4], rtol=1e-8)
    np.testing.assert_allclose(np.sqrt(np.diag(f.cov)), r.bse[k0:k0 + 4], rtol=1e-8)
    ref = r.cov_params()[k0:k0 + 4, k0:k0 + 4]
    # entries that are zero in exact arithmetic (a balanced design) come out as rounding, ~1e-16 of
    # the diagonal, with a sign that depends on the CPU: compare at 1e-8 of the matrix's scale, as
    # test_fit_hac does (an absolute 1e-20 passed on one machine and failed on another)
    np.testing.assert_allclose(f.cov, ref, rtol=1e-8, atol=1e-8 * np.abs(ref).max())
    if aux:
        assert f.aux_coef[0] == pytest.approx(r.params[-1], rel=1e-8)
        assert math.sqrt(f.aux_cov[0, 0]) == pytest.approx(r.bse[-1], rel=1e-8)
    assert f.n_samples == y.size
    assert f.settings["n_params"] == X.shape[1]
    # residuals on the fitted rows are statsmodels' residuals; NaN elsewhere
    keep = scan.turn_complete[scan.turn]
    np.testing.assert_allclose(f.residuals[keep], r.resid, rtol=0, atol=1e-10)
    assert np.isnan(f.residuals[~keep]).all()


def test_turn_errors_are_mean_and_scatter_of_per_turn_fits(make_scan, loop_reference):
    scan = make_scan(2)
    f = fit_scan(scan)  # default: per-turn drift, turn errors
    b = np.column_stack([loop_reference(scan)[k] for k in ('c1', 's1', 'c2', 's2')])
    N = b.shape[0]
    np.testing.assert_allclose(f.coef, b.mean(axis=0), rtol=1e-10)
    np.testing.assert_allclose(f.cov, np.cov(b, rowvar=False) / N, rtol=1e-8)
    assert f.dof == N - 1 and f.n_turns == N
    assert f.per_turn is not None and len(f.per_turn) == N
    assert f.residuals is None
    assert "N − 1" not in f.errors_description and f"{N - 1} dof" in f.errors_description


def test_turn_errors_with_aux_match_dense_per_turn_harmonic_regression(make_scan):
    """With an aux regressor, the per-turn coefficients are those of one regression with
    per-turn drift, per-turn harmonics and a single aux coefficient (statsmodels)."""
    scan = make_scan(3, tilt_coef=0.03)
    f = fit_scan(scan, aux="tilt")
    keep = scan.turn_complete[scan.turn]
    t, th, turn, y = scan.time[keep], scan.angle[keep], scan.turn[keep], scan.signal[keep]
    cols = []
    turns = np.unique(turn)
    for tr in turns:
        m = turn == tr
        cols += [np.where(m, 1.0, 0.0), np.where(m, t - t[m].mean(), 0.0)]
    for tr in turns:
        m = turn == tr
        for k in (1, 2):
            cols += [np.where(m, np.cos(k * th), 0.0), np.where(m, np.sin(k * th), 0.0)]
    cols.append(scan.aux["tilt"][keep])
    r = sm.OLS(y, np.column_stack(cols)).fit()
    per_turn = r.params[2 * turns.size:-1].reshape(turns.size, 4)
    assert f.aux_coef[0] == pytest.approx(r.params[-1], rel=1e-9)
    np.testing.assert_allclose(f.per_turn[["c1", "s1", "c2", "s2"]].to_numpy(), per_turn, rtol=1e-8)
    np.testing.assert_allclose(f.coef, per_turn.mean(axis=0), rtol=1e-9)


def test_block_errors(make_scan, loop_reference):
    scan = make_scan(4, n_turns=13)
    f1 = fit_scan(scan, errors="turns")
    b1 = fit_scan(scan, errors="blocks", block_turns=1)
    np.testing.assert_allclose(b1.cov, f1.cov, rtol=1e-12)
    np.testing.assert_allclose(b1.coef, f1.coef, rtol=1e-12)
    b = np.column_stack([loop_reference(scan)[k] for k in ('c1', 's1', 'c2', 's2')])  # 12 complete turns
    with pytest.warns(FitWarning, match="only 4 blocks"):
        f3 = fit_scan(scan, errors="blocks:3")
    means = b.reshape(4, 3, 4).mean(axis=1)
    np.testing.assert_allclose(f3.coef, b.mean(axis=0), rtol=1e-10)
    np.testing.assert_allclose(f3.cov, np.cov(means, rowvar=False) / 4, rtol=1e-8)
    assert f3.dof == 3 and f3.block_turns == 3
    with pytest.raises(ValueError, match="block_turns"):
        fit_scan(scan, errors="blocks")


@pytest.mark.parametrize("drift,errors", [("per-turn", "turns"), ("per-turn", "hac"), ("poly:3", "hac"),
                                          ("spline:2", "ols"), ("none", "ols"), ("per-turn", "blocks:2")])
def test_invariance_to_epoch_full_turn_and_offset(make_arrays, drift, errors):
    """Same coefficients (rtol 1e-9) after t → t + 1.8e9 s, θ → θ + 360°, y → y + 1e6.

    Times are multiples of 0.5 s so that 1.8e9 + t is exact in float64 (ulp(1.8e9 s) =
    2.4e-7 s); y + 1e6 is rounded to ulp(1e6) = 1.2e-10, which moves a covariance estimated
    from a scatter of ~1e-3 by ~1e-8 relative, hence the looser tolerance on the covariance.
    """
    t, ang, y, tilt = make_arrays(np.random.default_rng(5))
    s2 = Scan.from_arrays(t + 1.8e9, ang + 360.0, y + 1e6)
    assert s2.epoch_unix == 1.8e9
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)  # blocks:2 → 6 blocks: "few blocks" warning
        a = fit_scan(Scan.from_arrays(t, ang, y), drift=drift, errors=errors)
        b = fit_scan(s2, drift=drift, errors=errors)
    np.testing.assert_allclose(b.coef, a.coef, rtol=1e-9)
    np.testing.assert_allclose(b.cov, a.cov, rtol=1e-6, atol=1e-9 * np.abs(a.cov).max())


def test_white_noise_sigma_c2_closed_form():
    """σ(ĉ₂) = σ_y·sqrt(2/N) for white noise over whole turns.

    Derivation: with N readings at angles spread uniformly over whole turns (M readings per
    turn, M > 4), the columns 1, cos θ, sin θ, cos 2θ, sin 2θ are orthogonal, because
    Σ_j cos(mθ_j) = Σ_j sin(mθ_j) = 0 for every 0 < m < M (roots of unity) and the products
    reduce to such sums (cos²2θ = (1 + cos 4θ)/2, …).  So XᵀX = diag(N, N/2, N/2, N/2, N/2)
    and Var ĉ₂ = σ_y² [(XᵀX)⁻¹]_{c₂c₂} = σ_y²/(N/2), i.e. σ(ĉ₂) = σ_y sqrt(2/N).

    Check 1 (exact algebra): with drift "none" and OLS errors the reported σ(ĉ₂) equals
    σ̂_y sqrt(2/N) with σ̂_y² = RSS/(N − 5).
    """
    M, T = 32, 10
    rng = np.random.default_rng(6)
    ang = np.arange(M * T) * 360.0 / M
    y = 0.1 * np.cos(np.deg2rad(2 * ang)) + rng.normal(0, 0.01, M * T)
    f = fit_scan(Scan.from_arrays(np.arange(M * T) * 1.0, ang, y), drift="none", errors="ols")
    N = M * T
    sig_y = math.sqrt(np.nansum(f.residuals ** 2) / (N - 5))
    assert f.harmonic(2).sigma_c == pytest.approx(sig_y * math.sqrt(2 / N), rel=1e-12)
    assert f.harmonic(2).sigma_s == pytest.approx(sig_y * math.sqrt(2 / N), rel=1e-12)


def test_white_noise_sigma_by_simulation_with_turn_errors():
    """Check 2 (simulation): default fit (per-turn offset + slope, turn errors).

    Per turn, the slope column τ is orthogonal to 1 and nearly orthogonal to cos kθ, but it is
    a sawtooth whose Fourier series θ − π = −2 Σ sin(kθ)/k correlates it with sin kθ.  For
    M equally spaced readings per turn (θ_j = 2πj/M) the squared correlations are
    R²(cos kθ) = 6/(M² − 1) and R²(sin kθ) = 6 cot²(πk/M)/(M² − 1) (→ 6/(π²k²)).  Projecting τ
    out of the orthogonal harmonic block (M/2)·I gives the covariance
    (2σ²/M)[I + v vᵀ/(1 − Σ R²)] with v_j = ±R_j, so

        Var ĉ₂ = (2σ²/N)(1 + R²_c2/(1 − ΣR²)) ≈ (2σ²/N)(1.006)       (M = 64)
        Var ŝ₂ = (2σ²/N)(1 + R²_s2/(1 − ΣR²)) ≈ (2σ²/N)(1.63)

    — the per-turn slope costs 28 % in σ(ŝ₂) when 1θ is fitted too.  Both the scatter of the
    estimates over simulated scans and the mean reported variance must agree (χ² tests).
    """
    M, T, R, sig = 64, 12, 400, 0.01
    N = M * T
    rng = np.random.default_rng(7)
    r2 = {"c1": 6 / (M ** 2 - 1), "c2": 6 / (M ** 2 - 1),
          "s1": 6 / math.tan(math.pi / M) ** 2 / (M ** 2 - 1), "s2": 6 / math.tan(2 * math.pi / M) ** 2 / (M ** 2 - 1)}
    tot = sum(r2.values())
    var_c2 = 2 * sig ** 2 / N * (1 + r2["c2"] / (1 - tot))
    var_s2 = 2 * sig ** 2 / N * (1 + r2["s2"] / (1 - tot))
    assert 1 + r2["s2"] / (1 - tot) == pytest.approx(1.63, abs=0.01)
    ang = np.arange(N) * 360.0 / M
    t = np.arange(N) * 0.5
    base = 0.2 * np.cos(np.deg2rad(2 * ang)) + 1e-3 * t
    est, rep = [], []
    for _ in range(R):
        f = fit_scan(Scan.from_arrays(t, ang, base + rng.normal(0, sig, N)))
        h = f.harmonic(2)
        est.append((h.c, h.s))
        rep.append(np.diag(h.cov))
    est, rep = np.array(est), np.array(rep)
    for j, v in enumerate((var_c2, var_s2)):
        # scatter of the estimates: (R−1) s²/v ~ χ²_{R−1}
        chi = (R - 1) * est[:, j].var(ddof=1) / v
        p = 2 * min(stats.chi2.cdf(chi, R - 1), stats.chi2.sf(chi, R - 1))
        assert p > 1e-3, (j, chi / (R - 1))
        # reported variances: each is v·χ²_ν/ν with ν = T − 1, so R·ν·mean/v ~ χ²_{Rν}
        nu = T - 1
        chi = R * nu * rep[:, j].mean() / v
        p = 2 * min(stats.chi2.cdf(chi, R * nu), stats.chi2.sf(chi, R * nu))
        assert p > 1e-3, (j, chi / (R * nu))
    # the closed form in its simplest guise: σ(ĉ₂) ≈ σ_y sqrt(2/N)
    assert math.sqrt(var_c2) == pytest.approx(sig * math.sqrt(2 / N), rel=0.005)


def test_refusals(make_scan):
    scan = make_scan(8)
    with pytest.raises(ValueError, match="per-turn"):
        fit_scan(scan, drift="poly:3", errors="turns")
    with pytest.raises(ValueError, match="errors must be"):
        fit_scan(scan, errors="bootstrap")
    with pytest.raises(ValueError, match="not in the scan"):
        fit_scan(scan, aux="temperature")
    with pytest.raises(ValueError, match="hac_lags"):
        fit_scan(scan, errors="hac", hac_lags=-1)
    # 6 marks per turn: 3θ is not identified
    M, T = 6, 8
    ang = np.arange(M * T + 1) * 360.0 / M
    s = Scan.from_arrays(np.arange(ang.size) * 1.0, np.mod(ang, 360), np.cos(np.deg2rad(2 * ang))
                         + 0.01 * np.random.default_rng(0).normal(size=ang.size))
    fit_scan(s, harmonics=(1, 2), drift="poly:2", errors="ols")
    with pytest.raises(AnalysisError, match="6 marks"):
        fit_scan(s, harmonics=(2, 3), drift="poly:2", errors="ols")
    # 6 readings per turn cannot carry offset + slope + 4 harmonic terms with any dof left
    with pytest.raises(AnalysisError, match="fewer than 7 readings"):
        fit_scan(s, harmonics=(1, 2))


def test_warnings_few_turns_knots_and_collinearity(make_scan):
    few = make_scan(9, n_turns=6)
    with pytest.warns(FitWarning, match="only 5 turns"):
        f = fit_scan(few)
    assert any("5 turns" in n for n in f.notes)
    scan = make_scan(10, n_turns=12)
    with pytest.warns(FitWarning, match="absorb"):
        fit_scan(scan, drift="spline:0.5", errors="ols")
    # an aux column that is almost cos 2θ: the harmonic column is nearly absorbed
    s = Scan.from_arrays(scan.time, scan.angle_deg, scan.signal,
                         aux={"x": np.cos(2 * scan.angle) + 1e-4 * np.random.default_rng(0).normal(size=scan.n_samples)})
    with pytest.warns(FitWarning) as rec:
        g = fit_scan(s, drift="poly:3", errors="ols", aux="x")
    assert any("VIF" in str(w.message) for w in rec)
    assert g.variance_inflation["c2"] > 1e3


def test_partial_turns_excluded_and_counted(make_scan):
    scan = make_scan(11, extra=29)
    f = fit_scan(scan)
    n_partial = int((~scan.turn_complete[scan.turn]).sum())
    assert n_partial > 0
    assert f.excluded_rows == n_partial and f.excluded_turns == 2
    assert f.n_samples == scan.n_samples - n_partial
    assert f.dropped_rows == scan.dropped_rows + n_partial
    assert any("partial turns" in n for n in f.notes)
    g = fit_scan(scan, errors="ols", complete_only=False)
    assert g.n_samples == scan.n_samples and g.excluded_rows == 0


def test_dropped_rows_from_reading_are_reported_separately(make_arrays):
    t, ang, y, _ = make_arrays(np.random.default_rng(12))
    y[[50, 51, 200]] = np.nan
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scan = Scan.from_arrays(t, ang, y)
    f = fit_scan(scan)
    assert f.scan_dropped_rows == 3
    assert f.dropped_rows == 3 + f.excluded_rows
    assert f.to_dict()["dropped_rows"] == f.dropped_rows


def test_harmonic_object_follows_conventions(make_scan):
    f = fit_scan(make_scan(13))
    h = f.harmonic(2)
    assert isinstance(h, HarmonicEstimate)
    assert (h.amplitude, h.phase_deg) == amplitude_phase(h.c, h.s, 2)
    assert h.peak_to_peak == pytest.approx(2 * h.amplitude)
    assert 0 <= h.phase_deg < 180
    # delta-method σ of the amplitude against a numerical gradient
    eps = 1e-7
    g = np.array([(math.hypot(h.c + eps, h.s) - math.hypot(h.c - eps, h.s)) / (2 * eps),
                  (math.hypot(h.c, h.s + eps) - math.hypot(h.c, h.s - eps)) / (2 * eps)])
    assert h.sigma_amplitude == pytest.approx(math.sqrt(g @ h.cov @ g), rel=1e-6)
    # Student-t interval with dof degrees of freedom
    lo, hi = h.interval("c", confidence_level=0.9)
    assert (hi - lo) / 2 == pytest.approx(stats.t.ppf(0.95, f.dof) * h.sigma_c, rel=1e-12)
    with pytest.raises(KeyError):
        f.harmonic(3)
    with pytest.raises(ValueError):
        h.interval("c", confidence_level=95)


def test_hotelling_p_value_matches_f_distribution():
    """(ν−1)/(2ν)·T² ~ F(2, ν−1) for the mean of ν+1 bivariate normal vectors (Hotelling)."""
    cov = np.array([[2.0, 0.3], [0.3, 1.0]])
    h = HarmonicEstimate(2, 1.5, -0.7, cov, dof=9)
    d = np.array([1.5, -0.7])
    t2 = d @ np.linalg.solve(cov, d)
    assert h.p_value_zero == pytest.approx(stats.f.sf(t2 * 8 / 18, 2, 8), rel=1e-12)
    assert HarmonicEstimate(2, 1.5, -0.7, cov).p_value_zero == pytest.approx(stats.chi2.sf(t2, 2), rel=1e-12)


def test_summary_html_and_json(make_scan):
    f = fit_scan(make_scan(14))
    text = str(f)
    for needle in ["per-turn", "scatter of", "dof", "amplitude A2", "peak-to-peak 2·A2", "phase φ2", "fringe"]:
        assert needle in text, needle
    assert "<table>" in f._repr_html_()
    d = json.loads(f.to_json())
    for key in ["n_samples", "n_turns", "dropped_rows", "drift", "errors", "harmonics"]:
        assert key in d
    h2 = d["harmonics"]["2"]
    for key in ["c", "s", "cov", "amplitude", "phase_deg"]:
        assert key in h2
    assert isinstance(d["n_samples"], int) and d["drift"] == "per-turn" and d["errors"] == "turns"
    assert np.array(h2["cov"]).shape == (2, 2)
    assert h2["c"] == pytest.approx(f.harmonic(2).c)
    assert "ScanFit(" in repr(f)
    with pytest.raises(AttributeError):
        f.n_turns = 3  # frozen


def test_rice_note_near_zero(make_scan):
    f = fit_scan(make_scan(15, coef=(0.0, 0.0, 0.0, 0.0)))
    text = str(f)
    assert "Rice" in text and "nullfit.upper_limit" in text
    h = f.harmonic(2)
    assert h.near_zero and any("Rice" in n for n in h.notes())
    strong = fit_scan(make_scan(15))
    assert not strong.harmonic(2).near_zero


def test_scanfit_is_a_frozen_described_dataclass(make_scan):
    import dataclasses

    from nullfit.core.render import Described

    f = fit_scan(make_scan(16), errors="hac")
    assert isinstance(f, ScanFit) and isinstance(f, Described)
    assert dataclasses.is_dataclass(f)
    assert "HAC, Bartlett kernel" in f.errors_description and f"{f.hac_lags} lags" in f.errors_description
    with pytest.raises(ValueError):
        f.coef[0] = 1.0  # read-only array
