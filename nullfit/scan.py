"""`Scan`: one validated rotation-scan log (time, turntable angle, signal) with its metadata.

A `Scan` is what every later stage reads.  It holds

* ``time`` — seconds since ``epoch_unix`` (float64, strictly increasing).  The epoch is an
  integer number of Unix seconds (UTC): the whole second at or before the first reading, or
  ``None`` when the log only has relative time and no start time was given (then ``time`` is the
  log's own relative seconds).  Keeping the epoch apart means a Unix time near 1.8e9 s never
  enters a design matrix; relative times keep nanosecond resolution;
* ``angle`` — the turntable angle θ in radians, *unwrapped* (continuous) in the sense the table
  actually turned, so ``cos kθ`` is unaffected and turn bookkeeping is simple;
* ``signal`` — the fringe position (fractions of a fringe) or fractional frequency Δν/ν
  (``signal_unit`` says which: ``"fringe"`` or ``"fractional"``);
* ``turn`` — 0-based turn number of every row, and per-turn flags (``turn_complete``,
  ``turn_sense`` = +1/−1 rotation sense);
* ``rows`` — the source row numbers of the kept rows, counted from 1 over the *data* rows
  (the header line of a CSV file is not counted, so data row ``r`` is line ``r + 1`` of the
  file), so that any message can point back to the file;
* ``dropped`` — how many rows were dropped and why (nothing is dropped silently).

The arrays are read-only.

Turn numbering (see :func:`number_turns`)
-----------------------------------------
Angles may be logged modulo 360° (either rotation sense), continuously, or at discrete marks
(e.g. 16 marks per turn with the start mark read again at the end of the turn).

1. *Unwrap.*  When all angles lie within one turn (range ≤ 360° plus the hysteresis) the log is
   taken as modulo 360° and a step larger than half a turn is a wrap; a wider range means the
   log is already continuous and is left alone.  With the times of the readings, a gap in a
   modulo-360° log during which the table kept turning at its steady rate for more than half a
   turn is bridged with the whole turns the rate predicts (the turns inside the gap are then
   missing, and the turns on either side partial).
2. *Direction, with hysteresis.*  The log is split into monotonic *segments*.  A change of
   rotation direction is declared only when the angle retreats from its running extreme by more
   than ``hysteresis_deg`` (default :data:`REVERSAL_HYSTERESIS_DEG` = 1°), so an encoder that
   jitters by ±0.01° while the table pauses at a mark is not a reversal.  The segment ends at
   the extreme (together with the pause around it); the next one starts in the other sense.
3. *Stops.*  Inside a segment, consecutive readings closer than a tolerance (0.1°, or a quarter
   of the typical step if that is smaller) form one *stop* (the readings taken while the table
   paused at a mark, or a single reading for continuous sampling).
4. *Turns.*  A turn runs from one crossing of the reference mark (θ ≡ 0) to the next in the
   sense of rotation.  A stop that lies on the reference mark opens the next turn, except that
   it *closes* the turn it ends when it is the last stop of the segment, and that when it holds
   more readings than a typical stop, the surplus (the first readings) closes the ending turn:
   this is the "start mark read again" protocol — a drift reference, not an extra azimuth.
5. *Complete or partial.*  A turn is complete when it has at least three readings and either
   the table entered it from the previous turn and left it into the next one, or its readings
   span the circle (span plus one typical step reaches 360°; after a reversal the turning point
   counts as the start of the new segment's first turn).  The first and last turns of a log that
   starts or stops mid-turn, and turns cut by a reversal, are *partial*: flagged, counted, and
   left out of per-turn statistics by the fit.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any, Mapping

import numpy as np

from .summary import Described, Summary

TWO_PI = 2.0 * math.pi

#: A change of rotation direction needs the angle to retreat from its running extreme by more than
#: this many degrees.  Engineering choice: two orders of magnitude above the ±0.01° jitter of a
#: common encoder at rest and an order of magnitude below any practical mark spacing.
REVERSAL_HYSTERESIS_DEG = 1.0

#: Readings closer than this many degrees (or a quarter of the typical step, if smaller) belong to
#: the same stop / lie on the same mark.
MARK_TOL_DEG = 0.1
#: Bin width (degrees) used to reduce azimuths before finding mark clusters.
MARK_BIN_DEG = 1e-4


class ScanError(ValueError):
    """A scan log (or its manifest) cannot be used; the message is one line naming file, row and
    column where they apply."""


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
    """Metadata of a scan log (normally read from a TOML manifest by
    :func:`nullfit.manifest.read_manifest`; the format is in ``docs/manifest.md``).

    ``columns`` maps the roles ``time``/``angle``/``signal`` to column names, ``units`` the roles
    ``time`` (``"s"`` or ``"iso"``), ``angle`` (``"deg"``/``"rad"``) and ``signal``
    (``"fringe"``/``"fractional"``) to units; ``start_utc`` is a normalised ISO-8601 UTC string
    (``...Z``).  ``apparatus`` and ``site`` are the plain tables of the manifest; later modules
    turn them into objects.  Everything is optional.
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

    turn: np.ndarray  # int64 per row, 0..n_turns-1, non-decreasing
    unwrapped: np.ndarray  # radians, continuous
    complete: np.ndarray  # bool per turn
    sense: np.ndarray  # +1 / -1 per turn (rotation sense)
    n_reversals: int


