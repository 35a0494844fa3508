"""Reading scan logs: CSV and Parquet files, or a pandas DataFrame, into a validated `Scan`.

Columns
-------
The time, angle and signal columns default to ``time_s``, ``angle_deg`` and ``fringe``; a
keyword (``time=``, ``angle=``, ``signal=``) wins over the manifest's ``[columns]`` table, which
wins over the defaults.  The manifest's ``[columns] aux`` list adds auxiliary columns (nuisance
regressors such as a tilt or a temperature), kept in ``Scan.aux``.  Column names in a CSV header
are stripped of surrounding spaces.

Time
----
The time column may hold relative seconds, Unix seconds (values above 1e8 s) or ISO-8601
timestamps (naive ones are taken as UTC; offsets are converted).  Absolute times are handled as
int64 nanoseconds: decimal text is converted exactly, a float as its shortest decimal
representation.  The scan keeps an integer-second epoch — the whole Unix second at or before the
first reading — plus float relative seconds computed from the integer nanoseconds, so a 1.8e9 s
epoch costs nothing: relative times are exact to 1 ns for scans shorter than about 104 days.
With relative seconds, the manifest's ``[time] start_utc`` gives the absolute time of ``t = 0``;
without it the epoch is ``None`` and the relative seconds are kept as they are.

Rows
----
Row numbers in messages count the *data* rows from 1, the way a person counts them below the
header: the header line is **not** counted, so data row ``r`` of a CSV file is on line ``r + 1``
(blank lines count as rows; they are dropped as missing values).  Messages about the raw bytes
of a file (encoding, delimiter, field counts) name the *line* instead.  For Parquet files and
DataFrames row ``r`` is the ``r``-th record.

Nothing is ever written to the input file or frame.
"""

from __future__ import annotations

import csv
import difflib
import io
import re
from decimal import Decimal
from pathlib import Path
from typing import Any

import numpy as np

from .manifest import find_manifest, read_manifest
from .scan import Manifest, Scan, ScanError, where
from .validate import (
    NS_PER_S,
    SIGNAL_UNITS,
    UNIX_MAX_S,
    UNIX_THRESHOLD_S,
    build_scan,
    decimal_seconds_to_ns,
    float_seconds_to_ns,
    ns_to_iso,
    split_epoch,
    utc_to_ns,
)

DEFAULT_COLUMNS = {"time": "time_s", "angle": "angle_deg", "signal": "fringe"}
PARQUET_SUFFIXES = (".parquet", ".pq", ".parq")
#: Spellings of a missing value (compared after stripping, case-insensitively).
NA_TOKENS = frozenset({"", "nan", "-nan", "+nan", "na", "n/a", "#n/a", "null", "none", "<na>", "nat"})
#: A manifest start time and absolute times in the log may differ by at most this (seconds).
START_TOLERANCE_S = 1.0
#: A fractional-frequency log whose median |value| exceeds this is not Δν/ν.
FRACTIONAL_MAX = 1e-3
#: A fringe log whose every |value| is below this looks like Δν/ν.
FRINGE_MIN = 1e-9


# ---------------------------------------------------------------------------------- helpers
def _one_line(text: Any) -> str:
    return " ".join(str(text).split())


def _show(value: Any, width: int = 40) -> str:
    r = repr(value)
    return r if len(r) <= width else r[: width - 3] + "..."


def _list_names(names, limit: int = 12) -> str:
    shown = ", ".join(repr(n) for n in names[:limit])
    return shown + (f", ... ({len(names)} in all)" if len(names) > limit else "")


def _load_manifest(manifest, log_path: Path | None) -> Manifest | None:
    if manifest is False:
        return None
    if isinstance(manifest, Manifest):
        return manifest
    if manifest is None:
        found = find_manifest(log_path) if log_path is not None else None
        return read_manifest(found) if found is not None else None
    return read_manifest(manifest)


