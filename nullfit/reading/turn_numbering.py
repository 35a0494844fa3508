"""Turn numbering: unwrap the turntable angle and give every reading a turn number.

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
from dataclasses import dataclass

import numpy as np


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
