"""Synthetic log files with auxiliary channels and a written truth (what ``nullfit simulate`` writes).

:func:`simulate_log` extends :func:`~nullfit.simulation.scans.simulate_frame` with

* **auxiliary channels** (:class:`AuxChannel`): a tilt that follows the rotation — its own 2θ
  part ``A cos(2(θ − φ))`` plus a random walk — and a temperature that drifts (linear plus a random
  walk).  Each channel couples into the signal with a chosen coefficient ``coupling`` (signal
  units per unit of the channel): ``signal += coupling · channel_true``.  The logged channel is
  the true channel plus an optional sensor noise that does **not** couple (a sensor's own noise).
* **extra signals** (``extra=``): named callables ``f(time_unix_or_rel_s, theta_rad) -> values``
  added to the signal and recorded in the truth.  This is where a sky-frame (sidereal) signal
  is injected once the sky stage provides one; nothing else here needs to change.

and :func:`write_log` writes the readings (CSV or Parquet) and a TOML manifest beside them whose
``[notes] text`` carries the truth in words and as one JSON line (``truth-json: {...}``), with
the seed.  Randomness: the readings use the seed exactly as :func:`simulate_frame` does (same
seed, same noise); the channels draw from an independent stream derived from the same seed.
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any, Callable, Sequence

import numpy as np

from ..core.conventions import make_rng
from .scans import simulate_frame

#: Key mixed into the seed for the auxiliary channels' stream (independent of the readings').
_AUX_STREAM = 0x41_55_58


@dataclass(frozen=True)
class AuxChannel:
    """One auxiliary channel: ``offset + slope·t + A₂ m(t) cos(2(θ − φ₂)) + walk`` (true values),
    logged with extra sensor noise ``sensor_sigma``; it adds ``coupling × true value`` to the
    signal.  ``m(t) = 1 + modulation · sin(2π t / modulation_period_s)`` lets the channel's 2θ part
    change from turn to turn (a bearing that warms up, a floor that settles), which is what lets a
    turn-level coupling fit tell the channel's contribution from a constant 2θ signal."""

    name: str
    unit: str = ""
    coupling: float = 0.0
    amplitude_2theta: float = 0.0
    phase_2theta_deg: float = 0.0
    offset: float = 0.0
    slope_per_s: float = 0.0
    walk_step: float = 0.0
    sensor_sigma: float = 0.0
    modulation: float = 0.0
    modulation_period_s: float = 0.0

    def __post_init__(self):
        if not str(self.name).strip():
            raise ValueError("an auxiliary channel needs a column name")
        for key in ("coupling", "amplitude_2theta", "phase_2theta_deg", "offset", "slope_per_s", "walk_step",
                    "sensor_sigma", "modulation", "modulation_period_s"):
            v = float(getattr(self, key))
            if not math.isfinite(v):
                raise ValueError(f"aux channel {self.name!r}: {key} must be finite, not {v!r}")
            object.__setattr__(self, key, v)
        for key in ("amplitude_2theta", "walk_step", "sensor_sigma", "modulation", "modulation_period_s"):
            if getattr(self, key) < 0:
                raise ValueError(f"aux channel {self.name!r}: {key} must be >= 0, not {getattr(self, key)!r}")
        if self.modulation and not self.modulation_period_s > 0:
            raise ValueError(f"aux channel {self.name!r}: a modulation needs modulation_period_s > 0")

    @property
    def c2(self) -> float:
        return self.amplitude_2theta * math.cos(math.radians(2 * self.phase_2theta_deg))

    @property
    def s2(self) -> float:
        return self.amplitude_2theta * math.sin(math.radians(2 * self.phase_2theta_deg))

    def true_values(self, t, theta, gen) -> np.ndarray:
        v = self.offset + self.slope_per_s * t
        m = 1.0
        if self.modulation:
            m = 1.0 + self.modulation * np.sin(2 * np.pi * np.asarray(t, dtype=float) / self.modulation_period_s)
        v = v + m * (self.c2 * np.cos(2 * theta) + self.s2 * np.sin(2 * theta))
        if self.walk_step > 0:
            steps = gen.standard_normal(t.size)
            steps[0] = 0.0
            v = v + self.walk_step * np.cumsum(steps)
        return v


