"""The Arrow fast paths of the reader give exactly what the careful (pandas) route gives.

* CSV logs are parsed by pyarrow and fall back to the careful route whenever pyarrow is not sure:
  the two routes must agree on every table (same Scan, or the same one-line message), which is
  checked here on random near-valid tables and on long decimal Unix times.
* Exact epochs: a decimal Unix time with up to nine fractional digits gives its exact integer
  nanoseconds, through both routes and from Parquet text; the reference is integer arithmetic on
  the digits.  Floats give their shortest decimal representation; the reference is Python's repr
  converted with decimal.Decimal (Python docs, "Floating Point Arithmetic").
* The chunked turn numbering gives the same turns whatever the chunk sizes.
* Whole-log medians come from a log-binned histogram: numpy.median is the independent reference
  (to the bin width, 2**-10 of an octave).
"""

import csv
import io
import warnings
from decimal import Decimal

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from nullfit.core.errors import ScanError, ScanWarning
from nullfit.reading import files
from nullfit.reading.files import read_scan
from nullfit.reading.histogram import LogHistogram
from nullfit.reading.timebase import float_seconds_to_ns
from nullfit.reading.turn_numbering import number_turns

EPOCH = 1_800_000_000
FUZZ = settings(max_examples=60, deadline=None, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])


def outcome(path, **kw):
    """Everything a read gives: the scan's arrays and facts and the warnings, or the error."""
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        try:
            s = read_scan(path, manifest=False, **kw)
        except ScanError as err:
            return ("error", str(err))
    arrays = tuple(getattr(s, k).tobytes() for k in ("time", "angle", "signal", "turn", "turn_complete", "rows"))
    return ("scan", arrays, s.epoch_unix, s.dropped, s.n_reversals,
            tuple(str(w.message) for w in rec if issubclass(w.category, ScanWarning)))


def both_routes(path, monkeypatch, **kw):
    """``(fast, careful, fast route taken?)`` for one CSV file."""
    taken = []
    real = files.read_csv_arrow

    def spy(*a, **k):
        out = real(*a, **k)
        taken.append(out is not None)
        return out

    monkeypatch.setattr(files, "read_csv_arrow", spy)
    fast = outcome(path, **kw)
    monkeypatch.setattr(files, "read_csv_arrow", lambda *a, **k: None)
    careful = outcome(path, **kw)
    monkeypatch.setattr(files, "read_csv_arrow", real)
    return fast, careful, bool(taken and taken[0])


CELLS = ["nan", "NaN", "inf", "-inf", "NA", "", " ", "null", "None", "1e400", "1,5", "abc", " 3 ", "1e-320",
         "2026-03-14T21:05:00Z", "1800000000.123456789", "+7", "0x10", "<NA>"]


