"""Reading a Parquet log in chunks (open_stream) gives exactly what read_scan gives.

The reference is read_scan on the same file (an independent route through the same rules: the
whole columns at once instead of chunks): every reading's time, unwrapped angle, signal, aux
value, source row and global turn number, and the per-turn completeness and sense, the direction
changes, the dropped rows, the gaps and the marks must be equal, for chunk sizes that put turn
boundaries, gaps, reversals, repeated start marks and dropped rows across chunk boundaries.
"""

import warnings

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from nullfit.core.errors import ScanError, ScanWarning
from nullfit.reading.files import read_scan
from nullfit.reading.stream import ScanStream, open_stream

EPOCH = 1.8e9


def continuous_log(n, rng):
    """72 readings per turn at 1.25 s, Unix float times; reversals, a 3-day gap, a bridged
    20-minute gap, NaN rows in every column; a tilt channel."""
    steps = np.full(n, 5.0) + rng.normal(0, 0.2, n)
    sign = np.ones(n)
    for a, b in [(n // 5, n // 5 + 7000), (n // 2, n // 2 + 333), (4 * n // 5, n)]:
        sign[a:b] = -1
    theta = 3.0 + np.cumsum(steps * sign)
    t = EPOCH + np.arange(n) * 1.25
    t[n // 3:] += 3 * 86400.0
    t[2 * n // 3:] += 1200.0
    y = 0.01 * np.cos(2 * np.deg2rad(theta)) + rng.normal(0, 0.01, n)
    tilt = np.cumsum(rng.normal(size=n)) * 0.1
    df = pd.DataFrame({"time_s": t, "angle_deg": np.mod(theta, 360.0), "fringe": y, "tilt": tilt})
    for col, k in [("fringe", 60), ("angle_deg", 7), ("time_s", 5), ("tilt", 30)]:
        df.loc[rng.choice(n, k, replace=False), col] = np.nan
    # NaN rows right at the boundaries of the chunk sizes tried below
    for c in (4099, 65536, 61, 1000):
        df.loc[[i for i in (c - 1, c, 2 * c - 1) if i < n], "fringe"] = np.nan
    return df


def marks_log(turns, rng):
    """16 marks, 4 readings per mark with ±0.01° encoder jitter, the start mark read again at the
    end of every turn, the table turning back every 7 turns; relative times (68 readings per turn:
    15 000 turns are a million rows)."""
    seq, sgn, pos = [], 1, 0
    for k in range(turns):
        if k and k % 7 == 0:
            sgn = -sgn
        for i in range(17):
            seq += [pos + sgn * i * 22.5] * 4
        pos += sgn * 360.0
    theta = np.array(seq) + rng.uniform(-0.01, 0.01, len(seq))
    t = np.arange(theta.size) * 0.25
    df = pd.DataFrame({"t": t, "theta": np.mod(theta, 360.0), "dnu": 1e-15 * np.cos(np.arange(theta.size))})
    df.loc[rng.choice(theta.size, 40, replace=False), "dnu"] = np.nan
    return df


def write(path, df, row_group_size=50_000):
    pq.write_table(pa.Table.from_pandas(df, preserve_index=False), path, row_group_size=row_group_size)
    return path


def read_quiet(fn):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ScanWarning)
        return fn()


def assert_stream_equals_scan(stream: ScanStream, scan):
    parts = list(stream)
    for name in ("time", "angle", "signal", "turn", "rows"):
        got = np.concatenate([getattr(c, name) for c in parts])
        assert np.array_equal(got, getattr(scan, name)), name
    for k in scan.aux:
        assert np.array_equal(np.concatenate([c.aux[k] for c in parts]), scan.aux[k]), k
    assert np.array_equal(stream.turn_complete, scan.turn_complete)
    assert np.array_equal(stream.turn_sense, scan.turn_sense)
    assert stream.n_reversals == scan.n_reversals and stream.reversal_rows == scan.reversal_rows
    assert stream.dropped == scan.dropped and stream.n_samples == scan.n_samples
    assert stream.marks == scan.marks and stream.epoch_unix == scan.epoch_unix
    assert stream.partial_turn_rows == scan.partial_turn_rows and stream.unit == scan.unit
    assert [(g.row, g.after_row, g.duration_s) for g in stream.gaps] == \
        [(g.row, g.after_row, g.duration_s) for g in scan.gaps]
    assert [g.turns_lost for g in stream.gaps] == pytest.approx([g.turns_lost for g in scan.gaps], rel=1e-9)
    assert list(stream.aux_names) == list(scan.aux)


@pytest.fixture(scope="module")
def logs(tmp_path_factory):
    d = tmp_path_factory.mktemp("stream")
    rng = np.random.default_rng(2024)
    big = continuous_log(1_000_000, rng)
    return {"big": write(d / "big.parquet", big),
            "small": write(d / "small.parquet", continuous_log(12_000, rng), 3000),
            "marks": write(d / "marks.parquet", marks_log(15_000, rng), 50_000),
            "small marks": write(d / "small_marks.parquet", marks_log(160, rng), 3_000), "dir": d}


@pytest.mark.parametrize("chunk_rows", [4099, 65536, 1 << 20])
def test_a_million_rows_in_chunks_equal_the_whole_read(logs, chunk_rows):
    scan = read_quiet(lambda: read_scan(logs["big"], aux=["tilt"]))
    assert scan.n_reversals == 5 and len(scan.gaps) == 2 and scan.dropped_rows > 100  # the log has it all
    stream = read_quiet(lambda: open_stream(logs["big"], chunk_rows=chunk_rows, aux=["tilt"]))
    assert_stream_equals_scan(stream, scan)


@pytest.mark.parametrize("chunk_rows", [7, 61, 1000])
def test_very_small_chunks(logs, chunk_rows):
    scan = read_quiet(lambda: read_scan(logs["small"], aux=["tilt"]))
    assert scan.n_reversals == 3 and len(scan.gaps) == 2 and scan.dropped_rows > 0
    assert_stream_equals_scan(read_quiet(lambda: open_stream(logs["small"], chunk_rows=chunk_rows, aux=["tilt"])),
                              scan)


@pytest.mark.parametrize("log,chunk_rows,reversals", [("marks", 4096, 2142), ("marks", 65536, 2142),
                                                      ("small marks", 13, 22), ("small marks", 68, 22)])
def test_marks_with_the_start_mark_read_again_and_reversals(logs, log, chunk_rows, reversals):
    kw = dict(time="t", angle="theta", signal="dnu", signal_unit="fractional")
    scan = read_quiet(lambda: read_scan(logs[log], **kw))
    assert scan.marks == 16 and scan.n_reversals == reversals and scan.epoch_unix is None
    assert_stream_equals_scan(read_quiet(lambda: open_stream(logs[log], chunk_rows=chunk_rows, **kw)), scan)


def test_the_stream_agrees_with_the_in_memory_adapter(logs):
    scan = read_quiet(lambda: read_scan(logs["small"], aux=["tilt"]))
    a, b = ScanStream.from_scan(scan, chunk_rows=999), read_quiet(lambda: open_stream(logs["small"], chunk_rows=999,
                                                                                      aux=["tilt"]))
    for name in ("turn", "angle", "time", "rows"):
        assert np.array_equal(np.concatenate([getattr(c, name) for c in a]),
                              np.concatenate([getattr(c, name) for c in b])), name
    assert a.reversal_rows == b.reversal_rows and a.partial_turn_rows == b.partial_turn_rows
    assert np.array_equal(a.turn_complete, b.turn_complete) and a.dropped == b.dropped


def test_iterating_twice_gives_the_same_chunks(logs):
    s = read_quiet(lambda: open_stream(logs["small"], chunk_rows=3000))
    first = [c.turn.copy() for c in s]
    assert all(np.array_equal(x, y.turn) for x, y in zip(first, s))


def test_warning_about_dropped_rows_is_the_same(logs):
    with pytest.warns(ScanWarning) as a:
        read_scan(logs["small"])
    with pytest.warns(ScanWarning) as b:
        open_stream(logs["small"], chunk_rows=500)
    assert str(a[0].message) == str(b[0].message)


def bad_logs(d):
    base = continuous_log(30_000, np.random.default_rng(5))
    base = base.dropna().reset_index(drop=True)
    out = {}
    df = base.copy()
    df.loc[20_000, "time_s"] = df.loc[19_999, "time_s"]
    out["duplicate time"] = (df, {})
    df = base.copy()
    df.loc[25_000, "fringe"] = np.nan
    out["nonfinite raise"] = (df, {"nonfinite": "raise"})
    df = base.copy()
    df.loc[22_000, "time_s"] = 2e10
    out["time too large"] = (df, {})
    out["missing aux"] = (base, {"aux": ["tlt"]})
    out["less than a turn"] = (base.iloc[:60], {})
    df = base.copy()
    df["fringe"] = 0.5
    out["constant"] = (df, {})
    df = base.copy()
    df["angle_deg"] = np.deg2rad(df["angle_deg"])
    out["radians as degrees"] = (df, {})
    df = base.copy()
    df.loc[12_000, "angle_deg"] = 1e15
    out["absurd angle"] = (df, {})
    df = base.copy().astype({"time_s": str})
    df.loc[17_000, "time_s"] = "soon"
    out["text in time"] = (df, {})
    return {k: (write(d / f"bad{i}.parquet", df, 4000), kw) for i, (k, (df, kw)) in enumerate(out.items())}


def test_bad_logs_fail_with_the_same_message(logs):
    for name, (path, kw) in bad_logs(logs["dir"]).items():
        msgs = []
        for fn in (lambda: read_scan(path, **kw), lambda: open_stream(path, chunk_rows=3001, **kw)):
            with pytest.raises(ScanError) as info:
                read_quiet(fn)
            msgs.append(str(info.value))
        assert msgs[0] == msgs[1], name
        assert "\n" not in msgs[0] and str(path) in msgs[0], name


def test_csv_logs_do_not_stream(tmp_path):
    p = tmp_path / "log.csv"
    continuous_log(2000, np.random.default_rng(0)).to_csv(p, index=False)
    with pytest.raises(ScanError, match="only Parquet logs are read in chunks"):
        open_stream(p)
    with pytest.raises(ScanError, match="chunk_rows"):
        open_stream(tmp_path / "x.parquet", chunk_rows=0)
