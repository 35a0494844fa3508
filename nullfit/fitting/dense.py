"""The dense design matrix of a *small* scan, for cross-checks against reference implementations.

The fit never builds this matrix (per-turn drift would be thousands of columns); tests compare
the fit with statsmodels on it.
"""

from __future__ import annotations

import numpy as np

from .design import (check_harmonics, harmonic_columns, harmonic_names, legendre_columns, parse_drift, scale_time,
                     spline_columns, spline_intervals, spline_knots, typical_turn_period)
from .segments import local_time, turn_segments


def dense_design(scan, *, harmonics=(1, 2), drift="per-turn", degree: int = 3, knot_turns: float = 2.0,
                 aux=None, complete_only: bool = True, max_cells: int = 20_000_000):
    """The full dense design ``X`` (drift | harmonics | aux) of a *small* scan, for cross-checks.

    Returns ``(X, names, rows)`` where ``rows`` are the indices of the scan rows used.  Per-turn
    drift becomes explicit per-turn columns here — exactly what the fit avoids at scale.
    """
    ks = check_harmonics(harmonics)
    spec = parse_drift(drift, degree=degree, knot_turns=knot_turns)
    seg = turn_segments(scan)
    if complete_only:
        seg = seg.take(seg.complete)
    rows = np.concatenate([np.arange(a, b) for a, b in zip(seg.start, seg.stop)]) if seg.n else np.zeros(0, int)
    n_drift = seg.n * (spec.degree + 1) if spec.kind == "per-turn" else 64
    if rows.size * (len(ks) * 2 + len(aux or ()) + n_drift) > max_cells:
        raise ValueError(f"a dense design of {rows.size} rows is too large; it is meant for small cross-checks")
    t = scan.time[rows]
    cols, names = [], []
    if spec.kind == "per-turn":
        seg_idx = np.repeat(np.arange(seg.n), seg.length)
        t_first, t_last = scan.time[seg.start], scan.time[seg.stop - 1]
        tau = local_time(t, seg_idx, 0.5 * (t_first + t_last), np.maximum(0.5 * (t_last - t_first), 1e-300))
        p = legendre_columns(tau, spec.degree)
        for i in range(seg.n):
            m = seg_idx == i
            for d in range(spec.degree + 1):
                col = np.zeros(rows.size)
                col[m] = p[m, d]
                cols.append(col)
                names.append(f"turn{seg.turn[i]}_P{d}")
    else:
        u = scale_time(t, t.min(), t.max())
        if spec.kind == "poly":
            cols += list(legendre_columns(u, spec.degree).T)
            names += [f"P{d}" for d in range(spec.degree + 1)]
        elif spec.kind == "spline":
            period = typical_turn_period(scan.time[seg.start], t.min(), t.max(), rows.size)
            knots = spline_knots(spline_intervals(t.max() - t.min(), period, spec.knot_turns))
            b = spline_columns(u, knots)
            cols += list(b.T)
            names += [f"B{j}" for j in range(b.shape[1])]
        else:
            cols.append(np.ones(rows.size))
            names.append("offset")
    h = harmonic_columns(scan.angle[rows], ks)
    cols += list(h.T)
    names += list(harmonic_names(ks))
    for name in aux or ():
        cols.append(np.asarray(scan.aux[name], dtype=float)[rows])
        names.append(name)
    return np.column_stack(cols), tuple(names), rows
