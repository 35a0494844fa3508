"""The joint least-squares fit (drift projected out) with OLS or HAC (Newey–West) covariance."""

from __future__ import annotations

import numpy as np

from ..core.errors import AnalysisError, where
from .design import harmonic_names, spline_design_sparse, spline_intervals, spline_knots, typical_turn_period
from .engine import TurnEngine
from .hac import BartlettMeat, newey_west_lags
from .linalg import banded_solve, solve_spd, stacked_inverse


def _minus_combination(y: np.ndarray, coef: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """``y − Σ_j coef_j rows_j`` (a new array)."""
    out = y.copy()
    for c, r in zip(coef, rows):
        out -= c * r
    return out


def fit_joint(scan, ks, spec, aux, complete_only, kind, hac_lags):
    """Joint least squares (drift projected out), then OLS or HAC covariance.

    Pass 1 accumulates the normal equations chunk by chunk and projects the drift block out
    (per turn, dense Legendre, or banded B-spline).  Pass 2 forms the residuals and the scores
    ``x̃_t e_t`` of the harmonic/aux columns after partialling out the drift; by
    Frisch–Waugh–Lovell their sandwich equals the harmonic block of the full-design sandwich.
    """
    mode = spec.kind  # per-turn | poly | none | spline
    if mode == "per-turn":
        eng = TurnEngine(scan, ks, degree=spec.degree, drift_mode="turn", aux=aux, complete_only=complete_only,
                         min_samples=spec.degree + 2)
    elif mode in ("poly", "none"):
        eng = TurnEngine(scan, ks, degree=spec.degree if mode == "poly" else 0, drift_mode="global", aux=aux,
                         complete_only=complete_only)
    else:
        eng = TurnEngine(scan, ks, degree=None, aux=aux, complete_only=complete_only)
    eng.cache_harmonics()  # two passes over the data: keep cos kθ, sin kθ if they fit the budget
    nh, na, nd = eng.n_harm, eng.n_aux, eng.n_drift
    pz = nh + na
    zs = slice(nd, nd + pz)

    # -------- pass 1: normal equations, drift projected out
    if mode == "per-turn":
        G = eng.grams()
        Gdd_inv, ok = stacked_inverse(G[:, :nd, :nd])
        if not ok.all():
            eng.drop_turns(~ok, "turns whose drift terms are singular")
            G, Gdd_inv = G[ok], Gdd_inv[ok]
        Pi = Gdd_inv @ G[:, :nd, nd:]  # (N, nd, pz+1): drift coefficients of each z column and y, per turn
        S = (G[:, nd:, nd:] - G[:, nd:, :nd] @ Pi).sum(axis=0)
        z_sum = G[:, 0, zs].sum(axis=0)
        z_sq = np.einsum("sii->i", G[:, zs, zs])
        n_drift_params = nd * eng.seg.n
    elif mode == "spline":
        n = eng.n_rows
        period = typical_turn_period(scan.time[eng.seg.start], eng.t_lo, eng.t_hi, n)
        knots = spline_knots(spline_intervals(eng.t_hi - eng.t_lo, period, spec.knot_turns))
        nb = knots.size - 4
        DD = None
        DZ = np.zeros((nb, pz + 1))
        ZZ = np.zeros((pz + 1, pz + 1))
        for ch in eng.chunks():
            X = eng.columns(ch, y_center="global")
            B = spline_design_sparse(eng.scaled_time(ch), knots)
            DD = (B.T @ B) if DD is None else DD + B.T @ B
            DZ += np.asarray(B.T @ X.T)
            ZZ += X @ X.T
        Pi = banded_solve(DD, DZ, scan.source)
        S = ZZ - DZ.T @ Pi
        z_sum = DZ[:, :pz].sum(axis=0)  # the B-splines sum to one
        z_sq = np.diag(ZZ)[:pz]
        n_drift_params = nb
    else:
        GG = np.zeros((eng.q, eng.q))
        for ch in eng.chunks():
            X = eng.columns(ch, y_center="global")
            GG += X @ X.T
        Pi, _, _ = solve_spd(GG[:nd, :nd], GG[:nd, nd:])
        S = GG[nd:, nd:] - GG[nd:, :nd] @ Pi
        z_sum = GG[0, zs]
        z_sq = np.diag(GG)[zs]
        n_drift_params = nd
    n = eng.n_rows
    Q, r = S[:pz, :pz], S[:pz, pz]
    try:
        beta, Qinv, cond = solve_spd(Q, r)
    except np.linalg.LinAlgError:
        raise AnalysisError(f"{where(scan.source)}: the design is singular (a harmonic or aux column is fully "
                        "absorbed by the drift model)") from None
    n_params = n_drift_params + pz
    dof = n - n_params
    if dof <= 0:
        raise AnalysisError(f"{where(scan.source)}: {n} readings cannot fit {n_params} parameters")
    vif = (z_sq - z_sum ** 2 / n) * np.diag(Qinv)

    # -------- pass 2: residuals and scores
    L = None
    meat = None
    if kind == "hac":
        L = newey_west_lags(n) if hac_lags is None else hac_lags
        meat = BartlettMeat(pz, L)
    gamma = Pi[..., pz] - Pi[..., :pz] @ beta  # drift coefficients given beta (per turn or global)
    resid = np.full(scan.n_samples, np.nan)
    rss = 0.0
    # (level-1/level-2 products are written as numpy loops over the few columns: tiny BLAS
    # calls are slow when a multithreaded BLAS competes for busy cores)
    for ch in eng.chunks():
        xt = None
        if mode == "per-turn":
            X = eng.columns(ch)
            e = _minus_combination(X[-1], beta, X[zs])
            g_rows = gamma[ch.i0:ch.i1][ch.sidx]
            for d in range(nd):
                e -= X[d] * g_rows[:, d]
            if meat is not None:
                P_rows = Pi[ch.i0:ch.i1, :, :pz][ch.sidx]  # (m, nd, pz)
                xt = X[zs].copy()
                for d in range(nd):
                    xt -= X[d] * P_rows[:, d, :].T
        elif mode == "spline":
            X = eng.columns(ch, y_center="global")
            B = spline_design_sparse(eng.scaled_time(ch), knots)
            e = _minus_combination(X[pz], beta, X[:pz]) - B @ gamma
            if meat is not None:
                xt = X[:pz] - np.asarray(B @ Pi[:, :pz]).T
        else:
            X = eng.columns(ch, y_center="global")
            e = _minus_combination(X[-1], np.concatenate([gamma, beta]), X[:-1])
            if meat is not None:
                xt = np.empty((pz, X.shape[1]))
                for j in range(pz):
                    xt[j] = _minus_combination(X[nd + j], Pi[:, j], X[:nd])
        resid[ch.a:ch.b] = e
        rss += float(np.einsum("i,i->", e, e))
        if meat is not None:
            xt *= e
            meat.add(xt, rows_first=False)
    if kind == "hac":
        cov_all = Qinv @ meat.finish() @ Qinv * (n / dof)
    else:
        cov_all = Qinv * (rss / dof)
    cov_all = 0.5 * (cov_all + cov_all.T)
    names = list(harmonic_names(ks)) + list(eng.aux_names)
    return dict(eng=eng, coef=beta[:nh], cov=cov_all[:nh, :nh], cov_dof=None,
                aux_coef=None if not na else beta[nh:] / eng.aux_scale,
                aux_cov=None if not na else cov_all[nh:, nh:] / np.outer(eng.aux_scale, eng.aux_scale),
                chi2=None, chi2_n=None, rss=rss, residuals=resid, per_turn=None,
                vif=dict(zip(names, map(float, vif))), cond=cond, n_params=n_params, hac_lags=L, dof=dof)
