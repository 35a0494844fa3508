r"""Site, time and sky: velocity hypotheses and their projection onto the table plane.

Frames and conventions
----------------------
* Velocities are 3-vectors in m/s along ICRS-aligned (GCRS) Cartesian axes: x toward
  RA = 0°, Dec = 0°; z toward the celestial pole.
* Every preset is the velocity **of the laboratory (or of the body carrying it) relative to a
  hypothesised rest frame**; the "wind" blows the other way.  The 2θ signal depends on the wind
  *axis* only (``cos 2ψ`` is even), so the sign never matters here.
* The site is geodetic (WGS84): latitude north-positive, longitude **east-positive**, elevation
  in metres.  The table plane is the local horizontal (normal = ellipsoid normal).
* Compass azimuths run from north through east.  The table angle θ is measured from the table's
  reference mark in the table's positive sense; with the mark's azimuth ``m`` a compass azimuth
  ``α`` is at ``θ = α − m`` for a table whose positive sense is clockwise seen from above, and
  ``θ = m − α`` for a counterclockwise one (:meth:`Site.table_angle_deg`).
* The predicted term is ``A(t) cos(2(θ − φ(t)))`` with ``A = apparatus.wind_amplitude(v_h)``
  and φ the table angle at which arm 1 lies along the in-plane wind axis, reduced to
  ``[0°, 180°)``.  Equivalently, with ``v_0``, ``v_90`` the in-plane components along θ = 0° and
  θ = 90°: ``c₂ + i s₂ = (A / v_h²)(v_0 + i v_90)²`` — a smooth, quadratic function of the
  velocity, which is why it interpolates well in time.  Without the mark's azimuth only the
  in-plane speed (hence the amplitude) is known; a table-frame phase raises ValueError.

From sky to horizon (the fast path)
-----------------------------------
For each time the GCRS vector is rotated to the terrestrial frame with the IAU 2006/2000A
celestial-to-intermediate matrix (``erfa.c2i06a``, TT) and the Earth rotation angle
(``erfa.era00``, UT1; times converted by astropy), then resolved on the local east/north/up
unit vectors.  Polar motion (< 0.5″) is neglected.  This is a rotation of a *direction*: no
aberration or light deflection is applied (they concern apparent positions of sources, not a
velocity vector); ``tests/test_sky.py`` checks the result against astropy's ``AltAz`` frame,
which does include them (≤ 21″ difference).

The slow parts (precession–nutation matrix, orbital ephemeris) are evaluated on a grid of nodes
no more than ``node_spacing_s`` (default 60 s) apart when a scan has more samples than nodes,
and the east/north/up components are interpolated linearly to every sample.  They vary on the
sidereal-day scale, so each component's interpolation error is below ``(2πΔt/1 day)²/8 ≈ 2.4e-6``
of the speed for 60 s nodes, and amplitudes (quadratic in the velocity) move by about twice that
(measured: 3e-6 for a one-hour scan).  ``node_spacing_s=None`` evaluates every sample exactly
(about 80 µs per sample).

No network
----------
Every astropy call runs inside :func:`nullfit._astropy_setup.offline_astropy`: bundled IERS and
leap-second tables only, never a download; dates beyond the tables give an
:class:`~nullfit._astropy_setup.EarthOrientationWarning`, not an error or a hang.
"""

from __future__ import annotations

import functools
import math
import re
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from nullfit._astropy_setup import EarthOrientationWarning, check_eop_range, offline_astropy
from nullfit.summary import Described, Summary

__all__ = [
    "Site",
    "Velocity",
    "EarthOrbit",
    "EarthRotation",
    "CMBDipole",
    "CustomVelocity",
    "VelocitySum",
    "FixedSpeed",
    "LabWind",
    "HorizontalVelocity",
    "horizontal_velocity",
    "parse_velocity",
    "sidereal_time_deg",
    "orbital",
    "rotation",
    "cmb",
    "custom",
    "lab_wind",
    "EarthOrientationWarning",
    "EARTH_ROTATION_RATE_RAD_S",
    "CMB_DIPOLE_SPEED_M_S",
    "CMB_DIPOLE_L_DEG",
    "CMB_DIPOLE_B_DEG",
    "TABLE_SENSES",
]

#: Rate of the Earth rotation angle, rad/s: ERA = 2π(0.7790572732640 + 1.00273781191135448 D_UT1)
#: (IAU 2000 Resolution B1.8; IERS Conventions 2010, eq. 5.15).
EARTH_ROTATION_RATE_RAD_S = 2.0 * math.pi * 1.00273781191135448 / 86400.0

