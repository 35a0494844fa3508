"""Turn numbering: unwrap the turntable angle and give every reading a turn number.

Angles may be logged modulo 360° (either rotation sense), continuously, or at discrete marks
(e.g. 16 marks per turn with the start mark read again at the end of the turn).  Every step below
can be fed a log chunk by chunk with its state carried across chunk boundaries; the result does
not depend on the chunk sizes (a log read whole is one chunk).  Whole-log statistics come first
(:mod:`nullfit.reading.unwrap`), so a chunked reader makes three passes over the angles.

1. *Unwrap* (:class:`~nullfit.reading.unwrap.Unwrapper`).  When all angles lie within one turn
   (range ≤ 360° plus the hysteresis) the log is taken as modulo 360° and a step larger than half
   a turn is a wrap; a wider range means the log is already continuous.  With the times of the
   readings, a gap in a modulo-360° log during which the table kept turning at its steady rate
   for more than half a turn is bridged with the whole turns the rate predicts.
2. *Direction, with hysteresis.*  The log is split into monotonic *segments*.  A change of
   rotation direction is declared only when the angle retreats from its running extreme by more
   than ``hysteresis_deg`` (default :data:`REVERSAL_HYSTERESIS_DEG` = 1°), so an encoder that
   jitters by ±0.01° while the table pauses at a mark is not a reversal.  The segment ends at
   the extreme (together with the pause around it); the next one starts in the other sense.  The
   sense of the first segment is that of the first excursion larger than the hysteresis.
3. *Stops.*  Inside a segment, consecutive readings closer than a tolerance (0.1°, or a quarter
   of the typical step if that is smaller) form one *stop* (the readings taken while the table
   paused at a mark, or a single reading for continuous sampling).
4. *Turns.*  A turn runs from one crossing of the reference mark (θ ≡ 0) to the next in the
   sense of rotation.  A stop that lies on the reference mark opens the next turn, except that
   it *closes* the turn it ends when it is the last stop of the segment, and that when it holds
   more readings than a typical stop (the median length of the runs of readings closer than the
   tolerance, over the whole log), the surplus (the first readings) closes the ending turn:
   this is the "start mark read again" protocol — a drift reference, not an extra azimuth.
5. *Complete or partial.*  A turn is complete when it has at least three readings and both of
   its ends are covered.  An end is covered when the table crossed it within the log (it entered
   the turn from the previous turn, or left it into the next one, in the same segment), or when
   the arc between the end and the nearest reading is at most
   :data:`~nullfit.reading.turn_counter.EDGE_STEPS` (1.1) times the largest
   step between consecutive readings inside the turn (plus the stop tolerance); after a reversal
   the turning point counts as the start of the new segment's first turn.  The step is the turn's
   own, so a turn is not declared partial because the table turned faster or slower in it than
   elsewhere in the log (a turn with a hole inside is judged leniently: the hole is its largest
   step).
   The first and last turns of a log that starts or stops mid-turn, turns cut by a gap and turns
   cut by a reversal are *partial*: flagged, counted, and left out of per-turn statistics by the
   fit.

Steps 2–5 run in :class:`~nullfit.reading.turn_counter.TurnCounter`.  While a log is fed in
chunks, the readings from the start of the stop that holds the current segment's extreme onwards
stay pending (a later reversal could still end the segment there); they are numbered with the
next chunk, so memory holds at most a pause's worth of extra readings.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .turn_counter import EDGE_STEPS, TurnCounter, TurnInfo  # noqa: F401 (re-exported)
from .unwrap import MARK_BIN_DEG, MARK_TOL_DEG, TWO_PI, StepStats, Unwrapper  # noqa: F401 (re-exported)

#: A change of rotation direction needs the angle to retreat from its running extreme by more than
#: this many degrees.  Engineering choice: two orders of magnitude above the ±0.01° jitter of a
#: common encoder at rest and an order of magnitude below any practical mark spacing.
REVERSAL_HYSTERESIS_DEG = 1.0
_RUN_CAP = 4096


@dataclass(frozen=True)
class Turns:
    """Result of :func:`number_turns`."""

    turn: np.ndarray  # int64 per row, 0..n_turns-1, non-decreasing
    unwrapped: np.ndarray  # radians, continuous
    complete: np.ndarray  # bool per turn
    sense: np.ndarray  # +1 / -1 per turn (rotation sense)
    n_reversals: int
    reversal_index: np.ndarray = field(default_factory=lambda: np.zeros(0, np.int64))  # first reading after each


# ---------------------------------------------------------------------------------- second pass
@dataclass(frozen=True)
class Look:
    """What :class:`SecondLook` learned: the typical stop length and the first segment's sense."""

    r_typ: int
    sense0: int


