"""The TOML manifest (docs/manifest.md): what is accepted, and one-line errors naming file and key."""

import dataclasses
import re
from pathlib import Path

import pytest

from nullfit.reading.manifest import find_manifest, read_manifest
from nullfit.core.errors import ScanError
from nullfit.reading.manifest import Manifest

DOC = Path(__file__).resolve().parents[2] / "docs" / "manifest.md"


def write(tmp_path, text, name="run.toml"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def refused(path, *parts):
    with pytest.raises(ScanError) as info:
        read_manifest(path)
    msg = str(info.value)
    assert "\n" not in msg
    for part in (str(path),) + parts:
        assert part in msg, f"{part!r} not in {msg!r}"
    return msg


# ------------------------------------------------------------------ accepted
def test_the_documented_example_is_accepted(tmp_path):
    block = re.search(r"```toml\n(.*?)```", DOC.read_text(encoding="utf-8"), re.S).group(1)
    m = read_manifest(write(tmp_path, block))
    assert m.run_id == "R07"
    assert m.columns == {"time": "time_s", "angle": "angle_deg", "signal": "fringe"}
    assert m.aux_columns == ("tilt_urad", "temp_K")
    assert m.units == {"time": "s", "angle": "deg", "signal": "fringe"}
    assert m.start_utc == "2026-03-14T21:05:00Z"
    assert m.apparatus["arm_length_m"] == 11.0 and m.apparatus["folds"] == 8
    assert m.site["latitude_deg"] == 46.1 and m.site["table_sense"] == "clockwise"
    assert m.notes == "free text" and m.path == str(tmp_path / "run.toml")


def test_empty_manifest_gives_defaults(tmp_path):
    m = read_manifest(write(tmp_path, "# nothing yet\n"))
    assert m == Manifest(path=str(tmp_path / "run.toml"))


@pytest.mark.parametrize("value,expected", [
    ('"2026-03-14T21:05:00Z"', "2026-03-14T21:05:00Z"),
    ('"2026-03-14T22:05:00.25+01:00"', "2026-03-14T21:05:00.250Z"),  # offset converted to UTC
    ('"2026-03-14 21:05:00.123456789"', "2026-03-14T21:05:00.123456789Z"),  # naive = UTC, ns kept
    ("2026-03-14T21:05:00Z", "2026-03-14T21:05:00Z"),  # a TOML offset date-time
    ("2026-03-14T23:05:00+02:00", "2026-03-14T21:05:00Z"),
    ("2026-03-14T21:05:00", "2026-03-14T21:05:00Z"),  # a TOML local date-time: UTC
])
def test_start_utc_is_normalised(tmp_path, value, expected):
    assert read_manifest(write(tmp_path, f"[time]\nstart_utc = {value}\n")).start_utc == expected


def test_integers_are_accepted_for_real_numbers(tmp_path):
    m = read_manifest(write(tmp_path, "[site]\nlatitude_deg = 46\nelevation_m = 580\n"))
    assert m.site == {"latitude_deg": 46.0, "elevation_m": 580.0}
    assert isinstance(m.site["latitude_deg"], float)


def test_find_manifest_same_stem(tmp_path):
    log = tmp_path / "scan_07.csv"
    log.write_text("x")
    assert find_manifest(log) is None
    (tmp_path / "scan_07.toml").write_text("")
    assert find_manifest(log) == tmp_path / "scan_07.toml"
    assert find_manifest(tmp_path / "scan_07.parquet") == tmp_path / "scan_07.toml"
    assert find_manifest(tmp_path / "other.csv") is None


# ------------------------------------------------------------------ refused
def test_unknown_table(tmp_path):
    refused(write(tmp_path, '[unit]\nangle = "rad"\n'), "unknown table [unit]", "did you mean 'units'")


def test_unknown_key_in_a_table(tmp_path):
    refused(write(tmp_path, '[time]\nstrat_utc = "2026-03-14T21:05:00Z"\n'), "'strat_utc'", "[time]",
            "did you mean 'start_utc'")


def test_top_level_key_that_belongs_in_a_table(tmp_path):
    refused(write(tmp_path, 'run_id = "R1"\n'), "'run_id'", "[scan]")


@pytest.mark.parametrize("toml,parts", [
    ('[scan]\nrun_id = 7\n', ["[scan] run_id", "string", "integer"]),
    ('[columns]\nangle = 3\n', ["[columns] angle", "string"]),
    ('[columns]\naux = "tilt"\n', ["[columns] aux", "array of strings"]),
    ('[columns]\naux = ["tilt", "tilt"]\n', ["[columns] aux", "twice"]),
    ('[units]\nangle = "degrees"\n', ["[units] angle", "'deg', 'rad'", "'degrees'"]),
    ('[units]\ntime = "ms"\n', ["[units] time", "'s', 'iso'"]),
    ('[apparatus]\narm_length_m = "11 m"\n', ["[apparatus] arm_length_m", "number", "'11 m'"]),
    ('[apparatus]\nwavelength_m = -5.5e-7\n', ["[apparatus] wavelength_m", "positive"]),
    ('[apparatus]\nfolds = 8.0\n', ["[apparatus] folds", "whole number"]),
    ('[apparatus]\narm_length_m = true\n', ["[apparatus] arm_length_m", "boolean"]),
    ('[apparatus]\narm_length_m = nan\n', ["[apparatus] arm_length_m", "finite"]),
    ('[site]\nlatitude_deg = 95.0\n', ["[site] latitude_deg", "[-90, 90]"]),
    ('[site]\ntable_sense = "sideways"\n', ["[site] table_sense", "'clockwise'"]),
    ('[time]\nstart_utc = "14/03/2026 21:05"\n', ["[time] start_utc", "ISO-8601"]),
    ('[time]\nstart_utc = 2026-03-14\n', ["[time] start_utc", "time of day"]),
    ('[time]\nstart_utc = 1800000000\n', ["[time] start_utc", "ISO-8601"]),
    ('[notes]\ntext = ["a"]\n', ["[notes] text", "string"]),
    ('notes = "free"\n', ["[notes]", "table"]),
])
def test_wrong_types_and_values_name_file_and_key(tmp_path, toml, parts):
    refused(write(tmp_path, toml), *parts)


def test_contradictions_inside_the_manifest(tmp_path):
    refused(write(tmp_path, "[apparatus]\narm_length_m = 11.0\nfolds = 8\nphysical_arm_m = 1.5\n"),
            "arm_length_m", "8 × 1.5", "12")
    refused(write(tmp_path, '[units]\nsignal = "fringe"\n[apparatus]\nsignal = "fractional"\n'),
            "[units] signal", "[apparatus] signal")
    refused(write(tmp_path, '[columns]\ntime = "t"\nangle = "t"\n'), "[columns]", "'t'")
    refused(write(tmp_path, '[columns]\nsignal = "y"\naux = ["y"]\n'), "aux", "'y'", "signal")


def test_toml_syntax_error_names_line(tmp_path):
    refused(write(tmp_path, '[scan]\nrun_id = "R1"\n[columns\n'), "TOML syntax error", "line 3")


def test_not_utf8(tmp_path):
    p = tmp_path / "run.toml"
    p.write_bytes(b'[notes]\ntext = "caf\xe9"\n')
    refused(p, "line 2", "0xe9", "UTF-8")


def test_missing_and_directory(tmp_path):
    refused(tmp_path / "none.toml", "not found")
    (tmp_path / "d.toml").mkdir()
    refused(tmp_path / "d.toml", "directory")


def test_manifest_is_immutable(tmp_path):
    m = read_manifest(write(tmp_path, '[scan]\nrun_id = "R1"\n'))
    with pytest.raises(dataclasses.FrozenInstanceError):
        m.run_id = "R2"


def test_apparatus_readout_sign_and_table_sense_aliases(tmp_path):
    # keys and spellings that nullfit.apparatus.Apparatus / nullfit.sky.Site accept
    m = read_manifest(write(tmp_path, '[apparatus]\nreadout_sign = -1\n[site]\ntable_sense = "CCW"\n'))
    assert m.apparatus["readout_sign"] == -1 and m.site["table_sense"] == "counterclockwise"
    refused(write(tmp_path, "[apparatus]\nreadout_sign = 2\n"), "[apparatus] readout_sign", "+1 or -1")
