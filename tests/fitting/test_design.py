"""Design columns: harmonics, scaled-time Legendre, B-spline drift, knot rule, separability.

Reference implementations used: numpy trig functions, ``scipy.special.eval_legendre``, and
``scipy.interpolate.BSpline`` evaluated coefficient by coefficient (an evaluation path
independent of ``BSpline.design_matrix``).
"""

import math
import warnings

import numpy as np
import pytest
from scipy.interpolate import BSpline
from scipy.special import eval_legendre

from nullfit.fitting.design import FitWarning, check_harmonics, check_knot_spacing, check_separable, harmonic_columns, harmonic_names, legendre_columns, parse_drift, scale_time, spline_columns, spline_intervals, spline_knots, typical_turn_period
from nullfit.fitting.dense import dense_design
from nullfit.fitting.segments import turn_segments
from nullfit.core.errors import AnalysisError
from nullfit.reading.scan import Scan


def test_harmonic_columns_match_numpy_trig():
    rng = np.random.default_rng(0)
    theta = rng.uniform(-50, 5000, 1000)  # unwrapped angles of many turns
    h = harmonic_columns(theta, (1, 2, 5))
    ref = np.column_stack([np.cos(theta), np.sin(theta), np.cos(2 * theta), np.sin(2 * theta),
                           np.cos(5 * theta), np.sin(5 * theta)])
    # The recurrence accumulates ~k·ε relative error; np.cos(5θ) itself carries ε·5θ ≈ 3e-12.
    np.testing.assert_allclose(h, ref, rtol=0, atol=1e-11)
    assert harmonic_names((1, 2)) == ("c1", "s1", "c2", "s2")


def test_legendre_columns_match_scipy():
    u = np.linspace(-1, 1, 101)
    p = legendre_columns(u, 4)
    for d in range(5):
        np.testing.assert_allclose(p[:, d], eval_legendre(d, u), rtol=1e-13, atol=1e-14)


def test_scale_time_maps_to_unit_interval_and_ignores_epoch():
    t = np.arange(0, 1000, 0.25)
    u = scale_time(t, t[0], t[-1])
    assert u[0] == -1.0 and u[-1] == 1.0
    # 1.8e9 s + multiples of 0.25 s are exact in float64 (ulp(1.8e9) = 2**-22 s)
    t2 = t + 1.8e9
    np.testing.assert_allclose(scale_time(t2, t2[0], t2[-1]), u, rtol=0, atol=1e-15)


def test_spline_basis_is_partition_of_unity_and_matches_bspline():
    knots = spline_knots(7)
    u = np.linspace(-1, 1, 333)
    b = spline_columns(u, knots)
    assert b.shape == (333, 7 + 3)
    # partition of unity of a clamped B-spline basis (de Boor, "A Practical Guide to Splines")
    np.testing.assert_allclose(b.sum(axis=1), 1.0, rtol=0, atol=1e-14)
    for j in range(b.shape[1]):
        coef = np.zeros(b.shape[1])
        coef[j] = 1.0
        np.testing.assert_allclose(b[:, j], BSpline(knots, coef, 3, extrapolate=False)(u), rtol=0, atol=1e-14)


def _absorbed(h_turns, k, M=64, N=40):
    """Worst-case (over phase) fraction of the centred kθ pair absorbed by a cubic spline with
    knots every h turns: the largest eigenvalue of (HᵀH)⁻¹ HᵀP_B H (numpy QR projection)."""
    n = M * N
    theta = 2 * np.pi * (np.arange(n) + 0.37) / M
    t = np.arange(n) / M
    u = scale_time(t, t[0], t[-1])
    b = spline_columns(u, spline_knots(spline_intervals(t[-1] - t[0], 1.0, h_turns)))
    q, _ = np.linalg.qr(b)
    H = np.column_stack([np.cos(k * theta), np.sin(k * theta)])
    H -= H.mean(axis=0)
    ph = q @ (q.T @ H)
    return float(np.linalg.eigvals(np.linalg.solve(H.T @ H, H.T @ ph)).real.max())


@pytest.mark.parametrize("k", [1, 2])
def test_knot_rule_edge_and_margin(k):
    """The justification of the knot warning (design.py docstring): knots every 1/(2k) turn
    absorb most of the kθ term; knots every 1/k turn (where the warning stops) absorb < 3 %."""
    assert _absorbed(1.0 / (2 * k), k) > 0.8
    assert _absorbed(1.0 / k, k) < 0.03


def test_check_knot_spacing_warns_below_one_over_kmin():
    with pytest.warns(FitWarning, match="absorb"):
        assert check_knot_spacing(0.8, (1, 2))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert not check_knot_spacing(1.0, (1, 2))
        assert not check_knot_spacing(0.6, (2,))
    with pytest.warns(FitWarning):
        check_knot_spacing(0.4, (2, 3))


