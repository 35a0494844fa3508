"""Per-turn demodulation: one row of harmonic coefficients per turn (:func:`demodulate`)."""

from __future__ import annotations

import numpy as np

from .design import check_harmonics, check_separable, per_turn_drift
from .engine import TurnEngine

def demodulate(scan, *, harmonics=(1, 2), drift="per-turn", complete_only: bool = True, aux=None,
               aux_coef=None):
    """Fit every turn on its own: per-turn offset + slope + harmonics, one row per turn.

    Parameters
    ----------
    scan : Scan
    harmonics : tuple of int
        Harmonic orders ``k`` (columns ``cos kθ``, ``sin kθ``).
    drift : str
        ``"per-turn"`` (offset + slope in the time within the turn) or ``"per-turn:d"``
        (Legendre polynomial of order ``d`` = 0..3 within the turn).
    complete_only : bool
        Leave partial turns out.  Their number is in ``df.attrs["excluded"]``; nothing is
        dropped silently.
    aux, aux_coef : optional
        Names of auxiliary columns of the scan and their (global) coefficients, in signal units
        per aux unit: ``Σ aux_coef_j · aux_j`` is subtracted before demodulating.  ``fit_scan``
        passes the coefficients it estimated.

    Returns
    -------
    pandas.DataFrame
        Columns ``turn, time_mid_s, n_samples``, then for every ``k``:
        ``c{k}, s{k}, sigma_c{k}, sigma_s{k}``, then ``resid_rms`` and ``complete``.
        ``time_mid_s`` is the midpoint of the turn's first and last reading (s since the scan
        epoch); ``sigma_*`` are white-noise standard errors of that turn alone
        (``σ̂_i² = RSS_i / (n_i − p)``, ``p = 2 + 2K``); ``resid_rms = sqrt(RSS_i / n_i)``.
        Turns that cannot be solved (too few readings, singular coverage) have NaN
        coefficients.  ``df.attrs`` records harmonics, drift, signal unit and exclusions.
    """
    ks = check_harmonics(harmonics)
    spec = per_turn_drift(drift)
    check_separable(scan.angle, ks, marks=scan.marks, source=scan.source)
    aux = tuple(aux or ())
    if aux and aux_coef is None:
        raise ValueError("aux needs aux_coef (use fit_scan to estimate the auxiliary coefficients)")
    eng = TurnEngine(scan, ks, degree=spec.degree, aux=aux, complete_only=complete_only)
    delta = None
    if aux:
        delta = np.asarray(aux_coef, dtype=float) * eng.aux_scale
    return eng.demodulate(delta=delta).frame()
