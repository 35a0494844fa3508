"""The columns of a log table: which column plays which role, and how its values are parsed.

Shared by every table source (CSV, Parquet, a pandas DataFrame): given a way to fetch a column
(a pandas Series, or a pyarrow array from the file readers), :func:`frame_fields` resolves the
time, angle, signal and auxiliary columns (keyword, then manifest, then default; the ``aux``
keyword replaces the manifest's ``[columns] aux`` list), parses times (relative seconds, Unix
seconds, ISO-8601) to exact nanoseconds, and checks the declared units, returning the arguments
of :func:`nullfit.reading.validate.check_columns`.  Arrow columns of plain types take the fast
route of :mod:`nullfit.reading.arrow_columns`; anything else goes through pandas, value by value
where it must, to name the first offending row.  Every problem is a one-line `ScanError` naming
the file, row and column.
"""

from __future__ import annotations

import difflib
import sys
from decimal import Decimal
from typing import Any

import numpy as np

from ..core.conventions import SIGNAL_UNITS
from ..core.errors import ScanError, where
from .arrow_columns import is_arrow
from .arrow_columns import numeric as arrow_numeric
from .arrow_columns import time_values as arrow_time_values
from .histogram import LogHistogram
from .manifest import Manifest
from .timebase import (NS_PER_S, UNIX_MAX_S, UNIX_THRESHOLD_S, decimal_seconds_to_ns, float_seconds_to_ns,
                       ns_to_iso, utc_to_ns)

DEFAULT_COLUMNS = {"time": "time_s", "angle": "angle_deg", "signal": "fringe"}
#: Spellings of a missing value (compared after stripping, case-insensitively).
NA_TOKENS = frozenset({"", "nan", "-nan", "+nan", "na", "n/a", "#n/a", "null", "none", "<na>", "nat"})
#: A manifest start time and absolute times in the log may differ by at most this (seconds).
START_TOLERANCE_S = 1.0
#: A fractional-frequency log whose median |value| exceeds this is not Δν/ν.
FRACTIONAL_MAX = 1e-3
#: A fringe log whose every |value| is below this looks like Δν/ν.
FRINGE_MIN = 1e-9

# ---------------------------------------------------------------------------------- helpers
def one_line(text: Any) -> str:
    return " ".join(str(text).split())


def show(value: Any, width: int = 40) -> str:
    r = repr(value)
    return r if len(r) <= width else r[: width - 3] + "..."


def list_names(names, limit: int = 12) -> str:
    shown = ", ".join(repr(n) for n in names[:limit])
    return shown + (f", ... ({len(names)} in all)" if len(names) > limit else "")