# ---------------------------------------------------------------------------------- columns
def _resolve_columns(names: list[str], kw: dict[str, str | None], man: Manifest | None, src: str):
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
                                f"names it; the manifest contradicts the log (columns: {_list_names(names)}){hint_s}")
            how = (f"check {role}=" if origin == "kw" else
                   f"this is the default {role} column; name yours with {role}='...' or in a manifest")
            raise ScanError(f"{where(src, None, name)}: no such column ({how}; columns: {_list_names(names)}){hint_s}")
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
    for name in (man.aux_columns if man is not None else ()):
        if name not in names:
            raise ScanError(f"{where(src, None, name)}: no such column, although {man.path} [columns] aux lists "
                            f"it; the manifest contradicts the log (columns: {_list_names(names)})")
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
    msg = f"{where(src, int(row), col)}: {_show(value)} {what}"
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


def _time_column(series, col: str, src: str, rows: np.ndarray, declared: str | None, origin: str):
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
        text = None
        if pd.api.types.is_integer_dtype(series.dtype):  # whole seconds: exact via their text

            def text():
                return np.array([str(v) for v in series.to_numpy(dtype=object)])

        return _numbers_to_time(vals, text, col, src, rows)
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
            return _numbers_to_time(num, lambda: stripped.fillna("nan").to_numpy(dtype=str), col, src, rows)
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

            return _numbers_to_time(num, text, col, src, rows)
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


def _numbers_to_time(vals: np.ndarray, text, col, src, rows):
    """Relative seconds, or Unix seconds (first finite value > 1e8) converted exactly to ns:
    from their decimal text (``text()``, when given) or from the floats' shortest representation."""
    fin = np.flatnonzero(np.isfinite(vals))
    if fin.size == 0 or not vals[fin[0]] > UNIX_THRESHOLD_S:
        return ("rel", vals)
    over = np.isfinite(vals) & ~(np.abs(vals) < UNIX_MAX_S)
    if over.any():
        i = int(np.flatnonzero(over)[0])
        raise ScanError(f"{where(src, int(rows[i]), col)}: time {vals[i]:.9g} s is too large in magnitude for Unix "
                        f"seconds (limit {UNIX_MAX_S:.2g} s, the year 2261); not a time in seconds")
    ns, ok = float_seconds_to_ns(vals)
    if text is not None:  # texts with more than 15 significant digits: exact decimal conversion
        txt = text()
        long = np.char.str_len(txt) > 16
        if long.any():
            ns_l, ok_l = decimal_seconds_to_ns(txt[long])
            ns[long], ok[long] = ns_l, ok_l & np.isfinite(vals[long])
    return ("abs", ns, ok)


# ---------------------------------------------------------------------------------- the frame
def _check_options(angle_unit, signal_unit, nonfinite) -> None:
    """Refuse bad option values (they often come straight from a command line) with a ScanError."""
    if angle_unit is not None and angle_unit not in ("deg", "rad"):
        raise ScanError(f"angle_unit must be 'deg' or 'rad', not {angle_unit!r}")
    if signal_unit is not None and signal_unit not in SIGNAL_UNITS:
        raise ScanError(f"signal_unit must be 'fringe' or 'fractional', not {signal_unit!r}")
    if nonfinite not in ("drop", "raise"):
        raise ScanError(f"nonfinite must be 'drop' or 'raise', not {nonfinite!r}")