# ---------------------------------------------------------------------------------- turns
def _first_index(test, lo: int, n: int, window: int = 32) -> int | None:
    """Smallest ``i >= lo`` where ``test(lo, hi)[i - lo]`` is true, or None.

    ``test`` evaluates a cumulative criterion on rows ``lo..hi-1``; the window doubles until a hit,
    so finding a hit at distance ``d`` costs O(d), and a whole log O(n) however many segments."""
    while True:
        hi = min(n, lo + window)
        hits = np.flatnonzero(test(lo, hi))
        if hits.size:
            return lo + int(hits[0])
        if hi >= n:
            return None
        window *= 2


def _segments(phi: np.ndarray, hyst: float, tol: float) -> list[tuple[int, int, int]]:
    """Split unwrapped angles into monotonic segments ``(lo, hi, sense)`` with hysteresis.

    Each segment is followed reading by reading for a short stretch (cheap when reversals are
    frequent) and then with vectorised doubling windows (cheap when they are rare)."""
    n = phi.size

    def excursion(lo, hi):
        v = phi[lo:hi]
        return (np.maximum.accumulate(v) - np.minimum.accumulate(v)) > hyst

    j = _first_index(excursion, 0, n)
    if j is None:  # the table never moved by more than the hysteresis
        return [(0, n, 1)]
    sense = 1 if phi[j] >= phi[: j + 1].max() else -1
    vals = phi.tolist()
    short = 64
    segs = []
    lo = 0
    while True:
        # first reading that retreats by more than the hysteresis from the running extreme
        k = None
        best, e = sense * vals[lo], lo
        stop = min(n, lo + short)
        for i in range(lo + 1, stop):
            v = sense * vals[i]
            if v > best:
                best, e = v, i
            elif v < best - hyst:
                k = i
                break
        if k is None and stop < n:
            def retreat(a, b, s=sense):
                v = s * phi[a:b]
                return v < np.maximum.accumulate(v) - hyst

            k = _first_index(retreat, lo, n)
            if k is not None:
                e = lo + int(np.argmax(sense * phi[lo:k]))  # the turning point (first at the extreme)
                best = sense * phi[e]
        if k is None:
            segs.append((lo, n, sense))
            return segs
        # the pause around the turning point stays in this segment
        end = e + 1
        while end < k and sense * vals[end] >= best - tol:
            end += 1
        segs.append((lo, end, sense))
        lo, sense = end, -sense


def _typical_step(phi: np.ndarray, tol: float) -> float:
    """Median absolute step between readings, ignoring jitter (steps ≤ tol) when the table moves
    by larger steps; the median nonzero step otherwise."""
    d = np.abs(np.diff(phi))
    moving = d[d > tol]
    if moving.size:
        return float(np.median(moving))
    nz = d[d > 0]
    return float(np.median(nz)) if nz.size else 0.0


def _bridge_gaps(phi: np.ndarray, time: np.ndarray, tol: float) -> np.ndarray:
    """Re-unwrap the steps of a modulo-360° log across gaps in time longer than half a turn.

    Plain unwrapping takes the shortest way between two readings, so a gap in the log during
    which the table went on turning for more than half a turn loses whole turns.  When the table
    turns in one sense at a steady rate, the rate (median of dθ/dt over the moving steps) predicts
    the advance across such a gap; the number of whole turns added is the one that brings the
    observed step closest to the prediction, and it is added only when the match is unambiguous
    (within 30°, three typical steps or 2 % of the predicted advance, whichever is largest, and
    less than half a turn).  A table that stopped during the gap does not match and is left alone.
    """
    d = np.diff(phi)
    dt = np.diff(np.asarray(time, dtype=float))
    moving = (np.abs(d) > tol) & (dt > 0)
    if moving.sum() < 8:
        return phi
    rates = d[moving] / dt[moving]
    rate = float(np.median(rates))
    if rate == 0 or (np.sign(rates) == np.sign(rate)).mean() < 0.95:
        return phi  # no steady one-way rotation (e.g. a back-and-forth scan)
    pred = rate * dt
    long_gap = np.abs(pred) > math.pi
    if not long_gap.any():
        return phi
    step = float(np.median(np.abs(d[moving])))
    k = np.round((pred - d) / TWO_PI)
    resid = np.abs(pred - (d + TWO_PI * k))
    allowed = np.maximum(np.maximum(math.radians(30.0), 3 * step), 0.02 * np.abs(pred))
    fix = long_gap & (resid <= allowed) & (allowed < math.pi) & (k != 0)
    if not fix.any():
        return phi
    d = d + TWO_PI * np.where(fix, k, 0)
    return np.concatenate(([phi[0]], phi[0] + np.cumsum(d)))


