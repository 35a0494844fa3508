"""The per-turn table: the hinge between the logs of a campaign and everything done with them.

A campaign (many logs) is demodulated once, log by log, into one table with a row per turn; the
run table, the lab and sky combinations and the sidereal analysis read that table.  Its columns
and metadata are fixed here and described in ``docs/turn-table.md``:

``run`` (str), ``turn`` (int64, the scan's turn number), ``t_mid_ns`` (int64: Unix nanoseconds of
the midpoint of the turn's first and last reading; nanoseconds since the log's own start when the
log has no absolute time), ``n_samples`` (int64), and for every harmonic ``k``: ``c{k}``,
``s{k}``, ``sigma_c{k}``, ``sigma_s{k}`` (the log's unit; the σ are white-noise errors of that
turn alone), then ``resid_rms`` and ``complete`` (bool).  A table made with auxiliary channels
(``nullfit turns --aux``) adds, for every channel ``name`` and harmonic ``k``, the channel's own
per-turn coefficients ``aux_c{k}_{name}``, ``aux_s{k}_{name}``, ``aux_sigma_c{k}_{name}``,
``aux_sigma_s{k}_{name}`` (:func:`aux_columns`).

The metadata (``TurnTable.meta``, stored as JSON in the Parquet file under the key ``nullfit``)
record the schema version, the package version, the harmonics and drift model, and per run:
source path, SHA-256, unit, epoch, whether times are absolute, the manifest's apparatus and
site tables, dropped and excluded rows.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from ..core.errors import ScanError
from ..core.render import Described, Summary

SCHEMA_VERSION = 1
METADATA_KEY = b"nullfit"
NS_PER_S = 1_000_000_000


def turn_columns(harmonics) -> list[str]:
    """The column names of a per-turn table for the given harmonic orders, in order."""
    cols = ["run", "turn", "t_mid_ns", "n_samples"]
    for k in harmonics:
        cols += [f"c{k}", f"s{k}", f"sigma_c{k}", f"sigma_s{k}"]
    return cols + ["resid_rms", "complete"]


def aux_columns(harmonics, aux) -> list[str]:
    """The columns a table adds for auxiliary channels demodulated per turn like the signal:
    ``aux_c{k}_{name}``, ``aux_s{k}_{name}``, ``aux_sigma_c{k}_{name}``, ``aux_sigma_s{k}_{name}``
    for every channel ``name`` (in the order given) and every harmonic ``k``."""
    return [f"aux_{stem}{k}_{name}" for name in aux for k in harmonics for stem in ("c", "s", "sigma_c", "sigma_s")]


def run_rows(scan, per_turn, *, run_id: str | None = None) -> "Any":
    """The rows of one run: the per-turn frame of :func:`nullfit.demodulate` with the run id
    (``run_id``, default ``scan.run_id``) and absolute mid times (integer ns) added."""
    df = per_turn.copy()
    df.attrs = {}
    rel_ns = np.rint(df.pop("time_mid_s").to_numpy(dtype=float) * NS_PER_S).astype(np.int64)
    epoch = scan.epoch_unix
    df.insert(0, "run", scan.run_id if run_id is None else run_id)
    df.insert(2, "t_mid_ns", rel_ns + (0 if epoch is None else int(epoch) * NS_PER_S))
    df["n_samples"] = df["n_samples"].astype(np.int64)
    df["turn"] = df["turn"].astype(np.int64)
    return df


def run_meta(scan, per_turn, *, sha256: str | None = None, **extra) -> dict:
    """What the table records about one run (see the module docstring); ``extra`` keys (e.g. the
    manifest's path and SHA-256, the partition of a dataset) are added as given."""
    return {
        "source": scan.source,
        "sha256": sha256,
        "unit": scan.unit,
        "epoch_unix": scan.epoch_unix,
        "absolute_time": scan.epoch_unix is not None,
        "apparatus": dict(scan.meta.apparatus),
        "site": dict(scan.meta.site),
        "n_samples": scan.n_samples,
        "n_turns": scan.n_turns,
        "dropped_rows": scan.dropped_rows,
        "dropped": {why: int(c) for why, c in scan.dropped},
        "excluded": dict(per_turn.attrs.get("excluded", {})),
        **extra,
    }


def is_turn_table(path) -> bool:
    """True when ``path`` is a Parquet file carrying nullfit's per-turn metadata (schema only is read)."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        schema = pq.read_schema(path)
    except (OSError, pa.ArrowException):
        return False
    return METADATA_KEY in (schema.metadata or {})


@dataclass(frozen=True, eq=False)
class TurnTable(Described):
    """A per-turn table (pandas ``frame``) with its metadata (``meta``; see the module docstring)."""

    frame: Any = field(repr=False)
    meta: Mapping[str, Any] = field(repr=False)

    @property
    def harmonics(self) -> tuple[int, ...]:
        return tuple(self.meta.get("harmonics", ()))

    @property
    def runs(self) -> Mapping[str, Mapping[str, Any]]:
        return self.meta.get("runs", {})

    @property
    def aux(self) -> tuple[str, ...]:
        """Auxiliary channels demodulated per turn (their columns: :func:`aux_columns`)."""
        return tuple(self.meta.get("aux", ()))

    @property
    def failed(self) -> Mapping[str, str]:
        """Logs that could not be demodulated: source → one-line reason."""
        return self.meta.get("failed", {})

    @property
    def n_turns(self) -> int:
        return int(len(self.frame))

    @classmethod
    def from_scans(cls, scans, *, harmonics=(1, 2), drift: str = "per-turn", complete_only: bool = True,
                   settings: Mapping[str, Any] | None = None) -> "TurnTable":
        """Demodulate scans one after the other into one table (in memory, serially)."""
        import pandas as pd

        from .. import __version__
        from ..fitting.demodulate import demodulate
        from ..fitting.design import check_harmonics

        ks = check_harmonics(harmonics)
        frames, runs = [], {}
        for scan in scans:
            if scan.run_id in runs:
                raise ValueError(f"two logs have the run id {scan.run_id!r}; run ids must be unique in a table")
            pt = demodulate(scan, harmonics=ks, drift=drift, complete_only=complete_only)
            frames.append(run_rows(scan, pt))
            runs[scan.run_id] = run_meta(scan, pt)
        frame = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(columns=turn_columns(ks))
        meta = {"schema": SCHEMA_VERSION, "nullfit_version": __version__, "harmonics": list(ks), "drift": drift,
                "complete_only": bool(complete_only), "settings": dict(settings or {}), "runs": runs, "failed": {}}
        return cls(frame[turn_columns(ks)], meta)

    # ------------------------------------------------------------------ Parquet
    def to_arrow(self):
        import pyarrow as pa

        table = pa.Table.from_pandas(self.frame, preserve_index=False)
        md = dict(table.schema.metadata or {})
        md[METADATA_KEY] = json.dumps(self.meta, sort_keys=True, default=_json_default).encode("utf-8")
        return table.replace_schema_metadata(md)

    @classmethod
    def read(cls, path) -> "TurnTable":
        """Read a per-turn table written by :meth:`write` (one-line ScanError if it is not one)."""
        import pyarrow as pa
        import pyarrow.parquet as pq

        p = Path(path)
        try:
            table = pq.read_table(p)
        except (OSError, pa.ArrowException) as err:
            raise ScanError(f"{p}: not a readable per-turn table ({' '.join(str(err).split())[:200]})") from None
        raw = (table.schema.metadata or {}).get(METADATA_KEY)
        if raw is None:
            raise ScanError(f"{p}: a Parquet file without nullfit's per-turn metadata; write it with `nullfit turns`")
        meta = json.loads(raw.decode("utf-8"))
        if meta.get("schema") != SCHEMA_VERSION:
            raise ScanError(f"{p}: per-turn table schema {meta.get('schema')!r}; this nullfit reads schema "
                            f"{SCHEMA_VERSION}")
        return cls(table.to_pandas(), meta)

    def write(self, path) -> Path:
        """Write the table as Parquet, atomically (a temporary name in the same folder, then rename)."""
        import os
        import tempfile

        import pyarrow.parquet as pq

        p = Path(path)
        fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".part", dir=p.parent if str(p.parent) else ".")
        os.close(fd)
        try:
            pq.write_table(self.to_arrow(), tmp)
            os.replace(tmp, p)
        except BaseException:
            Path(tmp).unlink(missing_ok=True)
            raise
        return p

    # ------------------------------------------------------------------ rendering
    def to_dict(self) -> dict:
        f = self.frame
        return {"n_runs": len(self.runs), "n_turns": self.n_turns, "harmonics": list(self.harmonics),
                "drift": self.meta.get("drift"), "aux": list(self.aux), "runs": sorted(self.runs),
                "failed": dict(self.meta.get("failed", {})),
                "first_t_mid_ns": int(f["t_mid_ns"].min()) if len(f) else None,
                "last_t_mid_ns": int(f["t_mid_ns"].max()) if len(f) else None}

    def summary(self) -> Summary:
        rows = [("runs", len(self.runs), ""), ("turns", self.n_turns, ""),
                ("harmonics", ", ".join(map(str, self.harmonics)), ""), ("drift", self.meta.get("drift"), "")]
        if self.aux:
            rows.append(("auxiliary channels", ", ".join(self.aux), ""))
        notes = tuple(f"failed: {why if why.startswith(src) else f'{src}: {why}'}"
                      for src, why in self.meta.get("failed", {}).items())
        notes += tuple(self.meta.get("campaign", {}).get("notes", ()))
        return Summary("Per-turn table", tuple(rows), notes)

    def __repr__(self) -> str:
        return f"TurnTable({len(self.runs)} runs, {self.n_turns} turns, harmonics {self.harmonics})"


def _json_default(obj):
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.floating,)):
        return float(obj)
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    raise TypeError(f"cannot store {type(obj).__name__} in the table's metadata")