def _frame_to_scan(get, names, n, rows, src, man, kw, angle_unit, signal_unit, nonfinite) -> Scan:
    """Shared by CSV, Parquet and DataFrame input: ``get(name)`` returns the column's Series."""
    if n == 0:
        raise ScanError(f"{where(src)}: the log has column names but no data rows")
    cols, aux_names = _resolve_columns(names, kw, man, src)
    units = dict(man.units) if man is not None else {}
    mpath = man.path if man is not None and man.path else "the manifest"

    # time
    declared_t = units.get("time")
    tinfo = _time_column(get(cols["time"]), cols["time"], src, rows, declared_t,
                         f"{mpath} [units] time" if declared_t else "")
    start_ns = utc_to_ns(man.start_utc) if man is not None and man.start_utc else None
    if tinfo[0] == "abs":
        _, ns, ok = tinfo
        epoch, t = split_epoch(ns, ok)
        if start_ns is not None and ok.any():
            first = int(ns[ok][0])
            if abs(first - start_ns) > START_TOLERANCE_S * NS_PER_S:
                i = int(np.flatnonzero(ok)[0])
                raise ScanError(f"{where(src, int(rows[i]), cols['time'])}: the log starts at {ns_to_iso(first)} but "
                                f"{mpath} [time] start_utc = {man.start_utc} ({(first - start_ns) / NS_PER_S:+.6g} s); "
                                "the manifest contradicts the log")
    else:
        t = np.asarray(tinfo[1], dtype=float)
        epoch = None
        fin = np.flatnonzero(np.isfinite(t))
        if start_ns is not None and fin.size and abs(t[fin[0]]) <= UNIX_THRESHOLD_S:
            first_abs = start_ns + int(np.floor(t[fin[0]] * NS_PER_S))
            epoch = first_abs // NS_PER_S
            t = t + (start_ns - epoch * NS_PER_S) / NS_PER_S

    # angle and signal
    if angle_unit is not None:
        a_unit, a_origin = angle_unit, f"angle_unit={angle_unit!r}"
    elif "angle" in units:
        a_unit, a_origin = units["angle"], f"{mpath} [units] angle = {units['angle']!r}"
    else:
        a_unit, a_origin = "deg", "the default"
    angle = _numeric_column(get(cols["angle"]), cols["angle"], src, rows)
    signal = _numeric_column(get(cols["signal"]), cols["signal"], src, rows)
    if signal_unit is not None:
        s_unit, s_origin = signal_unit, f"signal_unit={signal_unit!r}"
    elif "signal" in units:
        s_unit, s_origin = units["signal"], f"{mpath} [units] signal = {units['signal']!r}"
    elif man is not None and "signal" in man.apparatus:
        s_unit, s_origin = man.apparatus["signal"], f"{mpath} [apparatus] signal = {man.apparatus['signal']!r}"
    else:
        s_unit, s_origin = "fringe", "the default unit, 'fringe'"
    _check_signal_unit(signal, s_unit, s_origin, src, cols["signal"])
    aux = {name: _numeric_column(get(name), name, src, rows) for name in aux_names}

    return build_scan(Scan, t, angle, signal, angle_unit=a_unit, epoch_unix=epoch, signal_unit=s_unit,
                      source=src, rows=rows, columns=cols, aux=aux,
                      meta=man if man is not None else Manifest(), nonfinite=nonfinite,
                      angle_unit_origin=a_origin)


def _check_signal_unit(y, unit, origin, src, col):
    fin = np.abs(y[np.isfinite(y)])
    if fin.size == 0:
        return
    if unit == "fractional" and float(np.median(fin)) > FRACTIONAL_MAX:
        raise ScanError(f"{where(src, None, col)}: values of typical size {float(np.median(fin)):.3g} are not "
                        f"fractional frequency offsets Δν/ν (declared by {origin}); the unit contradicts the log")
    if unit == "fringe" and float(fin.max()) < FRINGE_MIN and float(fin.max()) > 0:
        raise ScanError(f"{where(src, None, col)}: every value is below {FRINGE_MIN:g} fringe (declared by {origin}); "
                        "they look like a fractional frequency Δν/ν: set signal_unit='fractional'")


def scan_from_frame(df, *, time=None, angle=None, signal=None, angle_unit=None, manifest=None,
                    source: str = "<frame>", nonfinite: str = "drop", signal_unit=None) -> Scan:
    """Build a `Scan` from a pandas DataFrame; the arguments are those of :func:`read_scan`
    (``manifest`` may be a path or a `Manifest`; there is no automatic look-up).  Row ``r`` in
    messages is the ``r``-th row of the frame, counted from 1.  The frame is not modified."""
    import pandas as pd

    if not isinstance(df, pd.DataFrame):
        raise TypeError(f"expected a pandas DataFrame, not {type(df).__name__}")
    _check_options(angle_unit, signal_unit, nonfinite)
    man = _load_manifest(manifest, None)
    labels = list(df.columns)
    names = [str(c) for c in labels]
    n = len(df)
    rows = np.arange(1, n + 1, dtype=np.int64)

    def get(name):
        return df.iloc[:, names.index(name)].reset_index(drop=True)

    return _frame_to_scan(get, names, n, rows, str(source), man, {"time": time, "angle": angle, "signal": signal},
                          angle_unit, signal_unit, nonfinite)


