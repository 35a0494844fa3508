"""Streamed fit of a log too large for memory: time and peak memory beside a plain Arrow read.

Run from the repository root::

    python benchmarks/bench_stream.py                      # 1e8 readings (2.4 GB of columns)
    python benchmarks/bench_stream.py --readings 2e7       # smaller
    python benchmarks/bench_stream.py --check 1e6          # also: streamed == in-memory at 1e6

It writes an invented Parquet log into a temporary directory (float64 Unix-second times, a
continuous table angle in degrees at 72 readings per turn, a signal with a 2θ term, a slow
drift and white noise; row groups of ``--row-group`` rows), then runs, each in its own child
process, one after the other:

1. ``pyarrow.parquet.read_table`` of the whole file (the obvious alternative: the columns in
   memory, nothing computed);
2. the streamed default fit, ``nullfit.fitting.stream.fit_stream`` (per-turn drift, turn-scatter
   errors) over chunks of ``--chunk-rows`` readings.

Each child reports the wall time of its work (imports excluded) and its own peak resident memory
(``resource.getrusage(RUSAGE_SELF).ru_maxrss``); the parent prints both side by side with their
ratios and the file is deleted at the end.  ``--repeat N`` runs the pair N times and reports
the medians (the machine may be shared).

The chunks come from ``nullfit.reading.stream.open_stream`` when the reading stage provides it.
Otherwise (``--adapter``, or no ``open_stream``) a minimal local adapter serves them from
``pyarrow.parquet.ParquetFile.iter_batches``: the epoch is the whole second of the first
reading, times relative to it, and — because this log is written with a continuous angle —
the turn of a reading is ``floor(angle / 360°)`` (the numbering of a real log, with wrapped
angles, reversals and gaps, is the reading stage's job).
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

EPOCH = 1_790_000_000  # an invented start, 2026-09


def write_log(path: Path, n: int, per_turn: int, row_group: int, seed: int = 1) -> None:
    """The invented log, written a row group at a time (never the whole columns in memory)."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(seed)
    schema = pa.schema([("time_s", pa.float64()), ("angle_deg", pa.float64()), ("fringe", pa.float64())])
    with pq.ParquetWriter(path, schema, compression="snappy") as w:
        for a in range(0, n, row_group):
            i = np.arange(a, min(a + row_group, n), dtype=np.float64)
            t = EPOCH + 0.25 * i  # multiples of 0.25 s are exact in float64
            ang = (i + 0.5) * (360.0 / per_turn)
            th = np.deg2rad(ang)
            y = (0.01 * np.cos(2 * th) - 0.004 * np.sin(2 * th) + 0.002 * np.cos(th) + 1e-3 * np.sin(i / 20000.0)
                 + 0.01 * rng.normal(size=i.size))
            w.write_table(pa.table([t, ang, y], schema=schema))


def adapter_stream(path: str, chunk_rows: int):
    """A `ScanStream` over the file from pyarrow record batches (see the module docstring)."""
    import pyarrow.parquet as pq

    from nullfit.reading.stream import ScanChunk, ScanStream

    # pre_buffer=False: with read-ahead buffering, pyarrow keeps every row group it has read in
    # its memory pool until the file is closed (measured: the pool grows with the file)
    pf = pq.ParquetFile(path, pre_buffer=False)
    n = pf.metadata.num_rows
    first = pf.read_row_group(0, columns=["time_s"]).column(0)[0].as_py()
    epoch = int(np.floor(first))

    counts = np.zeros(0, np.int64)  # readings per turn, for the complete flags

    def chunks():
        nonlocal counts
        row = 0
        for batch in pf.iter_batches(batch_size=chunk_rows, columns=["time_s", "angle_deg", "fringe"]):
            t = batch.column(0).to_numpy() - epoch
            ang = batch.column(1).to_numpy()
            y = batch.column(2).to_numpy()
            turn = np.floor(ang / 360.0).astype(np.int64)
            c = np.bincount(turn)
            if c.size > counts.size:
                counts = np.concatenate([counts, np.zeros(c.size - counts.size, np.int64)])
            counts[:c.size] += c
            rows = np.arange(row + 1, row + 1 + t.size, dtype=np.int64)
            row += t.size
            yield ScanChunk(t, np.deg2rad(ang), y, turn, rows)

    def finish(s):  # a turn is complete when it has all its readings (this log has no gaps)
        full = counts.max()
        s.turn_complete, s.turn_sense, s.n_reversals = counts == full, np.ones(counts.size, np.int64), 0

    s = ScanStream(chunks, source=path, unit="fringe", epoch_unix=epoch, finish=finish)
    s.n_samples = n
    return s


def open_log(path: str, chunk_rows: int, adapter: bool):
    if not adapter:
        try:
            from nullfit.reading.stream import open_stream
        except ImportError:
            pass
        else:
            return open_stream(path, chunk_rows=chunk_rows), "nullfit.reading.stream.open_stream"
    return adapter_stream(path, chunk_rows), "local pyarrow adapter"


