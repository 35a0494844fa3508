"""Speed and peak memory of reading a scan log, side by side with pandas and pyarrow.

Run from the repository root::

    python benchmarks/bench_io.py                   # 1e6 and 1e7 readings
    python benchmarks/bench_io.py --sizes 1e6       # quicker
    python benchmarks/bench_io.py --repeat 5        # more repetitions (the best is kept)
    python benchmarks/bench_io.py --sizes 1e6 --stream 1e8   # and open_stream on 1e8 readings

The log is invented: three float64 columns — Unix-second epochs (1.25 s apart from 2027-01-15),
a table angle modulo 360° at 72 readings per turn, and a 2θ signal with white noise — written
once as CSV (``pyarrow.csv.write_csv``) and once as Parquet (row groups of 2**20 rows) in a
temporary directory that is deleted at the end.  For every size and format it prints, for

* ``nullfit.read_scan`` (validated Scan: exact epochs, turn numbers, checks),
* the obvious alternative: ``pandas.read_csv(path, engine="pyarrow")`` for CSV and
  ``pyarrow.parquet.read_table(path)`` + ``to_numpy()`` of every column for Parquet,
* ``nullfit.reading.stream.open_stream`` (Parquet only: the checking passes plus one iteration
  over the chunks, consuming nothing),

the best wall-clock time over ``--repeat`` runs and the peak memory, and the ratios of
``read_scan`` to the alternative.  ``--stream N`` adds one run of ``open_stream`` + one
iteration over a Parquet log of N readings 0.3 s apart written row group by row group (1e8
readings: a 1.3 GB file, 2.4 GB of columns), the reading part of a streamed fit.  Every measurement runs in a fresh child process (so one
cannot warm or bloat another), the kinds interleaved in every repetition so that a busy machine
slows them alike.  Peak memory is the child's peak resident set size (``resource.getrusage``
``ru_maxrss`` of the child itself) minus its resident set size just before the read (after the
imports), i.e. what the read added at its peak; it is also shown as a multiple of the three
float64 columns (24 bytes per reading).  Wall-clock times on a shared machine are noisy: the
ratios are what matters.

Before every round a throw-away process fills ``--warm`` GB of memory and exits (default 4).  On
a virtual machine, memory the guest has not used lately costs a host page fault per 4 KiB on first
touch (0.19 s per 80 MB measured on the development machine, against 0.014 s once warm), and the
host takes idle guest memory back within minutes; without the warm-up the figures measure page
faults, which penalise whichever reader allocates more, not the reading.  ``--warm 0`` skips it.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time

import numpy as np

CHILD = r"""
import json, resource, sys, time, warnings
kind, path, repeat = sys.argv[1], sys.argv[2], int(sys.argv[3])
import numpy as np, pandas as pd, pyarrow as pa, pyarrow.parquet as pq, pyarrow.csv
import nullfit.reading.files, nullfit.reading.stream

def rss():
    with open("/proc/self/status") as f:
        for line in f:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) * 1024

def run():
    if kind == "read_scan":
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return nullfit.reading.files.read_scan(path)
    if kind == "pandas":
        return pd.read_csv(path, engine="pyarrow")
    if kind == "pyarrow":
        return [c.to_numpy() for c in pq.read_table(path).columns]
    if kind == "open_stream":
        s = nullfit.reading.stream.open_stream(path)
        return sum(c.n for c in s)
    raise ValueError(kind)

base = rss()
best = float("inf")
for _ in range(repeat):
    t0 = time.perf_counter()
    out = run()
    best = min(best, time.perf_counter() - t0)
    del out
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # Linux: kB
print(json.dumps({"time": best, "peak_added": peak - base}))
"""


def write_logs(n: int, directory: str) -> dict[str, str]:
    import pyarrow as pa
    import pyarrow.csv as pcsv
    import pyarrow.parquet as pq

    i = np.arange(n)
    t = 1.8e9 + i * 1.25
    ang = np.mod(i * 5.0 + 2.5, 360.0)
    y = 0.01 * np.cos(2 * np.deg2rad(ang)) + np.random.default_rng(1).normal(0, 0.01, n)
    table = pa.table({"time_s": t, "angle_deg": ang, "fringe": y})
    paths = {"csv": os.path.join(directory, f"log{n}.csv"), "parquet": os.path.join(directory, f"log{n}.parquet")}
    pcsv.write_csv(table, paths["csv"])
    pq.write_table(table, paths["parquet"], row_group_size=1 << 20)
    return paths


def write_parquet_in_groups(n: int, directory: str, group: int = 1 << 20) -> str:
    """The log of :func:`write_logs` but 0.3 s apart (a turn every 21.6 s: 1e8 readings span 347 days,
    within the 1e8 s a log may span), Parquet only, written one row group at a time."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    path = os.path.join(directory, f"stream{n}.parquet")
    rng = np.random.default_rng(1)
    schema = pa.schema([("time_s", pa.float64()), ("angle_deg", pa.float64()), ("fringe", pa.float64())])
    with pq.ParquetWriter(path, schema) as w:
        for a in range(0, n, group):
            i = np.arange(a, min(n, a + group))
            ang = np.mod(i * 5.0 + 2.5, 360.0)
            y = 0.01 * np.cos(2 * np.deg2rad(ang)) + rng.normal(0, 0.01, i.size)
            w.write_table(pa.table({"time_s": 1.8e9 + i * 0.3, "angle_deg": ang, "fringe": y}, schema=schema))
    return path


