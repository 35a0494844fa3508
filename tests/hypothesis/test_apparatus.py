"""Tests for nullfit.hypothesis.apparatus: classical-wind amplitudes, bounds, fringe ↔ fractional, RMS."""

import json
import math

import numpy as np
import pytest
from scipy.optimize import brentq

from nullfit.hypothesis.apparatus import Apparatus
from nullfit.core.conventions import SPEED_OF_LIGHT, amplitude_from_peak_to_peak

C = SPEED_OF_LIGHT


# ---------------------------------------------------------------- first-principles reference
def _round_trip_ether(psi, beta, L=1.0, c=1.0):
    """Round-trip time along an arm at angle psi to the velocity, solved numerically.

    Independent of the closed form: in the medium's frame the apparatus moves with
    velocity beta*c along x.  Outbound: light leaves the beam splitter (origin, t = 0) and meets
    the mirror at L·(cos ψ, sin ψ) + v t₁ x̂ when |L û + v t₁ x̂| = c t₁.  Return: light leaves
    the mirror and meets the beam splitter at v(t₁ + t₂) x̂ when |v t₂ x̂ − L û| = c t₂.
    Each root is found with brentq (scipy), not from the quadratic's formula.
    """
    v = beta * c
    ux, uy = L * math.cos(psi), L * math.sin(psi)
    f1 = lambda t: math.hypot(ux + v * t, uy) - c * t  # noqa: E731
    f2 = lambda t: math.hypot(v * t - ux, uy) - c * t  # noqa: E731
    hi = 10 * L / c
    t1 = brentq(f1, 0.0, hi, xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=500)
    t2 = brentq(f2, 0.0, hi, xtol=1e-300, rtol=4 * np.finfo(float).eps, maxiter=500)
    return t1 + t2


def _cos2_coefficient(psi, y):
    """Least-squares coefficient of cos 2ψ in y(ψ) (with constant and sin 2ψ terms)."""
    X = np.column_stack([np.ones_like(psi), np.cos(2 * psi), np.sin(2 * psi)])
    coef, *_ = np.linalg.lstsq(X, y, rcond=None)
    return coef[1], coef[2]


def test_wind_amplitude_matches_first_principles_path_difference():
    # beta = 1e-3: the closed form L β²/λ is exact to O(β²) relative (1e-6).
    beta, L = 1e-3, 1.0
    psi = np.linspace(0, np.pi, 24, endpoint=False)
    dt = np.array([_round_trip_ether(p, beta, L) - _round_trip_ether(p + np.pi / 2, beta, L) for p in psi])
    path_diff = dt * 1.0  # c = 1
    lam = 1.0  # path difference in units of λ = fringes
    c2, s2 = _cos2_coefficient(psi, path_diff / lam)
    app = Apparatus(L, lam)
    expected = app.wind_amplitude(beta * C)  # L v²/(λ c²) with v = βc
    assert c2 == pytest.approx(expected, rel=1e-5)
    assert abs(s2) < 1e-6 * expected  # no sin 2ψ term: maximum with arm 1 along the wind


def test_fractional_amplitude_first_principles():
    # The fractional difference of the two round trips, (t1 - t2)/(2L/c), has amplitude β²/2.
    beta = 2e-3
    psi = np.linspace(0, np.pi, 16, endpoint=False)
    frac = np.array([(_round_trip_ether(p, beta) - _round_trip_ether(p + np.pi / 2, beta)) / 2.0 for p in psi])
    c2, _ = _cos2_coefficient(psi, frac)
    app = Apparatus(None, None, signal="fractional")
    assert c2 == pytest.approx(app.wind_amplitude(beta * C), rel=1e-5)
    assert app.wind_amplitude(beta * C) == pytest.approx(0.5 * beta**2, rel=1e-12)


# ---------------------------------------------------------------- check values of the trade
def test_eleven_metre_arm_peak_to_peak_040():
    # Common practice: 11 m effective arm, 550 nm, 30 km/s -> peak-to-peak ≈ 0.40 fringe.
    app = Apparatus(11.0, 550e-9)
    p2p = app.wind_peak_to_peak(30e3)
    assert p2p == pytest.approx(0.40, abs=0.005)
    assert app.wind_amplitude(30e3) == pytest.approx(p2p / 2, rel=1e-15)
    assert app.wind_amplitude(30e3) == pytest.approx(0.20, abs=0.0025)