# ---------------------------------------------------------------------------------- files
def _decode(raw: bytes, src: str) -> str:
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise ScanError(f"{src}, line 1: the file is UTF-16 encoded (byte-order mark 0x{raw[0]:02x}{raw[1]:02x}); "
                        "save the log as UTF-8")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as err:
        off = err.start
        line = raw[:off].count(b"\n") + 1
        col = off - (raw.rfind(b"\n", 0, off) + 1) + 1
        row = f" (data row {line - 1})" if line > 1 else " (the header)"
        raise ScanError(f"{src}, line {line}{row}: byte 0x{raw[off]:02x} at offset {off} (character {col} of the "
                        "line) is not valid UTF-8; save the log as UTF-8") from None
    nul = text.find("\x00")
    if nul >= 0:
        line = text.count("\n", 0, nul) + 1
        raise ScanError(f"{src}, line {line}: the file contains NUL characters; it is binary, not a CSV text log")
    return text


def _csv_header(text: str, src: str) -> list[str]:
    first = text.split("\n", 1)[0].rstrip("\r")
    if not first.strip():
        raise ScanError(f"{src}, line 1: the first line is empty; the header (column names) must be on line 1")
    try:
        header = [h.strip() for h in next(csv.reader([first]))]
    except (csv.Error, StopIteration) as err:
        raise ScanError(f"{src}, line 1: cannot read the header ({_one_line(err)})") from None
    if len(header) == 1:
        for delim, label in ((";", "semicolons"), ("\t", "tabs"), ("|", "'|' characters")):
            if delim in first:
                raise ScanError(f"{src}, line 1: the header {_show(first, 60)} is separated by {label}, not commas; "
                                "nullfit reads comma-separated values (convert the file; mind decimal commas)")
        if len(first.split()) > 1:
            raise ScanError(f"{src}, line 1: the header {_show(first, 60)} is separated by spaces, not commas; "
                            "nullfit reads comma-separated values")
    numeric = 0
    for h in header:
        try:
            float(h)
            numeric += 1
        except ValueError:
            pass
    if numeric == len(header):
        raise ScanError(f"{src}, line 1: the first line holds numbers ({_show(first, 40)}), not column names; "
                        "the log needs a header line such as 'time_s,angle_deg,fringe'")
    return header


def _read_csv(raw: bytes, src: str, time_column):
    """``(header, frame)`` of a CSV log; ``time_column(header)`` names the time column, which is read
    as text (exact Unix times, ISO-8601 timestamps); the others are parsed as numbers where they can be."""
    import pandas as pd

    if not raw.strip():
        raise ScanError(f"{src}: the file is empty")
    text = _decode(raw, src)
    if not text.strip():
        raise ScanError(f"{src}: the file is empty")
    header = _csv_header(text, src)
    text = text.rstrip()  # trailing blank lines are not rows (earlier ones are, so numbering holds)
    ncol = len(header)
    if "\n" not in text:
        return header, pd.DataFrame({i: pd.Series([], dtype=object) for i in range(ncol)})
    tcol = time_column(header)
    dtype = {header.index(tcol): str} if tcol in header else None
    try:
        df = pd.read_csv(io.StringIO(text + "\n"), header=None, skiprows=1, names=list(range(ncol)), dtype=dtype,
                         skip_blank_lines=False, low_memory=False, engine="c")
    except pd.errors.ParserError as err:
        msg = _one_line(err)
        m = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", msg)
        if m:
            raise ScanError(f"{src}, line {m.group(2)} (data row {int(m.group(2)) - 1}): {m.group(3)} fields where the "
                            f"header has {m.group(1)}") from None
        raise ScanError(f"{src}: cannot parse as CSV ({msg.replace('Error tokenizing data. ', '')})") from None
    except (ValueError, OverflowError, UnicodeError, csv.Error) as err:
        raise ScanError(f"{src}: cannot parse as CSV ({_one_line(err)})") from None
    return header, df


