"""Public API of nullfit.limits: results, the registry, estimates from a fit, tables, errors, seeds."""

import dataclasses
import json
import math

import numpy as np
import pytest

from nullfit.core.conventions import peak_to_peak
from nullfit.fitting.estimate import HarmonicEstimate
from nullfit.limits import (AMPLITUDE_METHODS, METHODS, Limit, ScalarEstimate, amplitude_limit, detection_significance,
                            limits_table, scalar_limit, upper_limit)

# Invented example (fringes²): principal variances 4e-4 and 1e-4 (σ_minor/σ_major = 0.5, a
# shape whose belt the other test modules also use) with the major axis at 30°.
COV = np.array([[3.25e-4, 3e-4 * math.sqrt(3) / 4], [3e-4 * math.sqrt(3) / 4, 1.75e-4]])


def _turns(n=300, seed=1, c=0.012, s=-0.006, sd=0.25):
    rng = np.random.default_rng(seed)
    return np.array([c, s]) + sd * rng.standard_normal((n, 2))


class _Fit:
    """Minimal stand-in for a scan fit: ``harmonic(k)`` returns a HarmonicEstimate."""

    def __init__(self, turns=None, cov_dof=None):
        t2 = turns
        t4 = None if turns is None else turns * 0.1
        self._h = {2: HarmonicEstimate(2, 0.012, -0.006, COV, cov_dof, "fringe", "", t2),
                   4: HarmonicEstimate(4, 0.001, 0.002, COV * 0.5, cov_dof, "fringe", "", t4)}

    def harmonic(self, k):
        return self._h[k]


CLI_KEYS = {
    "feldman-cousins": {"confidence_level", "lower", "upper"},
    "neyman": {"confidence_level", "upper", "empty"},
    "bayes": {"confidence_level", "upper", "prior"},
    "bootstrap": {"confidence_level", "upper", "block_length", "replicates", "seed"},
}


@pytest.mark.parametrize("method", AMPLITUDE_METHODS)
def test_limit_renders_and_carries_cli_keys(method):
    lim = amplitude_limit(0.012, -0.006, COV, method=method, rng=3, turns=_turns(), harmonic=2, unit="fringe",
                          **({"replicates": 2000} if method == "bootstrap" else {}))
    d = lim.to_dict()
    assert CLI_KEYS[method] <= set(d)
    assert json.loads(lim.to_json())["method"] == method
    assert d["quantity"] == "amplitude"
    assert lim.upper_peak_to_peak == pytest.approx(peak_to_peak(lim.upper))
    text = str(lim)
    assert "peak-to-peak" in text and "amplitude" in text and "fringe" in text
    html = lim._repr_html_()
    assert "<table>" in html and "Â" in html
    assert lim.estimate == pytest.approx(math.hypot(0.012, -0.006))
    assert lim.notes and all(isinstance(n, str) for n in lim.notes)
    with pytest.raises(dataclasses.FrozenInstanceError):
        lim.upper = 0.0
    if method == "bootstrap":
        assert isinstance(d["block_length"], int) and d["replicates"] == 2000 and d["seed"] == 3
    if method == "bayes":
        assert d["prior"] == "plane" and "posterior" not in d


def test_html_is_escaped():
    lim = amplitude_limit(0.01, 0.0, COV, unit="<b>fringe</b>")
    assert "<b>fringe</b>" not in lim._repr_html_()


def test_empty_neyman_has_no_number():
    lim = amplitude_limit(1e-4, 0.0, np.eye(2) * 1e-4, method="neyman")
    d = lim.to_dict()
    assert d["empty"] is True and d["upper"] is None and d["upper_peak_to_peak"] is None
    assert "empty" in str(lim)


def test_bayes_posterior_for_plotting():
    lim = amplitude_limit(0.012, -0.006, COV, method="bayes", prior="amplitude")
    post = lim.posterior
    assert post.prior == "amplitude" and post.amplitude.size <= 1000
    assert np.trapezoid(post.density, post.amplitude) == pytest.approx(1.0, abs=1e-3)
    assert np.interp(lim.upper, post.amplitude, post.cdf) == pytest.approx(0.95, abs=2e-3)


