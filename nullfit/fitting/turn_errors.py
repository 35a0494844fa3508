"""Turn-scatter errors: the mean of the per-turn coefficients and its covariance from their scatter."""

from __future__ import annotations

import numpy as np

from ..core.errors import AnalysisError, where
from .engine import TurnEngine
from .linalg import solve_spd, stacked_inverse


def fit_turn_scatter(scan, ks, spec, aux, complete_only, block_turns):
    """Turn (or block) errors: mean of the per-turn coefficients and their scatter.

    Without aux terms, turn ``i`` gives ``b_i`` (:func:`nullfit.demodulate`); the estimate is
    ``b̄ = Σ b_i / N`` and each turn's contribution to ``b̄ − β`` is ``z_i = (b_i − b̄)/N``.

    With aux terms (one global coefficient vector δ, per-turn harmonics), after projecting the
    per-turn drift out of every column (Schur complements ``Q_i`` of the per-turn normal
    matrices): ``b_i = b⁰_i − P_i δ̂`` with ``b⁰_i = Q_hh⁻¹ r_h`` and ``P_i = Q_hh⁻¹ Q_ha``;
    ``δ̂ = (Σ M_i)⁻¹ Σ g⁰_i`` with ``M_i = Q_aa − Q_ah P_i`` and ``g⁰_i = r_a − Q_ah b⁰_i``.
    Linearising, ``b̄ − β = Σ_i [(b_i − β)/N − P̄ (Σ M)⁻¹ g_i]`` with ``g_i = g⁰_i − M_i δ̂``, so
    turn ``i`` contributes ``z_i = (b_i − b̄)/N − P̄ (ΣM)⁻¹ g_i`` (and ``(ΣM)⁻¹ g_i`` to δ̂).

    Blocks of ``B`` consecutive turns sum their ``z_i`` into ``Z_b``; the covariance is
    ``n_b/(n_b − 1) Σ_b Z_b Z_bᵀ`` — for equal blocks without aux exactly the sample covariance
    of the block means divided by ``n_b`` (``B = 1``: of the turns, divided by ``N``).
    """
    nd = spec.degree + 1
    nh = 2 * len(ks)
    eng = TurnEngine(scan, ks, degree=spec.degree, aux=aux, complete_only=complete_only, min_samples=nd + nh + 1)
    na = eng.n_aux
    delta = None
    infl_extra = None
    if na:
        G = eng.grams()
        Gdd_inv, ok_d = stacked_inverse(G[:, :nd, :nd])
        Pi = Gdd_inv @ G[:, :nd, nd:]
        S = G[:, nd:, nd:] - G[:, nd:, :nd] @ Pi  # per-turn Schur complement over [H, A, y]
        Q_hh_inv, ok_h = stacked_inverse(S[:, :nh, :nh])
        ok = ok_d & ok_h
        if not ok.all():
            eng.drop_turns(~ok, "turns whose per-turn system is singular")
            S, Q_hh_inv = S[ok], Q_hh_inv[ok]
        Q_ha, Q_aa = S[:, :nh, nh:nh + na], S[:, nh:nh + na, nh:nh + na]
        r_h, r_a = S[:, :nh, -1], S[:, nh:nh + na, -1]
        b0 = np.einsum("sij,sj->si", Q_hh_inv, r_h)
        P = Q_hh_inv @ Q_ha  # (N, nh, na)
        Mi = Q_aa - np.swapaxes(Q_ha, 1, 2) @ P
        g0 = r_a - np.einsum("sji,sj->si", Q_ha, b0)
        Msum = Mi.sum(axis=0)
        delta, Minv, _ = solve_spd(Msum, g0.sum(axis=0))
        g = g0 - np.einsum("sij,j->si", Mi, delta)
        infl_extra = (P.mean(axis=0), Minv, g)
    pt = eng.demodulate(delta=delta)
    if not pt.ok.all():
        bad = ~pt.ok
        if na:  # cannot happen: the same turns were screened above
            raise AnalysisError(f"{where(scan.source)}: per-turn systems became singular after the aux correction")
        eng.drop_turns(bad, "turns whose per-turn system is singular")
        pt = type(pt)(eng, pt.coef[~bad], pt.cov[~bad], pt.rss[~bad], pt.ok[~bad], delta)
    N = eng.seg.n
    b = pt.harm
    mean = b.mean(axis=0)
    z = (b - mean) / N
    if na:
        Pbar, Minv, g = infl_extra
        zd = g @ Minv.T  # influence of each turn on the aux coefficients
        z = np.concatenate([z - zd @ Pbar.T, zd], axis=1)
    n_blocks = -(-N // block_turns)
    if n_blocks < 2:
        left = f" (left out: {eng.excluded_text()})" if eng.excluded else ""
        raise AnalysisError(f"{where(scan.source)}: {N} usable turn(s) make {n_blocks} block(s); the scatter needs "
                        f"at least 2{left}")
    blk = np.arange(N) // block_turns
    Z = np.zeros((n_blocks, z.shape[1]))
    np.add.at(Z, blk, z)
    cov_all = n_blocks / (n_blocks - 1) * (Z.T @ Z)
    # χ² of per-turn coefficients about their mean, with their own white-noise covariances
    Cinv, okc = stacked_inverse(pt.cov)
    dev = b - mean
    chi2 = float(np.einsum("si,sij,sj->", dev[okc], Cinv[okc], dev[okc]))
    chi2_n = int(nh * (okc.sum() - 1))
    rss = float(np.nansum(pt.rss))
    per_turn = pt.frame()
    return dict(eng=eng, coef=mean, cov=cov_all[:nh, :nh], cov_dof=n_blocks - 1, n_blocks=n_blocks,
                aux_coef=None if not na else delta / eng.aux_scale,
                aux_cov=None if not na else cov_all[nh:, nh:] / np.outer(eng.aux_scale, eng.aux_scale),
                chi2=chi2, chi2_n=chi2_n, rss=rss, residuals=None, per_turn=per_turn, vif=None, cond=None,
                n_params=None, block_turns=block_turns)
