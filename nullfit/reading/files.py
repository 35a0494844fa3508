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
from .columns import check_options, one_line, resolve_columns
from .csv_arrow import csv_header, decode_text, read_csv_arrow, read_header
from .manifest import open_log
from .scan import Scan

PARQUET_SUFFIXES = (".parquet", ".pq", ".parq")


# ---------------------------------------------------------------------------------- files
def _read_csv(raw: bytes, src: str, time_column):
    """``(header, frame)`` of a CSV log; ``time_column(header)`` names the time column, which is read
    as text (exact Unix times, ISO-8601 timestamps); the others are parsed as numbers where they can be."""
    import pandas as pd

    if not raw.strip():
        raise ScanError(f"{src}: the file is empty")
    text = decode_text(raw, src)
    if not text.strip():
        raise ScanError(f"{src}: the file is empty")
    header = csv_header(text, src)
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


def _parquet_names(p: Path, src: str) -> list[str]:
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        return [str(n) for n in pq.read_schema(p).names]
    except (pa.ArrowException, OSError, ValueError, TypeError, OverflowError) as err:
        raise ScanError(f"{src}: not a readable Parquet file ({one_line(err)[:200]})") from None


def _parquet_column(p: Path, src: str):
    """``get(name)``: one column of a Parquet log as a pyarrow ChunkedArray, read when asked for
    (the columns are converted one at a time, so only one is held in Arrow's memory at once)."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    def get(name):
        try:
            return pq.ParquetFile(p).read(columns=[name], use_threads=True).column(0)
        except (pa.ArrowException, OSError, ValueError, TypeError, OverflowError, KeyError) as err:
            raise ScanError(f"{src}: not a readable Parquet file ({one_line(err)[:200]})") from None

    return get


def read_scan(path, *, time=None, angle=None, signal=None, angle_unit=None, manifest=None,
              nonfinite: str = "drop", signal_unit=None, aux=None) -> Scan:
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
    aux : str or sequence of str, optional
        Auxiliary columns (tilt, temperature, ...) to keep in ``Scan.aux``; they replace the
        manifest's ``[columns] aux`` list (``aux=[]`` keeps none).  A missing column is a
        `ScanError`; a row with a missing or non-finite aux value is dropped (and counted under
        its own reason naming the column) or refused, as ``nonfinite`` says.

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
                               signal_unit=signal_unit, aux=aux)
    check_options(angle_unit, signal_unit, nonfinite)
    p, src, man = open_log(path, manifest)
    kw = {"time": time, "angle": angle, "signal": signal, "aux": aux}
    try:
        with open(p, "rb") as f:
            magic = f.read(4)
    except OSError as err:
        raise ScanError(f"{src}: cannot read the file ({err.strerror or err})") from None
    if magic == b"PAR1" or p.suffix.lower() in PARQUET_SUFFIXES:
        if magic != b"PAR1":
            if not _read_bytes(p, src).strip():
                raise ScanError(f"{src}: the file is empty")
            raise ScanError(f"{src}: not a Parquet file (no 'PAR1' magic bytes at the start)")
        names = _parquet_names(p, src)
        n = _parquet_rows(p, src)
        if n == 0:
            raise ScanError(f"{src}: the log has column names but no data rows")
        return Scan.from_table(_parquet_column(p, src), names, n, src, man, kw, angle_unit, signal_unit, nonfinite,
                               owned=True)
    data = None
    header = read_header(p, src)
    if header is not None:
        try:
            chosen, aux_names = resolve_columns(header, kw, man, src)
        except ScanError:
            chosen = None  # the careful route reports it, after checking the whole file
        if chosen is not None:
            data = read_csv_arrow(p, header, chosen["time"], [*chosen.values(), *aux_names])
    if data is not None:
        n = len(data[chosen["time"]])
        return Scan.from_table(data.pop, header, n, src, man, kw, angle_unit, signal_unit, nonfinite, owned=True)
    names, df = _read_csv(_read_bytes(p, src), src, lambda header: resolve_columns(header, kw, man, src)[0]["time"])

    def get(name):
        return df.iloc[:, names.index(name)]

    return Scan.from_table(get, names, len(df), src, man, kw, angle_unit, signal_unit, nonfinite, owned=True)


def _read_bytes(p: Path, src: str) -> bytes:
    try:
        return p.read_bytes()
    except OSError as err:
        raise ScanError(f"{src}: cannot read the file ({err.strerror or err})") from None


def _parquet_rows(p: Path, src: str) -> int:
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        return int(pq.read_metadata(p).num_rows)
    except (pa.ArrowException, OSError, ValueError, TypeError, OverflowError) as err:
        raise ScanError(f"{src}: not a readable Parquet file ({one_line(err)[:200]})") from None
