"""A campaign as a dataset: many logs demodulated into one per-turn table, in parallel.

:func:`demodulate_campaign` reads every log, demodulates it turn by turn (:func:`nullfit.demodulate`)
and gathers the rows into one :class:`~nullfit.campaign.turn_table.TurnTable` (format:
``docs/turn-table.md``), so a year of logs is demodulated once and everything later reads the
table.

What a log is
-------------
Each path names a log file (CSV or Parquet, read by :func:`nullfit.read_scan` with the manifest
beside it, or the one manifest given for all), or a folder holding a Parquet dataset, possibly
hive-partitioned (``site=hall/day=2026-03-14/part-0.parquet``): every Parquet file under the
folder (suffix ``.parquet``, ``.pq`` or ``.parq``; names starting with ``.`` or ``_`` are skipped,
as dataset writers use them for metadata and temporaries) is one log, i.e. one run.  A run is
never assembled from several files: a run written in pieces must be joined first.  The
``key=value`` folder names of a file are recorded in its run's metadata (``partition``).

Run ids are the manifest's ``[scan] run_id``, else the file's stem — for a file of a dataset
folder, its path below the folder without suffix (``site=hall/day=2026-03-14/part-0``), since
dataset writers reuse file names.  Run ids are unique in a table: a second log with the same id
fails (with a reason) and the first keeps it.

Faults
------
A log that cannot be read or cannot be demodulated (a `ScanError` or `AnalysisError`, an
unreadable file, a worker process that dies) does not stop the others: it is listed in the
table's ``failed`` metadata with its one-line reason, and its run is left out.  Any other
exception is a bug and stops the campaign.  Warnings raised while reading a log (dropped rows,
repairs) are kept, one line each, in the run's ``warnings``.

Resuming
--------
``resume=`` takes the table of an earlier call (a `TurnTable` or its path).  A run whose id is
in that table with the same log SHA-256 and the same manifest SHA-256 is skipped and its rows
kept; a changed log (or manifest) is demodulated again, with a note; runs of the earlier table
that are not among the logs named now are kept, so the result is the union.  A run whose log
fails now is removed (its rows would no longer describe the file) and listed in ``failed``.  The
options (harmonics, drift, complete_only, aux, reading options) must be those of the earlier
table.  Rows are ordered by run id, then turn, so a resumed table equals one made in one go.

Parallel work (:mod:`.parallel`): by default a local Dask cluster with one worker process per
core; ``workers=N`` sets the number (``0``: serial, in this process); ``scheduler=`` uses an
existing ``dask.distributed`` scheduler, whose workers must see the logs under the same paths.
Without Dask the logs run serially and the table's ``campaign`` notes say so.
"""

from __future__ import annotations

import dataclasses
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ..core.errors import AnalysisError, ScanError
from ..core.provenance import provenance, sha256_of
from ..reading.columns import check_options, one_line
from ..reading.files import PARQUET_SUFFIXES, read_scan
from ..reading.manifest import Manifest, load_manifest
from .analysis import parse_harmonics
from .parallel import check_workers, run_tasks
from .turn_table import SCHEMA_VERSION, TurnTable, aux_columns, run_meta, run_rows, turn_columns

_COEF_STEMS = ("c", "s", "sigma_c", "sigma_s")


class ResumeMismatch(ValueError):
    """The table given as ``resume=`` was made with other options than the call's."""


@dataclass(frozen=True)
class CampaignOptions:
    """What every log is read and demodulated with (sent to each worker)."""

    harmonics: tuple[int, ...] = (1, 2)
    drift: str = "per-turn"
    complete_only: bool = True
    aux: tuple[str, ...] = ()
    time: str | None = None
    angle: str | None = None
    signal: str | None = None
    angle_unit: str | None = None
    signal_unit: str | None = None
    nonfinite: str = "drop"

    def reading(self) -> dict:
        return {"time": self.time, "angle": self.angle, "signal": self.signal, "angle_unit": self.angle_unit,
                "signal_unit": self.signal_unit, "nonfinite": self.nonfinite}


