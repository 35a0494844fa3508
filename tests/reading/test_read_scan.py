"""Reading scan logs: CSV and Parquet round trips, column mapping, time bases and the epoch.

Reference values: absolute times are built as exact int64 nanoseconds and formatted by
independent routes (pandas.Timestamp.isoformat for ISO-8601 text, integer division for Unix
text); the epoch of 1.8e9 s is 2027-01-15T08:00:00Z (checked with GNU `date -u -d @1800000000`).
"""

import json
import os
import warnings

import numpy as np
import pandas as pd
import pytest

from nullfit.reading.files import read_scan
from nullfit.core.errors import ScanWarning
from nullfit.reading.manifest import Manifest
from nullfit.reading.scan import Scan

EPOCH = 1_800_000_000  # 2027-01-15T08:00:00Z (GNU date)
N = 16 * 6 + 1


def base_columns(n=N):
    ang = np.mod(np.arange(n) * 22.5, 360.0)
    y = 0.02 * np.cos(2 * np.deg2rad(ang - 30.0)) + np.arange(n) * 1e-3
    return ang, y


def write_csv(path, columns: dict):
    """Write columns (lists of already formatted text or floats) as a CSV log by hand."""
    names = list(columns)
    n = len(columns[names[0]])
    with open(path, "w", encoding="utf-8") as f:
        f.write(",".join(names) + "\n")
        for i in range(n):
            f.write(",".join(v if isinstance(v, str) else repr(float(v)) for v in (columns[k][i] for k in names)) + "\n")
    return path


def assert_same_scan(a: Scan, b: Scan, exact=True):
    for name in ("time", "angle", "signal", "turn", "turn_complete", "turn_sense", "rows"):
        x, y = getattr(a, name), getattr(b, name)
        assert x.dtype == y.dtype, name
        assert np.array_equal(x, y), name
    assert a.epoch_unix == b.epoch_unix
    assert a.unit == b.unit and a.dropped == b.dropped and a.n_reversals == b.n_reversals
    assert list(a.aux) == list(b.aux) and all(np.array_equal(a.aux[k], b.aux[k]) for k in a.aux)


# ------------------------------------------------------------------ round trips
@pytest.mark.parametrize("time_kind", ["relative", "unix_float", "unix_int"])
def test_csv_and_parquet_give_identical_scans(tmp_path, time_kind):
    ang, y = base_columns()
    if time_kind == "relative":
        t = np.arange(N) * 0.731 + 0.05
    elif time_kind == "unix_float":
        t = EPOCH + 0.1234567 + np.arange(N) * 0.731
    else:
        t = EPOCH + np.arange(N, dtype=np.int64) * 2
    df = pd.DataFrame({"time_s": t, "angle_deg": ang, "fringe": y, "temp_K": 293.0 + np.arange(N) * 1e-3})
    df.to_csv(tmp_path / "r.csv", index=False)
    df.to_parquet(tmp_path / "r.parquet", index=False)
    (tmp_path / "r.toml").write_text('[columns]\naux = ["temp_K"]\n')
    a = read_scan(tmp_path / "r.csv")
    b = read_scan(tmp_path / "r.parquet")
    c = Scan.from_frame(df, manifest=tmp_path / "r.toml")
    assert_same_scan(a, b)
    assert_same_scan(a, c)
    assert list(a.aux) == ["temp_K"]
    if time_kind != "relative":
        assert a.epoch_unix == EPOCH
    else:
        assert a.epoch_unix is None and np.array_equal(a.time, t)


def test_from_arrays_unix_floats_match_the_csv_reader(tmp_path):
    ang, y = base_columns()
    t = EPOCH + 0.1234567 + np.arange(N) * 0.731
    pd.DataFrame({"time_s": t, "angle_deg": ang, "fringe": y}).to_csv(tmp_path / "u.csv", index=False)
    assert_same_scan(read_scan(tmp_path / "u.csv"), Scan.from_arrays(t, ang, y))


# ------------------------------------------------------------------ time bases
def time_bases(tmp_path):
    """The same absolute times (ns exact) as ISO text, Unix text and relative text + start_utc."""
    ang, y = base_columns()
    start_ns = EPOCH * 10**9 + 250_000_001
    rel_ns = np.arange(N, dtype=np.int64) * 1_250_000_037 + 123
    abs_ns = start_ns + rel_ns
    iso = [pd.Timestamp(int(v), unit="ns", tz="UTC").isoformat().replace("+00:00", "Z") for v in abs_ns]
    unix = [f"{v // 10**9}.{v % 10**9:09d}" for v in abs_ns]
    rel = [f"{v // 10**9}.{v % 10**9:09d}" for v in rel_ns]
    paths = {
        "iso": write_csv(tmp_path / "iso.csv", {"time_s": iso, "angle_deg": ang, "fringe": y}),
        "unix": write_csv(tmp_path / "unix.csv", {"time_s": unix, "angle_deg": ang, "fringe": y}),
        "rel": write_csv(tmp_path / "rel.csv", {"time_s": rel, "angle_deg": ang, "fringe": y}),
    }
    start_iso = pd.Timestamp(start_ns, unit="ns", tz="UTC").isoformat()
    (tmp_path / "rel.toml").write_text(f'[time]\nstart_utc = "{start_iso}"\n')
    return paths, abs_ns


