"""Fast conversion of Arrow columns (from pyarrow's CSV and Parquet readers) to the reader's arrays.

Columns of plain types are converted with vectorised Arrow and numpy work only — no per-value
Python, no string round trips:

* numbers (integer, floating, decimal) → float64, nulls → NaN;
* times: numbers of seconds (relative, or Unix seconds above 1e8 s converted exactly to int64
  nanoseconds — integers and decimals exactly, floats as their shortest decimal representation,
  :func:`nullfit.reading.timebase.float_seconds_to_ns`), Arrow timestamps (→ UTC nanoseconds), and
  text holding decimal numbers (a CSV time column is read as text): parsed as float64 by Arrow,
  and, when they are Unix seconds, converted exactly to nanoseconds by Arrow's decimal parser
  (``decimal128(20, 9)``: every digit up to the nanosecond, whatever the length of the text).

Everything else — text that is not a plain decimal (ISO-8601 timestamps, stray words, spaces,
more than nine fractional digits), booleans, a manifest that declares ISO times — returns None,
and the caller falls back to the careful pandas route of :mod:`nullfit.reading.columns`, which
finds the offending row and says what is wrong with it.
"""

from __future__ import annotations

import numpy as np

from ..core.errors import ScanError, where
from .timebase import NS_PER_S, UNIX_MAX_S, UNIX_THRESHOLD_S, float_seconds_to_ns


def is_arrow(col) -> bool:
    """Is ``col`` a pyarrow Array or ChunkedArray (as opposed to a pandas Series)?"""
    return type(col).__module__.startswith("pyarrow")


def _chunks(col):
    return col.chunks if hasattr(col, "chunks") else [col]


def numeric(col) -> np.ndarray | None:
    """float64 values of a numeric Arrow column (nulls → NaN), or None for other types."""
    import pyarrow as pa
    import pyarrow.compute as pc

    t = col.type
    if pa.types.is_decimal(t):
        col = pc.cast(col, pa.float64())
    elif not (pa.types.is_integer(t) or pa.types.is_floating(t)):
        return None
    if pa.types.is_floating(t) and t != pa.float64():
        col = pc.cast(col, pa.float64())
    if isinstance(col, pa.ChunkedArray) and col.num_chunks == 1:
        col = col.chunk(0)
    out = col.to_numpy(zero_copy_only=False)
    return np.asarray(out, dtype=np.float64)


def _decimal_ns(col) -> np.ndarray:
    """int64 nanoseconds of a decimal128 column with scale 9 (its unscaled integers)."""
    parts = []
    for ch in _chunks(col):
        if len(ch) == 0:
            continue
        words = np.frombuffer(ch.buffers()[1], dtype=np.int64)
        parts.append(words[2 * ch.offset: 2 * (ch.offset + len(ch)): 2])
    return np.concatenate(parts) if parts else np.zeros(0, np.int64)


