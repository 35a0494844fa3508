"""``nullfit report LOG [-o FILE]``: one self-contained HTML report for a scan."""

from __future__ import annotations

from .options import (analyse_run, expected_options, fit_options, limit_options, log_inputs, read_log,
                      scan_options)

DEFAULT_LIMITS = "feldman-cousins,neyman,bayes,bootstrap"


def add_parser(sub) -> None:
    r = sub.add_parser("report", help="one self-contained HTML report for a scan",
                       description="Fit, limits (all four routes unless --limits), expected signal when a "
                                   "hypothesis is given, figures and provenance in one HTML file.")
    r.add_argument("scan", metavar="SCAN", help="CSV or Parquet log")
    scan_options(r, aux=True)
    fit_options(r)
    limit_options(r, default=DEFAULT_LIMITS)
    expected_options(r)
    r.add_argument("-o", "--output", metavar="FILE", default="report.html",
                   help="output HTML file (default: report.html in the current folder)")
    r.add_argument("--force", action="store_true", help="overwrite an existing output file")


def run(args) -> int:
    import matplotlib

    matplotlib.use("Agg")
    from ..output.files import check_output_file
    from ..output.scan_report import scan_report

    inputs = log_inputs(args)
    out = check_output_file(args.output, force=args.force, inputs=inputs)
    scan = read_log(args)
    result = analyse_run(args, scan, args.limits or DEFAULT_LIMITS)
    html = scan_report(result, inputs=inputs, settings={"command": "nullfit report"})
    out.write_text(html, encoding="utf-8")
    print(f"report written to {out}")
    return 0