def number_turns(angle_rad, *, time=None, hysteresis_deg: float = REVERSAL_HYSTERESIS_DEG) -> Turns:
    """Unwrap raw angles (radians) and give each reading a turn number (see the module docstring).

    Parameters
    ----------
    angle_rad : array
        Raw turntable angles in radians (modulo 2π in either sense, continuous, or marks).
    time : array, optional
        Times of the readings (seconds).  With them a modulo-360° log is unwrapped correctly
        across gaps longer than half a turn while the table kept turning (see
        :func:`_bridge_gaps`); without them the shortest way between readings is taken.
    hysteresis_deg : float
        A change of direction needs a retreat larger than this (degrees).

    Returns
    -------
    Turns
        ``turn`` (per row), ``unwrapped`` angles (radians), ``complete`` and ``sense`` (per turn)
        and the number of direction reversals.
    """
    a = np.asarray(angle_rad, dtype=float).ravel()
    n = a.size
    if n == 0:
        return Turns(np.zeros(0, np.int64), a.copy(), np.zeros(0, bool), np.zeros(0, np.int64), 0)
    hyst = math.radians(float(hysteresis_deg))
    with np.errstate(over="ignore", invalid="ignore"):
        if float(a.max()) - float(a.min()) <= TWO_PI + hyst:
            phi = np.unwrap(a, period=TWO_PI)  # modulo-360° log (or at most one turn)
            if time is not None and n > 2:
                phi = _bridge_gaps(phi, time, math.radians(MARK_TOL_DEG))
        else:
            phi = a.copy()  # already continuous
        step0 = _typical_step(phi, math.radians(MARK_TOL_DEG))
        tol = min(math.radians(MARK_TOL_DEG), step0 / 4) if step0 > 0 else math.radians(MARK_TOL_DEG)
        step_t = _typical_step(phi, tol) / TWO_PI
        tol_t = tol / TWO_PI
        segs = _segments(phi, hyst, tol)

        seg_lo = np.array([lo for lo, _, _ in segs], np.int64)
        seg_len = np.array([hi - lo for lo, hi, _ in segs], np.int64)
        seg_s = np.array([s for _, _, s in segs], np.int64)
        seg_id = np.repeat(np.arange(len(segs)), seg_len)
        prog = seg_s[seg_id] * phi / TWO_PI  # progress in turns, increasing within each segment
        turn, complete, sense = _number_segments(prog, phi, seg_id, seg_lo, seg_s, tol_t, step_t)
    return Turns(turn, phi, complete, sense, len(segs) - 1)


def _segmented_cummax(values: np.ndarray, group: np.ndarray) -> np.ndarray:
    """Running maximum of int64 ``values`` restarted at every new ``group`` (groups ascending)."""
    if values.size == 0:
        return values
    lo, hi = int(values.min()), int(values.max())
    span = hi - lo + 1
    if span * (int(group[-1]) + 1) < 2**62:  # exact offset trick
        off = (values - lo) + group * span
        return np.maximum.accumulate(off) - group * span + lo
    out = values.copy()
    for g in np.unique(group):
        sel = group == g
        out[sel] = np.maximum.accumulate(values[sel])
    return out