#: Velocity of the Solar-System barycentre relative to the CMB rest frame (the CMB dipole):
#: 369.82 ± 0.11 km/s toward galactic (l, b) = (264.021° ± 0.011°, 48.253° ± 0.005°).
#: Source: Planck Collaboration, "Planck 2018 results. I. Overview and the cosmological legacy
#: of Planck", A&A 641, A1 (2020), solar-dipole table.  (Equatorial: RA ≈ 167.942°, Dec ≈ −6.944°.)
CMB_DIPOLE_SPEED_M_S = 369.82e3
CMB_DIPOLE_L_DEG = 264.021
CMB_DIPOLE_B_DEG = 48.253

#: Positive sense of the turntable seen from above.
TABLE_SENSES = ("clockwise", "counterclockwise")
_SENSE_ALIASES = {"clockwise": "clockwise", "cw": "clockwise", "counterclockwise": "counterclockwise",
                  "anticlockwise": "counterclockwise", "ccw": "counterclockwise"}
_SITE_KEYS = ("latitude_deg", "longitude_deg", "elevation_m", "mark_azimuth_deg", "table_sense", "name")


# ============================================================================ site
def _finite(value, name: str) -> float:
    if isinstance(value, bool) or value is None:
        raise TypeError(f"{name} must be a number, not {value!r}")
    v = float(value)
    if not math.isfinite(v):
        raise ValueError(f"{name} must be finite, not {value!r}")
    return v


def _unit_compass(az_deg: float) -> np.ndarray:
    """East/north/up unit vector of a horizontal direction at compass azimuth ``az_deg``."""
    a = math.radians(az_deg)
    return np.array([math.sin(a), math.cos(a), 0.0])


