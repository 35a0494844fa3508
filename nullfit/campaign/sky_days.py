r"""Route (b): demodulation — per sidereal day the five-term expansion, then the quadratures across
days against the annual phase.

Stage 1 (:func:`day_quadratures`).  In every sidereal-day window (``nullfit.campaign.sky_data``)
each channel is fitted by weighted least squares to

.. math::  X(t) = X_0 + X_{s1}\sin w + X_{c1}\cos w + X_{s2}\sin 2w + X_{c2}\cos 2w,\qquad X ∈ \{C, B\},

giving ten quadratures ``q_d`` with covariance ``V_d = (FᵀWF)⁻¹ s²`` (``s²`` the window's
residual χ²/ν per channel).  A window enters only when it covers the sidereal day well enough
that the harmonic variances are within ``max_inflation`` of an evenly covered window
(``2/n`` per coefficient); the others are counted and left out.

Stage 2 (:func:`fit_days`).  The quadratures of day ``d`` follow ``q_d = M(W_d) p`` (``W_d`` at the
window's mean time; ``C₀``, ``B₀`` are nuisance unless ``use_c0`` brings ``C₀`` in).  Weighted least
squares with ``V_d⁻¹`` gives ``p̂``; the covariance comes from the day-to-day scatter of the
residuals ``r_d = q_d − M_d p̂``: the cluster sandwich with days as clusters,

.. math::  A^{-1} \Big[\sum_d M_d^T V_d^{-1} r_d r_d^T V_d^{-1} M_d\Big] A^{-1}\;
           \frac{D}{D-1}\,\frac{N-1}{N-p},

(``N`` the number of quadratures fitted, ``D − 1`` degrees of freedom; the small-sample factor is the
usual one of cluster-robust errors, common practice), so day-to-day changes the within-day errors
miss are counted.  ``A⁻¹`` itself (the within-day errors propagated) is reported as ``cov_white``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..core.errors import AnalysisError
from ..hypothesis.sidereal import MODEL_NAMES, QUADRATURE_KEYS
from ..hypothesis.sidereal.parameters import check_model
from .sky_data import SkyData, quadrature_design, turn_weights
from .sky_global import COND_MAX
from .sky_result import SkyFit, common_notes, correlation_from_cov, free_names, offset_notes, offset_summary, \
    solve_scaled

__all__ = ["DayQuadratures", "day_quadratures", "fit_days", "MAX_INFLATION", "MIN_TURNS"]

#: A window enters when its harmonic variances are at most this factor above an evenly covered day's.
MAX_INFLATION = 4.0
#: … and when it holds at least this many turns.
MIN_TURNS = 12


@dataclass(frozen=True, eq=False)
class DayQuadratures:
    """Stage 1: the ten quadratures of every accepted sidereal-day window."""

    window: np.ndarray = field(repr=False)       # window index in the SkyData
    site: np.ndarray = field(repr=False)
    epoch_unix: int = 0
    time_s: np.ndarray = field(default=None, repr=False)   # mean time of the window's turns
    W: np.ndarray = field(default=None, repr=False)        # annual phase at that time, rad
    n_turns: np.ndarray = field(default=None, repr=False)
    q: np.ndarray = field(default=None, repr=False)        # (D, 10), QUADRATURE_KEYS order
    V: np.ndarray = field(default=None, repr=False)        # (D, 10, 10)
    n_rejected: int = 0
    turns_rejected: int = 0

    @property
    def n_days(self) -> int:
        return int(self.window.size)

    def frame(self):
        """One row per day: mean time (Unix s), W (deg), turns, and every quadrature with its σ."""
        import pandas as pd

        d = {"t_unix": self.epoch_unix + self.time_s, "W_deg": np.rad2deg(self.W), "n_turns": self.n_turns}
        for i, k in enumerate(QUADRATURE_KEYS):
            d[k] = self.q[:, i]
            d[f"sigma_{k}"] = np.sqrt(self.V[:, i, i])
        return pd.DataFrame(d)


def day_quadratures(data: SkyData, *, weights: str = "segment", max_inflation: float = MAX_INFLATION,
                    min_turns: int = MIN_TURNS) -> DayQuadratures:
    """Fit the five-term expansion of ``C`` and ``B`` in every sidereal-day window (stage 1)."""
    seg = data.window
    wt = turn_weights(data, seg, weights)
    order = np.argsort(seg, kind="stable")
    bounds = np.flatnonzero(np.r_[True, np.diff(seg[order]) != 0, True])
    keep, out = [], {k: [] for k in ("site", "t", "n", "q", "V")}
    n_rej = t_rej = 0
    for a, b in zip(bounds[:-1], bounds[1:]):
        idx = order[a:b]
        n = idx.size
        w = data.w[idx]
        F = np.column_stack([np.ones(n), np.sin(w), np.cos(w), np.sin(2 * w), np.cos(2 * w)])
        ok = n >= min_turns
        if ok:
            G0 = F.T @ F
            if np.linalg.cond(G0) > COND_MAX:
                ok = False
            else:
                infl = float(np.max(np.diag(np.linalg.inv(G0))[1:])) * n / 2.0
                ok = infl <= max_inflation
        if not ok:
            n_rej += 1
            t_rej += n
            continue
        ww = wt[idx]
        Ginv = np.linalg.inv((F * ww[:, None]).T @ F)
        q = np.zeros(10)
        V = np.zeros((10, 10))
        for off, y in ((0, data.C[idx]), (5, data.B[idx])):
            coef = Ginv @ (F.T @ (ww * y))
            r = y - F @ coef
            s2 = float(np.sum(ww * r ** 2)) / (n - 5)
            q[off:off + 5] = coef
            V[off:off + 5, off:off + 5] = Ginv * s2
        keep.append(int(seg[idx[0]]))
        out["site"].append(int(data.site[idx[0]]))
        out["t"].append(float(np.mean(data.time_s[idx])))
        out["n"].append(n)
        out["q"].append(q)
        out["V"].append(V)
    if not keep:
        return DayQuadratures(np.zeros(0, np.int64), np.zeros(0, np.int64), data.epoch_unix, np.zeros(0),
                              np.zeros(0), np.zeros(0, np.int64), np.zeros((0, 10)), np.zeros((0, 10, 10)),
                              n_rej, t_rej)
    from ..hypothesis.sidereal import annual_phase_rad

    t = np.array(out["t"])
    return DayQuadratures(np.array(keep), np.array(out["site"]), data.epoch_unix, t,
                          annual_phase_rad(epoch_unix=data.epoch_unix, time_s=t), np.array(out["n"]),
                          np.array(out["q"]), np.array(out["V"]), n_rej, t_rej)


def fit_days(data: SkyData, model: str = "sme", *, use_c0: bool = False, combined: bool = False,
             weights: str = "segment", orbit: str = "circular", pair: bool = True, confidence_level: float = 0.95,
             max_inflation: float = MAX_INFLATION) -> SkyFit:
    """Demodulation route (see the module docstring); returns a :class:`SkyFit`."""
    model = check_model(model)
    names, alias_names = free_names(model, use_c0=use_c0, combined=combined)
    all_names = MODEL_NAMES[model]
    cols = [all_names.index(n) for n in names]
    acols = [all_names.index(n) for n in alias_names]
    p = len(names)
    dq = day_quadratures(data, weights=weights, max_inflation=max_inflation)
    D = dq.n_days
    if D < p + 2:
        raise AnalysisError(f"the days route needs at least {p + 2} well-covered sidereal days; this campaign has "
                            f"{D} (of {D + dq.n_rejected} windows); use route='global' for short runs")
    rows = ([0] if use_c0 else []) + [1, 2, 3, 4, 6, 7, 8, 9]
    M = np.zeros((D, len(rows), len(all_names)))
    for j, site in enumerate(data.sites):
        m = dq.site == j
        if m.any():
            M[m] = quadrature_design(model, site, dq.epoch_unix, dq.time_s[m], orbit=orbit, pair=pair,
                                     precess_to_unix=data.mid_unix)[:, rows, :]
    Md, Mo = M[:, :, cols], M[:, :, acols]
    q = dq.q[:, rows]
    Winv = np.linalg.inv(dq.V[:, rows][:, :, rows])
    MtW = np.einsum("dri,drs->dis", Md, Winv)
    A = np.einsum("dis,dsj->ij", MtW, Md)
    b = np.einsum("dis,ds->i", MtW, q)
    est, cond = solve_scaled(A, b)
    if not np.isfinite(cond) or cond > COND_MAX:
        raise AnalysisError(f"the days cannot separate the {p} parameters (condition number {cond:.2g}); "
                            + ("use combined=True, or a longer campaign" if model == "sme" and not combined
                               else "a longer campaign is needed"))
    r = q - np.einsum("drj,j->dr", Md, est)
    s = np.einsum("dis,ds->di", MtW, r)
    Ainv = np.linalg.inv(A)
    n_obs = D * len(rows)
    cov = D / (D - 1) * (n_obs - 1) / (n_obs - p) * Ainv @ (s.T @ s) @ Ainv
    cov = 0.5 * (cov + cov.T)
    cov_white = Ainv
    sigma_white = np.sqrt(np.diag(cov_white))
    alias = Ainv @ np.einsum("dis,dsj->ij", MtW, Mo) if combined else None
    offsets = {"C0": None if use_c0 else offset_summary(dq.q[:, 0]), "B0": offset_summary(dq.q[:, 5])}
    corr = correlation_from_cov(cov_white)
    notes = common_notes(model, names, corr, span_days=data.span_days, combined=combined, use_c0=use_c0)
    notes += offset_notes(offsets)
    ratio = np.sqrt(np.diag(cov)) / sigma_white
    notes.append(f"errors: day-to-day scatter of the quadratures over {D} sidereal days ({D - 1} dof); "
                 f"scatter/within-day σ ratio {ratio.min():.2f}–{ratio.max():.2f}")
    if dq.n_rejected:
        notes.append(f"{dq.n_rejected} sidereal-day windows ({dq.turns_rejected} turns) left out: too few turns or "
                     f"too little sidereal coverage (variance inflation > {max_inflation:g})")
    dropped = data.dropped + ((("turns in poorly covered sidereal days", dq.turns_rejected),) if dq.turns_rejected
                              else ())
    used = np.isin(data.window, dq.window)
    t = data.epoch_unix + data.time_s[used]
    return SkyFit(model, "days", names, est, cov, D - 1, float(t.max() - t.min()) / 86400.0, int(used.sum()), D,
                  "day", bool(use_c0), bool(combined), weights, orbit, bool(pair), float(confidence_level),
                  float(t.min()), float(t.max()), tuple(s.latitude_deg for s in data.sites), offsets, cov_white,
                  alias, dropped, tuple(notes), data.seed)
