"""``nullfit turns LOGS... -o turns.parquet``: a campaign of logs demodulated into one per-turn table.

Exit status: 0 when every log was demodulated (or with ``--allow-failures``), 2 when any log
failed (each named on stderr with its one-line reason; the table holds the others), or on bad
options.  The table appears atomically: an interrupted run leaves no table (nor a half-written
one) under the output name.
"""

from __future__ import annotations

import sys
from pathlib import Path

from .options import EXIT_BAD_INPUT, UsageError, scan_options
from .wording import one_line, to_flags


def add_parser(sub) -> None:
    t = sub.add_parser("turns", help="demodulate many logs (in parallel) into one per-turn Parquet table",
                       description="Demodulate every log turn by turn into one per-turn table (Parquet; format in "
                                   "docs/turn-table.md). Logs run in parallel on a local Dask cluster (one worker "
                                   "process per core) or on an existing scheduler; serially without Dask.")
    t.add_argument("logs", nargs="+", metavar="LOG",
                   help="CSV or Parquet logs, or folders of a (hive-partitioned) Parquet dataset: one run per file")
    t.add_argument("-o", "--output", required=True, metavar="FILE", help="the per-turn table to write (Parquet)")
    scan_options(t)
    g = t.add_argument_group("demodulation")
    g.add_argument("--harmonics", default="1,2", metavar="K,K", help="harmonics of the table angle (default 1,2)")
    g.add_argument("--drift", default="per-turn", metavar="MODEL",
                   help="per-turn (offset + slope in every turn) or per-turn:D (Legendre degree D = 0..3)")
    g.add_argument("--all-turns", action="store_true", help="keep partial turns too (column complete says which)")
    g.add_argument("--aux", metavar="COL[,COL]",
                   help="auxiliary channels to demodulate per turn like the signal (columns aux_c2_COL, ...)")
    p = t.add_argument_group("parallel work")
    p.add_argument("--workers", type=int, metavar="N",
                   help="worker processes of the local Dask cluster (default: one per core; 0: serial here)")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="use an existing dask.distributed scheduler (tcp://host:port) instead of a local cluster")
    o = t.add_argument_group("output and faults")
    o.add_argument("--force", action="store_true", help="replace an existing table")
    o.add_argument("--resume", action="store_true",
                   help="update the existing table: skip runs already in it (same log and manifest SHA-256), "
                        "redo changed ones, add new ones")
    o.add_argument("--allow-failures", action="store_true",
                   help="exit 0 even when some logs failed (they are still listed)")


def run(args) -> int:
    from ..campaign.dataset import ResumeMismatch, demodulate_campaign, find_logs
    from ..output.files import check_output_file
    from ..reading.manifest import find_manifest

    if args.workers is not None and args.workers < 0:
        raise UsageError(f"--workers must be 0 (serial) or more, not {args.workers}")
    if args.workers is not None and args.scheduler:
        raise UsageError("--workers sizes the local cluster; with --scheduler the scheduler's workers run the logs")
    if getattr(args, "start_utc", None):
        raise UsageError("--start-utc gives the start of one log; for the logs of a campaign write [time] start_utc "
                         "in each log's manifest")
    if args.force and args.resume:
        raise UsageError("--resume updates the table and --force replaces it: give one of them")
    if args.aux is not None and not [a for a in args.aux.split(",") if a.strip()]:
        raise UsageError("--aux needs column names, e.g. --aux tilt_urad,temp_K")
    out = Path(args.output)
    found = find_logs(args.logs)
    inputs = [f for f, _, _ in found] + [m for m in (find_manifest(f) for f, _, _ in found) if m is not None]
    if args.manifest:
        inputs.append(Path(args.manifest))
    for folder in (Path(p) for p in args.logs if Path(p).is_dir()):
        if out.resolve().is_relative_to(folder.resolve()):
            raise UsageError(f"{out}: refusing to write the table inside the input dataset folder {folder}")
    resume = None
    if args.resume and out.exists():
        check_output_file(out, force=True, inputs=inputs)
        resume = out
    else:
        check_output_file(out, force=args.force, inputs=inputs)
        if args.resume:
            print(f"nullfit: note: {out} does not exist yet; --resume starts it", file=sys.stderr)
    try:
        table = demodulate_campaign(
            args.logs, harmonics=args.harmonics, drift=args.drift, complete_only=not args.all_turns,
            aux=args.aux or (), time=args.time, angle=args.angle, signal=args.signal, angle_unit=args.angle_unit,
            signal_unit=args.signal_unit, manifest=args.manifest, nonfinite="raise" if args.strict else "drop", workers=args.workers,
            scheduler=args.scheduler, resume=resume)
    except (ConnectionError, ImportError, ResumeMismatch) as err:
        raise UsageError(to_flags(one_line(err))) from None
    except KeyboardInterrupt:
        print(f"nullfit: interrupted; {out} was not written", file=sys.stderr)
        return 130
    camp = table.meta["campaign"]
    for note in camp["notes"]:
        print(f"nullfit: note: {to_flags(note)}", file=sys.stderr)
    for src in camp["failed"]:
        print(f"nullfit: failed: {table.failed[src]}", file=sys.stderr)
    if not table.runs:
        print(f"nullfit: no log could be demodulated; {out} was not written", file=sys.stderr)
        return EXIT_BAD_INPUT
    try:
        table.write(out)
    except KeyboardInterrupt:
        print(f"nullfit: interrupted while writing; {out} was not written", file=sys.stderr)
        return 130
    except OSError as err:  # e.g. a full disk: the temporary file is gone, the output untouched
        raise UsageError(f"{out}: cannot write the table ({err.strerror or err}); the output was left as it was"
                         ) from None
    n_failed = len(camp["failed"])
    print(f"{out}: {len(table.runs)} runs, {table.n_turns} turns ({len(camp['demodulated'])} demodulated, "
          f"{len(camp['skipped'])} unchanged, {n_failed} failed; {_how(camp['execution'])})")
    return EXIT_BAD_INPUT if n_failed and not args.allow_failures else 0


def _how(ex: dict) -> str:
    if ex["kind"] == "serial":
        return "serial"
    where = "local cluster" if ex["kind"] == "local-cluster" else f"scheduler {ex['address']}"
    return f"{ex['workers']} worker{'s' if ex['workers'] != 1 else ''}, {where}"
