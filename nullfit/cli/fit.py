"""``nullfit fit LOG``: drift and harmonics, optional limits and expected signal."""

from __future__ import annotations

from .options import analyse_run, expected_options, fit_options, limit_options, print_json, read_log, scan_options


def add_parser(sub) -> None:
    f = sub.add_parser("fit", help="fit drift and harmonics; optional limits and expected signal")
    f.add_argument("scan", metavar="SCAN", help="CSV or Parquet log")
    scan_options(f)
    fit_options(f)
    limit_options(f)
    expected_options(f)
    f.add_argument("--json", action="store_true", help="print one JSON object on stdout")


def run(args) -> int:
    scan = read_log(args)
    result = analyse_run(args, scan, args.limits)
    if args.json:
        print_json(result.to_dict())
        return 0
    print(result.summary().as_text())
    if result.limits:
        print()
        print(result.limits_frame().to_string(index=False))
    return 0
