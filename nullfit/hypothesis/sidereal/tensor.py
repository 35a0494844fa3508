r"""One tensor for both theories: the symmetric ``K`` whose lab components drive the pair signal.

A resonator (or arm) along the unit vector ``n`` changes its frequency by
``δν/ν = ½ n·K_lab·n + (isotropic)``, so an orthogonal pair gives
``(ν₁ − ν₂)/ν = ½(n₁·K_lab·n₁ − n₂·K_lab·n₂)`` (``docs/sky.md``).

* RMS: ``K = −2 P_MM β⃗ β⃗ᵀ`` with ``β⃗ = v⃗/c`` the lab's velocity through the preferred frame.
* SME: ``K = κ̃_e− + β⃗ kᵀ + k β⃗ᵀ`` with ``β⃗`` the lab's velocity in the sun-centred frame and
  ``k = (−κ̃_o+^{YZ}, κ̃_o+^{XZ}, −κ̃_o+^{XY})``.

The lab velocity is split into a part fixed in the sun frame, ``β⃗_s`` (a chosen velocity, the
CMB dipole for RMS, plus the orbital velocity), and the Earth-rotation part ``u ŷ`` that is fixed
in the **lab** (``ŷ`` = east).  Then

.. math::

    K_{lab} = R\,K_s\,R^T + (R A)\,ŷ^T + ŷ\,(R A)^T + s\,ŷ ŷ^T,

with ``K_s`` built from ``β⃗_s`` alone and (RMS) ``A = −2P_MM u β⃗_s``, ``s = −2 P_MM u²``;
(SME) ``A = u k``, ``s = 0``.  :class:`SkyTensor` holds ``(K_s, A, s)``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ...core.conventions import SPEED_OF_LIGHT
from .frames import cmb_velocity_m_s, orbital_beta_circular, rotation_speed_m_s
from .parameters import check_model, sme_tensors

__all__ = ["SkyTensor", "sky_tensor", "tensor_for_velocity", "sun_fixed_beta", "rotated"]


def _vector3(value, name: str) -> np.ndarray:
    v = np.asarray(value, dtype=float)
    if v.shape[-1:] != (3,) or not np.all(np.isfinite(v)):
        raise ValueError(f"{name} must be a finite 3-vector (m/s, sun-centred axes), got shape {v.shape}")
    return v


def sun_fixed_beta(model: str, *, velocity=None, orbit=True, annual_phase_rad=0.0) -> np.ndarray:
    """``β⃗_s``: the sun-fixed part of the lab velocity over c, shape ``(..., 3)``.

    ``velocity`` (m/s, sun-frame axes): None means the CMB dipole for RMS and zero for SME.
    ``orbit``: True adds the circular-orbit velocity at the annual phase ``W``; False adds
    nothing; a 3-vector (or ``(n, 3)`` array) in m/s is added as given (e.g. from the ephemeris).
    """
    model = check_model(model)
    if velocity is None:
        base = cmb_velocity_m_s() / SPEED_OF_LIGHT if model == "rms" else np.zeros(3)
    else:
        base = _vector3(velocity, "velocity") / SPEED_OF_LIGHT
    W = np.asarray(annual_phase_rad, dtype=float)
    if orbit is True:
        orb = orbital_beta_circular(W)
    elif orbit is False or orbit is None:
        orb = np.zeros(W.shape + (3,))
    else:
        orb = _vector3(orbit, "orbit") / SPEED_OF_LIGHT
    return base + orb


def tensor_for_velocity(model: str, values: dict, beta) -> np.ndarray:
    """``K`` for a lab velocity ``β⃗`` (over c, sun-frame axes, shape ``(..., 3)``) — the direct formula."""
    beta = np.asarray(beta, dtype=float)
    if check_model(model) == "rms":
        return -2.0 * values["P_MM"] * beta[..., :, None] * beta[..., None, :]
    e_minus, _, k = sme_tensors(values)
    return e_minus + beta[..., :, None] * k + k[:, None] * beta[..., None, :]


@dataclass(frozen=True, eq=False)
class SkyTensor:
    """``(K_s, A, s)`` of the module docstring; leading axes broadcast over times or phases."""

    K: np.ndarray = field(repr=False)
    A: np.ndarray = field(repr=False)
    s: np.ndarray = field(repr=False)


def sky_tensor(model: str, values: dict, beta_s, *, rotation_beta: float = 0.0) -> SkyTensor:
    """Split form of ``K`` for a sun-fixed velocity ``β⃗_s`` and an eastward lab speed ``u = rotation_beta``."""
    beta_s = np.asarray(beta_s, dtype=float)
    u = float(rotation_beta)
    K = tensor_for_velocity(model, values, beta_s)
    if check_model(model) == "rms":
        p2 = -2.0 * values["P_MM"]
        A = p2 * u * beta_s
        s = np.full(beta_s.shape[:-1], p2 * u * u)
    else:
        _, _, k = sme_tensors(values)
        A = np.broadcast_to(u * k, beta_s.shape).copy()
        s = np.zeros(beta_s.shape[:-1])
    return SkyTensor(K, A, s)


def rotated(t: SkyTensor, P) -> SkyTensor:
    """``(P K Pᵀ, P A, s)``: the same tensor in axes rotated by ``P`` (e.g. J2000 → mean of date)."""
    P = np.asarray(P, dtype=float)
    K = P @ t.K @ np.swapaxes(P, -1, -2)
    A = np.einsum("...ij,...j->...i", P, t.A)
    return SkyTensor(K, A, np.broadcast_to(t.s, K.shape[:-2]).copy())


def rotation_beta(latitude_deg: float, rotation: bool) -> float:
    """Eastward Earth-rotation speed over c at the latitude (0 when ``rotation`` is False)."""
    return rotation_speed_m_s(latitude_deg) / SPEED_OF_LIGHT if rotation else 0.0
