"""The shared conventions (docs/conventions.md): amplitude, phase, peak-to-peak, rng."""

import numpy as np
import pytest

from nullfit.core.conventions import (
    amplitude_from_peak_to_peak,
    amplitude_phase,
    check_confidence_level,
    cos_sin_from_amplitude_phase,
    make_rng,
    peak_to_peak,
)


@pytest.mark.parametrize("k", [1, 2, 3, 4])
def test_phase_is_angle_of_maximum_and_term_matches(k):
    rng = np.random.default_rng(11)
    theta = np.linspace(0, 2 * np.pi, 7201)
    for c, s in rng.normal(size=(50, 2)):
        amp, phase = amplitude_phase(c, s, k)
        assert 0 <= phase < 360 / k
        term = c * np.cos(k * theta) + s * np.sin(k * theta)
        np.testing.assert_allclose(term, amp * np.cos(k * (theta - np.deg2rad(phase))), atol=1e-12)
        # the maximum of the term sits at θ = φ (modulo 360/k)
        assert np.isclose(c * np.cos(k * np.deg2rad(phase)) + s * np.sin(k * np.deg2rad(phase)), amp)
        np.testing.assert_allclose(cos_sin_from_amplitude_phase(amp, phase, k), (c, s), atol=1e-12)


def test_phase_quadrants_for_second_harmonic():
    # A cos(2(θ − φ)): pure +cos 2θ peaks at 0°, pure +sin 2θ at 45°, −cos 2θ at 90°, −sin 2θ at 135°
    assert amplitude_phase(1.0, 0.0, 2) == (1.0, 0.0)
    assert amplitude_phase(0.0, 1.0, 2) == (1.0, 45.0)
    assert amplitude_phase(-1.0, 0.0, 2) == (1.0, 90.0)
    assert amplitude_phase(0.0, -1.0, 2) == (1.0, 135.0)


def test_peak_to_peak_is_the_shift_between_orientations_90_degrees_apart():
    # y(θ) = A cos 2(θ − φ): y(φ) − y(φ + 90°) = A − (−A) = 2A (common practice: the "shift")
    amp, phi = 0.37, 20.0
    y = lambda th: amp * np.cos(2 * np.deg2rad(th - phi))  # noqa: E731
    assert np.isclose(y(phi) - y(phi + 90.0), peak_to_peak(amp))
    assert np.isclose(amplitude_from_peak_to_peak(peak_to_peak(amp)), amp)


def test_confidence_level_is_not_alpha():
    assert check_confidence_level(0.95) == 0.95
    for bad in (0.0, 1.0, 95, -0.1, float("nan")):
        with pytest.raises(ValueError):
            check_confidence_level(bad)


def test_make_rng_records_seed_and_leaves_global_state_alone():
    state = np.random.get_state()[1].copy()
    g1, s1 = make_rng(123)
    g2, s2 = make_rng(123)
    assert s1 == s2 == 123
    assert g1.normal() == g2.normal()
    g3, s3 = make_rng(None)
    assert isinstance(s3, int)
    assert make_rng(s3)[0].normal() == g3.normal()
    gen = np.random.default_rng(5)
    assert make_rng(gen) == (gen, None)
    with pytest.raises(TypeError):
        make_rng(1.5)
    np.testing.assert_array_equal(np.random.get_state()[1], state)
