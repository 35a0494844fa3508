"""`demodulate`: the vectorised per-turn fit equals a plain per-turn loop of numpy.linalg.lstsq.

The reference is the obvious implementation: for every turn, ``numpy.linalg.lstsq`` on the
columns ``1, (t − t_mid), …, cos kθ, sin kθ``; σ from ``RSS/(n − p) · (XᵀX)⁻¹``.
"""

import warnings

import numpy as np
import pytest

from nullfit.reading.scan import Scan
from nullfit.fitting.engine import TurnEngine
from nullfit.fitting.demodulate import demodulate


def assert_matches(df, ref, rtol=1e-10):
    assert len(df) == len(ref["turn"])
    for col, v in ref.items():
        np.testing.assert_allclose(df[col].to_numpy(dtype=float), v, rtol=rtol, atol=0, err_msg=col)


def test_columns_exactly(make_arrays):
    s = Scan.from_arrays(*make_arrays(np.random.default_rng(1), ar=0.0)[:3])
    df = demodulate(s, harmonics=(1, 2))
    assert list(df.columns) == ["turn", "time_mid_s", "n_samples", "c1", "s1", "sigma_c1", "sigma_s1",
                                "c2", "s2", "sigma_c2", "sigma_s2", "resid_rms", "complete"]
    assert df["complete"].all()
    # the partial first/last turns are left out and counted
    assert df.attrs["excluded"]["partial turns"]["turns"] == 2
    assert df.attrs["excluded"]["partial turns"]["rows"] == s.n_samples - int(df["n_samples"].sum())


@pytest.mark.parametrize("harmonics", [(1, 2), (2,), (1, 2, 3)])
def test_matches_per_turn_lstsq_loop(loop_reference, make_arrays, harmonics):
    s = Scan.from_arrays(*make_arrays(np.random.default_rng(2), ar=0.0)[:3])
    assert_matches(demodulate(s, harmonics=harmonics), loop_reference(s, harmonics))


@pytest.mark.parametrize("degree", [0, 2])
def test_matches_loop_other_per_turn_degrees(loop_reference, make_arrays, degree):
    s = Scan.from_arrays(*make_arrays(np.random.default_rng(3), ar=0.0)[:3])
    assert_matches(demodulate(s, drift=f"per-turn:{degree}"), loop_reference(s, degree=degree))


def test_matches_loop_at_marks_with_repeated_start_mark(loop_reference):
    # 16 marks, the reference mark read again at the end of every turn (a drift reference)
    M, N = 16, 9
    rng = np.random.default_rng(4)
    ang = np.concatenate([np.r_[np.arange(M) * 360.0 / M, 360.0] + 360.0 * i for i in range(N)])
    t = np.arange(ang.size) * 3.0
    th = np.deg2rad(ang)
    y = 1e-3 * t + 0.2 * np.cos(2 * th - 0.3) + 0.01 * rng.normal(size=t.size)
    s = Scan.from_arrays(t, np.mod(ang, 360.0), y)
    df = demodulate(s)
    assert (df["n_samples"] == M + 1).all() and len(df) == N
    assert_matches(df, loop_reference(s))


def test_matches_loop_when_the_fit_explains_almost_everything(loop_reference, make_arrays):
    """Noise 1e-7 against a 0.3 signal: y'y/RSS ≈ 1e12, where RSS = y'y − β'X'y would lose
    every digit; the engine then forms explicit residuals."""
    s = Scan.from_arrays(*make_arrays(np.random.default_rng(5), ar=0.0, noise=1e-7)[:3])
    assert_matches(demodulate(s), loop_reference(s), rtol=1e-9)


def test_partial_turns_included_on_request(loop_reference, make_arrays):
    s = Scan.from_arrays(*make_arrays(np.random.default_rng(6), ar=0.0, extra=37)[:3])
    df = demodulate(s, complete_only=False)
    ref = loop_reference(s, complete_only=False)
    assert (~df["complete"]).sum() == 2
    assert_matches(df, ref, rtol=1e-9)


def test_chunking_does_not_change_the_numbers(make_arrays):
    s = Scan.from_arrays(*make_arrays(np.random.default_rng(7), ar=0.0, n_turns=30)[:3])
    a = TurnEngine(s, (1, 2)).demodulate().frame()
    b = TurnEngine(s, (1, 2), chunk_rows=70).demodulate().frame()  # ~1 turn per chunk
    np.testing.assert_allclose(b.drop(columns="complete").to_numpy(float), a.drop(columns="complete").to_numpy(float),
                               rtol=1e-12, atol=0)


def test_invariant_to_epoch_angle_turn_and_offset(make_arrays):
    t, ang, y, _ = make_arrays(np.random.default_rng(8), ar=0.0)
    a = demodulate(Scan.from_arrays(t, ang, y))
    # 1.8e9 s + multiples of 0.5 s are exact in float64; +1e6 rounds y to ulp(1e6) ≈ 1.2e-10
    b = demodulate(Scan.from_arrays(t + 1.8e9, ang + 360.0, y + 1e6))
    for col in ["c1", "s1", "c2", "s2"]:
        np.testing.assert_allclose(b[col], a[col], rtol=1e-9, err_msg=col)
    np.testing.assert_allclose(b["time_mid_s"], a["time_mid_s"], rtol=0, atol=1e-9)


def test_aux_correction_equals_loop_on_corrected_signal(loop_reference, make_arrays):
    rng = np.random.default_rng(9)
    t, ang, y, _ = make_arrays(rng, ar=0.0)
    tilt = np.cumsum(rng.normal(size=t.size))
    s = Scan.from_arrays(t, ang, y + 0.03 * tilt, aux={"tilt": tilt})
    df = demodulate(s, aux=["tilt"], aux_coef=[0.025])
    assert_matches(df, loop_reference(s, y=s.signal - 0.025 * tilt), rtol=1e-9)


def test_refusals(make_arrays):
    s = Scan.from_arrays(*make_arrays(np.random.default_rng(10), ar=0.0)[:3])
    with pytest.raises(ValueError, match="per-turn"):
        demodulate(s, drift="poly:3")
    with pytest.raises(ValueError, match="aux_coef"):
        demodulate(s, aux=["x"])
    with pytest.raises(ValueError, match="not in the scan"):
        demodulate(s, aux=["x"], aux_coef=[1.0])


def test_turns_with_too_few_readings_are_nan_not_wrong(make_arrays):
    # continuous sampling with 8 readings per turn, harmonics up to 3: p = 8 → no dof
    t, ang, y, _ = make_arrays(np.random.default_rng(11), ar=0.0, per_turn=8, n_turns=6, extra=0, start_deg=0.0)
    s = Scan.from_arrays(t, ang, y)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        df = demodulate(s, harmonics=(1, 2, 3))
    assert df["c2"].isna().all()
