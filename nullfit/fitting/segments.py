"""Turns as contiguous row ranges ("segments") of a scan, and sums over them."""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

from ..core.errors import AnalysisError, where


@dataclass(frozen=True)
class Segments:
    """Contiguous row ranges of the turns used by a fit (indices into the scan's arrays)."""

    start: np.ndarray  # int64, first row of each turn
    stop: np.ndarray  # int64, one past the last row
    turn: np.ndarray  # turn number (scan.turn value) of each segment
    complete: np.ndarray  # bool

    @functools.cached_property
    def length(self) -> np.ndarray:
        return self.stop - self.start

    @property
    def n(self) -> int:
        return int(self.start.size)

    @property
    def n_rows(self) -> int:
        return int(self.length.sum())

    def take(self, keep: np.ndarray) -> "Segments":
        return Segments(self.start[keep], self.stop[keep], self.turn[keep], self.complete[keep])


def turn_segments(scan) -> Segments:
    """The row range of every turn of ``scan`` that has readings (from ``scan.turn_start``: turns
    are contiguous and numbered in time order)."""
    first = np.asarray(scan.turn_start, dtype=np.int64)
    counts = np.diff(first, append=np.int64(scan.n_samples))
    if np.any(counts < 0):
        raise AnalysisError(f"{where(scan.source)}: turn numbers are not contiguous and increasing in time")
    keep = counts > 0
    labels = np.flatnonzero(keep).astype(np.int64)
    start = first[keep] if not keep.all() else first
    return Segments(start, start + counts[keep], labels, np.asarray(scan.turn_complete)[labels])


def local_time(t, seg_index, t_mid, half_span) -> np.ndarray:
    """Time within each turn scaled to [−1, 1]: ``(t − t_mid) / half_span`` of its turn."""
    return (np.asarray(t, dtype=float) - t_mid[seg_index]) / half_span[seg_index]


def segment_sums(x: np.ndarray, start: np.ndarray, stop: np.ndarray) -> np.ndarray:
    """Sums of ``x[start_i:stop_i]`` for every segment (segments sorted, non-overlapping)."""
    if start.size == 0:
        return np.zeros(0)
    idx = np.empty(2 * start.size, np.int64)
    idx[0::2] = start
    idx[1::2] = stop
    if idx[-1] >= x.size:
        idx = idx[:-1]
    return np.add.reduceat(x, idx)[0::2]


def chunk_bounds(seg: Segments, chunk_rows: int) -> np.ndarray:
    """Segment indices where chunks start (plus the end): whole turns, contiguous rows."""
    if seg.n == 0:
        return np.zeros(1, np.int64)
    before = np.cumsum(seg.length) - seg.length
    gap = np.r_[0, np.cumsum(seg.start[1:] != seg.stop[:-1])]
    key = gap * (1 << 40) + before // chunk_rows
    return np.r_[0, np.flatnonzero(key[1:] != key[:-1]) + 1, seg.n].astype(np.int64)


class Exclusions:
    """Bookkeeping of the turns a fit leaves out: ``excluded`` maps a reason to ``(turns, rows)``
    (shared by the in-memory engine and the streamed fit, so both report the same counts)."""

    excluded: dict

    def screen(self, length: np.ndarray, complete: np.ndarray, complete_only: bool, min_samples: int,
               source: str) -> np.ndarray:
        """The turns a fit keeps (a mask): partial turns out when ``complete_only``, then turns with
        fewer than ``max(min_samples, 2)`` readings; each reason counted in ``excluded`` (set here).
        Raises `AnalysisError` when none is left."""
        self.excluded = {}
        keep = np.ones(length.size, bool)
        if complete_only and (~complete).any():
            self.exclude("partial turns", int((~complete).sum()), int(length[~complete].sum()))
            keep = complete.copy()
        m = max(min_samples, 2)
        few = keep & (length < m)
        if few.any():
            self.exclude(f"turns with fewer than {m} readings", int(few.sum()), int(length[few].sum()))
            keep &= ~few
        if not keep.any():
            raise AnalysisError(f"{where(source)}: no usable turns left to fit "
                                f"(excluded: {self.excluded_text() or 'none'})")
        return keep

    def exclude(self, why: str, n_turns: int, n_rows: int) -> None:
        n_old, r_old = self.excluded.get(why, (0, 0))
        self.excluded[why] = (n_old + int(n_turns), r_old + int(n_rows))

    @property
    def excluded_rows(self) -> int:
        return int(sum(r for _, r in self.excluded.values()))

    @property
    def excluded_turns(self) -> int:
        return int(sum(n for n, _ in self.excluded.values()))

    def excluded_text(self) -> str:
        return "; ".join(f"{n} {why} ({r} rows)" for why, (n, r) in self.excluded.items())
