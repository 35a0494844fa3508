"""The fitted model at every reading, for figures and reports: drift model and folded signal.

:func:`drift_model`
    the non-harmonic part of the fitted model at every reading.  For the joint fits
    (``errors="ols"``/``"hac"``, any drift basis) it is exactly ``signal − harmonics −
    residuals`` (the residuals are stored on the fit).  For turn/block errors the fit keeps no
    residuals; the per-turn drift (offset + slope, or the Legendre degree of ``drift="per-turn:d"``)
    is then re-fitted turn by turn to ``signal − harmonics − aux`` with the fitted (global)
    harmonic coefficients, by the fit's own engine (:meth:`TurnEngine.fit_drift`).
:func:`fold`
    the drift-removed signal folded by table angle into ``bins`` equal bins *centred* on
    ``j·360°/bins`` (so readings taken at ``bins`` equally spaced marks fall in the middle of a
    bin, never on an edge).  Each bin's value is the unweighted mean over turns of the turn's
    mean in that bin, and its error the standard error of those per-turn means
    (``s/√N_turns``): like the fit's turn errors, it absorbs noise correlated within a turn.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .design import harmonic_rows, parse_drift
from .engine import TurnEngine
from .segments import turn_segments


def harmonic_part(angle_rad, fit, ks=None) -> np.ndarray:
    """``Σ_k c_k cos kθ + s_k sin kθ`` with the fitted coefficients, over ``ks`` (default: all
    fitted harmonics)."""
    ks = tuple(fit.harmonics) if ks is None else tuple(ks)
    rows = harmonic_rows(np.asarray(angle_rad, dtype=float), ks)
    out = np.zeros(rows.shape[1])
    for j, k in enumerate(ks):
        h = fit.harmonic(k)
        out += h.c * rows[2 * j] + h.s * rows[2 * j + 1]
    return out


def _aux_part(scan, fit) -> np.ndarray:
    out = np.zeros(scan.n_samples)
    if getattr(fit, "aux_coef", None) is None:
        return out
    for name, c in zip(fit.aux_names, fit.aux_coef):
        out += float(c) * np.asarray(scan.aux[name], dtype=float)
    return out


@dataclass(frozen=True)
class DriftModel:
    """The non-harmonic part of the fitted model (``drift``, NaN on rows not fitted)."""

    drift: np.ndarray
    fitted: np.ndarray  # bool per reading: the reading entered the fit
    how: str  # "residuals" or "per-turn refit"
    includes_aux: bool


def fitted_turns(scan, fit) -> np.ndarray:
    """Turn numbers (``scan.turn`` values) that entered the fit."""
    res = getattr(fit, "residuals", None)
    if res is not None:
        return np.unique(np.asarray(scan.turn)[np.isfinite(res)])
    pt = getattr(fit, "per_turn", None)
    if pt is not None:
        cols = [f"{p}{k}" for k in fit.harmonics for p in ("c", "s")]
        ok = np.isfinite(pt[cols].to_numpy(dtype=float)).all(axis=1)
        return pt["turn"].to_numpy()[ok]
    complete_only = bool(getattr(fit, "settings", {}).get("complete_only", True))
    seg = turn_segments(scan)
    return seg.turn[seg.complete] if complete_only else seg.turn


def _check_pair(scan, fit) -> None:
    res = getattr(fit, "residuals", None)
    if res is not None and np.size(res) != scan.n_samples:
        raise ValueError(f"the fit has {np.size(res)} residuals but the scan {scan.n_samples} readings: "
                         "pass the scan the fit was made from")
    if fit.unit != scan.unit:
        raise ValueError(f"the fit is in {fit.unit!r} but the scan in {scan.unit!r}: "
                         "pass the scan the fit was made from")


def drift_model(scan, fit) -> DriftModel:
    """The fitted drift (+ aux terms) at every reading of ``scan`` (see the module docstring)."""
    _check_pair(scan, fit)
    y = np.asarray(scan.signal, dtype=float)
    aux = bool(getattr(fit, "aux_names", ()))
    res = getattr(fit, "residuals", None)
    if res is not None:
        res = np.asarray(res, dtype=float)
        fitted = np.isfinite(res)
        drift = np.full(y.size, np.nan)
        drift[fitted] = y[fitted] - harmonic_part(scan.angle[fitted], fit) - res[fitted]
        return DriftModel(drift, fitted, "residuals", aux)

    spec = parse_drift(fit.drift)
    if spec.kind != "per-turn":  # cannot happen for fits made by fit_scan (turn errors need per-turn drift)
        raise ValueError(f"a fit with drift={fit.drift!r} and no residuals cannot be reconstructed")
    complete_only = bool(getattr(fit, "settings", {}).get("complete_only", True))
    eng = TurnEngine(scan, fit.harmonics, degree=spec.degree, complete_only=complete_only)
    eng.drop_turns(~np.isin(eng.seg.turn, fitted_turns(scan, fit)), "not fitted")
    a_part = _aux_part(scan, fit)
    drift = eng.fit_drift(y - harmonic_part(scan.angle, fit) - a_part)
    fitted = np.isfinite(drift)
    drift[fitted] += a_part[fitted]
    return DriftModel(drift, fitted, "per-turn refit", aux)


@dataclass(frozen=True)
class Folded:
    """The drift-removed signal folded by table angle (see :func:`fold`)."""

    centers_deg: np.ndarray
    mean: np.ndarray
    sem: np.ndarray
    n_turns: np.ndarray  # turns contributing to each bin
    n_readings: np.ndarray
    angle_deg: np.ndarray  # every fitted reading, modulo 360
    value: np.ndarray  # its drift-removed signal
    width_deg: float


def fold(scan, fit, bins: int = 16, model: DriftModel | None = None) -> Folded:
    """Fold ``signal − drift`` by table angle (see the module docstring)."""
    bins = int(bins)
    if bins < 2:
        raise ValueError(f"bins must be at least 2, not {bins}")
    model = drift_model(scan, fit) if model is None else model
    sel = model.fitted
    val = np.asarray(scan.signal, dtype=float)[sel] - model.drift[sel]
    ang = np.mod(np.rad2deg(np.asarray(scan.angle, dtype=float)[sel]), 360.0)
    w = 360.0 / bins
    b = np.floor(np.mod(ang + 0.5 * w, 360.0) / w).astype(np.int64) % bins
    _, tix = np.unique(np.asarray(scan.turn)[sel], return_inverse=True)
    cell = tix * bins + b
    n_cells = (int(tix.max()) + 1) * bins if tix.size else 0
    cnt = np.bincount(cell, minlength=n_cells)
    sm = np.bincount(cell, weights=val, minlength=n_cells)
    occ = cnt > 0
    cell_mean = np.where(occ, sm / np.maximum(cnt, 1), 0.0).reshape(-1, bins)
    occ = occ.reshape(-1, bins)
    nt = occ.sum(axis=0)
    mean = np.where(nt > 0, cell_mean.sum(axis=0) / np.maximum(nt, 1), np.nan)
    dev2 = np.where(occ, (cell_mean - mean) ** 2, 0.0).sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        sem = np.where(nt > 1, np.sqrt(dev2 / np.maximum(nt - 1, 1) / np.maximum(nt, 1)), np.nan)
    n_read = np.bincount(b, minlength=bins)
    return Folded(np.arange(bins) * w, mean, sem, nt, n_read, ang, val, w)
