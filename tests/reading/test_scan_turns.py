"""Turn numbering from raw angles (nullfit.reading.turn_numbering.number_turns) and its use in Scan.

The truth in every test is the construction of the synthetic angle sequence: we know how many
turns the table made, where it started and stopped, and when it reversed.
"""

import warnings

import numpy as np
import pytest

from nullfit.core.errors import ScanError
from nullfit.reading.scan import Scan
from nullfit.reading.turn_numbering import REVERSAL_HYSTERESIS_DEG, number_turns


def turns_of(angle_deg, **kw):
    return number_turns(np.deg2rad(np.asarray(angle_deg, dtype=float)), **kw)


def counts(tr):
    """Readings per turn."""
    return np.bincount(tr.turn, minlength=tr.complete.size)


# ------------------------------------------------------------------ continuous sampling
def test_modulo_forward_whole_turns_match_floor_of_true_angle():
    true = np.arange(0, 5 * 360, 1.0)  # 5 turns, 1° steps, starts on the mark
    tr = turns_of(np.mod(true, 360))
    # independent reference: the turn of a continuous angle is floor(angle / 360)
    assert np.array_equal(tr.turn, np.floor(true / 360).astype(int))
    assert tr.complete.tolist() == [True] * 5
    assert tr.sense.tolist() == [1] * 5
    assert tr.n_reversals == 0
    assert np.allclose(np.rad2deg(tr.unwrapped), true)


def test_modulo_backward_sense():
    true = -np.arange(0, 4 * 360, 2.0)  # the table turns in the negative sense
    tr = turns_of(np.mod(true, 360))  # logged as 0, 358, 356, ...
    assert tr.sense.tolist() == [-1] * 4
    assert tr.complete.all() and tr.n_reversals == 0
    assert np.array_equal(tr.turn, np.floor(-true / 360).astype(int))


def test_signed_modulo_and_continuous_give_same_turns():
    true = 37.0 + np.arange(0, 6 * 360, 3.0)
    a = turns_of(true)  # continuous log
    b = turns_of(np.mod(true, 360))  # [0, 360)
    c = turns_of(np.mod(true + 180, 360) - 180)  # (-180, 180]
    assert np.array_equal(a.turn, b.turn) and np.array_equal(a.turn, c.turn)
    assert np.array_equal(a.complete, b.complete) and np.array_equal(a.complete, c.complete)
    assert np.allclose(np.rad2deg(a.unwrapped) - true, 0)
    assert np.allclose(np.diff(np.rad2deg(c.unwrapped)), 3.0)


def test_continuous_log_with_steps_over_half_a_turn_is_not_unwrapped():
    # a continuous log (range > 360°) is taken as is: a 270° step stays a forward step
    true = np.array([0, 90, 360, 450, 720, 810, 1080, 1170, 1440.0])
    tr = turns_of(true)
    assert np.allclose(np.rad2deg(tr.unwrapped), true)
    assert tr.n_reversals == 0


def test_partial_first_and_last_turns_are_flagged_and_counted():
    true = np.arange(100, 100 + 4 * 360, 2.0)  # starts at 100°, three whole turns between, stops at 98°
    tr = turns_of(np.mod(true, 360))
    assert tr.complete.tolist() == [False, True, True, True, False]
    assert np.array_equal(tr.turn, np.floor(true / 360).astype(int))
    t = np.arange(true.size) * 1.0
    y = np.cos(2 * np.deg2rad(true)) + 0.01 * t
    scan = Scan.from_arrays(t, np.mod(true, 360), y)
    assert scan.n_turns == 5 and scan.n_complete_turns == 3
    assert scan.complete_rows().sum() == 3 * 180
    assert "turns (partial)" in str(scan) and scan.to_dict()["n_turns"] == 5


