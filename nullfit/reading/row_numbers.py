"""Source row numbers of the kept readings, without an array when every row was kept.

Messages name the data row of the file (counted from 1, header not counted).  When no row is
dropped, reading ``i`` (from 0) is row ``i + 1``; a log of 10⁷ readings would otherwise carry
an 80 MB array of 1, 2, 3 … through the checks and into the `Scan`.  :class:`ImpliedRows`
answers the indexing the reader does (an index, a slice, an index array or a boolean mask) with
what that array would give, and builds only the small pieces asked for.
"""

from __future__ import annotations

import numpy as np


class ImpliedRows:
    """Row numbers ``1 … n`` of ``n`` readings, indexed like the int64 array they stand for."""

    def __init__(self, n: int):
        self.n = int(n)

    @property
    def size(self) -> int:
        return self.n

    def __len__(self) -> int:
        return self.n

    def __getitem__(self, key):
        if isinstance(key, slice):
            a, b, step = key.indices(self.n)
            return np.arange(a + 1, b + 1, step, dtype=np.int64)
        if isinstance(key, (int, np.integer)):
            i = int(key) + (self.n if key < 0 else 0)
            if not 0 <= i < self.n:
                raise IndexError(f"row index {int(key)} out of range for {self.n} readings")
            return np.int64(i + 1)
        key = np.asarray(key)
        if key.dtype == bool:
            if key.shape != (self.n,):
                raise IndexError(f"boolean mask of shape {key.shape} for {self.n} readings")
            return np.flatnonzero(key).astype(np.int64) + 1
        idx = key.astype(np.int64)
        if idx.size and (idx.min() < -self.n or idx.max() >= self.n):
            raise IndexError(f"row index out of range for {self.n} readings")
        return np.where(idx < 0, idx + self.n, idx) + 1

    def __array__(self, dtype=None, copy=None):
        return np.arange(1, self.n + 1, dtype=dtype or np.int64)


def row_numbers(rows, n: int):
    """``rows`` as given (an int64 array of ``n`` source rows), or :class:`ImpliedRows` for None."""
    if rows is None:
        return ImpliedRows(n)
    rows = np.asarray(rows, dtype=np.int64).ravel()
    if rows.size != n:
        raise ValueError(f"rows has {rows.size} entries for {n} readings")
    return rows
