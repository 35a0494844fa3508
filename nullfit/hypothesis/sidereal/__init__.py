"""The sidereal model: what an SME or RMS anisotropy does to a rotating pair, over sidereal and
annual time (the hypothesis side of the sky analysis; no estimation from data here).

:mod:`.frames` (sun-centred and lab frames, sidereal angle, annual phase, orbital velocity),
:mod:`.parameters` (parameter sets and SME coefficient tensors), :mod:`.tensor` (the tensor ``K``
that drives the pair), :mod:`.quadratures` (the ten sidereal quadratures, closed form and
numeric), :mod:`.design` (the linear design per unit parameter, and its annual terms),
:mod:`.forward` (``B(t)``, ``C(t)``, the logged template, the ``(c₂, s₂)`` ↔ ``(B, C)`` boundary).
Conventions and derivations: ``docs/sky.md``.
"""

from .design import ANNUAL_TERMS, AnnualDesign, Design, annual_design, design_matrix
from .forward import (
    ORBIT_CHOICES,
    SiderealSignal,
    bc_from_c2s2,
    c2s2_from_bc,
    log_gain,
    sidereal_signal,
    table_from_theta_south,
    template,
    theta_south_from_table,
)
from .frames import (
    ANNUAL_RATE_RAD_S,
    EQUINOX_2000_UNIX,
    OBLIQUITY_DEG,
    ORBITAL_BETA,
    SIDEREAL_YEAR_S,
    annual_phase_rad,
    cmb_velocity_m_s,
    colatitude_rad,
    orbital_beta_circular,
    orbital_beta_ephemeris,
    precession_matrix,
    rotation_speed_m_s,
    sidereal_angle_rad,
    sun_to_lab,
)
from .parameters import MODEL_NAMES, RMS_NAMES, SME_NAMES, SkyParameters
from .quadratures import QUADRATURE_KEYS, Quadratures, quadratures
from .tensor import tensor_for_velocity

__all__ = [
    "ANNUAL_RATE_RAD_S", "ANNUAL_TERMS", "AnnualDesign", "Design", "EQUINOX_2000_UNIX", "MODEL_NAMES",
    "OBLIQUITY_DEG", "ORBITAL_BETA", "ORBIT_CHOICES", "QUADRATURE_KEYS", "Quadratures", "RMS_NAMES",
    "SIDEREAL_YEAR_S", "SME_NAMES", "SiderealSignal", "SkyParameters", "annual_design", "annual_phase_rad",
    "bc_from_c2s2", "c2s2_from_bc", "cmb_velocity_m_s", "colatitude_rad", "design_matrix", "log_gain",
    "orbital_beta_circular", "orbital_beta_ephemeris", "precession_matrix", "quadratures", "rotation_speed_m_s",
    "sidereal_angle_rad", "sidereal_signal", "sun_to_lab", "table_from_theta_south", "template",
    "tensor_for_velocity", "theta_south_from_table",
]
