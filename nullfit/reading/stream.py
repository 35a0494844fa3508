"""A scan read in chunks: the interface between a log too large for memory and the fit.

A :class:`ScanStream` yields :class:`ScanChunk` objects in time order.  Every chunk carries the
same per-reading arrays as a `Scan` (relative time, unwrapped angle in radians, signal, aux
columns, source rows) and the **global** turn number of every reading, consistent across chunk
boundaries (a turn may straddle two or more chunks).  Facts that are known only once the whole
log has been seen — which turns are complete, the rotation sense of each turn, the number of
direction reversals, dropped rows — are attributes of the stream, valid after a full pass.

:meth:`ScanStream.from_scan` serves a `Scan` already in memory in chunks; it is the reference
against which a stream read from a file is checked (same numbers).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Iterator, Mapping

import numpy as np

from .manifest import Manifest


@dataclass(frozen=True, eq=False)
class ScanChunk:
    """Consecutive readings of a scan (arrays as in `Scan`; ``turn`` holds global turn numbers)."""

    time: np.ndarray
    angle: np.ndarray
    signal: np.ndarray
    turn: np.ndarray
    rows: np.ndarray
    aux: Mapping[str, np.ndarray] = field(default_factory=dict)

    @property
    def n(self) -> int:
        return int(self.time.size)


class ScanStream:
    """Chunks of one scan plus the facts of the whole scan (see the module docstring).

    Attributes valid before iteration: ``source``, ``unit``, ``epoch_unix``, ``meta``,
    ``aux_names``.  Attributes valid after a complete iteration (or at once for
    :meth:`from_scan`): ``turn_complete`` and ``turn_sense`` (per turn), ``n_reversals``,
    ``n_samples``, ``dropped`` (``((why, count), ...)``), ``marks``.
    """

    def __init__(self, chunks, *, source: str, unit: str, epoch_unix: int | None, meta: Manifest | None = None,
                 aux_names=(), finish=None):
        self._chunks = chunks
        self._finish = finish
        self.source = source
        self.unit = unit
        self.epoch_unix = epoch_unix
        self.meta = meta if meta is not None else Manifest()
        self.aux_names = tuple(aux_names)
        self.turn_complete: np.ndarray | None = None
        self.turn_sense: np.ndarray | None = None
        self.n_reversals: int | None = None
        self.n_samples: int | None = None
        self.dropped: tuple[tuple[str, int], ...] = ()
        self.marks: int | None = None
        self.extra: dict[str, Any] = {}

    def __iter__(self) -> Iterator[ScanChunk]:
        n = 0
        for ch in self._chunks():
            n += ch.n
            yield ch
        if self._finish is not None:
            self._finish(self)
        if self.n_samples is None:
            self.n_samples = n

    @classmethod
    def from_scan(cls, scan, chunk_rows: int = 1 << 16) -> "ScanStream":
        """Serve an in-memory `Scan` in chunks of ``chunk_rows`` readings (turns may straddle
        chunk boundaries, as they do in a file)."""
        if chunk_rows < 1:
            raise ValueError(f"chunk_rows must be at least 1, not {chunk_rows}")

        def chunks():
            for a in range(0, scan.n_samples, chunk_rows):
                b = min(a + chunk_rows, scan.n_samples)
                yield ScanChunk(scan.time[a:b], scan.angle[a:b], scan.signal[a:b], scan.turn[a:b], scan.rows[a:b],
                                {k: v[a:b] for k, v in scan.aux.items()})

        s = cls(chunks, source=scan.source, unit=scan.unit, epoch_unix=scan.epoch_unix, meta=scan.meta,
                aux_names=tuple(scan.aux))
        s.turn_complete = np.asarray(scan.turn_complete)
        s.turn_sense = np.asarray(scan.turn_sense)
        s.n_reversals = scan.n_reversals
        s.n_samples = scan.n_samples
        s.dropped = tuple(scan.dropped)
        s.marks = scan.marks
        return s
