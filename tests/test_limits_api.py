"""Public API of nullfit.limits: results, dispatch, fit interface, tables, errors, seeds."""

import dataclasses
import json
import math
from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from nullfit.conventions import peak_to_peak
from nullfit.limits import (
    METHODS,
    Limit,
    amplitude_limit,
    detection_significance,
    limits_table,
    limits_table_for_fit,
    significance_for_fit,
    upper_limit,
)

# Invented example (fringes²): principal variances 4e-4 and 1e-4 (σ_minor/σ_major = 0.5, a
# shape whose belt the other test modules also use) with the major axis at 30°.
COV = np.array([[3.25e-4, 3e-4 * math.sqrt(3) / 4], [3e-4 * math.sqrt(3) / 4, 1.75e-4]])


def _turns(n=300, seed=1, c=0.012, s=-0.006, sd=0.25):
    rng = np.random.default_rng(seed)
    return np.array([c, s]) + sd * rng.standard_normal((n, 2))


class _Harmonic(SimpleNamespace):
    pass


class _Fit:
    """Minimal stand-in for a scan fit: harmonic(k), per_turn, cov_dof."""

    def __init__(self, turns=None, cov_dof=None):
        self._h = {2: _Harmonic(cos=0.012, sin=-0.006, cov=COV), 4: _Harmonic(cos=0.001, sin=0.002, cov=COV * 0.5)}
        self.cov_dof = cov_dof
        if turns is None:
            self.per_turn = None
        else:
            n = turns.shape[0]
            self.per_turn = pd.DataFrame({"turn": np.arange(n), "time_mid_s": 30.0 * np.arange(n) + 15.0,
                                          "c2": turns[:, 0], "s2": turns[:, 1],
                                          "c4": turns[:, 0] * 0.1, "s4": turns[:, 1] * 0.1})

    def harmonic(self, k):
        return self._h[k]


CLI_KEYS = {
    "feldman-cousins": {"confidence_level", "lower", "upper"},
    "neyman": {"confidence_level", "upper", "empty"},
    "bayes": {"confidence_level", "upper", "prior"},
    "bootstrap": {"confidence_level", "upper", "block_length", "replicates", "seed"},
}


@pytest.mark.parametrize("method", METHODS)
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
    assert lim.amplitude == pytest.approx(math.hypot(0.012, -0.006))
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
    for m in METHODS:
        opts = {"replicates": 1000} if m == "bootstrap" else {}
        lim = upper_limit(fit, method=m, rng=2, **opts)
        ref = amplitude_limit(0.012, -0.006, COV, method=m, rng=2, turns=turns, harmonic=2, **opts)
        assert lim.harmonic == 2 and lim.upper == ref.upper and lim.lower == ref.lower
    assert lim.phase_deg is not None
    h4 = upper_limit(fit, harmonic=4)
    assert h4.harmonic == 4 and h4.amplitude == pytest.approx(math.hypot(0.001, 0.002))


def test_upper_limit_passes_cov_dof():
    fit = _Fit(cov_dof=9)
    lim = upper_limit(fit, method="feldman-cousins")
    assert lim.dof == 9 and any("Hotelling" in n for n in lim.notes)
    exact = upper_limit(fit, method="feldman-cousins", dof=None)
    assert exact.dof is None and exact.upper < lim.upper
    assert significance_for_fit(fit).method == "hotelling"


def test_bootstrap_needs_per_turn():
    with pytest.raises(ValueError, match="per_turn"):
        upper_limit(_Fit(None), method="bootstrap")
    with pytest.raises(ValueError, match="per-turn"):
        amplitude_limit(0.01, 0.0, COV, method="bootstrap")


def test_limits_table():
    turns = _turns()
    table = limits_table(0.012, -0.006, COV, turns=turns, rng=4, options={"bootstrap": {"replicates": 1000},
                                                                          "bayes": {"prior": "amplitude"}})
    assert list(table["method"]) == list(METHODS)
    assert {"lower", "upper", "upper_peak_to_peak", "empty", "prior", "block_length", "seed", "notes"} <= set(
        table.columns)
    assert table.loc[table.method == "bayes", "prior"].item() == "amplitude"
    assert str(table["block_length"].dtype) == "Int64"
    lims = table.attrs["limits"]
    assert set(lims) == set(METHODS) and isinstance(lims["neyman"], Limit)
    for m in METHODS:
        assert table.loc[table.method == m, "upper"].item() == pytest.approx(lims[m].upper)
    # without per-turn data the bootstrap is left out
    assert list(limits_table(0.012, -0.006, COV)["method"]) == list(METHODS[:3])
    fit_table = limits_table_for_fit(_Fit(turns), rng=4, options={"bootstrap": {"replicates": 1000}})
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
