"""Speed and memory of the scan fit, side by side with the obvious alternatives.

Run from the repository root::

    python benchmarks/bench_fit.py                      # 1e5, 1e6, 1e7 samples
    python benchmarks/bench_fit.py --sizes 1e5,1e6      # quicker
    python benchmarks/bench_fit.py --per-turn 16        # 16 readings per turn

For every size it prints

1. ``drift="poly:3"``, 1θ + 2θ, HAC errors: ``nullfit.fit_scan`` against statsmodels
   ``OLS(y, X).fit(cov_type="HAC", cov_kwds={"maxlags": L, "use_correction": True})`` on the
   same dense design (built beforehand; its construction time is shown separately and *not*
   charged to statsmodels), with the largest relative differences of coefficients and
   standard errors at the same lag ``L``;
2. the default fit (per-turn drift, turn errors) and ``nullfit.demodulate`` against a
   per-turn Python loop of ``numpy.linalg.lstsq`` computing the same numbers (coefficients,
   per-turn σ, their mean and scatter covariance);
3. the peak memory (``tracemalloc``) of the default fit, as a multiple of the input arrays
   (time, angle, signal).

The simulated scan is invented: a table turning at one turn per ``--per-turn`` readings,
a 2θ signal, a slow drift and white noise, all in float64.  The 1e7 case needs several GB for
statsmodels' dense design; it is run once (no repeats).  Timings are wall-clock on whatever
machine runs this; shared machines make them noisy, ratios are what matters.
"""

from __future__ import annotations

import argparse
import gc
import time
import tracemalloc
import warnings

import numpy as np


def make_scan(n: int, per_turn: int, seed: int = 1):
    from nullfit.reading.scan import Scan

    rng = np.random.default_rng(seed)
    t = np.arange(n) * 0.25
    ang = np.mod(np.arange(n) * (360.0 / per_turn) + 0.5 * 360.0 / per_turn, 360.0)
    th = np.deg2rad(ang)
    y = (0.01 * np.cos(2 * th) - 0.004 * np.sin(2 * th) + 0.002 * np.cos(th) + 1e-5 * t
         + 1e-3 * np.sin(t / 5000.0) + 0.01 * rng.normal(size=n))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return Scan.from_arrays(t, ang, y, angle_unit="deg")


def timed(fn, repeat: int):
    best, out = np.inf, None
    for _ in range(repeat):
        gc.collect()
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def loop_per_turn(scan, harmonics=(1, 2)):
    """The obvious implementation: one numpy.linalg.lstsq per complete turn."""
    turn = scan.turn
    starts = np.flatnonzero(np.r_[True, turn[1:] != turn[:-1]])
    stops = np.r_[starts[1:], turn.size]
    rows = []
    for a, b in zip(starts, stops):
        if not scan.turn_complete[turn[a]]:
            continue
        t, th, y = scan.time[a:b], scan.angle[a:b], scan.signal[a:b]
        cols = [np.ones(b - a), t - 0.5 * (t[0] + t[-1])]
        for k in harmonics:
            cols += [np.cos(k * th), np.sin(k * th)]
        X = np.column_stack(cols)
        beta, *_ = np.linalg.lstsq(X, y, rcond=None)
        r = y - X @ beta
        cov = (r @ r) / (b - a - X.shape[1]) * np.linalg.inv(X.T @ X)
        rows.append(np.r_[beta[2:], np.sqrt(np.diag(cov)[2:])])
    return np.array(rows)


def rel(a, b):
    """Largest difference relative to the scale of each column (a coefficient that happens to be
    ~1e-8 of its column's spread would otherwise dominate a plain relative difference)."""
    a, b = np.atleast_2d(np.asarray(a, float)), np.atleast_2d(np.asarray(b, float))
    return float(np.max(np.abs(a - b).max(axis=0) / np.maximum(np.abs(b).max(axis=0), 1e-300)))