def test_turn_starting_a_fraction_of_a_step_after_the_mark_is_complete():
    # first reading 0.4° after the mark with 1° steps: no gap larger than one step
    true = 0.4 + np.arange(0, 3 * 360, 1.0)
    tr = turns_of(np.mod(true, 360))
    assert tr.complete.tolist() == [True, True, True]


def test_last_reading_exactly_on_the_mark_closes_the_turn():
    true = np.arange(0, 2 * 360 + 1, 10.0)  # ends at 720° exactly
    tr = turns_of(np.mod(true, 360))
    assert counts(tr).tolist() == [36, 37]
    assert tr.complete.tolist() == [True, True]


# ------------------------------------------------------------------ discrete marks
def marks_sequence(turns=4, marks=16, repeat_start=True, start_turn_with_mark0=True):
    seq = []
    for k in range(turns):
        idx = list(range(marks)) if start_turn_with_mark0 or k == 0 else list(range(1, marks))
        if repeat_start:
            idx = idx + [marks]  # the start mark read again at the end of the turn
        seq += [(k * marks + i) * 360.0 / marks for i in idx]
    return np.array(seq)


def test_marks_with_start_mark_read_again():
    true = marks_sequence(turns=4, marks=16, repeat_start=True)  # 0..15, 0 | 0..15, 0 | ...
    tr = turns_of(np.mod(true, 360))
    assert counts(tr).tolist() == [17] * 4  # 16 azimuths + the repeated start mark
    assert tr.complete.all() and tr.n_reversals == 0
    # every turn begins and ends on the reference mark
    ang = np.mod(true, 360)
    for k in range(4):
        sel = ang[tr.turn == k]
        assert sel[0] == 0 and sel[-1] == 0
    y = np.cos(2 * np.deg2rad(true)) + np.arange(true.size) * 1e-3
    scan = Scan.from_arrays(np.arange(true.size), np.mod(true, 360), y)
    assert scan.marks == 16 and scan.n_complete_turns == 4


def test_marks_with_shared_start_mark():
    # 0..15, 0, 1..15, 0, ...: the single start-mark reading opens the next turn, the last one
    # (end of log) closes the last turn
    true = marks_sequence(turns=3, marks=16, repeat_start=False, start_turn_with_mark0=True)
    true = np.append(true, 3 * 360.0)
    tr = turns_of(np.mod(true, 360))
    assert counts(tr).tolist() == [16, 16, 17]
    assert tr.complete.all()


def test_marks_without_repeat_are_complete():
    true = np.arange(0, 5 * 360, 22.5)  # 16 marks, no repeat
    tr = turns_of(np.mod(true, 360))
    assert counts(tr).tolist() == [16] * 5
    assert tr.complete.all()


def test_marks_missing_one_azimuth_at_the_end_is_partial():
    true = np.arange(0, 3 * 360 - 22.5, 22.5)  # the last turn stops one mark short
    tr = turns_of(np.mod(true, 360))
    assert tr.complete.tolist() == [True, True, False]


# ------------------------------------------------------------------ encoder jitter (hysteresis)
def jittered_marks(turns, marks, per_mark, jitter_deg, rng):
    """The table pauses at every mark; the encoder reads ``per_mark`` times with uniform jitter."""
    true = np.repeat(np.arange(turns * marks) * 360.0 / marks, per_mark)
    noisy = true + rng.uniform(-jitter_deg, jitter_deg, true.size)
    return true, noisy


def test_jitter_at_marks_is_not_a_reversal():
    rng = np.random.default_rng(1)
    true, noisy = jittered_marks(turns=5, marks=16, per_mark=6, jitter_deg=0.01, rng=rng)
    tr = turns_of(np.mod(noisy, 360))
    assert tr.n_reversals == 0
    assert tr.complete.tolist() == [True] * 5
    assert counts(tr).tolist() == [16 * 6] * 5
    # every pause at the reference mark, even straddling 359.99°/0.01°, opens its turn whole
    assert np.array_equal(tr.turn, np.floor((true + 1e-9) / 360).astype(int))
    scan = Scan.from_arrays(np.arange(noisy.size), np.mod(noisy, 360), np.cos(2 * np.deg2rad(true)) + rng.normal(0, 0.1, true.size))
    assert scan.marks == 16 and scan.n_reversals == 0