class SecondLook:
    """Second pass over the unwrapped angles: the typical number of readings per stop (median
    length of the runs of consecutive readings closer than the stop tolerance) and the sense of
    the first excursion larger than the hysteresis."""

    def __init__(self, tol: float, hysteresis_rad: float):
        self.tol = tol
        self.hyst = hysteresis_rad
        self._prev = None
        self._run = 0
        self._counts = np.zeros(_RUN_CAP + 1, np.int64)
        self._sense: int | None = None
        self._cmax = -math.inf
        self._cmin = math.inf

    def feed(self, phi: np.ndarray) -> None:
        n = phi.size
        if n == 0:
            return
        if self._prev is None:
            d, shift = np.diff(phi), 1
        else:
            d, shift = np.diff(phi, prepend=self._prev), 0
        self._prev = float(phi[-1])
        r = np.flatnonzero(np.abs(d) > self.tol)
        if r.size == d.size and d.size:  # every step breaks (continuous sampling): runs of one
            first = self._run + shift  # the run open at the chunk start ends at its first step
            if first:
                self._counts[min(first, _RUN_CAP)] += 1
            self._counts[1] += r.size - 1
            self._run = 1
        elif r.size == 0:
            self._run += n
        else:
            r += shift
            lengths = np.minimum(np.diff(r, prepend=r[0] - (self._run + r[0])), _RUN_CAP)
            if lengths[0] == 0:
                lengths = lengths[1:]
            self._counts += np.bincount(lengths, minlength=_RUN_CAP + 1)
            self._run = n - int(r[-1])
        if self._sense is None:
            self._find_sense(phi)

    def _find_sense(self, phi: np.ndarray) -> None:
        a, w, n = 0, 64, phi.size
        while a < n:
            b = min(n, a + w)
            v = phi[a:b]
            cmax = np.maximum(np.maximum.accumulate(v), self._cmax)
            cmin = np.minimum(np.minimum.accumulate(v), self._cmin)
            hit = np.flatnonzero(cmax - cmin > self.hyst)
            if hit.size:
                j = int(hit[0])
                self._sense = 1 if v[j] >= cmax[j] else -1
                return
            self._cmax, self._cmin = float(cmax[-1]), float(cmin[-1])
            a, w = b, 2 * w

    def finish(self) -> Look:
        counts = self._counts.copy()
        if self._run:
            counts[min(self._run, _RUN_CAP)] += 1
        total = int(counts.sum())
        med = int(np.searchsorted(np.cumsum(counts), (total - 1) // 2 + 1)) if total else 1
        return Look(r_typ=max(1, med), sense0=self._sense if self._sense is not None else 1)


# ---------------------------------------------------------------------------------- all at once
def number_turns(angle_rad, *, time=None, hysteresis_deg: float = REVERSAL_HYSTERESIS_DEG,
                 chunk_rows: int | None = None) -> Turns:
    """Unwrap raw angles (radians) and give each reading a turn number (see the module docstring).

    Parameters
    ----------
    angle_rad : array
        Raw turntable angles in radians (modulo 2π in either sense, continuous, or marks).
    time : array, optional
        Times of the readings (seconds, increasing).  With them a modulo-360° log is unwrapped
        correctly across gaps longer than half a turn while the table kept turning; without them
        the shortest way between readings is taken.
    hysteresis_deg : float
        A change of direction needs a retreat larger than this (degrees).
    chunk_rows : int, optional
        Feed the readings in chunks of this many (as a chunked reader does); the result is the same.

    Returns
    -------
    Turns
        ``turn`` (per row), ``unwrapped`` angles (radians), ``complete`` and ``sense`` (per turn),
        the number of direction reversals and the index of the first reading after each.
    """
    a = np.asarray(angle_rad, dtype=float).ravel()
    n = a.size
    t = None if time is None else np.asarray(time, dtype=float).ravel()
    if n == 0:
        return Turns(np.zeros(0, np.int64), a.copy(), np.zeros(0, bool), np.zeros(0, np.int64), 0)
    hyst = math.radians(float(hysteresis_deg))
    step = n if chunk_rows is None else max(1, int(chunk_rows))
    parts = [slice(i, min(n, i + step)) for i in range(0, n, step)]
    with np.errstate(over="ignore", invalid="ignore"):
        stats = StepStats()
        for sl in parts:
            stats.add(a[sl], None if t is None else t[sl])
        summary = stats.finish(hyst)
        unw = Unwrapper(summary)
        phi = np.concatenate([unw.feed(a[sl], None if t is None else t[sl]) for sl in parts])
        look = SecondLook(summary.tol, hyst)
        for sl in parts:
            look.feed(phi[sl])
        lk = look.finish()
        counter = TurnCounter(tol=summary.tol, r_typ=lk.r_typ, sense0=lk.sense0, hysteresis_rad=hyst)
        for i, sl in enumerate(parts):
            counter.feed(phi[sl], final=i == len(parts) - 1)
        info = counter.finish()
    return Turns(info.turn_numbers(), phi, info.complete, info.sense, info.n_reversals, info.seg_starts[1:])
