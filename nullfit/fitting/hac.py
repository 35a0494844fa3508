"""Newey–West (HAC) covariance pieces: the lag rule and a streaming Bartlett "meat"."""

from __future__ import annotations

import math

import numpy as np


def newey_west_lags(n: int) -> int:
    """Newey–West (1994) rule of thumb for the Bartlett kernel: ``floor(4 (n/100)^(2/9))``
    (statsmodels uses the same default)."""
    return int(math.floor(4.0 * (n / 100.0) ** (2.0 / 9.0)))


class BartlettMeat:
    """Streaming Newey–West "meat" ``S = Σ_{|j|≤L} (1 − |j|/(L+1)) Γ_j`` of a score series.

    ``Γ_j = Σ_t u_t u_{t−j}ᵀ`` (sums, not means, as in statsmodels).  Instead of L+1 lagged
    products it uses the identity ::

        Σ_{|j|≤L} (L+1−|j|) Γ_j = Σ_e v_e v_eᵀ,     v_e = Σ_{s=e−L}^{e} u_s,

    over all windows of length L+1 that overlap the series (u = 0 outside it): a pair
    ``(s, s')`` with ``|s − s'| ≤ L`` lies in exactly ``L + 1 − |s − s'|`` such windows.
    The moving sums come from a cumulative sum per chunk (cost O(n p + n p²), independent of L).
    Feed the scores in time order with :meth:`add`, then call :meth:`finish`.
    """

    def __init__(self, p: int, lags: int):
        self.L = int(lags)
        self.p = int(p)
        self.S = np.zeros((p, p))
        self.tail = np.zeros((p, self.L))

    def add(self, U: np.ndarray, *, rows_first: bool = True) -> None:
        """Add scores ``U`` of shape ``(m, p)`` (or ``(p, m)`` with ``rows_first=False``)."""
        U = np.asarray(U, dtype=float)
        if rows_first:
            U = U.T
        if self.L == 0:
            self.S += U @ U.T
            return
        m = U.shape[1]
        ext = np.concatenate([self.tail, U], axis=1)
        C = np.empty((self.p, ext.shape[1] + 1))
        C[:, 0] = 0.0
        np.cumsum(ext, axis=1, out=C[:, 1:])
        W = C[:, self.L + 1:] - C[:, :m]
        self.S += W @ W.T
        self.tail = ext[:, -self.L:].copy()

    def finish(self) -> np.ndarray:
        if self.L:
            self.add(np.zeros((self.p, self.L)), rows_first=False)
            self.tail = np.zeros((self.p, self.L))
        return self.S / (self.L + 1)