@dataclass(frozen=True)
class Site(Described):
    """Where the table stands and how it is oriented.

    Parameters
    ----------
    latitude_deg, longitude_deg
        Geodetic (WGS84) latitude, north-positive, and longitude, **east-positive**, in degrees.
    elevation_m
        Height above the WGS84 ellipsoid, metres (only the Earth-rotation preset uses it).
    mark_azimuth_deg
        Compass azimuth (from north through east, degrees) of the table's reference mark, i.e.
        of arm 1 at θ = 0.  Without it only lab-frame statements (amplitudes) are possible.
    table_sense
        The table's positive sense seen from above: ``"clockwise"`` (θ adds to the compass
        azimuth) or ``"counterclockwise"`` (θ subtracts).  Aliases cw/ccw/anticlockwise.
    name
        A label.
    """

    latitude_deg: float
    longitude_deg: float
    elevation_m: float = 0.0
    mark_azimuth_deg: float | None = None
    table_sense: str = "clockwise"
    name: str | None = None

    def __post_init__(self):
        set_ = object.__setattr__
        lat = _finite(self.latitude_deg, "latitude_deg")
        if not -90.0 <= lat <= 90.0:
            raise ValueError(f"latitude_deg must lie in [-90, 90], not {lat}")
        lon = _finite(self.longitude_deg, "longitude_deg")
        if not -180.0 <= lon <= 360.0:
            raise ValueError(f"longitude_deg (east-positive) must lie in [-180, 360], not {lon}")
        set_(self, "latitude_deg", lat)
        set_(self, "longitude_deg", lon)
        set_(self, "elevation_m", _finite(self.elevation_m, "elevation_m"))
        if self.mark_azimuth_deg is not None:
            set_(self, "mark_azimuth_deg", _finite(self.mark_azimuth_deg, "mark_azimuth_deg"))
        sense = _SENSE_ALIASES.get(str(self.table_sense).strip().lower())
        if sense is None:
            raise ValueError(f"table_sense must be 'clockwise' or 'counterclockwise', not {self.table_sense!r}")
        set_(self, "table_sense", sense)
        if self.name is not None:
            set_(self, "name", str(self.name))

    @classmethod
    def from_mapping(cls, d: Mapping[str, Any]) -> "Site":
        """Build from a manifest's ``[site]`` table (keys as the constructor's; unknown keys raise)."""
        if not isinstance(d, Mapping):
            raise TypeError(f"[site] must be a table (mapping), not {type(d).__name__}")
        unknown = sorted(set(d) - set(_SITE_KEYS))
        if unknown:
            raise ValueError(f"unknown [site] key(s) {unknown}; allowed: {list(_SITE_KEYS)}")
        missing = [k for k in ("latitude_deg", "longitude_deg") if k not in d]
        if missing:
            raise ValueError(f"[site] needs {missing}")
        return cls(**{k: d[k] for k in _SITE_KEYS if k in d})

    @property
    def has_mark(self) -> bool:
        """True when the reference mark's azimuth is known (table-frame phases possible)."""
        return self.mark_azimuth_deg is not None

    def _require_mark(self, what: str) -> float:
        if self.mark_azimuth_deg is None:
            raise ValueError(
                f"{what} needs the compass azimuth of the table's reference mark: give "
                "Site(mark_azimuth_deg=...) / mark_azimuth_deg in [site]; without it only "
                "lab-frame statements (amplitudes) are possible"
            )
        return self.mark_azimuth_deg

    @property
    def _sense_sign(self) -> float:
        return 1.0 if self.table_sense == "clockwise" else -1.0

    def table_angle_deg(self, azimuth_deg):
        """Table angle θ (degrees, ``[0, 360)``) that points arm 1 at compass azimuth ``azimuth_deg``."""
        m = self._require_mark("converting a compass azimuth to a table angle")
        theta = np.mod(self._sense_sign * (np.asarray(azimuth_deg, dtype=float) - m), 360.0)
        return float(theta) if theta.ndim == 0 else theta

    def azimuth_deg(self, table_angle_deg):
        """Compass azimuth (degrees, ``[0, 360)``) of arm 1 at table angle ``table_angle_deg``."""
        m = self._require_mark("converting a table angle to a compass azimuth")
        az = np.mod(m + self._sense_sign * np.asarray(table_angle_deg, dtype=float), 360.0)
        return float(az) if az.ndim == 0 else az

    def table_axes_enu(self) -> tuple[np.ndarray, np.ndarray]:
        """East/north/up unit vectors of the table directions θ = 0° and θ = 90°."""
        m = self._require_mark("a table-frame projection")
        return _unit_compass(m), _unit_compass(m + self._sense_sign * 90.0)

    def enu_basis(self) -> np.ndarray:
        """Rows: local east, north, up unit vectors in terrestrial (ITRS) Cartesian axes."""
        phi, lam = math.radians(self.latitude_deg), math.radians(self.longitude_deg)
        sp, cp, sl, cl = math.sin(phi), math.cos(phi), math.sin(lam), math.cos(lam)
        return np.array([[-sl, cl, 0.0], [-sp * cl, -sp * sl, cp], [cp * cl, cp * sl, sp]])

    def itrs_position_m(self) -> np.ndarray:
        """Geocentric terrestrial position (x, y, z) in metres (WGS84, via astropy)."""
        return _itrs_position(self.latitude_deg, self.longitude_deg, self.elevation_m)

    def to_dict(self) -> dict:
        return {
            "latitude_deg": self.latitude_deg,
            "longitude_deg": self.longitude_deg,
            "elevation_m": self.elevation_m,
            "mark_azimuth_deg": self.mark_azimuth_deg,
            "table_sense": self.table_sense,
            "name": self.name,
        }

    def summary(self) -> Summary:
        rows = (
            ("latitude (geodetic)", self.latitude_deg, "deg"),
            ("longitude (east-positive)", self.longitude_deg, "deg"),
            ("elevation", self.elevation_m, "m"),
            ("reference-mark azimuth", self.mark_azimuth_deg, "deg from N through E"),
            ("table positive sense (from above)", self.table_sense, ""),
        )
        notes = () if self.has_mark else ("no mark azimuth: only lab-frame statements (amplitudes)",)
        return Summary(title="Site" + (f": {self.name}" if self.name else ""), rows=rows, notes=notes)


@functools.lru_cache(maxsize=64)
def _itrs_position(lat: float, lon: float, h: float) -> np.ndarray:
    import astropy.units as u
    from astropy.coordinates import EarthLocation

    loc = EarthLocation.from_geodetic(lon * u.deg, lat * u.deg, h * u.m, ellipsoid="WGS84")
    pos = np.array([loc.x.to_value(u.m), loc.y.to_value(u.m), loc.z.to_value(u.m)])
    pos.setflags(write=False)
    return pos


# ============================================================================ time
def _unix_times(times=None, epoch_unix=None, time_s=None) -> tuple[float, np.ndarray]:
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
    epoch = _finite(epoch_unix, "epoch_unix")
    rel = np.zeros(1) if time_s is None else np.atleast_1d(np.asarray(time_s, dtype=float))
    if rel.size == 0 or not np.all(np.isfinite(rel)):
        raise ValueError("time_s must be a non-empty array of finite seconds")
    return epoch, rel


