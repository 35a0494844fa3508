"""Synthetic rotation scans with a known truth (demo data, injection tests, coverage studies).

:func:`simulate_scan` returns a validated :class:`~nullfit.scan.Scan` and, beside it, a
:class:`Truth` that holds every ingredient of the signal; :func:`simulate_frame` returns the same
readings as the raw columns a logger would write (for CSV demo files).

Model
-----
The turntable turns at a constant rate, one turn per ``period_s`` seconds, and is read at equal
time steps.  The signal is (DESIGN.md, "Conventions")::

    y_i = drift(t_i) + Σ_k [c_k cos kθ_i + s_k sin kθ_i] + noise_i + outlier_i

with ``c_k cos kθ + s_k sin kθ = A_k cos(k(θ − φ_k))`` (:mod:`nullfit.conventions`).

Angles
    *Continuous sampling* (``marks=None``): ``samples_per_turn`` readings per turn, reading ``i``
    at ``t_i = i·period_s/samples_per_turn`` and ``θ_i = start_angle_deg + sense·360°·i/samples_per_turn``.
    *Discrete marks* (``marks=M``): the table is read as each of ``M`` equally spaced marks
    (mark ``j`` at ``j·360°/M``, mark 0 the reference mark) passes the pointer, one reading every
    ``period_s/M`` seconds.  With ``repeat_start_mark=True`` the reference mark is read a second
    time at the end of every turn: the table stands at the reference mark for one reading interval,
    the first reading closes the turn and the second opens the next (a drift reference, not an
    extra azimuth), so a full cycle takes ``period_s·(M+1)/M`` and has ``M+1`` readings.  The
    first and last readings of the log are not repeated.  Harmonics ``k ≥ M/2`` alias (as in a
    real mark log); the simulator does not refuse them.
    The logged angle is ``θ mod 360°`` (``angles_mod_360=True``) or the continuous angle.

Drift (:class:`Drift`)
    ``offset + slope·t + quadratic·t² + W(t)``, ``t`` in seconds since the first reading and
    ``W`` a Gaussian random walk with ``W(0) = 0`` and increments of standard deviation
    ``walk_step`` between consecutive readings (of the gap-free grid).

Noise (:class:`Noise`)
    ``sigma`` is always the *marginal* standard deviation of one reading, so the three models have
    the same noise power.  ``"white"``: independent normal.  ``"ar1"``: stationary Gaussian AR(1),
    ``x_i = ρ x_{i−1} + e_i`` with ``ρ = ar1_coef`` per reading and innovations of standard
    deviation ``sigma·sqrt(1 − ρ²)`` (:func:`ar1_noise`).  ``"flicker"``: power spectral density
    ``∝ 1/f^α`` by spectral shaping (:func:`flicker_noise`).

Gaps and outliers
    ``gaps`` removes readings: a fraction (``round(gaps·n)`` readings drawn without replacement)
    or a list of ``(start_s, stop_s)`` windows in seconds since the first reading (readings with
    ``start_s ≤ t < stop_s`` are removed).  ``outliers=(fraction, size)`` adds ``±size`` (random
    sign, signal units) to ``round(fraction·n_kept)`` distinct kept readings.

Randomness: ``rng`` is an int seed, a ``numpy.random.Generator`` or None
(:func:`nullfit.conventions.make_rng`); the seed is recorded in the truth.  Noise, random walk,
gaps and outliers draw from four independent child streams (``Generator.spawn``), so switching
outliers or gaps on or off leaves the noise realisation unchanged.  Global state is never touched.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Mapping, Sequence

import numpy as np

from .conventions import cos_sin_from_amplitude_phase, make_rng, peak_to_peak
from .scan import Manifest, Scan
from .summary import Described, Summary

#: Default epoch of simulated scans: 2026-03-09T23:46:40Z (an integer number of Unix seconds).
DEFAULT_EPOCH_UNIX = 1_773_100_000

NOISE_KINDS = ("white", "ar1", "flicker")
SIGNAL_UNITS = ("fringe", "fractional")
TIME_FORMATS = ("relative", "unix", "iso")
#: Column names of :func:`simulate_frame` (the defaults of docs/manifest.md where it has one).
SIGNAL_COLUMN = {"fringe": "fringe", "fractional": "frac_freq"}
TIME_COLUMN = {"relative": "time_s", "unix": "unix_s", "iso": "timestamp"}

_ON_MARK_TOL = 1e-9  # in steps: a reading this close to a mark lies on it


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
        phase = phase_deg % period  # the phase reduced to [0, 360/k), as nullfit.conventions reports it
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


# ---------------------------------------------------------------------------------------------
# the truth
# ---------------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class Truth(Described):
    """Everything that went into a simulated scan.

    Per-row arrays are aligned with the rows of the returned :class:`~nullfit.scan.Scan`
    (after gaps); ``kept`` is the mask of those rows on the gap-free grid of ``n_grid`` readings.

    Attributes
    ----------
    harmonics : tuple of Harmonic
        The injected harmonics (``harmonic(k)`` returns a zero harmonic for any other ``k``).
    drift, noise : Drift, Noise
        Drift and noise parameters.
    seed : int or None
        The seed that reproduces the scan (None when a Generator was passed in).
    time : ndarray
        Seconds since the first reading (the scan's ``time``; the epoch is ``epoch_unix``).
    theta : ndarray
        True table angle, radians, continuous.
    angle_logged_deg : ndarray
        The angle as logged (modulo 360° or continuous).
    harmonic_signal, drift_signal, noise_signal, outlier_signal : ndarray
        The four parts of the signal; ``signal = model + noise_signal + outlier_signal`` with
        ``model = drift_signal + harmonic_signal`` (the noiseless model).
    turn : ndarray of int
        Turn of every row *by construction* (0-based, counted from the first reading of the grid;
        a turn left without readings by gaps is skipped here, while a reader numbers turns
        consecutively).  ``turn_complete`` (per constructed turn, before gaps): the turn holds a
        reading at every azimuth of the grid.
    outlier_rows : ndarray of int
        0-based rows (of the scan) that received an outlier.
    """

    harmonics: tuple[Harmonic, ...]
    drift: Drift
    noise: Noise
    seed: int | None
    n_turns: float
    period_s: float
    samples_per_turn: int | None
    marks: int | None
    repeat_start_mark: bool
    start_angle_deg: float
    sense: int
    angles_mod_360: bool
    epoch_unix: int | None
    signal_unit: str
    outlier_fraction: float
    outlier_size: float
    gaps: Any
    n_grid: int
    kept: np.ndarray = field(repr=False)
    time: np.ndarray = field(repr=False)
    theta: np.ndarray = field(repr=False)
    angle_logged_deg: np.ndarray = field(repr=False)
    harmonic_signal: np.ndarray = field(repr=False)
    drift_signal: np.ndarray = field(repr=False)
    noise_signal: np.ndarray = field(repr=False)
    outlier_signal: np.ndarray = field(repr=False)
    turn: np.ndarray = field(repr=False)
    turn_complete: np.ndarray = field(repr=False)
    outlier_rows: np.ndarray = field(repr=False)

    # -------------------------------------------------------------- derived facts
    def harmonic(self, k: int) -> Harmonic:
        for h in self.harmonics:
            if h.k == k:
                return h
        return Harmonic(int(k), 0.0, 0.0, 0.0, 0.0)

    @property
    def model(self) -> np.ndarray:
        """The noiseless model ``drift + Σ harmonics`` at every row."""
        return self.drift_signal + self.harmonic_signal

    @property
    def signal(self) -> np.ndarray:
        return self.model + self.noise_signal + self.outlier_signal

    @property
    def n_samples(self) -> int:
        return int(self.time.size)

    @property
    def n_removed(self) -> int:
        """Readings removed by gaps."""
        return int(self.n_grid - self.time.size)

    @property
    def n_outliers(self) -> int:
        return int(self.outlier_rows.size)

    @property
    def reading_interval_s(self) -> float:
        per = self.marks if self.marks else self.samples_per_turn
        return self.period_s / per

    # -------------------------------------------------------------- Described
    def to_dict(self) -> dict:
        return {
            "seed": self.seed,
            "harmonics": {str(h.k): {"amplitude": h.amplitude, "phase_deg": h.phase_deg, "c": h.c, "s": h.s,
                                     "peak_to_peak": h.peak_to_peak} for h in self.harmonics},
            "drift": {"offset": self.drift.offset, "slope": self.drift.slope,
                      "quadratic": self.drift.quadratic, "walk_step": self.drift.walk_step},
            "noise": {"kind": self.noise.kind, "sigma": self.noise.sigma, "ar1_coef": self.noise.ar1_coef,
                      "flicker_alpha": self.noise.flicker_alpha},
            "sampling": {"n_turns": self.n_turns, "period_s": self.period_s,
                         "samples_per_turn": self.samples_per_turn, "marks": self.marks,
                         "repeat_start_mark": self.repeat_start_mark, "start_angle_deg": self.start_angle_deg,
                         "sense": self.sense, "angles_mod_360": self.angles_mod_360,
                         "epoch_unix": self.epoch_unix},
            "signal_unit": self.signal_unit,
            "outliers": {"fraction": self.outlier_fraction, "size": self.outlier_size, "count": self.n_outliers},
            "gaps": {"spec": _gaps_jsonable(self.gaps), "removed": self.n_removed},
            "n_grid": self.n_grid,
            "n_samples": self.n_samples,
            "convention": "c cos kθ + s sin kθ = A cos(k(θ − φ)); amplitude, not peak-to-peak",
        }

    def summary(self) -> Summary:
        u = self.signal_unit
        rows = [("seed", self.seed, ""), ("readings", self.n_samples, ""),
                ("readings removed (gaps)", self.n_removed, ""), ("outliers", self.n_outliers, ""),
                ("period", self.period_s, "s")]
        if self.marks:
            rows.append(("marks per turn", self.marks, ""))
        else:
            rows.append(("samples per turn", self.samples_per_turn, ""))
        for h in self.harmonics:
            rows.append((f"{h.k}θ amplitude", h.amplitude, u))
            rows.append((f"{h.k}θ phase", h.phase_deg, "deg"))
        if 2 in {h.k for h in self.harmonics}:
            rows.append(("2θ peak-to-peak (2·A)", self.harmonic(2).peak_to_peak, u))
        d = self.drift
        rows += [("drift slope", d.slope, f"{u}/s"), ("drift quadratic", d.quadratic, f"{u}/s²"),
                 ("random-walk step", d.walk_step, u)]
        notes = (f"noise: {self.noise.describe()}",
                 "convention: A cos(k(θ − φ)), amplitudes (not peak-to-peak), phase in [0, 360/k) deg")
        return Summary("Simulated scan: truth", tuple(rows), notes)


def _gaps_jsonable(gaps):
    if gaps is None or isinstance(gaps, float):
        return gaps
    return [list(w) for w in gaps]


# ---------------------------------------------------------------------------------------------
# the simulator
# ---------------------------------------------------------------------------------------------
def _grid(n_turns, samples_per_turn, marks, repeat_start_mark, start_angle_deg, sense, period_s):
    """Times, true angles (deg), constructed turn numbers and completeness on the gap-free grid."""
    if marks is None:
        per = int(samples_per_turn)
        n = int(round(n_turns * per))
        step_deg = 360.0 / per
        q = start_angle_deg / step_deg * sense + np.arange(n)  # progress in steps, in the rotation sense
        closes = np.zeros(n, bool)
        dt = period_s / per
        t = np.arange(n) * dt
    else:
        per = int(marks)
        step_deg = 360.0 / per
        m0 = start_angle_deg / step_deg
        if abs(m0 - round(m0)) > _ON_MARK_TOL:
            raise ValueError(f"start_angle_deg={start_angle_deg!r} is not on a mark (marks every {step_deg:g}°)")
        m0 = int(round(m0)) * sense
        nsteps = int(round(n_turns * per))
        steps = m0 + np.arange(nsteps + (1 if repeat_start_mark else 0))
        if repeat_start_mark:
            # read every interior reference-mark passage twice: the first closes the turn, the repeat opens
            # the next; the first and last readings of the log are not repeated
            interior = (steps % per == 0) & (steps != steps[0]) & (steps != steps[-1])
            q = np.repeat(steps, np.where(interior, 2, 1)).astype(float)
            closes = np.zeros(q.size, bool)
            closes[np.flatnonzero(np.diff(q) == 0)] = True
        else:
            q = steps.astype(float)
            closes = np.zeros(q.size, bool)
        n = q.size
        t = np.arange(n) * (period_s / per)
    # the last reading closes its turn when it lies on the reference mark
    on_mark = np.abs(q / per - np.round(q / per)) <= _ON_MARK_TOL / per
    if n > 1 and on_mark[-1] and np.floor(q[-1] / per + _ON_MARK_TOL) > np.floor(q[0] / per + _ON_MARK_TOL):
        closes[-1] = True
    raw = np.floor(q / per + _ON_MARK_TOL).astype(np.int64) - closes
    turn = raw - raw[0]
    theta_deg = sense * q * step_deg
    # complete: every azimuth of the grid was read in the turn
    az = np.mod(np.round(q).astype(np.int64) if marks else np.round(q - q[0]).astype(np.int64), per)
    n_t = int(turn[-1]) + 1
    seen = np.zeros((n_t, per), bool)
    seen[turn, az] = True
    complete = seen.all(axis=1)
    return t, theta_deg, turn, complete


def _check_params(n_turns, period_s, samples_per_turn, marks, sense, signal_unit, epoch_unix):
    if not (isinstance(n_turns, (int, float, np.integer, np.floating)) and math.isfinite(n_turns) and n_turns > 0):
        raise ValueError(f"n_turns must be a positive number, not {n_turns!r}")
    if not (math.isfinite(period_s) and period_s > 0):
        raise ValueError(f"period_s must be positive, not {period_s!r}")
    if marks is None:
        if isinstance(samples_per_turn, bool) or not isinstance(samples_per_turn, (int, np.integer)) \
                or samples_per_turn < 3:
            raise ValueError(f"samples_per_turn must be an integer >= 3, not {samples_per_turn!r}")
    else:
        if isinstance(marks, bool) or not isinstance(marks, (int, np.integer)) or marks < 3:
            raise ValueError(f"marks must be an integer >= 3, not {marks!r}")
        if abs(n_turns * marks - round(n_turns * marks)) > 1e-9:
            raise ValueError(f"n_turns={n_turns!r} is not a whole number of marks ({marks} per turn)")
    if sense not in (1, -1):
        raise ValueError(f"sense must be +1 or -1, not {sense!r}")
    if signal_unit not in SIGNAL_UNITS:
        raise ValueError(f"signal_unit must be one of {SIGNAL_UNITS}, not {signal_unit!r}")
    if epoch_unix is not None and (isinstance(epoch_unix, bool) or not isinstance(epoch_unix, (int, np.integer))):
        raise ValueError(f"epoch_unix must be an integer number of Unix seconds or None, not {epoch_unix!r}")


def _gap_mask(gaps, t, gen) -> tuple[np.ndarray, Any]:
    n = t.size
    keep = np.ones(n, bool)
    if gaps is None:
        return keep, None
    if isinstance(gaps, (int, float, np.integer, np.floating)) and not isinstance(gaps, bool):
        frac = float(gaps)
        if not 0.0 <= frac < 1.0:
            raise ValueError(f"gaps as a fraction must lie in [0, 1), not {gaps!r}")
        k = int(round(frac * n))
        if n - k < 2:
            raise ValueError(f"gaps={gaps!r} would leave fewer than 2 readings")
        keep[gen.choice(n, size=k, replace=False)] = False
        return keep, frac
    windows = []
    try:
        for w in gaps:
            a, b = (float(v) for v in w)
            windows.append((a, b))
    except (TypeError, ValueError):
        raise ValueError("gaps must be a fraction in [0, 1) or a list of (start_s, stop_s) windows") from None
    for a, b in windows:
        if not (math.isfinite(a) and math.isfinite(b) and a < b):
            raise ValueError(f"gap window ({a!r}, {b!r}) must satisfy start_s < stop_s")
        keep &= ~((t >= a) & (t < b))
    if keep.sum() < 2:
        raise ValueError("the gap windows leave fewer than 2 readings")
    return keep, tuple(windows)


def _simulate(*, n_turns=20, period_s=60.0, samples_per_turn=64, marks=None, repeat_start_mark=False,
              harmonics=None, drift=None, noise="white", sigma=0.01, ar1_coef=None, flicker_alpha=None,
              outliers=None, gaps=None, start_angle_deg=0.0, sense=1, angles_mod_360=True,
              epoch_unix=DEFAULT_EPOCH_UNIX, signal_unit="fringe", rng=None) -> Truth:
    _check_params(n_turns, period_s, samples_per_turn, marks, sense, signal_unit, epoch_unix)
    if repeat_start_mark and marks is None:
        raise ValueError("repeat_start_mark=True needs marks (discrete mark readings)")
    if noise is None:
        noise, sigma = "white", 0.0
    if noise == "flicker" and flicker_alpha is None:
        flicker_alpha = 1.0
    noise_model = Noise(str(noise), float(sigma), None if ar1_coef is None else float(ar1_coef),
                        None if flicker_alpha is None else float(flicker_alpha))
    drift = Drift.coerce(drift)
    harm = tuple(Harmonic.from_amplitude_phase(k, *ap) for k, ap in sorted((harmonics or {}).items()))
    out_frac, out_size = (0.0, 0.0) if outliers is None else (float(outliers[0]), float(outliers[1]))
    if not 0.0 <= out_frac < 1.0 or not math.isfinite(out_size):
        raise ValueError(f"outliers must be (fraction in [0, 1), finite size), not {outliers!r}")
    gen, seed = make_rng(rng)
    g_noise, g_walk, g_gaps, g_out = gen.spawn(4)

    t, theta_deg, turn, complete = _grid(n_turns, samples_per_turn, marks, repeat_start_mark,
                                         float(start_angle_deg), int(sense), float(period_s))
    n = t.size
    theta = np.deg2rad(theta_deg)

    if noise_model.sigma == 0.0:
        eps = np.zeros(n)
    elif noise_model.kind == "white":
        eps = noise_model.sigma * g_noise.standard_normal(n)
    elif noise_model.kind == "ar1":
        eps = ar1_noise(n, noise_model.ar1_coef, noise_model.sigma, g_noise)
    else:
        eps = flicker_noise(n, noise_model.flicker_alpha, noise_model.sigma, g_noise)
    d = drift.polynomial(t)
    if drift.walk_step > 0:
        steps = g_walk.standard_normal(n)
        steps[0] = 0.0
        d = d + drift.walk_step * np.cumsum(steps)
    h = np.zeros(n)
    for hk in harm:
        h = h + hk.values(theta)

    keep, gap_spec = _gap_mask(gaps, t, g_gaps)
    nk = int(keep.sum())
    n_out = int(round(out_frac * nk))
    out_rows = np.sort(g_out.choice(nk, size=n_out, replace=False)) if n_out else np.zeros(0, np.int64)
    out_sig = np.zeros(nk)
    if n_out:
        out_sig[out_rows] = out_size * np.where(g_out.random(n_out) < 0.5, -1.0, 1.0)

    # the logged angle: round away float noise (719.99999999999 -> 720) before reducing modulo 360
    logged = np.round(theta_deg, 9)
    if angles_mod_360:
        logged = np.mod(logged, 360.0) + 0.0  # + 0.0 turns -0.0 into 0.0

    return Truth(
        harmonics=harm, drift=drift, noise=noise_model, seed=seed, n_turns=float(n_turns),
        period_s=float(period_s), samples_per_turn=None if marks else int(samples_per_turn),
        marks=None if marks is None else int(marks), repeat_start_mark=bool(repeat_start_mark),
        start_angle_deg=float(start_angle_deg), sense=int(sense), angles_mod_360=bool(angles_mod_360),
        epoch_unix=None if epoch_unix is None else int(epoch_unix), signal_unit=signal_unit,
        outlier_fraction=out_frac, outlier_size=out_size, gaps=gap_spec, n_grid=n,
        kept=keep, time=t[keep], theta=theta[keep], angle_logged_deg=logged[keep],
        harmonic_signal=h[keep], drift_signal=d[keep], noise_signal=eps[keep], outlier_signal=out_sig,
        turn=turn[keep], turn_complete=complete, outlier_rows=out_rows.astype(np.int64),
    )


def simulate_scan(
    *,
    n_turns: float = 20,
    period_s: float = 60.0,
    samples_per_turn: int = 64,
    marks: int | None = None,
    repeat_start_mark: bool = False,
    harmonics: Mapping[int, tuple[float, float]] | None = None,
    drift: Drift | Mapping[str, float] | None = None,
    noise: str | None = "white",
    sigma: float = 0.01,
    ar1_coef: float | None = None,
    flicker_alpha: float | None = None,
    outliers: tuple[float, float] | None = None,
    gaps: float | Sequence[tuple[float, float]] | None = None,
    start_angle_deg: float = 0.0,
    sense: int = 1,
    angles_mod_360: bool = True,
    epoch_unix: int | None = DEFAULT_EPOCH_UNIX,
    signal_unit: str = "fringe",
    run_id: str | None = None,
    rng=None,
) -> tuple[Scan, Truth]:
    """Simulate one rotation scan with a known truth (see the module docstring for the model).

    Parameters
    ----------
    n_turns : float
        Turns of the table (a whole number of marks in mark mode).
    period_s : float
        Seconds per turn of the rotating table.
    samples_per_turn : int
        Readings per turn for continuous sampling (ignored when ``marks`` is given).
    marks : int, optional
        Read the table at this many equally spaced marks per turn instead.
    repeat_start_mark : bool
        With ``marks``: read the reference mark again at the end of every turn (the table stands
        at it for one reading interval).
    harmonics : mapping ``{k: (amplitude, phase_deg)}``
        Terms ``A_k cos(k(θ − φ_k))``; amplitudes (not peak-to-peak) in signal units.
    drift : Drift or mapping with keys ``offset, slope, quadratic, walk_step``
        ``offset + slope·t + quadratic·t² + random walk``; ``t`` in s since the first reading.
    noise : {"white", "ar1", "flicker"} or None
        Noise model (None: no noise).
    sigma : float
        Marginal standard deviation of the noise of one reading (signal units); 0 for none.
    ar1_coef : float
        Lag-one coefficient per reading for ``noise="ar1"`` (required there).
    flicker_alpha : float
        Spectral exponent for ``noise="flicker"``: PSD ∝ 1/f^α (default 1).
    outliers : (fraction, size), optional
        Add ``±size`` to ``round(fraction·n_kept)`` distinct readings.
    gaps : float or list of (start_s, stop_s), optional
        Remove a random fraction of readings, or the readings inside time windows (s since start).
    start_angle_deg : float
        Table angle of the first reading (a mark in mark mode); a start off the reference mark
        makes the first and last turns partial.
    sense : +1 or -1
        Rotation sense: the angle increases (+1) or decreases (−1) with time.
    angles_mod_360 : bool
        Log the angle modulo 360° (True) or continuously (False).
    epoch_unix : int or None
        Unix seconds (UTC) of the first reading; None for a scan with relative time only.
    signal_unit : {"fringe", "fractional"}
        Fractions of a fringe, or fractional frequency Δν/ν.
    run_id : str, optional
        Recorded in the scan's metadata.
    rng : int, numpy.random.Generator or None
        Seed or generator (:func:`nullfit.conventions.make_rng`); the seed is in the truth.

    Returns
    -------
    (Scan, Truth)
        The validated scan (built with :meth:`Scan.from_arrays`) and its truth; ``scan.time``
        is ``truth.time`` and ``scan.signal`` is ``truth.signal``.
    """
    truth = _simulate(n_turns=n_turns, period_s=period_s, samples_per_turn=samples_per_turn, marks=marks,
                      repeat_start_mark=repeat_start_mark, harmonics=harmonics, drift=drift, noise=noise,
                      sigma=sigma, ar1_coef=ar1_coef, flicker_alpha=flicker_alpha, outliers=outliers, gaps=gaps,
                      start_angle_deg=start_angle_deg, sense=sense, angles_mod_360=angles_mod_360,
                      epoch_unix=epoch_unix, signal_unit=signal_unit, rng=rng)
    seed_note = f"seed={truth.seed}" if truth.seed is not None else "seed held by the caller's Generator"
    meta = Manifest(units={"time": "s", "angle": "deg", "signal": signal_unit}, run_id=run_id,
                    notes=f"synthetic scan from nullfit.simulate.simulate_scan ({seed_note})")
    scan = Scan.from_arrays(truth.time, truth.angle_logged_deg, truth.signal, angle_unit="deg",
                            epoch_unix=truth.epoch_unix, signal_unit=signal_unit, source="<simulated>",
                            meta=meta)
    return scan, truth


def simulate_frame(*, time_format: str = "relative", **kwargs):
    """The readings of :func:`simulate_scan` as the raw columns a logger writes.

    Takes the keywords of :func:`simulate_scan` (except ``run_id``) and ``time_format``:
    ``"relative"`` (column ``time_s``: seconds since ``epoch_unix``, the first reading at 0),
    ``"unix"`` (``unix_s``: Unix seconds, float) or ``"iso"`` (``timestamp``: ISO-8601 UTC strings
    with microseconds and a trailing ``Z``).  The angle column ``angle_deg`` holds the angle as
    logged (modulo 360° or continuous); the signal column is ``fringe`` or ``frac_freq``
    (``signal_unit="fractional"``).  The same keywords and seed give the same readings as
    :func:`simulate_scan`.

    Returns
    -------
    (pandas.DataFrame, Truth)
    """
    import pandas as pd

    if time_format not in TIME_FORMATS:
        raise ValueError(f"time_format must be one of {TIME_FORMATS}, not {time_format!r}")
    kwargs.pop("run_id", None)
    truth = _simulate(**kwargs)
    if time_format != "relative" and truth.epoch_unix is None:
        raise ValueError(f"time_format={time_format!r} needs an epoch_unix")
    if time_format == "relative":
        tcol = truth.time.copy()
    elif time_format == "unix":
        tcol = truth.epoch_unix + truth.time
    else:
        us = np.round(truth.time * 1e6).astype(np.int64).astype("timedelta64[us]")
        stamps = np.datetime64(int(truth.epoch_unix), "s").astype("datetime64[us]") + us
        tcol = np.char.add(np.datetime_as_string(stamps, unit="us"), "Z")
    df = pd.DataFrame({TIME_COLUMN[time_format]: tcol, "angle_deg": truth.angle_logged_deg,
                       SIGNAL_COLUMN[truth.signal_unit]: truth.signal})
    return df, truth
