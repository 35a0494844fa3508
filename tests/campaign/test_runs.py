"""Many runs: lab-frame combination and sky-frame scale fit against statsmodels GLS (an independent
implementation), the χ² consistency test's calibration, κ-limit coverage, and the run table."""

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import linalg, stats

from nullfit.campaign.combine import ScaleFit, combine_lab, combine_sky


def _random_covs(rng, n):
    out = []
    for _ in range(n):
        a = rng.normal(size=(2, 2))
        out.append(a @ a.T + 0.3 * np.eye(2))
    return np.array(out)


def test_lab_combination_equals_statsmodels_gls():
    rng = np.random.default_rng(1)
    n = 7
    C = _random_covs(rng, n)
    x = np.array([rng.multivariate_normal([0.3, -0.2], c) for c in C])
    comb = combine_lab([(xi[0], xi[1], ci) for xi, ci in zip(x, C)])
    # reference: statsmodels GLS with a block-diagonal covariance and design [I2; I2; ...]
    res = sm.GLS(x.ravel(), np.tile(np.eye(2), (n, 1)), sigma=linalg.block_diag(*C)).fit()
    np.testing.assert_allclose([comb.c, comb.s], res.params, rtol=1e-10)
    np.testing.assert_allclose(comb.cov, res.normalized_cov_params, rtol=1e-10)
    # χ² = whitened residual sum of squares of the GLS fit
    assert comb.chi2 == pytest.approx(float(res.wresid @ res.wresid), rel=1e-10)
    assert comb.dof == 2 * (n - 1)


def test_lab_consistency_p_values_are_uniform_under_the_null():
    """Runs drawn from one common (c, s) with their stated covariances: the χ² p-values must be
    uniform (Kolmogorov–Smirnov against U(0,1), scipy)."""
    rng = np.random.default_rng(2)
    pvals = []
    for _ in range(400):
        C = _random_covs(rng, 5)
        x = [rng.multivariate_normal([1.0, 0.5], c) for c in C]
        pvals.append(combine_lab([(a, b, c) for (a, b), c in zip(x, C)]).p_value)
    assert stats.kstest(pvals, "uniform").pvalue > 0.01


def test_lab_consistency_detects_inconsistent_runs():
    rng = np.random.default_rng(3)
    C = np.array([np.eye(2) * 0.01] * 6)
    x = np.array([[0, 0]] * 3 + [[1, 1]] * 3, dtype=float) + rng.normal(scale=0.1, size=(6, 2))
    assert combine_lab([(a, b, c) for (a, b), c in zip(x, C)]).p_value < 1e-6


class _Exp:
    def __init__(self, c2, s2):
        self.coherent_c2, self.coherent_s2 = c2, s2
        self.reference_speed_m_s = 30_000.0
        self.hypothesis_label = "test template"


class _H:
    def __init__(self, c, s, cov):
        self.c, self.s, self.cov = c, s, cov


class _Run:
    def __init__(self, i, x, cov, p):
        self.run_id = f"R{i}"
        self.expected = _Exp(*p)
        self._h = _H(x[0], x[1], cov)
        self.scan = type("S", (), {"unit": "fringe"})()
        self.fit = type("F", (), {"harmonic": lambda _self, k: self._h})()


def _sky_runs(rng, kappa, n=6):
    C = _random_covs(rng, n) * 0.01
    P = rng.normal(scale=0.2, size=(n, 2))
    x = [rng.multivariate_normal(kappa * p, c) for p, c in zip(P, C)]
    return [_Run(i, xi, c, p) for i, (xi, c, p) in enumerate(zip(x, C, P))], x, C, P


def test_sky_scale_fit_equals_statsmodels_gls():
    rng = np.random.default_rng(4)
    runs, x, C, P = _sky_runs(rng, 0.4)
    fit = combine_sky(runs)
    res = sm.GLS(np.ravel(x), P.reshape(-1, 1), sigma=linalg.block_diag(*C)).fit()
    assert fit.kappa == pytest.approx(res.params[0], rel=1e-10)
    assert fit.sigma == pytest.approx(np.sqrt(res.normalized_cov_params[0, 0]), rel=1e-10)
    assert fit.dof == 2 * 6 - 1
    assert isinstance(fit, ScaleFit)


@pytest.mark.parametrize("kappa", [0.0, 0.5, 2.0])
def test_kappa_unified_limits_cover(kappa):
    """Unified (Feldman–Cousins) interval on κ ≥ 0 covers at its nominal 90 % (binomial test)."""
    rng = np.random.default_rng(int(10 + 10 * kappa))
    n_sim, hits = 300, 0
    for _ in range(n_sim):
        runs, *_ = _sky_runs(rng, kappa, n=4)
        df = combine_sky(runs).limits_frame(confidence_level=0.90).set_index("method")
        lo, up = df.loc["feldman-cousins", ["kappa_lower", "kappa_upper"]]
        hits += lo <= kappa <= up
    assert stats.binomtest(hits, n_sim, 0.90).pvalue > 1e-3