class _EarthOrientation:
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
            epoch, rel = _unix_times(times, epoch_unix, time_s)
            t = Time(np.full(rel.shape, epoch), rel, format="unix", scale="utc")
            if times is not None and np.ndim(times) == 0:
                t = t[0]
        check_eop_range(t)
        st = t.sidereal_time(kind, longitude_deg * u.deg, model=model).to_value(u.deg)
    return float(st) if np.ndim(st) == 0 else np.asarray(st)


# ============================================================================ velocities
class Velocity:
    """A velocity hypothesis on the sky: the lab's velocity relative to a hypothesised rest frame.

    Subclasses implement ``_gcrs(eo, site) -> (n, 3)`` m/s.  Add models with ``+``; fix the
    speed (keeping the direction history) with :meth:`with_speed`.
    """

    needs_site = False

    @property
    def spec(self) -> str:  # pragma: no cover - abstract
        raise NotImplementedError

    @property
    def label(self) -> str:  # pragma: no cover - abstract
        raise NotImplementedError

    def _gcrs(self, eo: _EarthOrientation, site: Site | None) -> np.ndarray:  # pragma: no cover
        raise NotImplementedError

    def at(self, times=None, site: Site | None = None, *, epoch_unix=None, time_s=None) -> np.ndarray:
        """Velocity (n, 3) in m/s along ICRS-aligned axes at the given times."""
        if self.needs_site and site is None:
            raise ValueError(f"{self.label} needs a Site")
        epoch, rel = _unix_times(times, epoch_unix, time_s)
        return self._gcrs(_EarthOrientation(epoch, rel), site)

    def __add__(self, other: "Velocity") -> "VelocitySum":
        if not isinstance(other, Velocity):
            return NotImplemented
        parts = (self.parts if isinstance(self, VelocitySum) else (self,)) + (
            other.parts if isinstance(other, VelocitySum) else (other,)
        )
        return VelocitySum(parts)

    def with_speed(self, speed_m_s: float) -> "FixedSpeed":
        """Same direction at every time, magnitude fixed to ``speed_m_s``."""
        return FixedSpeed(self, speed_m_s)


def _speed(value, name="speed_m_s", allow_none=False):
    if value is None and allow_none:
        return None
    v = _finite(value, name)
    if v < 0:
        raise ValueError(f"{name} must be non-negative, not {v}")
    return v


@dataclass(frozen=True)
class EarthOrbit(Velocity):
    """Earth's barycentric velocity (astropy ``get_body_barycentric_posvel``, builtin ephemeris).

    The builtin (ERFA ``epv00``) ephemeris needs no download; against JPL DE405 over 1900-2100
    its barycentric velocity error is 1.4 mm/s rms, 4.9 mm/s max (ERFA ``epv00`` notes), and
    it degrades outside that range (an :class:`EarthOrientationWarning` says so).  Annual mean
    speed ≈ 29.78 km/s.
    """

    @property
    def spec(self) -> str:
        return "orbital"

    @property
    def label(self) -> str:
        return "Earth orbital velocity (barycentric)"

    def _gcrs(self, eo, site):
        import astropy.units as u
        from astropy.coordinates import get_body_barycentric_posvel

        with offline_astropy():
            _, vel = get_body_barycentric_posvel("earth", eo.time, ephemeris="builtin")
            return np.atleast_2d(vel.xyz.to_value(u.m / u.s).T).reshape(eo.n, 3)


@dataclass(frozen=True)
class EarthRotation(Velocity):
    """Velocity of the site due to the Earth's rotation: ``ω ẑ × r`` (due east, ``ω ρ``).

    ``ω`` is the rate of the Earth rotation angle (:data:`EARTH_ROTATION_RATE_RAD_S`), ``ρ`` the
    site's distance from the rotation axis (≈ 465 m/s on the equator).
    """

    needs_site = True

    @property
    def spec(self) -> str:
        return "rotation"

    @property
    def label(self) -> str:
        return "Earth rotation at the site"

    def _gcrs(self, eo, site):
        if site is None:
            raise ValueError("the Earth-rotation velocity needs a Site")
        x, y, _ = site.itrs_position_m()
        w = EARTH_ROTATION_RATE_RAD_S * np.array([-y, x, 0.0])
        return eo.terrestrial_to_gcrs(w)


