"""`nullfit fit --stream`: a Parquet log read chunk by chunk gives the numbers of the in-memory fit.

Reference: the same command with the log read into memory (the streamed fit and reader are
each checked against their in-memory counterparts in tests/fitting and tests/reading)."""

import json
import warnings

import numpy as np
import pytest

from nullfit import simulate_frame
from nullfit.cli import main


@pytest.fixture(scope="module")
def log(tmp_path_factory):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        df, _ = simulate_frame(n_turns=40, samples_per_turn=36, harmonics={2: (0.003, 20.0)}, sigma=0.01, rng=7,
                               time_format="unix")
    path = tmp_path_factory.mktemp("s") / "big.parquet"
    df.to_parquet(path, row_group_size=1000)
    return path


def _fit(capsys, *args):
    assert main(["fit", *map(str, args), "--time", "unix_s", "--json", "--limits", "feldman-cousins,neyman", "--arm-length", "11",
                 "--wavelength", "5.5e-7", "--speed", "30000"]) == 0
    return json.loads(capsys.readouterr().out)


def test_streamed_cli_fit_equals_the_in_memory_one(log, capsys):
    mem = _fit(capsys, log, "--stream", "no")
    st = _fit(capsys, log, "--stream", "yes")
    np.testing.assert_allclose(st["fit"]["coef"], mem["fit"]["coef"], rtol=1e-12, atol=0)
    np.testing.assert_allclose(st["fit"]["cov"], mem["fit"]["cov"], rtol=1e-10, atol=0)
    for m in ("feldman-cousins", "neyman"):
        assert st["limits"][m]["upper"] == pytest.approx(mem["limits"][m]["upper"], rel=1e-10)
    # a fixed in-plane wind has no time dependence: the turn-averaged expectation is the same
    assert st["expected"]["amplitude"] == pytest.approx(mem["expected"]["amplitude"], rel=1e-12)
    assert st["n_turns"] == mem["n_turns"] and st["dropped_rows"] == mem["dropped_rows"]


def test_stream_yes_refuses_csv(tmp_path, capsys):
    p = tmp_path / "x.csv"
    p.write_text("time_s,angle_deg,fringe\n0,0,0\n")
    assert main(["fit", str(p), "--stream", "yes"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Parquet" in err
