"""Speed and memory of the scan fit, side by side with the obvious alternatives.

Run from the repository root::

    python benchmarks/bench_fit.py                      # 1e5, 1e6, 1e7 samples
    python benchmarks/bench_fit.py --sizes 1e5,1e6      # quicker
    python benchmarks/bench_fit.py --per-turn 16        # 16 readings per turn

For every size it prints

0. the floor: ``numpy.cos`` and ``numpy.sin`` of every reading's angle (any harmonic fit must
   compute them), and the default fit as a multiple of it — for the log with 72 readings in
   every turn, and for one with 72.4 readings per turn on average (turns of 72 and 73
   readings, as a continuously sampled log whose turn period is not a whole number of
   sampling intervals);
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

The summary at the end lists, per size, the default fit over the floor and the speed-ups over
the per-turn loop and statsmodels.

The simulated scan is invented: a table turning at one turn per ``--per-turn`` readings,
a 2θ signal, a slow drift and white noise, all in float64.  The 1e7 case needs several GB for
statsmodels' dense design; it is run once (no repeats), as is the per-turn loop (seconds a run)
while the fit and ``demodulate`` take the median of at least five runs.  Timings are wall-clock on whatever
machine runs this; shared machines make them noisy, ratios are what matters: the steps of
one size run interleaved, ``--repeat`` times, and the medians are shown (the minimum in brackets).
"""

from __future__ import annotations

import argparse
import gc
import time
import tracemalloc
import warnings

import numpy as np


def make_scan(n: int, per_turn: float, seed: int = 1):
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
    """Median wall time of ``repeat`` calls (and the last result)."""
    ts, out = [], None
    for _ in range(repeat):
        gc.collect()
        t0 = time.perf_counter()
        out = fn()
        ts.append(time.perf_counter() - t0)
    return float(np.median(ts)), out


def interleaved(fns: dict, repeat: int) -> dict:
    """``{name: (median, min)}`` wall times of the functions, run in turn ``repeat`` times (so
    that a busy spell of a shared machine hits all of them alike)."""
    ts = {k: [] for k in fns}
    for _ in range(repeat):
        for k, fn in fns.items():
            gc.collect()
            t0 = time.perf_counter()
            fn()
            ts[k].append(time.perf_counter() - t0)
    return {k: (float(np.median(v)), float(np.min(v))) for k, v in ts.items()}


def trig_floor(scan):
    """What any harmonic fit computes: cos θ and sin θ of every reading."""
    return np.cos(scan.angle), np.sin(scan.angle)


def floor_ratios(n: int, per_turn: float, repeat: int):
    from nullfit.fitting.fit import fit_scan

    scan = make_scan(n, per_turn)
    r = interleaved({"floor": lambda: trig_floor(scan), "fit": lambda: fit_scan(scan)}, repeat)
    (tf, tf_min), (tt, tt_min) = r["fit"], r["floor"]
    print(f"[floor, {per_turn:g} readings/turn] cos θ + sin θ of every reading {tt:8.3f} s  [{tt_min:.3f}]")
    print(f"[floor, {per_turn:g} readings/turn] nullfit.fit_scan (default)     {tf:8.3f} s  [{tf_min:.3f}]"
          f"   = {tf / tt:5.2f}x the floor  [{tf_min / tt_min:.2f}x of the minima]")
    return tf / tt


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
    ratio_floor = floor_ratios(n, per_turn, max(repeat, 5))
    ratio_floor_var = floor_ratios(n, per_turn + 0.4, max(repeat, 5))
    scan = make_scan(n, per_turn)
    input_bytes = scan.time.nbytes + scan.angle.nbytes + scan.signal.nbytes
    print(f"turns: {scan.n_turns} ({scan.n_complete_turns} complete); input arrays {input_bytes / 2**20:.0f} MiB")

    # ---- 1. poly:3 + HAC vs statsmodels on the dense design
    sm_ratio = None
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
        sm_ratio = t_sm / t_nf
        print(f"    speed-up {t_sm / t_nf:6.1f}x;  max rel diff: coef {rel(f.coef, r.params[idx]):.1e}, "
              f"SE {rel(np.sqrt(np.diag(f.cov)), r.bse[idx]):.1e}")
        del X, y, r
        gc.collect()

    # ---- 2. default fit and demodulate vs a per-turn loop
    g, df, ref = fit_scan(scan), demodulate(scan), loop_per_turn(scan)
    # the loop takes seconds a run at 1e7: once there; the fit and demodulate, medians of at least 5
    r = interleaved({"fit": lambda: fit_scan(scan), "demod": lambda: demodulate(scan)}, max(repeat, 5))
    r.update(interleaved({"loop": lambda: loop_per_turn(scan)}, 1 if n >= 5_000_000 else repeat))
    t_fit, t_dem, t_loop = r["fit"][0], r["demod"][0], r["loop"][0]
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
    return dict(n=n, poly_hac=t_nf, default=t_fit, demod=t_dem, loop=t_loop, peak_ratio=peak / input_bytes,
                floor_ratio=ratio_floor, floor_ratio_uneven=ratio_floor_var, sm_ratio=sm_ratio)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="1e5,1e6,1e7")
    ap.add_argument("--per-turn", type=int, default=72)
    ap.add_argument("--repeat", type=int, default=5, help="median of N for sizes below 5e6 (the floor: always)")
    ap.add_argument("--no-statsmodels", action="store_true")
    args = ap.parse_args(argv)
    import numpy
    import statsmodels

    print(f"numpy {numpy.__version__}, statsmodels {statsmodels.__version__}")
    rows = [bench_size(int(float(s)), args.per_turn, args.repeat, not args.no_statsmodels)
            for s in args.sizes.split(",")]
    k = args.per_turn
    print(f"\nsummary (medians): n, default fit / floor ({k} per turn; {k + 0.4:g} per turn), loop / default fit, "
          "statsmodels HAC / nullfit HAC")
    for r in rows:
        sm = f"{r['sm_ratio']:.1f}x" if r.get("sm_ratio") else "-"
        print(f"  {r['n']:.0e}: {r['floor_ratio']:.2f}x; {r['floor_ratio_uneven']:.2f}x   "
              f"{r['loop'] / r['default']:.1f}x   {sm}")


if __name__ == "__main__":
    main()
