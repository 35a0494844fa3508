#!/usr/bin/env python
"""Make the sky demo: a per-turn table of a year of INVENTED, SYNTHETIC resonator-pair logs.

The invented Brennmoor Optics Hall runs its crossed resonator pair "BOH-R" (fractional beat
``(ν₁ − ν₂)/ν``, ``readout_sign = -1``) for one whole day every week of 2026.  Every run is simulated
reading by reading (:func:`nullfit.simulation.sky.simulate_sky_campaign`: AR(1) noise, drift with a
random walk, a 1θ tilt term, a lab-fixed 2θ term of random phase per run) with **no** sky signal —
special relativity holds in this invented world — and demodulated turn by turn
(:meth:`nullfit.campaign.turn_table.TurnTable.from_scans`).  Only the per-turn table is kept
(``sky_turns.parquet``); its metadata say INVENTED and SYNTHETIC and record the seed and the truth.

Usage::

    python data_demo/make_sky_demo.py            # writes data_demo/sky_turns.parquet, refuses to overwrite
    python data_demo/make_sky_demo.py --force    # regenerate in place
    python data_demo/make_sky_demo.py --out DIR  # somewhere else

Deterministic: ``tests/simulation/test_sky_demo_data.py`` regenerates the table and checks that its
rows and metadata equal the committed file's.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent

try:  # run from a checkout without installing: the package sits beside data_demo/
    from nullfit.campaign.turn_table import TurnTable
    from nullfit.hypothesis.apparatus import Apparatus
    from nullfit.hypothesis.site import Site
    from nullfit.simulation.sky import campaign_schedule, simulate_sky_campaign
except ImportError:  # pragma: no cover - depends on how the script is started
    sys.path.insert(0, str(HERE.parent))
    from nullfit.campaign.turn_table import TurnTable
    from nullfit.hypothesis.apparatus import Apparatus
    from nullfit.hypothesis.site import Site
    from nullfit.simulation.sky import campaign_schedule, simulate_sky_campaign

FILE = "sky_turns.parquet"
BANNER = ("INVENTED scenario, SYNTHETIC data: made by data_demo/make_sky_demo.py with nullfit.simulation; "
          "not a measurement.")
SEED = 2026_0105
START_UNIX = 1_767_571_200  # 2026-01-05 00:00:00 UTC
SITE = Site(58.391, 13.845, elevation_m=125.0, mark_azimuth_deg=23.5, table_sense="counterclockwise",
            name="Brennmoor field station (INVENTED; the coordinates are those of a generic rural spot)")
PAIR = Apparatus(None, 1.064e-06, signal="fractional", readout_sign=-1,
                 name="BOH-R crossed optical resonator pair, beat (nu1 - nu2)/nu (INVENTED)")
#: Noise and nuisance of every run (fractional units).
SIM = {"period_s": 300.0, "samples_per_turn": 16, "sigma": 3e-15, "noise": "ar1", "ar1_coef": 0.5,
       "lab_amplitude": 5e-16, "harmonics": {1: (2e-14, 75.0)},
       "drift": {"offset": 1e-12, "slope": 3e-18, "walk_step": 2e-17}}


def make_table() -> TurnTable:
    """The demo's per-turn table (in memory)."""
    schedule = campaign_schedule("days", n_runs=52, span_days=364.0, start_unix=START_UNIX, prefix="W")
    scans, truth = simulate_sky_campaign("sme", {}, site=SITE, apparatus=PAIR, schedule=schedule, rng=SEED, **SIM)
    settings = {"scenario": BANNER, "laboratory": "Brennmoor Optics Hall (INVENTED laboratory)",
                "seed": SEED, "truth": {"model": "sme", "parameters": truth.parameters.as_dict(),
                                        "note": "no sky signal injected (special relativity holds here)"},
                "simulation": {k: (v if not isinstance(v, dict) else {str(a): b for a, b in v.items()})
                               for k, v in SIM.items()},
                "lab_terms": {r: list(v) for r, v in truth.lab_terms.items()}}
    return TurnTable.from_scans(scans, harmonics=(1, 2), settings=settings)


def make_sky_demo(out_dir: Path | str = HERE, *, force: bool = False) -> Path:
    """Write ``sky_turns.parquet`` into ``out_dir``; refuses to overwrite unless ``force``."""
    out = Path(out_dir) / FILE
    if out.exists() and not force:
        raise FileExistsError(f"{out} exists; pass --force to overwrite")
    out.parent.mkdir(parents=True, exist_ok=True)
    return make_table().write(out)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description="Write nullfit's INVENTED, synthetic sky demo (a per-turn table).")
    ap.add_argument("--out", default=str(HERE), help="output folder (default: this script's folder)")
    ap.add_argument("--force", action="store_true", help="overwrite an existing file")
    args = ap.parse_args(argv)
    try:
        path = make_sky_demo(args.out, force=args.force)
    except FileExistsError as exc:
        print(f"make_sky_demo: {exc}", file=sys.stderr)
        return 2
    print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