def test_without_hysteresis_the_same_jitter_would_count_as_reversals():
    # shows that the previous test can fail: the jitter does move the angle backwards
    rng = np.random.default_rng(1)
    _, noisy = jittered_marks(turns=5, marks=16, per_mark=6, jitter_deg=0.01, rng=rng)
    assert turns_of(np.mod(noisy, 360), hysteresis_deg=0.0).n_reversals > 50
    assert REVERSAL_HYSTERESIS_DEG >= 0.1  # far above a ±0.01° encoder jitter


def test_jitter_with_start_mark_read_again_splits_the_double_pause():
    rng = np.random.default_rng(7)
    per = 4
    seq = []
    for k in range(3):
        for i in range(17):  # 0..15 and the start mark again; next turn starts at mark 0 again
            seq += [(k * 16 + i) * 22.5] * per
    true = np.array(seq)
    noisy = true + rng.uniform(-0.01, 0.01, true.size)
    tr = turns_of(np.mod(noisy, 360))
    assert tr.n_reversals == 0
    assert counts(tr).tolist() == [17 * per] * 3
    assert tr.complete.all()


def test_small_retreat_is_not_a_reversal_but_a_large_one_is():
    fwd = np.arange(0, 2 * 360, 1.0)
    wobble = np.concatenate([fwd[:400], fwd[400] - np.array([0.3, 0.6, 0.5]), fwd[400:]])
    assert turns_of(np.mod(wobble, 360)).n_reversals == 0
    back = np.concatenate([fwd[:400], fwd[399] - np.arange(1, 4) * 1.0, fwd[396:]])
    assert turns_of(np.mod(back, 360)).n_reversals == 2  # 3° back, then forward again


# ------------------------------------------------------------------ change of direction
def test_change_of_direction():
    up = np.arange(0, 2.5 * 360, 2.0)  # 0 .. 898°
    down = up[-1] - np.arange(2.0, 2.5 * 360 + 2, 2.0)  # back to -2°
    true = np.concatenate([up, down])
    tr = turns_of(np.mod(true, 360))
    assert tr.n_reversals == 1
    # forward: turns [0, 360), [360, 720) complete, [720, 898] partial;
    # backward: (898, 720] partial, (720, 360] and (360, 0] complete, the last reading (-2°) partial
    assert tr.sense.tolist() == [1, 1, 1, -1, -1, -1, -1]
    assert tr.complete.tolist() == [True, True, False, False, True, True, False]
    assert np.allclose(np.rad2deg(tr.unwrapped), true)
    # the turning point belongs to the forward segment
    assert tr.turn[up.size - 1] == 2 and tr.turn[up.size] == 3


def test_reversal_at_a_jittering_mark():
    rng = np.random.default_rng(3)
    fwd = np.repeat(np.arange(0, 2 * 360 + 22.5, 22.5), 5)  # 0..720 at 16 marks, 5 readings per stop
    bwd = np.repeat(720 - np.arange(22.5, 2 * 360 + 22.5, 22.5), 5)
    true = np.concatenate([fwd, bwd])
    noisy = true + rng.uniform(-0.01, 0.01, true.size)
    tr = turns_of(np.mod(noisy, 360))
    assert tr.n_reversals == 1
    assert tr.sense.tolist() == [1, 1, -1, -1]
    assert tr.complete.all()
    assert np.all(tr.turn[: fwd.size] <= 1) and np.all(tr.turn[fwd.size:] >= 2)