def _decimal_times(col, mode):
    """Times from a decimal column with at most nine fractional digits (a CSV time column is read
    as ``decimal128(20, 9)`` when it can be): Unix seconds as their exact nanoseconds; relative
    seconds as floats — the nanoseconds over 1e9, which is the correctly rounded value of the
    decimal while the nanoseconds stay below 2**53 (104 days); None otherwise (careful route)."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if col.type.scale > 9:
        return None
    if col.type != pa.decimal128(20, 9):
        try:
            col = pc.cast(col, pa.decimal128(20, 9))
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            return None
    valid = ~np.asarray(pc.is_null(col).to_numpy(zero_copy_only=False), dtype=bool)
    every = bool(valid.all())
    ns = _decimal_ns(col)
    ns = ns.copy() if every and not ns.flags.writeable else ns if every else np.where(valid, ns, 0)
    first = 0 if every else int(np.argmax(valid)) if valid.any() else -1
    lo, hi = (int(ns.min()), int(ns.max())) if ns.size else (0, 0)
    if mode == "abs" or (mode is None and first >= 0 and ns[first] > UNIX_THRESHOLD_S * NS_PER_S):
        limit = int(UNIX_MAX_S) * NS_PER_S
        return ("abs", ns, valid) if -limit < lo and hi < limit else None
    if max(-lo, hi) >= 2**53:
        return None
    vals = ns.astype(np.float64)
    vals /= NS_PER_S
    if not every:
        vals[~valid] = np.nan
    return ("rel", vals)


def time_values(col, name: str, src: str, rows: np.ndarray, declared: str | None, mode: str | None = None):
    """``("abs", ns, ok)`` or ``("rel", seconds)`` for a time column of plain type, else None.  The
    first finite value decides between relative and Unix seconds, unless ``mode`` (``"abs"`` or
    ``"rel"``, decided by an earlier chunk) says."""
    import pyarrow as pa
    import pyarrow.compute as pc

    if declared == "iso":
        return None
    t = col.type
    if pa.types.is_timestamp(t):
        if declared == "s":
            return None
        try:
            ns_col = pc.cast(col, pa.timestamp("ns", tz=t.tz))
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            return None
        ok = ~np.asarray(pc.is_null(ns_col).to_numpy(zero_copy_only=False), dtype=bool)
        ns = np.asarray(pc.fill_null(pc.cast(ns_col, pa.int64()), 0).to_numpy(zero_copy_only=False), np.int64)
        return ("abs", ns, ok)
    if pa.types.is_decimal(t):
        return _decimal_times(col, mode)
    text = pa.types.is_string(t) or pa.types.is_large_string(t)
    if text and mode != "rel":  # Unix seconds as plain decimals: one exact parse to nanoseconds
        try:
            dec = pc.cast(col, pa.decimal128(20, 9))
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            dec = None
        if dec is not None:
            valid = ~np.asarray(pc.is_null(dec).to_numpy(zero_copy_only=False), dtype=bool)
            ns = _decimal_ns(dec)
            first = int(np.argmax(valid)) if valid.any() else -1
            limit = int(UNIX_MAX_S) * NS_PER_S
            every = bool(valid.all())
            if mode == "abs" or (first >= 0 and ns[first] > UNIX_THRESHOLD_S * NS_PER_S):
                inner = ns if every else ns[valid]
                if inner.size == 0 or (-limit < int(inner.min()) and int(inner.max()) < limit):
                    out = ns if every and ns.flags.writeable else np.where(valid, ns, 0)
                    return ("abs", out, valid)
    if text:
        try:
            vals = pc.cast(col, pa.float64())
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            return None
        vals = np.asarray(vals.to_numpy(zero_copy_only=False), dtype=np.float64)
    else:
        vals = numeric(col)
        if vals is None:
            return None
    finite = np.isfinite(vals)
    every = bool(finite.all())
    first = 0 if every else int(np.argmax(finite)) if finite.any() else -1
    if mode == "rel" or (mode is None and (first < 0 or not vals[first] > UNIX_THRESHOLD_S)):
        return ("rel", vals)
    if every and -UNIX_MAX_S < float(vals.min()) and float(vals.max()) < UNIX_MAX_S:
        over = None
    else:
        over = finite & ~(np.abs(vals) < UNIX_MAX_S)
    if over is not None and over.any():
        i = int(np.argmax(over))
        raise ScanError(f"{where(src, int(rows[i]), name)}: time {vals[i]:.9g} s is too large in magnitude for Unix "
                        f"seconds (limit {UNIX_MAX_S:.2g} s, the year 2261); not a time in seconds")
    if pa.types.is_integer(t):
        ints = np.asarray(pc.fill_null(col, 0).to_numpy(zero_copy_only=False), dtype=np.int64)
        return ("abs", ints * NS_PER_S, finite)
    if text or (pa.types.is_decimal(t) and t.scale <= 9):
        src_col = col
        if text and not finite.all():
            src_col = pc.if_else(pa.array(finite), col, pa.scalar(None, t))
        try:
            dec = pc.cast(src_col, pa.decimal128(20, 9))
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            return None  # e.g. more than nine fractional digits: the careful route rounds them
        ns = _decimal_ns(dec)
        return ("abs", np.where(finite, ns, 0), finite)
    if pa.types.is_decimal(t):
        return None
    ns, ok = float_seconds_to_ns(vals)
    return ("abs", ns, ok)
