"""One run analysed end to end: fit, limits, detection significance, expected signal, ratio.

This is the job the command line, the demo and the report share; it adds no statistics of its
own, only the bookkeeping that ties the stages together (which limit feeds the ratio, which seed
each random step used, which apparatus and hypothesis were assumed).

The ratio *expected / bound* compares like with like: the expected **coherent amplitude** of the
2θ term (what a fit of constant ``(c₂, s₂)`` measures, see :mod:`nullfit.expected`) over the upper
limit on the **amplitude** of the fitted 2θ term, from the first limit method listed.
The same ratio follows from the two peak-to-peak values.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from types import SimpleNamespace
from typing import Any, Mapping

import numpy as np

from ..core.conventions import check_confidence_level, make_rng, peak_to_peak
from ..core.errors import AnalysisError, raised_by_nullfit
from ..reading.columns import one_line
from ..reading.stream import ScanStream
from ..core.render import Described, Summary
from .facts import aux_status, plural, reading_facts, reading_notes, reading_rows

#: How auxiliary channels correct the limited estimate: one coefficient per reading, or a regression
#: of the per-turn harmonic on the channels' (nullfit.fitting.coupling).
COUPLING_ROUTES = ("reading", "turn")
DEFAULT_LIMITS = ("feldman-cousins", "neyman", "bayes", "bootstrap")


def parse_harmonics(text) -> tuple[int, ...]:
    """Harmonic orders from a comma list (``"1,2"``) or a sequence; checked by the fit's rule."""
    from ..fitting.design import check_harmonics

    if isinstance(text, str):
        items = [v for v in text.replace(" ", "").split(",") if v]
        try:
            text = [int(v) for v in items]
        except ValueError:
            raise ValueError(f"harmonics must be a comma list of positive integers, not {','.join(items)!r}") from None
    return check_harmonics(text)


def parse_methods(text) -> tuple[str, ...]:
    """Limit methods from a comma list (or a sequence); ``"all"`` means every amplitude method."""
    from ..limits.registry import AMPLITUDE_METHODS, method_name

    if text is None:
        return ()
    items = text.split(",") if isinstance(text, str) else list(text)
    items = [m.strip() for m in items if m.strip()]
    if items == ["all"]:
        return AMPLITUDE_METHODS
    return tuple(dict.fromkeys(method_name(m) for m in items))


def child_seeds(seed: int, n: int) -> list[int]:
    """``n`` independent integer seeds derived from one recorded master seed."""
    return [int(s.generate_state(1, dtype=np.uint64)[0] >> 1) for s in np.random.SeedSequence(seed).spawn(n)]


