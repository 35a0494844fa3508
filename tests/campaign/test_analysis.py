"""One run end to end (nullfit.campaign.analysis): the bookkeeping that ties the stages together.

The statistics themselves are tested in their stages; here: which limit feeds the ratio, which
seed each random step used, that the ratio compares like with like, and that missing inputs are
refused in library terms.  References: the classical-wind formula A₂ = L v²/(λ c²)
(docs/conventions.md) and the stages' own functions called directly.
"""

import json
import math
import warnings

import numpy as np
import pytest

from nullfit import Apparatus, amplitude_limit, analyse, fit_scan, simulate_scan
from nullfit.campaign.analysis import child_seeds, parse_harmonics, parse_methods
from nullfit.core.conventions import SPEED_OF_LIGHT
from nullfit.core.errors import AnalysisError
from nullfit.limits.registry import AMPLITUDE_METHODS


@pytest.fixture(scope="module")
def scan():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s, _ = simulate_scan(n_turns=30, samples_per_turn=36, harmonics={2: (0.004, 30.0)}, sigma=0.01, rng=3)
    return s


def test_limits_equal_the_registry_called_directly(scan):
    run = analyse(scan, limits=("feldman-cousins", "neyman", "bayes"), rng=5)
    est = fit_scan(scan).harmonic(2)
    for m, lim in run.limits.items():
        ref = amplitude_limit(est, method=m)
        assert lim.upper == ref.upper and lim.lower == ref.lower and lim.unit == scan.unit


def test_seeds_are_children_of_the_recorded_master_seed(scan):
    a = analyse(scan, limits=("bootstrap",), rng=11, bootstrap_replicates=500)
    b = analyse(scan, limits=("bootstrap",), rng=11, bootstrap_replicates=500)
    assert a.seed == 11 and a.limits["bootstrap"].upper == b.limits["bootstrap"].upper
    boot_seed, sig_seed = child_seeds(11, 2)
    assert a.limits["bootstrap"].seed == boot_seed and boot_seed != 11
    assert a.to_dict()["seed"] == 11


def test_ratio_is_amplitude_over_amplitude_and_the_speed_bound_inverts_it(scan):
    app = Apparatus(11.0, 550e-9)
    run = analyse(scan, apparatus=app, speed_m_s=30_000.0, limits=("neyman", "feldman-cousins"), rng=1)
    assert run.primary_limit.method == "neyman"  # the first method listed feeds the ratio
    expected = 11.0 * 30_000.0 ** 2 / (550e-9 * SPEED_OF_LIGHT ** 2)  # classical wind, docs/conventions.md
    assert run.expected.amplitude == pytest.approx(expected, rel=1e-12)
    up = run.primary_limit.upper
    assert run.ratio == pytest.approx(expected / up, rel=1e-12)
    assert run.ratio == pytest.approx(run.expected.peak_to_peak / run.primary_limit.upper_peak_to_peak, rel=1e-12)
    assert run.speed_bound_m_s == pytest.approx(SPEED_OF_LIGHT * math.sqrt(550e-9 * up / 11.0), rel=1e-12)
    d = json.loads(run.to_json())
    assert d["expected"]["ratio_method"] == "neyman" and d["expected"]["ratio"] == pytest.approx(run.ratio)


def test_hypothesis_without_apparatus_is_refused_in_library_terms(scan):
    with pytest.raises(AnalysisError, match="apparatus") as err:
        analyse(scan, speed_m_s=30_000.0)
    assert "--" not in str(err.value)  # the CLI adds flag names, the library does not


def test_limit_harmonic_must_be_fitted(scan):
    with pytest.raises(ValueError, match="not among the fitted harmonics"):
        analyse(scan, harmonics=(1, 2), harmonic=3)


def test_option_parsers():
    assert parse_harmonics("2, 1") == (1, 2) and parse_harmonics([2]) == (2,)
    with pytest.raises(ValueError):
        parse_harmonics("1,x")
    assert parse_methods("all") == AMPLITUDE_METHODS
    assert parse_methods("fc,neyman,FC") == ("feldman-cousins", "neyman")
    with pytest.raises(ValueError, match="method"):
        parse_methods("frequentist")


def test_summary_names_amplitude_and_peak_to_peak(scan):
    text = str(analyse(scan, limits=("feldman-cousins",), rng=2))
    assert "peak-to-peak" in text and "amplitude" in text
    assert np.isfinite(analyse(scan, limits=(), rng=2).fit.harmonic(2).amplitude)
