"""Streamed fits (`nullfit.fitting.stream`) equal the in-memory fit of the same scan.

The reference is the in-memory path (`fit_scan`, `demodulate`), itself checked against a per-turn
numpy lstsq loop and statsmodels in the other fitting tests.  A `Scan` is served in chunks of
many sizes (`ScanStream.from_scan`): chunk boundaries split turns, a chunk may hold less than a
turn, and the logs have partial turns, gaps, reversals, marks and dropped rows.
"""

import warnings

import numpy as np
import pandas as pd
import pytest

from nullfit.core.errors import AnalysisError
from nullfit.fitting.demodulate import demodulate
from nullfit.fitting.fit import fit_scan
from nullfit.fitting.stream import demodulate_stream, fit_path, fit_stream
from nullfit.reading.scan import Scan
from nullfit.reading.stream import ScanStream

CHUNKS = [1, 7, 40, 41, 333, 10 ** 7]


def close(a, b, rtol=1e-12):
    """Equal to ``rtol`` of the larger of the value and the scale of the whole array (a value
    that happens to be ~0 would otherwise demand an absolute agreement below rounding)."""
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    scale = np.nanmax(np.abs(b)) if np.isfinite(b).any() else 0.0
    np.testing.assert_array_equal(np.isnan(a), np.isnan(b))
    np.testing.assert_allclose(a, b, rtol=rtol, atol=rtol * scale, equal_nan=True)


def same_frame(a: pd.DataFrame, b: pd.DataFrame):
    assert list(a.columns) == list(b.columns)
    assert a.attrs == b.attrs
    for col in a.columns:
        if a[col].dtype == bool or col in ("turn", "n_samples"):
            assert np.array_equal(a[col].to_numpy(), b[col].to_numpy()), col
        else:
            close(a[col].to_numpy(float), b[col].to_numpy(float))


def same_fit(f, g):
    """Every field of two `ScanFit`s agrees (floats to 1e-12)."""
    close(f.coef, g.coef)
    close(f.cov, g.cov)
    close(f.chi2, g.chi2)
    close(f.residual_rms, g.residual_rms)
    for name in ("harmonics", "dof", "n_samples", "n_turns", "dropped_rows", "scan_dropped_rows", "excluded_rows",
                 "excluded_turns", "drift", "errors", "chi2_dof_n", "block_turns", "unit", "source", "aux_names"):
        assert getattr(f, name) == getattr(g, name), name
    assert dict(f.excluded) == dict(g.excluded)
    assert dict(f.settings) == dict(g.settings)
    assert f.notes == g.notes
    same_frame(f.per_turn, g.per_turn)
    for k in f.harmonics:
        close(f.harmonic(k).turns, g.harmonic(k).turns)


