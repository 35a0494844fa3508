r"""Route (a): one global least-squares fit of every turn's ``(B, C)`` to the sidereal model.

For turn ``i`` of segment ``g`` (a sidereal-day window or a run; ``nullfit.campaign.sky_data``)

.. math::

    C_i = c_g + X_{C,i}\,p + ε,\qquad B_i = b_g + X_{B,i}\,p + ε,

with ``X_{C,i} = Σ_k f_k(w_i) M_{Ck}(W_i)`` (``k`` over the 1w and 2w terms, ``f`` = sin, cos),
``X_B`` likewise, and per-segment nuisance offsets ``c_g``, ``b_g`` (lab-fixed systematics live
there; ``use_c0=True`` drops the ``c_g`` and adds ``M_{C0}`` so that ``C₀`` measures ``e_ZZ``).
The model is linear in ``p``, so the offsets are profiled out segment by segment (subtracting
weighted segment means, Frisch–Waugh–Lovell) and the normal equations are sums of per-segment
pieces ``A = Σ_g A_g``, ``b = Σ_g b_g``.

Errors: the delete-one-segment jackknife, ``p̂_(−g) = (A − A_g)⁻¹ (b − b_g)`` and

.. math::  \widehat{\mathrm{cov}} = \frac{G-1}{G} \sum_g (p̂_{(−g)} − \bar p)(p̂_{(−g)} − \bar p)^T,

on ``G − 1`` degrees of freedom: it follows whatever scatter the segments really have (drift,
coloured noise, day-to-day changes), not the per-turn white-noise errors.  The white-noise
covariance ``A⁻¹ χ²/ν`` is reported beside it (``cov_white``); its correlations measure what the
span and coverage can separate (the e–o degeneracy check), free of the jackknife's sampling noise.
"""

from __future__ import annotations

import numpy as np

from ..core.errors import AnalysisError
from ..hypothesis.sidereal import MODEL_NAMES
from ..hypothesis.sidereal.parameters import check_model
from .sky_data import SkyData, turn_design, turn_weights
from .sky_result import SkyFit, common_notes, correlation_from_cov, free_names, offset_notes, offset_summary, \
    solve_scaled

__all__ = ["fit_global", "COND_MAX"]

#: Largest condition number (columns scaled to unit diagonal) of a solvable design.
COND_MAX = 1e12


def _group_sums(seg, G, Z, u):
    """Per-segment ``Σ zzᵀ`` (G, p, p) and ``Σ z u`` (G, p)."""
    p = Z.shape[1]
    A = np.empty((G, p, p))
    for a in range(p):
        for b in range(a, p):
            A[:, a, b] = A[:, b, a] = np.bincount(seg, weights=Z[:, a] * Z[:, b], minlength=G)
    bvec = np.stack([np.bincount(seg, weights=Z[:, a] * u, minlength=G) for a in range(p)], axis=1)
    return A, bvec


def _demean(seg, G, wt, *arrays):
    sw = np.bincount(seg, weights=wt, minlength=G)
    out = []
    for x in arrays:
        if x.ndim == 1:
            m = np.bincount(seg, weights=wt * x, minlength=G) / sw
            out.append(x - m[seg])
        elif x.shape[1] == 0:
            out.append(x)
        else:
            m = np.stack([np.bincount(seg, weights=wt * x[:, j], minlength=G) for j in range(x.shape[1])], axis=1)
            out.append(x - (m / sw[:, None])[seg])
    return out


