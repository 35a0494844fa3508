#!/usr/bin/env python
"""Make nullfit's demo data: INVENTED scenario, SYNTHETIC scans (nothing here was measured).

Every scan is drawn by :func:`nullfit.simulation.scans.simulate_frame` with a fixed seed and written as a
CSV log plus a TOML manifest (docs/manifest.md) of the same stem; ``truth.json`` records what was
put in.  The lab, site, apparatus and dates are invented (see data_demo/README.md).

Usage::

    python data_demo/make_demo.py            # writes into data_demo/, refuses to overwrite
    python data_demo/make_demo.py --force    # regenerate in place
    python data_demo/make_demo.py --out DIR  # somewhere else

The output is deterministic: tests/test_demo_data.py regenerates it and checks that it is
byte-identical to the committed files.  CSV precision: %.6f for relative seconds (microseconds for
Unix and ISO times), %.4f for angles, %.6g for the signal.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent

try:  # run from a checkout without installing: the package sits beside data_demo/
    from nullfit.simulation.logs import simulate_log, tilt
    from nullfit.simulation.models import Drift
    from nullfit.simulation.scans import SIGNAL_COLUMN, TIME_COLUMN, simulate_frame
except ImportError:  # pragma: no cover - depends on how the script is started
    sys.path.insert(0, str(HERE.parent))
    from nullfit.simulation.logs import simulate_log, tilt
    from nullfit.simulation.models import Drift
    from nullfit.simulation.scans import SIGNAL_COLUMN, TIME_COLUMN, simulate_frame

BANNER = "INVENTED scenario, SYNTHETIC data: made by data_demo/make_demo.py with nullfit.simulation; not a measurement."

# --------------------------------------------------------------------------- the invented scenario
LAB = "Brennmoor Optics Hall (INVENTED laboratory)"

SITE = {
    "name": "Brennmoor field station (INVENTED; the coordinates are those of a generic rural spot)",
    "latitude_deg": 58.391,
    "longitude_deg": 13.845,
    "elevation_m": 125.0,
    "mark_azimuth_deg": 23.5,
    "table_sense": "counterclockwise",
}

INTERFEROMETER = {
    "name": "BOH-2 folded two-arm interferometer on a rotating granite table (INVENTED)",
    "arm_length_m": 10.4,  # effective (folded) length: 8 passes of a 1.3 m arm
    "wavelength_m": 5.32e-07,  # frequency-doubled Nd:YAG, green
    "folds": 8,
    "physical_arm_m": 1.3,
    "signal": "fringe",
}

RESONATORS = {
    "name": "BOH-R crossed pair of optical resonators, beat note (nu1 - nu2)/nu (INVENTED)",
    "arm_length_m": 0.1,
    "wavelength_m": 1.064e-06,
    "signal": "fractional",
    "readout_sign": -1,
}


@dataclass(frozen=True)
class DemoScan:
    """One demo scan: where it goes, how its time is logged, what it shows, how it is drawn."""

    stem: str  # path of the log without extension, relative to the output folder
    run_id: str
    start_utc: str
    time_format: str  # "relative" (+ start_utc in the manifest), "unix" or "iso"
    story: str
    sim: dict[str, Any] = field(default_factory=dict)
    apparatus: dict[str, Any] = field(default_factory=lambda: INTERFEROMETER)
    aux: tuple = ()  # auxiliary channels (nullfit.simulation.logs.AuxChannel), coupled into the signal


def _campaign() -> list[DemoScan]:
    # seeds: the date followed by a 1 (the plain date seeds were drawn first and rejected: see README.md)
    days = [  # (date and start, seed, noise sigma, AR(1) coefficient, drift slope, extra keywords, remark)
        ("2026-05-04T21:40:00Z", 202605041, 0.008, 0.6, 3.0e-6, {}, "a calm night"),
        ("2026-05-06T22:05:00Z", 202605061, 0.010, 0.7, -5.0e-6, {}, "wind outside, slightly noisier"),
        ("2026-05-07T21:15:00Z", 202605071, 0.007, 0.5, 1.0e-6, {"angles_mod_360": False},
         "angles logged continuously (not modulo 360)"),
        ("2026-05-09T23:30:00Z", 202605091, 0.009, 0.6, 8.0e-6, {"sense": -1},
         "table turned in its negative sense"),
        ("2026-05-12T21:50:00Z", 202605121, 0.008, 0.6, -2.0e-6,
         {"gaps": [(600.0, 780.0)], "outliers": (0.002, 0.08)},
         "camera dropout from 600 s to 780 s (readings missing) and a few glitch readings of 0.08 fringe"),
        ("2026-05-14T22:20:00Z", 202605141, 0.012, 0.75, 4.0e-6, {}, "after a realignment, noisier"),
    ]
    out = []
    for i, (start, seed, sigma, rho, slope, extra, remark) in enumerate(days, start=1):
        sim = dict(n_turns=30, period_s=80.0, samples_per_turn=64, harmonics={1: (0.012 + 0.001 * i, 95.0 + 3 * i)},
                   drift=Drift(offset=0.1 * i, slope=slope, walk_step=5e-4), noise="ar1", ar1_coef=rho,
                   sigma=sigma, rng=seed)
        sim.update(extra)
        out.append(DemoScan(f"campaign/C{i:02d}", f"C{i:02d}", start, "relative",
                            f"Campaign run {i} of 6 ({remark}); no 2θ signal was injected (a null run).", sim))
    return out


SCANS: list[DemoScan] = [
    DemoScan(
        "quiet", "Q01", "2026-03-10T21:30:00Z", "relative",
        "A quiet night: white noise, a small tilt (1θ) term, a slow linear drift, no 2θ signal.",
        dict(n_turns=40, period_s=90.0, samples_per_turn=72, harmonics={1: (0.015, 110.0)},
             drift=Drift(offset=0.25, slope=2e-6), noise="white", sigma=0.006, rng=20260310),
    ),
    DemoScan(
        "drifting", "D01", "2026-03-11T22:10:00Z", "unix",
        "A drifting, noisy night: AR(1) noise plus a random-walk and quadratic drift; the table turned in "
        "its negative sense; time logged as Unix seconds; no 2θ signal.",
        dict(n_turns=48, period_s=75.0, samples_per_turn=96, harmonics={1: (0.02, 95.0)},
             drift=Drift(offset=-0.4, slope=1.5e-5, quadratic=-1e-9, walk_step=1.5e-3), noise="ar1",
             ar1_coef=0.9, sigma=0.012, sense=-1, rng=20260311),
    ),
    DemoScan(
        "injected_2theta", "S01", "2026-03-12T20:00:00Z", "iso",
        "A small injected 2θ signal (amplitude 8.0e-4 fringe, phase 35°; about 4 standard errors) read at "
        "16 marks per turn with the start mark read again at the end of every turn; ISO-8601 timestamps.",
        dict(n_turns=60, period_s=120.0, marks=16, repeat_start_mark=True,
             harmonics={1: (0.01, 100.0), 2: (8.0e-4, 35.0)}, drift=Drift(offset=0.05, slope=4e-6),
             noise="white", sigma=0.004, rng=20260312),
    ),
    DemoScan(
        "resonator_pair", "R01", "2026-04-02T01:00:00Z", "relative",
        "The crossed resonator pair: fractional frequency (Δν/ν) with flicker (1/f) noise, a linear drift "
        "and a tilt (1θ) term; no 2θ signal.",
        dict(n_turns=24, period_s=100.0, samples_per_turn=60, harmonics={1: (1.5e-15, 60.0)},
             drift=Drift(offset=2.0e-13, slope=2.0e-19), noise="flicker", flicker_alpha=1.0, sigma=4.0e-16,
             signal_unit="fractional", rng=20260402),
        RESONATORS,
    ),
    DemoScan(
        "tilted", "T01", "2026-03-13T21:00:00Z", "relative",
        "The granite table tilts as it turns: a tilt sensor (column tilt_urad, µrad) follows the rotation "
        "with its own 2θ part (0.8 µrad at 60°, growing and shrinking by 60 % as the bearing warms and cools "
        "over 40 minutes) plus a slow wander, and the fringe signal picks up 0.0025 fringe per µrad of tilt — "
        "a false 2θ of about 0.002 fringe; no true 2θ signal was injected.",
        dict(n_turns=50, period_s=90.0, samples_per_turn=48, harmonics={1: (0.01, 120.0)},
             drift=Drift(offset=0.15, slope=3e-6), noise="white", sigma=0.005, rng=20260313),
        aux=(tilt(0.0025, amplitude_2theta=0.8, phase_2theta_deg=60.0, walk_step=0.02, sensor_sigma=0.01,
                  modulation=0.6, modulation_period_s=2400.0),),
    ),
    *_campaign(),
]


# --------------------------------------------------------------------------- writing
def _epoch(start_utc: str) -> int:
    t = dt.datetime.fromisoformat(start_utc.replace("Z", "+00:00"))
    return int(t.timestamp())


def _sim_kwargs(spec: DemoScan) -> dict[str, Any]:
    return dict(spec.sim, epoch_unix=_epoch(spec.start_utc))


def _time_strings(spec: DemoScan, time_values) -> list[str]:
    if spec.time_format == "iso":
        return list(time_values)
    out = []
    epoch = _epoch(spec.start_utc) if spec.time_format == "unix" else 0
    base = time_values if spec.time_format == "relative" else time_values - epoch
    for t in base:  # integer microseconds: no float artefacts at Unix-time magnitudes
        us = int(round(float(t) * 1e6))
        out.append(f"{epoch + us // 1_000_000}.{us % 1_000_000:06d}")
    return out


def _csv_text(spec: DemoScan, df) -> str:
    cols = list(df.columns)
    times = _time_strings(spec, df[cols[0]].to_numpy())
    lines = [",".join(cols)]
    extra = [df[c].to_numpy() for c in cols[3:]]  # auxiliary channels
    for i, (t, a, y) in enumerate(zip(times, df[cols[1]].to_numpy(), df[cols[2]].to_numpy())):
        lines.append(",".join([t, f"{a:.4f}", f"{y:.6g}"] + [f"{x[i]:.6g}" for x in extra]))
    return "\n".join(lines) + "\n"


def _toml_str(s: str) -> str:
    return json.dumps(s, ensure_ascii=False)  # a JSON string is a valid TOML basic string


def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        return repr(v)
    return _toml_str(str(v))


def _truth_line(truth) -> str:
    u = truth.unit
    parts = [f"seed {truth.seed}"]
    for h in truth.harmonics:
        parts.append(f"{h.k}θ amplitude {h.amplitude:g} {u} at phase {h.phase_deg:g}°")
    if not truth.harmonic(2).amplitude:
        parts.append("2θ amplitude 0 (none injected)")
    d = truth.drift
    drift = [f"offset {d.offset:g} {u}", f"slope {d.slope:g} {u}/s"]
    if d.quadratic:
        drift.append(f"quadratic {d.quadratic:g} {u}/s²")
    if d.walk_step:
        drift.append(f"random-walk step {d.walk_step:g} {u} per reading")
    parts.append("drift " + ", ".join(drift))
    parts.append(f"noise {truth.noise.describe()}")
    if truth.n_removed:
        parts.append(f"{truth.n_removed} readings removed by gaps")
    if truth.n_outliers:
        parts.append(f"{truth.n_outliers} outliers of ±{truth.outlier_size:g} {u}")
    return "; ".join(parts) + "."


def _manifest_text(spec: DemoScan, truth, log_name: str) -> str:
    time_col = TIME_COLUMN[spec.time_format]
    sig_col = SIGNAL_COLUMN[truth.unit]
    lines = [f"# {BANNER}", f"# Manifest of {log_name} (format: docs/manifest.md).", "",
             "[scan]", f"run_id = {_toml_str(spec.run_id)}", "",
             "[columns]", f"time = {_toml_str(time_col)}", f"angle = {_toml_str('angle_deg')}",
             f"signal = {_toml_str(sig_col)}"]
    if spec.aux:
        lines.append("aux = [" + ", ".join(_toml_str(c.name) for c in spec.aux) + "]")
    lines += ["",
             "[units]", f"time = {_toml_str('iso' if spec.time_format == 'iso' else 's')}",
             f"angle = {_toml_str('deg')}", f"signal = {_toml_str(truth.unit)}", ""]
    if spec.time_format == "relative":
        lines += ["[time]", f"start_utc = {_toml_str(spec.start_utc)}", ""]
    lines.append("[apparatus]")
    lines += [f"{k} = {_toml_value(v)}" for k, v in spec.apparatus.items()]
    lines += ["", "[site]"]
    lines += [f"{k} = {_toml_value(v)}" for k, v in SITE.items()]
    channels = "".join(f" Channel {c.name} ({c.unit}): 2θ part {c.amplitude_2theta:g} at {c.phase_2theta_deg:g}° "
                       f"(modulated by ±{c.modulation:g} over {c.modulation_period_s:g} s), "
                       f"random-walk step {c.walk_step:g}, sensor noise {c.sensor_sigma:g}, coupled into the "
                       f"signal at {c.coupling:g} {truth.unit} per {c.unit}." for c in spec.aux)
    notes = (f"{BANNER}\nLaboratory: {LAB}. Site, apparatus and dates are invented too.\n"
             f"{spec.story}\nTruth: {_truth_line(truth)}{channels}")
    assert "'''" not in notes
    lines += ["", "[notes]", f"text = '''\n{notes}'''"]  # a multi-line literal string (no escapes)
    return "\n".join(lines) + "\n"


def _round(obj, digits: int = 12):
    """Round floats to ``digits`` significant digits so truth.json does not depend on the last bit
    of a platform's sin/cos."""
    if isinstance(obj, dict):
        return {k: _round(v, digits) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_round(v, digits) for v in obj]
    if isinstance(obj, float):
        return float(f"{obj:.{digits}g}")
    return obj


