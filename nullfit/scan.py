"""`Scan`: one validated rotation-scan log (time, turntable angle, signal) with its metadata.

A `Scan` is what every later stage reads.  It holds

* ``time`` — seconds since ``epoch_unix`` (float64, strictly increasing).  The epoch is an
  integer number of Unix seconds (UTC) or ``None`` when the log only has relative time and no
  start time was given.  Keeping the epoch apart means a Unix time near 1.8e9 s never enters
  a design matrix;
* ``angle`` — the turntable angle θ in radians, *unwrapped* (continuous) in the sense the table
  actually turned, so ``cos kθ`` is unaffected and turn bookkeeping is simple;
* ``signal`` — the fringe position (fractions of a fringe) or fractional frequency Δν/ν;
* ``turn`` — 0-based turn number of every row, and per-turn flags (complete or partial,
  rotation sense);
* ``rows`` — the row numbers of the kept rows in the source (1-based data rows) so that any
  message can point back to the file;
* ``dropped`` — how many rows were dropped and why (nothing is dropped silently).

Turn numbering (see :func:`number_turns`)
-----------------------------------------
Angles may be logged modulo 360° (either rotation sense), continuously, or at discrete marks
(e.g. 16 marks per turn with the start mark read again at the end of the turn).  The angles are
unwrapped (a step larger than half a turn is a wrap), then split into monotonic *segments*
(a change of rotation direction starts a new segment).  Inside a segment a turn runs from one
crossing of the reference mark (θ ≡ 0) to the next, in the sense of rotation.  A reading that
lies exactly on the closing mark belongs to the turn it closes when it is the last reading or
when the next reading repeats the same mark (the "start mark read again" protocol: a drift
reference, not an extra azimuth); otherwise it opens the next turn.  A turn is *complete* when
its readings span the full circle (span plus one typical step reaches 360°); the first and last
turns of a log that starts or stops mid-turn, and turns cut by a reversal, are *partial*:
flagged, counted, and left out of per-turn statistics by the fit.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any, Mapping

import numpy as np

TWO_PI = 2.0 * math.pi
#: Relative tolerance (in turns) for a reading to count as lying exactly on a mark.
MARK_TOL_TURNS = 1e-7


class ScanError(ValueError):
    """A scan log (or its manifest) cannot be used; the message names file, row and column."""


class ScanWarning(UserWarning):
    """Something in a scan log was repaired or dropped (and counted)."""


def where(source: str | None, row: int | None = None, column: str | None = None) -> str:
    """``"file.csv, row 12, column 'angle_deg'"`` — the location prefix of every ScanError."""
    parts = [str(source) if source else "<data>"]
    if row is not None:
        parts.append(f"row {row}")
    if column is not None:
        parts.append(f"column {column!r}")
    return ", ".join(parts)


@dataclass(frozen=True)
class Manifest:
    """Metadata of a scan log (normally read from a TOML manifest; see ``nullfit.manifest``).

    ``apparatus`` and ``site`` are the plain tables of the manifest; ``nullfit.Apparatus`` and
    ``nullfit.Site`` turn them into objects.  Everything is optional.
    """

    columns: Mapping[str, str] = field(default_factory=dict)
    units: Mapping[str, str] = field(default_factory=dict)
    start_utc: str | None = None
    apparatus: Mapping[str, Any] = field(default_factory=dict)
    site: Mapping[str, Any] = field(default_factory=dict)
    run_id: str | None = None
    aux_columns: tuple[str, ...] = ()
    notes: str = ""
    path: str | None = None


@dataclass(frozen=True)
class Turns:
    """Result of :func:`number_turns`."""

    turn: np.ndarray  # int64 per row, 0..n-1
    unwrapped: np.ndarray  # radians, continuous
    complete: np.ndarray  # bool per turn
    sense: np.ndarray  # +1 / -1 per turn (rotation sense)
    n_reversals: int


def _typical_step(delta: np.ndarray) -> float:
    moving = np.abs(delta[np.abs(delta) > 0])
    return float(np.median(moving)) if moving.size else 0.0


def number_turns(angle_rad: np.ndarray) -> Turns:
    """Unwrap raw angles (radians) and give each reading a turn number (see module docstring)."""
    a = np.asarray(angle_rad, dtype=float)
    n = a.size
    if n == 0:
        return Turns(np.zeros(0, np.int64), a.copy(), np.zeros(0, bool), np.zeros(0, np.int64), 0)
    phi = np.unwrap(a, period=TWO_PI)
    d = np.diff(phi)
    # rotation sense of every step; zero steps (a mark read twice, a pause) inherit a neighbour's
    sgn = np.sign(d)
    if n > 1:
        nz = np.flatnonzero(sgn)
        if nz.size == 0:
            sgn[:] = 1.0
        else:
            # forward fill, then back fill the leading zeros
            idx = np.where(sgn != 0, np.arange(sgn.size), -1)
            idx = np.maximum.accumulate(idx)
            idx[idx < 0] = nz[0]
            sgn = sgn[idx]
    # segment of each row: a new segment starts at the row after a sign change
    seg_start_rows = [0]
    if n > 2:
        flips = np.flatnonzero(sgn[1:] != sgn[:-1]) + 1  # step index where sense changes
        # the row at which the reversal happens ends the old segment; the next row starts the new
        seg_start_rows += list(flips + 1)
    seg_sense = [sgn[0] if n > 1 else 1.0] + [sgn[s] for s in seg_start_rows[1:]]
    seg_start_rows = np.array(seg_start_rows)
    step = _typical_step(d) if n > 1 else 0.0
    step_turns = step / TWO_PI

    turn = np.empty(n, np.int64)
    complete: list[bool] = []
    sense: list[int] = []
    next_id = 0
    bounds = list(seg_start_rows) + [n]
    for si in range(len(seg_start_rows)):
        lo, hi = bounds[si], bounds[si + 1]
        s = 1.0 if seg_sense[si] >= 0 else -1.0
        prog = s * phi[lo:hi] / TWO_PI  # progress in turns, increasing within the segment
        k = np.floor(prog + MARK_TOL_TURNS)
        on_mark = np.abs(prog - np.round(prog)) <= MARK_TOL_TURNS
        # a reading on the closing mark closes its turn if it is last, or repeated next
        if hi - lo > 1:
            nxt_same = np.zeros(hi - lo, bool)
            nxt_same[:-1] = np.abs(np.diff(prog)) <= MARK_TOL_TURNS
            last = np.zeros(hi - lo, bool)
            last[-1] = True
            closes = on_mark & (nxt_same | last) & (k > k[0])
            # only the first of a repeated pair closes; the repeat opens the next turn
            closes[1:] &= ~(closes[:-1] & nxt_same[:-1])
            k = np.where(closes, k - 1, k)
        # relabel the segment's turns consecutively
        uniq, inv = np.unique(k, return_inverse=True)
        turn[lo:hi] = inv + next_id
        for j in range(uniq.size):
            p = prog[inv == j]
            span = float(p.max() - p.min())
            complete.append(span + step_turns >= 1.0 - 1e-6 and p.size >= 3)
            sense.append(int(s))
        next_id += uniq.size
    return Turns(turn, phi, np.array(complete, bool), np.array(sense, np.int64), len(seg_start_rows) - 1)


@dataclass(frozen=True, eq=False)
class Scan:
    """A validated rotation-scan log.  Build it with :func:`nullfit.read_scan`,
    :meth:`Scan.from_frame` or :meth:`Scan.from_arrays`; never by hand."""

    time: np.ndarray
    angle: np.ndarray
    signal: np.ndarray
    turn: np.ndarray
    turn_complete: np.ndarray
    turn_sense: np.ndarray
    rows: np.ndarray
    epoch_unix: float | None = None
    signal_unit: str = "fringe"
    source: str = "<data>"
    dropped: tuple[tuple[str, int], ...] = ()
    aux: Mapping[str, np.ndarray] = field(default_factory=dict)
    meta: Manifest = field(default_factory=Manifest)
    n_reversals: int = 0

    # ------------------------------------------------------------------ construction
    @classmethod
    def from_arrays(
        cls,
        time,
        angle,
        signal,
        *,
        angle_unit: str = "deg",
        epoch_unix: float | None = None,
        signal_unit: str = "fringe",
        source: str = "<data>",
        rows=None,
        columns: Mapping[str, str] | None = None,
        aux: Mapping[str, Any] | None = None,
        meta: Manifest | None = None,
        dropped: Mapping[str, int] | None = None,
        nonfinite: str = "drop",
    ) -> "Scan":
        """Validate plain arrays and build a `Scan`.

        Parameters
        ----------
        time : array
            Seconds relative to ``epoch_unix`` (if the values look like Unix seconds, > 1e8,
            the integer part of the first value is moved into the epoch).
        angle : array
            Turntable angle in ``angle_unit`` (modulo 360°, continuous, or discrete marks).
        signal : array
            Fringe position or fractional frequency.
        rows : array of int, optional
            Source row numbers (1-based data rows) used in messages; default 1..n.
        columns : mapping, optional
            Names of the ``time``, ``angle`` and ``signal`` columns in the source, for messages.
        nonfinite : {"drop", "raise"}
            NaN/inf readings are dropped and counted (with a `ScanWarning`), or refused.
        """
        from .validate import build_scan  # validation rules live in their own module

        return build_scan(
            cls,
            time,
            angle,
            signal,
            angle_unit=angle_unit,
            epoch_unix=epoch_unix,
            signal_unit=signal_unit,
            source=source,
            rows=rows,
            columns=columns,
            aux=aux,
            meta=meta,
            dropped=dropped,
            nonfinite=nonfinite,
        )

    @classmethod
    def from_frame(cls, df, *, time=None, angle=None, signal=None, angle_unit=None, manifest=None,
                   source: str = "<frame>", nonfinite: str = "drop", signal_unit=None) -> "Scan":
        """Build a `Scan` from a pandas DataFrame (columns chosen as in :func:`read_scan`)."""
        from .logfile import scan_from_frame

        return scan_from_frame(df, time=time, angle=angle, signal=signal, angle_unit=angle_unit,
                               manifest=manifest, source=source, nonfinite=nonfinite,
                               signal_unit=signal_unit)

    # ------------------------------------------------------------------ facts
    @property
    def n_samples(self) -> int:
        return int(self.time.size)

    @property
    def n_turns(self) -> int:
        return int(self.turn_complete.size)

    @property
    def n_complete_turns(self) -> int:
        return int(self.turn_complete.sum())

    @property
    def dropped_rows(self) -> int:
        return int(sum(c for _, c in self.dropped))

    @property
    def angle_deg(self) -> np.ndarray:
        return np.rad2deg(self.angle)

    @property
    def duration_s(self) -> float:
        return float(self.time[-1] - self.time[0]) if self.time.size else 0.0

    @property
    def marks(self) -> int | None:
        """Number of distinct azimuths per turn when the table is read at discrete marks
        (at most 64 distinct values modulo 360°), else ``None`` (continuous sampling)."""
        az = np.round(np.mod(self.angle, TWO_PI) / TWO_PI * 1e6) % 1_000_000
        u = np.unique(az)
        return int(u.size) if u.size <= 64 else None

    @property
    def run_id(self) -> str:
        if self.meta.run_id:
            return str(self.meta.run_id)
        from pathlib import Path

        return Path(self.source).stem if self.source and not self.source.startswith("<") else "scan"

    def complete_rows(self) -> np.ndarray:
        """Boolean mask of the rows that belong to complete turns."""
        return self.turn_complete[self.turn]

    def summary_text(self) -> str:
        return str(self.describe())

    def describe(self):
        """A `nullfit.summary.Summary` of the scan."""
        from .summary import Summary

        rows = [
            ("source", self.source, ""),
            ("samples", self.n_samples, ""),
            ("turns (complete)", self.n_complete_turns, ""),
            ("turns (partial)", self.n_turns - self.n_complete_turns, ""),
            ("duration", self.duration_s, "s"),
            ("signal unit", self.signal_unit, ""),
            ("dropped rows", self.dropped_rows, ""),
        ]
        if self.marks:
            rows.append(("marks per turn", self.marks, ""))
        if self.epoch_unix is not None:
            rows.append(("start (UTC)", self.epoch_iso, ""))
        notes = tuple(f"dropped {c} row(s): {why}" for why, c in self.dropped)
        if self.n_reversals:
            notes += (f"the table changed direction {self.n_reversals} time(s)",)
        return Summary(f"Scan {self.run_id}", tuple(rows), notes)

    @property
    def epoch_iso(self) -> str | None:
        if self.epoch_unix is None:
            return None
        import datetime as _dt

        return _dt.datetime.fromtimestamp(self.epoch_unix, _dt.timezone.utc).isoformat().replace("+00:00", "Z")

    def __repr__(self) -> str:
        return (f"Scan({self.run_id!r}: {self.n_samples} samples, {self.n_complete_turns} complete turns"
                f" + {self.n_turns - self.n_complete_turns} partial, {self.dropped_rows} dropped rows)")

    def _repr_html_(self) -> str:
        return self.describe().as_html()

    def to_frame(self):
        """The kept rows as a DataFrame (time_s, angle_deg, signal, turn, row)."""
        import pandas as pd

        d = {"time_s": self.time, "angle_deg": self.angle_deg, "signal": self.signal,
             "turn": self.turn, "row": self.rows}
        for k, v in self.aux.items():
            d[k] = v
        return pd.DataFrame(d)

    def warn(self, message: str) -> None:  # pragma: no cover - convenience
        warnings.warn(message, ScanWarning, stacklevel=2)
