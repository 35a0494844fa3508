r"""The linear design: the ten quadratures per unit of each parameter.

Every quadrature is linear in the parameters (``K`` is linear in ``κ̃`` and in ``P_MM``), so
``q(W) = M(W) p`` with ``M`` a 10 × 8 matrix (SME) or 10 × 1 (RMS) at a given latitude and annual
phase ``W``; rows in :data:`QUADRATURE_KEYS` order, columns in parameter order.

The ``W``-dependence is a trigonometric polynomial of known degree, because the orbital velocity
``β⃗⊕(W)`` is linear in ``(sin W, cos W)``: SME quadratures are linear in ``β⃗`` (degree 1); RMS
quadratures are quadratic in the velocity (degree 2).  :func:`annual_design` returns the
coefficient matrices, ``M(W) = M₀ + M_sW sin W + M_cW cos W + M_s2W sin 2W + M_c2W cos 2W``: the
annual sidebands of each sidereal line, which an estimator over a long campaign needs.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ...core.render import Described, Summary
from .parameters import MODEL_NAMES, check_model
from .quadratures import QUADRATURE_KEYS, quadrature_array

__all__ = ["Design", "design_matrix", "AnnualDesign", "annual_design", "ANNUAL_TERMS"]

#: Names of the annual terms of :class:`AnnualDesign`.
ANNUAL_TERMS = ("0", "sW", "cW", "s2W", "c2W")


def _columns(model, *, latitude_deg, annual_phase_deg, velocity, orbit, rotation, pair,
             precess_to_unix=None) -> np.ndarray:
    names = MODEL_NAMES[model]
    cols = []
    for name in names:
        q = quadrature_array(model, {name: 1.0}, latitude_deg=latitude_deg, annual_phase_deg=annual_phase_deg,
                              velocity=velocity, orbit=orbit, rotation=rotation, pair=pair,
                              precess_to_unix=precess_to_unix)
        cols.append(q)
    return np.stack(cols, axis=-1)  # (..., 10, p)


@dataclass(frozen=True, eq=False)
class Design(Described):
    """``matrix[..., i, j]`` = quadrature ``rows[i]`` per unit of parameter ``columns[j]``.

    With an array of annual phases the leading axis runs over them.
    """

    model: str
    latitude_deg: float
    annual_phase_deg: np.ndarray = field(repr=False)
    matrix: np.ndarray = field(repr=False)
    orbit: bool = True
    rotation: bool = False
    pair: bool = True
    rows: tuple[str, ...] = QUADRATURE_KEYS

    @property
    def columns(self) -> tuple[str, ...]:
        return MODEL_NAMES[self.model]

    def predict(self, params) -> np.ndarray:
        """Quadratures ``M p`` for a parameter mapping (or :class:`SkyParameters`)."""
        from .parameters import check_values

        p = np.array(list(check_values(self.model, params).values()))
        return self.matrix @ p

    def to_dict(self) -> dict:
        return {"model": self.model, "latitude_deg": self.latitude_deg,
                "annual_phase_deg": self.annual_phase_deg, "rows": list(self.rows),
                "columns": list(self.columns), "matrix": self.matrix, "orbit": self.orbit,
                "rotation": self.rotation, "pair": self.pair}

    def summary(self) -> Summary:
        rows = [("model", self.model.upper(), ""), ("latitude", self.latitude_deg, "deg"),
                ("shape", " × ".join(str(n) for n in self.matrix.shape), "")]
        if self.matrix.ndim == 2:
            for i, r in enumerate(self.rows):
                rows.append((r, "  ".join(f"{x:+.3e}" for x in self.matrix[i]), ""))
        notes = (f"columns: {', '.join(self.columns)}",)
        return Summary("Sidereal design (quadratures per unit parameter)", tuple(rows), notes)


def design_matrix(model: str, *, latitude_deg: float, annual_phase_deg=0.0, velocity=None, orbit=True,
                  rotation: bool = False, pair: bool = True, precess_to_unix: float | None = None) -> Design:
    """The design ``M(W)`` (10 × 8 for SME, 10 × 1 for RMS; ``(n, 10, p)`` for ``n`` phases).

    Arguments as for :func:`nullfit.hypothesis.sidereal.quadratures` (without ``params``).
    """
    model = check_model(model)
    W = np.asarray(annual_phase_deg, dtype=float)
    M = _columns(model, latitude_deg=latitude_deg, annual_phase_deg=W, velocity=velocity, orbit=orbit,
                 rotation=rotation, pair=pair, precess_to_unix=precess_to_unix)
    M.setflags(write=False)
    W = W.copy()
    W.setflags(write=False)
    return Design(model, float(latitude_deg), W, M, orbit if isinstance(orbit, bool) else True,
                  bool(rotation), bool(pair))


@dataclass(frozen=True, eq=False)
class AnnualDesign(Described):
    """``M(W) = Σ_term terms[term] × f_term(W)`` with ``f`` = 1, sin W, cos W, sin 2W, cos 2W."""

    model: str
    latitude_deg: float
    terms: dict = field(repr=False)
    orbit: bool = True
    rotation: bool = False
    pair: bool = True

    @property
    def columns(self) -> tuple[str, ...]:
        return MODEL_NAMES[self.model]

    def at(self, annual_phase_deg) -> np.ndarray:
        """``M(W)`` rebuilt from the annual terms; shape ``(..., 10, p)``."""
        W = np.deg2rad(np.asarray(annual_phase_deg, dtype=float))[..., None, None]
        f = {"0": 1.0, "sW": np.sin(W), "cW": np.cos(W), "s2W": np.sin(2 * W), "c2W": np.cos(2 * W)}
        return sum(self.terms[t] * f[t] for t in ANNUAL_TERMS)

    def to_dict(self) -> dict:
        return {"model": self.model, "latitude_deg": self.latitude_deg, "rows": list(QUADRATURE_KEYS),
                "columns": list(self.columns), "terms": dict(self.terms), "orbit": self.orbit,
                "rotation": self.rotation, "pair": self.pair}

    def summary(self) -> Summary:
        rows = tuple((f"max |M_{t}|", float(np.max(np.abs(self.terms[t]))), "") for t in ANNUAL_TERMS)
        return Summary("Annual structure of the sidereal design", rows,
                       ("M(W) = M_0 + M_sW sin W + M_cW cos W + M_s2W sin 2W + M_c2W cos 2W",))


def annual_design(model: str, *, latitude_deg: float, velocity=None, orbit: bool = True, rotation: bool = False,
                  pair: bool = True, precess_to_unix: float | None = None) -> AnnualDesign:
    """The annual Fourier terms of the design (exact: the design is a trigonometric polynomial of degree ≤ 2 in W)."""
    model = check_model(model)
    if not isinstance(orbit, bool):
        raise TypeError("annual_design needs orbit=True or False (the circular orbit defines the W-dependence)")
    n = 8
    W = 2.0 * np.pi * np.arange(n) / n
    M = _columns(model, latitude_deg=latitude_deg, annual_phase_deg=np.rad2deg(W), velocity=velocity,
                 orbit=orbit, rotation=rotation, pair=pair, precess_to_unix=precess_to_unix)  # (n, 10, p)
    basis = {"0": np.ones(n), "sW": 2 * np.sin(W), "cW": 2 * np.cos(W), "s2W": 2 * np.sin(2 * W),
             "c2W": 2 * np.cos(2 * W)}
    terms = {}
    for t in ANNUAL_TERMS:
        m = np.tensordot(basis[t], M, axes=(0, 0)) / n
        m.setflags(write=False)
        terms[t] = m
    return AnnualDesign(model, float(latitude_deg), terms, orbit, bool(rotation), bool(pair))
