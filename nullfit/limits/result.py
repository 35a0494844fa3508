"""The :class:`Limit` result (and the Bayesian :class:`Posterior` it may carry).

Every limit method returns a `Limit`, whatever it bounds: the amplitude ``A = hypot(c, s)`` of a
harmonic (``quantity="amplitude"``) or a one-dimensional parameter such as the scale κ of a sky
template (``quantity`` names it).  ``cov`` is always a 2-D array: the 2×2 covariance of
``(c, s)``, or the 1×1 variance of a scalar estimate.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..core.conventions import amplitude_phase, peak_to_peak
from ..core.render import Described, Summary, fmt

METHOD_TITLES = {
    "feldman-cousins": "Unified (Feldman–Cousins) interval",
    "neyman": "Classical one-sided Neyman upper limit",
    "bayes": "Bayesian credible upper limit",
    "bootstrap": "Block-bootstrap percentile upper limit",
    "central": "Central (two-sided) interval",
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


@dataclass(frozen=True, eq=False)
class Limit(Described):
    """A confidence (or credible) statement on a harmonic amplitude or on a scalar parameter.

    ``lower``/``upper`` bound ``quantity``; for an amplitude they are *amplitudes* (not
    peak-to-peak; see :attr:`upper_peak_to_peak`).  One-sided methods report ``lower = 0``.  An
    empty Neyman set has ``empty=True``, ``lower = upper = None`` and ``empty_reason`` saying why.
    ``estimate`` is the observed value (``Â`` or the scalar).  ``cov`` is the covariance the
    method used (for the bootstrap, that of its replicates); ``sigma`` is the one σ the method
    worked in, named by ``sigma_label``.
    """

    method: str
    confidence_level: float
    lower: float | None
    upper: float | None
    estimate: float
    cov: np.ndarray = field(repr=False)
    sigma: float = math.nan
    sigma_label: str = "sqrt(trace(cov)/2)"
    quantity: str = "amplitude"
    c: float | None = None
    s: float | None = None
    empty: bool = False
    empty_reason: str | None = None
    harmonic: int | None = None
    unit: str = ""
    prior: str | None = None
    block_length: int | None = None
    replicates: int | None = None
    scheme: str | None = None
    seed: int | None = None
    dof: int | None = None
    notes: tuple[str, ...] = ()
    posterior: Posterior | None = field(default=None, repr=False)

    def __post_init__(self):
        cov = np.atleast_2d(np.array(self.cov, dtype=float))
        cov.setflags(write=False)
        object.__setattr__(self, "cov", cov)
        object.__setattr__(self, "notes", tuple(self.notes))

    @property
    def is_amplitude(self) -> bool:
        return self.quantity == "amplitude"

    @property
    def upper_peak_to_peak(self) -> float | None:
        """Upper limit on the peak-to-peak shift between orientations 90° apart (``2·upper``);
        ``None`` for scalar parameters."""
        if self.upper is None or not self.is_amplitude:
            return None
        return peak_to_peak(self.upper)

    @property
    def phase_deg(self) -> float | None:
        """Phase of the estimate in degrees of table angle, ``[0, 360/k)`` (needs ``harmonic``)."""
        if self.harmonic is None or self.c is None:
            return None
        return amplitude_phase(self.c, self.s, self.harmonic)[1]

    @property
    def interval_text(self) -> str:
        """The statement in one line, e.g. ``"< 2.1e-03 fringe (amplitude)"``."""
        u = f" {self.unit}" if self.unit else ""
        if self.empty:
            return "empty set (" + (self.empty_reason or "no value is compatible at this CL") + ")"
        if self.lower not in (None, 0.0) or self.method == "central":
            return f"[{fmt(self.lower)}, {fmt(self.upper)}]{u}"
        return f"< {fmt(self.upper)}{u}"

    def to_dict(self) -> dict:
        return {
            "method": self.method,
            "confidence_level": self.confidence_level,
            "quantity": self.quantity,
            "lower": _f(self.lower),
            "upper": _f(self.upper),
            "upper_peak_to_peak": _f(self.upper_peak_to_peak),
            "empty": bool(self.empty),
            "empty_reason": self.empty_reason,
            "estimate": self.estimate,
            "c": self.c,
            "s": self.s,
            "harmonic": self.harmonic,
            "unit": self.unit,
            "cov": self.cov.tolist(),
            "sigma": self.sigma,
            "sigma_label": self.sigma_label,
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
        what = f"the {k}amplitude" if self.is_amplitude else self.quantity
        title = f"{METHOD_TITLES.get(self.method, self.method)} on {what} ({self.confidence_level:.4g} CL)"
        u = self.unit
        obs = "observed amplitude Â" if self.is_amplitude else f"estimate of {self.quantity}"
        rows = [
            ("method", self.method, ""),
            ("confidence level", self.confidence_level, ""),
            (obs, self.estimate, u),
            (f"σ used: {self.sigma_label}", self.sigma, u),
        ]
        if self.phase_deg is not None:
            rows.append(("observed phase", self.phase_deg, "deg"))
        if self.empty:
            rows.append(("interval", "empty: " + (self.empty_reason or "no value is compatible at this CL"), ""))
        elif self.is_amplitude:
            rows += [
                ("lower (amplitude)", self.lower, u),
                ("upper (amplitude)", self.upper, u),
                ("upper (peak-to-peak = 2A)", self.upper_peak_to_peak, u),
            ]
        else:
            rows += [("lower", self.lower, u), ("upper", self.upper, u)]
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

    def __repr__(self) -> str:
        q = "A" + (str(self.harmonic) if self.harmonic else "") if self.is_amplitude else self.quantity
        return f"Limit({self.method}, {self.confidence_level:.4g} CL: {q} {self.interval_text})"


def estimate_fields(est) -> dict:
    """The `Limit` fields every amplitude method copies from a harmonic estimate."""
    return dict(quantity="amplitude", estimate=est.amplitude, c=est.c, s=est.s, harmonic=est.k, unit=est.unit)
