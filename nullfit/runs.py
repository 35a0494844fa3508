r"""Many runs: the comparison table, the lab-frame combination, and the sky-frame scale fit.

Comparison (:func:`compare_runs`)
    one row per run — date, apparatus, the hypothesis's expected 2θ amplitude and peak-to-peak,
    the upper limit as amplitude and as peak-to-peak, the ratio expected/bound (amplitude over
    amplitude; identical to peak-to-peak over peak-to-peak) and the speed bound.

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
from pathlib import Path
from typing import Any, Iterable

import numpy as np
from scipy import stats

from .conventions import amplitude_phase, check_confidence_level, make_rng, peak_to_peak
from .summary import Described, Summary


# --------------------------------------------------------------------------- inputs
def _analyses(runs, *, rng=None, progress=None, **kw) -> tuple[list, int]:
    """Turn paths, Scans and RunAnalysis objects into RunAnalysis objects (one child seed each)."""
    from .analysis import RunAnalysis, analyse, child_seeds
    from .logfile import read_scan
    from .scan import Scan

    runs = list(runs)
    if not runs:
        raise ValueError("no runs given")
    if isinstance(rng, np.random.Generator):
        seed = int(rng.integers(2**62))
    else:
        _, seed = make_rng(rng)
    seeds = child_seeds(seed, len(runs))
    out = []
    from tqdm import tqdm

    show = progress if progress is not None else len(runs) > 3
    for r, s in tqdm(list(zip(runs, seeds)), desc="runs", unit="run", disable=not show, leave=False):
        if isinstance(r, RunAnalysis):
            out.append(r)
            continue
        scan = r if isinstance(r, Scan) else read_scan(Path(r))
        out.append(analyse(scan, rng=s, **kw))
    return out, seed


def compare_runs(runs: Iterable, *, speed_m_s: float | None = 30_000.0, velocity=None, apparatus=None, site=None,
                 method: str = "feldman-cousins", confidence_level: float = 0.95, harmonics=(1, 2),
                 drift="per-turn", errors="turns", rng=None, progress=None):
    """The run table: one row per run (paths, Scans or `RunAnalysis` objects).

    Each run uses its own manifest's apparatus and site unless ``apparatus``/``site`` are given.
    ``velocity`` (a preset or spec string, see :func:`nullfit.sky.parse_velocity`) projects the
    hypothesis on the sky at each run's site and time; without it the wind is a fixed in-plane
    wind of ``speed_m_s``.  The table's ``attrs`` record the settings and the master seed.
    A progress bar (stderr) shows for more than three runs unless ``progress=False``.
    """
    import pandas as pd

    cl = check_confidence_level(confidence_level)
    analyses, seed = _analyses(runs, rng=rng, speed_m_s=speed_m_s, velocity=velocity, apparatus=apparatus,
                               site=site, limits=(method,), confidence_level=cl, harmonics=harmonics,
                               drift=drift, errors=errors, progress=progress)
    rows = [run_row(a) for a in analyses]
    table = pd.DataFrame(rows)
    table.attrs.update({"seed": seed, "confidence_level": cl, "method": method, "speed_m_s": speed_m_s,
                        "drift": drift, "errors": errors})
    return table


def run_row(a) -> dict[str, Any]:
    """One row of the run table for a `RunAnalysis` that has a limit (and possibly a hypothesis)."""
    lim = a.primary_limit
    h = a.fit.harmonic(a.harmonic)
    e = a.expected
    app = a.apparatus
    date = a.scan.epoch_iso[:10] if a.scan.epoch_iso else None
    upper = None if lim is None else lim.upper
    return {
        "run": a.run_id,
        "date_utc": date,
        "signal_unit": a.scan.signal_unit,
        "arm_length_m": None if app is None else app.arm_length_m,
        "wavelength_m": None if app is None else app.wavelength_m,
        "hypothesis": None if e is None else e.hypothesis_label,
        "speed_m_s": a.settings.get("speed_m_s"),
        "expected_amplitude": None if e is None else e.amplitude,
        "expected_peak_to_peak": None if e is None else e.peak_to_peak,
        "limit_method": None if lim is None else lim.method,
        "confidence_level": None if lim is None else lim.confidence_level,
        "upper_amplitude": upper,
        "upper_peak_to_peak": None if upper is None else peak_to_peak(upper),
        "ratio_expected_to_bound": a.ratio,
        "speed_bound_m_s": a.speed_bound_m_s,
        f"c{a.harmonic}": h.cos,
        f"s{a.harmonic}": h.sin,
        f"sigma_c{a.harmonic}": h.sigma_cos,
        f"sigma_s{a.harmonic}": h.sigma_sin,
        "observed_amplitude": h.amplitude,
        "n_turns": a.fit.n_turns,
        "dropped_rows": a.fit.dropped_rows,
        "seed": a.seed,
    }


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

    def limit(self, method: str = "feldman-cousins", confidence_level: float = 0.95, **kw):
        """A limit on the combined amplitude (any non-bootstrap method of `nullfit.amplitude_limit`)."""
        from .limits import amplitude_limit

        return amplitude_limit(self.c, self.s, self.cov, method=method, confidence_level=confidence_level,
                               harmonic=self.harmonic, unit=self.unit, **kw)

    def to_dict(self) -> dict:
        return {"runs": list(self.runs), "harmonic": self.harmonic, "cos": self.c, "sin": self.s,
                "cov": self.cov.tolist(), "amplitude": self.amplitude, "phase_deg": self.phase_deg,
                "chi2": self.chi2, "dof": self.dof, "p_value": self.p_value, "unit": self.unit}

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
            units.append(it.scan.signal_unit)
        elif hasattr(it, "harmonic"):  # ScanFit
            h = it.harmonic(harmonic)
            labels.append(str(getattr(it, "source", f"run{i + 1}")))
            units.append(getattr(it, "signal_unit", ""))
        else:
            c, s, cov = it
            xs.append((float(c), float(s)))
            covs.append(np.asarray(cov, dtype=float))
            labels.append(f"run{i + 1}")
            units.append("")
            continue
        xs.append((h.cos, h.sin))
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

    def limits(self, confidence_level: float = 0.95):
        """Limits on κ by the routes of the amplitude limits, in one dimension (κ ≥ 0):
        unified (Feldman–Cousins Gaussian with boundary), one-sided Neyman, Bayes (flat prior on
        κ ≥ 0); plus the central interval for the signed RMS reading.  Returns a DataFrame."""
        import pandas as pd

        from .limits.unified import unified_gaussian_interval

        cl = check_confidence_level(confidence_level)
        k, s = self.kappa, self.sigma
        rows = []
        lo, up = unified_gaussian_interval(k, confidence_level=cl, sigma=s)
        rows.append(("feldman-cousins", lo, up, False))
        ney = k + stats.norm.ppf(cl) * s
        rows.append(("neyman", 0.0 if ney >= 0 else None, ney if ney >= 0 else None, ney < 0))
        # posterior ∝ N(κ̂, σ) on κ ≥ 0: quantile of the truncated normal
        a = -k / s
        up_b = k + s * stats.norm.ppf(stats.norm.cdf(a) + cl * stats.norm.sf(a))
        rows.append(("bayes", 0.0, up_b, False))
        z = stats.norm.ppf(0.5 + cl / 2)
        rows.append(("central (signed κ, RMS)", k - z * s, k + z * s, False))
        df = pd.DataFrame(rows, columns=["method", "kappa_lower", "kappa_upper", "empty"])
        df["confidence_level"] = cl
        if self.reference_speed_m_s:
            v = self.reference_speed_m_s
            df["speed_bound_m_s"] = [None if (u is None or m.startswith("central")) else v * math.sqrt(max(u, 0.0))
                                     for m, u in zip(df["method"], df["kappa_upper"])]
        bound = max(abs(k - z * s), abs(k + z * s)) / 2
        df["rms_bound_abs_beta_minus_delta_minus_half"] = [None, None, None, bound]
        return df

    def to_dict(self) -> dict:
        return {"runs": list(self.runs), "kappa": self.kappa, "sigma": self.sigma, "chi2": self.chi2,
                "dof": self.dof, "p_value": self.p_value, "reference_speed_m_s": self.reference_speed_m_s,
                "speed_spread": self.speed_spread, "hypothesis": self.hypothesis}

    def summary(self) -> Summary:
        rows = (("runs", len(self.runs), ""), ("hypothesis", self.hypothesis, ""),
                ("reference speed", self.reference_speed_m_s, "m/s"),
                ("κ = (v / v_ref)²", self.kappa, ""), ("σ(κ)", self.sigma, ""),
                ("χ² / dof", f"{self.chi2:.3g} / {self.dof}", ""), ("consistency p-value", self.p_value, ""))
        notes = ("κ = 1 is the hypothesis at the reference speed; κ = −2(β − δ − ½) in the "
                 "Robertson–Mansouri–Sexl reading", "limits: ScaleFit.limits(confidence_level)")
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
