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
import io
import re
from pathlib import Path

from ..core.errors import ScanError
from .columns import check_options, one_line, resolve_columns, show
from .manifest import load_manifest
from .scan import Scan

PARQUET_SUFFIXES = (".parquet", ".pq", ".parq")


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
        raise ScanError(f"{src}, line 1: cannot read the header ({one_line(err)})") from None
    if len(header) == 1:
        for delim, label in ((";", "semicolons"), ("\t", "tabs"), ("|", "'|' characters")):
            if delim in first:
                raise ScanError(f"{src}, line 1: the header {show(first, 60)} is separated by {label}, not commas; "
                                "nullfit reads comma-separated values (convert the file; mind decimal commas)")
        if len(first.split()) > 1:
            raise ScanError(f"{src}, line 1: the header {show(first, 60)} is separated by spaces, not commas; "
                            "nullfit reads comma-separated values")
    numeric = 0
    for h in header:
        try:
            float(h)
            numeric += 1
        except ValueError:
            pass
    if numeric == len(header):
        raise ScanError(f"{src}, line 1: the first line holds numbers ({show(first, 40)}), not column names; "
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
        msg = one_line(err)
        m = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", msg)
        if m:
            raise ScanError(f"{src}, line {m.group(2)} (data row {int(m.group(2)) - 1}): {m.group(3)} fields where the "
                            f"header has {m.group(1)}") from None
        raise ScanError(f"{src}: cannot parse as CSV ({msg.replace('Error tokenizing data. ', '')})") from None
    except (ValueError, OverflowError, UnicodeError, csv.Error) as err:
        raise ScanError(f"{src}: cannot parse as CSV ({one_line(err)})") from None
    return header, df


def _read_parquet(raw: bytes, src: str):
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        table = pq.read_table(pa.BufferReader(raw))
        df = table.to_pandas(ignore_metadata=True)
    except (pa.ArrowException, OSError, ValueError, TypeError, OverflowError) as err:
        raise ScanError(f"{src}: not a readable Parquet file ({one_line(err)[:200]})") from None
    return [str(c) for c in df.columns], df


def read_scan(path, *, time=None, angle=None, signal=None, angle_unit=None, manifest=None,
              nonfinite: str = "drop", signal_unit=None) -> Scan:
    """Read a scan log (CSV or Parquet) and its manifest into a validated `Scan`.

    Parameters
    ----------
    path : str, Path or pandas.DataFrame
        The log.  Parquet is recognised by its magic bytes (or a ``.parquet``/``.pq`` suffix);
        anything else is read as UTF-8 comma-separated text with a header line.  A DataFrame
        is read as :meth:`Scan.from_frame` does (no manifest look-up; row ``r`` is its ``r``-th
        row).
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
        docstrings of :mod:`nullfit.reading.files`, :mod:`nullfit.reading.columns` and
        :mod:`nullfit.reading.validate` for every case.

    Notes
    -----
    The file is opened for reading only.
    """
    if hasattr(path, "iloc") and hasattr(path, "columns"):  # a pandas DataFrame
        return Scan.from_frame(path, time=time, angle=angle, signal=signal, angle_unit=angle_unit,
                               manifest=None if manifest is None else manifest, nonfinite=nonfinite,
                               signal_unit=signal_unit)
    check_options(angle_unit, signal_unit, nonfinite)
    p = Path(path)
    src = str(path)
    if not p.exists():
        raise ScanError(f"{src}: no such file")
    if p.is_dir():
        raise ScanError(f"{src}: is a directory, not a scan log")
    try:
        man = load_manifest(manifest, p)
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
        names, df = _read_csv(raw, src, lambda header: resolve_columns(header, kw, man, src)[0]["time"])

    def get(name):
        return df.iloc[:, names.index(name)]

    return Scan.from_table(get, names, len(df), src, man, {"time": time, "angle": angle, "signal": signal},
                           angle_unit, signal_unit, nonfinite)
