"""Auxiliary channels (tilt, temperature, ...) from every entry point of the reader.

``aux=[...]`` on read_scan (CSV, Parquet, a DataFrame) and Scan.from_frame, and the manifest's
``[columns] aux`` list; the keyword wins over the manifest.  A declared channel missing from the
log is a one-line ScanError naming the column; a row with a missing or non-finite aux value is
dropped and counted under its own reason naming the column (or refused with nonfinite='raise').
The truth is the constructed table.
"""

import warnings

import numpy as np
import pandas as pd
import pytest

from nullfit.core.errors import ScanError, ScanWarning
from nullfit.reading.files import read_scan
from nullfit.reading.scan import Scan
from nullfit.reading.validate import NONFINITE_REASON, aux_reason

N = 16 * 6 + 1


def frame(n=N):
    ang = np.mod(np.arange(n) * 22.5, 360.0)
    return pd.DataFrame({"time_s": np.arange(n) * 1.0, "angle_deg": ang,
                         "fringe": 0.02 * np.cos(2 * np.deg2rad(ang)) + np.arange(n) * 1e-3,
                         "tilt_urad": np.linspace(0.0, 1.0, n), "temp_K": 293.0 + np.arange(n) * 1e-3})


def write(tmp_path, df, kind):
    p = tmp_path / f"log.{kind}"
    if kind == "csv":
        df.to_csv(p, index=False)
    else:
        df.to_parquet(p, index=False)
    return p


def entry_points(tmp_path, df):
    """Every way into the reader, as ``name -> reader(**kw)``."""
    csv, pq = write(tmp_path, df, "csv"), write(tmp_path, df, "parquet")
    return {
        "csv": lambda **kw: read_scan(csv, **kw),
        "parquet": lambda **kw: read_scan(pq, **kw),
        "read_scan(frame)": lambda **kw: read_scan(df, **kw),
        "from_frame": lambda **kw: Scan.from_frame(df, **kw),
    }


@pytest.mark.parametrize("how", ["csv", "parquet", "read_scan(frame)", "from_frame"])
def test_aux_keyword_from_every_entry_point(tmp_path, how):
    df = frame()
    scan = entry_points(tmp_path, df)[how](aux=["tilt_urad", "temp_K"])
    assert list(scan.aux) == ["tilt_urad", "temp_K"]
    assert np.array_equal(scan.aux["tilt_urad"], df["tilt_urad"].to_numpy())
    assert np.array_equal(scan.aux["temp_K"], df["temp_K"].to_numpy())
    one = entry_points(tmp_path, df)[how](aux="temp_K")  # a single name
    assert list(one.aux) == ["temp_K"]


@pytest.mark.parametrize("kind", ["csv", "parquet"])
def test_keyword_wins_over_the_manifest(tmp_path, kind):
    p = write(tmp_path, frame(), kind)
    (tmp_path / "log.toml").write_text('[columns]\naux = ["tilt_urad"]\n')
    assert list(read_scan(p).aux) == ["tilt_urad"]  # the manifest alone
    assert list(read_scan(p, aux=["temp_K"]).aux) == ["temp_K"]  # the keyword replaces the list
    assert list(read_scan(p, aux=[]).aux) == []  # even by an empty one


def test_frame_with_a_manifest_object_and_keyword(tmp_path):
    (tmp_path / "m.toml").write_text('[columns]\naux = ["tilt_urad"]\n')
    s = Scan.from_frame(frame(), manifest=tmp_path / "m.toml")
    assert list(s.aux) == ["tilt_urad"]
    assert list(Scan.from_frame(frame(), manifest=tmp_path / "m.toml", aux=["temp_K"]).aux) == ["temp_K"]


@pytest.mark.parametrize("how", ["csv", "parquet", "read_scan(frame)", "from_frame"])
def test_missing_aux_column_is_a_one_line_error_naming_it(tmp_path, how):
    reader = entry_points(tmp_path, frame())[how]
    with pytest.raises(ScanError) as info:
        reader(aux=["tilt_urd"])
    msg = str(info.value)
    assert "\n" not in msg and "column 'tilt_urd'" in msg and "no such column" in msg and "aux=" in msg
    assert "did you mean 'tilt_urad'" in msg


@pytest.mark.parametrize("bad", [["fringe"], ["temp_K", "temp_K"]], ids=["role column", "twice"])
def test_aux_naming_a_role_column_or_twice_is_refused(tmp_path, bad):
    with pytest.raises(ScanError, match="aux="):
        read_scan(write(tmp_path, frame(), "csv"), aux=bad)


@pytest.mark.parametrize("how", ["csv", "parquet", "read_scan(frame)", "from_frame"])
def test_nan_in_an_aux_column_drops_the_row_under_its_own_reason(tmp_path, how):
    df = frame()
    df.loc[7, "tilt_urad"] = np.nan  # data row 8
    df.loc[30, "tilt_urad"] = np.inf
    df.loc[40, "temp_K"] = np.nan
    df.loc[12, "fringe"] = np.nan  # data row 13: the signal's own reason
    df.loc[50, ["fringe", "temp_K"]] = np.nan  # both: counted once, under the signal's reason
    with pytest.warns(ScanWarning) as rec:
        s = entry_points(tmp_path, df)[how](aux=["tilt_urad", "temp_K"])
    msg = str(rec[0].message)
    assert "\n" not in msg and "row 8, column 'tilt_urad'" in msg and "dropped 5 row(s)" in msg
    assert s.dropped == ((NONFINITE_REASON, 2), (aux_reason("tilt_urad"), 2), (aux_reason("temp_K"), 1))
    assert "auxiliary column 'tilt_urad'" in aux_reason("tilt_urad")
    assert s.dropped_rows == 5 and s.n_samples == N - 5
    assert not {8, 13, 31, 41, 51} & set(s.rows.tolist())
    assert all(np.all(np.isfinite(v)) for v in s.aux.values())


def test_nonfinite_raise_names_the_aux_column(tmp_path):
    df = frame()
    df.loc[7, "tilt_urad"] = np.nan
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        with pytest.raises(ScanError) as info:
            read_scan(write(tmp_path, df, "csv"), aux=["tilt_urad"], nonfinite="raise")
    msg = str(info.value)
    assert "\n" not in msg and "row 8, column 'tilt_urad'" in msg and "1 such row(s)" in msg


def test_aux_text_that_is_not_a_number_is_refused_with_its_row(tmp_path):
    df = frame().astype({"temp_K": object})
    df.loc[4, "temp_K"] = "warm"
    with pytest.raises(ScanError, match=r"row 5, column 'temp_K': 'warm' is not a number"):
        read_scan(write(tmp_path, df, "csv"), aux=["temp_K"])


def test_declared_aux_channels_are_listed_in_the_summary(tmp_path):
    s = read_scan(write(tmp_path, frame(), "parquet"), aux=["tilt_urad"])
    assert "auxiliary columns: tilt_urad" in str(s) and s.to_dict()["aux_columns"] == ["tilt_urad"]