@dataclass(frozen=True)
class LogTask:
    """One log to demodulate: its path, run id, manifest (already read) and, when resuming, the
    SHA-256 its run has in the earlier table (the log is skipped when it still has it)."""

    path: str
    run_id: str
    manifest: Manifest | None = None
    manifest_sha256: str | None = None
    partition: tuple[tuple[str, str], ...] = ()
    done_sha256: str | None = None


@dataclass(frozen=True)
class LogResult:
    """What a worker sends back: ``status`` is ``"done"`` (with ``rows`` and ``meta``),
    ``"skipped"`` (unchanged since the earlier table) or ``"failed"`` (with a one-line ``reason``)."""

    source: str
    run_id: str
    status: str
    sha256: str | None = None
    rows: Any = None
    meta: dict | None = None
    reason: str | None = None


# --------------------------------------------------------------------------- the logs
def find_logs(paths, notes: list | None = None) -> list[tuple[Path, str | None, tuple[tuple[str, str], ...]]]:
    """``(file, run id within a dataset folder or None, partition)`` for every log the paths name
    (see the module docstring); a folder without Parquet files is refused (`ScanError`).  Files of
    a dataset folder that are neither logs nor manifests are counted in ``notes`` (if given)."""
    if isinstance(paths, (str, Path)):
        paths = [paths]
    out = []
    for p in map(Path, paths):
        if not p.is_dir():
            out.append((p, None, ()))
            continue
        files, other = [], 0
        for f in sorted(q for q in p.rglob("*") if q.is_file()):
            hidden = any(part.startswith((".", "_")) for part in f.relative_to(p).parts)
            if f.suffix.lower() in PARQUET_SUFFIXES and not hidden:
                files.append(f)
            elif f.suffix.lower() != ".toml":
                other += 1
        if other and notes is not None:
            notes.append(f"{p}: {other} file(s) that are not Parquet logs (other suffixes, or names beginning with "
                         "'.' or '_') were left out")
        if not files:
            raise ScanError(f"{p}: a folder without Parquet files (*.parquet, *.pq, *.parq); give log files, or the "
                            "folder of a Parquet dataset")
        for f in files:
            rel = f.relative_to(p)
            part = tuple((k, v) for k, _, v in (d.partition("=") for d in rel.parts[:-1] if "=" in d))
            out.append((f, rel.with_suffix("").as_posix(), part))
    return out


def _located(src: str, text) -> str:
    msg = one_line(text)
    return msg if msg.startswith(src) else f"{src}: {msg}"


# --------------------------------------------------------------------------- the worker
def demodulate_log(task: LogTask, options: CampaignOptions) -> LogResult:
    """Read one log and demodulate it (runs in a worker process; returns rows, not the scan)."""
    src = task.path
    try:
        sha = sha256_of(src)
    except OSError as err:
        return LogResult(src, task.run_id, "failed", reason=f"{src}: cannot read the file ({err.strerror or err})")
    if task.done_sha256 is not None and sha == task.done_sha256:
        return LogResult(src, task.run_id, "skipped", sha)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            rows, meta = _demodulate(task, options, sha)
        except (ScanError, AnalysisError) as err:
            return LogResult(src, task.run_id, "failed", sha, reason=_located(src, err))
        except MemoryError:
            return LogResult(src, task.run_id, "failed", sha,
                             reason=f"{src}: not enough memory to read and demodulate this log in one piece")
    meta["warnings"] = [one_line(w.message) for w in caught]
    return LogResult(src, task.run_id, "done", sha, rows, meta)


