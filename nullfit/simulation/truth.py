"""`Truth`: everything that went into a synthetic scan, so a test can compare a fit with it."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..core.render import Described, Summary
from .models import Drift, Harmonic, Noise


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
    unit: str
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
            "unit": self.unit,
            "outliers": {"fraction": self.outlier_fraction, "size": self.outlier_size, "count": self.n_outliers},
            "gaps": {"spec": _gaps_jsonable(self.gaps), "removed": self.n_removed},
            "n_grid": self.n_grid,
            "n_samples": self.n_samples,
            "convention": "c cos kθ + s sin kθ = A cos(k(θ − φ)); amplitude, not peak-to-peak",
        }

    def summary(self) -> Summary:
        u = self.unit
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
