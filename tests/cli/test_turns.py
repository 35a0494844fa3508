"""``nullfit turns``: a campaign of logs into one per-turn table; faults, exit status, output rules.

The table is read back with pyarrow (independently of nullfit) where its content is checked."""

import json
import subprocess
import sys

import pyarrow.parquet as pq
import pytest

from nullfit.campaign.turn_table import METADATA_KEY
from nullfit.cli import main


def _meta(path):
    return json.loads(pq.read_table(path).schema.metadata[METADATA_KEY])


def _lines(text):
    return [ln for ln in text.splitlines() if ln.strip()]


@pytest.fixture
def logs(tmp_path, write_logs):
    good = write_logs(tmp_path / "logs", 3)
    bad = tmp_path / "logs" / "corrupt.csv"
    bad.write_text("time_s,angle_deg,fringe\n0,0,1\n1,abc,2\n")
    return good, bad


def test_one_corrupt_log_among_good_ones(logs, tmp_path, capsys):
    good, bad = logs
    out = tmp_path / "turns.parquet"
    assert main(["turns", *map(str, good), str(bad), "-o", str(out), "--workers", "0", "--aux", "tilt"]) == 2
    cap = capsys.readouterr()
    err, so = _lines(cap.err), _lines(cap.out)
    assert len(err) == 1 and err[0].startswith(f"nullfit: failed: {bad}") and "'angle_deg'" in err[0]
    assert "Traceback" not in cap.err
    assert len(so) == 1 and so[0].startswith(f"{out}: 3 runs") and "1 failed" in so[0]
    meta = _meta(out)
    assert sorted(meta["runs"]) == ["R0", "R1", "R2"] and list(meta["failed"]) == [str(bad)]
    assert "aux_c2_tilt" in pq.read_table(out).column_names
    # the same campaign again, with failures allowed: exit 0, the failure still listed
    assert main(["turns", *map(str, good), str(bad), "-o", str(out), "--workers", "0", "--force",
                 "--allow-failures"]) == 0
    assert list(_meta(out)["failed"]) == [str(bad)]


def test_local_cluster_through_the_console_entry_point(logs, tmp_path):
    """The default path (a local Dask cluster started and closed by nullfit) in a real process:
    stdout and stderr are one line each, no traceback, no log noise from the cluster."""
    pytest.importorskip("distributed")
    good, bad = logs
    out = tmp_path / "turns.parquet"
    r = subprocess.run([sys.executable, "-m", "nullfit.cli", "turns", *map(str, good), str(bad), "-o", str(out),
                        "--workers", "2"], capture_output=True, text=True, timeout=300)
    assert r.returncode == 2, r.stderr
    assert _lines(r.stderr) == [f"nullfit: failed: {bad}, row 2, column 'angle_deg': 'abc' is not a number"]
    assert len(_lines(r.stdout)) == 1 and "2 workers, local cluster" in r.stdout
    serial = tmp_path / "serial.parquet"
    assert main(["turns", *map(str, good), "-o", str(serial), "--workers", "0"]) == 0
    assert pq.read_table(out).equals(pq.read_table(serial))


def test_resume_and_output_rules(logs, tmp_path, capsys):
    good, bad = logs
    out = tmp_path / "turns.parquet"
    assert main(["turns", *map(str, good[:2]), "-o", str(out), "--workers", "0"]) == 0
    before = out.read_bytes()
    capsys.readouterr()
    # never over an existing table without --force
    assert main(["turns", *map(str, good), "-o", str(out), "--workers", "0"]) == 2
    err = _lines(capsys.readouterr().err)
    assert len(err) == 1 and "--force" in err[0] and out.read_bytes() == before
    # --resume: two runs unchanged, one new
    assert main(["turns", *map(str, good), "-o", str(out), "--workers", "0", "--resume"]) == 0
    so = _lines(capsys.readouterr().out)
    assert len(so) == 1 and "3 runs" in so[0] and "1 demodulated, 2 unchanged, 0 failed" in so[0]
    assert sorted(_meta(out)["runs"]) == ["R0", "R1", "R2"]
    # never into an input, nor into a dataset folder given as input
    assert main(["turns", *map(str, good), "-o", str(good[0]), "--workers", "0", "--force"]) == 2
    assert "over an input" in capsys.readouterr().err
    assert main(["turns", str(good[0].parent), "-o", str(good[0].parent / "t.parquet"), "--workers", "0"]) == 2
    assert "inside the input dataset folder" in capsys.readouterr().err
    # --resume with other options is refused in one line
    assert main(["turns", *map(str, good), "-o", str(out), "--workers", "0", "--resume", "--harmonics", "2"]) == 2
    err = _lines(capsys.readouterr().err)
    assert len(err) == 1 and "--resume needs the same options" in err[0]


def test_nothing_written_when_every_log_fails(logs, tmp_path, capsys):
    _, bad = logs
    out = tmp_path / "turns.parquet"
    assert main(["turns", str(bad), str(tmp_path / "missing.parquet"), "-o", str(out), "--workers", "0"]) == 2
    err = _lines(capsys.readouterr().err)
    assert len(err) == 3 and err[-1].startswith("nullfit: no log could be demodulated") and not out.exists()


def test_write_failure_and_interruption_leave_no_table(logs, tmp_path, capsys, monkeypatch):
    good, _ = logs
    out = tmp_path / "turns.parquet"
    real = pq.write_table

    def disk_full(table, where, **kw):
        real(table, where, **kw)
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(pq, "write_table", disk_full)
    assert main(["turns", *map(str, good), "-o", str(out), "--workers", "0"]) == 2
    err = _lines(capsys.readouterr().err)
    assert len(err) == 1 and "No space left on device" in err[0]
    assert list(tmp_path.glob("*turns.parquet*")) == []

    def interrupted(table, where, **kw):
        raise KeyboardInterrupt

    monkeypatch.setattr(pq, "write_table", interrupted)
    assert main(["turns", *map(str, good), "-o", str(out), "--workers", "0"]) == 130
    assert "interrupted" in capsys.readouterr().err and list(tmp_path.glob("*turns.parquet*")) == []


@pytest.mark.parametrize("argv,needle", [
    (["--workers", "-1"], "--workers"),
    (["--workers", "2", "--scheduler", "tcp://127.0.0.1:1"], "--scheduler"),
    (["--force", "--resume"], "--resume"),
    (["--drift", "spline"], "per-turn"),
    (["--aux", ","], "--aux"),
])
def test_bad_options_one_line(logs, tmp_path, capsys, argv, needle):
    good, _ = logs
    assert main(["turns", *map(str, good), "-o", str(tmp_path / "t.parquet"), *argv]) == 2
    err = _lines(capsys.readouterr().err)
    assert len(err) == 1 and needle in err[0] and not (tmp_path / "t.parquet").exists()


def test_reading_flags_reach_every_log(logs, tmp_path, capsys):
    good, _ = logs
    out = tmp_path / "turns.parquet"
    # the invented logs are fringe logs: declaring them fractional must be refused for every log, as fit does
    assert main(["turns", *map(str, good), "-o", str(out), "--workers", "0", "--signal-unit", "fractional"]) == 2
    assert "fractional" in capsys.readouterr().err and not out.exists()
    # one start time cannot be that of several logs
    assert main(["turns", *map(str, good), "-o", str(out), "--workers", "0",
                 "--start-utc", "2027-01-01T00:00:00Z"]) == 2
    assert "--start-utc" in capsys.readouterr().err and not out.exists()
