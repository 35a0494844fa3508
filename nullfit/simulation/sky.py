r"""Sky signals in synthetic scans: inject an SME or RMS parameter set, reading by reading, and
simulate whole campaigns of runs with a known truth.

Injection
---------
:func:`inject_sky` adds, to every reading of a scan with absolute time, the signal the apparatus
would log under the model (:func:`nullfit.hypothesis.sidereal.template`):

.. math::  y_i \mathrel{+}= g\,[B(t_i)\sin 2θ_{S,i} + C(t_i)\cos 2θ_{S,i}],

with ``θ_S = π − m − σθ`` (mark azimuth ``m``, ``σ = +1`` for a clockwise table) and the gain
``g = −readout_sign × (2L/λ for fringes, 1 for fractional)``; ``B(t)``, ``C(t)`` of
``(ν₁ − ν₂)/ν`` at the site (``docs/sky.md``).  The scan's manifest then carries the site and
apparatus tables that the per-turn table and the sky estimators read.

Campaigns
---------
:func:`campaign_schedule` lays out runs: ``"days"`` (runs of ``run_hours``, default whole days,
evenly spread over ``span_days``) or ``"scattered"`` (short runs at random times, one in each of
``n_runs`` equal slots of the span).  :func:`simulate_sky_campaign` simulates every run with
:func:`nullfit.simulation.scans.simulate_scan` (drift, noise, marks as there) and injects the sky
signal; optionally a lab-fixed 2θ term of random phase per run (a systematic fixed to the table,
which the estimators absorb in their per-segment offsets).  The per-turn shortcut (a table drawn
directly from the model plus noise) lives on the campaign side,
:func:`nullfit.campaign.sky_simulate.simulate_sky_turns`, because it builds a per-turn table.

Randomness only through ``rng``; the seed is recorded in :class:`SkyTruth`; every run draws from
its own child stream (``Generator.spawn``).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import numpy as np

from ..core.conventions import make_rng
from ..core.render import Described, Summary
from ..hypothesis.apparatus import Apparatus
from ..hypothesis.sidereal import SkyParameters, template
from ..hypothesis.sidereal.forward import ORBIT_CHOICES
from ..hypothesis.site import Site
from .scans import simulate_scan

__all__ = ["RunSlot", "SkyTruth", "campaign_schedule", "inject_sky", "manifest_tables", "simulate_sky_scan",
           "simulate_sky_campaign", "SCHEDULE_KINDS"]

SCHEDULE_KINDS = ("days", "scattered")
#: Default start of a simulated campaign: 2026-01-05 00:00:00 UTC.
DEFAULT_START_UNIX = 1_767_571_200


@dataclass(frozen=True)
class RunSlot:
    """One run of a campaign: its id, start (integer Unix seconds, UTC) and duration (s)."""

    run_id: str
    start_unix: int
    duration_s: float


def campaign_schedule(kind: str = "days", *, n_runs: int = 36, span_days: float = 365.0,
                      run_hours: float | None = None, start_unix: int = DEFAULT_START_UNIX,
                      prefix: str = "S", rng=None) -> tuple[RunSlot, ...]:
    """Lay out the runs of a campaign.

    ``"days"``: ``n_runs`` runs of ``run_hours`` (default 24) starting ``span_days / n_runs``
    days apart (rounded to the second).  ``"scattered"``: the span is cut into ``n_runs`` equal
    slots and each run of ``run_hours`` (default 4) starts at a uniformly drawn time inside its
    slot (``rng``), so runs never overlap and cover all times of day and of the year.
    """
    if kind not in SCHEDULE_KINDS:
        raise ValueError(f"kind must be one of {SCHEDULE_KINDS}, not {kind!r}")
    if isinstance(n_runs, bool) or not isinstance(n_runs, (int, np.integer)) or n_runs < 1:
        raise ValueError(f"n_runs must be a positive integer, not {n_runs!r}")
    hours = (24.0 if kind == "days" else 4.0) if run_hours is None else float(run_hours)
    slot = float(span_days) * 86400.0 / n_runs
    dur = hours * 3600.0
    if not (math.isfinite(slot) and slot > 0 and math.isfinite(dur) and 0 < dur <= slot):
        raise ValueError(f"runs of {hours:g} h do not fit into {n_runs} slots of {slot / 3600:g} h "
                         f"({span_days!r} days)")
    width = len(str(n_runs))
    if kind == "days":
        starts = [int(start_unix) + int(round(i * slot)) for i in range(n_runs)]
    else:
        gen, _ = make_rng(rng)
        starts = [int(start_unix) + int(round(i * slot + gen.uniform(0.0, slot - dur))) for i in range(n_runs)]
    return tuple(RunSlot(f"{prefix}{i + 1:0{width}d}", s, dur) for i, s in enumerate(starts))


def manifest_tables(site: Site, apparatus: Apparatus) -> tuple[dict, dict]:
    """The ``[site]`` and ``[apparatus]`` tables of a manifest (None values left out)."""
    s = {k: v for k, v in site.to_dict().items() if v is not None}
    a = {k: v for k, v in apparatus.to_dict().items() if v is not None}
    return s, a


def _check_setup(site, apparatus, orbit):
    if not isinstance(site, Site):
        raise TypeError("site must be a nullfit Site")
    if not isinstance(apparatus, Apparatus):
        raise TypeError("apparatus must be a nullfit Apparatus")
    if not site.has_mark:
        raise ValueError("a sky signal needs the compass azimuth of the table's reference mark: "
                         "give Site(mark_azimuth_deg=...)")
    if orbit not in ORBIT_CHOICES:
        raise ValueError(f"orbit must be one of {ORBIT_CHOICES}, not {orbit!r}")


def inject_sky(scan, model: str, params, *, site: Site, apparatus: Apparatus, orbit: str = "circular",
               rotation: bool = False, pair: bool = True, run_id: str | None = None):
    """Add the sky signal of ``params`` to every reading of ``scan``.

    Returns ``(scan, signal)``: a new :class:`~nullfit.reading.scan.Scan` whose manifest carries
    ``site`` and ``apparatus`` (and ``run_id`` if given), and the injected per-reading signal in
    the log's unit.  The scan needs absolute time and the apparatus's signal unit.
    """
    _check_setup(site, apparatus, orbit)
    if scan.epoch_unix is None:
        raise ValueError("injecting a sky signal needs absolute time (a scan with epoch_unix)")
    if scan.unit != apparatus.signal:
        raise ValueError(f"the scan logs {scan.unit!r} but the apparatus signal is {apparatus.signal!r}")
    sky = template(model, params, site=site, apparatus=apparatus, theta=scan.angle, epoch_unix=scan.epoch_unix,
                   time_s=scan.time, orbit=orbit, rotation=rotation, pair=pair)
    s_tab, a_tab = manifest_tables(site, apparatus)
    meta = dataclasses.replace(scan.meta, site=s_tab, apparatus=a_tab,
                               run_id=run_id if run_id is not None else scan.meta.run_id)
    out = dataclasses.replace(scan, signal=np.asarray(scan.signal, dtype=float) + sky, meta=meta)
    sky.setflags(write=False)
    return out, sky


def simulate_sky_scan(model: str, params, *, site: Site, apparatus: Apparatus, epoch_unix: int,
                      run_id: str | None = None, orbit: str = "circular", rotation: bool = False,
                      pair: bool = True, rng=None, **scan_options):
    """One synthetic scan with the sky signal injected: ``(scan, truth, sky_signal)``.

    ``scan_options`` go to :func:`nullfit.simulation.scans.simulate_scan` (``n_turns``,
    ``period_s``, ``samples_per_turn``, ``marks``, ``harmonics``, ``drift``, ``noise``, ``sigma``,
    …); the signal unit is the apparatus's.
    """
    _check_setup(site, apparatus, orbit)
    scan, truth = simulate_scan(epoch_unix=int(epoch_unix), signal_unit=apparatus.signal, run_id=run_id, rng=rng,
                                **scan_options)
    scan, sky = inject_sky(scan, model, params, site=site, apparatus=apparatus, orbit=orbit, rotation=rotation,
                           pair=pair, run_id=run_id)
    return scan, truth, sky


@dataclass(frozen=True, eq=False)
class SkyTruth(Described):
    """What went into a simulated sky campaign (per-reading scans or a per-turn table)."""

    parameters: SkyParameters
    site: Site
    apparatus: Apparatus
    schedule: tuple[RunSlot, ...] = field(repr=False)
    seed: int | None
    kind: str = "per-reading"
    orbit: str = "circular"
    rotation: bool = False
    pair: bool = True
    noise: Mapping[str, Any] = field(default_factory=dict, repr=False)
    lab_terms: Mapping[str, tuple[float, float]] = field(default_factory=dict, repr=False)

    @property
    def model(self) -> str:
        return self.parameters.model

    @property
    def span_days(self) -> float:
        first = min(r.start_unix for r in self.schedule)
        last = max(r.start_unix + r.duration_s for r in self.schedule)
        return (last - first) / 86400.0

    def to_dict(self) -> dict:
        return {"model": self.model, "parameters": self.parameters.as_dict(), "site": self.site.to_dict(),
                "apparatus": self.apparatus.to_dict(), "kind": self.kind, "seed": self.seed,
                "orbit": self.orbit, "rotation": self.rotation, "pair": self.pair, "noise": dict(self.noise),
                "n_runs": len(self.schedule), "span_days": self.span_days,
                "runs": [dataclasses.asdict(r) for r in self.schedule],
                "lab_terms": {k: list(v) for k, v in self.lab_terms.items()}}

    def summary(self) -> Summary:
        rows = [("model", self.model.upper(), ""), ("runs", len(self.schedule), ""),
                ("span", self.span_days, "days"), ("seed", self.seed, ""), ("simulated", self.kind, "")]
        rows += [(k, v, "") for k, v in self.parameters.as_dict().items()]
        return Summary("Simulated sky campaign (truth)", tuple(rows),
                       ("SYNTHETIC: drawn from the model with a known truth; not a measurement",))


def check_campaign(model: str, params, schedule) -> tuple[SkyParameters, tuple]:
    """The parameters (as `SkyParameters` of ``model``) and the schedule (a tuple of `RunSlot`) of
    a simulated campaign, checked."""
    params = params if isinstance(params, SkyParameters) else SkyParameters(model, tuple(dict(params or {}).items()))
    if params.model != str(model).strip().lower():
        raise ValueError(f"parameters are for model {params.model!r}, not {model!r}")
    schedule = tuple(schedule)
    if not schedule or not all(isinstance(r, RunSlot) for r in schedule):
        raise ValueError("schedule must be a non-empty sequence of RunSlot (see campaign_schedule)")
    return params, schedule


def simulate_sky_campaign(model: str, params, *, site: Site, apparatus: Apparatus,
                          schedule: Sequence[RunSlot], period_s: float = 300.0, samples_per_turn: int = 16,
                          sigma: float = 1e-15, noise: str = "white", lab_amplitude: float = 0.0,
                          orbit: str = "circular", rotation: bool = False, pair: bool = True, rng=None,
                          **scan_options):
    """Simulate every run of ``schedule`` reading by reading, with the sky signal injected.

    Each run turns ``floor(duration_s / period_s)`` times with ``samples_per_turn`` readings per
    turn and noise ``sigma`` (the log's unit, per reading).  ``lab_amplitude`` adds a lab-fixed 2θ
    term of that amplitude and a random phase to each run.  Further ``scan_options`` (``drift``,
    ``harmonics`` of other orders, ``ar1_coef``, ``marks``, …) go to
    :func:`nullfit.simulation.scans.simulate_scan`.

    Returns ``(scans, truth)``: a list of :class:`~nullfit.reading.scan.Scan` (manifests with site,
    apparatus and run id) and a :class:`SkyTruth`.
    """
    _check_setup(site, apparatus, orbit)
    params, schedule = check_campaign(model, params, schedule)
    harmonics = dict(scan_options.pop("harmonics", None) or {})
    if 2 in harmonics and lab_amplitude:
        raise ValueError("give the lab-fixed 2θ term either as lab_amplitude or in harmonics, not both")
    gen, seed = make_rng(rng)
    children = gen.spawn(len(schedule))
    scans, lab = [], {}
    for slot, child in zip(schedule, children):
        n_turns = int(slot.duration_s // float(period_s))
        if n_turns < 1:
            raise ValueError(f"run {slot.run_id}: {slot.duration_s:g} s is shorter than one turn ({period_s:g} s)")
        h = dict(harmonics)
        if lab_amplitude:
            phase = float(child.uniform(0.0, 180.0))
            h[2] = (float(lab_amplitude), phase)
            lab[slot.run_id] = (float(lab_amplitude), phase)
        scan, _, _ = simulate_sky_scan(params.model, params, site=site, apparatus=apparatus,
                                       epoch_unix=slot.start_unix, run_id=slot.run_id, orbit=orbit,
                                       rotation=rotation, pair=pair, rng=child, n_turns=n_turns,
                                       period_s=float(period_s), samples_per_turn=samples_per_turn, sigma=sigma,
                                       noise=noise, harmonics=h or None, **scan_options)
        scans.append(scan)
    truth = SkyTruth(params, site, apparatus, schedule, seed, "per-reading", orbit, bool(rotation), bool(pair),
                     {"kind": noise, "sigma_per_reading": float(sigma), "period_s": float(period_s),
                      "samples_per_turn": int(samples_per_turn)}, lab)
    return scans, truth

