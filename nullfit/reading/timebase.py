"""The time base: absolute times as int64 nanoseconds, an integer-second epoch, relative seconds.

Times are carried as int64 nanoseconds whenever they are absolute, so that a 1.8e9 s Unix time
never costs precision: :func:`decimal_seconds_to_ns` converts decimal text exactly,
:func:`float_seconds_to_ns` reads a float as its shortest decimal representation (the number a
person wrote), and :func:`split_epoch` returns the whole Unix second at or before the first
reading plus float relative seconds computed from the integer nanoseconds.  Relative seconds
below 2**53 ns (about 104 days) are then exact to the nanosecond.
"""

from __future__ import annotations

import functools
from decimal import ROUND_HALF_EVEN, Decimal, InvalidOperation

import numpy as np

NS_PER_S = 1_000_000_000
#: Relative times larger than this are taken as Unix seconds (1e8 s ≈ 3 years).
UNIX_THRESHOLD_S = 1e8
#: The largest Unix time that fits int64 nanoseconds (2262-04-11), rounded down.
UNIX_MAX_S = 9.2e9
_BLOCK = 1 << 16
_FRAC_BITS = 22  # fractional bits of a float64 in [2**30, 2**31)
_TABLE_FROM = 1 << 25  # inputs at least this long build the table of the binade


def decimal_seconds_to_ns(tokens) -> tuple[np.ndarray, np.ndarray]:
    """Convert decimal strings of seconds exactly to int64 nanoseconds.

    Plain decimals (``"1800000000.123456789"``, ``"-2.5"``) are converted with integer arithmetic;
    other spellings (exponents) go through :class:`decimal.Decimal`.  Digits beyond the
    nanosecond are rounded (half up on the tenth digit).  Returns ``(ns, ok)``; ``ok`` is false
    where a token is not a finite number of seconds below ``UNIX_MAX_S`` in magnitude.
    """
    tok = np.char.strip(np.asarray(tokens, dtype=str))
    n = tok.size
    ns = np.zeros(n, np.int64)
    ok = np.zeros(n, bool)
    if n == 0:
        return ns, ok
    neg = np.char.startswith(tok, "-")
    body = np.where(neg | np.char.startswith(tok, "+"), np.char.lstrip(np.char.lstrip(tok, "-"), "+"), tok)
    part = np.char.partition(body, ".")
    ip, fp = part[..., 0], part[..., 2]
    simple = ((np.char.isdigit(ip) | (ip == "")) & (np.char.isdigit(fp) | (fp == ""))
              & (np.char.str_len(ip) + np.char.str_len(fp) > 0) & (np.char.str_len(ip) <= 10)
              & (np.char.str_len(body) == np.char.str_len(tok) - (neg | np.char.startswith(tok, "+"))))
    if simple.any():
        ipv = np.where(ip == "", "0", ip)[simple].astype(np.int64)
        good = ipv < int(UNIX_MAX_S)
        f10 = np.char.ljust(fp[simple].astype("U10"), 10, "0").astype(np.int64)
        v = np.where(good, ipv, 0) * NS_PER_S + (f10 + 5) // 10
        ns[simple] = np.where(good, np.where(neg[simple], -v, v), 0)
        ok[simple] = good
    for i in np.flatnonzero(~simple):  # rare spellings: exponents, long integers
        try:
            d = Decimal(str(tok[i]))
            if d.is_finite() and abs(d) < Decimal(int(UNIX_MAX_S)):
                ns[i] = int((d * NS_PER_S).to_integral_value(rounding=ROUND_HALF_EVEN))
                ok[i] = True
        except (InvalidOperation, ValueError):
            pass
    return ns, ok


def _fraction_ns(center: np.ndarray, half: np.ndarray) -> np.ndarray:
    """The shortest decimal fraction (ns, as floats) within ``half`` of ``center`` (both in ns)."""
    frac = np.rint(center)  # 9 digits: the fallback (an ulp below 1 ns never occurs above 1e8 s)
    todo = None
    for digits in range(3):  # few digits: cheap when most values are round
        unit = 10.0 ** (9 - digits)
        c = center if todo is None else center[todo]
        h = half if todo is None else half[todo]
        cand = np.rint(c / unit)
        cand *= unit
        hit = np.abs(cand - c) < h
        if todo is None:
            frac[hit] = cand[hit]
            todo = np.flatnonzero(~hit)
        else:
            frac[todo[hit]] = cand[hit]
            todo = todo[~hit]
        if todo.size == 0:
            return frac
    c, h = center[todo], half[todo]
    lo = np.full(todo.size, 3)
    hi = np.full(todo.size, 9)  # the answer lies in [lo, hi]; 9 digits always "hit" (fallback)
    while True:
        open_ = lo < hi
        if not open_.any():
            break
        mid = (lo + hi) // 2
        unit = 10.0 ** (9 - mid)
        hit = np.abs(np.rint(c / unit) * unit - c) < h
        hi = np.where(open_ & hit, mid, hi)
        lo = np.where(open_ & ~hit, mid + 1, lo)
    unit = 10.0 ** (9 - lo)
    cand = np.rint(c / unit) * unit
    frac[todo] = np.where(lo < 9, cand, np.rint(c))
    return frac


