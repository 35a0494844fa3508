"""The ``nullfit`` command.  Parsing and printing only: every result comes from the library.

Exit codes: 0 success; 2 bad input or usage (one line on stderr, never a traceback).
Heavy libraries are imported inside the sub-command handlers so ``nullfit --help`` is instant.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

EXIT_BAD_INPUT = 2


class UsageError(Exception):
    """A problem with the command line or the files it names (exit 2, one line)."""


# --------------------------------------------------------------------------- parser
def _scan_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("reading the log")
    g.add_argument("--time", metavar="COL", help="time column (default time_s or the manifest's)")
    g.add_argument("--angle", metavar="COL", help="turntable angle column (default angle_deg)")
    g.add_argument("--signal", metavar="COL", help="signal column (default fringe)")
    g.add_argument("--angle-unit", choices=("deg", "rad"), default=None,
                   help="unit of the angle column (default deg, or the manifest's)")
    g.add_argument("--manifest", metavar="FILE", help="TOML manifest (default: SCAN's stem + .toml if present)")
    g.add_argument("--strict", action="store_true",
                   help="refuse NaN/inf readings instead of dropping and counting them")


def _fit_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("fit")
    g.add_argument("--harmonics", default="1,2", metavar="K,K",
                   help="harmonics of the table angle to fit (default 1,2)")
    g.add_argument("--drift", default="per-turn", metavar="MODEL",
                   help="per-turn | poly:DEG | spline:TURNS | none (default per-turn)")
    g.add_argument("--errors", default="turns", metavar="KIND",
                   help="turns | hac | ols | blocks:N (default turns: scatter of per-turn coefficients)")


def _limit_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("upper limits on the 2θ amplitude")
    g.add_argument("--cl", type=float, default=0.95, metavar="LEVEL", help="confidence level (default 0.95)")
    g.add_argument("--limits", default=None, metavar="METHODS",
                   help="comma list of feldman-cousins,neyman,bayes,bootstrap (default: none for fit)")
    g.add_argument("--seed", type=int, default=None, help="random seed for bootstrap/simulation (recorded)")


def _expected_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("expected signal (classical wind hypothesis)")
    g.add_argument("--arm-length", type=float, metavar="M", help="effective (folded) arm length in metres")
    g.add_argument("--wavelength", type=float, metavar="M", help="wavelength in metres")
    g.add_argument("--speed", type=float, metavar="M/S", help="assumed wind speed in m/s")
    g.add_argument("--site", metavar="LAT,LON", help="site latitude,longitude in degrees (east positive)")
    g.add_argument("--mark-azimuth", type=float, metavar="DEG",
                   help="geographic azimuth of the table's reference mark (degrees, N through E)")
    g.add_argument("--wind", default=None, metavar="PRESET",
                   help="orbital | earth-rotation | cmb | custom:ra=RA,dec=DEC[,speed=V] (needs a site); "
                        "default: fixed in-plane wind of --speed")


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="nullfit",
        description="Second-harmonic (2θ) amplitude, upper limits and expected-vs-bound ratios "
                    "from rotating-interferometer and resonator-pair scan logs.",
        epilog="Exit status: 0 on success, 2 on bad input (one line on stderr).",
    )
    p.add_argument("--version", action="store_true", help="print the version and exit")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    d = sub.add_parser("demo", help="the whole job on the bundled (invented) demo data")
    d.add_argument("--data", metavar="DIR", help="demo data folder (default: the bundled data_demo)")
    d.add_argument("-o", "--out", metavar="DIR", default="nullfit-demo",
                   help="output folder for figures and report (default ./nullfit-demo)")
    d.add_argument("--force", action="store_true", help="overwrite an existing output folder's files")
    d.add_argument("--seed", type=int, default=20261201, help="random seed (recorded)")
    d.add_argument("--no-output", action="store_true", help="print the summary only; write no files")

    i = sub.add_parser("info", help="read a scan log and print what it holds")
    i.add_argument("scan", metavar="SCAN", help="CSV or Parquet log")
    _scan_options(i)
    i.add_argument("--json", action="store_true", help="print one JSON object")

    f = sub.add_parser("fit", help="fit drift and harmonics; optional limits and expected signal")
    f.add_argument("scan", metavar="SCAN", help="CSV or Parquet log")
    _scan_options(f)
    _fit_options(f)
    _limit_options(f)
    _expected_options(f)
    f.add_argument("--json", action="store_true", help="print one JSON object on stdout")

    c = sub.add_parser("compare", help="run table across many scans (expected vs bound)",
                       description="One row per run: expected 2θ amplitude and peak-to-peak, the upper limit "
                                   "(one method, default feldman-cousins) as amplitude and peak-to-peak, their "
                                   "ratio and the speed bound. Without --speed the wind speed is 30000 m/s.")
    c.add_argument("runs", nargs="+", metavar="RUN", help="scan logs (manifests beside them)")
    _fit_options(c)
    _limit_options(c)
    _expected_options(c)
    out = c.add_mutually_exclusive_group()
    out.add_argument("--json", action="store_true", help="print JSON")
    out.add_argument("--csv", action="store_true", help="print CSV")

    r = sub.add_parser("report", help="one self-contained HTML report for a scan")
    r.add_argument("scan", metavar="SCAN", help="CSV or Parquet log")
    _scan_options(r)
    _fit_options(r)
    _limit_options(r)
    _expected_options(r)
    r.add_argument("-o", "--output", metavar="FILE", default="report.html", help="output HTML file")
    r.add_argument("--force", action="store_true", help="overwrite an existing output file")
    return p


# --------------------------------------------------------------------------- helpers
def _read(args):
    from .reading.files import read_scan

    return read_scan(args.scan, time=args.time, angle=args.angle, signal=args.signal,
                     angle_unit=args.angle_unit, manifest=args.manifest,
                     nonfinite="raise" if args.strict else "drop")


def _print_json(obj) -> None:
    from .core.render import jsonable

    print(json.dumps(jsonable(obj), indent=2, allow_nan=False))


# --------------------------------------------------------------------------- commands
def cmd_info(args) -> int:
    scan = _read(args)
    if args.json:
        _print_json(scan.to_dict())
    else:
        print(scan.summary().as_text())
    return 0


def _hypothesis(args):
    """(apparatus, site, velocity, speed) from the command line; None where not given."""
    apparatus = site = velocity = None
    if (args.arm_length is None) != (args.wavelength is None):
        raise UsageError("give both --arm-length and --wavelength (or neither, to use the manifest's apparatus)")
    if args.arm_length is not None:
        from .hypothesis.apparatus import Apparatus

        apparatus = Apparatus(args.arm_length, args.wavelength)
    if args.site is not None:
        from .hypothesis.site import Site

        try:
            lat, lon = (float(v) for v in args.site.split(","))
        except ValueError:
            raise UsageError(f"--site must be LAT,LON in degrees (e.g. 58.39,13.85), not {args.site!r}") from None
        site = Site(lat, lon, mark_azimuth_deg=args.mark_azimuth)
    elif args.mark_azimuth is not None:
        raise UsageError("--mark-azimuth needs --site LAT,LON")
    if args.wind is not None:
        from .hypothesis.velocities import parse_velocity

        velocity = parse_velocity(args.wind)
    if apparatus is not None and args.speed is None and velocity is None:
        raise UsageError("--arm-length/--wavelength predict a signal only with --speed or --wind")
    return apparatus, site, velocity, args.speed


def _analyse(args, scan, limits):
    from .campaign.analysis import analyse

    apparatus, site, velocity, speed = _hypothesis(args)
    return analyse(scan, harmonics=args.harmonics, drift=args.drift, errors=args.errors, limits=limits,
                   confidence_level=args.cl, rng=args.seed, apparatus=apparatus, site=site, velocity=velocity,
                   speed_m_s=speed, progress=False if getattr(args, "json", False) else None)


def cmd_fit(args) -> int:
    scan = _read(args)
    run = _analyse(args, scan, args.limits)
    if args.json:
        _print_json(run.to_dict())
        return 0
    print(run.summary().as_text())
    if run.limits:
        print()
        print(run.limits_frame().to_string(index=False))
    return 0


def cmd_compare(args) -> int:
    from .campaign.runs import compare_runs

    apparatus, site, velocity, speed = _hypothesis(args)
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


def cmd_report(args) -> int:
    import matplotlib

    matplotlib.use("Agg")
    from .output.files import check_output_file
    from .output.scan_report import scan_report

    out = check_output_file(args.output, force=args.force, inputs=[args.scan] + ([args.manifest] if args.manifest else []))
    scan = _read(args)
    run = _analyse(args, scan, args.limits or "feldman-cousins,neyman,bayes,bootstrap")
    inputs = [Path(args.scan)]
    from .reading.manifest import find_manifest

    man = Path(args.manifest) if args.manifest else find_manifest(Path(args.scan))
    if man is not None:
        inputs.append(man)
    html = scan_report(run, inputs=inputs, settings={"command": "nullfit report"})
    out.write_text(html, encoding="utf-8")
    print(f"report written to {out}")
    return 0


def cmd_demo(args) -> int:
    from .output.demo import run_demo

    return run_demo(data=args.data, out=None if args.no_output else args.out, force=args.force, seed=args.seed)


COMMANDS = {"info": cmd_info, "demo": cmd_demo, "fit": cmd_fit, "compare": cmd_compare, "report": cmd_report}


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.version:
        from . import __version__

        print(f"nullfit {__version__}")
        return 0
    if not args.command:
        parser.print_help()
        return 0
    handler = COMMANDS.get(args.command)
    if handler is None:
        print(f"nullfit: the '{args.command}' command is not available in this version", file=sys.stderr)
        return EXIT_BAD_INPUT
    try:
        return handler(args)
    except (UsageError, FileExistsError, FileNotFoundError, IsADirectoryError, PermissionError) as err:
        print(f"nullfit: {_one_line(err)}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except ValueError as err:  # ScanError is a ValueError; so are nullfit's checks of option values
        if not _raised_by_nullfit(err):
            raise  # a ValueError from inside a library is a bug, not bad input: keep its traceback
        print(f"nullfit: {_one_line(err)}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except BrokenPipeError:  # pragma: no cover - e.g. `nullfit fit ... | head`
        return 0


def _raised_by_nullfit(err: BaseException) -> bool:
    """True when the innermost frame that raised ``err`` is nullfit's own code."""
    tb = err.__traceback__
    last = None
    while tb is not None:
        last = tb
        tb = tb.tb_next
    if last is None:
        return True
    return Path(last.tb_frame.f_code.co_filename).resolve().is_relative_to(Path(__file__).resolve().parent)


def _one_line(err: BaseException) -> str:
    if isinstance(err, OSError) and err.filename is not None and err.strerror:
        return f"{err.filename}: {err.strerror}"
    text = str(err).strip() or type(err).__name__
    return " ".join(text.split())


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
