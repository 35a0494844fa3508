r"""Parameter sets of the two test theories, and the sun-frame coefficient tensors they define.

SME (photon sector, the eight coefficients a rotating resonator pair bounds)
---------------------------------------------------------------------------
``κ̃_e−`` is symmetric and traceless, given by ``e_XY, e_XZ, e_YZ``, ``e_XX-YY = κ̃^{XX} − κ̃^{YY}``
and ``e_ZZ = κ̃^{ZZ}``; tracelessness gives

.. math::

    κ̃^{XX} = \tfrac12(e_{XX-YY} − e_{ZZ}), \qquad κ̃^{YY} = −\tfrac12(e_{XX-YY} + e_{ZZ}).

``κ̃_o+`` is antisymmetric, given by ``o_XY, o_XZ, o_YZ`` (``κ̃_o+^{YX} = −o_XY`` etc.).  The boost
vector of the model is ``k = (−o_YZ, o_XZ, −o_XY)``.

RMS
---
One parameter ``P_MM = δ − β + ½`` (0 in special relativity, ½ for Galilean kinematics).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from ...core.render import Described, Summary

__all__ = ["SME_NAMES", "RMS_NAMES", "MODEL_NAMES", "SkyParameters", "check_values", "sme_tensors"]

#: The eight SME parameter names, in the order of the design matrix's columns.
SME_NAMES = ("e_XY", "e_XZ", "e_YZ", "e_XX-YY", "e_ZZ", "o_XY", "o_XZ", "o_YZ")
#: The RMS parameter name.
RMS_NAMES = ("P_MM",)
#: Parameter names per model.
MODEL_NAMES = {"sme": SME_NAMES, "rms": RMS_NAMES}


def check_model(model: str) -> str:
    m = str(model).strip().lower()
    if m not in MODEL_NAMES:
        raise ValueError(f"model must be 'sme' or 'rms', not {model!r}")
    return m


def check_values(model: str, params: Mapping[str, float] | None) -> dict[str, float]:
    """All parameters of ``model`` as floats (missing ones 0); unknown names raise ValueError."""
    names = MODEL_NAMES[check_model(model)]
    params = {} if params is None else params
    if isinstance(params, SkyParameters):
        if params.model != check_model(model):
            raise ValueError(f"parameters are for model {params.model!r}, not {model!r}")
        params = params.as_dict()
    if not isinstance(params, Mapping):
        raise TypeError(f"params must be a mapping of parameter name to value, not {type(params).__name__}")
    unknown = sorted(set(params) - set(names))
    if unknown:
        raise ValueError(f"unknown {check_model(model).upper()} parameter(s) {unknown}; allowed: {list(names)}")
    out = {}
    for k in names:
        v = params.get(k, 0.0)
        if isinstance(v, bool) or v is None:
            raise TypeError(f"{k} must be a number, not {v!r}")
        v = float(v)
        if not math.isfinite(v):
            raise ValueError(f"{k} must be finite, not {v!r}")
        out[k] = v
    return out


def sme_tensors(values: Mapping[str, float]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``(κ̃_e−, κ̃_o+, k)`` in sun-frame components from a full SME value dict."""
    d, zz = values["e_XX-YY"], values["e_ZZ"]
    xx, yy = 0.5 * (d - zz), -0.5 * (d + zz)
    exy, exz, eyz = values["e_XY"], values["e_XZ"], values["e_YZ"]
    e_minus = np.array([[xx, exy, exz], [exy, yy, eyz], [exz, eyz, zz]])
    oxy, oxz, oyz = values["o_XY"], values["o_XZ"], values["o_YZ"]
    o_plus = np.array([[0.0, oxy, oxz], [-oxy, 0.0, oyz], [-oxz, -oyz, 0.0]])
    k = np.array([-oyz, oxz, -oxy])
    return e_minus, o_plus, k


@dataclass(frozen=True)
class SkyParameters(Described):
    """A parameter set of one test theory: ``model`` ("sme" or "rms") and its values.

    ``values`` holds every parameter of the model (missing ones 0) as a tuple of
    ``(name, value)`` pairs in canonical order; :meth:`as_dict` gives a plain dict.
    """

    model: str
    values: tuple[tuple[str, float], ...] = ()

    def __post_init__(self):
        model = check_model(self.model)
        vals = self.values
        if not isinstance(vals, Mapping):
            vals = dict(vals)
        object.__setattr__(self, "model", model)
        object.__setattr__(self, "values", tuple(check_values(model, vals).items()))

    @classmethod
    def sme(cls, **values: float) -> SkyParameters:
        """SME parameters by keyword; ``e_XX-YY`` is spelt ``e_XX_YY`` here."""
        if "e_XX_YY" in values:
            values["e_XX-YY"] = values.pop("e_XX_YY")
        return cls("sme", tuple(values.items()))

    @classmethod
    def rms(cls, P_MM: float) -> SkyParameters:
        return cls("rms", (("P_MM", P_MM),))

    @property
    def names(self) -> tuple[str, ...]:
        return MODEL_NAMES[self.model]

    def as_dict(self) -> dict[str, float]:
        return dict(self.values)

    def as_vector(self) -> np.ndarray:
        """Values in the order of the design matrix's columns."""
        return np.array([v for _, v in self.values])

    def __getitem__(self, name: str) -> float:
        return self.as_dict()[name]

    def to_dict(self) -> dict:
        return {"model": self.model, "values": self.as_dict()}

    def summary(self) -> Summary:
        rows = tuple((k, v, "") for k, v in self.values)
        title = "SME photon-sector coefficients (sun-centred frame)" if self.model == "sme" else "RMS parameter"
        return Summary(title, rows)
