"""The conventions every module shares (written out in ``docs/conventions.md``).

Signal model for one scan::

    y(t, θ) = drift(t) + Σ_k [c_k cos kθ + s_k sin kθ] + noise

* amplitude ``A_k = hypot(c_k, s_k)`` (an *amplitude*, never a peak-to-peak value);
* phase ``φ_k = atan2(s_k, c_k) / k`` in degrees, reduced to ``[0, 360/k)``, so that the
  term equals ``A_k cos(k(θ − φ_k))``;
* the peak-to-peak shift between orientations 90° apart is ``2·A_2``
  (:func:`peak_to_peak`); every output that quotes a shift says which of the two it is.

Units inside the library are SI, seconds and radians; angles are degrees at the user's edge.
Confidence levels are ``confidence_level=0.95``, never alpha.
"""

from __future__ import annotations

import math

import numpy as np

#: Speed of light in vacuum, m/s (exact, SI definition).
SPEED_OF_LIGHT = 299_792_458.0

#: Units of angles at the user's edge.
ANGLE_UNITS = ("deg", "rad")
#: Units of the logged signal: fractions of a fringe, or a fractional frequency (or path) Δν/ν.
SIGNAL_UNITS = ("fringe", "fractional")


def check_angle_unit(unit: str) -> str:
    if unit not in ANGLE_UNITS:
        raise ValueError(f"angle_unit must be 'deg' or 'rad', not {unit!r}")
    return unit


def amplitude_phase(c, s, k: int):
    """Amplitude and phase (degrees in ``[0, 360/k)``) of ``c cos kθ + s sin kθ``.

    The phase is the table angle of the first maximum: the term equals
    ``A cos(k(θ − φ))``.
    """
    c = np.asarray(c, dtype=float)
    s = np.asarray(s, dtype=float)
    amp = np.hypot(c, s)
    period = 360.0 / k
    phase = np.mod(np.rad2deg(np.arctan2(s, c)) / k, period)
    # np.mod can return `period` itself for tiny negative inputs; fold it back to 0.
    phase = np.where(phase >= period, 0.0, phase)
    if amp.ndim == 0:
        return float(amp), float(phase)
    return amp, phase


def cos_sin_from_amplitude_phase(amplitude, phase_deg, k: int):
    """Inverse of :func:`amplitude_phase`: ``(c, s)`` for ``A cos(k(θ − φ))``."""
    ang = k * np.deg2rad(np.asarray(phase_deg, dtype=float))
    amp = np.asarray(amplitude, dtype=float)
    c, s = amp * np.cos(ang), amp * np.sin(ang)
    if np.ndim(c) == 0:
        return float(c), float(s)
    return c, s


def peak_to_peak(amplitude):
    """Peak-to-peak shift between orientations 90° apart for a 2θ *amplitude*: ``2·A``."""
    return 2.0 * np.asarray(amplitude, dtype=float) if np.ndim(amplitude) else 2.0 * float(amplitude)


def amplitude_from_peak_to_peak(p2p):
    """The 2θ amplitude for a quoted peak-to-peak shift: ``p2p / 2``."""
    return 0.5 * np.asarray(p2p, dtype=float) if np.ndim(p2p) else 0.5 * float(p2p)


def check_confidence_level(confidence_level: float) -> float:
    cl = float(confidence_level)
    if not (0.0 < cl < 1.0) or math.isnan(cl):
        raise ValueError(
            f"confidence_level must lie strictly between 0 and 1 (e.g. 0.95), not {confidence_level!r}"
        )
    return cl


def make_rng(rng=None):
    """Return ``(generator, seed)`` from an int seed, a ``numpy.random.Generator``, or None.

    With ``None`` a fresh seed is drawn from the OS and *recorded*, so every result can say
    which seed reproduces it.  A Generator passed in is used as is and its seed is reported as
    ``None`` (the caller holds it).  Global random state is never touched.
    """
    if isinstance(rng, np.random.Generator):
        return rng, None
    if rng is None:
        seed = int(np.random.SeedSequence().entropy % (2**63))
    elif isinstance(rng, (int, np.integer)) and not isinstance(rng, bool):
        seed = int(rng)
    else:
        raise TypeError(f"rng must be an int seed, a numpy.random.Generator or None, not {type(rng).__name__}")
    return np.random.default_rng(seed), seed
