r"""Velocity hypotheses on the sky: the lab's velocity relative to a hypothesised rest frame.

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

"""

from __future__ import annotations

import functools
import math
import re
from dataclasses import dataclass

import numpy as np

from .earth import EARTH_ROTATION_RATE_RAD_S, EarthOrientation, unix_times
from .offline import offline_astropy
from .site import Site, finite_number

#: Velocity of the Solar-System barycentre relative to the CMB rest frame (the CMB dipole):
#: 369.82 ± 0.11 km/s toward galactic (l, b) = (264.021° ± 0.011°, 48.253° ± 0.005°).
#: Source: Planck Collaboration, "Planck 2018 results. I. Overview and the cosmological legacy
#: of Planck", A&A 641, A1 (2020), solar-dipole table.  (Equatorial: RA ≈ 167.942°, Dec ≈ −6.944°.)
CMB_DIPOLE_SPEED_M_S = 369.82e3
CMB_DIPOLE_L_DEG = 264.021
CMB_DIPOLE_B_DEG = 48.253


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

    def gcrs(self, eo: EarthOrientation, site: Site | None) -> np.ndarray:  # pragma: no cover
        raise NotImplementedError

    def at(self, times=None, site: Site | None = None, *, epoch_unix=None, time_s=None) -> np.ndarray:
        """Velocity (n, 3) in m/s along ICRS-aligned axes at the given times."""
        if self.needs_site and site is None:
            raise ValueError(f"{self.label} needs a Site")
        epoch, rel = unix_times(times, epoch_unix, time_s)
        return self.gcrs(EarthOrientation(epoch, rel), site)

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
    v = finite_number(value, name)
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

    def gcrs(self, eo, site):
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
        return "earth-rotation"

    @property
    def label(self) -> str:
        return "Earth rotation at the site"

    def gcrs(self, eo, site):
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
            object.__setattr__(self, k, finite_number(getattr(self, k), k))
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

    def gcrs(self, eo, site):
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

    def gcrs(self, eo, site):
        return sum(p.gcrs(eo, site) for p in self.parts)


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

    def gcrs(self, eo, site):
        base = self.base
        if isinstance(base, CustomVelocity) and base.speed_m_s is None:
            return np.broadcast_to(self.speed_m_s * base.unit_vector, (eo.n, 3)).copy()
        v = base.gcrs(eo, site)
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
                object.__setattr__(self, k, finite_number(getattr(self, k), k))

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


#: Named presets (``parse_velocity("orbital")``).  "earth-rotation" is the velocity of the site
#: carried by the Earth's spin (not the turntable's rotation).
PRESETS = {"orbital": EarthOrbit, "earth-rotation": EarthRotation, "cmb": CMBDipole}


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

        orbital | earth-rotation | cmb                presets
        custom:ra=R,dec=D[,speed=V]                   fixed direction, ICRS
        custom:l=L,b=B[,speed=V]                      fixed direction, galactic
        A+B+...                                       vector sum of the above, e.g. cmb+orbital+earth-rotation
        lab[:speed=V][,angle=T | ,azimuth=Z]          lab-frame wind in the table plane (no sky)

    ``cmb+orbital+earth-rotation`` is the lab's velocity relative to the CMB frame.
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
        if name in PRESETS:
            if body:
                raise ValueError(f"preset {name!r} takes no parameters")
            models.append(PRESETS[name]())
        elif name == "rotation":
            raise ValueError("'rotation' is ambiguous beside a turntable: the velocity of the site carried by the "
                             "Earth's spin is 'earth-rotation'")
        elif name == "custom":
            kv = _kv(body, ("ra", "dec", "l", "b", "speed"), "custom velocity")
            models.append(CustomVelocity(kv.get("speed"), kv.get("ra"), kv.get("dec"), kv.get("l"), kv.get("b")))
        elif name == "lab":
            raise ValueError("a lab wind cannot be added to sky velocities")
        else:
            raise ValueError(
                f"unknown velocity {name!r}: use orbital, earth-rotation, cmb, custom:ra=..,dec=..,speed=.., "
                "sums such as cmb+orbital+earth-rotation, or lab:speed=..,angle=.."
            )
    return models[0] if len(models) == 1 else VelocitySum(tuple(models))
