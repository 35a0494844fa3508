"""The ingredients of a synthetic scan: harmonics, drift, and noise models (white, AR(1), flicker).

See :mod:`nullfit.simulation.scans` for how they are combined into a log.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from ..core.conventions import cos_sin_from_amplitude_phase, make_rng, peak_to_peak

NOISE_KINDS = ("white", "ar1", "flicker")


# ---------------------------------------------------------------------------------------------
# small value objects
# ---------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Harmonic:
    """One harmonic ``A cos(k(θ − φ)) = c cos kθ + s sin kθ`` (``amplitude`` is not peak-to-peak)."""

    k: int
    amplitude: float
    phase_deg: float
    c: float
    s: float

    @classmethod
    def from_amplitude_phase(cls, k: int, amplitude: float, phase_deg: float) -> "Harmonic":
        if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 1:
            raise ValueError(f"harmonic order must be an integer >= 1, not {k!r}")
        amplitude, phase_deg = float(amplitude), float(phase_deg)
        if not (math.isfinite(amplitude) and amplitude >= 0):
            raise ValueError(f"harmonic {k}: amplitude must be finite and >= 0, not {amplitude!r}")
        if not math.isfinite(phase_deg):
            raise ValueError(f"harmonic {k}: phase must be finite, not {phase_deg!r}")
        c, s = cos_sin_from_amplitude_phase(amplitude, phase_deg, int(k))
        period = 360.0 / k
        phase = phase_deg % period  # the phase reduced to [0, 360/k), as nullfit.core.conventions reports it
        if phase >= period:  # a tiny negative input can round up to the period itself
            phase = 0.0
        return cls(int(k), amplitude, float(phase), c, s)

    @property
    def peak_to_peak(self) -> float:
        """``2·A``: the shift between orientations 90° apart (meaningful for k = 2)."""
        return peak_to_peak(self.amplitude)

    def values(self, theta_rad) -> np.ndarray:
        th = np.asarray(theta_rad, dtype=float)
        return self.c * np.cos(self.k * th) + self.s * np.sin(self.k * th)


@dataclass(frozen=True)
class Drift:
    """``drift(t) = offset + slope·t + quadratic·t² + W(t)``; ``t`` in s since the first reading,
    ``W`` a random walk with step standard deviation ``walk_step`` per reading (signal units)."""

    offset: float = 0.0
    slope: float = 0.0
    quadratic: float = 0.0
    walk_step: float = 0.0

    def __post_init__(self):
        for name in ("offset", "slope", "quadratic", "walk_step"):
            v = getattr(self, name)
            if not math.isfinite(float(v)):
                raise ValueError(f"drift {name} must be finite, not {v!r}")
            object.__setattr__(self, name, float(v))
        if self.walk_step < 0:
            raise ValueError(f"drift walk_step must be >= 0, not {self.walk_step!r}")

    @classmethod
    def coerce(cls, drift) -> "Drift":
        if drift is None:
            return cls()
        if isinstance(drift, Drift):
            return drift
        if isinstance(drift, Mapping):
            unknown = set(drift) - {"offset", "slope", "quadratic", "walk_step"}
            if unknown:
                raise ValueError(f"unknown drift key(s) {sorted(unknown)}; use offset, slope, quadratic, walk_step")
            return cls(**drift)
        raise TypeError(f"drift must be None, a Drift or a mapping, not {type(drift).__name__}")

    def polynomial(self, t) -> np.ndarray:
        t = np.asarray(t, dtype=float)
        return self.offset + self.slope * t + self.quadratic * t * t


@dataclass(frozen=True)
class Noise:
    """Noise model: ``kind`` in ``("white", "ar1", "flicker")``; ``sigma`` is the marginal standard
    deviation of one reading; ``ar1_coef`` the lag-one coefficient per reading (``"ar1"``);
    ``flicker_alpha`` the spectral exponent, PSD ∝ 1/f^α (``"flicker"``)."""

    kind: str = "white"
    sigma: float = 0.0
    ar1_coef: float | None = None
    flicker_alpha: float | None = None

    def __post_init__(self):
        if self.kind not in NOISE_KINDS:
            raise ValueError(f"noise must be one of {NOISE_KINDS}, not {self.kind!r}")
        if not (math.isfinite(self.sigma) and self.sigma >= 0):
            raise ValueError(f"sigma must be finite and >= 0, not {self.sigma!r}")
        if self.kind == "ar1":
            if self.ar1_coef is None:
                raise ValueError("noise='ar1' needs ar1_coef (the lag-one coefficient, -1 < ar1_coef < 1)")
            if not -1.0 < self.ar1_coef < 1.0:
                raise ValueError(f"ar1_coef must lie strictly between -1 and 1, not {self.ar1_coef!r}")
        if self.kind == "flicker":
            if self.flicker_alpha is None or not (0.0 <= self.flicker_alpha <= 3.0):
                raise ValueError(f"flicker_alpha must lie in [0, 3], not {self.flicker_alpha!r}")

    @property
    def innovation_sigma(self) -> float:
        """Standard deviation of the AR(1) innovations, ``sigma·sqrt(1 − ρ²)`` (``sigma`` otherwise)."""
        if self.kind == "ar1":
            return self.sigma * math.sqrt(1.0 - self.ar1_coef**2)
        return self.sigma

    def describe(self) -> str:
        if self.kind == "ar1":
            return f"AR(1), rho = {self.ar1_coef:g} per reading, marginal sigma = {self.sigma:g}"
        if self.kind == "flicker":
            return f"flicker, PSD ~ 1/f^{self.flicker_alpha:g}, marginal sigma = {self.sigma:g}"
        return f"white, sigma = {self.sigma:g}"


# ---------------------------------------------------------------------------------------------
# noise generators
# ---------------------------------------------------------------------------------------------
def ar1_noise(n: int, coef: float, sigma: float, rng=None) -> np.ndarray:
    """A stationary Gaussian AR(1) series ``x_i = coef·x_{i−1} + e_i`` of marginal std ``sigma``.

    ``x_0 ~ N(0, sigma²)`` is drawn from the stationary distribution and the innovations have
    standard deviation ``sigma·sqrt(1 − coef²)``, so ``Var x_i = sigma²`` for every ``i``
    (``Var x_i = coef²·sigma² + sigma²(1 − coef²)``).  Vectorised with ``scipy.signal.lfilter``.
    """
    from scipy.signal import lfilter

    gen, _ = make_rng(rng)
    if not -1.0 < coef < 1.0:
        raise ValueError(f"coef must lie strictly between -1 and 1, not {coef!r}")
    e = gen.standard_normal(int(n))
    if e.size == 0:
        return e
    e[1:] *= math.sqrt(1.0 - coef * coef)
    return sigma * lfilter([1.0], [1.0, -coef], e)


def flicker_noise(n: int, alpha: float = 1.0, sigma: float = 1.0, rng=None, *, oversample: int = 2) -> np.ndarray:
    """Gaussian noise with power spectral density ``∝ 1/f^alpha`` by spectral shaping.

    A series of length ``m = oversample·n`` is built in the frequency domain: at every positive
    Fourier frequency ``f_j = j/m`` (``j = 1 … ⌊m/2⌋``, in cycles per reading) the coefficient is
    ``X_j = f_j^(−alpha/2)·(a_j + i b_j)`` with ``a_j, b_j`` independent standard normal (``b = 0``
    at the Nyquist frequency), ``X_0 = 0``; ``numpy.fft.irfft`` returns a real, *stationary* (circular)
    Gaussian series whose periodogram has expectation ``∝ f^(−alpha)``.  Its first ``n`` readings
    are kept: the oversampling breaks the circular wrap-around and puts the lowest frequency,
    below which the spectrum is flat (zero mean), at ``1/(oversample·n)``.

    Normalisation: with ``x_t = (1/m)·Σ_k X_k e^{2πikt/m}``, each pair ``±j`` contributes
    variance ``4 w_j²/m²`` and the Nyquist term ``w²/m²`` (``w_j = f_j^(−alpha/2)``), so the
    series is scaled by ``sigma / sqrt(Σ 4w_j²/m² + w_N²/m²)``: ``Var x_t = sigma²`` exactly
    (over realisations, for every ``t``; a single realisation scatters about it).
    ``alpha = 0`` is white noise, ``alpha = 2`` a (band-limited) random walk.
    """
    gen, _ = make_rng(rng)
    n = int(n)
    if n <= 0:
        return np.zeros(0)
    if not 0.0 <= alpha <= 3.0:
        raise ValueError(f"alpha must lie in [0, 3], not {alpha!r}")
    m = max(int(oversample), 1) * n
    m += m % 2  # even length: one real Nyquist bin
    j = np.arange(1, m // 2 + 1)
    w = (j / m) ** (-alpha / 2.0)
    a = gen.standard_normal(j.size)
    b = gen.standard_normal(j.size)
    b[-1] = 0.0  # the Nyquist coefficient of a real series is real
    spec = np.zeros(m // 2 + 1, dtype=complex)
    spec[1:] = w * (a + 1j * b)
    var = (4.0 * np.sum(w[:-1] ** 2) + w[-1] ** 2) / (m * m)
    x = np.fft.irfft(spec, m)[:n]
    return (sigma / math.sqrt(var)) * x
