"""The :class:`Limit` result (and the Bayesian :class:`Posterior` it may carry)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..conventions import amplitude_phase, peak_to_peak
from ..summary import Described, Summary

METHOD_TITLES = {
    "feldman-cousins": "Unified (Feldman–Cousins) interval",
    "neyman": "Classical one-sided Neyman upper limit",
    "bayes": "Bayesian credible upper limit",
    "bootstrap": "Block-bootstrap percentile upper limit",
}


@dataclass(frozen=True, eq=False)
class Posterior:
    """Posterior density of the amplitude on a grid (for plotting).

    ``amplitude`` and ``density`` are in the units of the estimate (density per unit
    amplitude, normalised to 1 on the grid).
    """

    amplitude: np.ndarray = field(repr=False)
    density: np.ndarray = field(repr=False)
    prior: str = "plane"

    @property
    def cdf(self) -> np.ndarray:
        from scipy.integrate import cumulative_trapezoid

        c = cumulative_trapezoid(self.density, self.amplitude, initial=0.0)
        return c / c[-1]


def _f(x):
    return None if x is None or (isinstance(x, float) and math.isnan(x)) else float(x)


@dataclass(frozen=True)
class Limit(Described):
    """A confidence (or credible) statement on a harmonic amplitude ``A = hypot(c, s)``.

    ``lower``/``upper`` are *amplitudes* (not peak-to-peak; see :attr:`upper_peak_to_peak`).
    One-sided methods report ``lower = 0``.  An empty Neyman set has ``empty=True`` and
    ``lower = upper = None``.  ``cov`` is the covariance of ``(c, s)`` that was supplied (for
    the bootstrap: the bootstrap covariance of the replicates); ``sigma = sqrt(trace/2)``.
    """

    method: str
    confidence_level: float
    lower: float | None
    upper: float | None
    amplitude: float
    c: float
    s: float
    cov: tuple[tuple[float, float], tuple[float, float]]
    sigma: float
    empty: bool = False
    harmonic: int | None = None
    unit: str = ""
    prior: str | None = None
    block_length: int | None = None
    replicates: int | None = None
    scheme: str | None = None
    seed: int | None = None
    dof: int | None = None
    notes: tuple[str, ...] = ()
    posterior: Posterior | None = field(default=None, repr=False, compare=False)

    @property
    def upper_peak_to_peak(self) -> float | None:
        """Upper limit on the peak-to-peak shift between orientations 90° apart (``2·upper``)."""
        return None if self.upper is None else peak_to_peak(self.upper)

    @property
    def two_sided(self) -> bool:
        """True when the interval excludes zero (``lower > 0``)."""
        return self.lower is not None and self.lower > 0

    @property
    def phase_deg(self) -> float | None:
        """Phase of the estimate in degrees of table angle, ``[0, 360/k)`` (needs ``harmonic``)."""
        if self.harmonic is None:
            return None
        return amplitude_phase(self.c, self.s, self.harmonic)[1]

    def to_dict(self) -> dict:
        return {
            "method": self.method,
            "confidence_level": self.confidence_level,
            "quantity": "amplitude",
            "lower": _f(self.lower),
            "upper": _f(self.upper),
            "upper_peak_to_peak": _f(self.upper_peak_to_peak),
            "empty": bool(self.empty),
            "amplitude": self.amplitude,
            "c": self.c,
            "s": self.s,
            "harmonic": self.harmonic,
            "unit": self.unit,
            "cov": [list(r) for r in self.cov],
            "sigma": self.sigma,
            "dof": self.dof,
            "prior": self.prior,
            "block_length": self.block_length,
            "replicates": self.replicates,
            "scheme": self.scheme,
            "seed": self.seed,
            "notes": list(self.notes),
        }

    def summary(self) -> Summary:
        k = f"{self.harmonic}θ " if self.harmonic else ""
        title = f"{METHOD_TITLES.get(self.method, self.method)} on the {k}amplitude ({self.confidence_level:.4g} CL)"
        u = self.unit
        rows = [
            ("method", self.method, ""),
            ("confidence level", self.confidence_level, ""),
            ("observed amplitude Â", self.amplitude, u),
            ("sigma = sqrt(trace(cov)/2)", self.sigma, u),
        ]
        if self.harmonic:
            rows.append(("observed phase", self.phase_deg, "deg"))
        if self.empty:
            rows.append(("interval", "empty (no amplitude ≥ 0 is compatible at this CL)", ""))
        else:
            rows += [
                ("lower (amplitude)", self.lower, u),
                ("upper (amplitude)", self.upper, u),
                ("upper (peak-to-peak = 2A)", self.upper_peak_to_peak, u),
            ]
        if self.dof is not None:
            rows.append(("covariance dof (turns − 1)", self.dof, ""))
        if self.prior is not None:
            rows.append(("prior", self.prior, ""))
        if self.scheme is not None:
            rows += [
                ("block scheme", self.scheme, ""),
                ("block length", self.block_length, "turns"),
                ("replicates", self.replicates, ""),
            ]
        if self.seed is not None:
            rows.append(("seed", self.seed, ""))
        return Summary(title=title, rows=tuple(rows), notes=self.notes)
