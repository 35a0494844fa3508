"""``nullfit report LOG -o FILE``: one self-contained HTML report for a scan."""

from __future__ import annotations

from pathlib import Path

from .options import analyse_run, expected_options, fit_options, limit_options, read_log, scan_options


def add_parser(sub) -> None:
    r = sub.add_parser("report", help="one self-contained HTML report for a scan")
    r.add_argument("scan", metavar="SCAN", help="CSV or Parquet log")
    scan_options(r)
    fit_options(r)
    limit_options(r)
    expected_options(r)
    r.add_argument("-o", "--output", metavar="FILE", default="report.html", help="output HTML file")
    r.add_argument("--force", action="store_true", help="overwrite an existing output file")


def run(args) -> int:
    import matplotlib

    matplotlib.use("Agg")
    from ..output.files import check_output_file
    from ..output.scan_report import scan_report
    from ..reading.manifest import find_manifest

    out = check_output_file(args.output, force=args.force,
                            inputs=[args.scan] + ([args.manifest] if args.manifest else []))
    scan = read_log(args)
    result = analyse_run(args, scan, args.limits or "feldman-cousins,neyman,bayes,bootstrap")
    inputs = [Path(args.scan)]
    man = Path(args.manifest) if args.manifest else find_manifest(Path(args.scan))
    if man is not None:
        inputs.append(man)
    html = scan_report(result, inputs=inputs, settings={"command": "nullfit report"})
    out.write_text(html, encoding="utf-8")
    print(f"report written to {out}")
    return 0