def _demodulate(task: LogTask, options: CampaignOptions, sha: str):
    from .. import __version__
    from ..fitting.demodulate import demodulate

    src = task.path
    kw = options.reading()
    if options.aux:
        kw["aux"] = list(options.aux)  # read_scan refuses a channel the log does not have, in one line
    scan = read_scan(src, manifest=task.manifest if task.manifest is not None else False, **kw)
    opts = {"harmonics": options.harmonics, "drift": options.drift, "complete_only": options.complete_only}
    pt = demodulate(scan, **opts)
    rows = run_rows(scan, pt, run_id=task.run_id)
    for name in options.aux:
        apt = demodulate(dataclasses.replace(scan, signal=scan.aux[name]), **opts)
        if not np.array_equal(apt["turn"].to_numpy(), pt["turn"].to_numpy()):  # pragma: no cover - engine invariant
            raise RuntimeError(f"{src}: the auxiliary channel {name!r} was demodulated over other turns")
        for k in options.harmonics:
            for stem in _COEF_STEMS:
                rows[f"aux_{stem}{k}_{name}"] = apt[f"{stem}{k}"].to_numpy()
    meta = run_meta(scan, pt, sha256=sha, manifest=task.manifest.path if task.manifest is not None else None,
                    manifest_sha256=task.manifest_sha256, partition=dict(task.partition),
                    aux_read=list(scan.aux), nullfit_version=__version__)
    return rows, meta


# --------------------------------------------------------------------------- the campaign
def demodulate_campaign(paths, *, harmonics=(1, 2), drift="per-turn", complete_only: bool = True, aux=(),
                        time=None, angle=None, signal=None, angle_unit=None, signal_unit=None, manifest=None,
                        nonfinite: str = "drop", workers: int | None = None, scheduler: str | None = None,
                        resume=None, progress: bool | None = None) -> TurnTable:
    """Demodulate every log of a campaign into one per-turn table (see the module docstring).

    Parameters
    ----------
    paths : path or sequence of paths
        Log files (CSV or Parquet) and/or folders of Parquet datasets (one run per file).
    harmonics, drift, complete_only
        As in :func:`nullfit.demodulate`: harmonic orders; ``"per-turn"`` or ``"per-turn:d"``;
        leave partial turns out.
    aux : str or sequence of str
        Auxiliary channels to demodulate per turn like the signal; their coefficients become the
        columns ``aux_c{k}_{name}``, ``aux_s{k}_{name}``, ``aux_sigma_c{k}_{name}``,
        ``aux_sigma_s{k}_{name}`` (in the channel's own unit).
    time, angle, signal, angle_unit, signal_unit, manifest, nonfinite
        As in :func:`nullfit.read_scan`, for every log (``manifest=None``: each log's own
        manifest beside it; a path: one manifest for all logs, which then must not set a run id).
    workers, scheduler
        Local cluster size (default: one process per core; ``0``: serial in this process) or the
        address of an existing ``dask.distributed`` scheduler.
    resume : TurnTable, path or None
        An earlier table: unchanged runs are skipped and kept, the result is the union.
    progress : bool or None
        Progress bar over finished logs (default: on a terminal).

    Returns
    -------
    TurnTable
        Rows of the runs that succeeded; ``meta["failed"]`` maps each failed log to its one-line
        reason; ``meta["campaign"]`` records how the work ran, which runs were demodulated,
        skipped and failed in this call, and notes.

    Raises
    ------
    ValueError
        Bad options (before any log is read); ``ScanError`` for a folder without Parquet files,
        a resume table that is not one; ``ConnectionError`` when the scheduler cannot be reached.
    """
    from .. import __version__

    options = _options(harmonics, drift, complete_only, aux, time, angle, signal, angle_unit, signal_unit, nonfinite)
    check_workers(workers, scheduler)
    if manifest is not None and manifest is not False and not isinstance(manifest, Manifest):
        manifest = load_manifest(manifest)
    prev = _previous(resume, options)
    found_notes: list[str] = []
    found = find_logs(paths, found_notes)
    if not found:
        raise ValueError("no logs given")
    if isinstance(manifest, Manifest) and manifest.run_id and len(found) > 1:
        raise ValueError(f"the manifest {manifest.path} sets run id {manifest.run_id!r}, which would be the id of "
                         f"all {len(found)} logs; give each log its own manifest")
    tasks, planned_failures, notes = _plan(found, manifest, prev)
    notes[:0] = found_notes
    results, how = run_tasks(demodulate_log, tasks, workers=workers, scheduler=scheduler, progress=progress,
                             desc="demodulating logs", unit="log", options=options,
                             failure=lambda t, why: LogResult(t.path, t.run_id, "failed", reason=f"{t.path}: {why}"))
    if how.note:
        notes.insert(0, how.note)
    frame, runs, failed, done = _assemble(results, planned_failures, prev, options, notes)
    settings = options.reading() | {"manifest": None if manifest is None or manifest is False else manifest.path}
    prov = provenance(settings=settings)
    meta = {"schema": SCHEMA_VERSION, "nullfit_version": __version__, "harmonics": list(options.harmonics),
            "drift": options.drift, "complete_only": options.complete_only, "aux": list(options.aux),
            "settings": settings, "runs": runs, "failed": failed,
            "provenance": {"created_utc": prov["created_utc"], "versions": prov["versions"]},
            "campaign": {"execution": how.to_dict(), "notes": notes, **done}}
    return TurnTable(frame, meta)


