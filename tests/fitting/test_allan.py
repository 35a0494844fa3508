"""Allan deviation against allantools (an independent implementation) and the white-noise law."""

import numpy as np
import pytest

from nullfit.fitting.allan import allan_deviation

allantools = pytest.importorskip("allantools")


def test_matches_allantools_oadev():
    rng = np.random.default_rng(3)
    y = rng.normal(size=1000) + np.cumsum(rng.normal(scale=0.05, size=1000))
    ours = allan_deviation(y, tau0_s=60.0)
    taus, adev, _, _ = allantools.oadev(y, rate=1 / 60.0, data_type="freq", taus=ours.tau_s)
    np.testing.assert_allclose(taus, ours.tau_s)
    np.testing.assert_allclose(adev, ours.adev, rtol=1e-10)


def test_white_noise_law():
    # white noise of variance σ²: σ_y(τ = m τ0) = σ / sqrt(m) (IEEE Std 1139; common practice)
    rng = np.random.default_rng(4)
    y = rng.normal(scale=2.0, size=200_000)
    a = allan_deviation(y, 1.0, factors=[1, 4, 16])
    np.testing.assert_allclose(a.adev, 2.0 / np.sqrt([1, 4, 16]), rtol=0.03)


def test_rejects_bad_series():
    with pytest.raises(ValueError):
        allan_deviation([1.0, np.nan, 2.0, 3.0], 1.0)
