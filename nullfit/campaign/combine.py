r"""Combining runs: the lab-frame combination and the sky-frame scale fit.

Lab-frame combination (:func:`combine_lab`)
    for an effect fixed in the table frame (a systematic, or one apparatus at one orientation of
    its mark): the inverse-covariance weighted mean of the runs' ``x_i = (c₂, s₂)_i``,

    .. math::  \bar x = (\textstyle\sum C_i^{-1})^{-1} \sum C_i^{-1} x_i,\qquad
               \bar C = (\textstyle\sum C_i^{-1})^{-1},

    with the consistency statistic :math:`\chi^2 = \sum (x_i-\bar x)^T C_i^{-1} (x_i-\bar x)`
    on :math:`2(n-1)` degrees of freedom.  All runs must share a signal unit.

Sky-frame scale fit (:func:`combine_sky`)
    a hypothesis fixed on the sky predicts a different phase-coherent template ``p_i`` (the
    expected ``(c₂, s₂)`` at a reference speed) for every run, because site, date and time of
    day differ.  The data are modelled as ``x_i = κ p_i + noise``; generalised least squares gives

    .. math::  \hat κ = \frac{\sum p_i^T C_i^{-1} x_i}{\sum p_i^T C_i^{-1} p_i},\qquad
               σ_κ = (\textstyle\sum p_i^T C_i^{-1} p_i)^{-1/2}.

    ``κ`` is dimensionless and can mix apparatus and signal units (each template is in its own
    run's unit).  For the classical wind at reference speed ``v_ref``, ``κ = (v/v_ref)²`` ≥ 0, so
    the limits are those of a Gaussian mean with a boundary at zero (unified, one-sided Neyman,
    Bayes with a flat prior on κ ≥ 0); the speed bound is ``v_ref √κ_up``.  In the
    Robertson–Mansouri–Sexl reading ``κ = −2(β − δ − ½)`` (κ = 1 is the classical wind), a signed
    parameter: its central interval bounds ``|β − δ − ½| ≤ max(|κ_lo|, |κ_up|)/2``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Iterable

import numpy as np
from scipy import stats

from ..core.conventions import amplitude_phase
from ..core.render import Described, Summary


def _chi2_p_value(chi2: float, dof: int) -> float:
    """Consistency p-value: upper tail of χ² on ``dof`` degrees of freedom (nan without dof)."""
    return float(stats.chi2.sf(chi2, dof)) if dof > 0 else float("nan")


# --------------------------------------------------------------------------- lab frame
@dataclass(frozen=True, eq=False)
class LabCombination(Described):
    """Inverse-covariance combination of ``(c_k, s_k)`` across runs, with a χ² consistency test."""

    runs: tuple[str, ...]
    harmonic: int
    c: float
    s: float
    cov: np.ndarray = field(repr=False)
    chi2: float
    dof: int
    unit: str

    @property
    def p_value(self) -> float:
        return _chi2_p_value(self.chi2, self.dof)

    @property
    def amplitude(self) -> float:
        return amplitude_phase(self.c, self.s, self.harmonic)[0]

    @property
    def phase_deg(self) -> float:
        return amplitude_phase(self.c, self.s, self.harmonic)[1]

    @property
    def estimate(self):
        """The combined ``(c, s)`` as a harmonic estimate (what the limit methods take)."""
        from ..fitting.estimate import HarmonicEstimate

        return HarmonicEstimate(self.harmonic, self.c, self.s, self.cov, None, self.unit, "lab-frame combination")

    def limit(self, method: str = "feldman-cousins", confidence_level: float = 0.95, **kw):
        """A limit on the combined amplitude (any non-bootstrap method of `nullfit.amplitude_limit`)."""
        from ..limits import amplitude_limit

        return amplitude_limit(self.estimate, method=method, confidence_level=confidence_level, **kw)

    def to_dict(self) -> dict:
        return {"runs": list(self.runs), "harmonic": self.harmonic, "c": self.c, "s": self.s,
                "cov": self.cov.tolist(), "amplitude": self.amplitude, "phase_deg": self.phase_deg,
                "chi2": self.chi2, "dof": self.dof, "p_value": self.p_value, "unit": self.unit}

    def __repr__(self) -> str:
        k = self.harmonic
        return (f"LabCombination({len(self.runs)} runs, {k}θ: c{k}={self.c:.4g}, s{k}={self.s:.4g} {self.unit}; "
                f"χ²/dof = {self.chi2:.3g}/{self.dof})")

    def summary(self) -> Summary:
        k = self.harmonic
        rows = (("runs", len(self.runs), ""), (f"c{k}", self.c, self.unit), (f"s{k}", self.s, self.unit),
                (f"σ(c{k}) / σ(s{k})", f"{math.sqrt(self.cov[0, 0]):.3g} / {math.sqrt(self.cov[1, 1]):.3g}",
                 self.unit),
                (f"amplitude A{k} (biased near 0)", self.amplitude, self.unit), (f"phase φ{k}", self.phase_deg, "deg"),
                ("χ² / dof", f"{self.chi2:.3g} / {self.dof}", ""), ("consistency p-value", self.p_value, ""))
        notes = ("inverse-covariance weighted mean in the table frame: meaningful for an effect fixed in "
                 "the lab (same apparatus, same mark); for a sky-fixed hypothesis use combine_sky",)
        if self.dof > 0 and self.p_value < 0.01:
            notes += (f"the runs disagree (p = {self.p_value:.2g}): the errors may be underestimated or the "
                      "effect varies between runs; the combined error is then too small",)
        return Summary(f"Lab-frame combination of {len(self.runs)} runs ({k}θ)", rows, notes)


def _estimates(items, harmonic: int):
    """(labels, x (n,2), C (n,2,2), units) from RunAnalysis / ScanFit / (c, s, cov) items."""
    labels, xs, covs, units = [], [], [], []
    for i, it in enumerate(items):
        if hasattr(it, "fit") and hasattr(it, "scan"):  # RunAnalysis
            h = it.fit.harmonic(harmonic)
            labels.append(it.run_id)
            units.append(it.scan.unit)
        elif hasattr(it, "harmonic"):  # ScanFit
            h = it.harmonic(harmonic)
            labels.append(str(getattr(it, "source", f"run{i + 1}")))
            units.append(getattr(it, "unit", ""))
        else:
            c, s, cov = it
            xs.append((float(c), float(s)))
            covs.append(np.asarray(cov, dtype=float))
            labels.append(f"run{i + 1}")
            units.append("")
            continue
        xs.append((h.c, h.s))
        covs.append(np.asarray(h.cov, dtype=float))
    return labels, np.array(xs, dtype=float), np.array(covs, dtype=float), units


def combine_lab(items: Iterable, *, harmonic: int = 2) -> LabCombination:
    """Combine runs in the table frame (see module docstring).  ``items``: `RunAnalysis`,
    `ScanFit` or ``(c, s, cov)`` tuples."""
    labels, x, C, units = _estimates(list(items), harmonic)
    if len(labels) < 1:
        raise ValueError("no runs to combine")
    if len({u for u in units if u}) > 1:
        raise ValueError(f"cannot combine runs in different signal units in the lab frame: {sorted(set(units))}; "
                         "use combine_sky, which scales each run by its own template")
    W = np.linalg.inv(C)
    Wsum = W.sum(axis=0)
    cov = np.linalg.inv(Wsum)
    mean = cov @ np.einsum("nij,nj->i", W, x)
    r = x - mean
    chi2 = float(np.einsum("ni,nij,nj->", r, W, r))
    unit = next((u for u in units if u), "")
    return LabCombination(tuple(labels), harmonic, float(mean[0]), float(mean[1]), cov, chi2, 2 * (len(labels) - 1),
                          unit)


# --------------------------------------------------------------------------- sky frame
@dataclass(frozen=True, eq=False)
class ScaleFit(Described):
    """GLS fit of one scale parameter κ across runs (data = κ × template; see module docstring)."""

    runs: tuple[str, ...]
    kappa: float
    sigma: float
    chi2: float
    dof: int
    reference_speed_m_s: float | None
    hypothesis: str
    templates: np.ndarray = field(repr=False)
    #: relative spread (max − min)/mean of the runs' hypothesis speeds (e.g. the orbital speed
    #: over the year); κ scales each run's own template, the speed bound uses the mean speed.
    speed_spread: float = 0.0

    @property
    def p_value(self) -> float:
        return _chi2_p_value(self.chi2, self.dof)

    @property
    def estimate(self):
        """κ̂ ± σ as a :class:`~nullfit.limits.scalar.ScalarEstimate` (κ ≥ 0 for the classical wind)."""
        from ..limits.scalar import ScalarEstimate

        return ScalarEstimate(self.kappa, self.sigma, "κ", "")

    def limits(self, confidence_level: float = 0.95, methods=("feldman-cousins", "neyman", "bayes", "central")):
        """Limits on κ by the registry's routes (:func:`nullfit.limits.scalar_limit`): unified,
        one-sided Neyman and Bayes (flat prior on κ ≥ 0), and the central interval for the
        signed Robertson–Mansouri–Sexl reading.  Returns ``{method: Limit}``."""
        from ..limits import scalar_limit

        est = self.estimate
        return {m: scalar_limit(est, method=m, confidence_level=confidence_level) for m in methods}

    def speed_bound_m_s(self, limit) -> float | None:
        """The speed bound ``v_ref √κ_up`` of a one-sided limit on κ (None for central or empty)."""
        if self.reference_speed_m_s is None or limit.upper is None or limit.method == "central":
            return None
        return float(self.reference_speed_m_s * math.sqrt(max(limit.upper, 0.0)))

    def rms_bound(self, confidence_level: float = 0.95) -> float:
        """``|β − δ − ½| ≤ max(|κ_lo|, |κ_up|)/2`` from the central interval (κ = −2(β − δ − ½))."""
        c = self.limits(confidence_level, methods=("central",))["central"]
        return max(abs(c.lower), abs(c.upper)) / 2.0

    def limits_frame(self, confidence_level: float = 0.95):
        """The limits on κ side by side, with the speed bound and the RMS bound (a DataFrame)."""
        import pandas as pd

        rows = []
        for m, lim in self.limits(confidence_level).items():
            rows.append({"method": m, "confidence_level": lim.confidence_level, "kappa_lower": lim.lower,
                         "kappa_upper": lim.upper, "empty": lim.empty, "speed_bound_m_s": self.speed_bound_m_s(lim),
                         "rms_bound_abs_beta_minus_delta_minus_half":
                             max(abs(lim.lower), abs(lim.upper)) / 2 if m == "central" else None})
        return pd.DataFrame(rows)

    def to_dict(self) -> dict:
        return {"runs": list(self.runs), "kappa": self.kappa, "sigma": self.sigma, "chi2": self.chi2,
                "dof": self.dof, "p_value": self.p_value, "reference_speed_m_s": self.reference_speed_m_s,
                "speed_spread": self.speed_spread, "hypothesis": self.hypothesis}

    def __repr__(self) -> str:
        return (f"ScaleFit({len(self.runs)} runs: κ = {self.kappa:.4g}, σ(κ) = {self.sigma:.3g}; "
                f"χ²/dof = {self.chi2:.3g}/{self.dof})")

    def summary(self) -> Summary:
        rows = (("runs", len(self.runs), ""), ("hypothesis", self.hypothesis, ""),
                ("reference speed", self.reference_speed_m_s, "m/s"),
                ("κ = (v / v_ref)²", self.kappa, ""), ("σ(κ)", self.sigma, ""),
                ("χ² / dof", f"{self.chi2:.3g} / {self.dof}", ""), ("consistency p-value", self.p_value, ""))
        notes = ("κ = 1 is the hypothesis at the reference speed; κ = −2(β − δ − ½) in the "
                 "Robertson–Mansouri–Sexl reading",)
        if self.speed_spread > 1e-6:
            notes += (f"the hypothesis speed differs between runs by {self.speed_spread:.2%}: κ scales each run's "
                      "own template; the speed bound uses the mean speed",)
        return Summary("Sky-frame scale fit across runs", rows, notes)


def combine_sky(analyses: Iterable, *, harmonic: int = 2) -> ScaleFit:
    """Fit one scale κ across runs from each run's predicted phase-coherent template.

    Every item must be a `RunAnalysis` with an expected signal that has a table-frame phase
    (site with a reference-mark azimuth, or a lab wind with a direction)."""
    items = list(analyses)
    if not items:
        raise ValueError("no runs to combine")
    labels, x, C, _ = _estimates(items, harmonic)
    P = []
    for a in items:
        e = getattr(a, "expected", None)
        if e is None or e.coherent_c2 is None:
            raise ValueError(f"run {getattr(a, 'run_id', '?')}: combine_sky needs an expected signal with a "
                             "table-frame phase (a site with mark_azimuth_deg, or a lab wind with a direction)")
        P.append((e.coherent_c2, e.coherent_s2))
    P = np.array(P, dtype=float)
    W = np.linalg.inv(C)
    F = float(np.einsum("ni,nij,nj->", P, W, P))
    if F <= 0:
        raise ValueError("the templates are all zero: the hypothesis predicts no 2θ signal in these runs")
    kappa = float(np.einsum("ni,nij,nj->", P, W, x)) / F
    r = x - kappa * P
    chi2 = float(np.einsum("ni,nij,nj->", r, W, r))
    speeds = np.array([getattr(a.expected, "reference_speed_m_s", np.nan) for a in items], dtype=float)
    vref = float(np.mean(speeds)) if np.all(np.isfinite(speeds)) and np.all(speeds > 0) else None
    spread = float(np.ptp(speeds) / vref) if vref else 0.0
    hyp = items[0].expected.hypothesis_label
    return ScaleFit(tuple(labels), kappa, 1.0 / math.sqrt(F), chi2, 2 * len(items) - 1, vref, hyp, P, spread)