def test_back_and_forth_scan_counts_every_reversal():
    one = np.arange(0, 720 + 1, 5.0)
    true = np.concatenate([one, one[::-1][1:], one[1:], one[::-1][1:]])
    tr = turns_of(np.mod(true, 360))
    assert tr.n_reversals == 3
    assert tr.complete.sum() == 8  # two complete turns in each of the four sweeps


# ------------------------------------------------------------------ edge cases
def test_empty_and_single():
    assert turns_of([]).turn.size == 0
    one = turns_of([12.0])
    assert one.turn.tolist() == [0] and one.complete.tolist() == [False]


def test_table_that_never_moves_has_no_complete_turn():
    tr = turns_of(np.full(50, 45.0) + np.random.default_rng(0).uniform(-0.01, 0.01, 50))
    assert not tr.complete.any() and tr.n_reversals == 0


def test_scan_from_arrays_less_than_a_turn_is_refused():
    ang = np.arange(0, 300, 1.0)
    with pytest.raises(ScanError, match="less than one complete turn"):
        Scan.from_arrays(np.arange(ang.size), ang, np.cos(np.deg2rad(ang)))


def test_scan_arrays_are_read_only():
    ang = np.arange(0, 720, 10.0)
    scan = Scan.from_arrays(np.arange(ang.size), ang, np.sin(2 * np.deg2rad(ang)))
    with pytest.raises(ValueError):
        scan.signal[0] = 1.0


def test_from_arrays_unix_time_moves_into_epoch():
    ang = np.arange(0, 720, 10.0)
    t = 1_800_000_000.25 + np.arange(ang.size) * 0.5
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        scan = Scan.from_arrays(t, ang, np.sin(2 * np.deg2rad(ang)))
    assert scan.epoch_unix == 1_800_000_000
    assert scan.time[0] == 0.25 and np.allclose(np.diff(scan.time), 0.5, rtol=0, atol=1e-12)
    assert scan.epoch_iso == "2027-01-15T08:00:00Z"  # 1.8e9 s; checked with `date -u -d @1800000000` (GNU date)


# ------------------------------------------------------------------ gaps in time
def steady_log(gap=(600.0, 780.0), period=80.0, per_turn=64, turns=12):
    t = np.arange(turns * per_turn) * period / per_turn
    true = 360.0 * t / period + 3.0
    keep = ~((t >= gap[0]) & (t < gap[1]))
    return t[keep], true[keep]


def test_gap_longer_than_half_a_turn_is_bridged_with_time():
    t, true = steady_log()  # 180 s gap = 2.25 turns while the table kept turning
    tr = number_turns(np.deg2rad(np.mod(true, 360)), time=t)
    assert np.allclose(np.rad2deg(tr.unwrapped), true)
    _, expected = np.unique(np.floor(true / 360), return_inverse=True)
    assert np.array_equal(tr.turn, expected)
    # the turns on either side of the gap are partial; the others complete
    assert tr.complete.tolist() == [True] * 7 + [False, False] + [True] * 2  # turn 8 has no reading


def test_without_time_the_gap_loses_turns():
    t, true = steady_log()
    tr = number_turns(np.deg2rad(np.mod(true, 360)))
    assert not np.allclose(np.rad2deg(tr.unwrapped), true)  # the shortest way: 90° instead of 810°


def test_table_that_stopped_during_the_gap_is_not_bridged():
    t, true = steady_log()
    after = t >= 780.0
    true = true.copy()
    true[after] -= 810.0 - 5.625  # the table stood still during the gap, then went on
    tr = number_turns(np.deg2rad(np.mod(true, 360)), time=t)
    assert np.allclose(np.rad2deg(tr.unwrapped), true)


def test_scan_from_arrays_bridges_gaps():
    t, true = steady_log()
    y = np.cos(2 * np.deg2rad(true)) + 1e-3 * t
    scan = Scan.from_arrays(t, np.mod(true, 360), y)
    assert np.allclose(scan.angle_deg, true) and scan.n_turns == 11