def test_seeds_are_recorded_and_reproduce():
    t = _turns()
    a = amplitude_limit(0.012, -0.006, COV, method="bootstrap", turns=t, rng=11, replicates=1000)
    b = amplitude_limit(0.012, -0.006, COV, method="bootstrap", turns=t, rng=11, replicates=1000)
    assert a.seed == 11 and a.upper == b.upper
    c = amplitude_limit(0.012, -0.006, COV, method="bootstrap", turns=t, replicates=1000)
    assert isinstance(c.seed, int)
    d = amplitude_limit(0.012, -0.006, COV, method="bootstrap", turns=t, rng=c.seed, replicates=1000)
    assert d.upper == c.upper
    g = amplitude_limit(0.012, -0.006, COV, method="bootstrap", turns=t, rng=np.random.default_rng(5),
                        replicates=1000)
    assert g.seed is None


def test_upper_limit_uses_the_fit_interface():
    turns = _turns()
    fit = _Fit(turns, cov_dof=None)
    for m in AMPLITUDE_METHODS:
        opts = {"replicates": 1000} if m == "bootstrap" else {}
        lim = upper_limit(fit, method=m, rng=2, **opts)
        ref = amplitude_limit(0.012, -0.006, COV, method=m, rng=2, turns=turns, harmonic=2, **opts)
        assert lim.harmonic == 2 and lim.upper == ref.upper and lim.lower == ref.lower
    assert lim.phase_deg is not None
    h4 = upper_limit(fit, harmonic=4)
    assert h4.harmonic == 4 and h4.estimate == pytest.approx(math.hypot(0.001, 0.002))
    assert h4.unit == "fringe"


def test_upper_limit_passes_cov_dof():
    fit = _Fit(cov_dof=9)
    lim = upper_limit(fit, method="feldman-cousins")
    assert lim.dof == 9 and any("Hotelling" in n for n in lim.notes)
    exact = upper_limit(fit, method="feldman-cousins", dof=None)
    assert exact.dof is None and exact.upper < lim.upper
    assert detection_significance(fit.harmonic(2)).method == "hotelling"
    assert detection_significance(fit.harmonic(2), dof=None).method == "integration"


def test_bootstrap_needs_per_turn():
    with pytest.raises(ValueError, match="per-turn"):
        upper_limit(_Fit(None), method="bootstrap")
    with pytest.raises(ValueError, match="per-turn"):
        amplitude_limit(0.01, 0.0, COV, method="bootstrap")


def test_limits_table():
    turns = _turns()
    table = limits_table(0.012, -0.006, COV, turns=turns, rng=4, options={"bootstrap": {"replicates": 1000},
                                                                          "bayes": {"prior": "amplitude"}})
    assert list(table["method"]) == list(AMPLITUDE_METHODS)
    assert {"lower", "upper", "upper_peak_to_peak", "empty", "prior", "block_length", "seed", "notes"} <= set(
        table.columns)
    assert table.loc[table.method == "bayes", "prior"].item() == "amplitude"
    assert str(table["block_length"].dtype) == "Int64"
    lims = table.attrs["limits"]
    assert set(lims) == set(AMPLITUDE_METHODS) and isinstance(lims["neyman"], Limit)
    for m in AMPLITUDE_METHODS:
        assert table.loc[table.method == m, "upper"].item() == pytest.approx(lims[m].upper)
    # without per-turn data the bootstrap is left out
    assert list(limits_table(0.012, -0.006, COV)["method"]) == list(AMPLITUDE_METHODS[:3])
    fit_table = limits_table(_Fit(turns).harmonic(2), rng=4, options={"bootstrap": {"replicates": 1000}})
    assert len(fit_table) == 4 and (fit_table["upper"] > 0).all()