@functools.lru_cache(maxsize=64)
def _galactic_to_icrs(l_deg: float, b_deg: float) -> tuple[float, float]:
    import astropy.units as u
    from astropy.coordinates import SkyCoord

    c = SkyCoord(l=l_deg * u.deg, b=b_deg * u.deg, frame="galactic").icrs
    return float(c.ra.deg), float(c.dec.deg)


def _radec_unit(ra_deg: float, dec_deg: float) -> np.ndarray:
    a, d = math.radians(ra_deg), math.radians(dec_deg)
    return np.array([math.cos(d) * math.cos(a), math.cos(d) * math.sin(a), math.sin(d)])


@dataclass(frozen=True)
class CustomVelocity(Velocity):
    """A fixed velocity on the sky: speed plus a direction as (RA, Dec) ICRS **or** galactic (l, b).

    ``speed_m_s`` may be None when the speed is supplied later (``with_speed`` / ``speed_m_s=``).
    """

    speed_m_s: float | None = None
    ra_deg: float | None = None
    dec_deg: float | None = None
    l_deg: float | None = None
    b_deg: float | None = None
    name: str | None = None

    def __post_init__(self):
        eq = self.ra_deg is not None or self.dec_deg is not None
        gal = self.l_deg is not None or self.b_deg is not None
        if eq == gal:
            raise ValueError("give the direction as ra_deg and dec_deg, or as l_deg and b_deg (exactly one pair)")
        pair = ("ra_deg", "dec_deg") if eq else ("l_deg", "b_deg")
        if any(getattr(self, k) is None for k in pair):
            raise ValueError(f"give both {pair[0]} and {pair[1]}")
        for k in pair:
            object.__setattr__(self, k, _finite(getattr(self, k), k))
        lat = self.dec_deg if eq else self.b_deg
        if not -90.0 <= lat <= 90.0:
            raise ValueError(f"{pair[1]} must lie in [-90, 90], not {lat}")
        object.__setattr__(self, "speed_m_s", _speed(self.speed_m_s, allow_none=True))

    @property
    def radec_deg(self) -> tuple[float, float]:
        """Direction as ICRS (RA, Dec) in degrees (galactic input converted by astropy)."""
        if self.ra_deg is not None:
            return self.ra_deg, self.dec_deg
        return _galactic_to_icrs(self.l_deg, self.b_deg)

    @property
    def unit_vector(self) -> np.ndarray:
        return _radec_unit(*self.radec_deg)

    def _dir_spec(self) -> str:
        if self.ra_deg is not None:
            return f"ra={self.ra_deg:g},dec={self.dec_deg:g}"
        return f"l={self.l_deg:g},b={self.b_deg:g}"

    @property
    def spec(self) -> str:
        sp = "" if self.speed_m_s is None else f",speed={self.speed_m_s:g}"
        return f"custom:{self._dir_spec()}{sp}"

    @property
    def label(self) -> str:
        if self.name:
            return self.name
        sp = "speed unset" if self.speed_m_s is None else f"{self.speed_m_s:g} m/s"
        return f"custom velocity toward {self._dir_spec()} ({sp})"

    def _gcrs(self, eo, site):
        if self.speed_m_s is None:
            raise ValueError(f"{self.label}: no speed given; pass speed_m_s")
        return np.broadcast_to(self.speed_m_s * self.unit_vector, (eo.n, 3)).copy()


@dataclass(frozen=True)
class CMBDipole(CustomVelocity):
    """The CMB dipole: the Solar-System barycentre's velocity relative to the CMB rest frame.

    Planck 2018 (A&A 641, A1 (2020)): 369.82 km/s toward galactic (l, b) = (264.021°, 48.253°).
    The lab's velocity relative to the CMB is ``cmb() + orbital() + rotation()``.
    """

    speed_m_s: float | None = CMB_DIPOLE_SPEED_M_S
    l_deg: float | None = CMB_DIPOLE_L_DEG
    b_deg: float | None = CMB_DIPOLE_B_DEG
    name: str | None = "CMB dipole (Planck 2018, barycentre vs CMB)"

    @property
    def spec(self) -> str:
        default = (self.speed_m_s, self.l_deg, self.b_deg) == (CMB_DIPOLE_SPEED_M_S, CMB_DIPOLE_L_DEG, CMB_DIPOLE_B_DEG)
        return "cmb" if default else super().spec


