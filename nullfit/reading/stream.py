"""A scan read in chunks: the interface between a log too large for memory and the fit.

A :class:`ScanStream` yields :class:`ScanChunk` objects in time order.  Every chunk carries the
same per-reading arrays as a `Scan` (relative time, unwrapped angle in radians, signal, aux
columns, source rows) and the **global** turn number of every reading, consistent across chunk
boundaries (a turn may straddle two or more chunks).  Facts that are known only once the whole
log has been seen — which turns are complete, the rotation sense of each turn, the number of
direction reversals, dropped rows — are attributes of the stream, valid after a full pass.

:meth:`ScanStream.from_scan` serves a `Scan` already in memory in chunks; it is the reference
against which a stream read from a file is checked (same numbers).

Reading a Parquet log in chunks: :func:`open_stream`
------------------------------------------------------
The turn numbering needs a few whole-log facts before it can number the first turn: whether the
angles are modulo 360°, the typical step and interval, the rotation rate that bridges gaps, the
typical number of readings per stop and the sense of the first excursion.  They are gathered by
light passes over the columns first, with exactly the definitions the in-memory reader uses
(medians from the histograms of :mod:`nullfit.reading.histogram`, counts, carried running values;
see :mod:`nullfit.reading.unwrap` and :mod:`nullfit.reading.turn_numbering`), so that the stream
and :func:`nullfit.read_scan` agree exactly on every turn number, completeness flag, sense,
direction change and dropped row:

1. every column used (``ParquetFile.iter_batches`` with column projection): the column checks
   and conversions of :mod:`nullfit.reading.columns`, the row checks and the step statistics of
   :class:`nullfit.reading.validate.LogCheck`, and which rows were dropped (one bit per row);
2. time and angle: unwrapping, the typical stop length and first sense
   (:class:`~nullfit.reading.turn_numbering.SecondLook`), the gaps in time;
3. time and angle: the turn counter (:class:`~nullfit.reading.turn_counter.TurnCounter`), the
   marks; then the checks that need the turns (a complete turn, a signal that varies, coverage).

All three run in :func:`open_stream`, so a bad log fails there with the message
:func:`nullfit.read_scan` gives, and every attribute of the stream is valid before the first
chunk.  Iterating is a fourth pass over every column: each chunk is decoded, its dropped rows
removed, its angles unwrapped with the carried state, and its readings given their turn number
by a binary search in the first readings of the turns.  Memory: a few chunks of each column, the
per-turn tables (about 25 bytes per turn) and one bit per row of the log — never a full-length
column.
"""

from __future__ import annotations

import bisect
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterator, Mapping

import numpy as np

from ..core.errors import ScanError
from .columns import Plan, SignalUnitCheck, TimeDecoder, check_options, one_line
from .events import GapFinder
from .manifest import Manifest, open_log
from .marks import MarkBins
from .turn_numbering import SecondLook, TurnCounter, Unwrapper
from .validate import AzimuthSet, LogCheck, any_complete_turn, check_turns


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
    :meth:`from_scan` and :func:`open_stream`): ``turn_complete`` and ``turn_sense`` (per turn),
    ``n_reversals``, ``n_samples``, ``dropped`` (``((why, count), ...)``), ``marks``; and, set by
    :meth:`from_scan` and :func:`open_stream`, ``reversal_rows``, ``gaps`` and
    ``partial_turn_rows`` (as on a `Scan`).
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
        self.reversal_rows: tuple[int, ...] = ()
        self.gaps: tuple = ()
        self.partial_turn_rows: int | None = None
        self.extra: dict[str, Any] = {}

    @property
    def n_turns(self) -> int | None:
        return None if self.turn_complete is None else int(self.turn_complete.size)

    @property
    def dropped_rows(self) -> int:
        """Rows dropped while reading (as ``Scan.dropped_rows``)."""
        return int(sum(c for _, c in self.dropped))

    @property
    def run_id(self) -> str:
        """The manifest's run id, else the file stem (as `Scan.run_id`)."""
        if self.meta.run_id:
            return str(self.meta.run_id)
        return Path(self.source).stem if self.source and not self.source.startswith("<") else "scan"

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
                yield ScanChunk(scan.time[a:b], scan.angle[a:b], scan.signal[a:b], scan.turn[a:b], scan.row_of(slice(a, b)),
                                {k: v[a:b] for k, v in scan.aux.items()})

        s = cls(chunks, source=scan.source, unit=scan.unit, epoch_unix=scan.epoch_unix, meta=scan.meta,
                aux_names=tuple(scan.aux))
        s.turn_complete = np.asarray(scan.turn_complete)
        s.turn_sense = np.asarray(scan.turn_sense)
        s.n_reversals = scan.n_reversals
        s.n_samples = scan.n_samples
        s.dropped = tuple(scan.dropped)
        s.marks = scan.marks
        s.reversal_rows = tuple(scan.reversal_rows)
        s.gaps = tuple(scan.gaps)
        s.partial_turn_rows = scan.partial_turn_rows
        return s


