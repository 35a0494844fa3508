"""CSV logs: the checks on the raw bytes and the header, and the fast pyarrow parser.

:func:`read_csv_arrow` parses a CSV log with pyarrow (multi-threaded, C++), reading only the
columns the scan needs: the time column as text (so that long decimal Unix times keep every
digit; :mod:`nullfit.reading.arrow_columns` converts it) and the others as float64.  It never
raises: whenever the file is not a plain comma-separated table that pyarrow parses without
complaint — a bad byte, a row with the wrong number of fields, a cell that is not a number or
one of the missing-value spellings, trailing spaces after the last row — it returns None, and
:func:`nullfit.reading.files.read_scan` reads the file again the careful way (pandas), which
finds the first problem and names its line, row and column.  A blank line inside the data is a
row of missing values (dropped and counted) on both routes; blank lines at the end are not rows.
"""

from __future__ import annotations

import csv
from pathlib import Path

from ..core.errors import ScanError
from .columns import one_line, show

#: Spellings of a missing value that pyarrow's number parser does not accept by itself
#: (``nan``, ``NaN``, ``inf`` it parses); other spellings send the file down the careful route,
#: which accepts them case-insensitively (``columns.NA_TOKENS``).
ARROW_NULLS = ("", "NA", "na", "N/A", "n/a", "#N/A", "null", "NULL", "Null", "None", "none", "NONE", "<NA>", "nat",
               "NaT", "NAT")
#: Bytes read from the start of the file to find the header, and from its end to find blank lines.
HEAD_BYTES = 1 << 16


# ---------------------------------------------------------------------------------- raw text
def decode_text(raw: bytes, src: str) -> str:
    """The text of a CSV log, refusing UTF-16, invalid UTF-8 (naming line, row, offset) and NUL."""
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


def csv_header(text: str, src: str) -> list[str]:
    """The column names on the first line (stripped), refusing other separators and a missing header."""
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


def _trailing_blank_lines(path: Path, size: int) -> int | None:
    """Number of empty lines at the end of the file (None: trailing spaces, leave it to pandas)."""
    with open(path, "rb") as f:
        f.seek(max(0, size - HEAD_BYTES))
        tail = f.read()
    body = tail.rstrip(b"\r\n")
    if not body or body[-1:] in (b" ", b"\t", b"\x0b", b"\x0c"):
        return None
    ends = tail[len(body):].replace(b"\r\n", b"\n").replace(b"\r", b"\n")
    return max(0, ends.count(b"\n") - 1)


# ---------------------------------------------------------------------------------- the fast parser
def read_header(path: Path, src: str) -> list[str] | None:
    """The header of a CSV log from its first line, or None when the start of the file needs the careful
    route (a byte-order mark other than UTF-8's, bad bytes, a line longer than :data:`HEAD_BYTES`)."""
    with open(path, "rb") as f:
        head = f.read(HEAD_BYTES)
    nl = head.find(b"\n")
    if nl < 0 or head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return None
    try:
        first = head[:nl].decode("utf-8-sig")
    except UnicodeDecodeError:
        return None
    if "\x00" in first:
        return None
    try:
        return csv_header(first, src)
    except ScanError:
        return None


def _has_nul(col) -> bool:
    """Does any value of a pyarrow string column contain a NUL character?  (A scan of the bytes
    of the values, chunk by chunk; ``pyarrow.compute.match_substring`` is ten times slower.)"""
    import numpy as np

    for ch in col.chunks:
        if len(ch) == 0:
            continue
        offsets = np.frombuffer(ch.buffers()[1], dtype=np.int32)[ch.offset: ch.offset + len(ch) + 1]
        data = np.frombuffer(ch.buffers()[2], dtype=np.uint8)[offsets[0]: offsets[-1]]
        if data.size and not data.all():
            return True
    return False


def read_csv_arrow(path: Path, header: list[str], time_name: str, wanted: list[str]):
    """``{name: pyarrow.ChunkedArray}`` for the ``wanted`` columns (the time column as text), or None
    (see the module docstring)."""
    import pyarrow as pa
    import pyarrow.csv as pcsv

    size = path.stat().st_size
    trailing = _trailing_blank_lines(path, size)
    if trailing is None or any(header.count(w) != 1 for w in wanted):
        return None
    names = [f"c{i}" for i in range(len(header))]
    index = {w: names[header.index(w)] for w in wanted}
    others = [c for c in names if c not in index.values()]
    types = {c: pa.float64() for c in index.values()}
    types.update({c: pa.string() for c in others})  # validated as UTF-8, checked for NUL below
    # the time column as decimals with nine fractional digits (parsed exactly, in parallel with the
    # rest); when some cell is not such a decimal, as text (nan, exponents, more digits, ISO ...)
    for time_type in (pa.decimal128(20, 9), pa.string()):
        types[index[time_name]] = time_type
        try:
            table = pcsv.read_csv(
                path,
                read_options=pcsv.ReadOptions(skip_rows=1, column_names=names, block_size=1 << 22),
                parse_options=pcsv.ParseOptions(delimiter=",", quote_char='"', double_quote=True, escape_char=False,
                                                newlines_in_values=False, ignore_empty_lines=False),
                convert_options=pcsv.ConvertOptions(column_types=types,
                                                    include_columns=list(index.values()) + others,
                                                    null_values=list(ARROW_NULLS), strings_can_be_null=True,
                                                    quoted_strings_can_be_null=True, check_utf8=True))
            break
        except (pa.ArrowException, OSError, ValueError, UnicodeError):
            if time_type == pa.string():
                return None
    if trailing:
        if table.num_rows < trailing:
            return None
        table = table.slice(0, table.num_rows - trailing)
    for c in others + ([index[time_name]] if pa.types.is_string(table.column(index[time_name]).type) else []):
        if _has_nul(table.column(c)):
            return None
    out = {w: table.column(c) for w, c in index.items()}
    del table
    return out