def tilt(coupling: float = 0.0, *, amplitude_2theta: float = 1.0, phase_2theta_deg: float = 0.0,
         walk_step: float = 0.0, sensor_sigma: float = 0.0, name: str = "tilt_urad", modulation: float = 0.0,
         modulation_period_s: float = 0.0) -> AuxChannel:
    """A tilt sensor in µrad that follows the rotation (its own 2θ part, optionally modulated) and wanders."""
    return AuxChannel(name, "µrad", coupling, amplitude_2theta, phase_2theta_deg, 0.0, 0.0, walk_step, sensor_sigma,
                      modulation, modulation_period_s)


def temperature(coupling: float = 0.0, *, slope_per_s: float = 1e-4, walk_step: float = 0.0,
                sensor_sigma: float = 0.0, offset: float = 293.15, name: str = "temperature_k") -> AuxChannel:
    """A temperature in K that drifts (linearly plus a random walk)."""
    return AuxChannel(name, "K", coupling, 0.0, 0.0, offset, slope_per_s, walk_step, sensor_sigma)


@dataclass(frozen=True, eq=False)
class LogTruth:
    """The truth of a simulated log: the scan's `Truth`, the channels and the extra signals."""

    scan: Any
    channels: tuple[AuxChannel, ...] = ()
    extra: tuple[str, ...] = ()
    channel_values: dict = field(default_factory=dict, repr=False)

    def to_dict(self) -> dict:
        d = self.scan.to_dict()
        d["aux"] = {c.name: asdict(c) for c in self.channels}
        d["extra_signals"] = list(self.extra)
        d["signal_model"] = ("signal = drift + Σ_k A_k cos(k(θ − φ_k)) + Σ_aux coupling·aux_true + extra + noise; "
                             "aux logged = aux_true + sensor noise")
        return d

    def notes_text(self, intro: str = "") -> str:
        d = self.to_dict()
        s = self.scan
        lines = [intro] if intro else []
        lines.append("SYNTHETIC data written by nullfit simulate (nullfit.simulation); not a measurement.")
        words = [f"seed {s.seed}"]
        for h in s.harmonics:
            words.append(f"{h.k}θ amplitude {h.amplitude:g} {s.unit} at phase {h.phase_deg:g}° "
                         f"(c{h.k} = {h.c:.6g}, s{h.k} = {h.s:.6g})")
        words.append(f"noise {s.noise.describe()}")
        if s.drift.slope or s.drift.walk_step or s.drift.offset:
            words.append(f"drift offset {s.drift.offset:g}, slope {s.drift.slope:g}/s, walk step {s.drift.walk_step:g}")
        for c in self.channels:
            words.append(f"channel {c.name} ({c.unit}): coupling {c.coupling:g} {s.unit} per {c.unit or 'unit'}, "
                         f"own 2θ amplitude {c.amplitude_2theta:g} at {c.phase_2theta_deg:g}°, slope "
                         f"{c.slope_per_s:g}/s, walk step {c.walk_step:g}, sensor noise {c.sensor_sigma:g}")
        lines.append("Truth: " + "; ".join(words) + ".")
        lines.append("truth-json: " + json.dumps(d, separators=(",", ":"), default=_json_default))
        return "\n".join(lines)


def _json_default(v):
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (np.floating,)):
        return float(v)
    if isinstance(v, np.ndarray):
        return v.tolist()
    raise TypeError(f"not JSON-able: {type(v).__name__}")


def truth_from_notes(text: str) -> dict:
    """The JSON truth written into a manifest's ``[notes] text`` by :func:`write_log`."""
    for line in str(text).splitlines():
        if line.startswith("truth-json: "):
            return json.loads(line[len("truth-json: "):])
    raise ValueError("no 'truth-json:' line in the notes")


