"""Timings of the amplitude-limit machinery, side by side with the obvious alternative.

Run:  python benchmarks/bench_limits.py  [--quick]

1. Unified (Feldman–Cousins) limit: first call (belt tiles built) vs later calls (belt cached),
   through the public ``amplitude_limit`` and through the vectorised inner inversion.
2. Block bootstrap: 10^4 replicates of a 10^4-turn per-turn coefficient series (invented AR(1)
   data): nullfit's cumulative-sum block sums vs arch's ``CircularBlockBootstrap.apply``
   refitting the mean pair and its amplitude on every resampled series.

Prints a table; writes nothing.  Not a test: no assertion on wall time.
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


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="10^3 replicates of a 10^3-turn series")
    args = ap.parse_args(argv)
    n, reps = (1000, 1000) if args.quick else (10_000, 10_000)
    rows = []
    bench_unified(rows)
    lim = bench_bootstrap(rows, n, reps)
    width = max(len(r[0]) for r in rows)
    print(f"{'case':<{width}}  {'time':>11}  {'ratio vs nullfit':>16}")
    for label, t, ratio in rows:
        shown = (f"{t * 1e6:9.2f} µs" if t < 1e-3 else f"{t * 1e3:9.2f} ms" if t < 1 else f"{t:9.3f} s ")
        print(f"{label:<{width}}  {shown:>11}  {'' if ratio is None else f'{ratio:14.1f}×':>16}")
    print(f"\nbootstrap limit: upper = {lim.upper:.4g} (amplitude), block length {lim.block_length}, seed {lim.seed}")


if __name__ == "__main__":
    main()
