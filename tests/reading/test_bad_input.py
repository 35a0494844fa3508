"""Every bad-input case of the reader: a ScanError (a ValueError) with ONE line naming the file and,
where they apply, the row (data rows from 1, header not counted) and the column."""

import warnings

import numpy as np
import pandas as pd
import pytest

from nullfit.reading.files import read_scan
from nullfit.core.errors import ScanError, ScanWarning
from nullfit.reading.scan import Scan

N = 16 * 6 + 1


def base_frame(n=N):
    ang = np.mod(np.arange(n) * 22.5, 360.0)
    return pd.DataFrame({"time_s": np.arange(n) * 1.0, "angle_deg": ang,
                         "fringe": 0.02 * np.cos(2 * np.deg2rad(ang)) + np.arange(n) * 1e-3})


def refused(path, *parts, **kw) -> str:
    """read_scan(path) raises a one-line ScanError containing the file name and every part."""
    with pytest.raises(ScanError) as info:
        read_scan(path, **kw)
    msg = str(info.value)
    assert "\n" not in msg and "\r" not in msg, msg
    assert isinstance(info.value, ValueError)
    for p in (path.name if hasattr(path, "name") else str(path),) + parts:
        assert p in msg, f"{p!r} not in {msg!r}"
    return msg


def csv_of(tmp_path, df, name="log.csv"):
    p = tmp_path / name
    df.to_csv(p, index=False)
    return p


# ------------------------------------------------------------------ files
def test_missing_file(tmp_path):
    refused(tmp_path / "nothere.csv", "no such file")


def test_directory_instead_of_file(tmp_path):
    (tmp_path / "d.csv").mkdir()
    refused(tmp_path / "d.csv", "directory")


def test_empty_file(tmp_path):
    (tmp_path / "e.csv").write_bytes(b"")
    refused(tmp_path / "e.csv", "empty")
    (tmp_path / "w.csv").write_text(" \n\n  \n")
    refused(tmp_path / "w.csv", "empty")


def test_header_only_file(tmp_path):
    (tmp_path / "h.csv").write_text("time_s,angle_deg,fringe\n\n")
    refused(tmp_path / "h.csv", "no data rows")
    pd.DataFrame({"time_s": [], "angle_deg": [], "fringe": []}).to_parquet(tmp_path / "h.parquet")
    refused(tmp_path / "h.parquet", "no data rows")


@pytest.mark.parametrize("sep,word", [(";", "semicolons"), ("\t", "tabs"), ("|", "'|'"), (" ", "spaces")])
def test_wrong_delimiter(tmp_path, sep, word):
    p = tmp_path / "semi.csv"
    p.write_text(base_frame().to_csv(index=False, sep=sep))
    refused(p, "line 1", word, "comma-separated")


def test_a_semicolon_row_inside_a_comma_file(tmp_path):
    lines = base_frame().to_csv(index=False).splitlines()
    lines[6] = lines[6].replace(",", ";")  # line 7 = data row 6
    p = tmp_path / "mixed.csv"
    p.write_text("\n".join(lines) + "\n")
    refused(p, "row 6", "column 'time_s'", "';'")


def test_bytes_that_are_not_utf8(tmp_path):
    text = base_frame().to_csv(index=False).encode()
    lines = text.split(b"\n")
    lines[3] = lines[3][:2] + b"\xe9" + lines[3][2:]  # a Latin-1 'é' on line 4
    raw = b"\n".join(lines)
    p = tmp_path / "latin1.csv"
    p.write_bytes(raw)
    offset = raw.index(b"\xe9")
    refused(p, "line 4", "data row 3", "0xe9", f"offset {offset}", "UTF-8")


def test_utf16_file(tmp_path):
    p = tmp_path / "u16.csv"
    p.write_bytes(base_frame().to_csv(index=False).encode("utf-16"))
    refused(p, "UTF-16")


def test_binary_file_with_nul_bytes(tmp_path):
    p = tmp_path / "bin.csv"
    p.write_bytes(b"time_s,angle_deg,fringe\n0,0,\x00\x01\x02\n")
    refused(p, "line 2", "NUL")


