"""Timings of the amplitude-limit machinery, side by side with the obvious alternative.

Run:  python benchmarks/bench_limits.py  [--quick] [--readings 1e7] [--no-scale]

1. Unified (Feldman–Cousins) limit: first call (belt tiles built) vs later calls (belt cached),
   through the public ``amplitude_limit`` and through the vectorised inner inversion.
2. Block bootstrap: 10^4 replicates of a 10^4-turn per-turn coefficient series (invented AR(1)
   data): nullfit's cumulative-sum block sums vs arch's ``CircularBlockBootstrap.apply``
   refitting the mean pair and its amplitude on every resampled series.
3. ``analyse`` at scale (default 10^7 readings, 72 per turn, invented white-noise scan written
   to a temporary Parquet file and deleted afterwards): read + fit against ``analyse`` with all
   four limits, and the bootstrap limit alone with the default block length (at most
   ``MAX_BLOCKS`` blocks) against the same bootstrap with the Politis–White length alone (block
   length 1 for independent turns: a replicate then costs one lookup per turn).  Needs ≈ 3 GB.

Prints a table; deletes what it writes.  Not a test: no assertion on wall time.
"""

from __future__ import annotations

import argparse
import math
import statistics
import time

import numpy as np


def _clock(fn, repeat=1):
    times = []
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def _ar1(rng, n, phi=0.5):
    e = rng.standard_normal((n, 2))
    x = np.empty_like(e)
    x[0] = e[0] / math.sqrt(1 - phi**2)
    for t in range(1, n):
        x[t] = phi * x[t - 1] + e[t]
    return x


def bench_unified(rows):
    from nullfit.limits import amplitude_limit
    from nullfit.limits.covariance import covariance_shape
    from nullfit.limits.unified import intervals_many

    cases = [
        ("isotropic (Rice belt)", np.eye(2) * 1e-4),
        ("anisotropic, σ_minor/σ_major = 0.5", np.array([[3.25e-4, 3e-4 * math.sqrt(3) / 4],
                                                          [3e-4 * math.sqrt(3) / 4, 1.75e-4]])),
    ]
    rng = np.random.default_rng(1)
    for label, cov in cases:
        sig = math.sqrt(np.trace(cov) / 2)
        first, _ = _clock(lambda: amplitude_limit(1.5 * sig, 0.4 * sig, cov))
        xs = rng.uniform(0, 5, 200) * sig
        for x in xs:  # make sure every tile these draws need is cached
            amplitude_limit(x, 0.0, cov)
        per = []
        for x in xs:
            t0 = time.perf_counter()
            amplitude_limit(x, 0.0, cov)
            per.append(time.perf_counter() - t0)
        shape = covariance_shape(cov)
        many = rng.uniform(0, 5, 10_000) * sig
        vec, _ = _clock(lambda: intervals_many(many, shape, 0.95), repeat=5)
        rows.append((f"unified limit, {label}: first call (builds belt)", first, None))
        rows.append((f"unified limit, {label}: cached, amplitude_limit (median)", statistics.median(per), None))
        rows.append((f"unified limit, {label}: cached, vectorised, per limit (10^4)", vec / many.size, None))


def bench_bootstrap(rows, n_turns, reps):
    from arch.bootstrap import CircularBlockBootstrap, StationaryBootstrap

    from nullfit.limits import amplitude_limit
    from nullfit.limits.bootstrap import block_means, politis_white_block_length

    rng = np.random.default_rng(7)
    x = _ar1(rng, n_turns) + np.array([0.02, -0.01])
    c, s = x.mean(axis=0)
    b, _ = politis_white_block_length(x)

    def refit(y):
        m = y.mean(axis=0)
        return np.array([math.hypot(m[0], m[1])])

    ours, _ = _clock(lambda: block_means(x, b, "circular", reps, np.random.default_rng(1), progress=False), repeat=3)
    full, lim = _clock(lambda: amplitude_limit(c, s, np.eye(2), method="bootstrap", turns=x, rng=1, replicates=reps,
                                               progress=False), repeat=3)
    arch_t, _ = _clock(lambda: CircularBlockBootstrap(b, x, seed=1).apply(refit, reps))
    ours_sb, _ = _clock(lambda: block_means(x, b, "stationary", reps, np.random.default_rng(1), progress=False),
                        repeat=3)
    arch_sb, _ = _clock(lambda: StationaryBootstrap(b, x, seed=1).apply(refit, reps))
    tag = f"{reps} replicates × {n_turns} turns, block {b}"
    rows.append((f"circular block bootstrap, nullfit block sums ({tag})", ours, None))
    rows.append((f"circular block bootstrap, arch apply + refit ({tag})", arch_t, arch_t / ours))
    rows.append((f"bootstrap upper limit incl. Politis–White (amplitude_limit, {tag})", full, arch_t / full))
    rows.append((f"stationary bootstrap, nullfit block sums ({tag})", ours_sb, None))
    rows.append((f"stationary bootstrap, arch apply + refit ({tag})", arch_sb, arch_sb / ours_sb))
    return lim


