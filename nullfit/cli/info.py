"""``nullfit info LOG``: what a log holds (turns, marks, dropped rows)."""

from __future__ import annotations

from .options import print_json, read_log, scan_options


def add_parser(sub) -> None:
    i = sub.add_parser("info", help="read a scan log and print what it holds")
    i.add_argument("scan", metavar="SCAN", help="CSV or Parquet log")
    scan_options(i)
    i.add_argument("--json", action="store_true", help="print one JSON object")


def run(args) -> int:
    scan = read_log(args)
    if args.json:
        print_json(scan.to_dict())
    else:
        print(scan.summary().as_text())
    return 0
