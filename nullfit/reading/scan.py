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
  (``unit`` says which: ``"fringe"`` or ``"fractional"``);
* ``turn_start`` — the index of the first reading of every turn (turns are contiguous and
  numbered 0, 1, … in time order), and per-turn flags (``turn_complete``, ``turn_sense`` = +1/−1
  rotation sense); ``turn`` gives the turn number of every reading (made when first asked for);
* ``rows`` — the source row numbers of the kept rows, counted from 1 over the *data* rows
  (the header line of a CSV file is not counted, so data row ``r`` is line ``r + 1`` of the
  file), so that any message can point back to the file.  They are stored (``kept_rows``) only
  when some row was dropped; otherwise reading ``i`` is row ``i + 1`` and ``rows`` is made when
  first asked for;
* ``dropped`` — how many rows were dropped while reading, and why (nothing is dropped
  silently); rows of *partial* turns are kept in the scan (the fit leaves them out by default):
  ``partial_turn_rows`` counts them;
* ``n_reversals`` and ``reversal_rows`` — the changes of rotation direction and the source row of
  the first reading after each;
* ``gaps`` — the gaps in time (:class:`nullfit.reading.events.Gap`: rows on either side, duration,
  turns the table would have made meanwhile).

The arrays are read-only.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Any, Mapping

import numpy as np

from ..core.render import Described, Summary
from .columns import check_options, frame_fields, release_arrow_memory
from .events import Gap
from .manifest import Manifest, load_manifest
from .marks import MarkBins
from .row_numbers import ImpliedRows
from .validate import check_columns

#: At most this many gaps and direction changes are listed one by one in a summary.
LIST_AT_MOST = 10


# ---------------------------------------------------------------------------------- Scan
def _readonly(arr: np.ndarray) -> np.ndarray:
    """A read-only array: an array that is already read-only is kept (the validation freezes the
    arrays it made itself, so a file read is not copied again); anything else is copied."""
    if isinstance(arr, np.ndarray) and not arr.flags.writeable:
        return arr
    arr = np.array(arr, copy=True)
    arr.setflags(write=False)
    return arr


def _listed(values, limit: int = LIST_AT_MOST) -> str:
    shown = ", ".join(str(v) for v in values[:limit])
    return shown + (f", ... ({len(values)} in all)" if len(values) > limit else "")


