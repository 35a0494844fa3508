"""The 2×2 covariance of a harmonic's ``(c, s)``: validation, principal axes, few-turn laws.

Every amplitude construction depends on the covariance only through

* its scale ``σ = sqrt(trace/2)`` (the RMS standard deviation of ``c`` and ``s``), which is the
  unit in which belts are built and cached, and
* its shape ``ρ = σ_minor/σ_major`` (ratio of the principal standard deviations), because the
  amplitude ``|(c, s)|`` is invariant under rotations of the plane: a correlated covariance is
  an anisotropic one seen in rotated axes.

Few turns (``dof``)
-------------------
When the covariance was estimated from the scatter of ``N`` per-turn coefficients it has
``dof = N − 1`` degrees of freedom.  With per-turn covariance estimate ``S`` and ``cov = S/N``
the Hotelling statistic of the mean is exact:

    T² = (x̄ − μ)ᵀ cov⁻¹ (x̄ − μ)  ~  2(N − 1)/(N − 2) · F(2, N − 2).

Equivalently ``x̄ − μ`` follows, "as if" ``cov`` were fixed, a bivariate Student law with
``ν = dof − 1`` degrees of freedom and scale matrix ``cov · dof/(dof − 1)``
(:func:`student_law`); that is also the posterior of ``μ`` under a flat prior on ``μ`` and the
Jeffreys prior on the per-turn covariance.  :func:`hotelling_scale` gives the single
covariance inflation that makes a Gaussian construction reproduce the Hotelling quantile at a
chosen confidence level.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np

#: Shapes with σ_minor/σ_major at or above this are treated as isotropic (Rice law).
ISOTROPIC_RHO = 0.999
#: Most elongated shape accepted (σ_minor/σ_major).  Beyond it the covariance is numerically
#: singular: one coefficient is fixed by the design and a one-dimensional analysis is needed.
MIN_RHO = 1e-3


@dataclass(frozen=True)
class CovarianceShape:
    """A validated covariance of ``(c, s)`` in normal form (see module docstring)."""

    matrix: tuple[tuple[float, float], tuple[float, float]]
    sigma: float
    sigma_major: float
    sigma_minor: float
    angle: float  # direction of the major axis in the (c, s) plane, radians

    @property
    def rho(self) -> float:
        return self.sigma_minor / self.sigma_major

    @property
    def isotropic(self) -> bool:
        return self.rho >= ISOTROPIC_RHO

    @property
    def array(self) -> np.ndarray:
        return np.array(self.matrix, dtype=float)

    def principal(self, c, s):
        """Coordinates of ``(c, s)`` along the (major, minor) axes, in units of ``sigma``."""
        ca, sa = math.cos(self.angle), math.sin(self.angle)
        c = np.asarray(c, dtype=float)
        s = np.asarray(s, dtype=float)
        return (ca * c + sa * s) / self.sigma, (-sa * c + ca * s) / self.sigma

    def unit_axes(self) -> tuple[float, float]:
        """Principal standard deviations in units of ``sigma`` (``s1² + s2² = 2``)."""
        return self.sigma_major / self.sigma, self.sigma_minor / self.sigma


def covariance_shape(cov) -> CovarianceShape:
    """Validate a 2×2 covariance of ``(c, s)`` and return its :class:`CovarianceShape`."""
    arr = np.asarray(cov, dtype=float)
    if arr.shape != (2, 2):
        raise ValueError(f"cov must be the 2x2 covariance of (c, s), got shape {arr.shape}")
    if not np.all(np.isfinite(arr)):
        raise ValueError("cov must be finite")
    scale = max(abs(arr[0, 0]), abs(arr[1, 1]), 1e-300)
    if abs(arr[0, 1] - arr[1, 0]) > 1e-9 * scale:
        raise ValueError("cov must be symmetric")
    arr = 0.5 * (arr + arr.T)
    vals, vecs = np.linalg.eigh(arr)
    if vals[0] <= 0:
        raise ValueError("cov must be positive definite (both principal variances > 0)")
    major = vecs[:, 1]
    rho = math.sqrt(vals[0] / vals[1])
    if rho < MIN_RHO:
        raise ValueError(
            f"cov is nearly singular (sigma_minor/sigma_major = {rho:.3g} < {MIN_RHO}); "
            "one coefficient is fixed by the design, so quote a one-dimensional limit instead"
        )
    return CovarianceShape(
        matrix=((float(arr[0, 0]), float(arr[0, 1])), (float(arr[1, 0]), float(arr[1, 1]))),
        sigma=math.sqrt(0.5 * (vals[0] + vals[1])),
        sigma_major=math.sqrt(vals[1]),
        sigma_minor=math.sqrt(vals[0]),
        angle=math.atan2(major[1], major[0]),
    )


def with_min_rho(shape: CovarianceShape, min_rho: float) -> CovarianceShape:
    """``shape`` with its minor-axis variance raised so that ``ρ ≥ min_rho`` (a larger covariance)."""
    if shape.rho >= min_rho:
        return shape
    ca, sa = math.cos(shape.angle), math.sin(shape.angle)
    minor = np.array([-sa, ca])
    extra = (min_rho * shape.sigma_major) ** 2 - shape.sigma_minor**2
    return covariance_shape(shape.array + extra * np.outer(minor, minor))


def check_dof(dof):
    """``None`` or an int ≥ 2 (at least three turns are needed for a Hotelling law)."""
    if dof is None:
        return None
    if isinstance(dof, bool) or not isinstance(dof, (int, np.integer)) or int(dof) < 2:
        raise ValueError(f"dof must be None or an integer >= 2 (number of turns − 1), not {dof!r}")
    return int(dof)


def student_law(dof: int) -> tuple[int, float]:
    """``(ν, k)``: ``x̄ − μ`` ~ bivariate Student with ``ν = dof − 1`` and scale ``k · cov``.

    With ``k = dof/(dof − 1)`` the quadratic form ``(x̄−μ)ᵀ cov⁻¹ (x̄−μ)`` has exactly the
    Hotelling law ``2 dof/(dof − 1) · F(2, dof − 1)`` (a bivariate Student's form divided by 2
    is ``F(2, ν)``).
    """
    return dof - 1, dof / (dof - 1)


@functools.lru_cache(maxsize=256)
def hotelling_scale(dof: int, confidence_level: float) -> float:
    """Covariance inflation ``T²_CL / χ²_{2,CL}`` matching the Hotelling quantile at ``CL``."""
    from scipy import stats

    t2 = 2.0 * dof / (dof - 1) * stats.f.ppf(confidence_level, 2, dof - 1)
    return float(t2 / stats.chi2.ppf(confidence_level, 2))
