"""Speed of a campaign: many logs into one per-turn table, 1 vs 2 worker processes side by side.

Run from the repository root::

    python benchmarks/bench_campaign.py                         # 64 logs x 1e6 readings, 3 rounds
    python benchmarks/bench_campaign.py --logs 16 --readings 2e5 --rounds 1   # a quick look

It writes ``--logs`` invented logs (Parquet, Unix-second times, 72 readings per turn, a 2θ signal
and white noise; a manifest beside each) into a temporary folder, then times
:func:`nullfit.demodulate_campaign` on all of them in three configurations:

1. ``workers=0``: the obvious alternative, a plain loop in this process (read, demodulate, next);
2. ``workers=1``: a local Dask cluster with one worker process;
3. ``workers=2``: a local Dask cluster with two worker processes (one per core here).

Each cluster time includes starting and closing the cluster: that is what a user waits for.
The configurations run in rounds, each round in a rotated order, so that a load from other
programs falls on all of them alike; per configuration the best and the median round are
reported, and the ratios are formed from the best times (the least disturbed) and from the
medians.  The CPU time of this process and its worker processes is shown beside the wall time,
and the load average before each configuration: on a machine shared with other programs, two
workers can only be twice as fast as one when two cores are free.  Every round also measures
how much faster two processes do plain numpy work than one at that moment (the same total work):
the most that two workers could gain then.  The tables of all
configurations are checked to be identical.  Target: 2 workers at
least 1.6× faster than 1 worker on two cores.  The temporary folder is deleted at the end.
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import resource
import signal
import statistics
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

READINGS_PER_TURN = 72


def write_logs(folder: Path, n_logs: int, readings: int) -> list[Path]:
    import pyarrow as pa
    import pyarrow.parquet as pq

    paths = []
    n_turns = readings // READINGS_PER_TURN
    n = n_turns * READINGS_PER_TURN
    k = np.arange(n)
    angle = np.mod(k * (360.0 / READINGS_PER_TURN) + 2.5, 360.0)
    th = np.deg2rad(angle)
    for i in range(n_logs):
        rng = np.random.default_rng(i)
        t = 1_780_000_000 + 86_400.0 * i + k * 0.5  # 36 s per turn
        y = 0.01 * np.cos(2 * th - 0.3) + 1e-5 * (t - t[0]) + 0.01 * rng.normal(size=n)
        path = folder / f"run{i:03d}.parquet"
        pq.write_table(pa.table({"unix_s": t, "angle_deg": angle, "fringe": y}), path)
        path.with_suffix(".toml").write_text('[columns]\ntime = "unix_s"\n')
        paths.append(path)
    return paths


def _spin(units: int) -> None:
    x = np.random.default_rng(0).normal(size=1_000_000)
    for _ in range(units * 25):
        np.cos(x).sum()


def machine_scaling(units: int = 4) -> float:
    """How much faster two processes do plain numpy work than one, on this machine right now
    (the same total work; the processes are started before timing).  Two campaign workers can
    be at most about this much faster than one."""
    ctx = multiprocessing.get_context("spawn")
    with ctx.Pool(2) as pool:
        pool.map(_spin, [0, 0], chunksize=1)
        t0 = time.perf_counter()
        pool.apply(_spin, (units,))
        one = time.perf_counter() - t0
        t0 = time.perf_counter()
        pool.map(_spin, [units // 2, units // 2], chunksize=1)
        two = time.perf_counter() - t0
    return one / two


def cpu_seconds() -> float:
    """User + system CPU time of this process and of its finished child processes (the workers)."""
    me, kids = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
    return me.ru_utime + me.ru_stime + kids.ru_utime + kids.ru_stime


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--logs", type=int, default=64)
    ap.add_argument("--readings", type=float, default=1e6, help="readings per log (default 1e6)")
    ap.add_argument("--rounds", type=int, default=3, help="rounds of all configurations (default 3)")
    args = ap.parse_args(argv)

    from nullfit import demodulate_campaign

    # a SIGTERM ends the run like Ctrl-C does, so the temporary folder is still deleted
    signal.signal(signal.SIGTERM, lambda *_: sys.exit(143))
    configs = {"serial loop (workers=0)": 0, "1 worker process": 1, "2 worker processes": 2}
    times: dict[str, list[float]] = {name: [] for name in configs}
    cpus: dict[str, list[float]] = {name: [] for name in configs}
    scaling: list[float] = []
    with tempfile.TemporaryDirectory(prefix="nullfit-bench-campaign-") as tmp:
        t0 = time.perf_counter()
        logs = write_logs(Path(tmp), args.logs, int(args.readings))
        size = sum(p.stat().st_size for p in logs)
        print(f"{args.logs} logs x {int(args.readings):.0e} readings ({size / 1e6:.0f} MB of Parquet) written in "
              f"{time.perf_counter() - t0:.1f} s; {args.rounds} round(s)", flush=True)
        reference = None
        names = list(configs)
        for r in range(args.rounds):
            scaling.append(machine_scaling())
            print(f"  round {r + 1}: plain numpy work, 2 processes vs 1: {scaling[-1]:.2f}x", flush=True)
            for name in names[r % len(names):] + names[:r % len(names)]:
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    c0, load0 = cpu_seconds(), os.getloadavg()[0]
                    t0 = time.perf_counter()
                    table = demodulate_campaign(logs, workers=configs[name], progress=False)
                    dt = time.perf_counter() - t0
                    cpu = cpu_seconds() - c0
                times[name].append(dt)
                cpus[name].append(cpu)
                assert not table.failed, table.failed
                if reference is None:
                    reference = table
                elif not table.frame.equals(reference.frame):
                    raise SystemExit(f"{name}: the table differs from the first configuration's")
                print(f"  round {r + 1}: {name:<24} {dt:7.2f} s   cpu {cpu:6.1f} s   load before {load0:.1f}", flush=True)
    print()
    print(f"{'configuration':<26}{'best':>9}{'median':>9}   per log (best)   cpu (median)")
    for name, ts in times.items():
        print(f"{name:<26}{min(ts):8.2f}s{statistics.median(ts):8.2f}s   {min(ts) / args.logs * 1e3:7.1f} ms"
              f"   {statistics.median(cpus[name]):9.1f} s")
    one, two, loop = (times[n] for n in ("1 worker process", "2 worker processes", "serial loop (workers=0)"))
    print()
    print(f"2 workers vs 1 worker:  {min(one) / min(two):.2f}x (best)   "
          f"{statistics.median(one) / statistics.median(two):.2f}x (median)   target >= 1.6x")
    print(f"  the machine meanwhile: plain numpy work in 2 processes vs 1: {max(scaling):.2f}x (best), "
          f"{statistics.median(scaling):.2f}x (median) -- the most two workers could gain")
    print(f"2 workers vs the loop:  {min(loop) / min(two):.2f}x (best)   "
          f"{statistics.median(loop) / statistics.median(two):.2f}x (median)")
    print(f"1 worker vs the loop:   {min(loop) / min(one):.2f}x (best)   (the cost of a cluster of one)")


if __name__ == "__main__":
    main()