def test_row_with_too_many_fields(tmp_path):
    lines = base_frame().to_csv(index=False).splitlines()
    lines[8] += ",42"  # line 9 = data row 8
    p = tmp_path / "f.csv"
    p.write_text("\n".join(lines) + "\n")
    refused(p, "line 9", "data row 8", "4 fields", "header has 3")


def test_missing_header_line(tmp_path):
    p = tmp_path / "nh.csv"
    p.write_text(base_frame().to_csv(index=False, header=False))
    refused(p, "line 1", "header")


def test_not_a_parquet_file(tmp_path):
    (tmp_path / "x.parquet").write_bytes(b"time_s,angle_deg,fringe\n")
    refused(tmp_path / "x.parquet", "not a Parquet file")
    (tmp_path / "y.parquet").write_bytes(b"PAR1 truncated PAR1")
    refused(tmp_path / "y.parquet", "not a readable Parquet file")


# ------------------------------------------------------------------ columns and values
def test_missing_default_column(tmp_path):
    p = csv_of(tmp_path, base_frame().rename(columns={"angle_deg": "angle"}))
    refused(p, "column 'angle_deg'", "no such column", "'angle'")


def test_missing_column_named_by_keyword(tmp_path):
    refused(csv_of(tmp_path, base_frame()), "column 'theta'", "angle=", angle="theta")


def test_duplicate_column_name(tmp_path):
    p = tmp_path / "dup.csv"
    p.write_text("time_s,angle_deg,fringe,fringe\n" + "".join(f"{i},{i * 22.5 % 360},{i},{i}\n" for i in range(40)))
    refused(p, "column 'fringe'", "2 times")


def test_non_numeric_value_names_first_bad_row_and_value(tmp_path):
    df = base_frame().astype({"fringe": object})
    df.loc[6, "fringe"] = "abc"  # data row 7
    df.loc[20, "fringe"] = "xyz"
    refused(csv_of(tmp_path, df), "row 7", "column 'fringe'", "'abc'", "not a number")


def test_number_with_a_unit_gets_a_hint(tmp_path):
    df = base_frame().astype({"angle_deg": object})
    df.loc[3, "angle_deg"] = "67.5 deg"
    refused(csv_of(tmp_path, df), "row 4", "column 'angle_deg'", "'67.5 deg'", "without units")


def test_non_numeric_time(tmp_path):
    df = base_frame().astype({"time_s": object})
    df.loc[2, "time_s"] = "soon"
    refused(csv_of(tmp_path, df), "row 3", "column 'time_s'", "'soon'")


def test_bad_timestamp_among_iso_timestamps(tmp_path):
    df = base_frame().astype({"time_s": object})
    df["time_s"] = [f"2026-03-14T21:{i // 60:02d}:{i % 60:02d}Z" for i in range(N)]
    df.loc[11, "time_s"] = "2026-03-14T21:00:99Z"
    refused(csv_of(tmp_path, df), "row 12", "column 'time_s'", "ISO-8601")


def test_boolean_column(tmp_path):
    df = base_frame()
    df["fringe"] = np.arange(N) % 2 == 0
    refused(csv_of(tmp_path, df), "column 'fringe'", "true/false")


def test_nan_and_inf_are_dropped_with_a_warning_and_counted(tmp_path):
    df = base_frame()
    df.loc[4, "fringe"] = np.nan  # row 5
    df.loc[9, "angle_deg"] = np.inf  # row 10
    df.loc[30, "time_s"] = -np.inf  # row 31
    p = csv_of(tmp_path, df)
    with pytest.warns(ScanWarning) as rec:
        s = read_scan(p)
    msg = str(rec[0].message)
    assert "\n" not in msg and "log.csv, row 5, column 'fringe'" in msg and "dropped 3 row(s)" in msg
    assert s.dropped_rows == 3 and s.dropped == (("missing, NaN or infinite value", 3),)
    assert s.n_samples == N - 3 and not {5, 10, 31} & set(s.rows.tolist())


def test_nonfinite_raise_refuses(tmp_path):
    df = base_frame()
    df.loc[4, "fringe"] = np.nan
    df.loc[9, "angle_deg"] = np.inf
    p = csv_of(tmp_path, df)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no warning on the way to the error
        refused(p, "row 5", "column 'fringe'", "2 such row(s)", nonfinite="raise")