def test_iso_unix_and_relative_plus_start_agree(tmp_path):
    paths, abs_ns = time_bases(tmp_path)
    s_iso, s_unix, s_rel = (read_scan(paths[k]) for k in ("iso", "unix", "rel"))
    exact = (abs_ns - EPOCH * 10**9) / 1e9  # exact relative seconds, rounded once to float
    assert s_iso.epoch_unix == s_unix.epoch_unix == s_rel.epoch_unix == EPOCH
    # ISO and Unix text are converted through int64 nanoseconds: identical, and exact
    assert np.array_equal(s_iso.time, s_unix.time)
    assert np.array_equal(s_iso.time, exact)
    # relative text + start_utc adds two floats: claimed agreement well below 1 ns
    assert np.max(np.abs(s_rel.time - exact)) < 1e-12
    assert s_rel.meta.start_utc == "2027-01-15T08:00:00.250000001Z"


def test_epoch_is_the_whole_second_at_or_before_the_first_reading(tmp_path):
    paths, abs_ns = time_bases(tmp_path)
    s = read_scan(paths["iso"])
    assert s.epoch_unix * 10**9 <= abs_ns[0] < (s.epoch_unix + 1) * 10**9
    assert 0 <= s.time[0] < 1
    assert s.epoch_iso == "2027-01-15T08:00:00Z"


def test_large_epoch_keeps_sub_microsecond_relative_time(tmp_path):
    ang, y = base_columns()
    ns = EPOCH * 10**9 + np.arange(N, dtype=np.int64) * 250  # readings 250 ns apart near 1.8e9 s
    unix = [f"{v // 10**9}.{v % 10**9:09d}" for v in ns]
    s = read_scan(write_csv(tmp_path / "fast.csv", {"time_s": unix, "angle_deg": ang, "fringe": y}))
    assert np.max(np.abs(np.diff(s.time) - 250e-9)) < 1e-15
    # the naive route (float Unix seconds minus the epoch) cannot do this: float64 spacing at
    # 1.8e9 s is 2**-22 s ≈ 2.4e-7 s (IEEE 754 double, 52-bit mantissa)
    naive = np.array([float(u) for u in unix]) - EPOCH
    assert np.max(np.abs(np.diff(naive) - 250e-9)) > 1e-8


def test_iso_offsets_and_naive_timestamps_are_utc(tmp_path):
    ang, y = base_columns()
    base = pd.Timestamp("2026-03-14T21:05:00Z")
    ts = [base + pd.Timedelta(seconds=2 * i) for i in range(N)]
    z = [t.isoformat().replace("+00:00", "Z") for t in ts]
    plus1 = [t.tz_convert("Etc/GMT-1").isoformat() for t in ts]  # "+01:00" offsets
    naive = [t.tz_localize(None).isoformat() for t in ts]
    a = read_scan(write_csv(tmp_path / "z.csv", {"time_s": z, "angle_deg": ang, "fringe": y}))
    b = read_scan(write_csv(tmp_path / "p.csv", {"time_s": plus1, "angle_deg": ang, "fringe": y}))
    c = read_scan(write_csv(tmp_path / "n.csv", {"time_s": naive, "angle_deg": ang, "fringe": y}))
    assert "+01:00" in plus1[0]
    assert a.epoch_unix == b.epoch_unix == c.epoch_unix == int(base.timestamp())
    assert np.array_equal(a.time, b.time) and np.array_equal(a.time, c.time)


@pytest.mark.parametrize("tz", [None, "UTC", "Europe/Zurich"])
def test_parquet_timestamp_columns(tmp_path, tz):
    ang, y = base_columns()
    ts = pd.date_range("2026-03-14T21:05:00", periods=N, freq="1500ms", tz="UTC")
    col = ts.tz_convert(tz) if tz else ts.tz_localize(None)
    pd.DataFrame({"time_s": col, "angle_deg": ang, "fringe": y}).to_parquet(tmp_path / "ts.parquet")
    s = read_scan(tmp_path / "ts.parquet")
    assert s.epoch_unix == int(ts[0].timestamp())
    assert np.allclose(s.time, np.arange(N) * 1.5, rtol=0, atol=0)


