r"""The result of a sidereal/annual analysis: :class:`SkyFit`, and the checks every route shares.

A :class:`SkyFit` holds the estimates of the model's parameters (SME: ``e_XY e_XZ e_YZ e_XX-YY
e_ZZ o_XY o_XZ o_YZ`` for ``κ̃_e−``, ``κ̃_o+`` in the sun-centred frame; RMS: ``P_MM``), their
covariance from the scatter of segments, the correlation matrix, central intervals (the
parameters are signed), the span and the notes that qualify them.

Span
----
Within a day every sidereal quadrature measures one component of the sun-frame tensor
``K = κ̃_e− + β⃗ kᵀ + k β⃗ᵀ``: ``κ̃_e−`` plus ``β⊕`` times a fixed mix of ``κ̃_o+`` set by the orbital
velocity at that time of year.  Only the annual change of ``β⃗⊕`` separates the two, so over a
span short against a year they are nearly degenerate.  :func:`eo_correlation` measures the
largest |correlation| between an ``e`` and an ``o`` estimate; above :data:`EO_WARN` the result
carries a note and :func:`span_warnings` issues a ``FitWarning`` recommending the combined fit
(``combined=True``: only ``κ̃_e−`` free; each estimate then measures ``e + A·o`` with the alias
matrix ``A`` recorded).

Solar day
---------
The ``κ̃_o+`` terms reach the 1w quadratures through ``β⃗⊕(W)``, i.e. at ``ω ± Ω⊕``.  The lower
sideband ``ω − Ω⊕`` is the solar-day frequency, where daily thermal and tilt cycles of a
laboratory live; a note says so whenever ``κ̃_o+`` is estimated.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from ..core.errors import FitWarning
from ..core.render import Described, Summary, fmt
from ..hypothesis.sidereal import MODEL_NAMES

__all__ = ["SkyFit", "EO_WARN", "eo_correlation", "span_warnings", "correlation_from_cov"]

#: Above this largest |corr(e, o)| the result warns that the span cannot separate κ̃_e− from κ̃_o+.
EO_WARN = 0.8

SOLAR_DAY_NOTE = ("the lower annual sideband of the 1w terms (ω − Ω⊕) is the solar-day frequency: daily "
                  "thermal and tilt cycles of the laboratory feed the κ̃_o+ estimates; check the per-turn B, C "
                  "for a solar-day term")


def correlation_from_cov(cov) -> np.ndarray:
    cov = np.asarray(cov, dtype=float)
    d = np.sqrt(np.diag(cov))
    with np.errstate(invalid="ignore", divide="ignore"):
        r = cov / np.outer(d, d)
    np.fill_diagonal(r, 1.0)
    return r


def eo_correlation(names, corr) -> tuple[float, str | None, str | None]:
    """Largest |correlation| between an ``e_*`` and an ``o_*`` estimate, with the two names."""
    names = list(names)
    best, pair = 0.0, (None, None)
    for i, a in enumerate(names):
        for j, b in enumerate(names):
            if a.startswith("e_") and b.startswith("o_") and abs(corr[i, j]) > best:
                best, pair = float(abs(corr[i, j])), (a, b)
    return best, pair[0], pair[1]


@dataclass(frozen=True, eq=False)
class SkyFit(Described):
    """Estimates of the SME or RMS parameters from a campaign.

    ``names`` are the estimated parameters (in the model's order), ``estimate`` and ``cov`` their
    values and covariance (jackknife over segments, or the day-to-day scatter), ``dof`` the degrees
    of freedom of that covariance.  Parameters of the model not estimated (``e_ZZ`` unless
    ``use_c0``; the ``o_*`` in a combined fit) are listed in ``fixed``.
    """

    model: str
    route: str
    names: tuple[str, ...]
    estimate: np.ndarray = field(repr=False)
    cov: np.ndarray = field(repr=False)
    dof: int = 0
    span_days: float = 0.0
    n_turns: int = 0
    n_segments: int = 0
    segments: str = "day"
    use_c0: bool = False
    combined: bool = False
    weights: str = "segment"
    orbit: str = "circular"
    pair: bool = True
    confidence_level: float = 0.95
    first_unix: float = math.nan
    last_unix: float = math.nan
    latitudes_deg: tuple[float, ...] = ()
    offsets: Mapping[str, Any] = field(default_factory=dict, repr=False)
    cov_white: np.ndarray | None = field(default=None, repr=False)
    alias: np.ndarray | None = field(default=None, repr=False)
    dropped: tuple[tuple[str, int], ...] = ()
    notes: tuple[str, ...] = ()
    seed: int | None = None

    def __post_init__(self):
        for name in ("estimate", "cov", "cov_white", "alias"):
            v = getattr(self, name)
            if v is not None:
                a = np.array(v, dtype=float)
                a.setflags(write=False)
                object.__setattr__(self, name, a)
        if self.cov.shape != (len(self.names),) * 2 or self.estimate.shape != (len(self.names),):
            raise ValueError("estimate and cov must match the estimated parameters")

    # ------------------------------------------------------------------ derived
    @property
    def all_names(self) -> tuple[str, ...]:
        return MODEL_NAMES[self.model]

    @property
    def fixed(self) -> tuple[str, ...]:
        return tuple(n for n in self.all_names if n not in self.names)

    @property
    def sigma(self) -> np.ndarray:
        return np.sqrt(np.diag(self.cov))

    @property
    def correlation(self) -> np.ndarray:
        return correlation_from_cov(self.cov)

    @property
    def sigma_white(self) -> np.ndarray | None:
        """σ from the white-noise (within-segment) covariance, scaled by the residual χ²/ν."""
        return None if self.cov_white is None else np.sqrt(np.diag(self.cov_white))

    @property
    def design_correlation(self) -> np.ndarray:
        """Correlation matrix of the white-noise covariance: what the span and coverage can separate,
        free of the sampling noise of the scatter estimate (falls back to :attr:`correlation`)."""
        return self.correlation if self.cov_white is None else correlation_from_cov(self.cov_white)

    @property
    def eo_correlation(self) -> tuple[float, str | None, str | None]:
        """Largest |corr(e, o)| of :attr:`design_correlation`, with the two names."""
        return eo_correlation(self.names, self.design_correlation)

    def as_dict(self) -> dict[str, float]:
        return dict(zip(self.names, (float(v) for v in self.estimate)))

    def __getitem__(self, name: str) -> tuple[float, float]:
        """``(estimate, sigma)`` of one parameter."""
        i = self.names.index(name)
        return float(self.estimate[i]), float(self.sigma[i])

    def interval(self, name: str, confidence_level: float | None = None):
        """Central interval of one parameter (a :class:`~nullfit.limits.result.Limit`).

        ``x̂ ± t σ`` with the Student-t quantile on the covariance's ``dof`` (the σ come from the
        scatter of a finite number of segments); the normal quantile when ``dof`` is 0 (unknown).
        """
        import dataclasses

        from scipy import stats

        from ..limits import scalar_limit

        est, sig = self[name]
        cl = self.confidence_level if confidence_level is None else confidence_level
        lim = scalar_limit(est, sig, method="central", confidence_level=cl, quantity=name, nonnegative=False)
        if self.dof <= 0:
            return lim
        t = float(stats.t.ppf(0.5 + lim.confidence_level / 2, self.dof))
        return dataclasses.replace(lim, lower=est - t * sig, upper=est + t * sig, dof=int(self.dof),
                                   notes=(f"central interval x̂ ± {t:.4g}σ (Student-t on {self.dof} dof: σ from "
                                          f"the scatter of {self.n_segments} segments; signed parameter)",))

    def intervals(self, confidence_level: float | None = None) -> dict:
        return {n: self.interval(n, confidence_level) for n in self.names}

    # ------------------------------------------------------------------ rendering
    def convention(self) -> str:
        """What the parameters are, in one line (text and JSON)."""
        what = ("photon-sector SME coefficients in the Sun-centred celestial equatorial frame: e_JK the "
                "components of κ̃_e− (e_XX-YY = κ̃^XX − κ̃^YY), o_JK of κ̃_o+" if self.model == "sme" else
                "Robertson–Mansouri–Sexl P_MM = δ − β + ½ (0 in special relativity)")
        return (f"{what}; dimensionless; ± is 1σ; intervals are central, Student-t on {self.dof} dof, at "
                f"{self.confidence_level:.0%} CL; C0/B0 offsets in Δν/ν (mean ± its standard error)")

    def to_dict(self) -> dict:
        params = {}
        lims = self.intervals()
        for n in self.all_names:
            if n in self.names:
                est, sig = self[n]
                lim = lims[n]
                params[n] = {"estimate": est, "sigma": sig, "lower": lim.lower, "upper": lim.upper,
                             "estimated": True}
                if self.cov_white is not None:
                    params[n]["sigma_white"] = float(self.sigma_white[self.names.index(n)])
            else:
                params[n] = {"estimate": None, "sigma": None, "lower": None, "upper": None, "estimated": False}
        eo = self.eo_correlation
        d = {"model": self.model, "route": self.route, "span_days": self.span_days, "n_turns": self.n_turns,
             "n_segments": self.n_segments, "segments": self.segments, "dof": self.dof,
             "confidence_level": self.confidence_level, "parameters": params,
             "correlation_names": list(self.names), "correlation": self.correlation, "covariance": self.cov,
             "design_correlation": self.design_correlation,
             "use_c0": self.use_c0, "combined": self.combined, "weights": self.weights, "orbit": self.orbit,
             "pair": self.pair, "first_unix": self.first_unix, "last_unix": self.last_unix,
             "latitudes_deg": list(self.latitudes_deg), "offsets": dict(self.offsets),
             "max_eo_correlation": eo[0] if self.model == "sme" else None,
             "dropped": dict(self.dropped), "notes": list(self.notes), "seed": self.seed,
             "convention": self.convention(), "offset_unit": "fractional (Δν/ν)"}
        if self.alias is not None:
            o_names = [n for n in self.all_names if n.startswith("o_")]
            d["alias"] = {n: dict(zip(o_names, map(float, row))) for n, row in zip(self.names, self.alias)}
        return d

    def summary(self) -> Summary:
        cl = self.confidence_level
        lims = self.intervals()
        rows = [("route", self.route, ""), ("span", self.span_days, "days"), ("turns", self.n_turns, ""),
                (f"segments ({self.segments})", self.n_segments, ""), ("dof of the covariance", self.dof, "")]
        for n in self.names:
            est, sig = self[n]
            lim = lims[n]
            rows.append((n, f"{fmt(est, 3)} ± {fmt(sig, 2)}   {cl:.0%} CL [{fmt(lim.lower, 3)}, {fmt(lim.upper, 3)}]",
                         "(dimensionless)"))
        for n in self.fixed:
            rows.append((n, "not estimated", ""))
        if self.model == "sme" and len(self.names) > 1:
            eo = self.eo_correlation
            if eo[1] is not None:
                rows.append(("largest e–o correlation", f"{eo[0]:.3f} ({eo[1]}, {eo[2]})", ""))
        for key, val in self.offsets.items():
            if val is not None:
                rows.append((f"{key} offsets (mean ± standard error)", f"{fmt(val['mean'], 3)} ± {fmt(val['sigma'], 2)}",
                             "Δν/ν"))
        title = f"Sky fit ({self.model.upper()}, {self.route} route)"
        notes = [self.convention()] + list(self.notes) + [f"dropped: {v} {k}" for k, v in self.dropped if v]
        return Summary(title, tuple(rows), tuple(notes))

    def __repr__(self) -> str:
        return (f"SkyFit({self.model}, {self.route}, {len(self.names)} parameters, {self.n_turns} turns, "
                f"{self.span_days:.1f} days)")


def common_notes(model: str, names, corr, *, span_days: float, combined: bool, use_c0: bool) -> list[str]:
    """The notes every route attaches: span degeneracy, solar-day sideband, nuisance C₀/B₀."""
    notes = []
    if model == "sme":
        if not use_c0:
            notes.append("C₀ and B₀ are nuisance (per-segment offsets): e_ZZ is not estimated (use_c0=True uses "
                         "C₀ for it, trusting that no lab-fixed systematic sits there)")
        else:
            notes.append("C₀ used for e_ZZ: a lab-fixed systematic in C₀ would bias e_ZZ; B₀ stays nuisance")
        if not combined:
            eo, a, b = eo_correlation(names, corr)
            if eo > EO_WARN:
                notes.append(f"span {span_days:.1f} days: κ̃_e− and κ̃_o+ are nearly degenerate (largest e–o "
                             f"correlation {eo:.3f}, {a} and {b}); quote the combined fit (combined=True) or "
                             "extend the campaign towards a year")
            notes.append(SOLAR_DAY_NOTE)
        else:
            notes.append("combined fit: κ̃_o+ fixed at 0; each e estimate measures e + Σ alias·o (see alias), "
                         "the combination the span constrains")
    else:
        notes.append("C₀ and B₀ are nuisance (per-segment offsets)" if not use_c0 else
                     "C₀ used in the fit; B₀ is nuisance")
    return notes


def span_warnings(fit: SkyFit) -> None:
    """Issue a ``FitWarning`` when the span cannot separate κ̃_e− from κ̃_o+ (see module docstring)."""
    if fit.model != "sme" or fit.combined:
        return
    eo, a, b = fit.eo_correlation
    if eo > EO_WARN:
        warnings.warn(f"span of {fit.span_days:.1f} days: κ̃_e− and κ̃_o+ are nearly degenerate (largest e–o "
                      f"correlation {eo:.3f} between {a} and {b}); use the combined fit (combined=True)",
                      FitWarning, stacklevel=3)


def offset_summary(values) -> dict | None:
    """Mean of per-segment offsets and its σ from their scatter (None with fewer than 2)."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size < 2:
        return None
    return {"mean": float(v.mean()), "sigma": float(v.std(ddof=1) / math.sqrt(v.size)), "n": int(v.size)}


