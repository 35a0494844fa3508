r"""The apparatus: what a classical wind (or an RMS anisotropy) would do to *this* instrument.

Classical wind: second-order path difference of an orthogonal pair
-------------------------------------------------------------------
Let the apparatus move with speed ``v`` (``β = v/c``) through a medium in which light travels at
``c`` in every direction, and let an arm of effective (folded) length ``L`` make the angle ``ψ``
with the velocity.  In the medium's frame the light going out and back along the arm covers the
arm plus the displacement of the moving mirror; solving the two triangles gives the round-trip
time (exact in β)

.. math::

    t(ψ) = \frac{2L}{c}\,\frac{\sqrt{1 - β^2 \sin^2ψ}}{1 - β^2}
         ≈ \frac{2L}{c}\Bigl[1 + β^2 - \tfrac12 β^2 \sin^2ψ\Bigr]
         = \frac{2L}{c}\Bigl[1 + \tfrac34 β^2 + \tfrac14 β^2 \cos 2ψ\Bigr] + O(β^4).

Arm 2 is at ``ψ + 90°``, where ``cos 2ψ`` changes sign, so the difference of the round-trip
times is ``t_1 − t_2 = (L/c) β² cos 2ψ`` and the optical path difference is
``ΔS = c (t_1 − t_2) = L β² cos 2ψ``.  Counted in fringes of wavelength ``λ``:

.. math::

    N(ψ) = \frac{ΔS}{λ} = \frac{L v^2}{λ c^2}\cos 2ψ .

With the table angle θ of arm 1 and the table angle φ at which arm 1 lies along the wind axis,
``ψ = θ − φ`` and the signal is ``A cos(2(θ − φ))`` with the **amplitude**
``A = L v² / (λ c²)`` (:meth:`Apparatus.wind_amplitude`).  The shift between orientations 90°
apart (ψ = 0 against ψ = 90°) is the **peak-to-peak** value ``2A``
(:meth:`Apparatus.wind_peak_to_peak`).  Only the velocity's projection onto the plane of the
arms (the in-plane speed ``v_h``) enters: a component normal to the plane adds the same
``β_⊥²`` to both arms.  Inverting, an upper limit ``A_up`` on the amplitude bounds the in-plane
speed: ``v ≤ c·sqrt(λ A_up / L)`` (:meth:`Apparatus.speed_bound`).

Fringes and fractional changes
------------------------------
Each arm's light makes a round trip of optical length ``2L``.  A fractional change ``ε`` of that
round trip (equivalently of the round-trip time, or — with a minus sign — of a resonator's
frequency, ``δν/ν = −δt/t``) changes the path by ``2Lε``, i.e. by ``2Lε/λ`` fringes.  Hence an
amplitude in fringes equals ``(2L/λ)`` times the same amplitude as a fractional change
(:meth:`Apparatus.fractional_to_fringe`).  From the path difference above the fractional
difference of the round trips is ``ΔS / (2L) = (β²/2) cos 2ψ``: the classical wind gives
``(v/c)²/2`` as a fractional amplitude for an orthogonal pair, independent of ``L`` and ``λ``.
Check: ``(2L/λ)·β²/2 = Lβ²/λ``.

Robertson–Mansouri–Sexl
-----------------------
In the RMS test theory the two-way speed of light in a frame moving with ``v`` relative to the
preferred frame depends on the angle as ``c(ψ)/c = 1 + P' β² sin²ψ + (isotropic terms)`` with
``P' = ½ − β_RMS + δ_RMS`` (notation ``P = β_RMS − δ_RMS − ½ = −P'``).  The round-trip time is
``t(ψ) ≈ (2L/c)(1 − P' β² sin²ψ − …)``, so ``t_1 − t_2 = (2L/c) P' β² cos 2ψ``: the 2θ amplitude
is ``2|P| · L v²/(λ c²)``.  The Galilean transformation (all RMS coefficients 0) has
``P = −½`` and reproduces the classical wind; special relativity has ``P = 0``.  So

* :meth:`Apparatus.rms_amplitude` ``(P, v) = 2|P| · A_wind(v)``, and
* :meth:`Apparatus.rms_bound` ``(A_up, v) = ½ · A_up / A_wind(v)`` bounds ``|β − δ − ½|``.

Here ``v`` is the velocity relative to the hypothesised preferred frame (conventionally the CMB
frame; see :mod:`nullfit.sky`).  The sign of ``P`` flips the sign of the 2θ term (the phase moves
by 90° in θ); amplitudes do not see it.

Sign of the readout
-------------------
nullfit predicts ``+A cos(2(θ − φ))`` for a signal that *grows when arm 1's optical round trip
lengthens relative to arm 2's* (``readout_sign=+1``).  A log of a resonator beat
``(ν_1 − ν_2)/ν`` falls when arm 1 lengthens: give ``readout_sign=-1`` so predicted
``(c₂, s₂)`` templates carry the right sign.  Amplitudes are unaffected.
"""

