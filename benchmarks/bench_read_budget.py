"""The reader's time budget: what is left for its checks within 1.5× a raw read, and what a
compiled kernel would cost.

Run from the repository root::

    python benchmarks/bench_read_budget.py              # 1e7 readings
    python benchmarks/bench_read_budget.py --n 1e6      # quicker

``read_scan`` does more than a raw read: exact integer-nanosecond epochs, unwrapping, turn
numbers with reversal hysteresis, gaps, dropped rows and a dozen checks with one-line messages.
This script asks how much of that fits within 1.5× the obvious alternative, on the invented log
of ``bench_io.py`` (three float64 columns, 72 readings per turn), in one process after a warm-up
(``--warm`` GB touched first; see ``bench_io.py`` on page faults):

1. the alternative: ``pyarrow.parquet.read_table`` + ``to_numpy`` of every column, and
   ``pandas.read_csv(engine="pyarrow")``;
2. the reading ``read_scan`` itself needs before any check: the Parquet columns one at a time
   (so that only one is held in Arrow's memory: the peak-memory target), and the CSV parsed by
   pyarrow with the time column as nine-decimal numbers (so that Unix times keep every digit);
3. ``nullfit.read_scan``;
4. the budget: 1.5 × (1) − (2), in units of one numpy pass over one column (``numpy.diff`` of the
   time column: read one column, write one new one), beside what ``read_scan`` spends now;
5. with numba installed (it is not a dependency of nullfit; the line says so when it is
   missing): in fresh processes, ``import numba``, the first call of a fused one-pass kernel —
   compiled the first time, loaded from its on-disk cache the second — and the kernel's time per
   reading.  The kernel is the *least* a compiled reader would do in one pass (finite and
   time-order checks, relative time, degrees to radians, unwrapping, step extremes, a running
   turn index, coverage bins of 2θ); the reader needs at least two passes, because the turn
   numbering starts from whole-log medians (typical step, readings per stop, first sense).

The steps of one format run in turn, ``--repeat`` times (so that a busy spell of a shared machine
slows them alike), and the best of each is kept.  Everything written (the logs, numba's cache) goes to a temporary
directory that is deleted at the end.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import textwrap
import warnings

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from bench_fit import interleaved  # noqa: E402  (runs in turn, median and minimum)
from bench_io import warm_memory, write_logs  # noqa: E402  (the same invented log)

KERNEL = '''
import numpy as np
import numba


@numba.njit(cache=True, nogil=True)
def one_pass(t, a_deg, out_t, out_phi, bins):
    n = t.size
    twopi = 2.0 * np.pi
    t0 = np.floor(t[0])
    off = 0.0
    prev = a_deg[0] * (np.pi / 180.0)
    smin, smax = np.inf, -np.inf
    kmax = -(1 << 62)
    turns = 0
    for i in range(n):
        ti, ai = t[i], a_deg[i]
        if not (np.isfinite(ti) and np.isfinite(ai)):
            return i, smin, smax, turns
        if i and ti <= t[i - 1]:
            return i, smin, smax, turns
        out_t[i] = ti - t0
        r = ai * (np.pi / 180.0)
        d = r - prev
        if d < -np.pi:
            off += twopi
        elif d > np.pi:
            off -= twopi
        prev = r
        phi = r + off
        out_phi[i] = phi
        if i:
            s = phi - out_phi[i - 1]
            smin = min(smin, s)
            smax = max(smax, s)
        k = int(np.floor(phi / twopi + 1e-9))
        if k > kmax:
            kmax = k
            turns += 1
        bins[int(phi * (4096 / np.pi)) & 4095] += 1
    return -1, smin, smax, turns
'''

NUMBA_CHILD = r'''
import json, sys, time
n = int(sys.argv[1])
t0 = time.perf_counter()
import numpy as np
t1 = time.perf_counter()
import numba
t2 = time.perf_counter()
import fused_kernel
i = np.arange(n)
t = 1.8e9 + i * 1.25
a = np.mod(i * 5.0 + 2.5, 360.0)
out_t, out_phi, bins = np.empty(n), np.empty(n), np.zeros(4096, np.int64)
t3 = time.perf_counter()
fused_kernel.one_pass(t[:100], a[:100], out_t[:100], out_phi[:100], bins)
t4 = time.perf_counter()
best = float("inf")
for _ in range(5):
    s = time.perf_counter()
    r = fused_kernel.one_pass(t, a, out_t, out_phi, bins)
    best = min(best, time.perf_counter() - s)
assert r[0] == -1 and r[3] == n // 72 + (n % 72 > 0), r
print(json.dumps({"import": t2 - t1, "first_call": t4 - t3, "kernel": best}))
'''


def numpy_pass(x: np.ndarray, repeat: int) -> float:
    """Best time of one numpy pass over one column: read ``x``, write a new array (``numpy.diff``)."""
    return interleaved({"diff": lambda: np.diff(x)}, repeat)["diff"][1]


def numba_costs(n: int, directory: str) -> list[dict] | str:
    """Two fresh processes (compile, then cache load); or why they cannot run."""
    try:
        import numba  # noqa: F401
    except ImportError:
        return "numba is not installed (pip install numba to measure it; nullfit does not use it)"
    kdir = os.path.join(directory, "kernel")
    os.makedirs(kdir)
    with open(os.path.join(kdir, "fused_kernel.py"), "w") as f:
        f.write(textwrap.dedent(KERNEL))
    env = dict(os.environ, NUMBA_CACHE_DIR=os.path.join(directory, "numba-cache"),
               PYTHONPATH=kdir + os.pathsep + os.environ.get("PYTHONPATH", ""))
    runs = []
    for _ in range(2):
        out = subprocess.run([sys.executable, "-c", NUMBA_CHILD, str(n)], capture_output=True, text=True, env=env)
        if out.returncode:
            return f"the numba kernel failed: {out.stderr.strip().splitlines()[-1]}"
        runs.append(json.loads(out.stdout.strip().splitlines()[-1]))
    return runs


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--n", default="1e7", help="readings in the log")
    ap.add_argument("--repeat", type=int, default=5, help="runs of each step (the best is kept)")
    ap.add_argument("--warm", type=float, default=4.0, help="GB of memory touched before the run (0: none)")
    args = ap.parse_args(argv)
    n = int(float(args.n))

    import pandas as pd
    import pyarrow as pa
    import pyarrow.csv as pcsv
    import pyarrow.parquet as pq

    import nullfit

    directory = tempfile.mkdtemp(prefix="nullfit-bench-budget-")
    try:
        paths = write_logs(n, directory)
        warm_memory(args.warm)
        names = ("time_s", "angle_deg", "fringe")

        def parquet_columns():
            return [pq.ParquetFile(paths["parquet"]).read(columns=[c]).column(0).to_numpy() for c in names]

        def csv_decimal():
            types = {"time_s": pa.decimal128(20, 9), "angle_deg": pa.float64(), "fringe": pa.float64()}
            return pcsv.read_csv(paths["csv"], read_options=pcsv.ReadOptions(block_size=1 << 22),
                                 convert_options=pcsv.ConvertOptions(column_types=types))

        def read_scan(path):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                return nullfit.read_scan(path)

        one = numpy_pass(pq.read_table(paths["parquet"]).column(0).to_numpy(), args.repeat)
        rows = []
        for fmt, alt_name, alt, base_name, base in (
                ("parquet", "pyarrow read_table + to_numpy",
                 lambda: [c.to_numpy() for c in pq.read_table(paths["parquet"]).columns],
                 "the columns one at a time", parquet_columns),
                ("csv", 'pandas.read_csv(engine="pyarrow")', lambda: pd.read_csv(paths["csv"], engine="pyarrow"),
                 "pyarrow CSV, time as decimals", csv_decimal)):
            best = {k: v[1] for k, v in interleaved(
                {"alt": alt, "base": base, "scan": lambda fmt=fmt: read_scan(paths[fmt])}, args.repeat).items()}
            t_alt, t_base, t_scan = best["alt"], best["base"], best["scan"]
            rows.append((fmt, alt_name, t_alt, base_name, t_base, t_scan))
        print(f"{n:.0e} readings (three float64 columns = {24 * n / 1e6:.0f} MB); one numpy pass over one column "
              f"(numpy.diff) = {one * 1e3:.1f} ms ({one / n * 1e9:.1f} ns per reading)")
        for fmt, alt_name, t_alt, base_name, t_base, t_scan in rows:
            budget = 1.5 * t_alt - t_base
            print(f"\n  {fmt}: {alt_name} {t_alt:.3f} s; {base_name} {t_base:.3f} s; nullfit.read_scan {t_scan:.3f} s "
                  f"({t_scan / t_alt:.2f}× the alternative)")
            print(f"    left for everything else within 1.5×: {budget:.3f} s = {budget / one:.1f} numpy passes; "
                  f"read_scan spends {t_scan - t_base:.3f} s = {(t_scan - t_base) / one:.0f} passes")
        costs = numba_costs(n, directory)
        print()
        if isinstance(costs, str):
            print(f"  compiled kernel: {costs}")
        else:
            for label, c in zip(("first process (compiles)", "second process (cache)"), costs):
                print(f"  numba, {label}: import numba {c['import']:.3f} s, first call {c['first_call']:.3f} s, "
                      f"one fused pass {c['kernel']:.4f} s ({c['kernel'] / n * 1e9:.1f} ns per reading)")
            c = costs[1]
            print(f"  numba's fixed cost per process (import + cached first call): {c['import'] + c['first_call']:.2f} s; "
                  f"two fused passes: {2 * c['kernel']:.3f} s")
    finally:
        shutil.rmtree(directory, ignore_errors=True)


if __name__ == "__main__":
    main()