def test_sky_needs_templates():
    class NoExp(_Run):
        pass

    r = _Run(0, (0.0, 0.0), np.eye(2), (0.1, 0.0))
    r.expected.coherent_c2 = None
    with pytest.raises(ValueError, match="table-frame phase"):
        combine_sky([r])


def test_sky_speed_bound_with_slightly_different_run_speeds():
    rng = np.random.default_rng(9)
    runs, *_ = _sky_runs(rng, 0.1)
    for i, r in enumerate(runs):
        r.expected.reference_speed_m_s = 30_000.0 * (1 + 1e-3 * i)
    fit = combine_sky(runs)
    assert fit.reference_speed_m_s == pytest.approx(30_000.0 * (1 + 2.5e-3))
    assert fit.speed_spread == pytest.approx(5e-3 / (1 + 2.5e-3))
    df = fit.limits_frame(0.95).set_index("method")
    # v_up = v_ref sqrt(κ_up) (nullfit.campaign.combine module docstring)
    assert df.loc["feldman-cousins", "speed_bound_m_s"] == pytest.approx(
        fit.reference_speed_m_s * np.sqrt(df.loc["feldman-cousins", "kappa_upper"]))


def test_run_table_ratio_uses_one_convention_on_both_sides():
    """Expected/bound must compare amplitude with amplitude (equivalently peak-to-peak with
    peak-to-peak); mixing them is the factor-of-two error (docs/conventions.md)."""
    from pathlib import Path

    from nullfit.campaign.runs import compare_runs

    demo = Path(__file__).resolve().parents[2] / "data_demo" / "campaign"
    table = compare_runs(sorted(demo.glob("C0[12].csv")), speed_m_s=30_000.0, rng=1, progress=False)
    np.testing.assert_allclose(table["ratio_expected_to_bound"], table["expected_amplitude"] / table["upper_amplitude"],
                               rtol=1e-12)
    np.testing.assert_allclose(table["ratio_expected_to_bound"],
                               table["expected_peak_to_peak"] / table["upper_peak_to_peak"], rtol=1e-12)
    np.testing.assert_allclose(table["expected_peak_to_peak"], 2 * table["expected_amplitude"], rtol=1e-15)
    # classical wind, equal arms: A2 = L v^2 / (lambda c^2) (docs/conventions.md) for the manifest's apparatus
    L, lam = table["arm_length_m"].iloc[0], table["wavelength_m"].iloc[0]
    assert table["expected_amplitude"].iloc[0] == pytest.approx(L * 30_000.0**2 / (lam * 299_792_458.0**2), rel=1e-9)
    # speed bound inverts the bound: v_max = c sqrt(lambda A_up / L)
    np.testing.assert_allclose(table["speed_bound_m_s"],
                               299_792_458.0 * np.sqrt(lam * table["upper_amplitude"] / L), rtol=1e-9)
    assert table.attrs["seed"] == 1


def test_kappa_bayes_and_neyman_limits_against_scipy():
    """Bayes, flat prior on κ ≥ 0: the posterior is a normal truncated at 0, so the credible
    limit is scipy.stats.truncnorm's quantile (at κ̂ = 0: the half-normal quantile,
    scipy.stats.halfnorm); Neyman one-sided: κ̂ + z_CL σ, empty when negative."""
    for kappa, sigma, cl in ((0.0, 0.3, 0.95), (0.4, 0.2, 0.9), (-0.5, 0.2, 0.95)):
        fit = ScaleFit(("a", "b"), kappa, sigma, 1.0, 3, 30_000.0, "test", np.zeros((2, 2)))
        df = fit.limits_frame(cl).set_index("method")
        ref = stats.truncnorm.ppf(cl, -kappa / sigma, np.inf, loc=kappa, scale=sigma)
        assert df.loc["bayes", "kappa_upper"] == pytest.approx(ref, rel=1e-9)
        if kappa == 0.0:
            assert df.loc["bayes", "kappa_upper"] == pytest.approx(stats.halfnorm.ppf(cl, scale=sigma), rel=1e-9)
        ney = kappa + stats.norm.ppf(cl) * sigma
        assert bool(df.loc["neyman", "empty"]) == (ney < 0)
        if ney >= 0:
            assert df.loc["neyman", "kappa_upper"] == pytest.approx(ney, rel=1e-12)
        z = stats.norm.ppf(0.5 + cl / 2)
        lo, up = df.loc["central", ["kappa_lower", "kappa_upper"]]
        assert (lo, up) == pytest.approx((kappa - z * sigma, kappa + z * sigma), rel=1e-12)
        # |β − δ − ½| bound = max(|κ_lo|, |κ_up|)/2 since κ = −2(β − δ − ½) (runs.py docstring)
        assert df.loc["central", "rms_bound_abs_beta_minus_delta_minus_half"] == \
            pytest.approx(max(abs(lo), abs(up)) / 2, rel=1e-12)