def warm_memory(gb: float) -> None:
    """Fill ``gb`` GB of memory in a child process that then exits (see the module docstring)."""
    if gb <= 0:
        return
    code = ("import numpy as np\nkeep = []\n"
            f"for _ in range({int(round(gb * 8))}):\n    keep.append(np.ones(1 << 24))\n")  # 128 MiB each
    subprocess.run([sys.executable, "-c", code], check=True)


def measure(kind: str, path: str, repeat: int) -> dict:
    env = dict(os.environ)
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    env["PYTHONPATH"] = root + os.pathsep + env.get("PYTHONPATH", "")
    out = subprocess.run([sys.executable, "-c", CHILD, kind, path, str(repeat)], capture_output=True, text=True,
                         env=env)
    if out.returncode:
        raise RuntimeError(f"{kind} on {path} failed:\n{out.stderr}")
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--sizes", default="1e6,1e7", help="comma-separated numbers of readings")
    ap.add_argument("--repeat", type=int, default=3, help="repetitions (fresh processes; the best is kept)")
    ap.add_argument("--stream", default=None, help="also time open_stream on a Parquet log of this many readings")
    ap.add_argument("--warm", type=float, default=4.0, help="GB of memory touched before every round (0: none)")
    args = ap.parse_args(argv)
    sizes = [int(float(s)) for s in args.sizes.split(",")]
    directory = tempfile.mkdtemp(prefix="nullfit-bench-io-")
    try:
        for n in sizes:
            t0 = time.perf_counter()
            paths = write_logs(n, directory)
            cols_mb = 24 * n / 1e6
            print(f"\n{n:.0e} readings (three float64 columns = {cols_mb:.0f} MB; CSV "
                  f"{os.path.getsize(paths['csv']) / 1e6:.0f} MB, Parquet {os.path.getsize(paths['parquet']) / 1e6:.0f} MB;"
                  f" written in {time.perf_counter() - t0:.1f} s)")
            cases = [("csv", "read_scan"), ("csv", "pandas"), ("parquet", "read_scan"), ("parquet", "pyarrow"),
                     ("parquet", "open_stream")]
            best: dict = {}
            for _ in range(args.repeat):  # interleaved: a busy machine slows every kind alike
                warm_memory(args.warm)
                for fmt, kind in cases:
                    r = measure(kind, paths[fmt], 1)
                    b = best.setdefault((fmt, kind), {"time": np.inf, "peak_added": 0})
                    b["time"] = min(b["time"], r["time"])
                    b["peak_added"] = max(b["peak_added"], r["peak_added"])
            print(f"  {'format':8s} {'reader':34s} {'time':>9s} {'peak added':>11s} {'× columns':>10s}")
            names = {"read_scan": "nullfit read_scan", "pandas": 'pandas.read_csv(engine="pyarrow")',
                     "pyarrow": "pyarrow read_table + to_numpy", "open_stream": "open_stream + one iteration"}
            for fmt, kind in cases:
                b = best[(fmt, kind)]
                print(f"  {fmt:8s} {names[kind]:34s} {b['time']:8.2f}s {b['peak_added'] / 1e6:9.0f}MB "
                      f"{b['peak_added'] / (24 * n):9.2f}×")
            for fmt, alt in (("csv", "pandas"), ("parquet", "pyarrow")):
                r, a = best[(fmt, "read_scan")], best[(fmt, alt)]
                print(f"  {fmt}: read_scan / {names[alt]}: time {r['time'] / a['time']:.2f}×, "
                      f"peak memory {r['peak_added'] / max(a['peak_added'], 1):.2f}×; read_scan peak = "
                      f"{r['peak_added'] / (24 * n):.2f}× the three columns")
            for p in paths.values():
                os.remove(p)
        if args.stream:
            n = int(float(args.stream))
            t0 = time.perf_counter()
            path = write_parquet_in_groups(n, directory)
            print(f"\n{n:.0e} readings in row groups of 2**20 (three float64 columns = {24 * n / 1e9:.2f} GB; Parquet "
                  f"{os.path.getsize(path) / 1e9:.2f} GB; written in {time.perf_counter() - t0:.0f} s)")
            r = measure("open_stream", path, 1)
            print(f"  open_stream + one iteration: {r['time']:.1f} s, peak added {r['peak_added'] / 1e6:.0f} MB "
                  f"({r['peak_added'] / 2**30:.2f} GiB)")
            os.remove(path)
    finally:
        shutil.rmtree(directory, ignore_errors=True)


if __name__ == "__main__":
    main()
