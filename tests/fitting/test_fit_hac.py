"""HAC (Newey–West) errors against statsmodels as the independent reference.

statsmodels: ``OLS(y, X).fit(cov_type="HAC", cov_kwds={"maxlags": L, "use_correction": True})``
(Bartlett weights 1 − j/(L+1), meat from sums of lagged score products, factor n/(n − k)) and
``statsmodels.stats.sandwich_covariance.S_hac_simple`` for the meat alone.
"""

import math

import numpy as np
import pytest
import statsmodels.api as sm
from statsmodels.stats.sandwich_covariance import S_hac_simple

from nullfit.fitting.hac import BartlettMeat, newey_west_lags
from nullfit.fitting.fit import fit_scan, parse_errors



@pytest.mark.parametrize("L", [0, 1, 5, 37])
def test_bartlett_meat_matches_statsmodels(L):
    rng = np.random.default_rng(L)
    n = 1000
    u = rng.normal(size=(n, 3))
    u[:, 1] += 0.8 * np.roll(u[:, 1], 1)  # some autocorrelation
    m = BartlettMeat(3, L)
    for a, b in [(0, 7), (7, 7), (7, 400), (400, 401), (401, 1000)]:  # uneven chunks, one empty
        m.add(u[a:b])
    np.testing.assert_allclose(m.finish(), S_hac_simple(u, nlags=L), rtol=1e-12, atol=1e-12)


def test_default_lag_rule_is_statsmodels_default():
    # statsmodels' S_hac_simple uses floor(4 (n/100)^(2/9)) when nlags is None (Newey & West 1994)
    for n in [50, 100, 999, 10_000, 123_457]:
        assert newey_west_lags(n) == int(np.floor(4 * (n / 100.0) ** (2.0 / 9.0)))
    assert newey_west_lags(100) == 4 and newey_west_lags(10_000) == 11  # 4·100^(2/9) = 11.13
    rng = np.random.default_rng(0)
    u = rng.normal(size=(777, 2))
    m = BartlettMeat(2, newey_west_lags(777))
    m.add(u)
    np.testing.assert_allclose(m.finish(), S_hac_simple(u), rtol=1e-12)


@pytest.mark.parametrize("drift", ["per-turn", "per-turn:0", "poly:3", "spline:2", "none"])
@pytest.mark.parametrize("aux", [False, True])
@pytest.mark.parametrize("lags", [None, 13])
def test_hac_matches_statsmodels_dense(make_scan, reference_design, drift, aux, lags):
    scan = make_scan(21, tilt_coef=0.02)
    f = fit_scan(scan, drift=drift, errors="hac", aux=["tilt"] if aux else None, hac_lags=lags)
    X, y, k0 = reference_design(scan, drift, aux)
    L = newey_west_lags(y.size) if lags is None else lags
    assert f.hac_lags == L
    r = sm.OLS(y, X).fit(cov_type="HAC", cov_kwds={"maxlags": L, "use_correction": True})
    np.testing.assert_allclose(f.coef, r.params[k0:k0 + 4], rtol=1e-8)
    np.testing.assert_allclose(np.sqrt(np.diag(f.cov)), r.bse[k0:k0 + 4], rtol=1e-8)
    cp = r.cov_params()[k0:k0 + 4, k0:k0 + 4]
    np.testing.assert_allclose(f.cov, cp, rtol=1e-8, atol=1e-8 * np.abs(cp).max())
    if aux:
        assert math.sqrt(f.aux_cov[0, 0]) == pytest.approx(r.bse[-1], rel=1e-8)


def test_small_sample_correction_is_n_over_n_minus_p(make_scan, reference_design):
    """Without the factor the covariance equals statsmodels' use_correction=False × (n−p)/n."""
    scan = make_scan(22)
    f = fit_scan(scan, drift="per-turn", errors="hac", hac_lags=6)
    X, y, k0 = reference_design(scan, "per-turn")
    r0 = sm.OLS(y, X).fit(cov_type="HAC", cov_kwds={"maxlags": 6, "use_correction": False})
    n, p = X.shape
    np.testing.assert_allclose(f.cov * (n - p) / n, r0.cov_params()[k0:k0 + 4, k0:k0 + 4], rtol=1e-8,
                               atol=1e-12 * np.abs(f.cov).max())
    assert f.settings["small_sample_correction"] == "n/(n-p)"


def test_lag_and_kernel_are_recorded(make_scan):
    scan = make_scan(23)
    f = fit_scan(scan, errors="hac:7")
    assert f.hac_lags == 7 and f.settings["hac_kernel"] == "bartlett" and f.settings["hac_lag_rule"] == "given"
    assert "HAC, Bartlett kernel, 7 lags" in str(f)
    g = fit_scan(scan, errors="hac")
    assert "Newey–West rule" in g.errors_description
    assert g.to_dict()["hac_lags"] == newey_west_lags(g.n_samples)
    assert parse_errors("hac:12") == ("hac", 12, None)
    with pytest.raises(ValueError):
        parse_errors("ols:3")
