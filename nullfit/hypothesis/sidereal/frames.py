r"""Frames and clocks of the sidereal model (derivations in ``docs/sky.md``).

* **Sun-centred frame** (X, Y, Z): Z along the Earth's rotation axis, X toward the vernal
  equinox, Y = Z × X; its axes are taken equal to the ICRS axes (the J2000 mean equator and
  equinox, to a few tens of milliarcseconds).
* **Laboratory frame** (x, y, z) = (south, east, up) at colatitude ``χ = 90° − latitude``
  (geodetic: z is the local vertical that defines the table plane).
* **Sidereal angle** ``w``: the right ascension of the zenith, i.e. the local mean sidereal
  time (astropy, offline) as an angle; east longitude included.
* **Annual phase** ``W = Ω⊕ (t − t_eq)``, ``t_eq`` the 2000 March equinox and
  ``Ω⊕ = 2π / sidereal year`` (the period of the orbit against the fixed sun-frame axes).

The rotation from the sun-centred frame to the lab is

.. math::

    R(χ, w) = \begin{pmatrix} \cos χ\cos w & \cos χ \sin w & -\sin χ\\
                              -\sin w & \cos w & 0 \\
                              \sin χ \cos w & \sin χ\sin w & \cos χ \end{pmatrix},

whose rows are the lab's south, east and up unit vectors written in sun-frame components.
"""

from __future__ import annotations

import math

import numpy as np

from ..earth import EARTH_ROTATION_RATE_RAD_S, unix_times
from ..offline import offline_astropy

__all__ = [
    "OBLIQUITY_DEG", "EQUINOX_2000_UNIX", "SIDEREAL_YEAR_S", "ANNUAL_RATE_RAD_S", "ORBITAL_BETA",
    "colatitude_rad", "sun_to_lab", "orbital_beta_circular", "orbital_beta_ephemeris", "annual_phase_rad",
    "sidereal_angle_rad", "cmb_velocity_m_s", "rotation_speed_m_s", "precession_matrix",
]

#: Obliquity of the ecliptic at J2000, 84381.406″ (IAU 2006 precession; recalled from memory,
#: checked against astropy's J2000 mean-ecliptic frame in the tests).
OBLIQUITY_DEG = 84381.406 / 3600.0

#: The 2000 March equinox, 2000-03-20 07:35:15 UTC, as Unix seconds: the instant when the Sun's
#: apparent geocentric ecliptic longitude (true equinox of date) crosses 0°, found with astropy
#: (``get_sun`` → ``GeocentricTrueEcliptic``) to the second; almanacs list 07:35 UT (recalled).
EQUINOX_2000_UNIX = 953_537_715.0

#: Sidereal year at J2000, 365.256363004 days of 86400 s (recalled from memory; the tests check
#: against astropy's ephemeris that the orbit returns to the same direction in fixed axes after it).
SIDEREAL_YEAR_S = 365.256363004 * 86400.0

#: Ω⊕: mean orbital angular rate against fixed axes, rad/s.
ANNUAL_RATE_RAD_S = 2.0 * math.pi / SIDEREAL_YEAR_S

#: β⊕: mean orbital speed over c, 29.78 km/s / c (common practice).
ORBITAL_BETA = 9.93e-5

# WGS84 ellipsoid (common practice): equatorial radius and flattening.
_WGS84_A_M = 6_378_137.0
_WGS84_F = 1.0 / 298.257223563


def colatitude_rad(latitude_deg: float) -> float:
    """``χ = 90° − latitude`` in radians (geodetic latitude, north-positive)."""
    lat = float(latitude_deg)
    if not (math.isfinite(lat) and -90.0 <= lat <= 90.0):
        raise ValueError(f"latitude_deg must lie in [-90, 90], not {latitude_deg!r}")
    return math.radians(90.0 - lat)


def sun_to_lab(chi, w) -> np.ndarray:
    """``R(χ, w)``: sun-frame components → lab (south, east, up) components; shape ``(..., 3, 3)``."""
    w = np.asarray(w, dtype=float)
    cc, sc = np.cos(chi), np.sin(chi)
    cw, sw = np.cos(w), np.sin(w)
    zero = np.zeros_like(w)
    rows = [
        [cc * cw, cc * sw, -sc + zero],
        [-sw, cw, zero],
        [sc * cw, sc * sw, cc + zero],
    ]
    return np.stack([np.stack(r, axis=-1) for r in rows], axis=-2)


def orbital_beta_circular(annual_phase_rad) -> np.ndarray:
    """``β⃗⊕ = β⊕ (sin W, −cos η cos W, −sin η cos W)`` (circular orbit), shape ``(..., 3)``."""
    W = np.asarray(annual_phase_rad, dtype=float)
    eta = math.radians(OBLIQUITY_DEG)
    return ORBITAL_BETA * np.stack([np.sin(W), -math.cos(eta) * np.cos(W), -math.sin(eta) * np.cos(W)], axis=-1)


