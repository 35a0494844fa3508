"""The unified belt curves (nullfit.limits.unified.belt_curves) against the Rice law (scipy.stats.rice)."""

import numpy as np
import pytest
from scipy import stats

from nullfit.limits.unified import belt_curves


def test_belt_acceptance_probability_rice():
    # isotropic σ = 1: each drawn acceptance interval [x1, x2] holds probability CL under the
    # Rice law of Â at that true amplitude (scipy.stats.rice as the reference)
    A, x1, x2, sig, _ = belt_curves(np.eye(2), 0.9, amplitude_max=4.0)
    assert sig == pytest.approx(1.0)
    pick = np.linspace(0, A.size - 1, 25).astype(int)
    prob = stats.rice.cdf(x2[pick], A[pick]) - stats.rice.cdf(x1[pick], A[pick])
    np.testing.assert_allclose(prob, 0.9, atol=2e-4)
