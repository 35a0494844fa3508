"""Whole-log medians in bounded memory: a histogram of positive numbers on a logarithmic grid.

The reader needs a few "typical" values of a whole log before it can number the turns — the
typical angle step, the typical time between readings, the typical size of the signal.  A
median over the full log needs the full column in memory, which a log read in chunks
(:mod:`nullfit.reading.stream`) never has.  So every such median is taken from a
:class:`LogHistogram`: counts of the values in bins 2**-10 of an octave wide (the top ten bits
of the float's mantissa, i.e. a relative resolution of about 0.07 %).  Counts add, so a log read
in chunks of any size gives exactly the same histogram, and the same medians, as the log read
whole; memory is bounded by the range of the values (at most 2**21 bins, 16 MB, for values
spanning every binade of float64; a few thousand bins in practice).
"""

from __future__ import annotations

import numpy as np

#: Bits of a float64 dropped to form the bin key: 52 mantissa bits minus the 10 kept.
SHIFT = 42
#: Values below this are counted as zero (they only occur as jitter-free repeats).
TINY = 1e-250
_KEY_TINY = int(np.array([TINY]).view(np.int64)[0] >> SHIFT)
#: Chunks with fewer values than this are counted with ``np.unique`` instead of ``np.bincount``.
_SPARSE_BELOW = 4096


def _key(x: float) -> int:
    return int(np.array([float(x)], dtype=np.float64).view(np.int64)[0] >> SHIFT)


def _value(key: int) -> float:
    """Middle of the bin ``key`` (in bit space)."""
    return float(np.array([(int(key) << SHIFT) | (1 << (SHIFT - 1))], dtype=np.int64).view(np.float64)[0])


class LogHistogram:
    """Counts of non-negative finite values on a logarithmic grid (see the module docstring).

    ``add`` takes any array of values ≥ 0 (the caller passes absolute values); values below
    :data:`TINY` count as zeros.  ``median(above=x)`` is the lower median of the values whose bin
    lies wholly above the bin of ``x``, returned as the middle of its bin."""

    def __init__(self):
        self.lo = 0
        self.counts = np.zeros(0, np.int64)
        self.n_zero = 0

    @property
    def n(self) -> int:
        return int(self.counts.sum()) + self.n_zero

    def add(self, values) -> None:
        v = np.ascontiguousarray(values, dtype=np.float64)
        if v.size == 0:
            return
        lo, hi = float(v.min()), float(v.max())  # the key is monotonic in the value (values ≥ 0)
        if lo < TINY:
            tiny = v < TINY
            self.n_zero += int(np.count_nonzero(tiny))
            v = v[~tiny]
            if v.size == 0:
                return
            lo = float(v.min())
        kmin, kmax = _key(lo), _key(hi)
        self._grow(kmin, kmax)
        if kmin == kmax:  # one bin (a steady rate, a regular clock)
            self.counts[kmin - self.lo] += v.size
            return
        keys = v.view(np.int64) >> SHIFT
        if keys.size < _SPARSE_BELOW or (kmax - kmin) > 4 * keys.size:
            uk, cnt = np.unique(keys, return_counts=True)
            self.counts[uk - self.lo] += cnt
        else:
            keys -= kmin
            self.counts[kmin - self.lo: kmax - self.lo + 1] += np.bincount(keys, minlength=kmax - kmin + 1)

    def add_counts(self, other: "LogHistogram", sign: int = 1) -> "LogHistogram":
        """A new histogram: this one plus (``sign=1``) or minus (``sign=-1``) ``other``."""
        out = LogHistogram()
        out.lo, out.counts, out.n_zero = self.lo, self.counts.copy(), self.n_zero
        if other.counts.size:
            out._grow(other.lo, other.lo + other.counts.size - 1)
            out.counts[other.lo - out.lo: other.lo - out.lo + other.counts.size] += sign * other.counts
        out.n_zero += sign * other.n_zero
        return out

    def _grow(self, kmin: int, kmax: int) -> None:
        if self.counts.size == 0:
            self.lo, self.counts = kmin, np.zeros(kmax - kmin + 1, np.int64)
            return
        hi = self.lo + self.counts.size - 1
        if kmin >= self.lo and kmax <= hi:
            return
        lo2, hi2 = min(kmin, self.lo), max(kmax, hi)
        new = np.zeros(hi2 - lo2 + 1, np.int64)
        new[self.lo - lo2: self.lo - lo2 + self.counts.size] = self.counts
        self.lo, self.counts = lo2, new

    def count_above(self, above: float) -> int:
        return int(self._above(above).sum())

    def _above(self, above: float | None) -> np.ndarray:
        if above is None or self.counts.size == 0:
            return self.counts
        first = _key(above) + 1 - self.lo
        out = self.counts.copy()
        out[: max(0, min(first, out.size))] = 0
        return out

    def median(self, above: float | None = None) -> float | None:
        """Lower median of the values above ``above`` (zeros included when ``above`` is None);
        None when there are none."""
        counts = self._above(above)
        zeros = self.n_zero if above is None else 0
        total = int(counts.sum()) + zeros
        if total == 0:
            return None
        rank = (total - 1) // 2  # 0-based rank of the lower median
        if rank < zeros:
            return 0.0
        cum = np.cumsum(counts)
        i = int(np.searchsorted(cum, rank - zeros + 1))
        return _value(self.lo + i)
