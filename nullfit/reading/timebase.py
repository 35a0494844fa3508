"""The time base: absolute times as int64 nanoseconds, an integer-second epoch, relative seconds.

Times are carried as int64 nanoseconds whenever they are absolute, so that a 1.8e9 s Unix time
never costs precision: :func:`decimal_seconds_to_ns` converts decimal text exactly,
:func:`float_seconds_to_ns` reads a float as its shortest decimal representation (the number a
person wrote), and :func:`split_epoch` returns the whole Unix second at or before the first
reading plus float relative seconds computed from the integer nanoseconds.  Relative seconds
below 2**53 ns (about 104 days) are then exact to the nanosecond.
"""

from __future__ import annotations

from decimal import ROUND_HALF_EVEN, Decimal, InvalidOperation

import numpy as np

NS_PER_S = 1_000_000_000
#: Relative times larger than this are taken as Unix seconds (1e8 s ≈ 3 years).
UNIX_THRESHOLD_S = 1e8
#: The largest Unix time that fits int64 nanoseconds (2262-04-11), rounded down.
UNIX_MAX_S = 9.2e9
_BLOCK = 1 << 16
_FRAC_BITS = 22  # fractional bits of a float64 in [2**30, 2**31)
_BINADE_FROM = 1 << 16  # inputs at least this long look fractions up (see float_seconds_to_ns)


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


def float_seconds_to_ns(values) -> tuple[np.ndarray, np.ndarray]:
    """Convert float seconds to int64 nanoseconds, reading each float as its shortest decimal
    representation (so ``1800000000.1234567`` gives ``...123456700`` ns, as its text would).

    Vectorised: the whole seconds are exact; for the fraction, the decimal with the fewest digits
    (0 to 9) that lies strictly within half a unit in the last place of the float is chosen, which
    is what the shortest round-trip representation (``repr``) gives.  A decimal of ``d`` digits
    within half an ulp is also one of ``d + 1`` digits, so the fewest digits are found by trying
    0, 1 and 2 digits on the values still open (regular sampling ends here) and a binary search
    over 3..9 digits for the rest.  Within one binade the answer depends on the fractional bits
    alone: for long inputs of the years 2004–2038 (the binade [2**30, 2**31) s, 22 fractional
    bits) it is worked out once per distinct fraction and looked up.  Returns ``(ns, ok)`` as
    :func:`decimal_seconds_to_ns`."""
    v = np.asarray(values, dtype=float).ravel()
    if v.size >= _BINADE_FROM and 2.0**30 <= float(v.min()) and float(v.max()) < 2.0**31:
        ns = _binade_to_ns(v)
        if ns is not None:
            return ns, np.ones(v.size, bool)
    if v.size > _BLOCK:  # in blocks: the temporaries stay in cache
        ns, ok = np.empty(v.size, np.int64), np.empty(v.size, bool)
        for i in range(0, v.size, _BLOCK):
            ns[i: i + _BLOCK], ok[i: i + _BLOCK] = _seconds_to_ns(v[i: i + _BLOCK])
        return ns, ok
    return _seconds_to_ns(v)


def _binade_to_ns(v: np.ndarray) -> np.ndarray | None:
    """:func:`float_seconds_to_ns` for floats all in [2**30, 2**31): the fraction of each distinct
    22-bit fractional part is found once (by :func:`_fraction_ns`) and looked up; None when most
    fractions are distinct (nothing to share)."""
    frac_bits = np.empty(v.size, np.int32)
    for i in range(0, v.size, _BLOCK):
        w = v[i: i + _BLOCK]
        f = w - np.floor(w)
        f *= 2.0**_FRAC_BITS  # exact: the 22 fractional bits as an integer
        frac_bits[i: i + _BLOCK] = f
    seen = np.zeros(1 << _FRAC_BITS, bool)
    seen[frac_bits] = True
    keys = np.flatnonzero(seen)
    if 2 * keys.size > v.size:
        return None  # mostly distinct fractions: the direct route is quicker
    table = np.zeros(1 << _FRAC_BITS, np.int32)  # fractions < 1e9 ns
    # the exact fraction in ns: f·1e9 < 2**53 and the division by a power of two is exact
    table[keys] = _fraction_ns(keys * (NS_PER_S / 2.0**_FRAC_BITS),
                               np.full(keys.size, NS_PER_S * 2.0 ** -(_FRAC_BITS + 1)))
    ns = np.empty(v.size, np.int64)
    for i in range(0, v.size, _BLOCK):
        out = ns[i: i + _BLOCK]
        out[:] = np.floor(v[i: i + _BLOCK])
        out *= NS_PER_S
        out += table[frac_bits[i: i + _BLOCK]]
    return ns


def _seconds_to_ns(v: np.ndarray):
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