@dataclass(frozen=True, eq=False)
class RunAnalysis(Described):
    """A scan taken through the whole job: `ScanFit`, `Limit` per method, significance and
    (when a hypothesis is given) the `ExpectedSignal` and the expected/bound ratio.

    A limit route that cannot run on these data (e.g. the bootstrap on three turns) does not
    stop the others: its reason is kept in ``failed`` (method → one-line reason) and shown in
    the summary, the JSON and the limits table."""

    scan: Any = field(repr=False)
    fit: Any = field(repr=False)
    harmonic: int
    limits: Mapping[str, Any]
    significance: Any
    expected: Any
    apparatus: Any
    seed: int | None
    settings: Mapping[str, Any]
    failed: Mapping[str, str] = field(default_factory=dict)
    notes: tuple[str, ...] = ()
    #: the harmonic estimate the limits were put on (the fit's, or one corrected for aux channels)
    estimate: Any = field(default=None, repr=False)
    #: both coupling routes side by side when auxiliary channels were given (a `CouplingFit`)
    coupling: Any = field(default=None, repr=False)

    @property
    def corrected_for(self) -> str | None:
        """What the limited estimate was corrected for (e.g. ``"tilt_urad (turn level)"``), or None."""
        return self.settings.get("corrected_for")

    # ----------------------------------------------------------------- derived
    @property
    def run_id(self) -> str:
        return self.scan.run_id

    @property
    def unit(self) -> str:
        return self.scan.unit

    @property
    def primary_limit(self):
        """The limit that feeds the ratio: the first method listed that could run."""
        return next(iter(self.limits.values())) if self.limits else None

    @property
    def ratio(self) -> float | None:
        lim, exp = self.primary_limit, self.expected
        if lim is None or exp is None or lim.upper is None:
            return None
        return float(exp.ratio(lim.upper))

    @property
    def speed_bound_m_s(self) -> float | None:
        lim, exp = self.primary_limit, self.expected
        if lim is None or exp is None or lim.upper is None:
            return None
        return float(exp.speed_bound(lim.upper))

    @property
    def random(self) -> bool:
        """True when a random step ran (a bootstrap limit, a simulated p-value): only then does
        the seed matter for reproducing the numbers."""
        if any(getattr(lim, "seed", None) is not None for lim in self.limits.values()):
            return True
        return getattr(self.significance, "seed", None) is not None

    @property
    def facts(self) -> dict[str, Any]:
        """Rows dropped while reading, rows in partial turns, direction changes, gaps."""
        return reading_facts(self.scan, self.fit)

    # ----------------------------------------------------------------- rendering
    def to_dict(self) -> dict:
        fd = self.fit.to_dict()
        harmonics = fd.pop("harmonics")
        n = fd.pop("chi2_dof_n", None)
        fd["chi2_degrees_of_freedom"] = n
        fd["chi2_dof"] = self.fit.chi2_dof
        for key in ("dropped_rows", "scan_dropped_rows", "excluded_rows", "excluded", "source", "unit",
                    "n_samples", "n_turns", "drift", "errors"):
            fd.pop(key, None)  # said once, at the top level
        facts = self.facts
        d: dict[str, Any] = {
            "source": self.scan.source,
            "run_id": self.run_id,
            "unit": self.unit,
            "n_samples": int(self.fit.n_samples),
            "n_turns": int(self.fit.n_turns),
            **facts,
            "drift": self.fit.drift,
            "errors": self.fit.errors,
            "harmonics": harmonics,
            "fit": fd,
            "seed": self.seed,
            "random_steps": self.random,
            "settings": dict(self.settings),
            "notes": list(self.all_notes()),
        }
        if self.coupling is not None:
            d["coupling"] = self.coupling.to_dict()
            d["corrected_for"] = self.corrected_for
        if self.limits or self.failed:
            d["limits"] = {}
            for m, lim in self.limits.items():
                ld = lim.to_dict()
                if getattr(lim, "empty", False):
                    ld["empty_reason"] = empty_reason(lim)
                d["limits"][m] = ld
            d["limits_failed"] = dict(self.failed)
        if self.significance is not None:
            d["significance"] = self.significance.to_dict()
        if self.expected is not None:
            d["expected"] = {
                "unit": self.unit,
                "amplitude": self.expected.amplitude,
                "peak_to_peak": self.expected.peak_to_peak,
                "mean_amplitude": self.expected.mean_amplitude,
                "ratio": self.ratio,
                "ratio_method": self.primary_limit.method if self.primary_limit is not None else None,
                "speed_bound_m_s": self.speed_bound_m_s,
                "detail": self.expected.to_dict(),
            }
        return d

    def limits_frame(self):
        """The limits side by side, one row per method (amplitude and peak-to-peak, in ``unit``);
        a route that could not run has a row too, its reason in ``note``."""
        import pandas as pd

        rows = []
        for m, lim in self.limits.items():
            empty = bool(getattr(lim, "empty", False))
            rows.append({
                "method": m,
                "confidence_level": lim.confidence_level,
                "lower": lim.lower,
                "upper (amplitude)": lim.upper,
                "upper (peak-to-peak)": None if lim.upper is None else peak_to_peak(lim.upper),
                "unit": self.unit,
                "empty": empty,
                "settings": _limit_settings(lim),
                "note": empty_reason(lim) if empty else "",
            })
        cl = self.settings.get("confidence_level")
        for m, why in self.failed.items():
            rows.append({"method": m, "confidence_level": cl, "lower": None, "upper (amplitude)": None,
                         "upper (peak-to-peak)": None, "unit": self.unit, "empty": False, "settings": "",
                         "note": f"not computed: {why}"})
        return pd.DataFrame(rows)

    def __repr__(self) -> str:
        lim = self.primary_limit
        bound = "" if lim is None else f", {lim.method}: A{self.harmonic} {lim.interval_text}"
        ratio = "" if self.ratio is None else f", expected/bound = {self.ratio:.3g}"
        return f"RunAnalysis({self.run_id!r}: {plural(int(self.fit.n_turns), 'turn')}{bound}{ratio})"

    def all_notes(self) -> tuple[str, ...]:
        notes = tuple(getattr(self.fit, "notes", ()) or ())
        notes += reading_notes(self.facts) + tuple(aux_status(self.scan, self.fit, self.settings.get("aux", ())))
        notes += tuple(self.notes)
        notes += tuple(f"{m} limit not computed: {why}" for m, why in self.failed.items())
        if self.random and self.seed is not None:
            notes += (f"random seed {self.seed} (reproduces the random steps)",)
        return tuple(dict.fromkeys(notes))

    def summary(self) -> Summary:
        unit = self.unit
        k = self.harmonic
        fit = self.fit
        rows = [
            ("run", self.run_id, ""),
            ("samples / turns fitted", f"{fit.n_samples} / {fit.n_turns}", ""),
            *reading_rows(self.facts),
            ("drift model", fit.drift, ""),
            ("errors", fit.errors_description, ""),
        ]
        if fit.chi2_dof is not None:
            rows.append(("χ²/dof of the per-turn scatter", fit.chi2_dof,
                         f"({fit.chi2_dof_n} dof; expected 1 for white noise within turns)"))
        for name, c, v in zip(getattr(fit, "aux_names", ()) or (),
                              fit.aux_coef if getattr(fit, "aux_coef", None) is not None else (),
                              np.diag(fit.aux_cov) if getattr(fit, "aux_cov", None) is not None else ()):
            rows.append((f"coupling to {name}", c, f"{unit} per unit of {name} (σ {float(np.sqrt(v)):.3g})"))
        hrows = []
        for kk in fit.harmonics:
            h = fit.harmonic(kk)
            hrows += [
                (f"c{kk}", h.c, unit),
                (f"s{kk}", h.s, unit),
                (f"σ(c{kk}) / σ(s{kk})", f"{h.sigma_c:.3g} / {h.sigma_s:.3g}", unit),
                (f"observed amplitude A{kk} (biased near 0)", h.amplitude, unit),
                (f"phase φ{kk}", h.phase_deg, "deg"),
            ]
        sections = [Summary("Fitted harmonics" + (f" (limits on {k}θ)" if self.limits else ""), tuple(hrows))]
        if self.limits or self.failed:
            lrows = []
            for m, lim in self.limits.items():
                if getattr(lim, "empty", False):
                    why = empty_reason(lim)
                    lrows.append((f"{m} {lim.confidence_level * 100:g} %",
                                  why if why.lower().startswith("empty") else f"empty set: {why}", ""))
                    continue
                if lim.lower not in (None, 0.0) and m == "feldman-cousins":
                    val = (f"[{lim.lower:.4g}, {lim.upper:.4g}] (two-sided; peak-to-peak "
                           f"[{peak_to_peak(lim.lower):.4g}, {peak_to_peak(lim.upper):.4g}])")
                else:
                    val = f"< {lim.upper:.4g}   (peak-to-peak < {peak_to_peak(lim.upper):.4g})"
                lrows.append((f"{m} {lim.confidence_level * 100:g} %", val, f"{unit} amplitude"))
            for m, why in self.failed.items():
                lrows.append((m, f"not computed: {why}", ""))
            if self.significance is not None:
                lrows.append(("p-value of A = 0", self.significance.p_value, ""))
            title = f"Limits on the {k}θ amplitude"
            if self.corrected_for:
                title += f", corrected for {self.corrected_for}"
                e = self.estimate
                lrows.insert(0, (f"corrected c{k}, s{k}", f"{e.c:.4g}, {e.s:.4g}", unit))
                lrows.insert(1, (f"corrected amplitude A{k} (biased near 0)", e.amplitude, unit))
            sections.append(Summary(title, tuple(lrows)))
        if self.coupling is not None:
            cs = self.coupling.summary()
            sections.append(Summary("Auxiliary channels: " + cs.title.split(": ")[0], cs.rows, cs.notes))
        if self.expected is not None:
            e = self.expected
            erows = [
                ("hypothesis", e.hypothesis_label, ""),
                ("expected amplitude (phase-coherent)", e.amplitude, unit),
                ("expected peak-to-peak (phase-coherent)", e.peak_to_peak, unit),
                ("mean instantaneous amplitude", e.mean_amplitude, unit),
            ]
            if self.ratio is not None:
                erows.append((f"ratio expected / bound ({self.primary_limit.method})", self.ratio, ""))
                erows.append(("speed bound", self.speed_bound_m_s, "m/s"))
            sections.append(Summary("Expected signal", tuple(erows)))
        return Summary(f"nullfit run {self.run_id}", tuple(rows), self.all_notes(), tuple(sections))


