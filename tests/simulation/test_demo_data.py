"""The committed demo data (data_demo/) match their script, are labelled as invented, and read back.

Independent references: pandas reads the CSVs and ``tomllib`` the manifests; the reader
(``nullfit.logfile.read_scan``) is checked against them and against the simulator's truth.
"""

import importlib.util
import json
import sys
import tomllib
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "data_demo"
MAX_BYTES = 5 * 1024 * 1024  # the demo data stay under 5 MB in all (data_demo/README.md)


def _load_script():
    spec = importlib.util.spec_from_file_location("nullfit_demo_make_demo", DEMO / "make_demo.py")
    mod = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = mod  # dataclasses look their module up while the script runs
    spec.loader.exec_module(mod)
    return mod


MAKE = _load_script()
SPECS = {s.run_id: s for s in MAKE.SCANS}


def test_regenerated_demo_data_are_byte_identical_to_the_committed_files(tmp_path):
    files = MAKE.make_demo(tmp_path)
    for p in files:
        rel = p.relative_to(tmp_path)
        committed = DEMO / rel
        assert committed.is_file(), f"{rel} is made by make_demo.py but not committed"
        assert committed.read_bytes() == p.read_bytes(), (
            f"data_demo/{rel} differs from what make_demo.py writes; regenerate with "
            "`python data_demo/make_demo.py --force` and review the change")
    made = {p.relative_to(tmp_path) for p in files}
    on_disk = {p.relative_to(DEMO) for p in DEMO.rglob("*") if p.suffix in (".csv", ".toml", ".json")}
    assert on_disk == made, f"files in data_demo/ not made by the script: {sorted(map(str, on_disk - made))}"


def test_script_refuses_to_overwrite_without_force(tmp_path, capsys):
    MAKE.make_demo(tmp_path)
    before = (tmp_path / "quiet.csv").read_bytes()
    with pytest.raises(FileExistsError, match="--force"):
        MAKE.make_demo(tmp_path)
    assert MAKE.main(["--out", str(tmp_path)]) == 2
    assert "--force" in capsys.readouterr().err
    assert MAKE.main(["--out", str(tmp_path), "--force"]) == 0
    assert (tmp_path / "quiet.csv").read_bytes() == before


def test_demo_data_are_small_and_cover_the_requested_scenarios():
    total = sum(p.stat().st_size for p in DEMO.rglob("*") if p.is_file())
    assert total < MAX_BYTES
    truth = json.loads((DEMO / "truth.json").read_text(encoding="utf-8"))["runs"]
    campaign = [r for r in truth.values() if r["log"].startswith("campaign/")]
    assert len(campaign) >= 5
    assert len({r["start_utc"][:10] for r in campaign}) == len(campaign)  # different days
    assert all(r["start_utc"].startswith("2026-") for r in truth.values())
    s01 = truth["S01"]
    assert s01["sampling"]["marks"] == 16 and s01["sampling"]["repeat_start_mark"] is True
    assert s01["harmonics"]["2"]["amplitude"] > 0
    assert truth["D01"]["noise"]["kind"] == "ar1" and truth["D01"]["drift"]["walk_step"] > 0
    formats = {r["time_format"] for r in truth.values()}
    assert formats == {"relative", "unix", "iso"}


@pytest.mark.parametrize("run_id", sorted(SPECS))
def test_manifest_is_labelled_invented_and_consistent_with_its_log(run_id):
    spec = SPECS[run_id]
    log = DEMO / f"{spec.stem}.csv"
    with open(log.with_suffix(".toml"), "rb") as fh:
        man = tomllib.load(fh)
    notes = man["notes"]["text"]
    assert "INVENTED" in notes and "SYNTHETIC" in notes
    assert "INVENTED" in man["apparatus"]["name"] and "INVENTED" in man["site"]["name"]
    assert man["scan"]["run_id"] == run_id
    df = pd.read_csv(log)
    assert list(df.columns) == ([man["columns"]["time"], man["columns"]["angle"], man["columns"]["signal"]]
                                + list(man["columns"].get("aux", [])))
    assert [c.name for c in spec.aux] == list(man["columns"].get("aux", []))
    assert ("start_utc" in man.get("time", {})) == (spec.time_format == "relative")
    assert man["units"]["time"] == ("iso" if spec.time_format == "iso" else "s")
    # the apparatus and site tables are accepted by the library's own constructors
    from nullfit.hypothesis.apparatus import Apparatus
    from nullfit.hypothesis.site import Site

    app = Apparatus.from_mapping(man["apparatus"])
    assert app.signal == man["units"]["signal"]
    Site.from_mapping(man["site"])
    truth = json.loads((DEMO / "truth.json").read_text(encoding="utf-8"))["runs"][run_id]
    assert len(df) == truth["n_samples"]


# --------------------------------------------------------------------------- the reader on the demo data
def _reader():
    return pytest.importorskip("nullfit.reading.files", reason="nullfit.reading.files (read_scan) is not written yet")


@pytest.mark.parametrize("run_id", sorted(SPECS))
def test_read_scan_reads_each_committed_scan_as_simulated(run_id):
    logfile = _reader()
    from nullfit.simulation.scans import simulate_scan

    spec = SPECS[run_id]
    log = DEMO / f"{spec.stem}.csv"
    scan = logfile.read_scan(log)
    if spec.aux:  # the signal carries the channels' coupled contribution: simulate the log itself
        from nullfit.simulation.logs import simulate_log

        sim_df, log_truth = simulate_log(aux=spec.aux, **MAKE._sim_kwargs(spec))
        truth = log_truth.scan
        truth_signal = sim_df.iloc[:, 2].to_numpy()
        for c in spec.aux:
            np.testing.assert_allclose(scan.aux[c.name], sim_df[c.name].to_numpy(), rtol=1e-5, atol=1e-6)
    else:
        _, truth = simulate_scan(**MAKE._sim_kwargs(spec))
        truth_signal = truth.signal
    df = pd.read_csv(log)
    assert scan.n_samples == truth.n_samples == len(df)
    assert scan.dropped_rows == 0
    assert scan.unit == truth.unit
    assert scan.epoch_unix == truth.epoch_unix
    np.testing.assert_allclose(scan.time, truth.time, rtol=0, atol=1e-6)  # µs in the file
    np.testing.assert_array_equal(scan.signal, df.iloc[:, 2].to_numpy())
    np.testing.assert_allclose(scan.signal, truth_signal, rtol=1e-5, atol=0)  # %.6g in the file
    if truth.marks:
        assert scan.marks == truth.marks
    _, relabelled = np.unique(truth.turn, return_inverse=True)
    np.testing.assert_array_equal(scan.turn, relabelled)