@dataclass(frozen=True)
class VelocitySum(Velocity):
    """Vector sum of velocity models, e.g. ``cmb() + orbital() + rotation()``."""

    parts: tuple = ()

    def __post_init__(self):
        parts = tuple(self.parts)
        if not parts or not all(isinstance(p, Velocity) for p in parts):
            raise ValueError("VelocitySum needs one or more Velocity models")
        object.__setattr__(self, "parts", parts)

    @property
    def needs_site(self) -> bool:  # type: ignore[override]
        return any(p.needs_site for p in self.parts)

    @property
    def spec(self) -> str:
        return "+".join(p.spec for p in self.parts)

    @property
    def label(self) -> str:
        return " + ".join(p.label for p in self.parts)

    def _gcrs(self, eo, site):
        return sum(p._gcrs(eo, site) for p in self.parts)


@dataclass(frozen=True)
class FixedSpeed(Velocity):
    """Direction history of ``base``, magnitude fixed to ``speed_m_s`` at every time."""

    base: Velocity
    speed_m_s: float

    def __post_init__(self):
        if not isinstance(self.base, Velocity):
            raise TypeError("FixedSpeed.base must be a Velocity")
        object.__setattr__(self, "speed_m_s", _speed(self.speed_m_s))

    @property
    def needs_site(self) -> bool:  # type: ignore[override]
        return self.base.needs_site

    @property
    def spec(self) -> str:
        return self.base.spec

    @property
    def label(self) -> str:
        return f"direction of [{self.base.label}] at {self.speed_m_s:g} m/s"

    def _gcrs(self, eo, site):
        base = self.base
        if isinstance(base, CustomVelocity) and base.speed_m_s is None:
            return np.broadcast_to(self.speed_m_s * base.unit_vector, (eo.n, 3)).copy()
        v = base._gcrs(eo, site)
        norm = np.linalg.norm(v, axis=1, keepdims=True)
        if np.any(norm == 0):
            raise ValueError(f"{base.label} is zero at some time: no direction to scale")
        return self.speed_m_s * v / norm


@dataclass(frozen=True)
class LabWind:
    """The simplest classical wind hypothesis: speed ``v`` in the table plane, no sky.

    Direction: ``table_angle_deg`` (the table angle of the wind axis; no site needed) or
    ``azimuth_deg`` (compass azimuth; needs a Site with the mark azimuth), or neither —
    direction unknown, amplitude-only statements.  The speed is the in-plane speed, constant.
    """

    speed_m_s: float | None = None
    table_angle_deg: float | None = None
    azimuth_deg: float | None = None

    def __post_init__(self):
        if self.table_angle_deg is not None and self.azimuth_deg is not None:
            raise ValueError("give table_angle_deg or azimuth_deg, not both")
        object.__setattr__(self, "speed_m_s", _speed(self.speed_m_s, allow_none=True))
        for k in ("table_angle_deg", "azimuth_deg"):
            if getattr(self, k) is not None:
                object.__setattr__(self, k, _finite(getattr(self, k), k))

    def with_speed(self, speed_m_s: float) -> "LabWind":
        return LabWind(speed_m_s, self.table_angle_deg, self.azimuth_deg)

    def phase_deg(self, site: Site | None = None) -> float | None:
        """Table angle φ of the wind axis in ``[0, 180)``, or None if the direction is unknown."""
        if self.table_angle_deg is not None:
            return float(np.mod(self.table_angle_deg, 180.0))
        if self.azimuth_deg is not None:
            if site is None:
                raise ValueError("a lab wind given by compass azimuth needs a Site with mark_azimuth_deg")
            return float(np.mod(site.table_angle_deg(self.azimuth_deg), 180.0))
        return None

    @property
    def spec(self) -> str:
        parts = [] if self.speed_m_s is None else [f"speed={self.speed_m_s:g}"]
        if self.table_angle_deg is not None:
            parts.append(f"angle={self.table_angle_deg:g}")
        if self.azimuth_deg is not None:
            parts.append(f"azimuth={self.azimuth_deg:g}")
        return "lab" + (":" + ",".join(parts) if parts else "")

    @property
    def label(self) -> str:
        sp = "speed unset" if self.speed_m_s is None else f"{self.speed_m_s:g} m/s"
        if self.table_angle_deg is not None:
            d = f"along table angle {self.table_angle_deg:g}°"
        elif self.azimuth_deg is not None:
            d = f"along compass azimuth {self.azimuth_deg:g}°"
        else:
            d = "direction unspecified"
        return f"lab-frame wind in the table plane, {sp}, {d}"


# ---------------------------------------------------------------- convenience constructors
def orbital() -> EarthOrbit:
    """Earth's barycentric orbital velocity."""
    return EarthOrbit()


def rotation() -> EarthRotation:
    """Velocity of the site due to the Earth's rotation."""
    return EarthRotation()