@st.composite
def near_valid(draw):
    n = draw(st.integers(20, 80))
    step = draw(st.sampled_from([22.5, 10.0, 5.0]))
    ang = np.mod(np.arange(n) * step, 360.0)
    unix = draw(st.booleans())
    digits = draw(st.integers(0, 9))
    t0 = EPOCH if unix else 0
    ns = np.arange(n, dtype=np.int64) * draw(st.sampled_from([1_250_000_000, 1_000_000_001, 333_333_333]))
    times = [f"{t0 + v // 10**9}.{v % 10**9:09d}"[: len(str(t0 + v // 10**9)) + 1 + digits].rstrip(".") for v in ns]
    rows = [[times[i], repr(float(ang[i])), repr(float(np.cos(2 * np.deg2rad(ang[i])) + 1e-3 * i))] for i in range(n)]
    for _ in range(draw(st.integers(0, 3))):
        rows[draw(st.integers(0, n - 1))][draw(st.integers(0, 2))] = draw(st.sampled_from(CELLS))
    if draw(st.booleans()):
        rows.insert(draw(st.integers(1, n - 1)), [""])  # a blank line inside the data
    return rows, draw(st.integers(0, 2))  # trailing blank lines


@FUZZ
@given(table=near_valid())
def test_fast_and_careful_csv_routes_agree(tmp_path, monkeypatch, table):
    rows, trailing = table
    buf = io.StringIO()
    buf.write("time_s,angle_deg,fringe\n")
    for r in rows:
        buf.write(",".join(r) + "\n")
    p = tmp_path / "f.csv"
    p.write_text(buf.getvalue() + "\n" * trailing)
    fast, careful, _ = both_routes(p, monkeypatch)
    assert fast == careful


def test_plain_logs_take_the_fast_route(tmp_path, monkeypatch):
    n = 16 * 6 + 1
    ang = np.mod(np.arange(n) * 22.5, 360.0)
    df = pd.DataFrame({"time_s": EPOCH + 0.25 + np.arange(n) * 1.25, "angle_deg": ang, "fringe": np.cos(np.arange(n))})
    df.loc[5, "fringe"] = np.nan
    df.to_csv(tmp_path / "a.csv", index=False)
    with open(tmp_path / "a.csv", "a") as f:
        f.write("\n\n")  # trailing blank lines are not rows
    fast, careful, taken = both_routes(tmp_path / "a.csv", monkeypatch)
    assert taken and fast == careful and fast[0] == "scan"


@pytest.mark.parametrize("digits", [0, 3, 6, 9])
def test_decimal_unix_times_keep_every_nanosecond(tmp_path, monkeypatch, digits):
    n = 16 * 6 + 1
    rng = np.random.default_rng(digits)
    frac = rng.integers(0, 10**digits, n) if digits else np.zeros(n, np.int64)
    whole = EPOCH + np.arange(n) * 2
    ns = whole * 10**9 + frac * 10 ** (9 - digits)  # the exact value, by integer arithmetic
    text = [f"{w}.{f:0{digits}d}" if digits else str(w) for w, f in zip(whole, frac)]
    ang = np.mod(np.arange(n) * 22.5, 360.0)
    p = tmp_path / "u.csv"
    with open(p, "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["time_s", "angle_deg", "fringe"])
        w.writerows([[text[i], ang[i], np.cos(i)] for i in range(n)])
    expected = (ns - EPOCH * 10**9) / 1e9  # exact relative ns, rounded once to float
    fast, careful, taken = both_routes(p, monkeypatch)
    assert taken and fast == careful
    s = read_scan(p)
    assert s.epoch_unix == EPOCH and np.array_equal(s.time, expected)
    # the same text in a Parquet string column
    pq.write_table(pa.table({"time_s": text, "angle_deg": ang, "fringe": np.cos(np.arange(n))}), tmp_path / "u.parquet")
    assert np.array_equal(read_scan(tmp_path / "u.parquet").time, expected)


def test_float_unix_times_equal_their_shortest_decimal_by_either_route():
    rng = np.random.default_rng(3)
    inside = np.concatenate([EPOCH + rng.uniform(0, 1e7, 60000), np.round(EPOCH + rng.uniform(0, 1e6, 10000), 2),
                             EPOCH + np.arange(10000) * 1.25, [2.0**30, 2.0**31 - 2.0**-22]])  # 2004-2038
    for v in (inside, np.concatenate([inside, rng.uniform(1e8, 9e9, 3000)])):  # by lookup; generic
        ref = [int(Decimal(repr(float(x))) * 10**9) for x in v]
        ns, ok = float_seconds_to_ns(v)
        assert ok.all() and ns.tolist() == ref


@st.composite
def angle_logs(draw):
    """Segments of steady or paused rotation in either sense, with encoder jitter."""
    rng = np.random.default_rng(draw(st.integers(0, 2**31)))
    parts, pos, sgn = [], draw(st.floats(0, 360)), draw(st.sampled_from([1, -1]))
    for _ in range(draw(st.integers(1, 4))):
        step = draw(st.sampled_from([1.0, 5.0, 22.5]))
        k = int(draw(st.floats(0.3, 3.0)) * 360 / step)
        per = draw(st.integers(1, 4))
        seg = pos + sgn * np.repeat(np.arange(1, k + 1) * step, per) + rng.uniform(-0.01, 0.01, k * per)
        parts.append(seg)
        pos, sgn = seg[-1], -sgn
    theta = np.concatenate(parts)
    return np.deg2rad(np.mod(theta, 360.0)), np.arange(theta.size) * 0.5


@settings(max_examples=40, deadline=None, derandomize=True, database=None)
@given(log=angle_logs(), chunk=st.sampled_from([1, 2, 5, 17, 100, 1000]))
def test_turn_numbering_does_not_depend_on_the_chunks(log, chunk):
    a, t = log
    whole = number_turns(a, time=t)
    part = number_turns(a, time=t, chunk_rows=chunk)
    for name in ("turn", "unwrapped", "complete", "sense", "reversal_index"):
        assert np.array_equal(getattr(whole, name), getattr(part, name)), name
    assert whole.n_reversals == part.n_reversals


@pytest.mark.parametrize("dist", ["lognormal", "uniform", "integers"])
def test_histogram_median_matches_numpy_to_the_bin_width(dist):
    rng = np.random.default_rng(7)
    x = {"lognormal": rng.lognormal(0, 3, 100_001), "uniform": rng.uniform(0.5, 2.0, 100_001),
         "integers": rng.integers(1, 50, 100_001).astype(float)}[dist]
    h = LogHistogram()
    for part in np.array_split(x, 37):  # counts add: chunks give the same histogram as the whole
        h.add(part)
    whole = LogHistogram()
    whole.add(x)
    assert h.median() == whole.median() and np.array_equal(h.counts, whole.counts)
    # numpy.median as the reference (odd count: the middle value); bins are 2**-10 of an octave
    assert h.median() == pytest.approx(np.median(x), rel=2.0**-10)
    above = 1.0
    assert h.median(above=above) == pytest.approx(np.median(x[x > above * (1 + 2.0**-10)]), rel=2.0**-9)


def test_histogram_counts_zeros_apart():
    h = LogHistogram()
    h.add(np.array([0.0, 0.0, 0.0, 1.0, 2.0]))
    assert h.median() == 0.0 and h.median(above=0.0) == pytest.approx(1.0, rel=2.0**-10)
    assert LogHistogram().median() is None


@pytest.mark.parametrize("where_", ["time", "extra"])
def test_nul_bytes_anywhere_are_refused_as_binary(tmp_path, where_):
    n = 40
    lines = ["time_s,angle_deg,fringe,comment"] + [f"{EPOCH + i}.5,{i * 22.5 % 360},{np.cos(i)!r},ok" for i in range(n)]
    lines[7] = lines[7].replace(".5,", ".5\x00,") if where_ == "time" else lines[7] + "\x00"
    p = tmp_path / "nul.csv"
    p.write_bytes(("\n".join(lines) + "\n").encode())
    with pytest.raises(ScanError, match=r"nul\.csv, line 8: the file contains NUL characters"):
        read_scan(p)