def planned_files(out_dir: Path) -> list[Path]:
    out_dir = Path(out_dir)
    files = []
    for spec in SCANS:
        files += [out_dir / f"{spec.stem}.csv", out_dir / f"{spec.stem}.toml"]
    return files + [out_dir / "truth.json"]


def make_demo(out_dir: Path | str = HERE, *, force: bool = False) -> list[Path]:
    """Write every demo scan (CSV + TOML) and truth.json into ``out_dir``; return the paths.

    Refuses (FileExistsError) to overwrite an existing file unless ``force``.
    """
    out_dir = Path(out_dir)
    files = planned_files(out_dir)
    existing = [p for p in files if p.exists()]
    if existing and not force:
        raise FileExistsError(f"{existing[0]} exists ({len(existing)} demo file(s) in {out_dir}); "
                              "pass --force to overwrite")
    truths = {}
    for spec in SCANS:
        if spec.aux:
            df, log_truth = simulate_log(aux=spec.aux, time_format=spec.time_format, **_sim_kwargs(spec))
            truth = log_truth.scan
        else:
            df, truth = simulate_frame(time_format=spec.time_format, **_sim_kwargs(spec))
        log = out_dir / f"{spec.stem}.csv"
        log.parent.mkdir(parents=True, exist_ok=True)
        with open(log, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(_csv_text(spec, df))
        with open(log.with_suffix(".toml"), "w", encoding="utf-8", newline="\n") as fh:
            fh.write(_manifest_text(spec, truth, log.name))
        d = truth.to_dict()
        if spec.aux:
            d["aux_channels"] = [{"name": c.name, "unit": c.unit, "coupling": c.coupling,
                                  "amplitude_2theta": c.amplitude_2theta, "phase_2theta_deg": c.phase_2theta_deg,
                                  "modulation": c.modulation, "modulation_period_s": c.modulation_period_s,
                                  "walk_step": c.walk_step, "sensor_sigma": c.sensor_sigma} for c in spec.aux]
        truths[spec.run_id] = {"log": f"{spec.stem}.csv", "start_utc": spec.start_utc,
                               "time_format": spec.time_format, "story": spec.story, **d}
    with open(out_dir / "truth.json", "w", encoding="utf-8", newline="\n") as fh:
        fh.write(json.dumps({"about": BANNER, "runs": _round(truths)}, indent=1, ensure_ascii=False) + "\n")
    return files


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description="Write nullfit's INVENTED, synthetic demo data.")
    ap.add_argument("--out", default=str(HERE), help="output folder (default: this script's folder)")
    ap.add_argument("--force", action="store_true", help="overwrite existing demo files")
    args = ap.parse_args(argv)
    try:
        files = make_demo(args.out, force=args.force)
    except FileExistsError as exc:
        print(f"make_demo: {exc}", file=sys.stderr)
        return 2
    print(f"wrote {len(files)} files into {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