def _number_segments(prog, phi, seg_id, seg_lo, seg_s, tol_t, step_t):
    """Turn numbers (rows), completeness and sense (turns) for all segments at once."""
    n = prog.size
    seg_start = np.zeros(n, bool)
    seg_start[seg_lo] = True
    # stops: consecutive readings closer than the tolerance (jitter while the table pauses)
    brk = seg_start.copy()
    brk[1:] |= np.diff(prog) > tol_t
    starts = np.flatnonzero(brk)
    lengths = np.diff(np.append(starts, n))
    r_typ = max(1, int(np.median(lengths)))
    mean = np.add.reduceat(prog, starts) / lengths
    stop_seg = seg_id[starts]
    k = np.floor(mean + tol_t)
    k = np.clip(k, -(2.0**52), 2.0**52).astype(np.int64)
    k = _segmented_cummax(k, stop_seg)
    on_mark = np.abs(mean - np.round(mean)) <= tol_t
    krow = np.repeat(k, lengths)
    # a stop on the reference mark that follows the previous turn closes it: wholly when it is the
    # last stop of its segment, else its surplus over a typical stop (the start mark read again)
    same_seg = np.zeros(starts.size, bool)
    same_seg[1:] = stop_seg[1:] == stop_seg[:-1]
    last_of_seg = np.ones(starts.size, bool)
    last_of_seg[:-1] = stop_seg[1:] != stop_seg[:-1]
    closing = np.zeros(starts.size, bool)
    closing[1:] = same_seg[1:] & on_mark[1:] & (k[1:] == k[:-1] + 1)
    n_close = np.where(last_of_seg, lengths, lengths - r_typ)
    for i in np.flatnonzero(closing & (n_close > 0)):
        krow[starts[i]: starts[i] + n_close[i]] = k[i] - 1
    # turns: a new one wherever a segment starts or the turn index changes
    new = seg_start.copy()
    new[1:] |= krow[1:] != krow[:-1]
    turn = np.cumsum(new) - 1
    bounds = np.flatnonzero(new)
    count = np.diff(np.append(bounds, n))
    kval = krow[bounds]
    tseg = seg_id[bounds]
    pmin = np.minimum.reduceat(prog, bounds)
    pmax = np.maximum.reduceat(prog, bounds)
    # after a reversal the segment's first turn starts at the turning point (the reading before)
    first_turn = np.flatnonzero(seg_start[bounds])
    for j in first_turn:
        lo = bounds[j]
        if lo > 0:
            entry = seg_s[tseg[j]] * phi[lo - 1] / TWO_PI
            if math.floor(entry + tol_t) == kval[j]:
                pmin[j] = min(pmin[j], entry)
    has_prev = np.zeros(kval.size, bool)
    has_prev[1:] = (tseg[1:] == tseg[:-1]) & (kval[:-1] == kval[1:] - 1)
    has_next = np.zeros(kval.size, bool)
    has_next[:-1] = has_prev[1:]
    full = (pmax - pmin) + step_t >= 1.0 - 2.0 * tol_t
    complete = (count >= 3) & ((has_prev & has_next) | full)
    return turn.astype(np.int64), complete, seg_s[tseg].astype(np.int64)