def test_short_arm_peak_to_peak_004():
    # Common practice: a 1.2 m arm (same light and speed) -> peak-to-peak ≈ 0.04 fringe (one significant
    # digit); the exact value from 2 L v²/(λ c²), computed here, is 0.04370 fringe.
    p2p = Apparatus(1.2, 550e-9).wind_peak_to_peak(30e3)
    assert p2p == pytest.approx(2 * 1.2 * 30e3 ** 2 / (550e-9 * 299_792_458.0 ** 2), rel=1e-12)
    assert round(p2p, 2) == 0.04


def test_ratio_forty_compares_like_with_like():
    # Common practice: an observed (peak-to-peak) bound of 0.01 against 0.40 is a ratio of 40.
    app = Apparatus(11.0, 550e-9)
    bound_p2p = 0.01
    ratio_p2p = app.wind_peak_to_peak(30e3) / bound_p2p
    ratio_amp = app.wind_amplitude(30e3) / amplitude_from_peak_to_peak(bound_p2p)
    assert ratio_p2p == pytest.approx(40, abs=0.5)
    assert ratio_amp == pytest.approx(ratio_p2p, rel=1e-12)
    # the classic error (amplitude against peak-to-peak) is off by exactly a factor of two
    assert app.wind_amplitude(30e3) / bound_p2p == pytest.approx(ratio_p2p / 2, rel=1e-12)


def test_speed_bound_hand_computed_and_inverse():
    app = Apparatus(11.0, 550e-9)
    # hand computation: A_up = 0.005 fringe -> v = c·sqrt(5.5e-7 · 0.005 / 11) = c·1.5811e-5 ≈ 4740 m/s
    assert app.speed_bound(0.005) == pytest.approx(4740.2, abs=0.5)
    v = np.array([100.0, 3e3, 3e4, 3.7e5])
    np.testing.assert_allclose(app.speed_bound(app.wind_amplitude(v)), v, rtol=1e-12)
    frac = Apparatus(None, None, signal="fractional")
    np.testing.assert_allclose(frac.speed_bound(frac.wind_amplitude(v)), v, rtol=1e-12)
    # fractional: v = c·sqrt(2 A)
    assert frac.speed_bound(1e-10) == pytest.approx(C * math.sqrt(2e-10), rel=1e-14)
    with pytest.raises(ValueError):
        app.speed_bound(-1.0)


def test_fringe_fractional_conversion_both_paths_agree():
    L, lam, v = 11.0, 550e-9, 30e3
    fringe = Apparatus(L, lam)
    frac = Apparatus(L, lam, signal="fractional")
    assert frac.fractional_to_fringe(frac.wind_amplitude(v)) == pytest.approx(fringe.wind_amplitude(v), rel=1e-13)
    assert fringe.fringe_to_fractional(fringe.wind_amplitude(v)) == pytest.approx(0.5 * (v / C) ** 2, rel=1e-13)
    assert fringe.fringes_per_fractional == pytest.approx(2 * L / lam)
    a = np.array([1e-9, 2e-9])
    np.testing.assert_allclose(fringe.fringe_to_fractional(fringe.fractional_to_fringe(a)), a, rtol=1e-14)
    assert frac.unit == "Δν/ν" and fringe.unit == "fringe"
    with pytest.raises(ValueError, match="arm_length_m and wavelength_m"):
        Apparatus(None, None, signal="fractional").fractional_to_fringe(1e-9)


# ---------------------------------------------------------------- RMS
def _rms_round_trip(psi, v_over_c, p_prime, iso=0.0, L=1.0):
    """Round trip with the RMS direction-dependent speed c(θ)/c = 1 + iso·β² + P'·β²·sin²θ.

    The second-order RMS light-speed law (Mansouri–Sexl test theory, recalled from memory):
    P' = ½ − β + δ, iso = β − α − 1.  The out and back legs (θ and θ + π) share sin²θ.
    """
    s = 1.0 + iso * v_over_c**2 + p_prime * v_over_c**2 * math.sin(psi) ** 2
    return 2 * L / s


