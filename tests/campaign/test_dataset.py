"""A campaign as a dataset: many logs into one per-turn table, serially and on a real Dask cluster.

References: nullfit.demodulate of each log on its own (itself checked against a numpy lstsq loop);
a per-turn numpy lstsq loop (conftest ``loop_reference``) for the auxiliary channels; hashlib for
the SHA-256; pyarrow reading the file back independently of nullfit."""

import hashlib
import importlib
import json
import logging
import os
import subprocess
import sys
import warnings

import numpy as np
import pyarrow.parquet as pq
import pytest

from nullfit import demodulate, demodulate_campaign, read_scan
from nullfit.campaign import dataset, parallel
from nullfit.campaign.turn_table import METADATA_KEY, TurnTable, aux_columns, turn_columns
from nullfit.core.errors import ScanError

distributed = pytest.importorskip("distributed")


@pytest.fixture(scope="module")
def cluster():
    """One real local cluster for the module: 2 worker processes, one thread each."""
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message="Port .* is already in use", category=UserWarning)
        c = distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1, dashboard_address=None,
                                     silence_logs=logging.ERROR)
    with c:
        yield c


@pytest.fixture(scope="module")
def campaign(tmp_path_factory, write_logs):
    """Five good logs (Parquet and CSV) and one corrupt one; the serial table of them."""
    root = tmp_path_factory.mktemp("campaign")
    good = write_logs(root, 3) + write_logs(root, 2, seed=10, fmt="csv", stem="C")
    bad = root / "broken.parquet"
    bad.write_bytes(b"PAR1 this is not a Parquet file")
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the campaign itself must not warn
        serial = demodulate_campaign(good + [bad], aux=["tilt"], workers=0)
    return good, bad, serial


def _quiet_read(path):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return read_scan(path)


