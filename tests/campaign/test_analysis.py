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


# ------------------------------------------------------------------ every route's fate, reprs, units
@pytest.fixture(scope="module")
def three_turns():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s, _ = simulate_scan(n_turns=3, samples_per_turn=32, sigma=0.01, rng=1)
    return s


def test_a_failing_route_leaves_the_others_and_says_why(three_turns):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        run = analyse(three_turns, limits=AMPLITUDE_METHODS, rng=1)
    assert set(run.limits) == set(AMPLITUDE_METHODS) - {"bootstrap"}
    assert "10 turns" in run.failed["bootstrap"]
    d = json.loads(run.to_json())
    assert "10 turns" in d["limits_failed"]["bootstrap"]
    frame = run.limits_frame()
    row = frame[frame["method"] == "bootstrap"].iloc[0]
    assert row["note"].startswith("not computed") and row["unit"] == three_turns.unit
    assert "bootstrap" in str(run) and "not computed" in str(run)


def test_every_route_failing_is_an_analysis_error(three_turns):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        with pytest.raises(AnalysisError, match="bootstrap"):
            analyse(three_turns, limits=("bootstrap",), rng=1)


def test_reprs_are_short_and_never_amplitude_plus_minus_sigma(scan):
    from nullfit import detection_significance, upper_limit

    run = analyse(scan, limits=("feldman-cousins",), speed_m_s=30_000.0, apparatus=Apparatus(11.0, 550e-9), rng=1)
    fit = fit_scan(scan)
    for obj in (run, run.primary_limit, run.significance, fit, fit.harmonic(2), upper_limit(fit),
                detection_significance(fit.harmonic(2))):
        text = repr(obj)
        assert "±" not in text and "+/-" not in text and len(text) < 200 and "\n" not in text
    assert repr(run).startswith("RunAnalysis('") and "30 turns" in repr(run)


def test_counts_read_in_the_singular_and_gaps_are_found(scan):
    from nullfit.campaign.facts import plural, scan_gaps
    from nullfit.reading.scan import Scan

    assert plural(1, "turn") == "1 turn" and plural(3, "turn") == "3 turns" and plural(0, "gap") == "0 gaps"
    t = np.array(scan.time, dtype=float)
    t[500:] += 86_400.0  # one day without readings before the 501st reading
    s = Scan.from_arrays(t, scan.angle_deg, scan.signal, epoch_unix=scan.epoch_unix)
    gaps = scan_gaps(s)
    assert [g["row"] for g in gaps] == [int(s.rows[500])]
    assert gaps[0]["duration_s"] == pytest.approx(86_400.0 + t[1] - t[0], rel=1e-9)
    assert len(gaps) == 1 and scan_gaps(scan) == []


def test_units_travel_with_every_limit_and_table(scan):
    from nullfit import limits_table, upper_limit

    fit = fit_scan(scan)
    assert upper_limit(fit).unit == scan.unit == "fringe"
    assert set(limits_table(fit.harmonic(2))["unit"]) == {"fringe"}
    run = analyse(scan, limits=("feldman-cousins", "neyman"), rng=1)
    assert set(run.limits_frame()["unit"]) == {"fringe"}
    d = run.to_dict()
    assert d["unit"] == "fringe" and all(v["unit"] == "fringe" for v in d["limits"].values())


def test_the_seed_note_only_when_random(scan):
    assert "random seed" not in str(analyse(scan, limits=("feldman-cousins",), rng=3))
    boot = analyse(scan, limits=("bootstrap",), rng=3, bootstrap_replicates=300)
    assert boot.random and "random seed 3" in str(boot)


def test_unused_aux_channel_is_named(scan):
    from nullfit.reading.scan import Scan

    s = Scan.from_arrays(scan.time, scan.angle_deg, scan.signal, epoch_unix=scan.epoch_unix,
                         aux={"tilt": np.sin(scan.time)})
    assert any("tilt read but not used" in n for n in analyse(s, limits=(), rng=1).all_notes())
    used = analyse(s, limits=(), rng=1, aux=["tilt"])
    assert used.settings["aux"] == ["tilt"] and "coupling to tilt" in str(used)