def simulate_log(*, aux: Sequence[AuxChannel] = (), extra: Sequence[tuple[str, Callable]] = (), rng=None,
                 **kwargs):
    """The readings of :func:`simulate_frame` plus auxiliary channels (coupled into the signal) and
    extra signals.  Returns ``(DataFrame, LogTruth)``; the channel columns are named by
    ``AuxChannel.name``.  Keywords as :func:`simulate_frame` (``time_format`` included)."""
    gen, seed = make_rng(rng)
    df, truth = simulate_frame(rng=gen if seed is None else seed, **kwargs)
    names = [c.name for c in aux]
    if len(set(names)) != len(names):
        raise ValueError(f"auxiliary channel names must differ, got {names}")
    clash = [n for n in names if n in df.columns]
    if clash:
        raise ValueError(f"auxiliary channel {clash[0]!r} has the name of a log column")
    sig_col = df.columns[2]
    t, theta = truth.time, truth.theta
    agen = np.random.default_rng([_AUX_STREAM, seed if seed is not None else int(gen.integers(2**62))])
    values = {}
    for c in aux:
        g_true, g_sensor = agen.spawn(2)
        true = c.true_values(t, theta, g_true)
        logged = true + (c.sensor_sigma * g_sensor.standard_normal(t.size) if c.sensor_sigma > 0 else 0.0)
        df[sig_col] = df[sig_col].to_numpy() + c.coupling * true
        df[c.name] = logged
        values[c.name] = true
    labels = []
    for name, fn in extra:
        times = t if truth.epoch_unix is None else truth.epoch_unix + t
        df[sig_col] = df[sig_col].to_numpy() + np.asarray(fn(times, theta), dtype=float)
        labels.append(str(name))
    return df, LogTruth(truth, tuple(aux), tuple(labels), values)


def manifest_text(log_name: str, truth: LogTruth, *, columns: dict, units: dict, start_utc: str | None,
                  run_id: str | None = None, apparatus: dict | None = None, site: dict | None = None,
                  intro: str = "") -> str:
    """A TOML manifest (docs/manifest.md) describing a simulated log, the truth in ``[notes]``."""

    def val(v):
        if isinstance(v, str):
            return json.dumps(v, ensure_ascii=False)
        if isinstance(v, (list, tuple)):
            return "[" + ", ".join(val(x) for x in v) + "]"
        return repr(float(v)) if isinstance(v, float) else str(v)

    out = [f"# Manifest of {log_name} (format: docs/manifest.md). SYNTHETIC data from nullfit simulate.", ""]

    def table(name, items):
        items = {k: v for k, v in items.items() if v is not None and v != () and v != []}
        if items:
            out.append(f"[{name}]")
            out.extend(f"{k} = {val(v)}" for k, v in items.items())
            out.append("")

    table("scan", {"run_id": run_id})
    table("columns", columns)
    table("units", units)
    table("time", {"start_utc": start_utc})
    table("apparatus", apparatus or {})
    table("site", site or {})
    notes = truth.notes_text(intro)
    if "'''" in notes:  # pragma: no cover - JSON and the words above never hold three quotes
        raise ValueError("notes text cannot hold three single quotes")
    out.append("[notes]")
    out.append(f"text = '''\n{notes}'''")
    return "\n".join(out) + "\n"


def write_log(path, df, truth: LogTruth, *, force: bool = False, run_id: str | None = None,
              apparatus: dict | None = None, site: dict | None = None) -> tuple[Path, Path]:
    """Write ``df`` to ``path`` (``.csv``, or ``.parquet``/``.pq``) and its manifest (same stem,
    ``.toml``).  Refuses (``FileExistsError``) when either exists unless ``force``; checks both
    before writing either."""
    p = Path(path)
    man = p.with_suffix(".toml")
    if p.suffix.lower() not in (".csv", ".parquet", ".pq"):
        raise ValueError(f"{p}: the output must end in .csv, .parquet or .pq")
    if man == p:
        raise ValueError(f"{p}: the log cannot be its own manifest")
    for q in (p, man):
        if q.is_dir():
            raise IsADirectoryError(21, "output is a folder, expected a file name", str(q))
        if q.exists() and not force:
            raise FileExistsError(17, "output exists; pass --force to overwrite", str(q))
    if not p.parent.exists():
        raise FileNotFoundError(2, "output folder does not exist", str(p.parent))
    s = truth.scan
    tcol, acol, scol = df.columns[:3]
    columns = {"time": tcol, "angle": acol, "signal": scol, "aux": [c.name for c in truth.channels]}
    units = {"time": "iso" if tcol == "timestamp" else "s", "angle": "deg", "signal": s.unit}
    start = None
    if tcol == "time_s" and s.epoch_unix is not None:
        import datetime as _dt

        start = _dt.datetime.fromtimestamp(s.epoch_unix, _dt.timezone.utc).isoformat().replace("+00:00", "Z")
    text = manifest_text(p.name, truth, columns=columns, units=units, start_utc=start, run_id=run_id,
                         apparatus=apparatus, site=site)
    if p.suffix.lower() == ".csv":
        df.to_csv(p, index=False, float_format="%.10g")
    else:
        df.to_parquet(p, index=False)
    man.write_text(text, encoding="utf-8")
    return p, man