def bench_scale(rows, n_readings, per_turn=72):
    """Read + fit vs analyse with all four limits, on an invented scan written as Parquet."""
    import os
    import tempfile

    import pandas as pd

    from nullfit import analyse, fit_scan, read_scan
    from nullfit.limits import amplitude_limit
    from nullfit.limits.bootstrap import MAX_BLOCKS, politis_white_block_length

    rng = np.random.default_rng(11)
    n = int(n_readings) // per_turn * per_turn
    t = np.arange(n) * 0.25
    ang = (np.arange(n) % per_turn) * (360.0 / per_turn)
    th = np.deg2rad(ang)
    y = 1e-3 * np.cos(2 * th + 0.4) + 0.02 * rng.standard_normal(n) + 1e-6 * t
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "big.parquet")
        pd.DataFrame({"time_s": t, "angle_deg": ang, "signal": y}).to_parquet(path, row_group_size=1 << 20)
        del t, ang, th, y
        t_read, scan = _clock(lambda: read_scan(path, time="time_s", angle="angle_deg", signal="signal"))
        t_fit, fit = _clock(lambda: fit_scan(scan))
        t_an, _ = _clock(lambda: analyse(scan, rng=1))
        est = fit.harmonic(2)
        n_turns = est.turns.shape[0]
        t_boot, lim = _clock(lambda: amplitude_limit(est, method="bootstrap", rng=1, progress=False))
        b_pw, _ = politis_white_block_length(est.turns)
        t_pw, lim_pw = _clock(lambda: amplitude_limit(est, method="bootstrap", rng=1, progress=False,
                                                      block_length=b_pw))
        per_method = {m: _clock(lambda m=m: amplitude_limit(est, method=m))[0]
                      for m in ("feldman-cousins", "neyman", "bayes")}
        scan = fit = None  # free the 10^7-row scan before the temporary file goes
    tag = f"{n:.3g} readings, {n_turns} turns"
    rows.append((f"read_scan Parquet ({tag})", t_read, None))
    rows.append((f"fit_scan, default errors ({tag})", t_fit, None))
    rows.append((f"analyse: fit + 4 limits + significance ({tag})", t_an, None))
    rows.append(("   ratio (read + analyse) / (read + fit)  [target ≤ 3]", (t_read + t_an) / (t_read + t_fit), "x"))
    rows.append(("   ratio analyse / (read + fit)", t_an / (t_read + t_fit), "x"))
    for m, tm in per_method.items():
        rows.append((f"   {m} limit on the fit (belts cached by analyse)", tm, None))
    rows.append((f"bootstrap limit, default block {lim.block_length} (≤ {MAX_BLOCKS} blocks), 10^4 replicates",
                 t_boot, None))
    rows.append((f"bootstrap limit, Politis–White block {b_pw} alone, 10^4 replicates", t_pw, t_pw / t_boot))
    return lim, lim_pw


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="10^3 replicates of a 10^3-turn series; 10^6 readings")
    ap.add_argument("--readings", type=float, default=None, help="readings of the scale case (default 1e7)")
    ap.add_argument("--no-scale", action="store_true", help="skip the analyse-at-scale case")
    args = ap.parse_args(argv)
    n, reps = (1000, 1000) if args.quick else (10_000, 10_000)
    rows = []
    bench_unified(rows)
    lim = bench_bootstrap(rows, n, reps)
    scale = None
    if not args.no_scale:
        scale = bench_scale(rows, args.readings or (1e6 if args.quick else 1e7))
    width = max(len(r[0]) for r in rows)
    print(f"{'case':<{width}}  {'time':>11}  {'ratio vs nullfit':>16}")
    for label, t, ratio in rows:
        shown = (f"{t * 1e6:9.2f} µs" if t < 1e-3 else f"{t * 1e3:9.2f} ms" if t < 1 else f"{t:9.3f} s ")
        if ratio == "x":
            print(f"{label:<{width}}  {t:10.2f}×")
            continue
        print(f"{label:<{width}}  {shown:>11}  {'' if ratio is None else f'{ratio:14.1f}×':>16}")
    print(f"\nbootstrap limit: upper = {lim.upper:.4g} (amplitude), block length {lim.block_length}, seed {lim.seed}")
    if scale is not None:
        a, b = scale
        print(f"scale case: bootstrap upper {a.upper:.4g} (block {a.block_length}) vs {b.upper:.4g} (block "
              f"{b.block_length}); the capped block count changes the limit by {abs(a.upper / b.upper - 1):.2%}")


if __name__ == "__main__":
    main()
