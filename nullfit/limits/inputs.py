"""What the limit methods take: a harmonic estimate, from a fit or from bare numbers."""

from __future__ import annotations

import math

from ..fitting.estimate import HarmonicEstimate
from .covariance import check_dof


class _Keep:
    def __repr__(self) -> str:
        return "KEEP"


#: Default of ``dof``: keep the estimate's own (``None`` for a bare ``(c, s, cov)``); pass
#: ``dof=None`` explicitly to treat an estimated covariance as exact.
KEEP = _Keep()


def as_estimate(c, s=None, cov=None, *, dof=KEEP, turns=None, harmonic=None, unit=None) -> HarmonicEstimate:
    """A :class:`HarmonicEstimate` from an estimate (returned as is, with ``dof``/``turns``/``unit``
    replaced where given) or from ``c, s, cov``."""
    if isinstance(c, HarmonicEstimate):
        if s is not None or cov is not None:
            raise TypeError("give a HarmonicEstimate or (c, s, cov), not both")
        est = c
        if dof is KEEP and turns is None and unit is None and harmonic is None:
            return est
        return HarmonicEstimate(est.k if harmonic is None else harmonic, est.c, est.s, est.cov,
                                est.dof if dof is KEEP else check_dof(dof), est.unit if unit is None else str(unit),
                                est.method, est.turns if turns is None else turns)
    if dof is KEEP:
        dof = None
    if s is None or cov is None:
        raise TypeError("give a HarmonicEstimate (e.g. fit.harmonic(2)) or all of c, s and cov")
    c, s = float(c), float(s)
    if not (math.isfinite(c) and math.isfinite(s)):
        raise ValueError("c and s must be finite numbers")
    return HarmonicEstimate(harmonic, c, s, cov, check_dof(dof), "" if unit is None else str(unit), "", turns)