@functools.lru_cache(maxsize=1)
def _binade_table() -> np.ndarray:
    """Shortest decimal fraction (ns) of every float in [2**30, 2**31) s (2004-01-10 to 2038-01-19),
    indexed by its 22 fractional bits: within one binade the fraction decides the digits alone."""
    f = np.arange(1 << _FRAC_BITS, dtype=np.float64)
    center = f * (NS_PER_S / 2.0**_FRAC_BITS)  # exact: f·1e9 < 2**53, and a power-of-two division
    half = np.full(f.size, NS_PER_S * 2.0 ** -(_FRAC_BITS + 1))
    return np.concatenate([_fraction_ns(center[i: i + _BLOCK], half[i: i + _BLOCK])
                           for i in range(0, f.size, _BLOCK)]).astype(np.int32)


def float_seconds_to_ns(values, *, table: bool | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Convert float seconds to int64 nanoseconds, reading each float as its shortest decimal
    representation (so ``1800000000.1234567`` gives ``...123456700`` ns, as its text would).

    Vectorised: the whole seconds are exact; for the fraction, the decimal with the fewest digits
    (0 to 9) that lies strictly within half a unit in the last place of the float is chosen, which
    is what the shortest round-trip representation (``repr``) gives.  A decimal of ``d`` digits
    within half an ulp is also one of ``d + 1`` digits, so the fewest digits are found by trying
    0, 1 and 2 digits on the values still open (regular sampling ends here) and a binary search
    over 3..9 digits for the rest.  Within one binade the answer depends on the fractional bits
    alone, so the times of 2004–2038 (the binade [2**30, 2**31) s) can be looked up in a table of
    all 2**22 fractions (16 MB, built once in about a second and kept): ``table=True`` uses it (a
    reader that converts many chunks), ``None`` uses it for very long inputs or once it exists.
    Returns ``(ns, ok)`` as :func:`decimal_seconds_to_ns`."""
    v = np.asarray(values, dtype=float).ravel()
    if table is None:
        table = v.size >= _TABLE_FROM or bool(_binade_table.cache_info().currsize)
    if v.size > _BLOCK:  # in blocks: the temporaries stay in cache
        ns, ok = np.empty(v.size, np.int64), np.empty(v.size, bool)
        for i in range(0, v.size, _BLOCK):
            ns[i: i + _BLOCK], ok[i: i + _BLOCK] = _seconds_to_ns(v[i: i + _BLOCK], table)
        return ns, ok
    return _seconds_to_ns(v, table)


def _seconds_to_ns(v: np.ndarray, table: bool):
    lo, hi = (float(v.min()), float(v.max())) if v.size else (0.0, 0.0)
    if table and lo >= 2.0**30 and hi < 2.0**31:  # one binade, all finite
        sec = np.floor(v)
        f = v - sec
        f *= 2.0**_FRAC_BITS
        ns = sec.astype(np.int64)
        ns *= NS_PER_S
        ns += _binade_table()[f.astype(np.int64)]
        return ns, np.ones(v.size, bool)
    ok = np.isfinite(v) & (np.abs(v) < UNIX_MAX_S)
    w = np.where(ok, v, 0.0)
    sec = np.floor(w)
    center = w - sec
    center *= NS_PER_S  # the exact fraction, in ns (relative error ~1e-16)
    # half an ulp, in ns: 2**(exponent - 53) built from the exponent bits (np.spacing is slow)
    half = (((w.view(np.int64) >> 52) & 0x7FF) - 53 << 52).view(np.float64)
    half *= NS_PER_S
    frac = _fraction_ns(center, half)
    ns = sec.astype(np.int64) * NS_PER_S + frac.astype(np.int64)
    return np.where(ok, ns, 0), ok


def utc_to_ns(value) -> int:
    """Nanoseconds since 1970-01-01T00:00:00Z of an ISO-8601 string (naive means UTC), a
    ``datetime`` or a ``pandas.Timestamp``.  Raises ``ValueError`` when it cannot be parsed or
    lies outside 1677–2262."""
    import pandas as pd

    ts = pd.to_datetime(value, format="ISO8601") if isinstance(value, str) else pd.Timestamp(value)
    if ts is pd.NaT:
        raise ValueError(f"not a time: {value!r}")
    ts = ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")
    return int(ts.as_unit("ns").value)


def ns_to_iso(ns: int) -> str:
    """ISO-8601 UTC text (``...Z``) of integer nanoseconds, with as many fractional digits as
    needed (none, 3, 6 or 9)."""
    import pandas as pd

    ts = pd.Timestamp(int(ns), unit="ns", tz="UTC")
    frac = int(ns) % NS_PER_S
    spec = "seconds" if frac == 0 else "milliseconds" if frac % 1_000_000 == 0 else \
        "microseconds" if frac % 1000 == 0 else "nanoseconds"
    return ts.isoformat(timespec=spec).replace("+00:00", "Z")


def split_epoch(ns: np.ndarray, valid: np.ndarray | None = None) -> tuple[int | None, np.ndarray]:
    """``(epoch_unix, relative_seconds)`` from absolute int64 nanoseconds.

    The epoch is the whole Unix second at or before the first valid reading; relative seconds
    are computed from the integer nanoseconds (exact to 1 ns below 2**53 ns ≈ 104 days) and are
    NaN where ``valid`` is false."""
    ns = np.asarray(ns, dtype=np.int64)
    valid = np.ones(ns.size, bool) if valid is None else np.asarray(valid, bool)
    if not valid.any():
        return None, np.full(ns.size, np.nan)
    epoch = int(ns[valid][0]) // NS_PER_S
    rel = (np.where(valid, ns, epoch * NS_PER_S) - epoch * NS_PER_S).astype(float) / NS_PER_S
    rel[~valid] = np.nan
    return epoch, rel