def empty_reason(lim) -> str:
    """Why a limit is the empty set (the method says so in ``Limit.empty_reason``)."""
    return getattr(lim, "empty_reason", None) or "no amplitude is compatible with the observation at this confidence level"


def _limit_settings(lim) -> str:
    parts = []
    if getattr(lim, "prior", None):
        parts.append(f"prior: {lim.prior}")
    if getattr(lim, "block_length", None):
        parts.append(f"{lim.scheme} blocks of {lim.block_length} turns, {lim.replicates} replicates, seed {lim.seed}")
    if getattr(lim, "dof", None):
        parts.append(f"covariance from {lim.dof} dof")
    return "; ".join(parts)


def _one_line(err: BaseException) -> str:
    return one_line(err) or type(err).__name__


def analyse(scan, *, harmonics=(1, 2), harmonic: int = 2, drift="per-turn", errors="turns",
            limits=DEFAULT_LIMITS, confidence_level: float = 0.95, rng=None, apparatus=None, site=None,
            velocity=None, speed_m_s: float | None = None, bootstrap_replicates: int = 10_000,
            progress: bool | None = None, aux=None, coupling: str = "reading") -> RunAnalysis:
    """Fit ``scan`` (a `Scan`, or a `ScanStream` for a log too large for memory), put limits on harmonic ``harmonic`` by each method in ``limits``, and, when a
    hypothesis is given (``speed_m_s`` and/or ``velocity``), compute the expected signal and the
    expected/bound ratio.  ``drift`` and ``errors`` are passed to :func:`nullfit.fit_scan`
    (which takes ``"poly:3"``, ``"spline:2"``, ``"hac:12"``, ``"blocks:5"``), and so is ``aux``
    (auxiliary columns of the scan to regress on).  ``rng`` seeds every random step; the seed is
    recorded (the bootstrap gets a child seed, also recorded in its `Limit`).

    A limit method that cannot run on these data (too few turns for the bootstrap, …) is left
    out with its reason in ``RunAnalysis.failed``; only when every requested method fails is
    an `AnalysisError` raised, naming each reason."""
    from ..fitting.fit import fit_scan
    from ..limits import amplitude_limit, detection_significance

    cl = check_confidence_level(confidence_level)
    ks = parse_harmonics(harmonics)
    if harmonic not in ks:
        raise ValueError(f"the limit harmonic {harmonic} is not among the fitted harmonics {ks}")
    methods = parse_methods(limits) if limits else ()
    hypothesis = speed_m_s is not None or velocity is not None
    if hypothesis and not methods:
        methods = ("feldman-cousins",)
    if isinstance(rng, np.random.Generator):
        seed = int(rng.integers(2**62))
    else:
        _, seed = make_rng(rng)
    s_boot, s_sig = child_seeds(seed, 2)

    if coupling not in COUPLING_ROUTES:
        raise ValueError(f"coupling must be one of {', '.join(COUPLING_ROUTES)}, not {coupling!r}")
    channels = ([aux] if isinstance(aux, str) else list(aux)) if aux else []
    fit_kw: dict[str, Any] = {}
    if channels and coupling == "reading":
        fit_kw["aux"] = channels
    streamed = isinstance(scan, ScanStream)
    if streamed:  # a log too large for memory: the fit reads it chunk by chunk
        from ..fitting.stream import fit_stream

        fit = fit_stream(scan, harmonics=ks, drift=drift, errors=errors, progress=progress, **fit_kw)
    else:
        fit = fit_scan(scan, harmonics=ks, drift=drift, errors=errors, **fit_kw)
    est = fit.harmonic(harmonic)
    cfit = None
    corrected_for = None
    if channels:
        if streamed:
            raise AnalysisError(f"{scan.source}: auxiliary channels are fitted on a log in memory only; "
                                "read it whole (no streaming) to use them")
        from ..fitting.coupling import fit_coupling

        cfit = fit_coupling(scan, channels, harmonic=harmonic, harmonics=ks, drift=drift)
        if coupling == "turn":
            est = cfit.corrected  # AnalysisError, naming the channel, when it is degenerate
            corrected_for = f"{', '.join(channels)} (turn level)"
        else:
            corrected_for = f"{', '.join(channels)} (reading level)"
            coefs = "; ".join(f"{n} {c:.4g} ± {float(np.sqrt(v)):.2g}" for n, c, v in
                              zip(fit.aux_names, fit.aux_coef, np.diag(fit.aux_cov)))
            est = dataclasses.replace(est, caveats=tuple(est.caveats) + (
                f"corrected estimate: the signal was regressed reading by reading on {', '.join(channels)} "
                f"({coefs} {scan.unit} per channel unit); the limit bounds the corrected amplitude",))
    out: dict[str, Any] = {}
    failed: dict[str, str] = {}
    for m in methods:
        if m == "bootstrap" and est.turns is None:
            failed[m] = "the bootstrap needs per-turn coefficients: use errors='turns' or errors='blocks:B'"
            continue
        opts: dict[str, Any] = {}
        if m == "bootstrap":
            opts["replicates"] = bootstrap_replicates
            if progress is not None:
                opts["progress"] = progress
        try:
            lim = amplitude_limit(est, method=m, confidence_level=cl,
                                  rng=s_boot if m == "bootstrap" else None, **opts)
        except ValueError as err:  # AnalysisError included; a third-party ValueError is a bug: re-raise
            if not raised_by_nullfit(err):
                raise
            failed[m] = _one_line(err)
            continue
        if not lim.empty and (lim.upper is None or not np.isfinite(lim.upper)):
            failed[m] = f"the method returned no finite bound at confidence level {cl:g}"
            continue
        out[m] = lim
    if methods and not out:
        raise AnalysisError("; ".join(f"{m}: {why}" for m, why in failed.items()))
    notes: list[str] = []
    sig = None
    if methods:
        try:
            sig = detection_significance(est, rng=s_sig)
        except ValueError as err:
            if not raised_by_nullfit(err):
                raise
            notes.append(f"no detection p-value: {_one_line(err)}")

    expected = app = None
    if hypothesis:
        from ..hypothesis.apparatus import Apparatus
        from ..hypothesis.expected import expected_for_scan

        app = apparatus if apparatus is not None else (
            Apparatus.from_mapping(scan.meta.apparatus) if scan.meta.apparatus else None)
        if app is None:
            raise AnalysisError(f"{scan.source}: the expected signal needs the apparatus (arm_length_m and "
                                "wavelength_m): pass apparatus=Apparatus(...) or give an [apparatus] table in "
                                "the manifest")
        if streamed:  # the readings are not in memory: average the hypothesis over the turns' mid times
            times = SimpleNamespace(time=fit.per_turn["time_mid_s"].to_numpy(dtype=float), epoch_unix=scan.epoch_unix,
                                    meta=scan.meta, unit=scan.unit)
            expected = expected_for_scan(times, velocity, apparatus=app, site=site, speed_m_s=speed_m_s)
            notes.append("streamed log: the expected signal is averaged over the mid times of the fitted turns")
        else:
            expected = expected_for_scan(scan, velocity, apparatus=app, site=site, speed_m_s=speed_m_s)
    settings = {"harmonics": list(ks), "limit_harmonic": harmonic, "drift": fit.drift, "errors": fit.errors,
                "confidence_level": cl, "limits": list(methods),
                "hypothesis": None if expected is None else expected.hypothesis_label,
                "speed_m_s": speed_m_s, "aux": channels, "coupling": coupling if channels else None,
                "corrected_for": corrected_for}
    return RunAnalysis(scan=scan, fit=fit, harmonic=harmonic, limits=out, significance=sig, expected=expected,
                       apparatus=app, seed=seed, settings=settings, failed=failed, notes=tuple(notes), estimate=est,
                       coupling=cfit)
