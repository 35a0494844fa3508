"""A sky velocity projected onto the table plane at a site and times (:func:`horizontal_velocity`).

* The predicted term is ``A(t) cos(2(θ − φ(t)))`` with ``A = apparatus.wind_amplitude(v_h)``
  and φ the table angle at which arm 1 lies along the in-plane wind axis, reduced to
  ``[0°, 180°)``.  Equivalently, with ``v_0``, ``v_90`` the in-plane components along θ = 0° and
  θ = 90°: ``c₂ + i s₂ = (A / v_h²)(v_0 + i v_90)²`` — a smooth, quadratic function of the
  velocity, which is why it interpolates well in time.  Without the mark's azimuth only the
  in-plane speed (hence the amplitude) is known; a table-frame phase raises ValueError.

The slow parts (precession–nutation matrix, orbital ephemeris) are evaluated on a grid of nodes
no more than ``node_spacing_s`` (default 60 s) apart when a scan has more samples than nodes,
and the east/north/up components are interpolated linearly to every sample.  They vary on the
sidereal-day scale, so each component's interpolation error is below ``(2πΔt/1 day)²/8 ≈ 2.4e-6``
of the speed for 60 s nodes, and amplitudes (quadratic in the velocity) move by about twice that
(measured: 3e-6 for a one-hour scan).  ``node_spacing_s=None`` evaluates every sample exactly
(about 80 µs per sample).

No network
----------
Every astropy call runs inside :func:`nullfit.hypothesis.offline.offline_astropy`: bundled IERS and
leap-second tables only, never a download; dates beyond the tables give an
:class:`~nullfit.hypothesis.offline.EarthOrientationWarning`, not an error or a hang.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..core.render import Described, Summary, fmt
from .earth import EarthOrientation, unix_times
from .site import Site
from .velocities import LabWind, Velocity, parse_velocity


@dataclass(frozen=True, eq=False)
class HorizontalVelocity(Described):
    """A velocity resolved on the local east/north/up axes at the scan's times (m/s arrays).

    Build with :func:`horizontal_velocity`.  ``speed_h_m_s`` and :meth:`amplitude` need no mark
    azimuth; the table-frame quantities do (ValueError otherwise).
    """

    site: Site
    velocity_spec: str
    velocity_label: str
    epoch_unix: float
    time_s: np.ndarray = field(repr=False)
    east: np.ndarray = field(repr=False)
    north: np.ndarray = field(repr=False)
    up: np.ndarray = field(repr=False)
    n_nodes: int = 0

    def to_dict(self) -> dict:
        d = {"velocity": self.velocity_spec, "label": self.velocity_label, "site": self.site.to_dict(),
             "epoch_unix": self.epoch_unix, "n_times": int(self.time_s.size), "n_nodes": self.n_nodes,
             "speed_h_m_s": {"min": float(self.speed_h_m_s.min()), "max": float(self.speed_h_m_s.max()),
                             "mean": float(self.speed_h_m_s.mean())},
             "speed_m_s_mean": float(self.speed_m_s.mean())}
        if self.site.has_mark:
            d["table_phase_deg_first"] = float(self.table_phase_deg[0])
        return d

    def summary(self) -> Summary:
        vh = self.speed_h_m_s
        rows = [("hypothesis", self.velocity_label, ""), ("times", int(self.time_s.size), ""),
                ("speed (mean)", float(self.speed_m_s.mean()), "m/s"),
                ("in-plane speed v_h (min … max)", f"{fmt(float(vh.min()))} … {fmt(float(vh.max()))}", "m/s"),
                ("elevation of the velocity (mean)", float(self.elevation_deg.mean()), "deg")]
        notes = () if self.site.has_mark else ("no mark azimuth: table-frame phases are not available",)
        return Summary(f"Velocity in the table plane at {self.site.name or 'the site'}", tuple(rows), notes)

    def __repr__(self) -> str:
        vh = self.speed_h_m_s
        return (f"HorizontalVelocity({self.velocity_spec}: {self.time_s.size} times, v_h "
                f"{fmt(float(vh.min()))}…{fmt(float(vh.max()))} m/s)")

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
    epoch, rel = unix_times(times, epoch_unix, time_s)
    nodes = _node_times(rel, node_spacing_s)
    eval_rel = rel if nodes is None else nodes
    eo = EarthOrientation(epoch, eval_rel)
    enu = eo.gcrs_to_terrestrial(velocity.gcrs(eo, site)) @ site.enu_basis().T
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
