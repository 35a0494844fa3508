"""Limits on one Gaussian parameter, such as the scale κ of a sky template fitted across runs.

The estimate is ``x̂ ~ N(x, σ²)`` with σ known.  When the parameter is physically
non-negative (``nonnegative=True``, e.g. κ = (v/v_ref)² of the classical wind) the limits are
those of a Gaussian mean with a boundary at zero:

``"feldman-cousins"``
    the unified interval (Feldman & Cousins 1998, the one-dimensional construction of their
    Table X), :func:`nullfit.limits.unified.unified_gaussian_interval`;
``"neyman"``
    the one-sided upper limit ``x̂ + z_CL σ``; empty when that is negative (no value ≥ 0 is
    compatible at this CL);
``"bayes"``
    the credible upper limit for a flat prior on ``x ≥ 0``: a quantile of the normal law
    truncated at zero.

``"central"`` gives the two-sided interval ``x̂ ± z σ`` with ``z = Φ⁻¹((1 + CL)/2)``, for signed
parameters (the Robertson–Mansouri–Sexl combination, the SME coefficients).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..core.conventions import check_confidence_level
from .result import Limit


@dataclass(frozen=True)
class ScalarEstimate:
    """One Gaussian estimate ``value ± sigma`` of a parameter named ``quantity``."""

    value: float
    sigma: float
    quantity: str = "κ"
    unit: str = ""
    nonnegative: bool = True

    def __post_init__(self):
        v, s = float(self.value), float(self.sigma)
        if not (math.isfinite(v) and math.isfinite(s) and s > 0):
            raise ValueError(f"a scalar estimate needs a finite value and a positive sigma, not {v!r} ± {s!r}")
        object.__setattr__(self, "value", v)
        object.__setattr__(self, "sigma", s)


def _base(est: ScalarEstimate, method: str, cl: float, lower, upper, notes, *, empty: bool = False) -> Limit:
    return Limit(method=method, confidence_level=cl, lower=lower, upper=upper, estimate=est.value,
                 cov=[[est.sigma ** 2]], sigma=est.sigma, sigma_label="σ of the estimate", quantity=est.quantity,
                 unit=est.unit, empty=empty, empty_reason=notes[-1] if empty else None, notes=tuple(notes))


def _needs_boundary(est: ScalarEstimate, method: str) -> None:
    if not est.nonnegative:
        raise ValueError(f"method {method!r} bounds a non-negative parameter; {est.quantity} is signed: "
                         "use method='central'")


def unified(est: ScalarEstimate, confidence_level: float, *, rng=None) -> Limit:
    from .unified import unified_gaussian_interval

    _needs_boundary(est, "feldman-cousins")
    cl = check_confidence_level(confidence_level)
    lo, up = unified_gaussian_interval(est.value, confidence_level=cl, sigma=est.sigma)
    return _base(est, "feldman-cousins", cl, lo, up,
                 [f"unified interval for a Gaussian mean with a boundary at 0 ({est.quantity} ≥ 0)"])


def neyman(est: ScalarEstimate, confidence_level: float, *, rng=None) -> Limit:
    from scipy import stats

    _needs_boundary(est, "neyman")
    cl = check_confidence_level(confidence_level)
    up = est.value + float(stats.norm.ppf(cl)) * est.sigma
    if up < 0:
        return _base(est, "neyman", cl, None, None,
                     [f"one-sided Neyman limit x̂ + z·σ = {up:.4g} < 0: no {est.quantity} ≥ 0 is compatible at "
                      "this CL (happens in a fraction 1 − CL of experiments at the boundary); quote the unified "
                      "interval instead"], empty=True)
    return _base(est, "neyman", cl, 0.0, up, ["one-sided Neyman upper limit x̂ + z_CL·σ"])


def bayes(est: ScalarEstimate, confidence_level: float, *, rng=None) -> Limit:
    from scipy import stats

    _needs_boundary(est, "bayes")
    cl = check_confidence_level(confidence_level)
    a = -est.value / est.sigma
    up = est.value + est.sigma * float(stats.norm.ppf(stats.norm.cdf(a) + cl * stats.norm.sf(a)))
    return _base(est, "bayes", cl, 0.0, up,
                 [f"credible upper limit, flat prior on {est.quantity} ≥ 0 (normal likelihood truncated at 0)"])


def central(est: ScalarEstimate, confidence_level: float, *, rng=None) -> Limit:
    from scipy import stats

    cl = check_confidence_level(confidence_level)
    z = float(stats.norm.ppf(0.5 + cl / 2))
    return _base(est, "central", cl, est.value - z * est.sigma, est.value + z * est.sigma,
                 [f"central interval x̂ ± {z:.4g}σ (signed parameter)"])
