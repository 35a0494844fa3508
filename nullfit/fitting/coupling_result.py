"""`CouplingFit`: the result of :func:`nullfit.fitting.coupling.fit_coupling` (both routes)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

from ..core.conventions import check_confidence_level
from ..core.errors import AnalysisError
from ..core.render import Described, Summary, fmt
from .estimate import HarmonicEstimate

MODEL_TEXT = {"scalar": "one factor per channel", "complex": "a gain and a phase per channel",
              "matrix": "a 2×2 matrix per channel"}


def _pm(v, s):
    return f"{fmt(v)} ± {fmt(s)}"


@dataclass(frozen=True, eq=False)
class CouplingFit(Described):
    """Couplings of auxiliary channels into the ``k``θ signal, reading level and turn level.

    ``before`` is the uncorrected estimate (default fit); ``reading`` the route-(a) result
    (``{"estimate", "coef", "sigma", "dof"}`` or ``{"error"}``); ``theta`` the turn-level
    parameters ``(β_c, β_s, K…)`` with covariance ``cov`` on ``dof`` degrees of freedom (``None``
    when a channel is ``degenerate``).  ``channel_estimates`` are the channels' own ``k``θ
    estimates, ``turn_correlation`` the per-turn correlation of each channel's ``k``θ part with
    the signal's (cos and sin pooled, centred), ``vif`` the variance inflation of the corrected
    estimate caused by the correction and ``separation = sqrt(1 − 1/vif)`` the correlation between
    ``β̂`` and the subtracted coupling term.
    """

    source: str
    unit: str
    k: int
    channels: tuple[str, ...]
    model: str
    per: tuple[str, ...]
    before: HarmonicEstimate = field(repr=False)
    channel_estimates: Mapping[str, HarmonicEstimate] = field(repr=False)
    turn_correlation: Mapping[str, float] = field(repr=False)
    n_turns: int
    degenerate: Mapping[str, str] = field(default_factory=dict)
    reading: Mapping[str, Any] | None = field(default=None, repr=False)
    theta: np.ndarray | None = field(default=None, repr=False)
    cov: np.ndarray | None = field(default=None, repr=False)
    dof: int | None = None
    block_turns: int | None = None
    dependence: Any = field(default=None, repr=False)
    vif: float | None = None
    pseudo: np.ndarray | None = field(default=None, repr=False)
    residual_rms: float | None = None

    # ------------------------------------------------------------------ access
    @property
    def ok(self) -> bool:
        return not self.degenerate

    def param_names(self) -> list[str]:
        return [f"{p}[{c}]" for c in self.channels for p in self.per]

    @property
    def couplings(self) -> dict[str, np.ndarray]:
        """Turn-level coupling parameters per channel (``per`` order), signal unit per channel unit."""
        if self.theta is None:
            return {}
        q = len(self.per)
        return {c: self.theta[2 + q * i:2 + q * (i + 1)].copy() for i, c in enumerate(self.channels)}

    @property
    def coupling_sigmas(self) -> dict[str, np.ndarray]:
        if self.cov is None:
            return {}
        q = len(self.per)
        d = np.sqrt(np.diag(self.cov))
        return {c: d[2 + q * i:2 + q * (i + 1)].copy() for i, c in enumerate(self.channels)}

    def coupling_interval(self, channel: str, index: int = 0, confidence_level: float = 0.95):
        """Two-sided Student-t interval (``dof``) of one coupling parameter of ``channel``."""
        from scipy import stats

        self._require()
        cl = check_confidence_level(confidence_level)
        v, s = self.couplings[channel][index], self.coupling_sigmas[channel][index]
        q = stats.t.ppf(0.5 + cl / 2, self.dof)
        return float(v - q * s), float(v + q * s)

    @property
    def separation(self) -> float | None:
        """Correlation between the corrected estimate and the subtracted coupling term."""
        return None if self.vif is None else math.sqrt(max(0.0, 1.0 - 1.0 / self.vif))

    def _require(self):
        if self.degenerate:
            why = "; ".join(f"{c}: {w}" for c, w in self.degenerate.items())
            raise AnalysisError(f"{self.source}: no turn-level correction: degenerate channel(s) — {why}")

    @property
    def corrected(self) -> HarmonicEstimate:
        """The turn-level corrected ``k``θ estimate (a :class:`HarmonicEstimate` every limit takes;
        its ``turns`` are per-turn pseudo-values whose scatter carries the coupling's uncertainty).

        Raises AnalysisError when a channel is degenerate."""
        self._require()
        coup = "; ".join(f"{c}: " + ", ".join(f"{p} = {_pm(v, s)}" for p, v, s in zip(self.per, self.couplings[c],
                                                                                     self.coupling_sigmas[c]))
                         for c in self.channels)
        method = (f"{self.k}θ corrected by a turn-level coupling fit ({self.model}: {MODEL_TEXT[self.model]}) to "
                  f"{', '.join(self.channels)}; errors from the turn scatter of the residuals ({self.dof} dof)")
        caveats = [f"corrected estimate: the per-turn {self.k}θ coefficients were regressed on those of "
                   f"{', '.join(self.channels)} and the coupling subtracted ({coup}; variance inflation "
                   f"{fmt(self.vif, 3)}); the limit bounds the corrected amplitude"]
        if self.dependence is not None and self.dependence.caveat:
            caveats.append(self.dependence.caveat)
        return HarmonicEstimate(self.k, float(self.theta[0]), float(self.theta[1]), self.cov[:2, :2], self.dof,
                                self.unit, method, self.pseudo, tuple(caveats), self.block_turns)

    # ------------------------------------------------------------------ rendering
    def summary(self) -> Summary:
        u, k = self.unit, self.k
        b = self.before
        rows = [("source", self.source, ""), ("channels", ", ".join(self.channels), ""),
                ("turns", self.n_turns, ""),
                (f"{k}θ before (no correction): c{k}, s{k}", f"{_pm(b.c, b.sigma_c)}, {_pm(b.s, b.sigma_s)}", u),
                (f"amplitude A{k} before (biased near 0; peak-to-peak 2·A{k})", b.amplitude, u)]
        if self.ok:
            h = self.corrected
            rows += [(f"{k}θ after, turn level: c{k}, s{k}", f"{_pm(h.c, h.sigma_c)}, {_pm(h.s, h.sigma_s)}", u),
                     (f"amplitude A{k} after, turn level", h.amplitude, u)]
        if self.reading is not None and "estimate" in self.reading:
            r = self.reading["estimate"]
            rows += [(f"{k}θ after, reading level: c{k}, s{k}", f"{_pm(r.c, r.sigma_c)}, {_pm(r.s, r.sigma_s)}", u),
                     (f"amplitude A{k} after, reading level", r.amplitude, u)]
        elif self.reading is not None:
            rows.append(("reading level", f"could not run: {self.reading['error']}", ""))
        for c in self.channels:
            ch = self.channel_estimates[c]
            rows.append((f"{c}: its own {k}θ amplitude", f"{fmt(ch.amplitude)} (c {fmt(ch.c)}, s {fmt(ch.s)})",
                         "channel unit"))
            rows.append((f"{c}: turn-to-turn correlation of its {k}θ with the signal's", self.turn_correlation[c], ""))
            if self.ok:
                for p, v, s in zip(self.per, self.couplings[c], self.coupling_sigmas[c]):
                    rows.append((f"{c}: coupling {p} (turn level)", _pm(v, s), f"{u} per channel unit"))
            if self.reading is not None and "coef" in self.reading:
                rows.append((f"{c}: coefficient (reading level)",
                             _pm(self.reading["coef"][c], self.reading["sigma"][c]), f"{u} per channel unit"))
        notes = [f"turn level: per-turn {k}θ of the signal regressed on the channels' ({self.model}: "
                 f"{MODEL_TEXT[self.model]}); reading level: fit_scan(aux=[...]) (one coefficient per channel)"]
        if self.model == "complex" and self.ok:  # the gain and phase the model text promises
            for c in self.channels:
                a, bb = self.couplings[c][:2]
                notes.append(f"{c}: gain {fmt(math.hypot(a, bb))} {u} per channel unit, phase "
                             f"{math.degrees(math.atan2(bb, a)):.1f}° (K = [[a, −b], [b, a]], a = gain·cos φ, "
                             "b = gain·sin φ; a positive φ turns the channel's (c, s) counterclockwise: adds φ to its phase)")
        if self.ok:
            rows += [("dof (turn level)", self.dof, ""), ("variance inflation of the corrected estimate", self.vif, ""),
                     ("separation: corr(estimate, subtracted coupling term)", self.separation, "")]
            if self.separation is not None and self.separation > 0.95:
                notes.append(f"the channels' {k}θ parts barely vary from turn to turn compared with their mean: the "
                             "correction and the signal can hardly be told apart (separation "
                             f"{self.separation:.3g}); the corrected σ is inflated {math.sqrt(self.vif):.3g}×")
            if self.dependence is not None:
                notes.append("residual series: " + self.dependence.statement())
        for c, why in self.degenerate.items():
            notes.append(f"DEGENERATE {c}: {why} — no correction made")
        return Summary(f"Coupling of auxiliary channels into {k}θ: {self.source}", tuple(rows), tuple(notes))

    def to_dict(self) -> dict:
        d = {"source": self.source, "unit": self.unit, "harmonic": self.k, "channels": list(self.channels),
             "model": self.model, "n_turns": self.n_turns, "before": self.before.to_dict(),
             "channel_estimates": {c: e.to_dict() for c, e in self.channel_estimates.items()},
             "turn_correlation": dict(self.turn_correlation), "degenerate": dict(self.degenerate)}
        if self.ok:
            d["turn_level"] = {"estimate": self.corrected.to_dict(), "dof": self.dof, "vif": self.vif,
                               "separation": self.separation, "block_turns": self.block_turns,
                               "couplings": {c: dict(zip(self.per, map(float, v))) for c, v in self.couplings.items()},
                               "sigmas": {c: dict(zip(self.per, map(float, v)))
                                          for c, v in self.coupling_sigmas.items()},
                               "residual_rms": self.residual_rms,
                               "dependence": None if self.dependence is None else self.dependence.to_dict()}
        if self.reading is not None:
            d["reading_level"] = ({"error": self.reading["error"]} if "error" in self.reading else
                                  {"estimate": self.reading["estimate"].to_dict(), "coef": self.reading["coef"],
                                   "sigma": self.reading["sigma"], "dof": self.reading["dof"]})
        return d

    def __repr__(self) -> str:
        if not self.ok:
            return f"CouplingFit({self.k}θ on {', '.join(self.channels)}: degenerate — no correction)"
        c = ", ".join(f"{ch} {fmt(v[0])}" for ch, v in self.couplings.items())
        return (f"CouplingFit({self.k}θ on {', '.join(self.channels)}, {self.model}: {c}; A{self.k} "
                f"{fmt(self.before.amplitude)} → {fmt(self.corrected.amplitude)} {self.unit})")