def test_significance_result():
    sig = detection_significance(0.03, 0.01, COV, harmonic=2, unit="fringe")
    d = json.loads(sig.to_json())
    assert 0 < d["p_value"] < 1 and d["method"] == "integration"
    assert "p-value" in str(sig)


@pytest.mark.parametrize("kwargs,exc,match", [
    (dict(method="frequentist"), ValueError, "method"),
    (dict(confidence_level=1.5), ValueError, "confidence_level"),
    (dict(confidence_level=0.05 - 0.05), ValueError, "confidence_level"),
    (dict(method="bayes", prior="jeffreys"), ValueError, "prior"),
    (dict(method="feldman-cousins", prior="plane"), TypeError, "option"),
    (dict(dof=1), ValueError, "dof"),
    (dict(method="bootstrap", interval="bca"), ValueError, "BCa"),
    (dict(method="bootstrap", scheme="iid"), ValueError, "scheme"),
])
def test_errors(kwargs, exc, match):
    kwargs = dict(kwargs)
    if kwargs.get("method") == "bootstrap":
        kwargs["turns"] = _turns()
    with pytest.raises(exc, match=match):
        amplitude_limit(0.012, -0.006, COV, **kwargs)


@pytest.mark.parametrize("cov,match", [
    (np.eye(3), "2x2"),
    ([[1.0, 0.5], [0.4, 1.0]], "symmetric"),
    ([[1.0, 2.0], [2.0, 1.0]], "positive definite"),
    ([[1.0, 0.0], [0.0, 1e-9]], "singular"),
])
def test_bad_covariance(cov, match):
    with pytest.raises(ValueError, match=match):
        amplitude_limit(0.1, 0.0, cov)


def test_aliases_and_method_labels():
    assert amplitude_limit(0.01, 0.0, COV, method="unified").method == "feldman-cousins"
    assert amplitude_limit(0.01, 0.0, COV, method="FC").method == "feldman-cousins"


def test_one_registry_one_signature_every_method_returns_a_limit():
    est = _Fit(_turns(), cov_dof=None).harmonic(2)
    scalar = ScalarEstimate(0.3, 0.2)
    for name, method in METHODS.items():
        opts = {"replicates": 500} if name == "bootstrap" else {}
        if method.amplitude is not None:
            lim = method(est, 0.9, rng=1, **opts)
            assert isinstance(lim, Limit) and lim.quantity == "amplitude" and lim.cov.shape == (2, 2)
        if method.scalar is not None:
            lim = method(scalar, 0.9)
            assert isinstance(lim, Limit) and lim.quantity == "κ" and lim.cov.shape == (1, 1)
    with pytest.raises(ValueError, match="not offered for a single parameter"):
        scalar_limit(scalar, method="bootstrap")
    with pytest.raises(ValueError, match="signed"):
        scalar_limit(0.3, 0.2, method="neyman", nonnegative=False)


def test_scalar_limits_against_scipy():
    from scipy import stats

    # central interval: x̂ ± Φ⁻¹(0.975)σ (scipy.stats.norm as reference)
    c = scalar_limit(0.3, 0.2, method="central", nonnegative=False)
    assert c.lower == pytest.approx(0.3 - stats.norm.ppf(0.975) * 0.2) and c.upper == pytest.approx(0.3 + 0.392, abs=1e-3)
    # Bayes with a flat prior on x ≥ 0 is the 95 % quantile of the normal truncated at 0 (scipy.stats.truncnorm)
    b = scalar_limit(0.3, 0.2, method="bayes")
    assert b.upper == pytest.approx(stats.truncnorm.ppf(0.95, -1.5, np.inf, loc=0.3, scale=0.2), rel=1e-10)
    # one-sided Neyman: x̂ + Φ⁻¹(0.95)σ; empty below zero
    assert scalar_limit(0.3, 0.2, method="neyman").upper == pytest.approx(0.3 + stats.norm.ppf(0.95) * 0.2)
    assert scalar_limit(-0.5, 0.2, method="neyman").empty