def fit_global(data: SkyData, model: str = "sme", *, use_c0: bool = False, combined: bool = False,
               segments: str = "day", weights: str = "segment", orbit: str = "circular", pair: bool = True,
               confidence_level: float = 0.95) -> SkyFit:
    """Global fit of all per-turn ``(B, C)`` (see the module docstring); returns a :class:`SkyFit`."""
    model = check_model(model)
    names, alias_names = free_names(model, use_c0=use_c0, combined=combined)
    all_names = MODEL_NAMES[model]
    cols = [all_names.index(n) for n in names]
    acols = [all_names.index(n) for n in alias_names]
    seg = data.segments(segments)
    G = int(seg.max()) + 1
    p = len(names)
    if G < p + 2:
        raise AnalysisError(f"only {G} segments ({segments}s) for {p} parameters: the jackknife needs at least "
                            f"{p + 2}; use segments='day' or a longer campaign")
    wt = turn_weights(data, seg, weights)
    XC_all, XB_all = turn_design(data, model, use_c0=use_c0, orbit=orbit, pair=pair)
    XC, XB = XC_all[:, cols], XB_all[:, cols]
    XCo, XBo = XC_all[:, acols], XB_all[:, acols]
    yC, yB = data.C, data.B
    if not use_c0:
        yC, XC, XCo = _demean(seg, G, wt, yC, XC, XCo)
    yB, XB, XBo = _demean(seg, G, wt, yB, XB, XBo)
    sq = np.sqrt(wt)
    Ag = np.zeros((G, p, p))
    bg = np.zeros((G, p))
    for X, y in ((XC, yC), (XB, yB)):
        a, b = _group_sums(seg, G, X * sq[:, None], y * sq)
        Ag += a
        bg += b
    A, b = Ag.sum(axis=0), bg.sum(axis=0)
    est, cond = solve_scaled(A, b)
    if not np.isfinite(cond) or cond > COND_MAX:
        raise AnalysisError(f"the campaign cannot separate the {p} parameters (condition number {cond:.2g}); "
                            + ("use combined=True, or a longer campaign" if model == "sme" and not combined
                               else "a longer campaign with more sidereal coverage is needed"))
    loo, cond_loo = solve_scaled(A[None] - Ag, b[None] - bg)
    if not np.isfinite(cond_loo) or cond_loo > COND_MAX:
        raise AnalysisError("leaving one segment out makes the design singular (one segment carries information "
                            "no other has); use more segments or segments='day'")
    mean = loo.mean(axis=0)
    dev = loo - mean
    cov = (G - 1) / G * dev.T @ dev
    # white-noise covariance, scaled by the residual χ²/ν
    rC, rB = yC - XC @ est, yB - XB @ est
    chi2 = float(np.sum(wt * rC ** 2) + np.sum(wt * rB ** 2))
    nu = 2 * data.n_turns - p - G * (1 if use_c0 else 2)
    Ainv = np.linalg.inv(A)
    cov_white = Ainv * chi2 / max(nu, 1)
    sigma_white = np.sqrt(np.diag(cov_white))
    alias = None
    if combined:
        Aeo = np.zeros((p, len(acols)))
        for X, Xo in ((XC, XCo), (XB, XBo)):
            Aeo += (X * wt[:, None]).T @ Xo
        alias = Ainv @ Aeo
    # per-segment offsets (weighted means of the residuals of the raw data)
    offsets = {}
    for key, y, X in (("C0", data.C, XC_all[:, cols]), ("B0", data.B, XB_all[:, cols])):
        if key == "C0" and use_c0:
            offsets[key] = None
            continue
        r = y - X @ est
        sw = np.bincount(seg, weights=wt, minlength=G)
        offsets[key] = offset_summary(np.bincount(seg, weights=wt * r, minlength=G) / sw)
    corr = correlation_from_cov(cov_white)
    notes = common_notes(model, names, corr, span_days=data.span_days, combined=combined, use_c0=use_c0)
    notes += offset_notes(offsets)
    ratio = np.sqrt(np.diag(cov)) / sigma_white
    notes.append(f"errors: delete-one-{segments} jackknife over {G} segments ({G - 1} dof); jackknife/white-noise "
                 f"σ ratio {ratio.min():.2f}–{ratio.max():.2f}")
    t = data.epoch_unix + data.time_s
    return SkyFit(model, "global", names, est, cov, G - 1, data.span_days, data.n_turns, G, segments, bool(use_c0),
                  bool(combined), weights, orbit, bool(pair), float(confidence_level), float(t.min()),
                  float(t.max()), tuple(s.latitude_deg for s in data.sites), offsets, cov_white, alias,
                  data.dropped, tuple(notes), data.seed)
