"""Marks: is the table read at a few discrete azimuths per turn, and how many?

The azimuths of all readings are reduced to occupied bins of :data:`MARK_BIN_DEG` (1e-4°) with one
``bincount`` — O(n), no sort of the full log, and additive over chunks (a log read in chunks gives
the same answer as the log read whole) — and the clusters of occupied bins are found on those.
A log has marks when there are at most :data:`MAX_MARKS` clusters of readings, each narrower
than :data:`MAX_MARK_WIDTH_DEG` (encoder jitter at a mark is tolerated).
"""

from __future__ import annotations

import numpy as np

from .unwrap import MARK_BIN_DEG, MARK_TOL_DEG

MAX_MARKS = 64
MAX_MARK_WIDTH_DEG = 1.0
_NBINS = int(round(360.0 / MARK_BIN_DEG))


class MarkBins:
    """Occupied azimuth bins of the readings fed so far (unwrapped angles in radians)."""

    def __init__(self):
        self.occupied = np.zeros(_NBINS, bool)

    def feed(self, angle_rad: np.ndarray) -> None:
        if angle_rad.size == 0:
            return
        q = np.rad2deg(angle_rad)
        q *= 1.0 / MARK_BIN_DEG
        np.floor(q, out=q)  # bin number on the unwrapped angle, then modulo one turn (np.mod is slow)
        q -= _NBINS * np.floor(q * (1.0 / _NBINS))
        idx = q.astype(np.int64)
        idx[idx >= _NBINS] = 0  # rounding at the top of the turn
        if idx.size > _NBINS // 8:
            self.occupied |= np.bincount(idx, minlength=_NBINS) > 0
        else:
            self.occupied[idx] = True

    def count(self) -> int | None:
        """Number of marks per turn, or None for continuous sampling."""
        az = np.flatnonzero(self.occupied) * MARK_BIN_DEG  # sorted, occupied
        if az.size == 0:
            return None
        breaks = np.flatnonzero(np.diff(az) > MARK_TOL_DEG)
        lo = np.concatenate(([0], breaks + 1))
        hi = np.append(breaks, az.size - 1)
        width = az[hi] - az[lo]
        count = lo.size
        if count > 1 and az[0] + 360.0 - az[-1] <= MARK_TOL_DEG:  # the cluster around 0°/360°
            width[0] = width[0] + width[-1] + (az[0] + 360.0 - az[-1])
            width = width[:-1]
            count -= 1
        if count > MAX_MARKS or float(width.max()) > MAX_MARK_WIDTH_DEG:
            return None
        return int(count)
