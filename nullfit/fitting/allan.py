"""Overlapping Allan deviation of an evenly sampled series (e.g. the per-turn c₂ series).

For a series ``y_i`` sampled every ``τ0`` and an averaging factor ``m`` (τ = m τ0), with
``ȳ_j = (y_j + … + y_{j+m−1}) / m``, the overlapping Allan variance is

    σ²(τ) = 1 / (2 (N − 2m + 1)) · Σ_{j=0}^{N−2m} (ȳ_{j+m} − ȳ_j)²

(IEEE Std 1139; the usual "overlapping" estimator).  It is computed here for all ``m`` at once
from one cumulative sum.  White noise falls as τ^(−1/2); a flat region means flicker; a rise
means drift — which tells how long to integrate before drift, not noise, sets the bound.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..core.render import Described, Summary, fmt


@dataclass(frozen=True, eq=False)
class AllanDeviation(Described):
    """Overlapping Allan deviation ``adev`` at averaging times ``tau_s`` (in the series' unit)."""

    tau_s: np.ndarray = field(repr=False)
    adev: np.ndarray = field(repr=False)
    n_pairs: np.ndarray = field(repr=False)  # number of overlapping differences behind each point
    unit: str = ""

    @property
    def error(self) -> np.ndarray:
        """Rough 1σ error bar, adev / sqrt(n_pairs) (common practice for a quick plot)."""
        return self.adev / np.sqrt(np.maximum(self.n_pairs, 1))

    def to_dict(self) -> dict:
        return {"tau_s": self.tau_s.tolist(), "adev": self.adev.tolist(), "n_pairs": self.n_pairs.tolist(),
                "unit": self.unit, "estimator": "overlapping (IEEE Std 1139)"}

    def summary(self) -> Summary:
        rows = tuple((f"τ = {fmt(t)} s", f"{fmt(a)} ± {fmt(e)}", self.unit)
                     for t, a, e in zip(self.tau_s, self.adev, self.error))
        return Summary("Overlapping Allan deviation", rows, ("error bars: adev/√(number of differences), a rough "
                                                             "guide (common practice)",))

    def __repr__(self) -> str:
        return f"AllanDeviation({self.tau_s.size} averaging times, τ = {fmt(self.tau_s[0])}…{fmt(self.tau_s[-1])} s)"


def octave_factors(n: int) -> np.ndarray:
    """Averaging factors 1, 2, 4, … up to the largest with at least one difference."""
    out = []
    m = 1
    while n - 2 * m + 1 >= 1:
        out.append(m)
        m *= 2
    return np.array(out, dtype=np.int64)


def allan_deviation(y, tau0_s: float, factors=None, *, unit: str = "") -> AllanDeviation:
    """Overlapping Allan deviation of ``y`` (sampling interval ``tau0_s``) at ``factors``."""
    y = np.asarray(y, dtype=float)
    if y.ndim != 1 or y.size < 3:
        raise ValueError("allan_deviation needs a 1-D series of at least 3 values")
    if not np.all(np.isfinite(y)):
        raise ValueError("allan_deviation: the series holds NaN or infinite values")
    n = y.size
    m = octave_factors(n) if factors is None else np.asarray(factors, dtype=np.int64)
    m = m[(m >= 1) & (n - 2 * m + 1 >= 1)]
    csum = np.concatenate(([0.0], np.cumsum(y - y.mean())))
    adev = np.empty(m.size)
    npairs = n - 2 * m + 1
    for i, mi in enumerate(m):  # loop over a handful of τ values; each step is vectorised
        avg = (csum[mi:] - csum[:-mi]) / mi  # ȳ_j for j = 0..n−m
        d = avg[mi:] - avg[:-mi]
        adev[i] = np.sqrt(0.5 * np.mean(d * d))
    return AllanDeviation(tau_s=m * float(tau0_s), adev=adev, n_pairs=npairs, unit=unit)