# ---------------------------------------------------------------------------------- columns
def resolve_columns(names: list[str], kw: dict[str, str | None], man: Manifest | None, src: str):
    """Choose the column of every role: keyword, then manifest, then default."""
    chosen: dict[str, str] = {}
    for role in ("time", "angle", "signal"):
        if kw.get(role) is not None:
            name, origin = str(kw[role]), "kw"
        elif man is not None and role in man.columns:
            name, origin = man.columns[role], "manifest"
        else:
            name, origin = DEFAULT_COLUMNS[role], "default"
        if name not in names:
            hint = difflib.get_close_matches(name, names, n=1, cutoff=0.6)
            hint_s = f"; did you mean {hint[0]!r}?" if hint else ""
            if origin == "manifest":
                raise ScanError(f"{where(src, None, name)}: no such column, although {man.path} [columns] {role} "
                                f"names it; the manifest contradicts the log (columns: {list_names(names)}){hint_s}")
            how = (f"check {role}=" if origin == "kw" else
                   f"this is the default {role} column; name yours with {role}='...' or in a manifest")
            raise ScanError(f"{where(src, None, name)}: no such column ({how}; columns: {list_names(names)}){hint_s}")
        if names.count(name) > 1:
            raise ScanError(f"{where(src, None, name)}: the column name appears {names.count(name)} times in "
                            "the header; which one is meant is ambiguous")
        chosen[role] = name
    seen: dict[str, str] = {}
    for role, name in chosen.items():
        if name in seen:
            raise ScanError(f"{where(src, None, name)}: the same column was chosen as {seen[name]} and {role}")
        seen[name] = role
    aux: list[str] = []
    kw_aux = kw.get("aux")
    if kw_aux is not None:
        listed = [kw_aux] if isinstance(kw_aux, str) else [str(a) for a in kw_aux]
        for name in listed:
            if name not in names:
                hint = difflib.get_close_matches(name, names, n=1, cutoff=0.6)
                hint_s = f"; did you mean {hint[0]!r}?" if hint else ""
                raise ScanError(f"{where(src, None, name)}: no such column (check aux=; columns: "
                                f"{list_names(names)}){hint_s}")
            if name in seen:
                raise ScanError(f"{where(src, None, name)}: aux= lists the {seen[name]} column")
            if name in aux:
                raise ScanError(f"{where(src, None, name)}: aux= lists the column twice")
            aux.append(name)
        return chosen, aux
    for name in (man.aux_columns if man is not None else ()):
        if name not in names:
            raise ScanError(f"{where(src, None, name)}: no such column, although {man.path} [columns] aux lists "
                            f"it; the manifest contradicts the log (columns: {list_names(names)})")
        if name in seen:
            raise ScanError(f"{where(src, None, name)}: {man.path} [columns] aux lists the {seen[name]} column")
        aux.append(name)
    return chosen, aux