def cmb() -> CMBDipole:
    """The CMB dipole (barycentre relative to the CMB; Planck 2018)."""
    return CMBDipole()


def custom(speed_m_s=None, *, ra_deg=None, dec_deg=None, l_deg=None, b_deg=None, name=None) -> CustomVelocity:
    """A fixed velocity: ``speed_m_s`` toward (RA, Dec) ICRS or galactic (l, b), degrees."""
    return CustomVelocity(speed_m_s, ra_deg, dec_deg, l_deg, b_deg, name)


def lab_wind(speed_m_s=None, *, table_angle_deg=None, azimuth_deg=None) -> LabWind:
    """A fixed in-plane wind in the lab frame (no sky; see :class:`LabWind`)."""
    return LabWind(speed_m_s, table_angle_deg, azimuth_deg)


_PRESETS = {"orbital": orbital, "rotation": rotation, "cmb": cmb}


def _kv(body: str, allowed: tuple[str, ...], what: str) -> dict[str, float]:
    out: dict[str, float] = {}
    for item in filter(None, (s.strip() for s in body.split(","))):
        if "=" not in item:
            raise ValueError(f"{what}: expected key=value, got {item!r}")
        k, v = (s.strip().lower() for s in item.split("=", 1))
        if k not in allowed:
            raise ValueError(f"{what}: unknown key {k!r}; allowed {list(allowed)}")
        try:
            out[k] = float(v)
        except ValueError:
            raise ValueError(f"{what}: {k}={v!r} is not a number") from None
    return out


def parse_velocity(spec: str) -> Velocity | LabWind:
    """Parse a velocity hypothesis from a short string (for manifests and the command line).

    Grammar (degrees, m/s)::

        orbital | rotation | cmb                      presets
        custom:ra=R,dec=D[,speed=V]                   fixed direction, ICRS
        custom:l=L,b=B[,speed=V]                      fixed direction, galactic
        A+B+...                                       vector sum of the above, e.g. cmb+orbital+rotation
        lab[:speed=V][,angle=T | ,azimuth=Z]          lab-frame wind in the table plane (no sky)

    ``cmb+orbital+rotation`` is the lab's velocity relative to the CMB frame.
    """
    if isinstance(spec, (Velocity, LabWind)):
        return spec
    s = str(spec).strip()
    if not s:
        raise ValueError("empty velocity specification")
    if s.lower().startswith("lab"):
        head, _, body = s.partition(":")
        if head.strip().lower() != "lab":
            raise ValueError(f"cannot parse velocity {spec!r}")
        kv = _kv(body, ("speed", "angle", "azimuth"), "lab wind")
        return LabWind(kv.get("speed"), kv.get("angle"), kv.get("azimuth"))
    models = []
    for token in re.split(r"\+(?=\s*[A-Za-z])", s):
        token = token.strip()
        name, _, body = token.partition(":")
        name = name.strip().lower()
        if name in _PRESETS:
            if body:
                raise ValueError(f"preset {name!r} takes no parameters")
            models.append(_PRESETS[name]())
        elif name == "custom":
            kv = _kv(body, ("ra", "dec", "l", "b", "speed"), "custom velocity")
            models.append(custom(kv.get("speed"), ra_deg=kv.get("ra"), dec_deg=kv.get("dec"),
                                 l_deg=kv.get("l"), b_deg=kv.get("b")))
        elif name == "lab":
            raise ValueError("a lab wind cannot be added to sky velocities")
        else:
            raise ValueError(
                f"unknown velocity {name!r}: use orbital, rotation, cmb, custom:ra=..,dec=..,speed=.., "
                "sums such as cmb+orbital+rotation, or lab:speed=..,angle=.."
            )
    return models[0] if len(models) == 1 else VelocitySum(tuple(models))


