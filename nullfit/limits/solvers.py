"""Vectorised scalar solvers used by the limit constructions.

Every routine works on flat arrays of independent problems at once.  The callable receives
the trial points *and* the indices of the problems they belong to, ``f(x, idx)``, so that it
can pick its own parameters (``theta[idx]`` ...) and so that converged problems need not be
evaluated again.
"""

from __future__ import annotations

import numpy as np

_INV_PHI = (np.sqrt(5.0) - 1.0) / 2.0


def find_root(f, lo, hi, *, xtol: float = 1e-12, maxiter: int = 200):
    """Roots of ``f(x, idx) = 0`` inside brackets ``[lo, hi]`` (one problem per element).

    Chandrupatla's method (inverse quadratic interpolation guarded by bisection; T. R.
    Chandrupatla, Adv. Eng. Softw. 28, 145 (1997)), vectorised: only unconverged problems
    are evaluated.  Where ``f(lo)`` and ``f(hi)`` have the same sign the endpoint with the
    smaller ``|f|`` is returned (callers use this for the clipped cases they know about).
    """
    a = np.array(lo, dtype=float).ravel()
    b = np.array(hi, dtype=float).ravel()
    a, b = np.broadcast_arrays(a, b)
    x1, x2 = a.copy(), b.copy()
    n = x1.size
    idx = np.arange(n)
    f1 = np.asarray(f(x1, idx), dtype=float).copy()
    f2 = np.asarray(f(x2, idx), dtype=float).copy()
    out = np.where(np.abs(f1) <= np.abs(f2), x1, x2)
    active = (np.sign(f1) * np.sign(f2) < 0) & (x1 != x2)
    x3, f3 = x2.copy(), f2.copy()
    t = np.full(n, 0.5)
    for _ in range(maxiter):
        ids = np.flatnonzero(active)
        if ids.size == 0:
            break
        a1, a2, a3 = x1[ids], x2[ids], x3[ids]
        g1, g2, g3 = f1[ids], f2[ids], f3[ids]
        xt = a1 + t[ids] * (a2 - a1)
        ft = np.asarray(f(xt, ids), dtype=float)
        same = np.sign(ft) == np.sign(g1)
        a3, g3 = np.where(same, a1, a2), np.where(same, g1, g2)
        a2, g2 = np.where(same, a2, a1), np.where(same, g2, g1)
        a1, g1 = xt, ft
        best = np.abs(g1) < np.abs(g2)
        xm = np.where(best, a1, a2)
        fm = np.where(best, g1, g2)
        tol = 4e-16 * np.abs(xm) + xtol
        with np.errstate(divide="ignore", invalid="ignore"):
            tl = tol / np.abs(a2 - a1)
            done = (tl > 0.5) | (fm == 0) | ~np.isfinite(tl)
            xi = (a1 - a2) / (a3 - a2)
            ph = (g1 - g2) / (g3 - g2)
            iqi = (1.0 - np.sqrt(np.abs(1.0 - xi)) < ph) & (ph < np.sqrt(np.abs(xi)))
            alpha = (a3 - a1) / (a2 - a1)
            tn = g1 / (g1 - g2) * g3 / (g3 - g2) - alpha * g1 / (g3 - g1) * g2 / (g2 - g3)
        tn = np.where(iqi & np.isfinite(tn), tn, 0.5)
        tl = np.where(np.isfinite(tl), tl, 0.5)
        t[ids] = np.clip(tn, np.minimum(tl, 0.5), np.maximum(1.0 - tl, 0.5))
        x1[ids], x2[ids], x3[ids] = a1, a2, a3
        f1[ids], f2[ids], f3[ids] = g1, g2, g3
        out[ids] = xm
        active[ids[done]] = False
    return out


def golden_max(f, lo, hi, *, iters: int = 56):
    """Maximiser of a unimodal ``f(x, idx)`` on ``[lo, hi]`` for every element (golden section)."""
    a = np.array(lo, dtype=float).ravel().copy()
    b = np.array(hi, dtype=float).ravel().copy()
    a, b = np.broadcast_arrays(a, b)
    a, b = a.copy(), b.copy()
    idx = np.arange(a.size)
    c = b - _INV_PHI * (b - a)
    d = a + _INV_PHI * (b - a)
    fc, fd = np.asarray(f(c, idx), float), np.asarray(f(d, idx), float)
    for _ in range(iters):
        left = fc >= fd  # maximum in [a, d]
        b = np.where(left, d, b)
        a = np.where(left, a, c)
        new_c = np.where(left, b - _INV_PHI * (b - a), d)
        new_d = np.where(left, c, a + _INV_PHI * (b - a))
        x_new = np.where(left, new_c, new_d)
        f_new = np.asarray(f(x_new, idx), float)
        fc, fd = np.where(left, f_new, fd), np.where(left, fc, f_new)
        c, d = new_c, new_d
    return np.where(fc >= fd, c, d)