def _read_parquet(raw: bytes, src: str):
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        table = pq.read_table(pa.BufferReader(raw))
        df = table.to_pandas(ignore_metadata=True)
    except (pa.ArrowException, OSError, ValueError, TypeError, OverflowError) as err:
        raise ScanError(f"{src}: not a readable Parquet file ({_one_line(err)[:200]})") from None
    return [str(c) for c in df.columns], df


def read_scan(path, *, time=None, angle=None, signal=None, angle_unit=None, manifest=None,
              nonfinite: str = "drop", signal_unit=None) -> Scan:
    """Read a scan log (CSV or Parquet) and its manifest into a validated `Scan`.

    Parameters
    ----------
    path : str or Path
        The log.  Parquet is recognised by its magic bytes (or a ``.parquet``/``.pq`` suffix);
        anything else is read as UTF-8 comma-separated text with a header line.
    time, angle, signal : str, optional
        Column names; they win over the manifest's ``[columns]``, which wins over the defaults
        ``time_s``, ``angle_deg``, ``fringe``.
    angle_unit : {"deg", "rad"}, optional
        Unit of the angle column; default: the manifest's ``[units] angle``, else ``"deg"``.
    manifest : str, Path, Manifest, None or False
        The manifest; ``None`` looks for one beside the log (same stem, ``.toml``), ``False``
        ignores it.
    nonfinite : {"drop", "raise"}
        Rows with missing, NaN or infinite values are dropped and counted with a `ScanWarning`
        (default), or refused with a `ScanError`.
    signal_unit : {"fringe", "fractional"}, optional
        Default: the manifest's ``[units] signal`` or ``[apparatus] signal``, else ``"fringe"``.

    Returns
    -------
    Scan

    Raises
    ------
    ScanError
        One line naming the file, the row (data rows counted from 1, header not counted: data row
        ``r`` is line ``r + 1`` of a CSV file) and the column where they apply; see the module
        docstrings of :mod:`nullfit.logfile` and :mod:`nullfit.validate` for every case.

    Notes
    -----
    The file is opened for reading only.
    """
    _check_options(angle_unit, signal_unit, nonfinite)
    p = Path(path)
    src = str(path)
    if not p.exists():
        raise ScanError(f"{src}: no such file")
    if p.is_dir():
        raise ScanError(f"{src}: is a directory, not a scan log")
    try:
        man = _load_manifest(manifest, p)
    except ScanError as err:  # say which log the manifest belongs to (it may have been found silently)
        raise ScanError(f"{err} (manifest of {src})") from None
    try:
        raw = p.read_bytes()
    except OSError as err:
        raise ScanError(f"{src}: cannot read the file ({err.strerror or err})") from None
    if raw[:4] == b"PAR1" or p.suffix.lower() in PARQUET_SUFFIXES:
        if raw[:4] != b"PAR1":
            if not raw.strip():
                raise ScanError(f"{src}: the file is empty")
            raise ScanError(f"{src}: not a Parquet file (no 'PAR1' magic bytes at the start)")
        names, df = _read_parquet(raw, src)
    else:
        kw = {"time": time, "angle": angle, "signal": signal}
        names, df = _read_csv(raw, src, lambda header: _resolve_columns(header, kw, man, src)[0]["time"])
    n = len(df)
    rows = np.arange(1, n + 1, dtype=np.int64)

    def get(name):
        return df.iloc[:, names.index(name)]

    return _frame_to_scan(get, names, n, rows, src, man, {"time": time, "angle": angle, "signal": signal},
                          angle_unit, signal_unit, nonfinite)
