"""`Site`: where the table stands, and how its reference mark and positive sense are oriented.

Conventions (``docs/conventions.md``): geodetic WGS84 latitude (north-positive) and longitude
(**east-positive**), elevation in metres; compass azimuths from north through east.  The table
angle θ is measured from the reference mark in the table's positive sense: with the mark's
azimuth ``m`` a compass azimuth ``α`` lies at ``θ = α − m`` for a table turning clockwise seen
from above, and ``θ = m − α`` for a counterclockwise one (:meth:`Site.table_angle_deg`).
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from ..core.render import Described, Summary
from ..reading.manifest import SENSE_ALIASES

_SITE_KEYS = ("latitude_deg", "longitude_deg", "elevation_m", "mark_azimuth_deg", "table_sense", "name")


# ============================================================================ site
def finite_number(value, name: str) -> float:
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
        lat = finite_number(self.latitude_deg, "latitude_deg")
        if not -90.0 <= lat <= 90.0:
            raise ValueError(f"latitude_deg must lie in [-90, 90], not {lat}")
        lon = finite_number(self.longitude_deg, "longitude_deg")
        if not -180.0 <= lon <= 360.0:
            raise ValueError(f"longitude_deg (east-positive) must lie in [-180, 360], not {lon}")
        set_(self, "latitude_deg", lat)
        set_(self, "longitude_deg", lon)
        set_(self, "elevation_m", finite_number(self.elevation_m, "elevation_m"))
        if self.mark_azimuth_deg is not None:
            set_(self, "mark_azimuth_deg", finite_number(self.mark_azimuth_deg, "mark_azimuth_deg"))
        sense = SENSE_ALIASES.get(str(self.table_sense).strip().lower())
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
