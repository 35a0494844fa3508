"""Events in a log that a user should hear about: gaps in time and changes of rotation direction.

A *gap* is a step in time much larger than the typical interval between readings
(:data:`GAP_FACTOR` times the typical interval of :class:`nullfit.reading.unwrap.StepStats`:
the larger of the median interval and the median duration of a moving step, so that a table
read at marks, which pauses at each mark and then moves, does not see every move as a gap).
Each gap is reported with the rows on either side, its duration and the number of turns the
table would have made meanwhile at its average speed over the rest of the log (angle turned
divided by time, gaps excluded; ``None`` when the table did not turn).

Direction changes are found by the turn numbering (:mod:`nullfit.reading.turn_numbering`); a
`Scan` reports the row of the first reading after each one.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: A step in time longer than this many typical intervals is a gap.  With an interval ten times
#: the usual one at least nine readings are missing; jitter of a logger's clock or of the table's
#: dwell at a mark stays well below that (common practice: a gap is a multiple of the nominal
#: sampling interval; the factor is an engineering choice).
GAP_FACTOR = 10.0


@dataclass(frozen=True)
class Gap:
    """One gap in time: ``row`` is the source row of the first reading after it, ``after_row``
    the source row of the last reading before it, ``start_s`` the time of that reading (seconds,
    as ``Scan.time``), ``duration_s`` the step in time, ``turns_lost`` the turns the table would
    have made in the missing time at its average speed (None when unknown)."""

    row: int
    after_row: int
    start_s: float
    duration_s: float
    turns_lost: float | None

    def to_dict(self) -> dict:
        return {"row": int(self.row), "after_row": int(self.after_row), "start_s": float(self.start_s),
                "duration_s": float(self.duration_s),
                "turns_lost": None if self.turns_lost is None else float(self.turns_lost)}

    def describe(self) -> str:
        lost = "" if self.turns_lost is None else f", about {self.turns_lost:.3g} turn(s) missing"
        return f"gap of {self.duration_s:.6g} s before row {self.row} (after row {self.after_row}){lost}"


class GapFinder:
    """Finds the gaps of a log fed chunk by chunk (times, source rows and unwrapped angles)."""

    def __init__(self, interval: float | None):
        self.limit = None if not interval else GAP_FACTOR * interval
        self.interval = interval
        self._prev_t = None
        self._prev_row = None
        self._prev_phi = None
        self._found: list[tuple[int, int, float, float]] = []
        self.angle = 0.0  # |angle| turned outside gaps (rad)
        self.time = 0.0  # time outside gaps (s)

    def feed(self, t: np.ndarray, rows: np.ndarray, phi: np.ndarray) -> None:
        if t.size == 0:
            return
        first = self._prev_t is None
        if first:
            dt, dphi = np.diff(t), np.diff(phi)
        else:
            dt = np.diff(t, prepend=self._prev_t)
            dphi = np.diff(phi, prepend=self._prev_phi)
        prev = (self._prev_t, self._prev_row)
        self._prev_t, self._prev_row, self._prev_phi = float(t[-1]), int(rows[-1]), float(phi[-1])
        if self.limit is None or dt.size == 0:
            return
        g = np.flatnonzero(dt > self.limit)
        adphi = np.abs(dphi)
        self.angle += float(adphi.sum()) - float(adphi[g].sum())
        self.time += float(dt.sum()) - float(dt[g].sum())
        for i in g.tolist():
            j = i + 1 if first else i  # index of the reading after the gap
            before = (float(t[j - 1]), int(rows[j - 1])) if j > 0 else prev
            self._found.append((int(rows[j]), before[1], before[0], float(dt[i])))

    def gaps(self) -> tuple[Gap, ...]:
        speed = self.angle / self.time if self.time > 0 else 0.0
        out = []
        for row, before, start, dur in self._found:
            lost = speed * (dur - self.interval) / (2 * np.pi) if speed > 0 else None
            out.append(Gap(row, before, start, dur, lost))
        return tuple(out)
