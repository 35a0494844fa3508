"""One registry of limit methods: a name → the functions that compute it, one signature for all.

Every entry takes ``(estimate, confidence_level, *, rng=None, **options)`` and returns a
:class:`~nullfit.limits.result.Limit`.  The estimate is either a harmonic estimate ``(c, s)`` with
its 2×2 covariance (:class:`nullfit.fitting.estimate.HarmonicEstimate`; the limit bounds the
amplitude) or a :class:`~nullfit.limits.scalar.ScalarEstimate` (one Gaussian parameter, such as
the scale κ of a sky template).  A method that has no meaning for one kind says so.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from . import bayes, bootstrap, neyman, scalar, unified
from .scalar import ScalarEstimate


@dataclass(frozen=True)
class LimitMethod:
    """A limit method: its name, its options, and its function for each kind of estimate."""

    name: str
    title: str
    options: frozenset[str]
    amplitude: Callable | None
    scalar: Callable | None
    scalar_missing: str = ""

    def __call__(self, estimate, confidence_level: float, *, rng=None, **options):
        unknown = set(options) - self.options
        if unknown:
            raise TypeError(f"method {self.name!r} does not take option(s): {', '.join(sorted(unknown))}")
        if isinstance(estimate, ScalarEstimate):
            if self.scalar is None:
                raise ValueError(f"method {self.name!r} is not offered for a single parameter "
                                 f"({estimate.quantity}): {self.scalar_missing}")
            return self.scalar(estimate, confidence_level, rng=rng, **options)
        if self.amplitude is None:
            raise ValueError(f"method {self.name!r} bounds a single signed parameter, not an amplitude")
        return self.amplitude(estimate, confidence_level, rng=rng, **options)


METHODS: dict[str, LimitMethod] = {
    m.name: m for m in (
        LimitMethod("feldman-cousins", "Unified (Feldman–Cousins) interval", frozenset(), unified.limit,
                    scalar.unified),
        LimitMethod("neyman", "Classical one-sided Neyman upper limit", frozenset(), neyman.limit, scalar.neyman),
        LimitMethod("bayes", "Bayesian credible upper limit", frozenset({"prior", "posterior_points"}), bayes.limit,
                    scalar.bayes),
        LimitMethod("bootstrap", "Block-bootstrap percentile upper limit",
                    frozenset({"scheme", "block_length", "replicates", "progress", "interval"}), bootstrap.limit,
                    None, "resampling a handful of runs is not a defensible route; resample turns within runs"),
        LimitMethod("central", "Central (two-sided) interval", frozenset(), None, scalar.central),
    )
}
#: The methods that bound an amplitude, in the order they are shown.
AMPLITUDE_METHODS = tuple(m for m, v in METHODS.items() if v.amplitude is not None)
ALIASES = {"fc": "feldman-cousins", "unified": "feldman-cousins", "feldman_cousins": "feldman-cousins"}


def method_name(method: str) -> str:
    """The registry name of ``method`` (aliases such as ``"fc"`` accepted); ValueError if unknown."""
    m = ALIASES.get(str(method).strip().lower(), str(method).strip().lower())
    if m not in METHODS:
        raise ValueError(f"method must be one of {', '.join(METHODS)}, not {method!r}")
    return m


def get(method: str) -> LimitMethod:
    return METHODS[method_name(method)]