# ============================================================================ projection
@dataclass(frozen=True, eq=False)
class HorizontalVelocity:
    """A velocity resolved on the local east/north/up axes at the scan's times (m/s arrays).

    Build with :func:`horizontal_velocity`.  ``speed_h_m_s`` and :meth:`amplitude` need no mark
    azimuth; the table-frame quantities do (ValueError otherwise).
    """

    site: Site
    velocity_spec: str
    velocity_label: str
    epoch_unix: float
    time_s: np.ndarray
    east: np.ndarray
    north: np.ndarray
    up: np.ndarray
    n_nodes: int

    @property
    def unix(self) -> np.ndarray:
        return self.epoch_unix + self.time_s

    @property
    def speed_m_s(self) -> np.ndarray:
        """Full 3-D speed."""
        return np.sqrt(self.east**2 + self.north**2 + self.up**2)

    @property
    def speed_h_m_s(self) -> np.ndarray:
        """In-plane (horizontal) speed ``v_h``."""
        return np.hypot(self.east, self.north)

    @property
    def azimuth_deg(self) -> np.ndarray:
        """Compass azimuth of the horizontal velocity, ``[0, 360)`` (the wind blows the opposite way)."""
        return np.mod(np.degrees(np.arctan2(self.east, self.north)), 360.0)

    @property
    def elevation_deg(self) -> np.ndarray:
        """Angle of the velocity above the horizontal plane."""
        return np.degrees(np.arctan2(self.up, self.speed_h_m_s))

    def table_components(self) -> tuple[np.ndarray, np.ndarray]:
        """In-plane components along the table directions θ = 0° and θ = 90° (needs the mark)."""
        a0, a90 = self.site.table_axes_enu()
        return a0[0] * self.east + a0[1] * self.north, a90[0] * self.east + a90[1] * self.north

    @property
    def table_phase_deg(self) -> np.ndarray:
        """φ(t): table angle at which arm 1 lies along the wind axis, ``[0, 180)`` (needs the mark)."""
        v0, v90 = self.table_components()
        return np.mod(np.degrees(np.arctan2(v90, v0)), 180.0)

    def amplitude(self, apparatus) -> np.ndarray:
        """Predicted classical-wind amplitude ``A(t) = apparatus.wind_amplitude(v_h(t))``."""
        return np.asarray(apparatus.wind_amplitude(self.speed_h_m_s))

    def c2s2(self, apparatus) -> tuple[np.ndarray, np.ndarray]:
        """Predicted ``(c₂, s₂)(t)`` in the table frame: ``c₂ + i s₂ = sign·(A/v_h²)(v_0 + i v_90)²``."""
        v0, v90 = self.table_components()
        k = apparatus.readout_sign * float(apparatus.wind_amplitude(1.0))  # amplitude per (m/s)²
        return k * (v0**2 - v90**2), k * 2.0 * v0 * v90


def _node_times(rel: np.ndarray, node_spacing_s: float | None) -> np.ndarray | None:
    """Uniform evaluation nodes over the scan, or None to evaluate at every sample."""
    if node_spacing_s is None or node_spacing_s <= 0:
        return None
    lo, hi = float(rel.min()), float(rel.max())
    n_nodes = max(int(math.ceil((hi - lo) / node_spacing_s)) + 1, 2)
    if rel.size <= n_nodes:
        return None
    return np.linspace(lo, hi, n_nodes)


def horizontal_velocity(site: Site, times=None, velocity: Velocity | str = "orbital", *, epoch_unix=None,
                        time_s=None, node_spacing_s: float | None = 60.0) -> HorizontalVelocity:
    """Resolve a sky velocity on the local east/north/up axes at the site and times.

    Parameters
    ----------
    site
        The :class:`Site` (latitude/longitude needed; the mark only for table-frame phases).
    times
        Unix seconds (UTC) or astropy ``Time``; or ``epoch_unix`` + ``time_s`` (relative seconds).
    velocity
        A :class:`Velocity` or a :func:`parse_velocity` string.
    node_spacing_s
        Evaluate the slow parts on nodes this far apart and interpolate linearly (see the module
        docstring); ``None`` or 0 evaluates at every sample.
    """
    if not isinstance(site, Site):
        raise TypeError("site must be a nullfit Site")
    velocity = parse_velocity(velocity)
    if isinstance(velocity, LabWind):
        raise TypeError("a LabWind is a lab-frame hypothesis; it has no sky velocity to project")
    epoch, rel = _unix_times(times, epoch_unix, time_s)
    nodes = _node_times(rel, node_spacing_s)
    eval_rel = rel if nodes is None else nodes
    eo = _EarthOrientation(epoch, eval_rel)
    enu = eo.gcrs_to_terrestrial(velocity._gcrs(eo, site)) @ site.enu_basis().T
    if nodes is not None:
        enu = np.stack([np.interp(rel, nodes, enu[:, j]) for j in range(3)], axis=1)
    return HorizontalVelocity(
        site=site,
        velocity_spec=velocity.spec,
        velocity_label=velocity.label,
        epoch_unix=epoch,
        time_s=rel,
        east=enu[:, 0],
        north=enu[:, 1],
        up=enu[:, 2],
        n_nodes=eval_rel.size,
    )
