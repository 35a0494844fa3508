"""Synthetic logs with auxiliary channels (nullfit.simulation.logs) and ``nullfit simulate``.

What is checked: the files read back through ``read_scan`` with the declared channels; the truth in
the manifest's notes is the truth that was injected; the injected 2θ term and the tilt coupling are
recovered by ``fit_scan(aux=...)`` within their stated errors, as often as the nominal level says
(a binomial test against 95 %, scipy.stats.binomtest); and bad options are one-line errors."""

import subprocess
import sys
import warnings

import numpy as np
import pytest
from scipy import stats

from nullfit import fit_scan, read_scan, simulate_frame
from nullfit.reading.scan import Scan
from nullfit.simulation.logs import AuxChannel, simulate_log, temperature, tilt, truth_from_notes, write_log


def sim(**kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return simulate_log(**kw)


def test_same_seed_same_readings_and_the_channels_add_coupling_times_truth():
    base, _ = simulate_frame(n_turns=5, samples_per_turn=16, rng=7)
    df, truth = sim(n_turns=5, samples_per_turn=16, rng=7, aux=[tilt(0.003, walk_step=0.1), temperature(0.02)])
    added = 0.003 * truth.channel_values["tilt_urad"] + 0.02 * truth.channel_values["temperature_k"]
    np.testing.assert_allclose(df["fringe"] - added, base["fringe"], rtol=0, atol=1e-12)
    np.testing.assert_allclose(df["tilt_urad"], truth.channel_values["tilt_urad"])  # no sensor noise asked for
    # the tilt follows the rotation: its 2θ part at amplitude 1 µrad, phase 0
    th = truth.scan.theta
    no_walk, _ = sim(n_turns=5, samples_per_turn=16, rng=7, aux=[tilt(0.0, amplitude_2theta=1.0)])
    np.testing.assert_allclose(no_walk["tilt_urad"], np.cos(2 * th), atol=1e-12)


def test_channel_checks():
    with pytest.raises(ValueError, match="walk_step"):
        AuxChannel("x", walk_step=-1)
    with pytest.raises(ValueError, match="differ"):
        sim(n_turns=3, samples_per_turn=8, rng=1, aux=[tilt(), tilt()])
    with pytest.raises(ValueError, match="log column"):
        sim(n_turns=3, samples_per_turn=8, rng=1, aux=[AuxChannel("fringe")])


def test_written_log_reads_back_with_the_truth_in_the_notes(tmp_path):
    df, truth = sim(n_turns=6, samples_per_turn=16, rng=5, harmonics={2: (0.004, 30.0)},
                    aux=[tilt(0.002, walk_step=0.2)])
    for name in ("a.csv", "b.parquet"):
        log, man = write_log(tmp_path / name, df, truth, run_id="R1")
        scan = read_scan(log)
        assert scan.run_id == "R1" and list(scan.aux) == ["tilt_urad"] and scan.n_samples == len(df)
        assert scan.epoch_unix == truth.scan.epoch_unix
        np.testing.assert_allclose(scan.aux["tilt_urad"], df["tilt_urad"], rtol=1e-9)
        t = truth_from_notes(scan.meta.notes)
        assert t["seed"] == 5 and t["harmonics"]["2"]["amplitude"] == 0.004
        assert t["aux"]["tilt_urad"]["coupling"] == 0.002
        with pytest.raises(FileExistsError):
            write_log(log, df, truth)
    write_log(tmp_path / "a.csv", df, truth, force=True)


def test_injected_signal_and_coupling_recovered_within_their_errors():
    # 60 independent logs; each fit's 95 % intervals (Student-t on the turn scatter's dof) must cover
    # the truth at the nominal rate: binomial test against 0.95 (scipy as the reference)
    n, cover_c2, cover_k = 60, 0, 0
    for seed in range(n):
        df, truth = sim(n_turns=24, samples_per_turn=24, rng=1000 + seed, harmonics={2: (0.003, 20.0)},
                        sigma=0.01, aux=[tilt(0.002, amplitude_2theta=0.5, walk_step=0.4)])
        scan = Scan.from_arrays(df["time_s"], df["angle_deg"], df["fringe"], aux={"tilt_urad": df["tilt_urad"]})
        fit = fit_scan(scan, aux=["tilt_urad"])
        q = stats.t.ppf(0.975, fit.dof)
        h = fit.harmonic(2)
        cover_c2 += abs(h.c - truth.scan.harmonic(2).c) <= q * h.sigma_c
        k_hat, k_sig = float(fit.aux_coef[0]), float(np.sqrt(fit.aux_cov[0, 0]))
        cover_k += abs(k_hat - 0.002) <= q * k_sig
    for covered in (cover_c2, cover_k):
        assert stats.binomtest(int(covered), n, 0.95).pvalue > 0.001, (cover_c2, cover_k)


def run_cli(*args):
    return subprocess.run([sys.executable, "-m", "nullfit.cli", *map(str, args)], capture_output=True, text=True,
                          timeout=300)


def test_simulate_command_round_trip(tmp_path):
    out = tmp_path / "plan.csv"
    r = run_cli("simulate", out, "--turns", "30", "--per-turn", "32", "--c2", "0.002", "--s2", "0.001",
                "--tilt", "0.5", "--tilt-walk", "0.4", "--tilt-coupling", "0.002", "--noise", "ar1", "--ar1", "0.5",
                "--seed", "11", "--arm-length", "11", "--wavelength", "5.5e-7")
    assert r.returncode == 0, r.stderr
    scan = read_scan(out)
    t = truth_from_notes(scan.meta.notes)
    assert t["seed"] == 11 and t["noise"] == {"kind": "ar1", "sigma": 0.01, "ar1_coef": 0.5, "flicker_alpha": None}
    assert t["harmonics"]["2"]["c"] == pytest.approx(0.002) and t["harmonics"]["2"]["s"] == pytest.approx(0.001)
    assert scan.meta.apparatus["arm_length_m"] == 11.0
    fit = fit_scan(scan, aux=["tilt_urad"])
    h = fit.harmonic(2)
    assert abs(h.c - 0.002) < 5 * h.sigma_c and abs(h.s - 0.001) < 5 * h.sigma_s
    assert abs(fit.aux_coef[0] - 0.002) < 5 * np.sqrt(fit.aux_cov[0, 0])
    # the same seed writes the same file; an existing file needs --force
    again = run_cli("simulate", out, "--turns", "30", "--seed", "11")
    assert again.returncode == 2 and "--force" in again.stderr and len(again.stderr.strip().splitlines()) == 1
    pq = tmp_path / "plan2.parquet"
    assert run_cli("simulate", pq, "--turns", "4", "--seed", "2", "--temperature", "1e-4").returncode == 0
    assert list(read_scan(pq).aux) == ["temperature_k"]


@pytest.mark.parametrize("args,needle", [
    (["--turns", "0"], "--turns"),
    (["--per-turn", "2"], "--per-turn"),
    (["--noise", "ar1"], "--ar1"),
    (["--ar1", "0.5"], "--noise ar1"),
    (["--noise", "ar1", "--ar1", "1.5"], "--ar1"),
    (["--amplitude", "0.1", "--c2", "0.1"], "--c2"),
    (["--tilt-coupling", "0.1"], "--tilt"),
    (["--marks", "16", "--turns", "1.01"], "marks"),
    (["--noise-sigma", "-1"], "--noise-sigma"),
    (["--start-utc", "not a time"], "--start-utc"),
    (["--arm-length", "11"], "--wavelength"),
])
def test_bad_options_are_one_line_errors(tmp_path, args, needle):
    r = run_cli("simulate", tmp_path / "x.csv", *args)
    assert r.returncode == 2, r.stdout
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and needle in lines[0] and "Traceback" not in r.stderr
    assert not (tmp_path / "x.csv").exists() and not (tmp_path / "x.toml").exists()


def test_bad_output_name(tmp_path):
    r = run_cli("simulate", tmp_path / "x.txt")
    assert r.returncode == 2 and ".csv" in r.stderr


def test_output_by_option_as_in_report_and_turns(tmp_path):
    r = run_cli("simulate", "-o", tmp_path / "o.csv", "--turns", "4", "--seed", "1")
    assert r.returncode == 0, r.stderr
    assert read_scan(tmp_path / "o.csv").n_turns >= 3
    for args in ([], [tmp_path / "a.csv", "-o", tmp_path / "b.csv"]):
        bad = run_cli("simulate", *args, "--turns", "4")
        lines = bad.stderr.strip().splitlines()
        assert bad.returncode == 2 and len(lines) == 1 and "OUT" in lines[0], bad.stderr
    assert not (tmp_path / "a.csv").exists() and not (tmp_path / "b.csv").exists()