@dataclass(frozen=True, eq=False)
class Scan(Described):
    """A validated rotation-scan log.  Build it with :func:`nullfit.read_scan`,
    :meth:`Scan.from_frame` or :meth:`Scan.from_arrays`; never by hand."""

    time: np.ndarray
    angle: np.ndarray
    signal: np.ndarray
    turn_start: np.ndarray
    turn_complete: np.ndarray
    turn_sense: np.ndarray
    kept_rows: np.ndarray | None = None
    epoch_unix: int | None = None
    unit: str = "fringe"
    source: str = "<data>"
    dropped: tuple[tuple[str, int], ...] = ()
    aux: Mapping[str, np.ndarray] = field(default_factory=dict)
    meta: Manifest = field(default_factory=Manifest)
    n_reversals: int = 0
    reversal_rows: tuple[int, ...] = ()
    gaps: tuple[Gap, ...] = ()

    def __post_init__(self):
        for name in ("time", "angle", "signal", "turn_start", "turn_complete", "turn_sense"):
            object.__setattr__(self, name, _readonly(getattr(self, name)))
        if self.kept_rows is not None:
            object.__setattr__(self, "kept_rows", _readonly(self.kept_rows))
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
        angle_unit_origin: str | None = None,
        owned: bool = False,
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
        aux : mapping, optional
            Auxiliary columns (name → values), kept in ``Scan.aux``; a row with a non-finite aux
            value is dropped and counted under its own reason naming the column.
        nonfinite : {"drop", "raise"}
            NaN/inf readings are dropped and counted (with a `ScanWarning`), or refused.
        owned : bool
            The arrays are the caller's own temporaries (a file reader's): the scan may keep them
            without a copy.  Leave False for arrays you still use.

        Raises
        ------
        ScanError
            With a one-line message (see :mod:`nullfit.reading.validate` for the checks).
        """
        fields = check_columns(time, angle, signal, angle_unit=angle_unit, epoch_unix=epoch_unix,
                               signal_unit=signal_unit, source=source, rows=rows, columns=columns, aux=aux,
                               dropped=dropped, nonfinite=nonfinite,
                               angle_unit_origin=angle_unit_origin, owned=owned)
        for name in ("time", "angle", "signal", "turn_start", "turn_complete", "turn_sense", "kept_rows"):
            if fields[name] is not None:
                fields[name].setflags(write=False)
        for v in fields["aux"].values():
            v.setflags(write=False)
        return cls(**fields, meta=meta if meta is not None else Manifest())

    @classmethod
    def from_frame(cls, df, *, time=None, angle=None, signal=None, angle_unit=None, manifest=None,
                   source: str = "<frame>", nonfinite: str = "drop", signal_unit=None, aux=None) -> "Scan":
        """Build a `Scan` from a pandas DataFrame (columns chosen as in
        :func:`nullfit.read_scan`, auxiliary columns by ``aux`` — which wins over the manifest's
        ``[columns] aux``; ``manifest`` may be a path or a `Manifest`, there is no automatic
        look-up).  Row ``r`` in messages is the ``r``-th row of the frame, counted from 1.  The
        frame is not modified."""
        import pandas as pd

        if not isinstance(df, pd.DataFrame):
            raise TypeError(f"expected a pandas DataFrame, not {type(df).__name__}")
        check_options(angle_unit, signal_unit, nonfinite)
        man = load_manifest(manifest, None)
        names = [str(c) for c in df.columns]

        def get(name):
            return df.iloc[:, names.index(name)].reset_index(drop=True)

        return cls.from_table(get, names, len(df), str(source), man,
                              {"time": time, "angle": angle, "signal": signal, "aux": aux}, angle_unit, signal_unit,
                              nonfinite)

    @classmethod
    def from_table(cls, get, names, n, source, manifest, columns, angle_unit, signal_unit, nonfinite,
                   owned: bool = False) -> "Scan":
        """Build a `Scan` from any table: ``get(name)`` returns a column (a pandas Series or a
        pyarrow array), ``names`` lists the columns, ``n`` is the number of rows, ``columns`` maps
        the roles time/angle/signal (and ``aux``, a list) to the names asked for (or None).
        Used by the file readers (``owned=True``: the columns are theirs to give away)."""
        fields = frame_fields(get, names, n, ImpliedRows(n), source, manifest, columns, angle_unit, signal_unit,
                              nonfinite)
        fields["rows"] = None  # rows 1..n: implied
        scan = cls.from_arrays(**fields, meta=manifest if manifest is not None else Manifest(), owned=owned)
        del fields
        release_arrow_memory()  # the raw angle column is gone: its memory back to the system for the fit
        return scan

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
        """Rows dropped while reading the log (missing or non-finite values)."""
        return int(sum(c for _, c in self.dropped))

    @property
    def turn_counts(self) -> np.ndarray:
        """Readings in every turn."""
        return np.diff(self.turn_start, append=self.n_samples)

    @cached_property
    def turn(self) -> np.ndarray:
        """The turn number of every reading (int64, read-only; made from :attr:`turn_start`)."""
        out = np.repeat(np.arange(self.n_turns, dtype=np.int64), self.turn_counts)
        out.setflags(write=False)
        return out

    @cached_property
    def rows(self) -> np.ndarray:
        """The source row number of every reading (int64, read-only; see the module docstring)."""
        if self.kept_rows is not None:
            return self.kept_rows
        out = np.arange(1, self.n_samples + 1, dtype=np.int64)
        out.setflags(write=False)
        return out

    def row_of(self, index) -> np.ndarray:
        """The source row numbers of the readings at ``index`` (an index array or a slice),
        without making :attr:`rows` when no row was dropped."""
        if self.kept_rows is not None:
            return self.kept_rows[index]
        return ImpliedRows(self.n_samples)[index]

    @property
    def partial_turn_rows(self) -> int:
        """Rows kept in the scan that belong to partial turns (left out of per-turn statistics by
        the fit by default; not counted in :attr:`dropped_rows`)."""
        return int(self.n_samples - self.turn_counts[self.turn_complete].sum())

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
        mark is tolerated), else ``None`` (continuous sampling).  Every reading counts (a strided
        subsample can alias with the readings per turn); see :mod:`nullfit.reading.marks`."""
        bins = MarkBins()
        bins.feed(self.angle)
        return bins.count()

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
        """A `nullfit.core.render.Summary` of the scan."""
        rows = [
            ("source", self.source, ""),
            ("samples", self.n_samples, ""),
            ("turns (complete)", self.n_complete_turns, ""),
            ("turns (partial)", self.n_turns - self.n_complete_turns, ""),
            ("duration", self.duration_s, "s"),
            ("signal unit", self.unit, ""),
            ("rows dropped while reading", self.dropped_rows, ""),
            ("rows in partial turns", self.partial_turn_rows, ""),
            ("direction changes", self.n_reversals, ""),
            ("gaps in time", len(self.gaps), ""),
        ]
        if self.marks:
            rows.append(("marks per turn", self.marks, ""))
        if self.epoch_unix is not None:
            rows.append(("epoch (UTC)", self.epoch_iso, ""))
        notes = tuple(f"dropped {c} row(s) while reading: {why}" for why, c in self.dropped)
        if self.n_reversals:
            notes += (f"the table changed direction {self.n_reversals} time(s); first reading after each: "
                      f"row(s) {_listed(self.reversal_rows)}",)
        for g in self.gaps[:LIST_AT_MOST]:
            notes += (g.describe(),)
        if len(self.gaps) > LIST_AT_MOST:
            notes += (f"... and {len(self.gaps) - LIST_AT_MOST} more gap(s) (see to_dict()['gaps'])",)
        if self.partial_turn_rows:
            notes += (f"{self.partial_turn_rows} row(s) lie in partial turns (kept in the scan; a fit leaves them "
                      "out unless asked to use them)",)
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
            "reversal_rows": [int(r) for r in self.reversal_rows],
            "gaps": [g.to_dict() for g in self.gaps],
            "marks": self.marks,
            "duration_s": self.duration_s,
            "epoch_unix": self.epoch_unix,
            "epoch_utc": self.epoch_iso,
            "unit": self.unit,
            "dropped_rows": self.dropped_rows,
            "dropped": {why: int(c) for why, c in self.dropped},
            "partial_turn_rows": self.partial_turn_rows,
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