def test_all_rows_nonfinite(tmp_path):
    df = base_frame()
    df["fringe"] = np.nan
    with pytest.warns(ScanWarning):
        refused(csv_of(tmp_path, df), "no rows left")


# ------------------------------------------------------------------ time
def test_duplicate_time(tmp_path):
    df = base_frame()
    df.loc[10, "time_s"] = df.loc[9, "time_s"]  # row 11 repeats row 10
    refused(csv_of(tmp_path, df), "row 11", "column 'time_s'", "duplicate time", "row 10")


def test_decreasing_time(tmp_path):
    df = base_frame()
    df.loc[40, "time_s"] = 3.0
    refused(csv_of(tmp_path, df), "row 41", "column 'time_s'", "decreasing time")


def test_unix_time_beyond_2262(tmp_path):
    df = base_frame()
    df["time_s"] = 1e10 + np.arange(N)
    refused(csv_of(tmp_path, df), "row 1", "column 'time_s'", "too large", "2261")


def test_relative_and_unix_times_mixed(tmp_path):
    df = base_frame()
    df.loc[50:, "time_s"] = 1.8e9 + np.arange(N - 50)
    refused(csv_of(tmp_path, df), "row 51", "column 'time_s'", "1e8 s")


# ------------------------------------------------------------------ angles
def test_radians_while_degrees_declared(tmp_path):
    df = base_frame()
    df["angle_deg"] = np.deg2rad(df["angle_deg"])
    refused(csv_of(tmp_path, df), "column 'angle_deg'", "look like radians", "angle_unit='rad'")
    assert read_scan(tmp_path / "log.csv", angle_unit="rad").n_complete_turns == 6


@pytest.mark.parametrize("angles", [
    np.mod(np.arange(N) * 22.5, 360.0),  # modulo 360: wraps jump back by ~360
    np.arange(N) * 22.5,  # continuous marks: 22.5 "rad" per step
    np.mod(np.arange(5 * 360) * 1.0, 360.0),  # whole degrees
], ids=["wraps", "marks", "whole"])
def test_degrees_while_radians_declared(tmp_path, angles):
    n = angles.size
    df = pd.DataFrame({"time_s": np.arange(n) * 1.0, "angle_deg": angles, "fringe": np.cos(np.arange(n))})
    refused(csv_of(tmp_path, df), "column 'angle_deg'", "look like degrees", "angle_unit='deg'", angle_unit="rad")


def test_less_than_one_complete_turn(tmp_path):
    refused(csv_of(tmp_path, base_frame(n=12)), "column 'angle_deg'", "less than one complete turn", "247.5°")


def test_continuous_radians_read_as_degrees_get_a_hint(tmp_path):
    n = 400
    df = pd.DataFrame({"time_s": np.arange(n) * 1.0, "angle_deg": np.arange(n) * 0.1, "fringe": np.cos(np.arange(n))})
    refused(csv_of(tmp_path, df), "less than one complete turn", "angle_unit='rad'")


