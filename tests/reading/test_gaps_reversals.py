"""Gaps in time and changes of direction are reported on the Scan (fields, summary, JSON).

Truth: the construction of each log (where the time jumps, by how much, where the table turns
back).  The turns a gap loses are the gap's length over the table's period (3 days at 90 s per
turn is 2880 turns, by arithmetic).
"""

import json

import numpy as np
import pandas as pd
import pytest

from nullfit.reading.events import GAP_FACTOR, Gap
from nullfit.reading.files import read_scan
from nullfit.reading.scan import Scan

EPOCH = 1_800_000_000
DAY = 86400.0


def hour_log(jump_at=1441, jump=3 * DAY, start_deg=0.0):
    """A 1-hour log of 40 turns (90 s per turn, 72 readings per turn, 1.25 s apart); the time
    jumps by ``jump`` before data row ``jump_at`` (the table's angle goes on as if nothing
    happened)."""
    n = 40 * 72
    t = EPOCH + np.arange(n) * 1.25
    t[jump_at - 1:] += jump
    ang = np.mod(start_deg + np.arange(n) * 5.0, 360.0)
    y = 0.01 * np.cos(2 * np.deg2rad(ang)) + np.random.default_rng(1).normal(0, 1e-3, n)
    return pd.DataFrame({"time_s": t, "angle_deg": ang, "fringe": y})


def test_a_three_day_jump_is_a_gap_with_its_rows_size_and_lost_turns(tmp_path):
    df = hour_log()
    df.to_parquet(tmp_path / "j.parquet")
    scan = read_scan(tmp_path / "j.parquet")
    assert len(scan.gaps) == 1
    g = scan.gaps[0]
    assert (g.row, g.after_row) == (1441, 1440)
    assert g.duration_s == pytest.approx(3 * DAY + 1.25, abs=1e-6)  # exact float arithmetic of the epochs
    assert g.start_s == pytest.approx(1439 * 1.25, abs=1e-9)
    # missing time (gap minus one regular interval) at 4°/s: 3 days / 90 s per turn
    assert g.turns_lost == pytest.approx(3 * DAY / 90.0, rel=1e-6)
    text = str(scan)
    assert "gaps in time" in text and "gap of 259201 s before row 1441 (after row 1440)" in text
    assert "2.88e+03 turn(s) missing" in text
    d = json.loads(scan.to_json())
    assert d["gaps"] == [g.to_dict()] and d["gaps"][0]["row"] == 1441


def test_no_gap_in_a_regular_log_nor_between_the_marks_of_a_paused_table():
    t = np.arange(40 * 72) * 1.25
    ang = np.mod(t * 4.0, 360.0)
    assert Scan.from_arrays(t, ang, np.cos(np.deg2rad(2 * ang)) + 1e-4 * t).gaps == ()
    # 16 marks, 20 readings 0.1 s apart at each, then a 3 s move: the moves are 30 median intervals
    # long, but they are the table's rhythm, not gaps
    k = np.repeat(np.arange(16 * 6), 20)
    t = k * (3.0 + 19 * 0.1) + np.tile(np.arange(20) * 0.1, 16 * 6)
    ang = np.mod(k * 22.5, 360.0)
    s = Scan.from_arrays(t, ang, np.cos(np.deg2rad(2 * ang)) + 1e-4 * t)
    assert s.gaps == () and s.marks == 16


def test_gap_threshold_is_ten_typical_intervals():
    # a step of 9 intervals is sampling irregularity; one of 11 intervals is a gap
    base = np.arange(40 * 72) * 1.25
    for factor, expected in [(9.0, 0), (11.0, 1)]:
        t = base.copy()
        t[500:] += (factor - 1) * 1.25
        ang = np.mod(np.arange(t.size) * 5.0, 360.0)
        s = Scan.from_arrays(t, ang, np.cos(np.deg2rad(2 * ang)))
        assert len(s.gaps) == expected
    assert GAP_FACTOR == 10.0


def test_reversal_rows_and_summary():
    up = np.arange(0, 2.5 * 360, 2.0)
    down = up[-1] - np.arange(2.0, 2.5 * 360 + 2, 2.0)
    true = np.concatenate([up, down, down[-1] + np.arange(2.0, 722.0, 2.0)])
    t = np.arange(true.size) * 0.5
    s = Scan.from_arrays(t, np.mod(true, 360.0), np.cos(np.deg2rad(2 * true)) + 1e-4 * t)
    assert s.n_reversals == 2
    # the first reading after each turning point: row up.size + 1 and the row after the lowest angle
    assert s.reversal_rows == (up.size + 1, up.size + down.size + 1)
    text = str(s)
    assert f"first reading after each: row(s) {up.size + 1}, {up.size + down.size + 1}" in text
    assert json.loads(s.to_json())["reversal_rows"] == list(s.reversal_rows)


def test_dropped_rows_and_partial_turn_rows_are_named_apart(tmp_path):
    # starts mid-turn (half a turn partial at each end) and has two NaN rows
    df = hour_log(jump=0.0, start_deg=180.0)
    df.loc[[100, 2000], "fringe"] = np.nan  # both inside complete turns
    df.to_csv(tmp_path / "p.csv", index=False)
    with pytest.warns(Warning):
        s = read_scan(tmp_path / "p.csv")
    assert s.dropped_rows == 2
    assert s.partial_turn_rows == 36 + 36  # the first and last half turns (72 readings), counted apart
    d = s.to_dict()
    assert d["dropped_rows"] == 2 and d["partial_turn_rows"] == 72
    text = str(s)
    assert "rows dropped while reading" in text and "rows in partial turns" in text


def test_the_fit_excludes_exactly_the_partial_turn_rows_the_scan_reports():
    from nullfit.fitting.fit import fit_scan  # cross-check with the next stage

    df = hour_log(jump=0.0, start_deg=180.0)
    s = Scan.from_frame(df)
    fit = fit_scan(s)
    assert fit.excluded_rows == s.partial_turn_rows == 72
    assert fit.scan_dropped_rows == s.dropped_rows == 0


def test_gap_record_is_small_and_frozen():
    g = Gap(5, 4, 1.0, 100.0, None)
    with pytest.raises(AttributeError):
        g.row = 6
    assert g.to_dict()["turns_lost"] is None and "row 5" in g.describe()