def bench_size(n: int, per_turn: int, repeat: int, with_statsmodels: bool):
    from nullfit.fitting.dense import dense_design
    from nullfit.fitting.fit import fit_scan
    from nullfit.fitting.demodulate import demodulate

    print(f"\n=== n = {n:.0e} samples, {per_turn} readings per turn ===")
    scan = make_scan(n, per_turn)
    input_bytes = scan.time.nbytes + scan.angle.nbytes + scan.signal.nbytes
    print(f"turns: {scan.n_turns} ({scan.n_complete_turns} complete); input arrays {input_bytes / 2**20:.0f} MiB")

    # ---- 1. poly:3 + HAC vs statsmodels on the dense design
    t_nf, f = timed(lambda: fit_scan(scan, drift="poly:3", errors="hac"), repeat)
    L = f.hac_lags
    print(f"[poly:3, HAC, L={L}] nullfit.fit_scan            {t_nf:8.3f} s")
    if with_statsmodels:
        import statsmodels.api as sm

        t0 = time.perf_counter()
        X, names, rows = dense_design(scan, drift="poly:3", max_cells=10 ** 9)
        y = scan.signal[rows]
        t_design = time.perf_counter() - t0
        t_sm, r = timed(lambda: sm.OLS(y, X).fit(cov_type="HAC", cov_kwds={"maxlags": L, "use_correction": True}),
                        1 if n >= 5_000_000 else repeat)
        idx = [names.index(p) for p in f.param_names]
        print(f"[poly:3, HAC, L={L}] statsmodels OLS+HAC        {t_sm:8.3f} s   (+{t_design:.3f} s to build "
              f"the dense {X.shape[0]}x{X.shape[1]} design)")
        print(f"    speed-up {t_sm / t_nf:6.1f}x;  max rel diff: coef {rel(f.coef, r.params[idx]):.1e}, "
              f"SE {rel(np.sqrt(np.diag(f.cov)), r.bse[idx]):.1e}")
        del X, y, r
        gc.collect()

    # ---- 2. default fit and demodulate vs a per-turn loop
    t_fit, g = timed(lambda: fit_scan(scan), repeat)
    t_dem, df = timed(lambda: demodulate(scan), repeat)
    t_loop, ref = timed(lambda: loop_per_turn(scan), 1 if n >= 5_000_000 else repeat)
    mine = df[["c1", "s1", "c2", "s2", "sigma_c1", "sigma_s1", "sigma_c2", "sigma_s2"]].to_numpy()
    b = ref[:, :4]
    print(f"[per-turn, turns] nullfit.fit_scan (default)     {t_fit:8.3f} s   speed-up {t_loop / t_fit:6.1f}x")
    print(f"[per-turn]        nullfit.demodulate             {t_dem:8.3f} s   speed-up {t_loop / t_dem:6.1f}x")
    print(f"[per-turn]        Python loop of numpy lstsq     {t_loop:8.3f} s")
    dmean = float(np.max(np.abs(g.coef - b.mean(axis=0)) / np.sqrt(np.diag(g.cov))))
    print(f"    max rel diff: per-turn coef+σ {rel(mine, ref):.1e}; fit cov "
          f"{rel(np.diag(g.cov), np.diag(np.cov(b, rowvar=False)) / b.shape[0]):.1e}; "
          f"fit mean differs by {dmean:.1e} σ")

    # ---- 3. peak memory of the default fit
    gc.collect()
    tracemalloc.start()
    fit_scan(scan)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print(f"[memory] default fit peak {peak / 2**20:8.1f} MiB = {peak / input_bytes:.2f}x the input arrays")
    return dict(n=n, poly_hac=t_nf, default=t_fit, demod=t_dem, loop=t_loop, peak_ratio=peak / input_bytes)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="1e5,1e6,1e7")
    ap.add_argument("--per-turn", type=int, default=64)
    ap.add_argument("--repeat", type=int, default=3, help="best of N for sizes below 5e6")
    ap.add_argument("--no-statsmodels", action="store_true")
    args = ap.parse_args(argv)
    import numpy
    import statsmodels

    print(f"numpy {numpy.__version__}, statsmodels {statsmodels.__version__}")
    for s in args.sizes.split(","):
        bench_size(int(float(s)), args.per_turn, args.repeat, not args.no_statsmodels)


if __name__ == "__main__":
    main()
