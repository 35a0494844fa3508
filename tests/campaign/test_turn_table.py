"""The per-turn table: columns, exact mid times, metadata, a Parquet round trip, atomic writes.

References: the scan's own per-turn demodulation (nullfit.demodulate, itself checked against a
numpy lstsq loop) and pyarrow reading the file back independently of nullfit."""

import json
import warnings

import numpy as np
import pyarrow.parquet as pq
import pytest

from nullfit import demodulate, simulate_scan
from nullfit.campaign.turn_table import METADATA_KEY, TurnTable, turn_columns
from nullfit.core.errors import ScanError


@pytest.fixture(scope="module")
def scans():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        out = []
        for i in range(3):
            s, _ = simulate_scan(n_turns=6, samples_per_turn=24, sigma=0.01, rng=i, epoch_unix=1_780_000_000 + 86400 * i,
                                 run_id=f"R{i}")
            out.append(s)
    return out


def test_columns_and_exact_mid_times(scans):
    tt = TurnTable.from_scans(scans)
    assert list(tt.frame.columns) == turn_columns((1, 2))
    assert tt.frame["t_mid_ns"].dtype == np.int64 and set(tt.runs) == {"R0", "R1", "R2"}
    one = tt.frame[tt.frame.run == "R1"]
    ref = demodulate(scans[1])
    np.testing.assert_array_equal(one["c2"].to_numpy(), ref["c2"].to_numpy())
    expect_ns = scans[1].epoch_unix * 10**9 + np.rint(ref["time_mid_s"].to_numpy() * 1e9).astype(np.int64)
    np.testing.assert_array_equal(one["t_mid_ns"].to_numpy(), expect_ns)


def test_parquet_round_trip_and_metadata(scans, tmp_path):
    tt = TurnTable.from_scans(scans, harmonics=(2,))
    path = tt.write(tmp_path / "turns.parquet")
    raw = pq.read_table(path)  # pyarrow, independently of nullfit
    meta = json.loads(raw.schema.metadata[METADATA_KEY])
    assert meta["harmonics"] == [2] and meta["runs"]["R0"]["unit"] == "fringe"
    back = TurnTable.read(path)
    assert back.frame.equals(tt.frame) and back.meta == json.loads(json.dumps(tt.meta))
    assert not list(tmp_path.glob(".*part"))  # no temporary left behind


def test_refusals(scans, tmp_path):
    import pandas as pd

    p = tmp_path / "x.parquet"
    pd.DataFrame({"a": [1]}).to_parquet(p)
    with pytest.raises(ScanError, match="per-turn metadata"):
        TurnTable.read(p)
    with pytest.raises(ValueError, match="run id"):
        TurnTable.from_scans([scans[0], scans[0]])