def _options(harmonics, drift, complete_only, aux, time, angle, signal, angle_unit, signal_unit,
             nonfinite) -> CampaignOptions:
    from ..fitting.design import per_turn_drift

    ks = parse_harmonics(harmonics)
    spec = per_turn_drift(drift, "a per-turn table")
    check_options(angle_unit, signal_unit, nonfinite)
    if isinstance(aux, str):
        aux = [a.strip() for a in aux.split(",")]
    aux = tuple(aux or ())
    if any(not isinstance(a, str) or not a.strip() for a in aux):
        raise ValueError(f"aux must name columns, e.g. ('tilt_urad', 'temp_K'), not {aux!r}")
    if len(set(aux)) != len(aux):
        raise ValueError(f"aux names a column twice: {aux!r}")
    return CampaignOptions(ks, "per-turn" if spec.degree == 1 else f"per-turn:{spec.degree}", bool(complete_only),
                           aux, time, angle, signal, angle_unit, signal_unit, nonfinite)


def _previous(resume, options: CampaignOptions) -> TurnTable | None:
    if resume is None:
        return None
    prev = resume if isinstance(resume, TurnTable) else TurnTable.read(resume)
    theirs = (tuple(prev.meta.get("harmonics", ())), prev.meta.get("drift"), prev.meta.get("complete_only"),
              tuple(prev.meta.get("aux", ())), {k: prev.meta.get("settings", {}).get(k) for k in options.reading()})
    ours = (options.harmonics, options.drift, options.complete_only, options.aux, options.reading())
    names = ("harmonics", "drift", "complete_only", "aux", "reading options")
    for name, a, b in zip(names, theirs, ours):
        if a != b:
            raise ResumeMismatch(f"the table given as resume= was made with {name} {_show(a)}, not {_show(b)}; "
                                 "resume= needs the same options (or make a new table)")
    return prev


def _show(v) -> str:
    if isinstance(v, dict):
        return ", ".join(f"{k}={v[k]!r}" for k in v if v[k] is not None) or "defaults"
    return repr(list(v)) if isinstance(v, tuple) else repr(v)