def quiet(fn, *a, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn(*a, **kw)


# ----------------------------------------------------------------------------- logs
def continuous(make_arrays, seed=0, **kw):
    """Partial first and last turns, drift, AR(1) noise."""
    return quiet(Scan.from_arrays, *make_arrays(np.random.default_rng(seed), **kw)[:3])


def with_gap(make_arrays):
    t, ang, y, _ = make_arrays(np.random.default_rng(1), n_turns=14)
    keep = np.ones(t.size, bool)
    keep[150:215] = False  # 65 readings missing: one turn cut, the angle jumps ahead
    return quiet(Scan.from_arrays, t[keep], ang[keep], y[keep])


def with_reversals():
    """Forward 4.5 turns, back 3 turns, forward again 3.2 turns (continuous 9° steps)."""
    rng = np.random.default_rng(2)
    ang = np.concatenate([np.arange(0, 1620, 9.0), 1620 - np.arange(9, 1080, 9.0), 540 + np.arange(9, 1161, 9.0)])
    t = np.arange(ang.size) * 0.5
    th = np.deg2rad(ang)
    y = 1e-3 * t + 0.3 * np.cos(2 * th) - 0.1 * np.sin(2 * th) + 0.05 * np.cos(th) + 0.01 * rng.normal(size=t.size)
    s = quiet(Scan.from_arrays, t, np.mod(ang, 360.0), y)
    assert s.n_reversals == 2 and not s.turn_complete.all()
    return s


def at_marks():
    """16 marks, the start mark read again at the end of each turn, two unreadable signals."""
    M, N = 16, 11
    rng = np.random.default_rng(3)
    ang = np.concatenate([np.r_[np.arange(M) * 360.0 / M, 360.0] + 360.0 * i for i in range(N)])
    t = np.arange(ang.size) * 3.0
    th = np.deg2rad(ang)
    y = 1e-3 * t + 0.2 * np.cos(2 * th - 0.3) + 0.01 * rng.normal(size=t.size)
    y[[20, 77]] = np.nan
    s = quiet(Scan.from_arrays, t, np.mod(ang, 360.0), y)
    assert s.marks == 16 and s.dropped_rows == 2
    return s


def nearly_noiseless(make_arrays):
    """y'y / RSS ≈ 1e12 and an offset of 1e6: the RSS comes from explicit residuals.  The 2θ
    amplitude changes from turn to turn (by 1e-3), so that the turn scatter stands far above the
    rounding of the per-turn coefficients (~1e-17)."""
    rng = np.random.default_rng(4)
    t, ang, y, _ = make_arrays(rng, ar=0.0, noise=1e-7)
    turn = np.floor(ang / 360.0).astype(int)
    y = y + 1e-3 * rng.normal(size=turn.max() + 1)[turn] * np.cos(2 * np.deg2rad(ang))
    return quiet(Scan.from_arrays, t, ang, y + 1e6)


@pytest.fixture(params=["continuous", "gap", "reversals", "marks", "noiseless"])
def log(request, make_arrays):
    return {"continuous": lambda: continuous(make_arrays, extra=23),
            "gap": lambda: with_gap(make_arrays),
            "reversals": with_reversals,
            "marks": at_marks,
            "noiseless": lambda: nearly_noiseless(make_arrays)}[request.param]()


# ----------------------------------------------------------------------------- equality
@pytest.mark.parametrize("chunk_rows", CHUNKS)
def test_streamed_fit_equals_in_memory_fit(log, chunk_rows):
    ref = quiet(fit_scan, log)
    got = quiet(fit_stream, ScanStream.from_scan(log, chunk_rows), progress=False)
    same_fit(got, ref)


@pytest.mark.parametrize("chunk_rows", [1, 41, 10 ** 7])
def test_streamed_per_turn_table_equals_demodulate(log, chunk_rows):
    for kw in ({}, {"complete_only": False}, {"harmonics": (2,), "drift": "per-turn:2"}):
        ref = quiet(demodulate, log, **kw)
        got = quiet(demodulate_stream, ScanStream.from_scan(log, chunk_rows), progress=False, **kw)
        same_frame(got, ref)


@pytest.mark.parametrize("kw", [{"errors": "blocks:3"}, {"harmonics": (1, 2, 3)}, {"drift": "per-turn:0"},
                                {"complete_only": False}])
def test_streamed_fit_options(make_arrays, kw):
    s = continuous(make_arrays, seed=5, n_turns=20, extra=31)
    same_fit(quiet(fit_stream, ScanStream.from_scan(s, 97), progress=False, **kw), quiet(fit_scan, s, **kw))


def test_a_million_readings_in_chunks(make_arrays):
    s = continuous(make_arrays, seed=6, n_turns=25_000, extra=17, noise=0.02)
    assert s.n_samples > 10 ** 6
    ref = fit_scan(s)
    for rows in (65_537, 250_000):
        same_fit(fit_stream(ScanStream.from_scan(s, rows), progress=False), ref)


def test_turns_left_out_and_notes_agree(make_arrays):
    # harmonics up to 3 with 8 readings per turn: every turn is too short, both refuse alike
    s = continuous(make_arrays, seed=7, per_turn=8, n_turns=6, extra=0, start_deg=0.0)
    with pytest.raises(AnalysisError) as ref:
        quiet(fit_scan, s, harmonics=(1, 2, 3))
    with pytest.raises(AnalysisError) as got:
        quiet(fit_stream, ScanStream.from_scan(s, 5), harmonics=(1, 2, 3), progress=False)
    assert str(got.value) == str(ref.value)


def test_coverage_refused_like_in_memory():
    # six marks identify k < 3 only
    theta = np.arange(6 * 40) * 60.0
    s = quiet(Scan.from_arrays, np.arange(theta.size) * 1.0, theta, np.random.default_rng(8).normal(size=theta.size))
    with pytest.raises(AnalysisError, match="6 marks") as ref:
        quiet(fit_scan, s, harmonics=(1, 2, 3))
    with pytest.raises(AnalysisError) as got:
        quiet(fit_stream, ScanStream.from_scan(s, 50), harmonics=(1, 2, 3), progress=False)
    assert str(got.value) == str(ref.value)


def test_coverage_check_from_sums_equals_the_check_on_angles():
    # readings over a quarter of each turn only: 1θ and 2θ columns nearly collinear after centring
    from nullfit.fitting.design import check_separable, check_separable_sums, harmonic_rows

    rng = np.random.default_rng(13)
    for width in (5.0, 40.0, 360.0):
        theta = np.deg2rad(rng.uniform(0, width, 5000))
        h = np.vstack([np.ones(theta.size), harmonic_rows(theta, (1, 2))])
        sums = h @ h.T  # numpy as the reference for the sums the kernel accumulates
        outcome = []
        for check in (lambda: check_separable(theta, (1, 2)), lambda: check_separable_sums(sums, (1, 2))):
            try:
                check()
                outcome.append(True)
            except AnalysisError:
                outcome.append(False)
        assert outcome[0] == outcome[1], width
        assert outcome[0] == (width > 40.0)


# ----------------------------------------------------------------------------- refusals
def test_streams_refuse_what_needs_the_log_in_memory(make_arrays):
    s = quiet(Scan.from_arrays, *make_arrays(np.random.default_rng(9))[:3], aux={"tilt": np.arange(493.0)})
    st = ScanStream.from_scan(s, 100)
    with pytest.raises(AnalysisError, match="turn or block errors"):
        fit_stream(st, errors="hac", drift="poly:3")
    with pytest.raises(AnalysisError, match="turn or block errors"):
        fit_stream(st, errors="ols")
    with pytest.raises(AnalysisError, match="auxiliary"):
        fit_stream(st, aux="tilt")
    with pytest.raises(ValueError, match="per-turn"):
        fit_stream(st, drift="spline")
    with pytest.raises(ValueError, match="per-turn"):
        demodulate_stream(st, drift="poly:2")


def test_bad_options_are_refused_before_the_log_is_read(make_arrays):
    st = ScanStream.from_scan(continuous(make_arrays, seed=9), 100)
    with pytest.raises(ValueError, match="dependence must be"):
        fit_stream(_Unreadable(st), dependence="bogus")


class _Unreadable:
    """A stream that fails if anything reads it: options must be checked first."""

    def __init__(self, stream):
        self.source = stream.source

    def __iter__(self):
        raise AssertionError("the stream was read before the options were checked")


def test_turn_numbers_must_increase(make_arrays):
    s = continuous(make_arrays, seed=10)
    st = ScanStream.from_scan(s, 100)
    chunks = list(st)
    bad = ScanStream(lambda: iter([chunks[1], chunks[0]] + chunks[2:]), source="x.parquet", unit="fringe",
                     epoch_unix=None)
    bad.turn_complete, bad.marks = s.turn_complete, None
    with pytest.raises(AnalysisError, match="not contiguous and increasing"):
        fit_stream(bad, progress=False)


# ----------------------------------------------------------------------------- files
def test_fit_path_reads_small_files_into_memory(tmp_path, make_arrays):
    t, ang, y, _ = make_arrays(np.random.default_rng(11))
    p = tmp_path / "log.parquet"
    pd.DataFrame({"time_s": t, "angle_deg": ang, "fringe": y}).to_parquet(p)
    ref = quiet(fit_scan, quiet(Scan.from_frame, pd.read_parquet(p), source=str(p)))
    f = quiet(fit_path, p)
    close(f.coef, ref.coef)
    assert not any("streaming reader" in n for n in f.notes)


def test_fit_path_streams_on_request_or_says_why_not(tmp_path, make_arrays):
    t, ang, y, _ = make_arrays(np.random.default_rng(12))
    p = tmp_path / "log.parquet"
    pd.DataFrame({"time_s": t, "angle_deg": ang, "fringe": y}).to_parquet(p)
    ref = quiet(fit_path, p, stream=False)
    f = quiet(fit_path, p, stream=True, progress=False)
    close(f.coef, ref.coef)
    close(f.cov, ref.cov)
    try:
        from nullfit.reading.stream import open_stream  # noqa: F401
    except ImportError:
        assert any("no streaming reader" in n for n in f.notes)
    with pytest.raises(ValueError, match="stream must be"):
        fit_path(p, stream="yes")


def test_progress_bar_over_the_readings(make_arrays, capsys):
    s = continuous(make_arrays, seed=14)
    f = quiet(fit_stream, ScanStream.from_scan(s, 100), progress=True)
    same_fit(f, quiet(fit_scan, s))
    err = capsys.readouterr().err
    assert "reading" in err and f"{s.n_samples}" in err.replace(",", "")  # tqdm counted every reading


def test_a_stream_must_say_which_turns_are_complete(make_arrays):
    s = continuous(make_arrays, seed=15)
    st = ScanStream.from_scan(s, 100)
    st.turn_complete = None
    with pytest.raises(ValueError, match="which turns are complete"):
        fit_stream(st, progress=False)