def _marks_scan(M, n_turns=6, repeat=False):
    j = np.arange(M * n_turns + 1)
    ang = j * 360.0 / M
    y = np.cos(np.deg2rad(ang)) + 0.01 * np.random.default_rng(1).normal(size=j.size)
    return Scan.from_arrays(j * 1.0, ang, y)


def test_separability_refuses_harmonics_at_or_above_half_the_marks():
    s = _marks_scan(6)
    check_separable(s.angle, (1, 2), marks=s.marks)  # k < 3 is fine
    with pytest.raises(AnalysisError, match="6 marks"):
        check_separable(s.angle, (1, 2, 3), marks=s.marks)
    s3 = _marks_scan(5)
    with pytest.raises(AnalysisError, match="k < 2.5"):
        check_separable(s3.angle, (3,), marks=s3.marks)


def test_separability_refuses_degenerate_coverage_without_marks_hint():
    # two azimuths 90° apart: cos 2θ = ±1, sin 2θ = 0 everywhere
    theta = np.deg2rad(np.tile([0.0, 90.0], 100))
    with pytest.raises(AnalysisError, match="cannot separate"):
        check_separable(theta, (2,))
    # four marks: cos 2θ and cos 0 alias → k=2 equals M/2, refused by the generic check too
    theta4 = np.deg2rad(np.tile([0.0, 90.0, 180.0, 270.0], 50))
    with pytest.raises(AnalysisError):
        check_separable(theta4, (1, 2))


def test_check_harmonics():
    assert check_harmonics((2, 1)) == (1, 2)
    assert check_harmonics(2) == (2,)
    for bad in [(), (0,), (1, 1), (1.5,), ("a",)]:
        with pytest.raises(ValueError):
            check_harmonics(bad)


def test_parse_drift():
    assert parse_drift("per-turn").label == "per-turn"
    assert parse_drift("per-turn:0").degree == 0
    assert parse_drift("poly").degree == 3 and parse_drift("poly", degree=5).degree == 5
    assert parse_drift("poly:2").label == "poly:2"
    assert parse_drift("spline").knot_turns == 2.0
    assert parse_drift("spline:1.5").label == "spline:1.5"
    assert parse_drift("none").kind == "none"
    for bad in ["linear", "poly:-1", "poly:1.5", "spline:0", "per-turn:7", 3]:
        with pytest.raises(ValueError):
            parse_drift(bad)


def test_turn_segments_and_period():
    s = _marks_scan(8, n_turns=5)
    seg = turn_segments(s)
    assert seg.n == s.n_turns
    assert np.all(seg.stop[:-1] == seg.start[1:])
    assert seg.n_rows == s.n_samples
    period = typical_turn_period(s.time[seg.start], s.time[0], s.time[-1], s.n_samples)
    assert period == pytest.approx(8.0)


def test_dense_per_turn_design_has_block_columns():
    s = _marks_scan(8, n_turns=4)
    X, names, rows = dense_design(s, drift="per-turn", harmonics=(1, 2))
    seg = turn_segments(s)
    assert X.shape == (rows.size, 2 * seg.n + 4)
    # every row has exactly one non-zero offset column (its own turn)
    off = X[:, [i for i, n in enumerate(names) if n.endswith("_P0")]]
    assert np.all((off != 0).sum(axis=1) == 1)
    # the slope columns run from -1 to 1 inside each turn
    sl = X[:, [i for i, n in enumerate(names) if n.endswith("_P1")]]
    assert math.isclose(sl.max(), 1.0) and math.isclose(sl.min(), -1.0)


def test_marks_counted_from_every_reading():
    s = _marks_scan(12)
    assert s.marks == 12
    t = np.arange(5000) * 0.1
    cont = Scan.from_arrays(t, np.mod(t * 7.3, 360.0), np.sin(t) + 0.01 * np.cos(3 * t))
    assert cont.marks is None


def test_long_mark_log_is_not_mistaken_for_one_mark():
    """Regression: marks were once counted on a strided subsample (stride n // 50 000); with
    17 readings per turn (16 marks + the start mark re-read) and 50 000 turns the stride equals
    the readings per turn and every sampled reading sat on the same mark, so a valid log was
    refused as 'read at 1 marks per turn'."""
    from nullfit.fitting.fit import fit_scan

    turns = 50_000
    a = np.tile(np.r_[np.arange(16) * 22.5, 0.0], turns)
    y = np.random.default_rng(0).normal(size=a.size)
    s = Scan.from_arrays(np.arange(a.size, dtype=float), a, y)
    assert s.marks == 16
    assert fit_scan(s).n_turns > 0