def _plan(found, manifest, prev: TurnTable | None):
    """Tasks to send out, logs that fail before reading (manifest, duplicate run id), notes."""
    tasks, failures, notes = [], {}, []
    seen_files: set = set()
    seen_ids: dict[str, str] = {}
    for path, rel_id, partition in found:
        src = str(path)
        key = path.resolve()
        if key in seen_files:
            notes.append(f"{src} is named more than once; demodulated once")
            continue
        seen_files.add(key)
        try:
            man = load_manifest(manifest, path)
        except ScanError as err:
            failures[src] = (None, f"{one_line(err)} (manifest of {src})")
            continue
        run_id = str(man.run_id) if man is not None and man.run_id else (rel_id or path.stem)
        if run_id in seen_ids:
            failures[src] = (run_id, f"{src}: run id {run_id!r} is already that of {seen_ids[run_id]}; run ids must be "
                                     "unique in a table (set [scan] run_id in the log's manifest)")
            continue
        seen_ids[run_id] = src
        man_sha = None
        if man is not None and man.path is not None:
            try:
                man_sha = sha256_of(man.path)
            except OSError:  # pragma: no cover - it was just read
                man_sha = None
        done_sha = None
        old = prev.runs.get(run_id) if prev is not None else None
        if old is not None:
            if old.get("manifest_sha256") == man_sha:
                done_sha = old.get("sha256")
            else:
                notes.append(f"run {run_id}: its manifest changed since the table was written; demodulated again")
        tasks.append(LogTask(src, run_id, man, man_sha, partition, done_sha))
    return tasks, failures, notes


def _assemble(results, planned_failures, prev: TurnTable | None, options: CampaignOptions, notes: list):
    import pandas as pd

    frames, runs, failed = [], {}, {}
    done = {"demodulated": [], "skipped": [], "failed": []}
    gone_ids, gone_sources = set(), set()
    for src, (run_id, why) in planned_failures.items():
        failed[src] = why
        done["failed"].append(src)
        gone_sources.add(src)
    for r in results:
        old = prev.runs.get(r.run_id) if prev is not None else None
        if r.status == "failed":
            failed[r.source] = r.reason
            done["failed"].append(r.source)
            gone_ids.add(r.run_id)
            gone_sources.add(r.source)
            if old is not None:
                notes.append(f"run {r.run_id}: its log now fails; its earlier rows are left out of the table")
            continue
        if r.status == "skipped":
            done["skipped"].append(r.run_id)
            continue  # its rows and record are kept from the earlier table below
        if old is not None and old.get("sha256") != r.sha256:  # (a changed manifest was noted when planning)
            was = f" (was {old.get('source')})" if old.get("source") != r.source else ""
            notes.append(f"run {r.run_id}: the log changed since the table was written{was}; demodulated again")
        frames.append(r.rows)
        runs[r.run_id] = r.meta
        done["demodulated"].append(r.run_id)
    if prev is not None:
        now = {r.source: r.run_id for r in results if r.status != "failed"}  # the run id each log has now
        keep = []
        for rid, m in prev.runs.items():
            src = m.get("source")
            if rid in runs or rid in gone_ids or src in gone_sources:
                continue
            if now.get(src, rid) != rid:
                notes.append(f"run {rid}: its log {src} is now run {now[src]}; {rid} is left out of the table")
                continue
            keep.append(rid)
        frames.append(prev.frame[prev.frame["run"].isin(keep)])
        runs.update({rid: prev.runs[rid] for rid in keep})
        tried = {r.source for r in results} | set(planned_failures)
        failed = {src: why for src, why in prev.failed.items() if src not in tried} | failed
    columns = turn_columns(options.harmonics) + aux_columns(options.harmonics, options.aux)
    frames = [f for f in frames if len(f)]
    if frames:
        frame = pd.concat([f[columns] for f in frames], ignore_index=True)
        frame = frame.sort_values(["run", "turn"], kind="stable", ignore_index=True)
    else:
        frame = pd.DataFrame({c: pd.Series([], dtype=_dtype(c)) for c in columns})
    return frame, dict(sorted(runs.items())), failed, done


def _dtype(column: str) -> str:
    if column == "run":
        return "object"
    if column in ("turn", "t_mid_ns", "n_samples"):
        return "int64"
    return "bool" if column == "complete" else "float64"


__all__ = ["demodulate_campaign", "find_logs", "ResumeMismatch", "demodulate_log", "CampaignOptions", "LogTask",
           "LogResult"]
