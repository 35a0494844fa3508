"""Turn-scatter errors: the mean of the per-turn coefficients and its covariance from their scatter.

Two layers:

:func:`turn_scatter`
    works on per-turn arrays only (coefficients, their white-noise covariances, residual sums
    of squares, turn numbers), so that any producer of a per-turn table — the in-memory engine
    here, a streamed fit reading a log in chunks — gets the same errors, the same dependence
    check and the same χ².
:func:`fit_turn_scatter`
    demodulates a scan with :class:`~nullfit.fitting.engine.TurnEngine` (and, with aux terms,
    estimates their global coefficients) and calls :func:`turn_scatter`.

The covariance is ``n_b/(n_b − 1) Σ_b Z_b Z_bᵀ`` over blocks ``b`` of consecutive turns, where
``Z_b`` sums each turn's contribution ``z_i`` to ``estimate − truth`` (``z_i = (b_i − b̄)/N``
without aux terms).  For equal blocks without aux terms it is exactly the sample covariance of
the block means divided by ``n_b``; with one turn per block, that of the turns divided by ``N``.
The block length follows the turn-to-turn dependence check (:mod:`.dependence`): one turn
unless dependence is detected, then blocks a few integrated autocorrelation times long.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..core.errors import AnalysisError, where
from .dependence import TurnDependence, block_edges, block_rule, check_dependence
from .design import harmonic_names
from .engine import TurnEngine
from .linalg import solve_spd, stacked_inverse

#: Fewest turns (or blocks) behind a turn-scatter covariance: Hotelling's T² of (c, s) needs 2 dof.
MIN_TURNS = 3
DEPENDENCE_MODES = ("widen", "warn")


@dataclass(frozen=True, eq=False)
class TurnScatter:
    """What :func:`turn_scatter` returns (arrays are read-only).

    ``coef`` is the unweighted mean of the per-turn coefficients; ``cov`` the covariance of the
    influence columns (harmonics, then aux coefficients when ``influence`` had more columns),
    ``dof = n_blocks − 1``.  ``chi2``/``chi2_n``: scatter of the per-turn coefficients about
    their weighted mean with the pooled within-turn white-noise covariance (see
    :func:`scatter_chi2`); ``chi2_p`` its p-value.
    """

    coef: np.ndarray
    cov: np.ndarray
    dof: int
    n_turns: int
    n_blocks: int
    block_turns: int
    dependence: TurnDependence
    chi2: float | None = None
    chi2_n: int | None = None
    chi2_p: float | None = None
    resid_dof: int | None = None


def check_dependence_mode(dependence: str) -> str:
    if dependence not in DEPENDENCE_MODES:
        raise ValueError(f"dependence must be 'widen' or 'warn', not {dependence!r}")
    return dependence


def turn_scatter(coef, white_cov=None, *, rss=None, resid_dof=None, weight=None, turn=None, time_mid=None,
                 names=None, influence=None,
                 block_turns: int | None = None, dependence: str = "widen", source: str = "<data>",
                 left_out: str = "") -> TurnScatter:
    """Estimate, covariance and dependence check from per-turn results.

    Parameters
    ----------
    coef : array (N, q)
        Per-turn harmonic coefficients ``c_k1, s_k1, c_k2, …`` in time order (finite: turns that
        could not be solved are left out first).
    white_cov : array (N, q, q), optional
        Each turn's white-noise covariance of ``coef`` (``σ̂_i² (X_iᵀX_i)⁻¹``, harmonic block).
    rss, resid_dof : arrays (N,), optional
        Each turn's residual sum of squares and residual degrees of freedom ``n_i − p``; with
        ``white_cov`` they give the χ² of the scatter.
    weight : array (N, q, q), optional
        Each turn's normal matrix of the harmonics with the drift projected out,
        ``σ̂_i² white_cov_i⁻¹``, when the producer has it (the kernel does: it saves inverting
        ``white_cov`` again for the χ²).
    turn, time_mid : arrays (N,), optional
        Turn numbers and turn mid-times (s); they only count gaps for the dependence report.
    names : sequence of str, optional
        Names of the ``q`` columns (``"c2"`` …) for the dependence report.
    influence : array (N, r), optional
        Each turn's contribution to ``estimate − truth`` (``r ≥ q``, harmonics first); default
        ``(coef − mean)/N``.
    block_turns : int, optional
        Turns per block as chosen by the caller (consecutive blocks of ``B`` turns, the last one
        shorter); default: follow the dependence check (:func:`nullfit.fitting.dependence.block_rule`).
    dependence : {"widen", "warn"}
        With ``block_turns=None`` and dependence detected: widen to blocks (default), or keep
        the turn scatter and flag the result as not calibrated.
    source, left_out : str
        For messages: the log's name and what the fit left out.

    Raises
    ------
    AnalysisError
        Fewer than 3 turns (or blocks): a covariance of ``(c, s)`` from two points has rank 1.
    """
    check_dependence_mode(dependence)
    b = np.asarray(coef, dtype=float)
    if b.ndim != 2:
        raise ValueError(f"coef must be an (N, q) array of per-turn coefficients, got shape {b.shape}")
    n, q = b.shape
    if not np.all(np.isfinite(b)):
        raise ValueError("coef has non-finite rows: leave out the turns that could not be solved before turn_scatter")
    left = f" (left out: {left_out})" if left_out else ""
    if n < MIN_TURNS:
        raise AnalysisError(
            f"{where(source)}: {n} usable turn(s){left}; turn-scatter errors need at least {MIN_TURNS} turns "
            "(the covariance of (c, s) from the scatter of 2 turns has rank 1): use errors='hac' or errors='ols' "
            "(joint fit, covariance from the residuals), or a longer scan")
    mean = b.mean(axis=0)
    z = (b - mean) / n if influence is None else np.asarray(influence, dtype=float)
    dep = check_dependence(b, names, turn=turn, time_mid=time_mid)
    if block_turns is None:
        if dependence == "warn" and dep.positive:
            bt, nb, action = 1, n, "warned"
        else:
            bt, nb = block_rule(dep)
            action = "widened" if bt > 1 else ("none" if dep.checked else "not checked")
        edges = block_edges(n, nb)
    else:
        bt = int(block_turns)
        nb = -(-n // bt)
        edges = np.r_[np.arange(0, n, bt), n]
        action = "given"
        if nb < MIN_TURNS:
            raise AnalysisError(
                f"{where(source)}: {n} usable turn(s){left} make {nb} block(s) of {bt} turns; the scatter needs at "
                f"least {MIN_TURNS} blocks: use fewer turns per block (block_turns), errors='turns', or a longer scan")
    dep = dep.with_action(action, bt, nb)
    Z = np.add.reduceat(z, edges[:-1], axis=0)
    cov = nb / (nb - 1) * (Z.T @ Z)
    chi2 = chi2_n = chi2_p = nu = None
    if white_cov is not None and rss is not None and resid_dof is not None:
        chi2, chi2_n, chi2_p, nu = scatter_chi2(b, white_cov, rss, resid_dof, weight)
    for a in (mean, cov):
        a.setflags(write=False)
    return TurnScatter(mean, cov, nb - 1, n, nb, bt, dep, chi2, chi2_n, chi2_p, nu)


def scatter_chi2(b, white_cov, rss, resid_dof, weight=None):
    """χ² of the per-turn coefficients about their weighted mean, with the pooled white noise.

    Each turn's weight is its normal matrix ``W_i = σ̂_i² C_i⁻¹`` (harmonic block after the drift
    is projected out); ``b̄_w = (Σ W_i)⁻¹ Σ W_i b_i`` and ``Q = Σ (b_i − b̄_w)ᵀ W_i (b_i − b̄_w)``.
    The noise variance is pooled over the turns, ``σ̃² = Σ RSS_i / (ν − 2)`` with
    ``ν = Σ (n_i − p)``.  For white Gaussian noise ``Q/σ²`` is χ² with ``q (N − 1)`` degrees of
    freedom, independent of ``Σ RSS_i/σ² ~ χ²_ν``, so ``χ² = Q/σ̃²`` has mean exactly
    ``q (N − 1)`` (``E[(ν − 2)/χ²_ν] = 1``) and ``χ²/(q (N − 1)) · ν/(ν − 2)`` follows
    ``F(q (N − 1), ν)``, which gives the p-value.  Turns whose covariance is singular are
    skipped.  ``weight`` (optional): the ``W_i`` themselves, when the producer has them (the
    kernel's Schur complements, :func:`.linalg.schur_soa`); they are then not recomputed from
    ``white_cov``.  Returns ``(chi2, q (N − 1), p, ν)``.
    """
    from scipy import stats

    b = np.asarray(b, dtype=float)
    rss = np.asarray(rss, dtype=float)
    dof = np.asarray(resid_dof, dtype=float)
    Wsum = None
    if weight is None:
        Cinv, ok = stacked_inverse(np.asarray(white_cov, dtype=float))
    else:
        W = np.asarray(weight, dtype=float)
        Wsum = W.sum(axis=0)
        # a sum of finite matrices is finite: only when it is not are the turns looked at one by one
        ok = (rss > 0) if np.isfinite(Wsum).all() else np.isfinite(W).all(axis=(1, 2)) & (rss > 0)
        # (a zero RSS makes the covariance singular: such a turn is skipped, as by the inversion)
    ok &= np.isfinite(rss) & (dof > 0)
    every = bool(ok.all())
    n_ok = int(ok.sum())
    q = b.shape[1]
    nu = float(dof.sum() if every else dof[ok].sum())
    if n_ok < 2 or nu <= 2:
        return None, None, None, None
    if weight is None:
        W = Cinv[ok] * (rss[ok] / dof[ok])[:, None, None]
    elif not every:
        W = W[ok]
    if Wsum is None or not every:
        Wsum = W.sum(axis=0)
    bk = b if every else b[ok]
    bw = np.linalg.solve(Wsum, np.einsum("sij,sj->i", W, bk))
    dev = bk - bw
    Q = float(np.einsum("si,si->", np.einsum("sij,sj->si", W, dev), dev))
    sig2 = float(rss[ok].sum()) / (nu - 2.0)
    chi2 = Q / sig2
    n_chi = q * (n_ok - 1)
    p = float(stats.f.sf(chi2 / n_chi * nu / (nu - 2.0), n_chi, nu))
    return chi2, n_chi, p, int(round(nu))


def fit_turn_scatter(scan, ks, spec, aux, complete_only, block_turns, dependence="widen"):
    """Turn (or block) errors of a scan: demodulate every turn, then :func:`turn_scatter`.

    Without aux terms, turn ``i`` gives ``b_i`` (:func:`nullfit.demodulate`); the estimate is
    ``b̄ = Σ b_i / N`` and each turn's contribution to ``b̄ − β`` is ``z_i = (b_i − b̄)/N``.

    With aux terms (one global coefficient vector δ, per-turn harmonics), after projecting the
    per-turn drift out of every column (Schur complements ``Q_i`` of the per-turn normal
    matrices): ``b_i = b⁰_i − P_i δ̂`` with ``b⁰_i = Q_hh⁻¹ r_h`` and ``P_i = Q_hh⁻¹ Q_ha``;
    ``δ̂ = (Σ M_i)⁻¹ Σ g⁰_i`` with ``M_i = Q_aa − Q_ah P_i`` and ``g⁰_i = r_a − Q_ah b⁰_i``.
    Linearising, ``b̄ − β = Σ_i [(b_i − β)/N − P̄ (Σ M)⁻¹ g_i]`` with ``g_i = g⁰_i − M_i δ̂``, so
    turn ``i`` contributes ``z_i = (b_i − b̄)/N − P̄ (ΣM)⁻¹ g_i`` (and ``(ΣM)⁻¹ g_i`` to δ̂).

    ``block_turns`` is ``None`` (follow the dependence check) or the caller's block length.
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
        before = np.diag(Q_aa.sum(axis=0))  # aux variance left after the per-turn drift alone
        if not np.all(np.diag(Msum) > 1e-10 * before):
            gone = [n for n, m, b0 in zip(eng.aux_names, np.diag(Msum), before) if not m > 1e-10 * b0]
            raise AnalysisError(
                f"{where(scan.source)}: auxiliary column(s) {', '.join(map(repr, gone))} vary only like the per-turn "
                "drift and the fitted harmonics: nothing is left to fit a reading-level coefficient on; fit the "
                "coupling at turn level (nullfit.fitting.coupling.fit_coupling) or leave the column out")
        delta, Minv, _ = solve_spd(Msum, g0.sum(axis=0))
        g = g0 - np.einsum("sij,j->si", Mi, delta)
        infl_extra = (P.mean(axis=0), Minv, g)
    pt = eng.demodulate(delta=delta)
    if not pt.ok.all():
        bad = ~pt.ok
        if na:  # cannot happen: the same turns were screened above
            raise AnalysisError(f"{where(scan.source)}: per-turn systems became singular after the aux correction")
        eng.drop_turns(bad, "turns whose per-turn system is singular")
        pt = type(pt)(eng, pt.coef[~bad], pt.cov[~bad], pt.rss[~bad], pt.ok[~bad], delta, pt.weight[~bad])
    N = eng.seg.n
    b = pt.harm
    z = None
    if na:
        Pbar, Minv, g = infl_extra
        zd = g @ Minv.T  # influence of each turn on the aux coefficients
        z = np.concatenate([(b - b.mean(axis=0)) / N - zd @ Pbar.T, zd], axis=1)
    names = list(harmonic_names(ks))
    resid_dof = eng.seg.length - (eng.n_drift + eng.n_harm)
    ts = turn_scatter(b, pt.cov, rss=pt.rss, resid_dof=resid_dof, weight=pt.weight, turn=eng.seg.turn,
                      time_mid=eng.t_mid,
                      names=names, influence=z,
                      block_turns=block_turns, dependence=dependence, source=scan.source,
                      left_out=eng.excluded_text() if eng.excluded else "")
    cov_all = ts.cov
    return dict(eng=eng, coef=ts.coef, cov=cov_all[:nh, :nh], cov_dof=ts.dof, n_blocks=ts.n_blocks,
                aux_coef=None if not na else delta / eng.aux_scale,
                aux_cov=None if not na else cov_all[nh:, nh:] / np.outer(eng.aux_scale, eng.aux_scale),
                chi2=ts.chi2, chi2_n=ts.chi2_n, chi2_p=ts.chi2_p, rss=float(np.nansum(pt.rss)), residuals=None,
                per_turn=pt.frame(), vif=None, cond=None, n_params=None, block_turns=ts.block_turns,
                dependence=ts.dependence, chi2_resid_dof=ts.resid_dof)


def joint_dependence(scan, ks, complete_only) -> TurnDependence:
    """The dependence check for a joint (HAC/OLS) fit: demodulate every turn (per-turn offset and
    slope, whatever drift the joint fit uses) and check the per-turn harmonic series.  The
    result's action is ``"ignored"`` when dependence is detected (joint errors do not follow it)."""
    try:
        eng = TurnEngine(scan, ks, degree=1, complete_only=complete_only, min_samples=3 + 2 * len(ks))
        pt = eng.demodulate()
    except AnalysisError as err:
        return TurnDependence(0, (), False, f"per-turn demodulation failed ({err})")
    b = pt.harm[pt.ok]
    names = list(harmonic_names(ks))
    dep = check_dependence(b, names, turn=eng.seg.turn[pt.ok])
    action = "ignored" if dep.positive else ("none" if dep.checked else "not checked")
    return dep.with_action(action, 1, b.shape[0])