def test_timedelta_time_column_is_relative():
    ang, y = base_columns()
    df = pd.DataFrame({"time_s": pd.to_timedelta(np.arange(N) * 0.5, unit="s"), "angle_deg": ang, "fringe": y})
    s = Scan.from_frame(df)
    assert s.epoch_unix is None and np.array_equal(s.time, np.arange(N) * 0.5)


# ------------------------------------------------------------------ columns and manifest
def test_keyword_mapping_and_radians(tmp_path):
    ang, y = base_columns()
    df = pd.DataFrame({"t": np.arange(N) * 1.0, "theta": np.deg2rad(ang), "dnu": y * 1e-15})
    df.to_csv(tmp_path / "k.csv", index=False)
    s = read_scan(tmp_path / "k.csv", time="t", angle="theta", signal="dnu", angle_unit="rad",
                  signal_unit="fractional")
    ref = read_scan(write_csv(tmp_path / "d.csv", {"time_s": np.arange(N) * 1.0, "angle_deg": ang, "fringe": y}))
    assert np.allclose(s.angle, ref.angle, rtol=0, atol=1e-12)
    assert s.unit == "fractional" and np.array_equal(s.turn, ref.turn)


def test_manifest_mapping_units_and_keyword_precedence(tmp_path):
    ang, y = base_columns()
    df = pd.DataFrame({"t": np.arange(N) * 1.0, "theta": np.deg2rad(ang), "beat": y * 1e-15,
                       "other": y, "tilt_urad": np.linspace(0, 1, N)})
    df.to_csv(tmp_path / "m.csv", index=False)
    (tmp_path / "m.toml").write_text(
        '[scan]\nrun_id = "R07"\n'
        '[columns]\ntime = "t"\nangle = "theta"\nsignal = "beat"\naux = ["tilt_urad"]\n'
        '[units]\nangle = "rad"\nsignal = "fractional"\n'
        '[notes]\ntext = "invented test scan"\n')
    s = read_scan(tmp_path / "m.csv")  # the manifest beside the log is found by its stem
    assert s.run_id == "R07" and s.unit == "fractional" and s.meta.notes == "invented test scan"
    assert np.allclose(s.signal, y * 1e-15) and list(s.aux) == ["tilt_urad"]
    assert np.allclose(np.rad2deg(s.angle[:3]), [0, 22.5, 45])
    # a keyword wins over the manifest
    k = read_scan(tmp_path / "m.csv", signal="other", signal_unit="fringe")
    assert np.allclose(k.signal, y) and k.unit == "fringe"
    # manifest=False ignores the file beside the log
    with pytest.raises(Exception, match="no such column"):
        read_scan(tmp_path / "m.csv", manifest=False)


def test_explicit_manifest_object_and_apparatus_signal_unit(tmp_path):
    ang, y = base_columns()
    df = pd.DataFrame({"time_s": np.arange(N) * 1.0, "angle_deg": ang, "fringe": y * 1e-15})
    df.to_csv(tmp_path / "x.csv", index=False)
    man = tmp_path / "elsewhere.toml"
    man.write_text('[apparatus]\narm_length_m = 11.0\nwavelength_m = 5.5e-7\nsignal = "fractional"\n')
    s = read_scan(tmp_path / "x.csv", manifest=man)
    assert s.unit == "fractional" and s.meta.apparatus["arm_length_m"] == 11.0
    s2 = read_scan(tmp_path / "x.csv", manifest=Manifest(units={"signal": "fractional"}))
    assert s2.unit == "fractional"


def test_header_names_are_stripped_and_extra_columns_ignored(tmp_path):
    ang, y = base_columns()
    p = tmp_path / "s.csv"
    with open(p, "w") as f:
        f.write(" time_s , angle_deg ,fringe, comment\n")
        for i in range(N):
            f.write(f"{i * 1.0}, {float(ang[i])!r} ,{float(y[i])!r},free text {i}\n")
    s = read_scan(p)
    assert s.n_samples == N and np.array_equal(s.signal, y)


def test_rows_and_dropped_rows_point_back_to_the_file(tmp_path):
    ang, y = base_columns()
    t = [repr(float(v)) for v in np.arange(N) * 1.0]
    sig = [repr(float(v)) for v in y]
    sig[4] = "nan"  # data row 5 = line 6
    sig[9] = ""  # data row 10 = line 11: an empty cell
    t[20] = "inf"
    p = write_csv(tmp_path / "d.csv", {"time_s": t, "angle_deg": ang, "fringe": sig})
    with pytest.warns(ScanWarning, match=r"d\.csv, row 5, column 'fringe': dropped 3 row"):
        s = read_scan(p)
    assert s.dropped_rows == 3 and s.n_samples == N - 3
    assert 5 not in s.rows and 10 not in s.rows and 21 not in s.rows
    lines = p.read_text().splitlines()
    for r in s.rows[:8]:  # data row r is line r + 1 (header not counted)
        assert float(lines[r].split(",")[2]) == s.signal[list(s.rows).index(r)]
    assert "dropped 3 row(s)" in str(s)


