"""What a user sees from the command line: exit codes, one-line messages in flags, JSON keys and units,
the rows dropped or left out, gaps and direction changes, and every limit route's fate.

Logs are written by nullfit's own simulator (known truth) into a temporary folder; the CLI runs in a
subprocess, exactly as a user runs it, so no traceback or source line can hide."""

import hashlib
import json
import re
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from nullfit import simulate_frame

DEMO = Path(__file__).resolve().parents[2] / "data_demo"
ROUTES = "feldman-cousins,neyman,bayes,bootstrap"


def run_cli(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "nullfit.cli", *map(str, args)], capture_output=True, text=True,
                          timeout=600, cwd=cwd)


def one_error_line(r) -> str:
    """The run failed with exit 2 and one error line on stderr (after any one-line warnings); no
    traceback, no source line."""
    assert r.returncode == 2, (r.stdout, r.stderr)
    lines = r.stderr.strip().splitlines()
    assert "Traceback" not in r.stderr and ".py:" not in r.stderr
    errors = [ln for ln in lines if not ln.startswith("nullfit: warning: ")]
    assert len(errors) == 1 and errors[0].startswith("nullfit: "), r.stderr
    return errors[0]


def write(tmp_path, name, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        df, _ = simulate_frame(**kw)
    p = tmp_path / name
    df.to_csv(p, index=False)
    return p, df


@pytest.fixture(scope="module")
def logs(tmp_path_factory):
    d = tmp_path_factory.mktemp("logs")
    out = {}
    out["three"], _ = write(d, "three.csv", n_turns=3, samples_per_turn=32, rng=1)
    out["two"], _ = write(d, "two.csv", n_turns=2, samples_per_turn=32, rng=1)
    out["quiet"], _ = write(d, "quiet.csv", n_turns=20, samples_per_turn=32, rng=2)
    # a NaN reading
    p, df = write(d, "nan.csv", n_turns=20, samples_per_turn=32, rng=3)
    df.loc[5, "fringe"] = np.nan
    df.to_csv(p, index=False)
    out["nan"] = p
    # a 3-day jump in time after row 600 of a 40-turn, 1-hour log
    p, df = write(d, "jump.csv", n_turns=40, samples_per_turn=32, period_s=90.0, rng=4)
    df.loc[600:, "time_s"] += 3 * 86400.0
    df.to_csv(p, index=False)
    out["jump"] = p
    # a reversal: 10.5 turns one way, then 10 turns back (partial turns around the turning point)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        a, _ = simulate_frame(n_turns=10.5, samples_per_turn=32, rng=5)
        b, _ = simulate_frame(n_turns=10, samples_per_turn=32, rng=6, sense=-1)
    b["time_s"] += a["time_s"].iloc[-1] + 1.875
    b["angle_deg"] = (b["angle_deg"] + a["angle_deg"].iloc[-1] - 11.25) % 360
    p = d / "reversal.csv"
    pd.concat([a, b]).to_csv(p, index=False)
    out["reversal"] = p
    return out


# ------------------------------------------------------------------ every route's fate
def test_three_turns_all_routes_print_three_and_a_note(logs):
    r = run_cli("fit", logs["three"], "--limits", ROUTES, "--seed", "1")
    assert r.returncode == 0, r.stderr
    limits = r.stdout.split("Limits on the 2θ amplitude")[1]
    for m in ("feldman-cousins", "neyman", "bayes"):
        assert f"{m} 95 %" in limits
    assert "bootstrap" in limits and "not computed" in limits and "10 turns" in limits
    d = json.loads(run_cli("fit", logs["three"], "--limits", ROUTES, "--seed", "1", "--json").stdout)
    assert set(d["limits"]) == {"feldman-cousins", "neyman", "bayes"}
    assert "10 turns" in d["limits_failed"]["bootstrap"]


def test_report_with_a_failing_route_still_writes(logs, tmp_path):
    target = tmp_path / "r.html"
    r = run_cli("report", logs["three"], "-o", target, "--seed", "1")
    assert r.returncode == 0, r.stderr
    html = target.read_text(encoding="utf-8")
    assert "not computed" in html and "10 turns" in html


def test_two_turns_refused_in_one_line(logs):
    one_error_line(run_cli("fit", logs["two"], "--limits", "feldman-cousins"))


def test_cl_half_every_route_gives_a_bound_or_says_why(logs):
    r = run_cli("fit", logs["quiet"], "--limits", "feldman-cousins,neyman,bayes", "--cl", "0.5", "--json")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    for m in ("feldman-cousins", "neyman", "bayes"):
        if m in d["limits"]:
            lim = d["limits"][m]
            assert lim["empty"] or (lim["upper"] is not None and np.isfinite(lim["upper"]))
        else:
            assert d["limits_failed"][m]
    text = run_cli("fit", logs["quiet"], "--limits", "feldman-cousins,neyman,bayes", "--cl", "0.5").stdout
    assert "nan" not in text.split("Limits on")[1].split("note:")[0]


def test_an_empty_set_shows_its_reason(tmp_path):
    # a quiet scan whose observed amplitude lies below the (1 − CL) quantile at A = 0: the one-sided
    # Neyman set is empty (it happens in a fraction 1 − CL of experiments without a signal)
    for seed in range(40):
        p, _ = write(tmp_path, f"q{seed}.csv", n_turns=20, samples_per_turn=16, rng=seed)
        r = run_cli("fit", p, "--limits", "neyman", "--cl", "0.9", "--json")
        d = json.loads(r.stdout)
        if d["limits"]["neyman"]["empty"]:
            break
    else:  # pragma: no cover - 40 tries at probability 0.1 each
        pytest.fail("no empty Neyman set found")
    assert "quantile" in d["limits"]["neyman"]["empty_reason"]
    text = run_cli("fit", p, "--limits", "neyman", "--cl", "0.9").stdout
    assert "see note" not in text and "quantile" in text.split("Limits on")[1]


# ------------------------------------------------------------------ rows, gaps, reversals
def test_nan_rows_warn_in_one_line_and_fit_agrees_with_info(logs):
    r = run_cli("fit", logs["nan"], "--json")
    assert r.returncode == 0
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("nullfit: warning: ") and ".py" not in r.stderr
    assert "row 6" in lines[0] and "fringe" in lines[0]
    fit = json.loads(r.stdout)
    info = json.loads(run_cli("info", logs["nan"], "--json").stdout)
    assert fit["dropped_rows"] == info["dropped_rows"] == 1


def test_time_jump_is_reported_by_fit_and_info(logs):
    fit = json.loads(run_cli("fit", logs["jump"], "--json").stdout)
    info = json.loads(run_cli("info", logs["jump"], "--json").stdout)
    assert len(fit["gaps"]) == 1 == len(info["gaps"])
    g = fit["gaps"][0]
    assert g["row"] == 601 and g["duration_s"] == pytest.approx(3 * 86400.0, rel=1e-3)
    for cmd in ("fit", "info"):
        text = run_cli(cmd, logs["jump"]).stdout
        assert "gap" in text and "row 601" in text


def test_reversal_fit_and_info_agree(logs):
    fit = json.loads(run_cli("fit", logs["reversal"], "--json").stdout)
    info = json.loads(run_cli("info", logs["reversal"], "--json").stdout)
    assert fit["n_reversals"] == info["n_reversals"] == 1
    assert fit["dropped_rows"] == info["dropped_rows"] == 0
    assert fit["partial_turn_rows"] == info["partial_turn_rows"] > 0
    for cmd in ("fit", "info"):
        text = run_cli(cmd, logs["reversal"]).stdout
        assert re.search(r"direction changes of the table\s+1\n", text), text


# ------------------------------------------------------------------ flags, not keywords
def test_messages_speak_in_flags(logs):
    msg = one_error_line(run_cli("fit", logs["three"], "--angle-unit", "rad"))
    assert "--angle-unit" in msg and "angle_unit" not in msg
    msg = one_error_line(run_cli("fit", logs["three"], "--wind", "orbital", "--arm-length", "1",
                                 "--wavelength", "5e-7"))
    assert "--start-utc" in msg and "epoch_unix" not in msg and "speed_m_s" not in msg
    msg = one_error_line(run_cli("fit", logs["three"], "--speed", "30000"))
    assert "--arm-length" in msg and "Apparatus(" not in msg
    msg = one_error_line(run_cli("fit", logs["quiet"], "--start-utc", "yesterday"))
    assert "--start-utc" in msg


def test_start_utc_and_site_replace_the_manifest(logs):
    r = run_cli("fit", logs["quiet"], "--wind", "orbital", "--arm-length", "11", "--wavelength", "5.5e-7",
                "--start-utc", "2026-03-12T20:00:00Z", "--site", "58.39,13.85", "--mark-azimuth", "20",
                "--table-sense", "counterclockwise", "--json")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    assert d["expected"]["amplitude"] > 0 and d["expected"]["unit"] == d["unit"] == "fringe"


def test_help_states_the_real_defaults():
    assert "report.html" in run_cli("report", "--help").stdout
    comp = run_cli("compare", "--help").stdout
    assert "none for fit" not in comp and "default: feldman-cousins" in " ".join(comp.split())
    rep = " ".join(run_cli("report", "--help").stdout.split())
    assert "none for fit" not in rep and "default: feldman-cousins,neyman,bayes,bootstrap" in rep


def test_seed_note_only_when_something_random_ran(logs):
    assert "random seed" not in run_cli("fit", logs["quiet"], "--limits", "feldman-cousins").stdout
    out = run_cli("fit", logs["quiet"], "--limits", "bootstrap", "--seed", "9").stdout
    assert "random seed 9" in out


# ------------------------------------------------------------------ what fit prints
def test_fit_text_shows_every_harmonic_and_chi2(logs):
    out = run_cli("fit", logs["quiet"], "--harmonics", "1,2,3").stdout
    for k in (1, 2, 3):
        assert f"c{k} " in out and f"s{k} " in out and f"phase φ{k}" in out
    assert "χ²/dof" in out


def test_json_version_provenance_and_keys(logs):
    r = run_cli("fit", DEMO / "injected_2theta.csv", "--json", "--limits", "feldman-cousins,neyman", "--seed", "4",
                "--speed", "30000")
    d = json.loads(r.stdout)
    import nullfit

    assert d["version"] == nullfit.__version__
    prov = d["provenance"]
    shas = {Path(f["path"]).name: f["sha256"] for f in prov["inputs"]}
    for name in ("injected_2theta.csv", "injected_2theta.toml"):
        assert shas[name] == hashlib.sha256((DEMO / name).read_bytes()).hexdigest()
    assert prov["seeds"]["run"] == 4 and prov["settings"]["limits"] == ["feldman-cousins", "neyman"]
    assert "harmonics" in d and "harmonics" not in d["fit"]  # said once
    text = json.dumps(d)
    assert "chi2_dof_n" not in text and "chi2_dof" in d["fit"] and "chi2_degrees_of_freedom" in d["fit"]
    # units everywhere
    assert all(lim["unit"] == d["unit"] == "fringe" for lim in d["limits"].values())
    assert d["expected"]["unit"] == "fringe"


# ------------------------------------------------------------------ aux channels
def test_aux_option_fits_a_channel_or_says_it_was_not_used(tmp_path):
    r = run_cli("simulate", tmp_path / "t.csv", "--turns", "30", "--per-turn", "32", "--tilt", "1",
                "--tilt-walk", "0.3", "--tilt-coupling", "0.002", "--seed", "3")
    assert r.returncode == 0, r.stderr
    used = run_cli("fit", tmp_path / "t.csv", "--aux", "tilt_urad").stdout
    assert "coupling to tilt_urad" in used
    unused = run_cli("fit", tmp_path / "t.csv").stdout
    assert "tilt_urad read but not used" in unused and "--aux" in unused
    msg = one_error_line(run_cli("fit", tmp_path / "t.csv", "--aux", "no_such"))
    assert "no_such" in msg


# ------------------------------------------------------------------ compare
def test_compare_without_apparatus_keeps_ratio_empty_with_a_note(logs):
    r = run_cli("compare", logs["quiet"], logs["nan"], "--json", "--seed", "1")
    assert r.returncode == 0, r.stderr
    rows = json.loads(r.stdout)
    assert all(row["ratio_expected_to_bound"] is None and "no apparatus" in row["note"] for row in rows)
    assert all(row["upper_amplitude"] > 0 for row in rows)
    text = run_cli("compare", logs["quiet"], "--seed", "1").stdout
    assert "no apparatus" in text


def test_compare_takes_column_options(tmp_path, logs):
    df = pd.read_csv(logs["quiet"]).rename(columns={"time_s": "t", "angle_deg": "a", "fringe": "y"})
    p = tmp_path / "renamed.csv"
    df.to_csv(p, index=False)
    r = run_cli("compare", p, "--time", "t", "--angle", "a", "--signal", "y", "--angle-unit", "deg", "--csv")
    assert r.returncode == 0, r.stderr
    one_error_line(run_cli("compare", p))