# ---------------------------------------------------------------------------------- Scan
def _readonly(arr: np.ndarray) -> np.ndarray:
    arr = np.array(arr, copy=True)
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True, eq=False)
class Scan(Described):
    """A validated rotation-scan log.  Build it with :func:`nullfit.read_scan`,
    :meth:`Scan.from_frame` or :meth:`Scan.from_arrays`; never by hand."""

    time: np.ndarray
    angle: np.ndarray
    signal: np.ndarray
    turn: np.ndarray
    turn_complete: np.ndarray
    turn_sense: np.ndarray
    rows: np.ndarray
    epoch_unix: int | None = None
    signal_unit: str = "fringe"
    source: str = "<data>"
    dropped: tuple[tuple[str, int], ...] = ()
    aux: Mapping[str, np.ndarray] = field(default_factory=dict)
    meta: Manifest = field(default_factory=Manifest)
    n_reversals: int = 0

    def __post_init__(self):
        for name in ("time", "angle", "signal", "turn", "turn_complete", "turn_sense", "rows"):
            object.__setattr__(self, name, _readonly(getattr(self, name)))
        object.__setattr__(self, "aux", {k: _readonly(v) for k, v in dict(self.aux).items()})

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
            Seconds relative to ``epoch_unix``.  Without an epoch, values above 1e8 s are taken
            as Unix seconds and split into an integer-second epoch plus relative seconds (each
            float is read as its shortest decimal representation, to the nanosecond).
        angle : array
            Turntable angle in ``angle_unit`` (modulo 360°, continuous, or discrete marks).
        signal : array
            Fringe position or fractional frequency.
        epoch_unix : float, optional
            Unix seconds of ``time == 0``; a fractional part is moved into ``time`` so that the
            stored epoch is a whole second.
        rows : array of int, optional
            Source row numbers (1-based data rows) used in messages; default 1..n.
        columns : mapping, optional
            Names of the ``time``, ``angle`` and ``signal`` columns in the source, for messages.
        nonfinite : {"drop", "raise"}
            NaN/inf readings are dropped and counted (with a `ScanWarning`), or refused.

        Raises
        ------
        ScanError
            With a one-line message (see :mod:`nullfit.validate` for the checks).
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
        """Build a `Scan` from a pandas DataFrame (columns chosen as in :func:`read_scan`;
        row ``r`` in messages is the ``r``-th row of the frame, counted from 1)."""
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

    @cached_property
    def marks(self) -> int | None:
        """Number of distinct azimuths per turn when the table is read at discrete marks
        (at most 64 clusters of readings, each narrower than 1°, modulo 360°; encoder jitter at a
        mark is tolerated), else ``None`` (continuous sampling).

        Every reading counts (a strided subsample can alias with the readings per turn).  The
        azimuths are first reduced to occupied bins of 1e-4° with one ``bincount`` — O(n), no
        sort of the full log — and the clusters are found on those bins."""
        if self.angle.size == 0:
            return None
        nbins = int(round(360.0 / MARK_BIN_DEG))
        idx = (np.mod(np.rad2deg(self.angle), 360.0) / MARK_BIN_DEG).astype(np.int64) % nbins
        az = np.flatnonzero(np.bincount(idx, minlength=nbins)) * MARK_BIN_DEG  # sorted, occupied
        breaks = np.flatnonzero(np.diff(az) > MARK_TOL_DEG)
        lo = np.concatenate(([0], breaks + 1))
        hi = np.append(breaks, az.size - 1)
        width = az[hi] - az[lo]
        count = lo.size
        if count > 1 and az[0] + 360.0 - az[-1] <= MARK_TOL_DEG:  # the cluster around 0°/360°
            width[0] = width[0] + width[-1] + (az[0] + 360.0 - az[-1])
            width = width[:-1]
            count -= 1
        if count > 64 or float(width.max()) > 1.0:
            return None
        return int(count)

    @property
    def run_id(self) -> str:
        if self.meta.run_id:
            return str(self.meta.run_id)
        from pathlib import Path

        return Path(self.source).stem if self.source and not self.source.startswith("<") else "scan"

    def complete_rows(self) -> np.ndarray:
        """Boolean mask of the rows that belong to complete turns."""
        return self.turn_complete[self.turn]

    @property
    def epoch_iso(self) -> str | None:
        if self.epoch_unix is None:
            return None
        import datetime as _dt

        return _dt.datetime.fromtimestamp(self.epoch_unix, _dt.timezone.utc).isoformat().replace("+00:00", "Z")

    # ------------------------------------------------------------------ description
    def summary(self) -> Summary:
        """A `nullfit.summary.Summary` of the scan."""
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
            rows.append(("epoch (UTC)", self.epoch_iso, ""))
        notes = tuple(f"dropped {c} row(s): {why}" for why, c in self.dropped)
        if self.n_reversals:
            notes += (f"the table changed direction {self.n_reversals} time(s)",)
        if self.aux:
            notes += ("auxiliary columns: " + ", ".join(self.aux),)
        return Summary(f"Scan {self.run_id}", tuple(rows), notes)

    def to_dict(self) -> dict:
        """The scan's facts (not its arrays) as a JSON-able dict."""
        return {
            "run_id": self.run_id,
            "source": self.source,
            "n_samples": self.n_samples,
            "n_turns": self.n_turns,
            "n_complete_turns": self.n_complete_turns,
            "n_reversals": int(self.n_reversals),
            "marks": self.marks,
            "duration_s": self.duration_s,
            "epoch_unix": self.epoch_unix,
            "epoch_utc": self.epoch_iso,
            "signal_unit": self.signal_unit,
            "dropped_rows": self.dropped_rows,
            "dropped": {why: int(c) for why, c in self.dropped},
            "aux_columns": list(self.aux),
        }

    def __repr__(self) -> str:
        return (f"Scan({self.run_id!r}: {self.n_samples} samples, {self.n_complete_turns} complete turns"
                f" + {self.n_turns - self.n_complete_turns} partial, {self.dropped_rows} dropped rows)")

    def to_frame(self):
        """The kept rows as a DataFrame (time_s, angle_deg, signal, turn, row, aux columns)."""
        import pandas as pd

        d = {"time_s": self.time, "angle_deg": self.angle_deg, "signal": self.signal,
             "turn": self.turn, "row": self.rows}
        for k, v in self.aux.items():
            d[k] = v
        return pd.DataFrame(d)

    def warn(self, message: str) -> None:  # pragma: no cover - convenience
        warnings.warn(message, ScanWarning, stacklevel=2)