from __future__ import annotations

import math
from dataclasses import KW_ONLY, dataclass
from typing import Any, Mapping

import numpy as np

from ..core.conventions import SIGNAL_UNITS, SPEED_OF_LIGHT, peak_to_peak
from ..core.render import Described, Summary

__all__ = ["Apparatus"]

#: Signal kinds: fringe position (fractions of a fringe) or fractional frequency/path (Δν/ν).

_UNITS = {"fringe": "fringe", "fractional": "Δν/ν"}

#: Relative tolerance of ``arm_length_m = physical_arm_m × folds`` (as the manifest reader's).
FOLD_RTOL = 1e-3

_MAPPING_KEYS = ("arm_length_m", "wavelength_m", "signal", "folds", "name", "physical_arm_m", "readout_sign")


def _scalar_or_array(x):
    arr = np.asarray(x, dtype=float)
    return float(arr) if arr.ndim == 0 else arr


def _positive_or_none(value, name: str):
    if value is None:
        return None
    if isinstance(value, bool):
        raise TypeError(f"{name} must be a number, not a bool")
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise ValueError(f"{name} must be a positive finite number, not {value!r}")
    return v


@dataclass(frozen=True)
class Apparatus(Described):
    """A two-arm interferometer (fringe signal) or an orthogonal resonator pair (fractional signal).

    Parameters
    ----------
    arm_length_m
        The **effective (folded) optical arm length** L in metres: the length that enters
        ``L v²/(λ c²)``.  For an arm folded by mirrors this is the physical arm length times the
        number of folds; it is *not* recomputed from ``folds``.  May be None for a fractional
        signal (the wind amplitude ``(v/c)²/2`` needs no length), but then fringe ↔ fractional
        conversions are unavailable.
    wavelength_m
        Wavelength λ of the light in metres (may be None for a fractional signal).
    signal
        ``"fringe"`` (fringe position, fractions of a fringe) or ``"fractional"``
        (Δν/ν of a resonator pair, or a fractional path change).
    folds
        Number of folds of each arm — provenance only.
    name
        A label for tables and reports.
    physical_arm_m
        Physical arm length — provenance; if given together with ``folds`` it must satisfy
        ``arm_length_m = physical_arm_m × folds`` to a relative 1e-3 (a ValueError names both
        otherwise).
    readout_sign
        +1 if the logged signal grows when arm 1's optical round trip lengthens relative to
        arm 2's; −1 for e.g. a resonator beat ``(ν₁ − ν₂)/ν``.  Only the sign of predicted
        ``(c₂, s₂)`` templates depends on it.

    Notes
    -----
    The formulas are derived in the module docstring (:mod:`nullfit.apparatus`).
    ``wind_amplitude`` and ``wind_peak_to_peak`` are deliberately separate methods: the
    peak-to-peak shift between orientations 90° apart is twice the amplitude.
    """

    arm_length_m: float | None
    wavelength_m: float | None
    _: KW_ONLY
    signal: str = "fringe"
    folds: float | None = None
    name: str | None = None
    physical_arm_m: float | None = None
    readout_sign: int = 1

    def __post_init__(self):
        if self.signal not in SIGNAL_UNITS:
            raise ValueError(f"signal must be 'fringe' or 'fractional', not {self.signal!r}")
        set_ = object.__setattr__
        set_(self, "arm_length_m", _positive_or_none(self.arm_length_m, "arm_length_m"))
        set_(self, "wavelength_m", _positive_or_none(self.wavelength_m, "wavelength_m"))
        set_(self, "physical_arm_m", _positive_or_none(self.physical_arm_m, "physical_arm_m"))
        folds = _positive_or_none(self.folds, "folds")
        if folds is not None and folds.is_integer():
            folds = int(folds)
        set_(self, "folds", folds)
        if self.readout_sign not in (1, -1) or isinstance(self.readout_sign, bool):
            raise ValueError(f"readout_sign must be +1 or -1, not {self.readout_sign!r}")
        set_(self, "readout_sign", int(self.readout_sign))
        if self.name is not None:
            set_(self, "name", str(self.name))
        if self.physical_arm_m is not None and self.folds is not None:
            implied = self.physical_arm_m * self.folds
            if self.arm_length_m is None:
                raise ValueError(
                    f"give arm_length_m, the effective (folded) length; physical_arm_m × folds = "
                    f"{self.physical_arm_m:g} m × {self.folds:g} = {implied:g} m"
                )
            if not math.isclose(self.arm_length_m, implied, rel_tol=FOLD_RTOL):
                raise ValueError(
                    f"arm_length_m = {self.arm_length_m:g} m disagrees with physical_arm_m × folds = "
                    f"{self.physical_arm_m:g} m × {self.folds:g} = {implied:g} m "
                    "(arm_length_m must be the effective, folded length)"
                )
        if self.signal == "fringe" and (self.arm_length_m is None or self.wavelength_m is None):
            raise ValueError("a fringe signal needs arm_length_m (effective, folded) and wavelength_m")

    # ------------------------------------------------------------------ construction
    @classmethod
    def from_mapping(cls, d: Mapping[str, Any]) -> "Apparatus":
        """Build from a manifest's ``[apparatus]`` table.

        Keys: ``arm_length_m``, ``wavelength_m``, ``signal``, ``folds``, ``name``, and optionally
        ``physical_arm_m`` (checked against ``arm_length_m = physical_arm_m × folds``) and
        ``readout_sign``.  Unknown keys raise ValueError (a misspelt key must not be ignored).
        """
        if not isinstance(d, Mapping):
            raise TypeError(f"[apparatus] must be a table (mapping), not {type(d).__name__}")
        unknown = sorted(set(d) - set(_MAPPING_KEYS))
        if unknown:
            raise ValueError(f"unknown [apparatus] key(s) {unknown}; allowed: {list(_MAPPING_KEYS)}")
        kwargs = {k: d[k] for k in _MAPPING_KEYS if k in d and k not in ("arm_length_m", "wavelength_m")}
        return cls(d.get("arm_length_m"), d.get("wavelength_m"), **kwargs)

    # ------------------------------------------------------------------ basic properties
    @property
    def unit(self) -> str:
        """Unit of the signal and of every amplitude this apparatus returns."""
        return _UNITS[self.signal]

    def _need_length_and_wavelength(self, what: str):
        if self.arm_length_m is None or self.wavelength_m is None:
            raise ValueError(f"{what} needs both arm_length_m and wavelength_m")
        return self.arm_length_m, self.wavelength_m

    @property
    def fringes_per_fractional(self) -> float:
        """``2L/λ``: an amplitude in fringes per unit fractional (round-trip) amplitude."""
        L, lam = self._need_length_and_wavelength("the fringe ↔ fractional conversion")
        return 2.0 * L / lam

    def fractional_to_fringe(self, amplitude):
        """Amplitude in fringes for a fractional amplitude: ``(2L/λ) · a``."""
        return _scalar_or_array(np.asarray(amplitude, dtype=float) * self.fringes_per_fractional)

    def fringe_to_fractional(self, amplitude):
        """Fractional amplitude for an amplitude in fringes: ``a · λ/(2L)``."""
        return _scalar_or_array(np.asarray(amplitude, dtype=float) / self.fringes_per_fractional)

    # ------------------------------------------------------------------ classical wind
    def wind_amplitude(self, speed_m_s):
        """2θ **amplitude** of the classical wind for in-plane speed ``speed_m_s`` (m/s).

        ``L v²/(λ c²)`` fringes for a fringe signal, ``(v/c)²/2`` for a fractional one.
        Vectorised; a scalar in gives a float out.  Not a peak-to-peak value — see
        :meth:`wind_peak_to_peak`.
        """
        v = np.asarray(speed_m_s, dtype=float)
        if np.any(v < 0) or not np.all(np.isfinite(v)):
            raise ValueError("speed_m_s must be finite and non-negative")
        beta2 = (v / SPEED_OF_LIGHT) ** 2
        if self.signal == "fringe":
            amp = self.arm_length_m * beta2 / self.wavelength_m
        else:
            amp = 0.5 * beta2
        return _scalar_or_array(amp)

    def wind_peak_to_peak(self, speed_m_s):
        """**Peak-to-peak** shift between orientations 90° apart: ``2 × wind_amplitude``."""
        return peak_to_peak(self.wind_amplitude(speed_m_s))

    def speed_bound(self, amplitude_upper):
        """Upper limit on the in-plane wind speed (m/s) from an upper limit on the 2θ **amplitude**.

        ``c·sqrt(λ A_up / L)`` (fringe) or ``c·sqrt(2 A_up)`` (fractional).  A quoted
        peak-to-peak bound must be halved first
        (:func:`nullfit.core.conventions.amplitude_from_peak_to_peak`).
        """
        a = np.asarray(amplitude_upper, dtype=float)
        if np.any(a < 0) or not np.all(np.isfinite(a)):
            raise ValueError("amplitude_upper must be finite and non-negative")
        if self.signal == "fringe":
            beta2 = self.wavelength_m * a / self.arm_length_m
        else:
            beta2 = 2.0 * a
        return _scalar_or_array(SPEED_OF_LIGHT * np.sqrt(beta2))

    # ------------------------------------------------------------------ RMS
    def rms_amplitude(self, beta_minus_delta_minus_half, speed_m_s):
        """2θ amplitude for the RMS combination ``P = β − δ − ½`` at speed ``speed_m_s``.

        ``2|P| · wind_amplitude(v)``; ``P = −½`` (Galilean) is the classical wind, ``P = 0``
        (special relativity) gives nothing.
        """
        p = np.abs(np.asarray(beta_minus_delta_minus_half, dtype=float))
        return _scalar_or_array(2.0 * p * np.asarray(self.wind_amplitude(speed_m_s)))

    def rms_bound(self, amplitude_upper, speed_m_s):
        """Upper limit on ``|β − δ − ½|`` from an amplitude limit, for a velocity of ``speed_m_s``.

        ``½ · A_up / wind_amplitude(v)``, with ``v`` the in-plane speed relative to the
        preferred frame.
        """
        a = np.asarray(amplitude_upper, dtype=float)
        if np.any(a < 0):
            raise ValueError("amplitude_upper must be non-negative")
        w = np.asarray(self.wind_amplitude(speed_m_s))
        if np.any(w <= 0):
            raise ValueError("speed_m_s must be positive for an RMS bound")
        return _scalar_or_array(0.5 * a / w)

    # ------------------------------------------------------------------ description
    def to_dict(self) -> dict:
        """JSON-able mapping; :meth:`from_mapping` reads it back."""
        d = {
            "arm_length_m": self.arm_length_m,
            "wavelength_m": self.wavelength_m,
            "signal": self.signal,
            "folds": self.folds,
            "name": self.name,
            "physical_arm_m": self.physical_arm_m,
            "readout_sign": self.readout_sign,
        }
        return d

    def summary(self) -> Summary:
        rows = [
            ("effective (folded) arm length L", self.arm_length_m, "m"),
            ("wavelength λ", self.wavelength_m, "m"),
            ("signal", self.signal, self.unit),
        ]
        if self.folds is not None:
            rows.append(("folds (provenance)", self.folds, ""))
        if self.physical_arm_m is not None:
            rows.append(("physical arm length", self.physical_arm_m, "m"))
        rows.append(("readout sign", self.readout_sign, ""))
        notes = [
            "classical wind: amplitude L v²/(λ c²) fringes (fractional: (v/c)²/2); "
            "peak-to-peak between orientations 90° apart = 2 × amplitude"
        ]
        title = "Apparatus" + (f": {self.name}" if self.name else "")
        return Summary(title=title, rows=tuple(rows), notes=tuple(notes))
