r"""Forward model: ``B(t)``, ``C(t)`` at UTC times, the signal a given apparatus would log, and the
boundary conversion between nullfit's table-frame ``(c₂, s₂)`` and the sky model's ``(B, C)``.

Angles (``docs/sky.md``)
------------------------
Arm 1's compass azimuth is ``α = m + σθ`` (mark azimuth ``m``, ``σ = +1`` for a clockwise table
seen from above, −1 for counterclockwise).  Measured from south towards east,
``θ_S = 180° − α``, so

.. math::

    θ_S = π − m − σθ, \qquad θ = σ(π − m − θ_S).

Boundary of the stage
---------------------
The logged signal is ``y = g (B sin 2θ_S + C cos 2θ_S)`` with the gain
``g = −readout_sign × (2L/λ for fringes, 1 for fractional)``: ``(ν₁ − ν₂)/ν`` falls when arm 1's
round trip lengthens, and ``readout_sign = +1`` means the log grows then.  With ``μ = −2m``,
``2θ_S = μ − 2σθ`` and

.. math::

    c_2 = g\,(B \sin μ + C \cos μ), \qquad s_2 = g\,σ\,(C \sin μ − B \cos μ),

    C = p \cos μ + q \sin μ, \qquad B = p \sin μ − q \cos μ, \qquad p = c_2/g,\ q = σ s_2/g.

This is done once, per turn, where the table-frame fit hands over to the sky analysis.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ...core.conventions import SPEED_OF_LIGHT
from ...core.render import Described, Summary
from ..apparatus import Apparatus
from ..earth import unix_times
from ..site import Site
from .frames import (
    annual_phase_rad,
    colatitude_rad,
    orbital_beta_ephemeris,
    precession_matrix,
    rotation_speed_m_s,
    sidereal_angle_rad,
)
from .parameters import check_model, check_values
from .quadratures import closed_form
from .tensor import rotated, sky_tensor, sun_fixed_beta

__all__ = [
    "theta_south_from_table", "table_from_theta_south", "log_gain", "c2s2_from_bc", "bc_from_c2s2",
    "SiderealSignal", "sidereal_signal", "template", "ORBIT_CHOICES",
]

#: Orbital-velocity options of the time-domain model.
ORBIT_CHOICES = ("circular", "ephemeris", "none")


def _mark_and_sense(site: Site) -> tuple[float, float]:
    if not isinstance(site, Site):
        raise TypeError("site must be a nullfit Site")
    if not site.has_mark:
        raise ValueError("the sky model needs the compass azimuth of the table's reference mark: "
                         "give Site(mark_azimuth_deg=...)")
    return math.radians(site.mark_azimuth_deg), (1.0 if site.table_sense == "clockwise" else -1.0)


def theta_south_from_table(theta, site: Site):
    """``θ_S`` (radians, from south towards east) of arm 1 at table angle ``θ`` (radians, from the mark)."""
    m, sigma = _mark_and_sense(site)
    return np.mod(math.pi - m - sigma * np.asarray(theta, dtype=float), 2.0 * math.pi)


def table_from_theta_south(theta_s, site: Site):
    """Inverse of :func:`theta_south_from_table`: table angle (radians, ``[0, 2π)``)."""
    m, sigma = _mark_and_sense(site)
    return np.mod(sigma * (math.pi - m - np.asarray(theta_s, dtype=float)), 2.0 * math.pi)


def log_gain(apparatus: Apparatus) -> float:
    """``g``: logged 2θ coefficient per unit of ``(ν₁ − ν₂)/ν`` coefficient."""
    if not isinstance(apparatus, Apparatus):
        raise TypeError("apparatus must be a nullfit Apparatus")
    unit = apparatus.fringes_per_fractional if apparatus.signal == "fringe" else 1.0
    return -float(apparatus.readout_sign) * unit


def c2s2_from_bc(B, C, *, site: Site, apparatus: Apparatus):
    """Table-frame ``(c₂, s₂)`` (log unit) of a signal with sky quadratures ``(B, C)``."""
    m, sigma = _mark_and_sense(site)
    g, mu = log_gain(apparatus), -2.0 * m
    B, C = np.asarray(B, dtype=float), np.asarray(C, dtype=float)
    sm, cm = math.sin(mu), math.cos(mu)
    return g * (B * sm + C * cm), g * sigma * (C * sm - B * cm)


def bc_from_c2s2(c2, s2, *, site: Site, apparatus: Apparatus):
    """``(B, C)`` (fractional, ``(ν₁ − ν₂)/ν`` convention) from per-turn table-frame ``(c₂, s₂)``."""
    m, sigma = _mark_and_sense(site)
    g, mu = log_gain(apparatus), -2.0 * m
    p = np.asarray(c2, dtype=float) / g
    q = sigma * np.asarray(s2, dtype=float) / g
    sm, cm = math.sin(mu), math.cos(mu)
    return p * sm - q * cm, p * cm + q * sm


@dataclass(frozen=True, eq=False)
class SiderealSignal(Described):
    """``B(t)``, ``C(t)`` of a model at UTC times ``epoch_unix + time_s`` (fractional units)."""

    model: str
    site: Site
    epoch_unix: float
    time_s: np.ndarray = field(repr=False)
    sidereal_angle_rad: np.ndarray = field(repr=False)
    annual_phase_rad: np.ndarray = field(repr=False)
    B: np.ndarray = field(repr=False)
    C: np.ndarray = field(repr=False)
    orbit: str = "circular"
    rotation: bool = False
    pair: bool = True
    precession: bool = True

    @property
    def amplitude(self) -> np.ndarray:
        """``hypot(B, C)``: the instantaneous 2θ amplitude of ``(ν₁ − ν₂)/ν``."""
        return np.hypot(self.B, self.C)

    def to_dict(self) -> dict:
        return {"model": self.model, "site": self.site.to_dict(), "epoch_unix": self.epoch_unix,
                "n_times": int(self.time_s.size), "orbit": self.orbit, "rotation": self.rotation,
                "pair": self.pair, "amplitude_max": float(np.max(self.amplitude))}

    def summary(self) -> Summary:
        rows = (("model", self.model.upper(), ""), ("times", int(self.time_s.size), ""),
                ("max |B|", float(np.max(np.abs(self.B))), ""), ("max |C|", float(np.max(np.abs(self.C))), ""),
                ("orbit", self.orbit, ""), ("Earth rotation", self.rotation, ""))
        return Summary("Sidereal signal B(t), C(t)", rows,
                       ("(ν₁ − ν₂)/ν = B sin 2θ_S + C cos 2θ_S, θ_S from south towards east",))


def sidereal_signal(model: str, params, *, site: Site, times=None, epoch_unix=None, time_s=None, velocity=None,
                    orbit: str = "circular", rotation: bool = False, pair: bool = True,
                    precession: bool = True) -> SiderealSignal:
    """``B(t)``, ``C(t)`` at UTC times (Unix seconds, astropy ``Time``, or ``epoch_unix`` + ``time_s``).

    ``w(t)`` is the local mean sidereal time (astropy, offline) at the site's longitude and
    ``W(t) = Ω⊕ (t − t_eq)``.  ``orbit``: ``"circular"`` (the formula at ``W``),
    ``"ephemeris"`` (astropy's barycentric Earth velocity) or ``"none"``.  Other arguments as
    for :func:`nullfit.hypothesis.sidereal.quadratures`.  ``precession``: rotate the sun-frame
    tensor from J2000 axes to the mean equator and equinox of date, the axes the sidereal time
    refers to (False identifies them; the error grows by about 50″ per year from 2000).
    """
    model = check_model(model)
    values = check_values(model, params)
    if not isinstance(site, Site):
        raise TypeError("site must be a nullfit Site")
    if orbit not in ORBIT_CHOICES:
        raise ValueError(f"orbit must be one of {ORBIT_CHOICES}, not {orbit!r}")
    epoch, rel = unix_times(times, epoch_unix, time_s)
    w = sidereal_angle_rad(epoch_unix=epoch, time_s=rel, longitude_deg=site.longitude_deg)
    W = annual_phase_rad(epoch_unix=epoch, time_s=rel)
    if orbit == "circular":
        orb = True
    elif orbit == "ephemeris":
        orb = orbital_beta_ephemeris(epoch_unix=epoch, time_s=rel) * SPEED_OF_LIGHT
    else:
        orb = False
    beta_s = sun_fixed_beta(model, velocity=velocity, orbit=orb, annual_phase_rad=W)
    beta_s = np.broadcast_to(beta_s, rel.shape + (3,))
    u = rotation_speed_m_s(site.latitude_deg, site.elevation_m) / SPEED_OF_LIGHT if rotation else 0.0
    tensor = sky_tensor(model, values, beta_s, rotation_beta=u)
    if precession:
        tensor = rotated(tensor, precession_matrix(epoch_unix=epoch, time_s=rel))
    q = closed_form(tensor, colatitude_rad(site.latitude_deg))
    if not pair:
        q = 0.5 * q
    s1, c1, s2, c2 = np.sin(w), np.cos(w), np.sin(2 * w), np.cos(2 * w)
    C = q[:, 0] + q[:, 1] * s1 + q[:, 2] * c1 + q[:, 3] * s2 + q[:, 4] * c2
    B = q[:, 5] + q[:, 6] * s1 + q[:, 7] * c1 + q[:, 8] * s2 + q[:, 9] * c2
    arrays = [np.array(rel, dtype=float), w, W, B, C]
    for a in arrays:
        a.setflags(write=False)
    return SiderealSignal(model, site, epoch, *arrays, orbit=orbit, rotation=bool(rotation), pair=bool(pair),
                          precession=bool(precession))


def template(model: str, params, *, site: Site, apparatus: Apparatus, theta, times=None, epoch_unix=None,
             time_s=None, velocity=None, orbit: str = "circular", rotation: bool = False,
             pair: bool = True, precession: bool = True) -> np.ndarray:
    """The signal the apparatus would log at each reading: ``g (B sin 2θ_S + C cos 2θ_S)``.

    ``theta``: nullfit table angles of arm 1 in radians (from the mark, in the table's sense),
    one per time.  Unit and sign from ``apparatus`` (see module docstring).
    """
    sig = sidereal_signal(model, params, site=site, times=times, epoch_unix=epoch_unix, time_s=time_s,
                          velocity=velocity, orbit=orbit, rotation=rotation, pair=pair, precession=precession)
    theta = np.asarray(theta, dtype=float)
    if theta.shape != sig.time_s.shape:
        theta = np.broadcast_to(theta, sig.time_s.shape)
    th_s = theta_south_from_table(theta, site)
    return log_gain(apparatus) * (sig.B * np.sin(2 * th_s) + sig.C * np.cos(2 * th_s))
