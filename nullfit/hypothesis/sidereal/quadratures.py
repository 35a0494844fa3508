r"""The ten sidereal quadratures of ``B(t)`` and ``C(t)``, two ways.

``(ν₁ − ν₂)/ν = B sin 2θ_S + C cos 2θ_S`` with, for ``X ∈ {B, C}``,
``X = X₀ + X_s1 sin w + X_c1 cos w + X_s2 sin 2w + X_c2 cos 2w``.

**Closed form** (derived in ``docs/sky.md``; ``K`` the sun-fixed tensor, ``A``, ``s`` the
Earth-rotation terms of :mod:`.tensor`, χ the colatitude):

=====  ==========================================  =====  ===================================
C₀     ¼ sin²χ (2K_ZZ − K_XX − K_YY) − s/2          B₀     −sin χ A_Z
C_s1   −½ sin 2χ K_YZ + A_X                          B_s1   sin χ K_XZ + cos χ A_Y
C_c1   −½ sin 2χ K_XZ − A_Y                          B_c1   −sin χ K_YZ + cos χ A_X
C_s2   ½ (1 + cos²χ) K_XY                            B_s2   −½ cos χ (K_XX − K_YY)
C_c2   ¼ (1 + cos²χ)(K_XX − K_YY)                    B_c2   cos χ K_XY
=====  ==========================================  =====  ===================================

**Numeric route**: evaluate ``½(n₁·K_lab·n₁ − n₂·K_lab·n₂)`` with ``K_lab = R K(w) Rᵀ`` built
from the full lab velocity at each ``w`` on a grid of ``θ_S`` and ``w``, and project on the
harmonics (a uniform grid of 8 points is exact for harmonics up to 2).

A single resonator turning against a fixed one sees ``½ n₁·K_lab·n₁``: every quadrature halves
(``pair=False``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ...core.render import Described, Summary
from .frames import colatitude_rad, precession_matrix, sun_to_lab
from .parameters import SkyParameters, check_model, check_values
from .tensor import (
    SkyTensor,
    rotated,
    rotation_beta,
    sky_tensor,
    sun_fixed_beta,
    tensor_for_velocity,
)

__all__ = ["QUADRATURE_KEYS", "quadratures", "closed_form", "numeric_quadratures", "Quadratures"]

#: Keys of the ten quadratures, in the order of the design matrix's rows.
QUADRATURE_KEYS = ("C0", "Cs1", "Cc1", "Cs2", "Cc2", "B0", "Bs1", "Bc1", "Bs2", "Bc2")

_N_GRID = 8


def closed_form(t: SkyTensor, chi: float) -> np.ndarray:
    """The ten quadratures (last axis, :data:`QUADRATURE_KEYS` order) for a pair, from ``(K, A, s)``."""
    K, A, s = t.K, t.A, t.s
    sc, cc = math.sin(chi), math.cos(chi)
    s2c = math.sin(2.0 * chi)
    one_cc2 = 1.0 + cc * cc
    dxy = K[..., 0, 0] - K[..., 1, 1]
    rows = [
        0.25 * sc * sc * (2.0 * K[..., 2, 2] - K[..., 0, 0] - K[..., 1, 1]) - 0.5 * s,
        -0.5 * s2c * K[..., 1, 2] + A[..., 0],
        -0.5 * s2c * K[..., 0, 2] - A[..., 1],
        0.5 * one_cc2 * K[..., 0, 1],
        0.25 * one_cc2 * dxy,
        -sc * A[..., 2],
        sc * K[..., 0, 2] + cc * A[..., 1],
        -sc * K[..., 1, 2] + cc * A[..., 0],
        -0.5 * cc * dxy,
        cc * K[..., 0, 1],
    ]
    return np.stack([np.asarray(r, dtype=float) for r in rows], axis=-1) + 0.0  # no signed zeros


def _pair_signal(K_lab: np.ndarray, theta_s: np.ndarray) -> np.ndarray:
    """``½(n₁·K·n₁ − n₂·K·n₂)`` for arm 1 at ``θ_S`` (from south towards east) and arm 2 at ``θ_S + 90°``."""
    n1 = np.stack([np.cos(theta_s), np.sin(theta_s), np.zeros_like(theta_s)], axis=-1)
    n2 = np.stack([-np.sin(theta_s), np.cos(theta_s), np.zeros_like(theta_s)], axis=-1)
    q1 = np.einsum("...i,...ij,...j->...", n1, K_lab, n1)
    q2 = np.einsum("...i,...ij,...j->...", n2, K_lab, n2)
    return 0.5 * (q1 - q2)


def numeric_quadratures(model: str, values: dict, beta_s: np.ndarray, chi: float, u: float,
                        P: np.ndarray | None = None, n_grid: int = _N_GRID) -> np.ndarray:
    """The ten quadratures by direct evaluation on a ``(θ_S, w)`` grid (one sun-fixed velocity).

    ``P`` (optional): rotation from the axes of ``beta_s`` and the coefficients (J2000) to the
    axes the sidereal angle refers to (mean of date).
    """
    P = np.eye(3) if P is None else np.asarray(P, dtype=float)
    w = 2.0 * np.pi * np.arange(n_grid) / n_grid
    th = 2.0 * np.pi * np.arange(n_grid) / n_grid
    east = np.stack([-np.sin(w), np.cos(w), np.zeros_like(w)], axis=-1)  # lab ŷ in sidereal-angle axes
    beta = np.asarray(beta_s, dtype=float) + u * east @ P  # (n_w, 3) full lab velocity, J2000 axes
    RP = sun_to_lab(chi, w) @ P
    K_lab = RP @ tensor_for_velocity(model, values, beta) @ np.swapaxes(RP, -1, -2)
    S = _pair_signal(K_lab[:, None, :, :], th[None, :])  # (n_w, n_theta)
    B = 2.0 * np.mean(S * np.sin(2.0 * th), axis=1)
    C = 2.0 * np.mean(S * np.cos(2.0 * th), axis=1)

    def harmonics(X):
        return [np.mean(X), 2 * np.mean(X * np.sin(w)), 2 * np.mean(X * np.cos(w)),
                2 * np.mean(X * np.sin(2 * w)), 2 * np.mean(X * np.cos(2 * w))]

    return np.array(harmonics(C) + harmonics(B))


def _precession(precess_to_unix) -> np.ndarray | None:
    if precess_to_unix is None:
        return None
    t = float(precess_to_unix)
    return precession_matrix(epoch_unix=math.floor(t), time_s=[t - math.floor(t)])[0]


def quadrature_array(model, params, *, latitude_deg, annual_phase_deg=0.0, velocity=None, orbit=True,
                      rotation=False, pair=True, method="closed", precess_to_unix=None) -> np.ndarray:
    model = check_model(model)
    values = check_values(model, params)
    chi = colatitude_rad(latitude_deg)
    W = np.deg2rad(np.asarray(annual_phase_deg, dtype=float))
    beta_s = sun_fixed_beta(model, velocity=velocity, orbit=orbit, annual_phase_rad=W)
    u = rotation_beta(latitude_deg, rotation)
    P = _precession(precess_to_unix)
    if method == "closed":
        tensor = sky_tensor(model, values, beta_s, rotation_beta=u)
        q = closed_form(tensor if P is None else rotated(tensor, P), chi)
    elif method == "numeric":
        flat = beta_s.reshape(-1, 3)
        q = np.stack([numeric_quadratures(model, values, b, chi, u, P) for b in flat])
        q = q.reshape(beta_s.shape[:-1] + (10,))
    else:
        raise ValueError(f"method must be 'closed' or 'numeric', not {method!r}")
    return q if pair else 0.5 * q


def quadratures(model: str, params, *, latitude_deg: float, annual_phase_deg=0.0, velocity=None, orbit=True,
                rotation: bool = False, pair: bool = True, method: str = "closed",
                precess_to_unix: float | None = None) -> dict:
    """The ten sidereal quadratures ``{"C0", "Cs1", …, "Bc2"}`` of a model.

    Parameters
    ----------
    model
        ``"sme"`` or ``"rms"``.
    params
        Mapping (or :class:`SkyParameters`): SME ``e_XY e_XZ e_YZ e_XX-YY e_ZZ o_XY o_XZ o_YZ``
        (missing = 0), or RMS ``P_MM``.  Unknown names raise ValueError.
    latitude_deg
        Geodetic latitude of the site (colatitude χ = 90° − latitude).
    annual_phase_deg
        ``W`` in degrees (0 at the 2000 March equinox); an array gives arrays.
    velocity
        Sun-fixed velocity in m/s (sun-centred axes): for RMS the solar system's velocity
        through the preferred frame (None = CMB dipole); for SME an extra boost of the
        laboratory relative to the sun-centred frame (None = 0).
    orbit
        True: add the circular-orbit velocity at ``W``; False: none; or a 3-vector in m/s.
    rotation
        Add the Earth-rotation velocity of the site (eastward, WGS84 radius at the latitude).
    pair
        True: orthogonal pair ``(ν₁ − ν₂)/ν``; False: one resonator against a fixed one (½).
    method
        ``"closed"`` (closed form) or ``"numeric"`` (grid evaluation and projection).
    precess_to_unix
        None: the sidereal angle is taken to refer to the J2000 (sun-frame) axes.  A UTC instant
        (Unix seconds): parameters and velocities stay in J2000 axes, and are rotated to the
        mean equator and equinox of that date, which the local mean sidereal time refers to
        (about 50″ per year from 2000; ``docs/sky.md``).

    Returns
    -------
    dict
        Dimensionless (fractional-frequency) quadratures; floats, or arrays for an array ``W``.
    """
    q = quadrature_array(model, params, latitude_deg=latitude_deg, annual_phase_deg=annual_phase_deg,
                          velocity=velocity, orbit=orbit, rotation=rotation, pair=pair, method=method,
                          precess_to_unix=precess_to_unix)
    if q.ndim == 1:
        return {k: float(v) for k, v in zip(QUADRATURE_KEYS, q)}
    return {k: q[..., i] for i, k in enumerate(QUADRATURE_KEYS)}


@dataclass(frozen=True)
class Quadratures(Described):
    """The ten quadratures of one parameter set at one latitude and annual phase (fractional units)."""

    parameters: SkyParameters
    latitude_deg: float
    annual_phase_deg: float
    values: tuple[float, ...]
    orbit: bool = True
    rotation: bool = False
    pair: bool = True
    velocity_m_s: tuple[float, float, float] | None = None
    precess_to_unix: float | None = None

    @classmethod
    def compute(cls, parameters: SkyParameters, *, latitude_deg: float, annual_phase_deg: float = 0.0,
                velocity=None, orbit: bool = True, rotation: bool = False, pair: bool = True,
                precess_to_unix: float | None = None) -> Quadratures:
        """Evaluate :func:`quadratures` (closed form) for ``parameters``; arguments as there."""
        if not isinstance(parameters, SkyParameters):
            raise TypeError("parameters must be a SkyParameters")
        if not isinstance(orbit, bool):
            raise TypeError("Quadratures.compute takes orbit=True/False; use quadratures() for an explicit vector")
        q = quadrature_array(parameters.model, parameters, latitude_deg=latitude_deg,
                              annual_phase_deg=float(annual_phase_deg), velocity=velocity, orbit=orbit,
                              rotation=rotation, pair=pair, precess_to_unix=precess_to_unix)
        vel = None if velocity is None else tuple(float(x) for x in np.asarray(velocity, dtype=float))
        return cls(parameters, float(latitude_deg), float(annual_phase_deg), tuple(float(x) for x in q),
                   bool(orbit), bool(rotation), bool(pair), vel,
                   None if precess_to_unix is None else float(precess_to_unix))

    def as_dict(self) -> dict[str, float]:
        return dict(zip(QUADRATURE_KEYS, self.values))

    def __getitem__(self, key: str) -> float:
        return self.as_dict()[key]

    def to_dict(self) -> dict:
        return {"parameters": self.parameters.to_dict(), "latitude_deg": self.latitude_deg,
                "annual_phase_deg": self.annual_phase_deg, "orbit": self.orbit, "rotation": self.rotation,
                "pair": self.pair, "velocity_m_s": self.velocity_m_s, "precess_to_unix": self.precess_to_unix,
                "quadratures": self.as_dict()}

    def summary(self) -> Summary:
        rows = tuple((k, v, "") for k, v in self.as_dict().items())
        vel = "default" if self.velocity_m_s is None else f"{self.velocity_m_s} m/s"
        notes = (
            "(ν₁ − ν₂)/ν = B sin 2θ_S + C cos 2θ_S, θ_S of arm 1 from south towards east"
            if self.pair else "one resonator against a fixed one: half the pair's coefficients",
            (f"latitude {self.latitude_deg:g}°, annual phase W = {self.annual_phase_deg:g}°, orbit "
             f"{'on' if self.orbit else 'off'}, Earth rotation {'on' if self.rotation else 'off'}, velocity {vel}"),
        )
        return Summary(f"Sidereal quadratures ({self.parameters.model.upper()})", rows, notes,
                       sections=(self.parameters.summary(),))