def orbital_beta_ephemeris(times=None, *, epoch_unix=None, time_s=None,
                           node_spacing_s: float | None = 3600.0) -> np.ndarray:
    """Earth's barycentric velocity over c from astropy's builtin ephemeris, shape ``(n, 3)``.

    Uses :class:`nullfit.hypothesis.velocities.EarthOrbit` (ICRS axes, offline).  For many
    times it is evaluated on nodes ``node_spacing_s`` apart and interpolated linearly; the error
    is set by the curvature of the annual motion, ``h² v Ω⊕² / 8`` ≈ 2 mm/s for hourly nodes
    (measured: 2.2 mm/s), comparable to the builtin ephemeris's own error (a few mm/s).
    ``None`` evaluates every time.
    """
    from ...core.conventions import SPEED_OF_LIGHT
    from ..velocities import EarthOrbit

    epoch, rel = unix_times(times, epoch_unix, time_s)
    nodes = rel
    if node_spacing_s is not None and node_spacing_s > 0:
        lo, hi = float(rel.min()), float(rel.max())
        n_nodes = max(int(math.ceil((hi - lo) / node_spacing_s)) + 1, 2)
        if rel.size > n_nodes:
            nodes = np.linspace(lo, hi, n_nodes)
    v = EarthOrbit().at(epoch_unix=epoch, time_s=nodes) / SPEED_OF_LIGHT
    if nodes is rel:
        return v
    return np.stack([np.interp(rel, nodes, v[:, j]) for j in range(3)], axis=1)


def annual_phase_rad(times=None, *, epoch_unix=None, time_s=None) -> np.ndarray:
    """``W = Ω⊕ (t − t_eq)`` at UTC times (Unix seconds, or ``epoch_unix`` + ``time_s``)."""
    epoch, rel = unix_times(times, epoch_unix, time_s)
    return ANNUAL_RATE_RAD_S * ((epoch - EQUINOX_2000_UNIX) + rel)


def sidereal_angle_rad(times=None, *, longitude_deg: float, epoch_unix=None, time_s=None) -> np.ndarray:
    """``w``: local mean sidereal time (astropy, offline) at east longitude, in radians ``[0, 2π)``."""
    from ..earth import sidereal_time_deg

    epoch, rel = unix_times(times, epoch_unix, time_s)
    st = sidereal_time_deg(epoch_unix=epoch, time_s=rel, longitude_deg=float(longitude_deg), kind="mean")
    return np.mod(np.deg2rad(np.atleast_1d(st)), 2.0 * math.pi)


def cmb_velocity_m_s() -> np.ndarray:
    """The CMB dipole (barycentre relative to the CMB frame) in sun-frame axes, m/s.

    Direction and speed of :class:`nullfit.hypothesis.velocities.CMBDipole`; the galactic →
    ICRS conversion runs in astropy, offline.
    """
    from ..velocities import CMBDipole

    cmb = CMBDipole()
    with offline_astropy():
        unit = cmb.unit_vector
    return cmb.speed_m_s * unit


def rotation_speed_m_s(latitude_deg: float, elevation_m: float = 0.0) -> float:
    """Eastward speed of a site carried by the Earth's spin: ``ω ρ`` with ρ the distance from the axis.

    ρ on the WGS84 ellipsoid: ``(N + h) cos φ``, ``N = a / sqrt(1 − e² sin² φ)``.
    """
    phi = math.pi / 2.0 - colatitude_rad(latitude_deg)
    e2 = _WGS84_F * (2.0 - _WGS84_F)
    n = _WGS84_A_M / math.sqrt(1.0 - e2 * math.sin(phi) ** 2)
    return EARTH_ROTATION_RATE_RAD_S * (n + float(elevation_m)) * math.cos(phi)


def precession_matrix(times=None, *, epoch_unix=None, time_s=None) -> np.ndarray:
    """Frame bias and precession, ICRS (J2000) axes → mean equator and equinox of date, ``(n, 3, 3)``.

    IAU 2006 (``erfa.pmat06``, TT; times through astropy, offline).  The local mean sidereal
    time measures the zenith's right ascension from the *mean equinox of date*; sun-frame
    vectors and tensors given in J2000 axes are rotated by this matrix before the lab rotation.
    """
    import erfa
    from astropy.time import Time

    epoch, rel = unix_times(times, epoch_unix, time_s)
    with offline_astropy():
        tt = Time(np.full(rel.shape, epoch), rel, format="unix", scale="utc").tt
        return np.asarray(erfa.pmat06(tt.jd1, tt.jd2), dtype=float).reshape(-1, 3, 3)