def test_blank_line_counts_as_a_dropped_row(tmp_path):
    ang, y = base_columns()
    text = "time_s,angle_deg,fringe\n" + "".join(
        (f"{i}.0,{float(ang[i])!r},{float(y[i])!r}\n" if i != 3 else "\n") for i in range(N)) + "\n\n"
    (tmp_path / "b.csv").write_text(text)
    with pytest.warns(ScanWarning, match="row 4"):
        s = read_scan(tmp_path / "b.csv")
    assert s.dropped_rows == 1 and s.rows[3] == 5


def test_reader_never_writes_to_its_inputs(tmp_path):
    ang, y = base_columns()
    df = pd.DataFrame({"time_s": np.arange(N) * 1.0, "angle_deg": ang, "fringe": y})
    df.loc[3, "fringe"] = np.nan
    df.to_csv(tmp_path / "ro.csv", index=False)
    (tmp_path / "ro.toml").write_text('[scan]\nrun_id = "ro"\n')
    before = {p.name: (p.read_bytes(), os.stat(p).st_mtime_ns) for p in tmp_path.iterdir()}
    copy = df.copy(deep=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ScanWarning)
        read_scan(tmp_path / "ro.csv")
        read_scan(df)
    after = {p.name: (p.read_bytes(), os.stat(p).st_mtime_ns) for p in tmp_path.iterdir()}
    assert before == after  # no file changed, none created
    pd.testing.assert_frame_equal(df, copy)


def test_frame_with_odd_index_and_integer_labels():
    ang, y = base_columns()
    df = pd.DataFrame({"time_s": np.arange(N) * 1.0, "angle_deg": ang, "fringe": y}, index=np.arange(N) * 7 + 100)
    s = Scan.from_frame(df)
    assert s.rows.tolist() == list(range(1, N + 1))
    df2 = pd.DataFrame({0: np.arange(N) * 1.0, 1: ang, 2: y})
    s2 = Scan.from_frame(df2, time="0", angle="1", signal="2")
    assert np.array_equal(s2.signal, y)


def test_object_columns_with_strings_and_numbers():
    ang, y = base_columns()
    df = pd.DataFrame({"time_s": [str(v) for v in np.arange(N) * 1.0], "angle_deg": list(ang.astype(object)),
                       "fringe": [f" {v!r} " for v in y.tolist()]})
    s = Scan.from_frame(df)
    assert np.array_equal(s.signal, y) and np.array_equal(s.time, np.arange(N) * 1.0)


def test_scan_describes_itself(tmp_path):
    paths, _ = time_bases(tmp_path)
    s = read_scan(paths["iso"])
    d = json.loads(s.to_json())
    assert d["epoch_unix"] == EPOCH and d["n_complete_turns"] == 6 and d["marks"] == 16
    assert "epoch (UTC)" in str(s) and "<table>" in s._repr_html_()
    assert repr(s).startswith("Scan('iso'")


def test_float_unix_seconds_are_read_as_their_shortest_decimal():
    # reference: Python's repr, the shortest string that round-trips (Python docs, "Floating
    # Point Arithmetic"), converted exactly to ns by decimal.Decimal
    from decimal import Decimal

    from nullfit.reading.timebase import float_seconds_to_ns

    rng = np.random.default_rng(11)
    v = np.concatenate([EPOCH + rng.uniform(0, 1e6, 3000), rng.uniform(1e8, 9e9, 3000),
                        np.round(EPOCH + rng.uniform(0, 1e5, 3000), 3)])
    ns, ok = float_seconds_to_ns(v)
    ref = [int(Decimal(repr(float(x))) * 10**9) for x in v]
    assert ok.all() and ns.tolist() == ref


def test_decimal_parquet_column(tmp_path):
    import pyarrow as pa
    import pyarrow.parquet as pq
    from decimal import Decimal

    ang, y = base_columns()
    ns = EPOCH * 10**9 + np.arange(N, dtype=np.int64) * 1_000_000_001
    t = [Decimal(f"{v // 10**9}.{v % 10**9:09d}") for v in ns]
    table = pa.table({"time_s": pa.array(t, pa.decimal128(20, 9)), "angle_deg": ang,
                      "fringe": pa.array([Decimal(repr(float(x))) for x in y], pa.decimal128(38, 20))})
    pq.write_table(table, tmp_path / "dec.parquet")
    s = read_scan(tmp_path / "dec.parquet")
    assert s.epoch_unix == EPOCH and np.array_equal(s.time, (ns - EPOCH * 10**9) / 1e9)
    assert np.allclose(s.signal, y, rtol=1e-15, atol=0)