def test_two_azimuths_cannot_separate_cos_and_sin(tmp_path):
    # the table turns, but the log holds readings at 0° and 90° only (several at 90°)
    k = np.arange(60)
    ang = np.tile([0.0, 90.0, 90.0, 90.0], 15) + 360.0 * (k // 4)
    df = pd.DataFrame({"time_s": k * 1.0, "angle_deg": ang, "fringe": np.cos(k)})
    refused(csv_of(tmp_path, df), "column 'angle_deg'", "cannot separate cos 2θ from sin 2θ", "2 distinct azimuth")


def test_constant_signal(tmp_path):
    df = base_frame()
    df["fringe"] = 0.25
    refused(csv_of(tmp_path, df), "column 'fringe'", "constant")


def test_absurd_angle(tmp_path):
    df = base_frame()
    df.loc[7, "angle_deg"] = 1e300
    refused(csv_of(tmp_path, df), "row 8", "column 'angle_deg'", "billion turns")


# ------------------------------------------------------------------ signal unit
def test_fractional_declared_but_fringe_sized_values(tmp_path):
    refused(csv_of(tmp_path, base_frame()), "column 'fringe'", "not fractional", signal_unit="fractional")


def test_fringe_default_but_fractional_sized_values(tmp_path):
    df = base_frame()
    df["fringe"] *= 1e-15
    refused(csv_of(tmp_path, df), "column 'fringe'", "signal_unit='fractional'")


# ------------------------------------------------------------------ manifest against the log
@pytest.mark.parametrize("toml,parts", [
    ('[columns]\nangle = "theta"\n', ["column 'theta'", "[columns] angle", "contradicts"]),
    ('[columns]\naux = ["tilt_urad"]\n', ["column 'tilt_urad'", "[columns] aux", "contradicts"]),
    ('[units]\ntime = "iso"\n', ["column 'time_s'", "[units] time", "contradicts"]),
    ('[units]\nangle = "rad"\n', ["column 'angle_deg'", "[units] angle", "look like degrees"]),
    ('[units]\nsignal = "fractional"\n', ["column 'fringe'", "[units] signal", "contradicts"]),
])
def test_manifest_contradicts_log(tmp_path, toml, parts):
    p = csv_of(tmp_path, base_frame())
    (tmp_path / "log.toml").write_text(toml)
    refused(p, "log.toml", *parts)


def test_manifest_start_time_contradicts_absolute_times(tmp_path):
    df = base_frame().astype({"time_s": object})
    df["time_s"] = [f"2026-03-14T21:{i // 60:02d}:{i % 60:02d}Z" for i in range(N)]
    p = csv_of(tmp_path, df)
    (tmp_path / "log.toml").write_text('[time]\nstart_utc = "2026-03-14T22:00:00Z"\n')  # an hour off
    refused(p, "log.toml", "row 1", "start_utc", "-3600 s", "contradicts")
    (tmp_path / "log.toml").write_text('[time]\nstart_utc = "2026-03-14T22:00:00+01:00"\n')  # the same instant
    assert read_scan(p).epoch_unix == int(pd.Timestamp("2026-03-14T21:00:00Z").timestamp())


def test_manifest_says_seconds_but_log_has_timestamps(tmp_path):
    df = base_frame().astype({"time_s": object})
    df["time_s"] = [f"2026-03-14T21:{i // 60:02d}:{i % 60:02d}Z" for i in range(N)]
    p = csv_of(tmp_path, df)
    (tmp_path / "log.toml").write_text('[units]\ntime = "s"\n')
    refused(p, "row 1", "column 'time_s'", "[units] time", "contradicts")


def test_manifest_with_toml_syntax_error(tmp_path):
    p = csv_of(tmp_path, base_frame())
    (tmp_path / "log.toml").write_text('[columns]\nangle = "angle_deg\n')
    msg = refused(p, "log.toml", "TOML syntax error", "line 2", "manifest of")
    assert msg.index("log.toml") < msg.index("log.csv")  # the manifest is where the error is


def test_explicit_manifest_missing(tmp_path):
    p = csv_of(tmp_path, base_frame())
    with pytest.raises(ScanError, match=r"nothere\.toml: manifest not found"):
        read_scan(p, manifest=tmp_path / "nothere.toml")


# ------------------------------------------------------------------ arrays and frames
def test_from_arrays_errors_are_one_line():
    t = np.arange(10.0)
    for args, part in [((t, t[:5], t), "different lengths"),
                       ((t, np.array(["a"] * 10), t), "not numeric"),
                       ((np.array([]), np.array([]), np.array([])), "no data rows")]:
        with pytest.raises(ScanError) as info:
            Scan.from_arrays(*args)
        assert part in str(info.value) and "\n" not in str(info.value)


def test_frame_errors_name_the_frame_row():
    df = base_frame().astype({"fringe": object})
    df.loc[12, "fringe"] = [1, 2]  # not a number (a list)
    with pytest.raises(ScanError, match=r"^<frame>, row 13, column 'fringe': \[1, 2\] is not a number$"):
        Scan.from_frame(df)


@pytest.mark.parametrize("kw,part", [({"angle_unit": "degrees"}, "angle_unit"), ({"signal_unit": "Hz"}, "signal_unit"),
                                     ({"nonfinite": "ignore"}, "nonfinite")])
def test_bad_option_values_are_scan_errors(tmp_path, kw, part):
    p = csv_of(tmp_path, base_frame())
    with pytest.raises(ScanError, match=part):
        read_scan(p, **kw)
    with pytest.raises(ScanError, match=part):
        Scan.from_frame(base_frame(), **kw)
