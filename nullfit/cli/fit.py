"""``nullfit fit LOG``: drift and harmonics, optional limits and expected signal."""

from __future__ import annotations

from .options import (analyse_run, expected_options, fit_options, limit_options, log_inputs, print_json, read_log,
                      scan_options, with_provenance)
from .wording import to_user_text


def add_parser(sub) -> None:
    f = sub.add_parser("fit", help="fit drift and harmonics; optional limits and expected signal",
                       description="Fit the drift and the harmonics of the table angle; print every fitted "
                                   "harmonic, χ²/dof, the rows dropped or left out, gaps and direction changes. "
                                   "With --limits, upper limits on the 2θ amplitude; with --speed or --wind, the "
                                   "expected signal and the ratio expected/bound.")
    f.add_argument("scan", metavar="SCAN", help="CSV or Parquet log")
    scan_options(f, aux=True)
    fit_options(f)
    limit_options(f, default="none; feldman-cousins when --speed or --wind is given")
    expected_options(f)
    f.add_argument("--stream", choices=("auto", "yes", "no"), default="auto",
                   help="read the log chunk by chunk: auto (default) for Parquet logs of 1 GiB or more; a progress "
                        "bar shows on a terminal")
    f.add_argument("--json", action="store_true", help="print one JSON object on stdout")


def run(args) -> int:
    scan = read_log(args)
    result = analyse_run(args, scan, args.limits)
    if args.json:
        print_json(with_provenance(result.to_dict(), inputs=log_inputs(args), settings=dict(result.settings),
                                   seeds={"run": result.seed}))
        return 0
    print(to_user_text(result.summary().as_text()))
    if result.limits or result.failed:
        import pandas as pd

        print()
        with pd.option_context("display.width", 200, "display.max_columns", 30, "display.max_colwidth", 90):
            print(result.limits_frame().to_string(index=False))
    return 0