def offset_notes(offsets: Mapping[str, Any]) -> list[str]:
    """A note when the mean B₀ offset (no sky signal at this order) differs from zero."""
    b0 = offsets.get("B0")
    if b0 and b0["sigma"] > 0 and abs(b0["mean"]) > 3.0 * b0["sigma"]:
        return [f"null check failed: the mean B₀ offset is {b0['mean'] / b0['sigma']:+.1f} σ from zero — a "
                "lab-fixed 2θ systematic (it puts a C₀ of similar size too)"]
    if b0:
        return [f"null check: mean B₀ offset {b0['mean'] / b0['sigma']:+.1f} σ from zero (no sky signal at this "
                "order)" if b0["sigma"] > 0 else "null check: B₀ offsets all equal"]
    return []


def free_names(model: str, *, use_c0: bool, combined: bool) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """(estimated parameters, parameters whose aliases a combined fit records)."""
    names = MODEL_NAMES[model]
    if model == "rms":
        if combined:
            raise ValueError("combined=True applies to the SME (κ̃_e− with κ̃_o+ folded in); RMS has one parameter")
        return names, ()
    e = tuple(n for n in names if n.startswith("e_") and (use_c0 or n != "e_ZZ"))
    o = tuple(n for n in names if n.startswith("o_"))
    return (e, o) if combined else (e + o, ())


def solve_scaled(A: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, float]:
    """Solve ``A x = b`` (stacked allowed) after scaling by ``sqrt(diag A)``; also the largest
    condition number of the scaled matrices."""
    d = np.sqrt(np.abs(np.diagonal(A, axis1=-2, axis2=-1)))
    d = np.where(d > 0, d, 1.0)
    As = A / (d[..., :, None] * d[..., None, :])
    cond = float(np.max(np.linalg.cond(As)))
    x = np.linalg.solve(As, (b / d)[..., None])[..., 0] / d
    return x, cond
