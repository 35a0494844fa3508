"""``nullfit compare LOGS...``: the run table (expected vs bound, one row per run)."""

from __future__ import annotations

from .options import UsageError, expected_options, fit_options, hypothesis, limit_options


def add_parser(sub) -> None:
    c = sub.add_parser("compare", help="run table across many scans (expected vs bound)",
                       description="One row per run: expected 2θ amplitude and peak-to-peak, the upper limit "
                                   "(one method, default feldman-cousins) as amplitude and peak-to-peak, their "
                                   "ratio and the speed bound. Without --speed the wind speed is 30000 m/s.")
    c.add_argument("runs", nargs="+", metavar="RUN", help="scan logs (manifests beside them)")
    fit_options(c)
    limit_options(c)
    expected_options(c)
    out = c.add_mutually_exclusive_group()
    out.add_argument("--json", action="store_true", help="print JSON")
    out.add_argument("--csv", action="store_true", help="print CSV")


def run(args) -> int:
    from ..campaign.runs import compare_runs

    apparatus, site, velocity, speed = hypothesis(args)
    methods = [m for m in (args.limits or "feldman-cousins").split(",") if m.strip()]
    if len(methods) != 1:
        raise UsageError("compare puts one limit method in the run table: give --limits METHOD (e.g. neyman)")
    table = compare_runs(args.runs, harmonics=args.harmonics, drift=args.drift, errors=args.errors,
                         method=methods[0].strip(), confidence_level=args.cl,
                         rng=args.seed, apparatus=apparatus, site=site, velocity=velocity,
                         speed_m_s=speed if speed is not None else 30_000.0)
    if args.json:
        print(table.to_json(orient="records", indent=2))
    elif args.csv:
        print(table.to_csv(index=False), end="")
    else:
        import pandas as pd

        with pd.option_context("display.width", 200, "display.max_columns", 30):
            print(table.to_string(index=False))
    return 0