def test_rms_amplitude_against_direct_two_way_speed_model():
    beta_v = 1e-3
    psi = np.linspace(0, np.pi, 16, endpoint=False)
    app = Apparatus(1.0, 1.0)
    for P in (-0.5, -0.2, 0.0, 0.3):
        p_prime = -P
        y = np.array([_rms_round_trip(p, beta_v, p_prime, iso=0.7) - _rms_round_trip(p + np.pi / 2, beta_v, p_prime, iso=0.7)
                      for p in psi])
        c2, _ = _cos2_coefficient(psi, y)
        expected = app.rms_amplitude(P, beta_v * C)
        assert abs(c2) == pytest.approx(expected, rel=1e-5, abs=1e-15)


def test_rms_classical_and_relativistic_limits_and_bound():
    app = Apparatus(11.0, 550e-9)
    v = 369.82e3
    # Galilean (P = -1/2) is the classical wind; special relativity (P = 0) predicts nothing.
    assert app.rms_amplitude(-0.5, v) == pytest.approx(app.wind_amplitude(v), rel=1e-15)
    assert app.rms_amplitude(0.0, v) == 0.0
    # the amplitude of the classical wind bounds |P| at exactly 1/2
    assert app.rms_bound(app.wind_amplitude(v), v) == pytest.approx(0.5, rel=1e-15)
    # bound and amplitude are inverse maps
    assert app.rms_amplitude(app.rms_bound(1e-3, v), v) == pytest.approx(1e-3, rel=1e-13)
    with pytest.raises(ValueError):
        app.rms_bound(1e-3, 0.0)


# ---------------------------------------------------------------- construction
def test_from_mapping_and_round_trip():
    d = {"arm_length_m": 11.0, "wavelength_m": 5.5e-7, "signal": "fringe", "folds": 8, "physical_arm_m": 1.375,
         "name": "invented bench A"}
    app = Apparatus.from_mapping(d)
    assert app.arm_length_m == 11.0 and app.folds == 8 and app.name == "invented bench A"
    again = Apparatus.from_mapping(json.loads(app.to_json()))
    assert again == app
    assert "effective (folded) arm length" in str(app)
    assert "<table>" in app._repr_html_()


def test_physical_arm_times_folds_must_agree():
    with pytest.raises(ValueError, match=r"arm_length_m = 11 m .*physical_arm_m × folds = 1\.2 m × 8 = 9\.6 m"):
        Apparatus.from_mapping({"arm_length_m": 11.0, "wavelength_m": 5.5e-7, "folds": 8, "physical_arm_m": 1.2})
    # within the manifest reader's relative 1e-3 (rounded provenance numbers) is accepted
    assert Apparatus(11.0, 5.5e-7, folds=8, physical_arm_m=1.3751).folds == 8
    with pytest.raises(ValueError, match="give arm_length_m"):
        Apparatus.from_mapping({"wavelength_m": 5.5e-7, "folds": 8, "physical_arm_m": 1.2})


@pytest.mark.parametrize(
    "d, match",
    [
        ({"arm_length": 11.0, "wavelength_m": 5.5e-7}, "unknown"),
        ({"arm_length_m": 11.0}, "wavelength_m"),
        ({"arm_length_m": -1.0, "wavelength_m": 5.5e-7}, "positive"),
        ({"arm_length_m": 11.0, "wavelength_m": 5.5e-7, "signal": "phase"}, "signal"),
        ({"arm_length_m": 11.0, "wavelength_m": 5.5e-7, "readout_sign": 2}, "readout_sign"),
    ],
)
def test_from_mapping_rejects_bad_input(d, match):
    with pytest.raises(ValueError, match=match):
        Apparatus.from_mapping(d)


def test_readout_sign_and_frozen():
    app = Apparatus(1.0, 1e-6, readout_sign=-1)
    assert app.readout_sign == -1
    # amplitudes do not depend on the readout sign
    assert app.wind_amplitude(1e4) == Apparatus(1.0, 1e-6).wind_amplitude(1e4)
    with pytest.raises(Exception):
        app.arm_length_m = 2.0  # frozen
