"""Fuzzing the reader: any table (random columns and cells — NaN, inf, huge numbers, strings,
empty cells, timestamps, broken quoting, raw bytes) gives a valid `Scan` or a one-line
`ScanError`, nothing else (no other exception, no RuntimeWarning).  About 130 examples."""

import csv
import io
import json
import warnings

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from nullfit.reading.files import read_scan
from nullfit.core.errors import ScanError, ScanWarning
from nullfit.reading.scan import Scan

FUZZ = settings(max_examples=40, deadline=None, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])

NAMES = ["time_s", "angle_deg", "fringe", "t", "x", "", "fringe", " time_s"]
TOKENS = ["nan", "NaN", "inf", "-inf", "NA", "", " ", "1e400", "-1e400", "1,5", "0x10", "1_000", " 3 ", "true",
          "2026-03-14T21:05:00Z", "2026-03-14", "1800000000.123456789", "9e18", "--1", "1e-320", '"', ";", "é"]

cells = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(min_value=-1e300, max_value=1e300),
    st.integers(min_value=-(10**30), max_value=10**30),
    st.sampled_from(TOKENS),
    st.text(max_size=6),
)


def check(outcome_of):
    """Run the reader; accept a valid Scan or a one-line ScanError, and nothing else."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ScanWarning)
        warnings.simplefilter("error", RuntimeWarning)
        try:
            scan = outcome_of()
        except ScanError as err:
            assert "\n" not in str(err) and str(err)
            return None
    assert isinstance(scan, Scan)
    t = scan.time
    assert t.size >= 1 and np.all(np.isfinite(t)) and np.all(np.diff(t) > 0)
    assert np.all(np.isfinite(scan.angle)) and np.all(np.isfinite(scan.signal))
    assert scan.n_complete_turns >= 1 and scan.turn.size == t.size
    assert np.all(np.diff(scan.rows) > 0) and scan.rows[0] >= 1
    json.loads(scan.to_json())
    str(scan)
    return scan


def to_csv_text(names, rows, quoting):
    if quoting:
        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(names)
        w.writerows(rows)
        return buf.getvalue()
    # naive join: commas, quotes and newlines inside cells break the layout on purpose
    return "\n".join(",".join(map(str, r)) for r in [names] + rows) + "\n"


@st.composite
def random_tables(draw):
    ncol = draw(st.integers(1, 5))
    names = draw(st.lists(st.one_of(st.sampled_from(NAMES), st.text(max_size=5)), min_size=ncol, max_size=ncol))
    nrow = draw(st.integers(0, 25))
    rows = draw(st.lists(st.lists(cells, min_size=ncol, max_size=ncol), min_size=nrow, max_size=nrow))
    return names, rows


@st.composite
def near_valid_tables(draw):
    """A valid scan, then a few cells replaced by random ones: exercises the paths to a Scan."""
    n = draw(st.integers(2, 60))
    step = draw(st.sampled_from([22.5, 10.0, 1.0, 45.0, 200.0]))
    ang = np.arange(n) * step
    modulo = draw(st.booleans())
    angle = np.mod(ang, 360.0) if modulo else ang
    time = np.arange(n) * draw(st.sampled_from([1.0, 0.001, 1.8e9]))
    if time[-1] > 1e9:
        time = 1.8e9 + np.arange(n) * 0.5
    signal = np.cos(2 * np.deg2rad(ang)) + np.arange(n) * 1e-3
    rows = [[float(a), float(b), float(c)] for a, b, c in zip(time, angle, signal)]
    for _ in range(draw(st.integers(0, 3))):
        i, j = draw(st.integers(0, n - 1)), draw(st.integers(0, 2))
        rows[i][j] = draw(cells)
    return ["time_s", "angle_deg", "fringe"], rows


@FUZZ
@given(table=st.one_of(random_tables(), near_valid_tables()), quoting=st.booleans())
def test_any_csv_table_gives_a_scan_or_a_scan_error(tmp_path, table, quoting):
    names, rows = table
    p = tmp_path / "fuzz.csv"
    p.write_text(to_csv_text(names, rows, quoting), encoding="utf-8", errors="surrogatepass")
    check(lambda: read_scan(p, manifest=False))


@FUZZ
@given(table=st.one_of(random_tables(), near_valid_tables()), as_text=st.booleans())
def test_any_parquet_table_and_frame_gives_a_scan_or_a_scan_error(tmp_path, table, as_text):
    names, rows = table
    uniq = [f"{n}" if names.index(n) == i else f"{n}.{i}" for i, n in enumerate(names)]
    df = pd.DataFrame(rows, columns=uniq) if rows else pd.DataFrame({n: [] for n in uniq})
    check(lambda: Scan.from_frame(df))  # mixed-type object columns as they are
    if as_text:
        df = df.astype(str)
    else:  # keep numeric columns numeric where pyarrow can store them; text otherwise
        df = df.apply(lambda c: pd.to_numeric(c, errors="coerce") if c.map(
            lambda v: isinstance(v, float)).all() else c.astype(str))
    p = tmp_path / "fuzz.parquet"
    df.to_parquet(p, index=False)
    check(lambda: read_scan(p, manifest=False))


@settings(max_examples=50, deadline=None, derandomize=True, database=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(raw=st.one_of(st.binary(max_size=300),
                     st.binary(max_size=100).map(lambda b: b"time_s,angle_deg,fringe\n" + b),
                     st.binary(max_size=100).map(lambda b: b"PAR1" + b)))
def test_any_bytes_give_a_scan_or_a_scan_error(tmp_path, raw):
    p = tmp_path / "fuzz.csv"
    p.write_bytes(raw)
    check(lambda: read_scan(p, manifest=False))


def test_fuzz_strategies_reach_scans(tmp_path):
    """The near-valid tables do produce Scans (so the fuzz tests exercise both outcomes)."""
    n = 40
    ang = np.arange(n) * 22.5
    rows = [[float(i), float(a % 360), float(np.cos(np.deg2rad(2 * a)))] for i, a in enumerate(ang)]
    rows[5][2] = "nan"
    p = tmp_path / "ok.csv"
    p.write_text(to_csv_text(["time_s", "angle_deg", "fringe"], rows, True))
    scan = check(lambda: read_scan(p, manifest=False))
    assert scan is not None and scan.dropped_rows == 1
