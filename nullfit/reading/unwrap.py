"""Unwrapping the turntable angle, in chunks, with the whole-log statistics it needs.

Two steps, each of which can be fed a log chunk by chunk (carrying its state across chunk
boundaries) and gives exactly the same result whatever the chunk sizes:

1. :class:`StepStats` — a first look at the steps between consecutive readings: the range of the
   raw angle (a log whose angles all lie within one turn, plus the hysteresis, is read as
   modulo 360°), the typical step, the typical time between readings and the rotation rate.
   The medians come from :class:`~nullfit.reading.histogram.LogHistogram` (0.07 % bins), so
   they are the same for a log read whole or in chunks.  Steps larger than half a turn count
   differently in a modulo-360° log (a wrap) and a continuous one (a real step); both versions
   are kept until the range decides.
2. :class:`Unwrapper` — the unwrapped angle of every reading: ``φ = a − 2π M`` with ``M`` an
   integer count of wraps (and of whole turns bridged across gaps), so the value of every
   reading depends only on the integer carried from the previous chunk.

Definitions (all angles in radians):

* *moving step*: a step larger than :data:`MARK_TOL_DEG` (0.1°) in magnitude;
* *typical step* ``step0``: median magnitude of the moving steps (of the nonzero steps when none
  moves); the stop tolerance is ``min(0.1°, step0 / 4)``;
* *typical interval*: the larger of the median time between readings and the median time of a
  moving step (for a table read at marks with pauses, the time of a move);
* *rotation rate* (for bridging gaps in a modulo-360° log): ``sense × step0 / (median time of a
  moving step)``, used only when at least 8 steps move and at least 95 % of them go one way.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .histogram import LogHistogram

TWO_PI = 2.0 * math.pi
#: Readings closer than this many degrees (or a quarter of the typical step, if smaller) belong to
#: the same stop / lie on the same mark.
MARK_TOL_DEG = 0.1
#: Bin width (degrees) used to reduce azimuths before finding mark clusters.
MARK_BIN_DEG = 1e-4
_MOVE = math.radians(MARK_TOL_DEG)
#: A gap is bridged only when the predicted advance matches the observed step to within the largest of
#: 30°, three typical steps and 2 % of the prediction (and less than half a turn).
BRIDGE_MATCH_DEG = 30.0
BRIDGE_MATCH_REL = 0.02
#: Bridging needs this many moving steps, and this fraction of them in one sense.
BRIDGE_MIN_MOVING = 8
BRIDGE_AGREEMENT = 0.95


def _steps(prev, x: np.ndarray) -> np.ndarray:
    """Differences into every element of ``x`` (the first from ``prev``; none without it)."""
    if prev is None:
        return np.diff(x)
    d = np.empty(x.size)
    d[0] = x[0] - prev
    np.subtract(x[1:], x[:-1], out=d[1:])
    return d


@dataclass(frozen=True)
class StepSummary:
    """What :class:`StepStats` learned about a whole log."""

    n: int
    modulo: bool  # the raw angles lie within one turn (+ hysteresis): unwrap them
    step0: float  # typical step (rad), 0 when the table never moved
    tol: float  # stop tolerance (rad)
    rate: float | None  # rad/s for bridging gaps (modulo logs with times), else None
    interval: float | None  # typical time between readings (s), None without times


class StepStats:
    """Whole-log step statistics, fed chunk by chunk (see the module docstring)."""

    def __init__(self):
        self.n = 0
        self.lo = math.inf
        self.hi = -math.inf
        self._prev_a = None
        self._prev_t = None
        self._with_time = None
        # |step| (all steps, continuous reading) and the steps over half a turn both ways
        self.h_step, self.h_step_bc, self.h_step_bm = LogHistogram(), LogHistogram(), LogHistogram()
        # time between readings: all steps; moving steps (continuous), and big-step corrections
        self.h_dt, self.h_dtm, self.h_dtm_bc, self.h_dtm_bm = LogHistogram(), LogHistogram(), LogHistogram(), LogHistogram()
        # moving steps by sign: [continuous +, continuous -, big-step cont +, -, big-step mod +, -]
        self.signs = np.zeros(6, np.int64)

    def add(self, a: np.ndarray, t: np.ndarray | None = None, lo: float | None = None, hi: float | None = None):
        """Feed the next readings: raw angles ``a`` (radians) and their times (seconds) or None;
        ``lo`` and ``hi``, when the caller knows them, are ``a.min()`` and ``a.max()``."""
        if a.size == 0:
            return
        if self._with_time is None:
            self._with_time = t is not None
        self.n += a.size
        self.lo = min(self.lo, float(a.min()) if lo is None else lo)
        self.hi = max(self.hi, float(a.max()) if hi is None else hi)
        d = _steps(self._prev_a, a)
        self._prev_a = float(a[-1])
        if self._with_time:
            dt = np.abs(_steps(self._prev_t, t))
            self._prev_t = float(t[-1])
        if d.size == 0:
            return
        ad = np.abs(d)
        self.h_step.add(ad)
        mv = ad > _MOVE
        self.signs[0] += np.count_nonzero(d > _MOVE)
        self.signs[1] += np.count_nonzero(d < -_MOVE)
        big = np.flatnonzero(ad > math.pi)
        if big.size:
            db = d[big]
            dm = db - TWO_PI * np.rint(db / TWO_PI)
            self.h_step_bc.add(np.abs(db))
            self.h_step_bm.add(np.abs(dm))
            self.signs[2:] += [np.count_nonzero(db > 0), np.count_nonzero(db < 0),
                               np.count_nonzero(dm > _MOVE), np.count_nonzero(dm < -_MOVE)]
        if self._with_time:
            self.h_dt.add(dt)
            self.h_dtm.add(dt[mv])
            if big.size:
                self.h_dtm_bc.add(dt[big])
                self.h_dtm_bm.add(dt[big][np.abs(dm) > _MOVE])

    def finish(self, hysteresis_rad: float) -> StepSummary:
        modulo = self.n > 0 and (self.hi - self.lo) <= TWO_PI + hysteresis_rad
        if modulo:
            h = self.h_step.add_counts(self.h_step_bc, -1).add_counts(self.h_step_bm)
            hm = self.h_dtm.add_counts(self.h_dtm_bc, -1).add_counts(self.h_dtm_bm)
            pos, neg = self.signs[0] - self.signs[2] + self.signs[4], self.signs[1] - self.signs[3] + self.signs[5]
        else:
            h, hm, pos, neg = self.h_step, self.h_dtm, self.signs[0], self.signs[1]
        step0 = h.median(above=_MOVE)
        if step0 is None:
            step0 = h.median(above=0.0) or 0.0
        tol = min(_MOVE, step0 / 4) if step0 > 0 else _MOVE
        interval = rate = None
        if self._with_time:
            med_all, med_move = self.h_dt.median(), hm.median()
            vals = [v for v in (med_all, med_move) if v]
            interval = max(vals) if vals else None
            n_move = int(pos + neg)
            if modulo and n_move >= BRIDGE_MIN_MOVING and med_move and max(pos, neg) >= BRIDGE_AGREEMENT * n_move:
                rate = (1.0 if pos >= neg else -1.0) * step0 / med_move
        return StepSummary(n=self.n, modulo=bool(modulo), step0=float(step0), tol=float(tol), rate=rate,
                           interval=interval)


class Unwrapper:
    """Unwrapped angles, chunk by chunk (see the module docstring).

    A continuous log is returned as it is (as a new array).  In a modulo-360° log a step larger
    than half a turn is a wrap; with times and a rotation rate, a gap during which the table kept
    turning for more than half a turn is bridged with the whole turns the rate predicts, when the
    match is unambiguous (see :data:`BRIDGE_MATCH_DEG`); a table that stopped during the gap does
    not match and is left alone."""

    def __init__(self, summary: StepSummary):
        self.modulo = summary.modulo
        self.rate = summary.rate
        self.step = summary.step0
        self._prev_a = None
        self._prev_t = None
        self.wraps = 0  # M of the last reading

    def feed(self, a: np.ndarray, t: np.ndarray | None = None) -> np.ndarray:
        if not self.modulo or a.size == 0:
            return np.array(a, dtype=float, copy=True)
        d = _steps(self._prev_a, a)
        shift = a.size - d.size  # 1 when the first reading has no predecessor in this chunk
        pos = np.flatnonzero(np.abs(d) > math.pi)
        delta = np.rint(d[pos] / TWO_PI).astype(np.int64)
        if self.rate is not None and t is not None:
            dt = _steps(self._prev_t, t)
            far = dt.size and float(dt.max()) * abs(self.rate) > math.pi
            pred = self.rate * dt if far else None
            il = np.flatnonzero(np.abs(pred) > math.pi) if far else np.zeros(0, np.int64)
            if il.size:
                m_il = np.zeros(il.size, np.int64)  # the wrap already counted at these steps
                if pos.size:
                    jj = np.minimum(np.searchsorted(pos, il), pos.size - 1)
                    hit = pos[jj] == il
                    m_il[hit] = delta[jj[hit]]
                d_plain = d[il] - TWO_PI * m_il
                p = pred[il]
                k = np.rint((p - d_plain) / TWO_PI)
                resid = np.abs(p - (d_plain + TWO_PI * k))
                allowed = np.maximum(np.maximum(math.radians(BRIDGE_MATCH_DEG), 3 * self.step),
                                     BRIDGE_MATCH_REL * np.abs(p))
                fix = (resid <= allowed) & (allowed < math.pi) & (k != 0)
                if fix.any():
                    pos = np.concatenate((pos, il[fix]))
                    delta = np.concatenate((delta, -k[fix].astype(np.int64)))
                    order = np.argsort(pos, kind="stable")
                    pos, delta = pos[order], delta[order]
            self._prev_t = float(t[-1])
        self._prev_a = float(a[-1])
        start = self.wraps
        if pos.size == 0:
            out = np.array(a, dtype=float, copy=True)
            if start:
                out -= TWO_PI * start
            return out
        levels = start + np.concatenate(([0], np.cumsum(delta)))
        self.wraps = int(levels[-1])
        cuts = np.concatenate(([0], pos + shift, [a.size]))
        offsets = np.repeat(-TWO_PI * levels.astype(float), np.diff(cuts))
        offsets += a
        return offsets