# ---------------------------------------------------------------------------------- Parquet in chunks
#: Readings per chunk by default (8 MB per float column).
DEFAULT_CHUNK_ROWS = 1 << 20
#: Kinds of column error, in the order the in-memory reader meets them (time, angle, signal, unit).
_COLUMN_ORDER = ("time", "angle", "signal")


def open_stream(path, *, chunk_rows: int = DEFAULT_CHUNK_ROWS, time=None, angle=None, signal=None, angle_unit=None,
                manifest=None, aux=None, nonfinite: str = "drop", signal_unit=None) -> ScanStream:
    """Open a Parquet scan log for reading in chunks (see the module docstring).

    The arguments are those of :func:`nullfit.read_scan`, plus ``chunk_rows``, the number of rows
    read at a time.  The log is checked, and its turns numbered, before this returns, so every
    attribute of the returned `ScanStream` is valid at once and a bad log raises the one-line
    `ScanError` :func:`nullfit.read_scan` raises on the same file; iterating yields the chunks
    (repeatably).  Only Parquet logs stream (write a large CSV log to Parquet first).
    """
    return _StreamReader(path, int(chunk_rows), {"time": time, "angle": angle, "signal": signal, "aux": aux},
                         angle_unit, manifest, nonfinite, signal_unit).stream


