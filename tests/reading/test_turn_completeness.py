"""Which turns are complete when the table does not turn at one steady rate.

The truth in every test is the construction: the table angle θ(t) is a known function, the
readings are taken at known times, so which turns the log covers from mark to mark (complete) and
which it enters or leaves part-way (partial) is known, and so is every reading's turn,
floor((θ + 0.1°) / 360°) (a reading within the stop tolerance before the mark lies on it, as the
module docstring of nullfit.reading.turn_numbering says).  A complete turn must never be flagged partial because the table turned faster
or slower in it than elsewhere; a turn the log starts or stops in part-way must stay partial.
"""

import numpy as np
import pytest

from nullfit.reading.scan import Scan
from nullfit.reading.turn_numbering import MARK_TOL_DEG, number_turns

PERIOD = 90.0  # s per turn (nominal)


def sinusoidal_rate(turns, per_turn, depth, start_deg=0.0, stop_deg=None, phase=0.0):
    """Readings at equal time steps of a table whose rate is ω(1 + depth·cos(ωt + phase)):
    θ(t) = start + 360·t/T + depth·(360/2π)·(sin(ωt + phase) − sin(phase)).  The log runs from
    ``start_deg`` to the last reading before ``stop_deg`` (default: ``turns`` whole turns)."""
    stop = 360.0 * turns if stop_deg is None else stop_deg
    t = np.arange(int(1.6 * turns * per_turn) + 10) * PERIOD / per_turn
    w = 2 * np.pi / PERIOD
    theta = start_deg + 360.0 * t / PERIOD + depth * 360.0 / (2 * np.pi) * (np.sin(w * t + phase) - np.sin(phase))
    keep = theta < stop
    return t[keep], theta[keep]


def jittered_periods(turns, per_turn, jitter, rng, offset=0.0):
    """Readings at equal time steps (T/per_turn, the first ``offset`` steps after the mark) of a
    table that makes every turn at its own steady rate, its period drawn uniformly within ±jitter
    of nominal; the log ends at the last reading before the end of the last turn."""
    ends = np.cumsum(PERIOD * (1 + rng.uniform(-jitter, jitter, turns)))
    starts = np.concatenate(([0.0], ends[:-1]))
    t = (offset + np.arange(int(2 * ends[-1] / PERIOD * per_turn))) * PERIOD / per_turn
    t = t[t < ends[-1]]
    k = np.searchsorted(ends, t, side="right")
    theta = 360.0 * (k + (t - starts[k]) / (ends[k] - starts[k]))
    return t, theta


def check(t, theta, expect_complete):
    tr = number_turns(np.deg2rad(np.mod(theta, 360.0)), time=t)
    # a reading within the stop tolerance (0.1° here: steps of 5° and more) before the mark lies on it
    truth = np.floor((theta + MARK_TOL_DEG) / 360.0).astype(int)
    _, expected_turn = np.unique(truth, return_inverse=True)
    assert np.array_equal(tr.turn, expected_turn)  # counts exact: every reading in its true turn
    assert tr.complete.tolist() == expect_complete


@pytest.mark.parametrize("per_turn", [72, 16])
@pytest.mark.parametrize("depth", [0.1, 0.3])
@pytest.mark.parametrize("phase", [0.0, 1.0, 2.5, 4.0])
def test_rate_varying_within_the_turn_keeps_every_complete_turn(per_turn, depth, phase):
    # starts on the mark, stops at the last reading before the 8th crossing: 8 complete turns
    t, theta = sinusoidal_rate(8, per_turn, depth, phase=phase)
    check(t, theta, [True] * 8)


@pytest.mark.parametrize("seed", range(6))
@pytest.mark.parametrize("per_turn", [72, 16])
def test_period_jitter_of_30_percent_keeps_every_complete_turn(seed, per_turn):
    rng = np.random.default_rng(seed)
    t, theta = jittered_periods(10, per_turn, 0.30, rng, offset=rng.uniform(0, 0.9))
    check(t, theta, [True] * 10)


@pytest.mark.parametrize("depth", [0.1, 0.3])
def test_partial_edges_stay_partial_with_varying_rate(depth):
    # starts 100° after the mark and stops at 250°: first and last turn partial, 6 complete between
    t, theta = sinusoidal_rate(8, 72, depth, start_deg=100.0, stop_deg=7 * 360.0 + 250.0)
    check(t, theta, [False] + [True] * 6 + [False])


@pytest.mark.parametrize("seed", range(4))
def test_partial_edges_stay_partial_with_period_jitter(seed):
    rng = np.random.default_rng(seed)
    t, theta = jittered_periods(10, 72, 0.30, rng)
    keep = (theta >= 45.0) & (theta < 9 * 360.0 + 300.0)  # enters turn 0 at 45°, leaves turn 9 at 300°
    check(t[keep], theta[keep], [False] + [True] * 8 + [False])


def test_one_missing_reading_at_the_edge_is_partial():
    # steady rate, 16 readings per turn; the log starts one reading after the mark plus a quarter
    # step: the reading that belongs at +0.25 step is missing, so the first turn is partial
    step = 22.5
    theta = 1.25 * step + np.arange(5 * 16) * step
    t = np.arange(theta.size) * PERIOD / 16
    check(t, theta, [False] + [True] * 4 + [False])


def test_scan_keeps_the_complete_edge_turns_of_a_rate_modulated_log():
    t, theta = sinusoidal_rate(6, 72, 0.3, phase=1.0)
    y = 0.01 * np.cos(2 * np.deg2rad(theta)) + 1e-4 * t
    scan = Scan.from_arrays(t, np.mod(theta, 360.0), y)
    assert scan.n_complete_turns == 6 and scan.partial_turn_rows == 0
