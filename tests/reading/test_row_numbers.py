"""Row numbers implied when no row was dropped (nullfit.reading.row_numbers.ImpliedRows) index
like the int64 array 1..n they stand for (numpy's own indexing of that array is the reference),
and a scan read without drops answers ``rows`` and ``turn`` as a scan with them stored would."""

import numpy as np
import pytest

from nullfit.reading.row_numbers import ImpliedRows, row_numbers
from nullfit.reading.scan import Scan


@pytest.mark.parametrize("key", [0, 6, -1, -7, slice(None), slice(2, 5), slice(None, None, 3), slice(-3, None),
                                 [0, 3, 6], np.array([6, 0, -2])])
def test_implied_rows_index_like_the_array(key):
    ref = np.arange(1, 8, dtype=np.int64)
    got = ImpliedRows(7)[key]
    np.testing.assert_array_equal(got, ref[key])
    assert np.asarray(got).dtype == np.int64


def test_implied_rows_take_boolean_masks_and_refuse_bad_indices():
    ref = np.arange(1, 8, dtype=np.int64)
    mask = np.array([True, False, False, True, True, False, True])
    np.testing.assert_array_equal(ImpliedRows(7)[mask], ref[mask])
    np.testing.assert_array_equal(np.asarray(ImpliedRows(7)), ref)
    for bad in (7, -8, [0, 7]):
        with pytest.raises(IndexError):
            ImpliedRows(7)[bad]
    with pytest.raises(IndexError):
        ImpliedRows(7)[mask[:5]]
    with pytest.raises(ValueError):
        row_numbers(np.arange(3), 4)


def test_a_scan_without_drops_stores_no_rows_and_answers_them_on_demand():
    n = 720
    t = np.arange(n) * 0.5
    ang = np.mod(np.arange(n) * 5.0, 360.0)
    y = 0.01 * np.cos(2 * np.deg2rad(ang)) + 1e-3 * np.random.default_rng(0).normal(size=n)
    s = Scan.from_arrays(t, ang, y)
    assert s.kept_rows is None
    np.testing.assert_array_equal(s.rows, np.arange(1, n + 1))
    np.testing.assert_array_equal(s.row_of(np.array([0, 10, n - 1])), [1, 11, n])
    # the turn of every reading from where the turns start: 72 readings per turn, from 0°
    np.testing.assert_array_equal(s.turn, np.arange(n) // 72)
    np.testing.assert_array_equal(s.turn_counts, np.full(10, 72))
    y2 = y.copy()
    y2[[5, 100]] = np.nan
    with pytest.warns(Warning):
        s2 = Scan.from_arrays(t, ang, y2)
    assert s2.kept_rows is not None and s2.rows.size == n - 2 and not {6, 101} & set(s2.rows.tolist())
    np.testing.assert_array_equal(s2.row_of(slice(4, 6)), [5, 7])
