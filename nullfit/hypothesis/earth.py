"""Earth orientation at given times: Unix-time inputs, the Earth rotation angle and the
celestial-to-intermediate matrix (via astropy/erfa, offline), and sidereal time.

For each time a GCRS vector is rotated to the terrestrial frame with the IAU 2006/2000A
celestial-to-intermediate matrix (``erfa.c2i06a``, TT) and the Earth rotation angle
(``erfa.era00``, UT1; times converted by astropy).  Polar motion (< 0.5″) is neglected.
Every astropy call runs inside :func:`nullfit.hypothesis.offline.offline_astropy`.
"""

from __future__ import annotations

import math

import numpy as np

from .offline import check_eop_range, offline_astropy
from .site import finite_number

#: (IAU 2000 Resolution B1.8; IERS Conventions 2010, eq. 5.15).
EARTH_ROTATION_RATE_RAD_S = 2.0 * math.pi * 1.00273781191135448 / 86400.0


# ============================================================================ time
def unix_times(times=None, epoch_unix=None, time_s=None) -> tuple[float, np.ndarray]:
    """Return ``(epoch_unix, relative seconds)`` from one of the accepted time inputs.

    ``times``: Unix seconds (UTC, float array) or an astropy ``Time``; or ``epoch_unix`` plus
    ``time_s`` (seconds relative to the epoch) — the precise form for long scans.
    """
    if times is not None:
        if epoch_unix is not None or time_s is not None:
            raise ValueError("give either times or epoch_unix (+ time_s), not both")
        if hasattr(times, "jd1") and hasattr(times, "scale"):  # astropy Time
            from astropy.time import Time

            with offline_astropy():
                t = times.utc
                epoch = float(np.floor(np.min(np.atleast_1d(t.unix))))
                rel = np.atleast_1d((t - Time(epoch, format="unix", scale="utc")).to_value("s"))
            return epoch, np.asarray(rel, dtype=float)
        arr = np.atleast_1d(np.asarray(times, dtype=float))
        if arr.size == 0 or not np.all(np.isfinite(arr)):
            raise ValueError("times must be a non-empty array of finite Unix seconds")
        epoch = float(np.floor(arr.min()))
        return epoch, arr - epoch
    if epoch_unix is None:
        if time_s is not None:
            raise ValueError("time_s are relative seconds: give epoch_unix (Unix seconds, UTC) as well")
        raise ValueError("give times (Unix seconds) or epoch_unix (+ time_s relative seconds)")
    epoch = finite_number(epoch_unix, "epoch_unix")
    rel = np.zeros(1) if time_s is None else np.atleast_1d(np.asarray(time_s, dtype=float))
    if rel.size == 0 or not np.all(np.isfinite(rel)):
        raise ValueError("time_s must be a non-empty array of finite seconds")
    return epoch, rel


class EarthOrientation:
    """Earth orientation at UTC times ``epoch + rel``: ERA (UT1) and the GCRS→CIRS matrix (TT)."""

    def __init__(self, epoch: float, rel: np.ndarray):
        import erfa
        from astropy.time import Time

        with offline_astropy():
            t = Time(np.full(rel.shape, epoch), rel, format="unix", scale="utc")
            check_eop_range(t)
            ut1 = t.ut1
            tt = t.tt
            self.era = np.asarray(erfa.era00(ut1.jd1, ut1.jd2), dtype=float)
            self.c2i = np.asarray(erfa.c2i06a(tt.jd1, tt.jd2), dtype=float).reshape(-1, 3, 3)
        self.time = t
        self.n = rel.size

    def gcrs_to_terrestrial(self, v: np.ndarray) -> np.ndarray:
        w = np.einsum("nij,nj->ni", self.c2i, np.broadcast_to(v, (self.n, 3)))
        c, s = np.cos(self.era), np.sin(self.era)
        return np.stack([c * w[:, 0] + s * w[:, 1], -s * w[:, 0] + c * w[:, 1], w[:, 2]], axis=1)

    def terrestrial_to_gcrs(self, w: np.ndarray) -> np.ndarray:
        w = np.broadcast_to(w, (self.n, 3))
        c, s = np.cos(self.era), np.sin(self.era)
        x = np.stack([c * w[:, 0] - s * w[:, 1], s * w[:, 0] + c * w[:, 1], w[:, 2]], axis=1)
        return np.einsum("nji,nj->ni", self.c2i, x)


def sidereal_time_deg(times=None, longitude_deg: float = 0.0, *, kind: str = "mean", model: str | None = None,
                      epoch_unix=None, time_s=None):
    """Local (or, for longitude 0, Greenwich) sidereal time in degrees, via astropy.

    Parameters
    ----------
    times
        Unix seconds (UTC) or an astropy ``Time`` in any scale (a ``Time`` in UT1 is used as
        is — useful for published examples given in UT).  Or ``epoch_unix`` + ``time_s``.
    longitude_deg
        East-positive longitude in degrees.
    kind
        ``"mean"`` or ``"apparent"``.
    model
        astropy model name (e.g. ``"IAU1982"``, ``"IAU2006"``); default astropy's latest.
    """
    import astropy.units as u
    from astropy.time import Time

    with offline_astropy():
        if times is not None and hasattr(times, "jd1") and hasattr(times, "scale"):
            t = times
        else:
            epoch, rel = unix_times(times, epoch_unix, time_s)
            t = Time(np.full(rel.shape, epoch), rel, format="unix", scale="utc")
            if times is not None and np.ndim(times) == 0:
                t = t[0]
        check_eop_range(t)
        st = t.sidereal_time(kind, longitude_deg * u.deg, model=model).to_value(u.deg)
    return float(st) if np.ndim(st) == 0 else np.asarray(st)