def test_rows_are_each_logs_own_demodulation(campaign, loop_reference):
    good, bad, tt = campaign
    assert list(tt.frame.columns) == turn_columns((1, 2)) + aux_columns((1, 2), ("tilt",))
    assert sorted(tt.runs) == ["C0", "C1", "R0", "R1", "R2"] and list(tt.failed) == [str(bad)]
    for path in good:
        scan = _quiet_read(path)
        one = tt.frame[tt.frame.run == path.stem]
        ref = demodulate(scan)
        np.testing.assert_array_equal(one["turn"].to_numpy(), ref["turn"].to_numpy())
        for col in ("c1", "s1", "c2", "s2", "sigma_c2", "sigma_s2", "resid_rms"):
            np.testing.assert_array_equal(one[col].to_numpy(), ref[col].to_numpy())
        expect_ns = scan.epoch_unix * 10**9 + np.rint(ref["time_mid_s"].to_numpy() * 1e9).astype(np.int64)
        np.testing.assert_array_equal(one["t_mid_ns"].to_numpy(), expect_ns)
        # the tilt channel, demodulated per turn like the signal: a numpy lstsq loop as reference
        loop = loop_reference(scan, y=scan.aux["tilt"])
        for k in (1, 2):
            for stem in ("c", "s", "sigma_c", "sigma_s"):
                np.testing.assert_allclose(one[f"aux_{stem}{k}_tilt"].to_numpy(), loop[f"{stem}{k}"],
                                           rtol=1e-9, atol=1e-12)
        meta = tt.runs[path.stem]
        assert meta["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()
        assert meta["manifest_sha256"] == hashlib.sha256(path.with_suffix(".toml").read_bytes()).hexdigest()
        assert meta["source"] == str(path) and meta["absolute_time"] and meta["warnings"] == []
        assert meta["aux_read"] == ["tilt"] and meta["partition"] == {}
    assert tt.failed[str(bad)].startswith(str(bad)) and "\n" not in tt.failed[str(bad)]
    assert tt.meta["provenance"]["versions"]["nullfit"] == tt.meta["nullfit_version"]


def test_cluster_table_equals_serial(campaign, cluster):
    good, bad, serial = campaign
    par = demodulate_campaign(good + [bad], aux=["tilt"], scheduler=cluster.scheduler_address)
    assert par.meta["campaign"]["execution"]["kind"] == "scheduler"
    assert par.meta["campaign"]["execution"]["workers"] == 2
    assert par.frame.equals(serial.frame)
    assert par.meta["runs"] == serial.meta["runs"] and par.failed == serial.failed


def test_own_local_cluster_equals_serial(campaign):
    good, _, serial = campaign
    environ = dict(os.environ)
    par = demodulate_campaign(good[:3], aux="tilt", workers=2)
    assert dict(os.environ) == environ  # the cluster's worker settings do not leak into this process
    assert par.meta["campaign"]["execution"]["kind"] == "local-cluster"
    assert par.meta["campaign"]["execution"]["workers"] == 2
    assert par.frame.equals(serial.frame[serial.frame.run.isin([p.stem for p in good[:3]])].reset_index(drop=True))


def test_without_dask_runs_serially_with_a_note(campaign, monkeypatch):
    good, _, serial = campaign
    real = importlib.import_module

    def no_dask(name, *args, **kw):  # simulates the absence of Dask, nothing of its behaviour
        if name.split(".")[0] in ("distributed", "dask"):
            raise ModuleNotFoundError(f"No module named {name!r}")
        return real(name, *args, **kw)

    monkeypatch.setattr(parallel.importlib, "import_module", no_dask)
    tt = demodulate_campaign(good, aux=["tilt"])
    ex = tt.meta["campaign"]["execution"]
    assert ex["kind"] == "serial" and "not installed" in ex["note"] and "nullfit[dask]" in ex["note"]
    assert ex["note"] in tt.meta["campaign"]["notes"]
    assert tt.frame.equals(serial.frame)
    with pytest.raises(ImportError, match="nullfit\\[dask\\]"):
        demodulate_campaign(good, scheduler="tcp://127.0.0.1:1")


def test_resume_skips_unchanged_and_redoes_changed(tmp_path, write_logs, monkeypatch):
    logs = write_logs(tmp_path / "logs", 3)
    first = demodulate_campaign(logs[:2], aux=["tilt"], workers=0)
    path = first.write(tmp_path / "turns.parquet")
    write_logs(tmp_path / "other", 1, seed=50)[0].replace(logs[1])  # R1 changes (manifest the same)
    reads = []
    real = dataset.read_scan
    monkeypatch.setattr(dataset, "read_scan", lambda *a, **k: reads.append(a[0]) or real(*a, **k))
    again = demodulate_campaign(logs, aux=["tilt"], workers=0, resume=path)
    camp = again.meta["campaign"]
    assert camp["skipped"] == ["R0"] and camp["demodulated"] == ["R1", "R2"]
    assert sorted(map(str, reads)) == [str(logs[1]), str(logs[2])]  # R0 was not read again
    assert any("R1" in n and "changed" in n for n in camp["notes"])
    fresh = demodulate_campaign(logs, aux=["tilt"], workers=0)
    assert again.frame.equals(fresh.frame) and again.runs == fresh.runs
    # a changed manifest also re-does its run
    logs[0].with_suffix(".toml").write_text('[columns]\ntime = "unix_s"\naux = ["tilt"]\n[site]\nname = "hall"\n')
    third = demodulate_campaign(logs, aux=["tilt"], workers=0, resume=again)
    assert third.meta["campaign"]["demodulated"] == ["R0"] and third.runs["R0"]["site"] == {"name": "hall"}
    assert [n for n in third.meta["campaign"]["notes"] if "R0" in n] == [
        "run R0: its manifest changed since the table was written; demodulated again"]
    # a log whose manifest now gives it another run id: the old run is replaced, not kept twice
    logs[2].with_suffix(".toml").write_text('[scan]\nrun_id = "Z"\n[columns]\ntime = "unix_s"\naux = ["tilt"]\n')
    fourth = demodulate_campaign(logs, aux=["tilt"], workers=0, resume=third)
    assert sorted(fourth.runs) == ["R0", "R1", "Z"] and set(fourth.frame.run) == {"R0", "R1", "Z"}
    assert any("R2" in n and "now run Z" in n for n in fourth.meta["campaign"]["notes"])
    # other options than the table's are refused before anything is read
    with pytest.raises(ValueError, match="harmonics"):
        demodulate_campaign(logs, harmonics=(2,), aux=["tilt"], resume=again)
    with pytest.raises(ValueError, match="aux"):
        demodulate_campaign(logs, resume=again)


def test_resume_keeps_runs_not_named_and_drops_runs_that_now_fail(tmp_path, write_logs):
    logs = write_logs(tmp_path, 3)
    first = demodulate_campaign(logs, workers=0)
    logs[2].write_bytes(b"PAR1 broken")
    again = demodulate_campaign(logs[2:], workers=0, resume=first)
    assert sorted(again.runs) == ["R0", "R1"] and list(again.failed) == [str(logs[2])]
    assert set(again.frame.run) == {"R0", "R1"}
    assert again.frame.equals(first.frame[first.frame.run != "R2"].reset_index(drop=True))


def test_interrupted_write_leaves_no_table(campaign, tmp_path, monkeypatch):
    tt = campaign[2]
    out = tmp_path / "turns.parquet"
    real = pq.write_table

    def dies_half_way(table, where, **kw):
        real(table, where, **kw)
        with open(where, "r+b") as f:  # a real partial file under the temporary name, then the interruption
            f.truncate(os.path.getsize(where) // 2)
        raise KeyboardInterrupt

    monkeypatch.setattr(pq, "write_table", dies_half_way)
    with pytest.raises(KeyboardInterrupt):
        tt.write(out)
    assert list(tmp_path.iterdir()) == []
    monkeypatch.setattr(pq, "write_table", real)
    tt.write(out)
    before = out.read_bytes()
    monkeypatch.setattr(pq, "write_table", dies_half_way)
    with pytest.raises(KeyboardInterrupt):
        tt.write(out)
    assert list(tmp_path.iterdir()) == [out] and out.read_bytes() == before  # the earlier table is intact


def test_killed_process_leaves_no_table(campaign, tmp_path):
    """A process killed (SIGKILL) in the middle of writing: no file under the table's name."""
    good = campaign[0]
    out = tmp_path / "turns.parquet"
    code = ("import os, signal, sys, pyarrow.parquet as pq\n"
            "real = pq.write_table\n"
            "def killed(table, where, **kw):\n"
            "    real(table, where, **kw)\n"
            "    os.kill(os.getpid(), signal.SIGKILL)\n"
            "pq.write_table = killed\n"
            "from nullfit.cli import main\n"
            "sys.exit(main(sys.argv[1:]))\n")
    r = subprocess.run([sys.executable, "-c", code, "turns", *map(str, good), "-o", str(out), "--workers", "0"],
                       capture_output=True, text=True, timeout=300,
                       env=os.environ | {"PYTHONPATH": os.pathsep.join(sys.path)})
    assert r.returncode == -9
    assert not out.exists()
    assert [p.name.startswith(".turns.parquet.") and p.name.endswith(".part") for p in tmp_path.iterdir()] == [True]


def test_hive_partitioned_dataset(tmp_path, write_logs):
    root = tmp_path / "ds"
    a = write_logs(root / "site=hall" / "day=2026-03-14", 1, stem="part-")[0]
    b = write_logs(root / "site=hall" / "day=2026-03-15", 1, seed=7, stem="part-")[0]
    (root / "_SUCCESS").write_text("")
    (root / "site=hall" / ".part-9.parquet").write_bytes(b"temporary of a writer")
    (root / "_common_metadata.parquet").write_bytes(b"not a log")
    tt = demodulate_campaign([root], workers=0)
    assert sorted(tt.runs) == ["site=hall/day=2026-03-14/part-0", "site=hall/day=2026-03-15/part-0"]
    meta = tt.runs["site=hall/day=2026-03-15/part-0"]
    assert meta["partition"] == {"site": "hall", "day": "2026-03-15"} and meta["source"] == str(b)
    assert not tt.failed
    notes = tt.meta["campaign"]["notes"]  # _SUCCESS, .part-9.parquet and _common_metadata.parquet were left out
    assert any("3 file(s) that are not Parquet logs" in n for n in notes)
    np.testing.assert_array_equal(tt.frame[tt.frame.run.str.endswith("14/part-0")]["c2"].to_numpy(),
                                  demodulate(_quiet_read(a))["c2"].to_numpy())
    empty = tmp_path / "empty"
    empty.mkdir()
    with pytest.raises(ScanError, match="without Parquet files"):
        demodulate_campaign([empty], workers=0)


def test_bad_logs_are_listed_not_fatal(tmp_path, write_logs):
    logs = write_logs(tmp_path / "a", 2) + write_logs(tmp_path / "b", 1)  # b/R0 repeats the run id R0
    no_tilt = tmp_path / "c" / "N0.parquet"
    no_tilt.parent.mkdir()
    read = _quiet_read(logs[0]).to_frame()
    read.drop(columns="tilt").rename(columns={"signal": "fringe"}).to_parquet(no_tilt)
    (tmp_path / "c" / "M0.parquet").write_bytes(logs[1].read_bytes())
    (tmp_path / "c" / "M0.toml").write_text("[columns]\ntime = 3\n")
    missing = tmp_path / "nope.csv"
    tt = demodulate_campaign(logs + [no_tilt, tmp_path / "c" / "M0.parquet", missing, logs[0]], aux="tilt", workers=0)
    assert sorted(tt.runs) == ["R0", "R1"]
    why = tt.failed
    assert "run id 'R0'" in why[str(logs[2])]
    assert why[str(no_tilt)].startswith(str(no_tilt)) and "'tilt'" in why[str(no_tilt)]
    bad_manifest = why[str(tmp_path / "c" / "M0.parquet")]
    assert "M0.toml" in bad_manifest and "manifest of" in bad_manifest
    assert why[str(missing)].startswith(str(missing))
    assert all("\n" not in w for w in why.values())
    assert any("more than once" in n for n in tt.meta["campaign"]["notes"])


def test_aux_channel_declared_only_in_the_call(tmp_path, write_logs):
    """A column named by ``aux`` but not declared in the manifest is read through
    ``read_scan(aux=...)``; one the log does not have fails that log with a line naming it."""
    log = write_logs(tmp_path, 1)[0]
    log.with_suffix(".toml").write_text('[columns]\ntime = "unix_s"\n')
    tt = demodulate_campaign([log], aux=["tilt"], workers=0)
    assert "R0" in tt.runs and "aux_c2_tilt" in tt.frame
    tt = demodulate_campaign([log], aux=["humidity"], workers=0)
    assert "'humidity'" in tt.failed[str(log)] and "\n" not in tt.failed[str(log)]


def test_option_errors(tmp_path, write_logs):
    logs = write_logs(tmp_path, 2)
    for kw, needle in [({"drift": "poly:2"}, "per-turn"), ({"workers": -1}, "workers"),
                       ({"workers": 2, "scheduler": "tcp://x:1"}, "scheduler"), ({"harmonics": "1,x"}, "harmonics"),
                       ({"aux": ["tilt", "tilt"]}, "twice"), ({"angle_unit": "grad"}, "angle")]:
        with pytest.raises(ValueError, match=needle):
            demodulate_campaign(logs, **kw)
    man = tmp_path / "one.toml"
    man.write_text('[scan]\nrun_id = "X"\n[columns]\ntime = "unix_s"\n')
    with pytest.raises(ValueError, match="run id 'X'"):
        demodulate_campaign(logs, manifest=man)
    with pytest.raises(ValueError, match="no logs"):
        demodulate_campaign([])


def test_metadata_round_trip(campaign, tmp_path):
    tt = campaign[2]
    path = tt.write(tmp_path / "t.parquet")
    meta = json.loads(pq.read_table(path).schema.metadata[METADATA_KEY])  # pyarrow, independently
    assert meta["aux"] == ["tilt"] and set(meta["failed"]) == set(tt.failed)
    back = TurnTable.read(path)
    assert back.frame.equals(tt.frame) and back.aux == ("tilt",)