def _token_values(values: np.ndarray):
    """Parse an object array (strings, numbers, None, ...) into ``(num, missing, bad)``."""
    import pandas as pd

    n = values.size
    num = np.full(n, np.nan)
    missing = np.zeros(n, bool)
    bad = np.zeros(n, bool)
    is_str = np.fromiter((isinstance(v, str) for v in values), bool, n)
    if is_str.any():
        s = pd.Series(values[is_str], dtype=object).str.strip()
        miss = s.str.lower().isin(NA_TOKENS).to_numpy()
        conv = pd.to_numeric(s.where(~miss, "nan"), errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        idx = np.flatnonzero(is_str)
        num[idx] = conv
        missing[idx] = miss
        bad[idx] = np.isnan(conv) & ~miss
    for i in np.flatnonzero(~is_str):
        v = values[i]
        if v is None or v is pd.NA or v is pd.NaT:
            missing[i] = True
        elif isinstance(v, (bool, np.bool_)):
            bad[i] = True
        elif isinstance(v, (int, np.integer)):
            try:
                num[i] = float(v)
            except OverflowError:
                num[i] = np.inf if v > 0 else -np.inf
        elif isinstance(v, (float, np.floating, Decimal)):
            num[i] = float(v)
            missing[i] = bool(np.isnan(num[i]))
        else:
            bad[i] = True
    return num, missing, bad


def _bad_value(src, row, col, value, what="is not a number") -> ScanError:
    msg = f"{where(src, int(row), col)}: {show(value)} {what}"
    if isinstance(value, str):
        v = value.strip()
        if ";" in v or "\t" in v:
            msg += " (the row looks separated by ';' or tabs; nullfit reads comma-separated values)"
        elif what == "is not a number" and any(ch.isdigit() for ch in v) and \
                any(ch.isalpha() and ch not in "eE" for ch in v):
            msg += " (write plain numbers, without units)"
    return ScanError(msg)


def _kind(series) -> str:
    import pandas as pd
    from pandas.api import types as pt

    dt = series.dtype
    if pt.is_bool_dtype(dt):
        return "bool"
    if isinstance(dt, pd.DatetimeTZDtype) or pt.is_datetime64_any_dtype(dt):
        return "datetime"
    if pt.is_timedelta64_dtype(dt):
        return "timedelta"
    if pt.is_numeric_dtype(dt) and not pt.is_complex_dtype(dt):
        return "numeric"
    if pt.is_complex_dtype(dt):
        return "complex"
    return "object"


def _numeric_column(series, col: str, src: str, rows: np.ndarray) -> np.ndarray:
    """Float values of a column (NaN where missing); a non-numeric entry is a ScanError."""
    kind = _kind(series)
    if kind == "numeric":
        return series.to_numpy(dtype=float, na_value=np.nan)
    if kind in ("bool", "datetime", "timedelta", "complex"):
        what = {"bool": "true/false values", "datetime": "timestamps", "timedelta": "durations",
                "complex": "complex numbers"}[kind]
        raise ScanError(f"{where(src, None, col)}: the column holds {what}, not numbers")
    values = series.to_numpy(dtype=object)
    num, missing, bad = _token_values(values)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise _bad_value(src, rows[i], col, values[i])
    return num


def _time_column(series, col: str, src: str, rows: np.ndarray, declared: str | None, origin: str, mode=None):
    """Read the time column: ``("abs", ns, ok)`` for absolute times or ``("rel", seconds)``."""
    import pandas as pd

    kind = _kind(series)

    def refuse_numbers():
        raise ScanError(f"{where(src, None, col)}: the time column holds numbers, although {origin} = 'iso' "
                        "declares ISO-8601 timestamps; the manifest contradicts the log")

    if kind == "datetime":
        if declared == "s":
            raise ScanError(f"{where(src, None, col)}: the time column holds timestamps, although {origin} = 's' "
                            "declares seconds; the manifest contradicts the log")
        ser = series.dt.tz_localize("UTC") if series.dt.tz is None else series.dt.tz_convert("UTC")
        return _datetimes_to_ns(ser, series, col, src, rows)
    if kind == "timedelta":
        if declared == "iso":
            refuse_numbers()
        ns = series.dt.as_unit("ns").to_numpy(dtype="timedelta64[ns]")
        sec = ns.astype(np.int64).astype(float) / NS_PER_S
        sec[np.isnat(ns)] = np.nan
        return ("rel", sec)
    if kind == "numeric":
        if declared == "iso":
            refuse_numbers()
        vals = series.to_numpy(dtype=float, na_value=np.nan)
        ints = None
        if pd.api.types.is_integer_dtype(series.dtype) and not series.isna().any():  # whole seconds: exact
            ints = series.to_numpy(dtype=np.int64)
        return _numbers_to_time(vals, None, col, src, rows, mode, ints)
    if kind in ("bool", "complex"):
        raise ScanError(f"{where(src, None, col)}: the time column holds "
                        f"{'true/false values' if kind == 'bool' else 'complex numbers'}, not times")
    if isinstance(series.dtype, pd.StringDtype):  # text from a CSV file: vectorised
        stripped = series.str.strip()
        missing = (stripped.isna() | stripped.str.lower().isin(NA_TOKENS)).to_numpy(dtype=bool)
        num = pd.to_numeric(stripped.where(~missing), errors="coerce").to_numpy(dtype=float, na_value=np.nan)
        bad = np.isnan(num) & ~missing
        if not bad.any():
            if declared == "iso" and (~missing).any():
                refuse_numbers()
            return _numbers_to_time(num, lambda: stripped.fillna("nan").to_numpy(dtype=str), col, src, rows, mode)
        values = series.to_numpy(dtype=object)
    else:
        values = series.to_numpy(dtype=object)
        num, missing, bad = _token_values(values)
        if not bad.any():
            if declared == "iso" and (~missing).any():
                refuse_numbers()

            def text():  # the decimal text of every value, for exact Unix times
                return np.array([v.strip() if isinstance(v, str) else str(v) if isinstance(v, Decimal)
                                 else repr(float(x)) for v, x in zip(values, num)])

            return _numbers_to_time(num, text, col, src, rows, mode)
    first_bad = int(np.flatnonzero(bad)[0])
    if declared == "s":
        raise _bad_value(src, rows[first_bad], col, values[first_bad],
                         f"is not a number of seconds, although {origin} = 's' declares seconds; "
                         "the manifest contradicts the log")
    # ISO-8601 timestamps?
    text = np.array([isinstance(v, str) for v in values])
    tokens = pd.Series([v.strip() if isinstance(v, str) and not m else None for v, m in zip(values, missing)],
                       dtype=object)
    try:
        parsed = pd.to_datetime(tokens, utc=True, format="ISO8601", errors="coerce")
    except (ValueError, TypeError, OverflowError):
        parsed = None
    present = np.flatnonzero(~missing)
    if parsed is None or parsed.isna().to_numpy()[present[0]]:
        raise _bad_value(src, rows[first_bad], col, values[first_bad],
                         "is neither a number of seconds nor an ISO-8601 timestamp")
    failed = (parsed.isna().to_numpy() | ~text) & ~missing
    if failed.any():
        i = int(np.flatnonzero(failed)[0])
        raise _bad_value(src, rows[i], col, values[i], "is not an ISO-8601 timestamp (like the rows above)")
    return _datetimes_to_ns(parsed, tokens, col, src, rows)


def _datetimes_to_ns(ser, original, col, src, rows):
    """int64 nanoseconds of a UTC datetime Series (NaT → not ok)."""
    import pandas as pd

    try:
        ns_ser = ser.dt.as_unit("ns")
    except (pd.errors.OutOfBoundsDatetime, OverflowError, ValueError):
        lo, hi = pd.Timestamp.min.tz_localize("UTC"), pd.Timestamp.max.tz_localize("UTC")
        out = ((ser < lo) | (ser > hi)).to_numpy()
        i = int(np.flatnonzero(out)[0]) if out.any() else 0
        raise _bad_value(src, rows[i], col, original.iloc[i], "lies outside the years 1678–2261") from None
    ok = ~ns_ser.isna().to_numpy()
    ns = np.zeros(len(ns_ser), np.int64)
    ns[ok] = ns_ser[ok].to_numpy(dtype="datetime64[ns]").astype(np.int64)
    return ("abs", ns, ok)


def _numbers_to_time(vals: np.ndarray, text, col, src, rows, mode=None, ints=None):
    """Relative seconds, or Unix seconds (first finite value > 1e8, unless ``mode`` says which)
    converted exactly to ns: from whole numbers (``ints``), from their decimal text (``text()``,
    when given) or from the floats' shortest representation."""
    fin = np.flatnonzero(np.isfinite(vals))
    if mode == "rel" or (mode is None and (fin.size == 0 or not vals[fin[0]] > UNIX_THRESHOLD_S)):
        return ("rel", vals)
    over = np.isfinite(vals) & ~(np.abs(vals) < UNIX_MAX_S)
    if over.any():
        i = int(np.flatnonzero(over)[0])
        raise ScanError(f"{where(src, int(rows[i]), col)}: time {vals[i]:.9g} s is too large in magnitude for Unix "
                        f"seconds (limit {UNIX_MAX_S:.2g} s, the year 2261); not a time in seconds")
    if ints is not None:
        return ("abs", ints * NS_PER_S, np.ones(ints.size, bool))
    ns, ok = float_seconds_to_ns(vals)
    if text is not None:  # texts with more than 15 significant digits: exact decimal conversion
        txt = text()
        long = np.char.str_len(txt) > 16
        if long.any():
            ns_l, ok_l = decimal_seconds_to_ns(txt[long])
            ns[long], ok[long] = ns_l, ok_l & np.isfinite(vals[long])
    return ("abs", ns, ok)


# ---------------------------------------------------------------------------------- the frame
def check_options(angle_unit, signal_unit, nonfinite) -> None:
    """Refuse bad option values (they often come straight from a command line) with a ScanError."""
    if angle_unit is not None and angle_unit not in ("deg", "rad"):
        raise ScanError(f"angle_unit must be 'deg' or 'rad', not {angle_unit!r}")
    if signal_unit is not None and signal_unit not in SIGNAL_UNITS:
        raise ScanError(f"signal_unit must be 'fringe' or 'fractional', not {signal_unit!r}")
    if nonfinite not in ("drop", "raise"):
        raise ScanError(f"nonfinite must be 'drop' or 'raise', not {nonfinite!r}")


class Plan:
    """Which column plays which role and in which unit, for one table (see :func:`frame_fields`)."""

    def __init__(self, names, src, man, kw, angle_unit, signal_unit):
        self.src, self.man = src, man
        self.cols, self.aux = resolve_columns(names, kw, man, src)
        units = dict(man.units) if man is not None else {}
        self.mpath = man.path if man is not None and man.path else "the manifest"
        self.time_declared = units.get("time")
        self.time_origin = f"{self.mpath} [units] time" if self.time_declared else ""
        self.start_ns = utc_to_ns(man.start_utc) if man is not None and man.start_utc else None
        if angle_unit is not None:
            self.angle_unit, self.angle_origin = angle_unit, f"angle_unit={angle_unit!r}"
        elif "angle" in units:
            self.angle_unit, self.angle_origin = units["angle"], f"{self.mpath} [units] angle = {units['angle']!r}"
        else:
            self.angle_unit, self.angle_origin = "deg", "the default"
        if signal_unit is not None:
            self.signal_unit, self.signal_origin = signal_unit, f"signal_unit={signal_unit!r}"
        elif "signal" in units:
            self.signal_unit, self.signal_origin = units["signal"], f"{self.mpath} [units] signal = {units['signal']!r}"
        elif man is not None and "signal" in man.apparatus:
            self.signal_unit = man.apparatus["signal"]
            self.signal_origin = f"{self.mpath} [apparatus] signal = {man.apparatus['signal']!r}"
        else:
            self.signal_unit, self.signal_origin = "fringe", "the default unit, 'fringe'"

    def numbers(self, col, name: str, rows: np.ndarray) -> np.ndarray:
        """float64 values of a column (NaN where missing); a non-numeric entry is a ScanError."""
        if is_arrow(col):
            vals = arrow_numeric(col)
            if vals is not None:
                return vals
            col = col.to_pandas()
        return _numeric_column(col, name, self.src, rows)


class TimeDecoder:
    """Relative seconds and the epoch from the time column, fed whole or chunk by chunk: the first
    finite value decides between relative and Unix seconds, the first valid absolute time fixes
    the epoch (and is checked against the manifest's ``start_utc``) for every later chunk."""

    def __init__(self, plan: Plan):
        self.plan = plan
        self.mode = None  # "abs" or "rel", once a finite value has been seen
        self.epoch = None
        self._shift = None  # seconds added to relative times (manifest start_utc)

    def decode(self, col, rows: np.ndarray) -> np.ndarray:
        plan, name = self.plan, self.plan.cols["time"]
        info = arrow_time_values(col, name, plan.src, rows, plan.time_declared, self.mode) if is_arrow(col) else None
        if info is None:
            series = col.to_pandas() if is_arrow(col) else col
            info = _time_column(series, name, plan.src, rows, plan.time_declared, plan.time_origin, self.mode)
        if info[0] == "abs":
            _, ns, ok = info
            if self.mode is None and ok.any():
                self.mode = "abs"
            if self.epoch is None and ok.any():
                i = int(np.argmax(ok))
                first = int(ns[i])
                self.epoch = first // NS_PER_S
                if plan.start_ns is not None and abs(first - plan.start_ns) > START_TOLERANCE_S * NS_PER_S:
                    raise ScanError(f"{where(plan.src, int(rows[i]), name)}: the log starts at {ns_to_iso(first)} "
                                    f"but {plan.mpath} [time] start_utc = {plan.man.start_utc} "
                                    f"({(first - plan.start_ns) / NS_PER_S:+.6g} s); the manifest contradicts the log")
            if self.epoch is None:
                return np.full(ns.size, np.nan)
            if ok.all() and ns.flags.writeable:  # relative seconds over the nanoseconds: no second array
                ns -= self.epoch * NS_PER_S
                t = ns.view(np.float64)
                np.true_divide(ns, NS_PER_S, out=t)
                return t
            t = (np.where(ok, ns, self.epoch * NS_PER_S) - self.epoch * NS_PER_S).astype(float) / NS_PER_S
            t[~ok] = np.nan
            return t
        t = np.asarray(info[1], dtype=float)
        fin = np.isfinite(t)
        if self.mode is None and fin.any():
            self.mode = "rel"
            first = float(t[int(np.argmax(fin))])
            if plan.start_ns is not None and abs(first) <= UNIX_THRESHOLD_S:
                first_abs = plan.start_ns + int(np.floor(first * NS_PER_S))
                self.epoch = first_abs // NS_PER_S
                self._shift = (plan.start_ns - self.epoch * NS_PER_S) / NS_PER_S
        return t + self._shift if self._shift is not None else t


class SignalUnitCheck:
    """Is the signal plausibly in its declared unit?  A fractional-frequency log whose typical
    |value| (median over the finite values, to 0.07 %: :mod:`nullfit.reading.histogram`) exceeds
    :data:`FRACTIONAL_MAX` is not Δν/ν; a fringe log whose every |value| is below
    :data:`FRINGE_MIN` looks like Δν/ν.  Fed whole or chunk by chunk."""

    def __init__(self, plan: Plan):
        self.plan = plan
        self.hist = LogHistogram()
        self.max = 0.0

    def add(self, y: np.ndarray) -> None:
        if y.size == 0:
            return
        finite = np.isfinite(y)
        if finite.all() and self.plan.signal_unit != "fractional":  # only the largest |value| matters
            self.max = max(self.max, abs(float(y.min())), abs(float(y.max())))
            return
        fin = np.abs(y[finite])
        if fin.size:
            self.max = max(self.max, float(fin.max()))
            if self.plan.signal_unit == "fractional":
                self.hist.add(fin)

    def check(self) -> None:
        plan = self.plan
        src, col, unit, origin = plan.src, plan.cols["signal"], plan.signal_unit, plan.signal_origin
        if unit == "fractional":
            med = self.hist.median()
            if med is not None and med > FRACTIONAL_MAX:
                raise ScanError(f"{where(src, None, col)}: values of typical size {med:.3g} are not fractional "
                                f"frequency offsets Δν/ν (declared by {origin}); the unit contradicts the log")
        if unit == "fringe" and 0 < self.max < FRINGE_MIN:
            raise ScanError(f"{where(src, None, col)}: every value is below {FRINGE_MIN:g} fringe (declared by "
                            f"{origin}); they look like a fractional frequency Δν/ν: set signal_unit='fractional'")


def release_arrow_memory() -> None:
    """Hand the memory of Arrow columns already converted back to the system: Arrow's allocator
    keeps freed blocks for itself, where the numpy arrays made next cannot use them (a CSV time
    column read as decimals is twice the size of its float64 values)."""
    pa = sys.modules.get("pyarrow")
    if pa is not None:
        pa.default_memory_pool().release_unused()


def frame_fields(get, names, n, rows, src, man, kw, angle_unit, signal_unit, nonfinite) -> dict:
    """The arguments of :func:`~nullfit.reading.validate.check_columns` for a table: ``get(name)``
    returns the column (a pandas Series or a pyarrow array; shared by CSV, Parquet and DataFrame
    input)."""
    if n == 0:
        raise ScanError(f"{where(src)}: the log has column names but no data rows")
    plan = Plan(names, src, man, kw, angle_unit, signal_unit)
    cols = plan.cols
    decoder = TimeDecoder(plan)
    t = decoder.decode(get(cols["time"]), rows)
    release_arrow_memory()
    angle = plan.numbers(get(cols["angle"]), cols["angle"], rows)
    signal = plan.numbers(get(cols["signal"]), cols["signal"], rows)
    unit_check = SignalUnitCheck(plan)
    unit_check.add(signal)
    unit_check.check()
    aux = {name: plan.numbers(get(name), name, rows) for name in plan.aux}
    return dict(time=t, angle=angle, signal=signal, angle_unit=plan.angle_unit, epoch_unix=decoder.epoch,
                signal_unit=plan.signal_unit, source=src, rows=rows, columns=cols, aux=aux, nonfinite=nonfinite,
                angle_unit_origin=plan.angle_origin)