class _StreamReader:
    """The passes of :func:`open_stream` over one Parquet log."""

    def __init__(self, path, chunk_rows, kw, angle_unit, manifest, nonfinite, signal_unit):
        import pyarrow as pa
        import pyarrow.parquet as pq

        check_options(angle_unit, signal_unit, nonfinite)
        if chunk_rows < 1:
            raise ScanError(f"chunk_rows must be at least 1, not {chunk_rows}")
        p, src, man = open_log(path, manifest)
        with open(p, "rb") as f:
            magic = f.read(4)
        if magic != b"PAR1":
            raise ScanError(f"{src}: not a Parquet file; only Parquet logs are read in chunks (read a CSV log with "
                            "read_scan, or write it to Parquet first)")
        try:
            self.pf = pq.ParquetFile(p, pre_buffer=False)  # pre-buffering holds the row groups read so far
            names = [str(n) for n in self.pf.schema_arrow.names]
            n = int(self.pf.metadata.num_rows)
        except (pa.ArrowException, OSError, ValueError, TypeError, OverflowError) as err:
            raise ScanError(f"{src}: not a readable Parquet file ({one_line(err)[:200]})") from None
        if n == 0:
            raise ScanError(f"{src}: the log has column names but no data rows")
        self.src, self.man, self.chunk_rows = src, man, chunk_rows
        self.plan = plan = Plan(names, src, man, kw, angle_unit, signal_unit)
        self.decoder = TimeDecoder(plan)
        self.chk = LogCheck(source=src, columns=plan.cols, aux_names=tuple(plan.aux), angle_unit=plan.angle_unit,
                            nonfinite=nonfinite, angle_unit_origin=plan.angle_origin)
        self.meta: list[tuple] = []  # per chunk: first row, rows, kept-row mask (packed) or None, first kept index
        self._first_pass()
        self._second_pass()
        self._third_pass()

    # -------------------------------------------------------------- reading
    def _batches(self, names):
        import pyarrow as pa

        row0 = 0
        try:
            for batch in self.pf.iter_batches(batch_size=self.chunk_rows, columns=list(dict.fromkeys(names)),
                                              use_threads=True):
                yield row0, batch.num_rows, {nm: batch.column(nm) for nm in names}
                row0 += batch.num_rows
        except (pa.ArrowException, OSError, ValueError, TypeError, OverflowError) as err:
            raise ScanError(f"{self.src}: not a readable Parquet file ({one_line(err)[:200]})") from None

    def _kept(self, with_values: bool = False):
        """Per chunk: ``(first kept index, relative time, raw angle, signal, aux, source rows)`` of
        the kept readings (signal and aux only ``with_values``)."""
        cols = self.plan.cols
        names = [cols["time"], cols["angle"]] + ([cols["signal"], *self.plan.aux] if with_values else [])
        for (row0, m, cols_) , (_, _, bits, first) in zip(self._batches(names), self.meta):
            rows = np.arange(row0 + 1, row0 + m + 1, dtype=np.int64)
            t = self.decoder.decode(cols_[cols["time"]], rows)
            a = self.plan.numbers(cols_[cols["angle"]], cols["angle"], rows)
            y = self.plan.numbers(cols_[cols["signal"]], cols["signal"], rows) if with_values else None
            aux = {nm: self.plan.numbers(cols_[nm], nm, rows) for nm in self.plan.aux} if with_values else {}
            if bits is not None:
                keep = np.unpackbits(bits, count=m).astype(bool)
                t, a, rows = t[keep], a[keep], rows[keep]
                y = y[keep] if y is not None else None
                aux = {k: v[keep] for k, v in aux.items()}
            yield first, self.chk.relative_time(t), a, y, aux, rows

    # -------------------------------------------------------------- passes
    def _first_pass(self):
        """Column conversions and checks, row checks, step statistics, dropped rows."""
        plan, chk, cols = self.plan, self.chk, self.plan.cols
        unit = SignalUnitCheck(plan)
        errors: dict[str, str] = {}
        for row0, m, data in self._batches([cols["time"], cols["angle"], cols["signal"], *plan.aux]):
            rows = np.arange(row0 + 1, row0 + m + 1, dtype=np.int64)
            vals = {}
            for role, name in [("time", cols["time"]), ("angle", cols["angle"]), ("signal", cols["signal"])] + \
                    [(f"aux:{nm}", nm) for nm in plan.aux]:
                try:
                    vals[role] = (self.decoder.decode(data[name], rows) if role == "time" else
                                  plan.numbers(data[name], name, rows))
                except ScanError as err:
                    errors.setdefault(role, str(err))
            first = chk.n_kept
            if errors:
                self.meta.append((row0, m, None, first))
                continue
            unit.add(vals["signal"])
            if not chk.decided and self.decoder.epoch is not None:
                chk.set_epoch(self.decoder.epoch)
            with np.errstate(over="ignore", invalid="ignore"):
                chk.add(vals["time"], vals["angle"], vals["signal"], {nm: vals[f"aux:{nm}"] for nm in plan.aux},
                        rows)
            bits = None if chk.last_keep is None else np.packbits(chk.last_keep)
            self.meta.append((row0, m, bits, first))
        for role in _COLUMN_ORDER:
            if role in errors:
                raise ScanError(errors[role])
        unit.check()
        for nm in plan.aux:
            if f"aux:{nm}" in errors:
                raise ScanError(errors[f"aux:{nm}"])
        self.summary = chk.finish()

    def _second_pass(self):
        """Unwrapping, typical stop length and first sense, gaps."""
        hyst = math.radians(self.chk.hyst_deg)
        unw = Unwrapper(self.summary)
        look = SecondLook(self.summary.tol, hyst)
        gaps = GapFinder(self.summary.interval)
        with np.errstate(over="ignore", invalid="ignore"):
            for _, t, a, _, _, rows in self._kept():
                phi = unw.feed(self.chk.to_rad(a), t)
                look.feed(phi)
                gaps.feed(t, rows, phi)
        self.look, self.gaps = look.finish(), gaps.gaps()

    def _third_pass(self):
        """Turn numbers, completeness, senses, direction changes, marks; the checks on the turns."""
        chk, cols = self.chk, self.plan.cols
        hyst = math.radians(chk.hyst_deg)
        unw = Unwrapper(self.summary)
        counter = TurnCounter(tol=self.summary.tol, r_typ=self.look.r_typ, sense0=self.look.sense0,
                              hysteresis_rad=hyst)
        marks = MarkBins()
        with np.errstate(over="ignore", invalid="ignore"):
            for _, t, a, _, _, _ in self._kept():
                phi = unw.feed(chk.to_rad(a), t)
                counter.feed(phi)
                marks.feed(phi)
            counter.feed(np.zeros(0), final=True)
        self.info = info = counter.finish()
        self.marks = marks.count()

        def raw_chunks():  # re-iterable raw angles, for the hint of the no-turn message
            class Again:
                def __iter__(s):
                    return (a for _, _, a, _, _, _ in self._kept())
            return Again()

        def hint():
            return (self.plan.angle_unit == "deg" and chk.hi - chk.lo >= 2 * math.pi
                    and any_complete_turn(raw_chunks(), hyst))

        def azimuths():
            acc = AzimuthSet(info)
            u = Unwrapper(self.summary)
            for first, t, a, _, _, _ in self._kept():
                acc.feed(u.feed(chk.to_rad(a), t), first)
            return acc.count()

        check_turns(info, source=self.src, angle_col=cols["angle"], signal_col=cols["signal"], ymin=chk.ymin,
                    ymax=chk.ymax, y0=chk.y0, hint=hint, azimuths=azimuths)

    # -------------------------------------------------------------- the stream
    def _rows_at(self, index: np.ndarray) -> tuple[int, ...]:
        """Source rows of kept readings, from the per-chunk masks alone (no reading)."""
        out = []
        firsts = [mt[3] for mt in self.meta]
        for i in np.asarray(index, np.int64).tolist():
            j = bisect.bisect_right(firsts, i) - 1  # the last chunk starting at or before i holds it
            row0, m, bits, first = self.meta[j]
            rows = np.arange(row0 + 1, row0 + m + 1)
            if bits is not None:
                rows = rows[np.unpackbits(bits, count=m).astype(bool)]
            out.append(int(rows[i - first]))
        return tuple(out)

    @property
    def stream(self) -> ScanStream:
        info, chk = self.info, self.chk

        def chunks():
            unw = Unwrapper(self.summary)
            with np.errstate(over="ignore", invalid="ignore"):
                for first, t, a, y, aux, rows in self._kept(with_values=True):
                    if t.size == 0:
                        continue
                    phi = unw.feed(chk.to_rad(a), t)
                    turn = info.turn_of(np.arange(first, first + t.size))
                    yield ScanChunk(t, phi, y, turn, rows, aux)

        s = ScanStream(chunks, source=self.src, unit=self.plan.signal_unit, epoch_unix=chk.epoch, meta=self.man,
                       aux_names=tuple(self.plan.aux))
        s.turn_complete, s.turn_sense = info.complete, info.sense
        s.n_reversals, s.n_samples = info.n_reversals, int(chk.n_kept)
        s.dropped = tuple(chk.drops.items())
        s.marks = self.marks
        s.reversal_rows = self._rows_at(info.seg_starts[1:])
        s.gaps = self.gaps
        s.partial_turn_rows = int(info.count[~info.complete].sum())
        s.extra["chunk_rows"] = self.chunk_rows
        return s