# ----------------------------------------------------------------------------- children
def child(argv) -> None:
    import resource

    what, path = argv[0], argv[1]
    out = {}
    if what == "arrow":
        import pyarrow.parquet as pq

        t0 = time.perf_counter()  # the work, not the imports
        tab = pq.read_table(path)
        out["rows"] = tab.num_rows
    else:
        from nullfit.fitting.stream import fit_stream

        t0 = time.perf_counter()
        stream, how = open_log(path, int(argv[2]), argv[3] == "1")
        fit = fit_stream(stream, progress=False)
        out.update(rows=fit.n_samples, turns=fit.n_turns, how=how, c2=float(fit.coef[2]), s2=float(fit.coef[3]))
    out["seconds"] = time.perf_counter() - t0
    out["maxrss_bytes"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # Linux: KiB
    print(json.dumps(out))


def run_child(args) -> dict:
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(Path(__file__).resolve().parents[1])]
                                                      + [p for p in [os.environ.get("PYTHONPATH")] if p]))
    r = subprocess.run([sys.executable, __file__, "--child", *map(str, args)], capture_output=True, text=True, env=env)
    if r.returncode != 0:
        raise SystemExit(r.stderr)
    return json.loads(r.stdout.strip().splitlines()[-1])


def check_small(n: int, per_turn: int, chunk_rows: int, tmp: Path) -> None:
    """Streamed and in-memory fits of the same (small) file, side by side."""
    import warnings

    import pandas as pd

    from nullfit.fitting.fit import fit_scan
    from nullfit.fitting.stream import fit_stream
    from nullfit.reading.scan import Scan

    path = tmp / "check.parquet"
    write_log(path, n, per_turn, 1 << 18)
    df = pd.read_parquet(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scan = Scan.from_frame(df, time="time_s", angle="angle_deg", signal="fringe")
    ref = fit_scan(scan)
    stream, how = open_log(str(path), chunk_rows, True)
    got = fit_stream(stream, progress=False)
    rel = np.abs(got.coef - ref.coef).max() / np.abs(ref.coef).max()
    relc = np.abs(got.cov - ref.cov).max() / np.abs(ref.cov).max()
    print(f"check at {n:.0e} readings ({how}): streamed vs in-memory, max rel. diff coef {rel:.1e}, cov {relc:.1e}; "
          f"turns {got.n_turns} vs {ref.n_turns}")
    path.unlink()


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--readings", default="1e8", help="readings in the log (default 1e8)")
    ap.add_argument("--per-turn", type=int, default=72)
    ap.add_argument("--row-group", type=int, default=1 << 20, help="rows per Parquet row group")
    ap.add_argument("--chunk-rows", type=int, default=1 << 20, help="readings per streamed chunk")
    ap.add_argument("--repeat", type=int, default=1, help="run the pair this many times, report medians")
    ap.add_argument("--adapter", action="store_true", help="use the local pyarrow adapter even if open_stream exists")
    ap.add_argument("--check", default=None, help="also compare streamed and in-memory fits at this size")
    ap.add_argument("--dir", default=None, help="directory for the temporary file (default: the system's)")
    ap.add_argument("--child", nargs="+", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        return child(args.child)
    n = int(float(args.readings))
    tmp = Path(tempfile.mkdtemp(prefix="nullfit-bench-stream-", dir=args.dir))
    try:
        if args.check:
            check_small(int(float(args.check)), args.per_turn, args.chunk_rows, tmp)
        path = tmp / "big.parquet"
        t0 = time.perf_counter()
        write_log(path, n, args.per_turn, args.row_group)
        size = path.stat().st_size
        print(f"wrote {n:.0e} readings ({3 * 8 * n / 1e9:.2f} GB of float64 columns; file {size / 1e9:.2f} GB, "
              f"row groups of {args.row_group}) in {time.perf_counter() - t0:.1f} s")
        arrow, fit = [], []
        for _ in range(args.repeat):
            arrow.append(run_child(["arrow", path]))
            fit.append(run_child(["fit", path, args.chunk_rows, int(args.adapter)]))
        med = lambda rs, k: statistics.median(r[k] for r in rs)  # noqa: E731
        ta, tf = med(arrow, "seconds"), med(fit, "seconds")
        ma, mf = med(arrow, "maxrss_bytes"), med(fit, "maxrss_bytes")
        print(f"chunks from {fit[0]['how']}, {args.chunk_rows} readings each; {fit[0]['turns']} turns fitted; "
              f"medians of {args.repeat} run(s)")
        print(f"{'':38s}{'time':>10s}{'peak RSS':>12s}")
        print(f"{'pyarrow.parquet.read_table':38s}{ta:9.2f}s{ma / 2**30:10.2f} GiB")
        print(f"{'nullfit fit_stream (default fit)':38s}{tf:9.2f}s{mf / 2**30:10.2f} GiB")
        print(f"ratio fit/read: time {tf / ta:.2f}x, peak RSS {mf / ma:.2f}x; fit peak RSS = "
              f"{mf / (24 * n):.2f}x the three columns ({24 * n / 2**30:.2f} GiB)")
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
