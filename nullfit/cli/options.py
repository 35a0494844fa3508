"""Shared pieces of the sub-commands: option groups, reading a log, printing JSON, the hypothesis
options, and the usage error.  Parsing and printing only."""

from __future__ import annotations

import argparse
import json

EXIT_BAD_INPUT = 2


class UsageError(Exception):
    """A problem with the command line or the files it names (exit 2, one line)."""


# --------------------------------------------------------------------------- parser
def column_options(p: argparse.ArgumentParser) -> argparse._ArgumentGroup:
    g = p.add_argument_group("reading the log")
    g.add_argument("--time", metavar="COL", help="time column (default: the manifest's, else time_s)")
    g.add_argument("--angle", metavar="COL", help="turntable angle column (default: the manifest's, else angle_deg)")
    g.add_argument("--signal", metavar="COL", help="signal column (default: the manifest's, else fringe)")
    g.add_argument("--angle-unit", choices=("deg", "rad"), default=None,
                   help="unit of the angle column (default: the manifest's, else deg)")
    g.add_argument("--signal-unit", choices=("fringe", "fractional"), default=None,
                   help="fringe or fractional frequency (default: the manifest's, else fringe)")
    return g


def scan_options(p: argparse.ArgumentParser, *, aux: bool = False) -> None:
    g = column_options(p)
    g.add_argument("--manifest", metavar="FILE", help="TOML manifest (default: SCAN's stem + .toml if present)")
    g.add_argument("--start-utc", metavar="TIME",
                   help="UTC time of t = 0 for a log with relative seconds, ISO-8601 (e.g. 2026-03-12T20:00:00Z); "
                        "default: the manifest's start_utc, else none (relative time only)")
    g.add_argument("--strict", action="store_true",
                   help="refuse NaN/inf readings instead of dropping and counting them")
    if aux:
        g.add_argument("--aux", metavar="COL[,COL]",
                       help="auxiliary columns (tilt, temperature …) to regress the signal on (default: none)")
        g.add_argument("--coupling", choices=("reading", "turn"), default="reading",
                       help="with --aux: correct the 2θ estimate by one coefficient per reading (default), or by "
                            "regressing the per-turn 2θ on the channels' (turn level); both are reported")


def fit_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("fit")
    g.add_argument("--harmonics", default="1,2", metavar="K,K",
                   help="harmonics of the table angle to fit (default 1,2)")
    g.add_argument("--drift", default="per-turn", metavar="MODEL",
                   help="per-turn | poly:DEG | spline:TURNS | none (default per-turn)")
    g.add_argument("--errors", default="turns", metavar="KIND",
                   help="turns | hac | ols | blocks:N (default turns: scatter of per-turn coefficients)")


def limit_options(p: argparse.ArgumentParser, *, default: str | None = None, single: bool = False) -> None:
    g = p.add_argument_group("upper limits on the 2θ amplitude")
    g.add_argument("--cl", type=float, default=0.95, metavar="LEVEL", help="confidence level (default 0.95)")
    what = "one of" if single else "comma list of"
    g.add_argument("--limits", default=None, metavar="METHOD" if single else "METHODS",
                   help=f"{what} feldman-cousins,neyman,bayes,bootstrap (default: {default or 'none'})")
    g.add_argument("--seed", type=int, default=None,
                   help="random seed for the bootstrap (recorded; default: a fresh one, printed when used)")


def expected_options(p: argparse.ArgumentParser, *, speed_default: str = "none") -> None:
    g = p.add_argument_group("expected signal (classical wind hypothesis)")
    g.add_argument("--arm-length", type=float, metavar="M",
                   help="effective (folded) arm length in metres (default: the manifest's [apparatus])")
    g.add_argument("--wavelength", type=float, metavar="M",
                   help="wavelength in metres (default: the manifest's [apparatus])")
    g.add_argument("--speed", type=float, metavar="M/S", help=f"assumed wind speed in m/s (default: {speed_default})")
    g.add_argument("--site", metavar="LAT,LON",
                   help="site latitude,longitude in degrees, east positive (default: the manifest's [site])")
    g.add_argument("--mark-azimuth", type=float, metavar="DEG",
                   help="geographic azimuth of the table's reference mark, degrees N through E "
                        "(default: the manifest's)")
    g.add_argument("--table-sense", choices=("clockwise", "counterclockwise"), default=None,
                   help="positive sense of the table angle seen from above (default: the manifest's, else clockwise)")
    g.add_argument("--wind", default=None, metavar="PRESET",
                   help="orbital | earth-rotation | cmb | custom:ra=RA,dec=DEC[,speed=V] (needs a site and a start "
                        "time); default: a fixed in-plane wind of --speed")


# --------------------------------------------------------------------------- reading
def split_list(text: str | None) -> list[str]:
    return [v.strip() for v in (text or "").split(",") if v.strip()]


def read_log(args, path=None):
    """Read ``args.scan`` (or ``path``) with the column, unit, start-time and aux options."""
    from dataclasses import replace
    from pathlib import Path

    from ..reading.files import read_scan
    from ..reading.manifest import Manifest, load_manifest

    path = args.scan if path is None else path
    kw = dict(time=args.time, angle=args.angle, signal=args.signal, angle_unit=args.angle_unit,
              signal_unit=getattr(args, "signal_unit", None),
              nonfinite="raise" if getattr(args, "strict", False) else "drop")
    start = getattr(args, "start_utc", None)
    aux = split_list(getattr(args, "aux", None))
    man = getattr(args, "manifest", None)
    if aux:
        kw["aux"] = aux
    if start is not None:  # the start time goes in as the manifest's [time] start_utc
        start = normalise_utc(start)
        if Path(path).is_file():
            man = replace(load_manifest(man, Path(path)) or Manifest(), start_utc=start)
    if streaming(args, path):
        from ..reading.stream import open_stream

        return open_stream(path, manifest=man, **kw)
    return read_scan(path, manifest=man, **kw)


def streaming(args, path) -> bool:
    """Read ``path`` chunk by chunk?  ``--stream yes``; or ``auto`` (the default) for a Parquet log of at
    least ``nullfit.fitting.stream.STREAM_MIN_BYTES``."""
    from pathlib import Path

    choice = getattr(args, "stream", "no")
    if choice == "no" or not Path(path).is_file():
        return False
    from ..fitting.stream import is_parquet, streams_by_default

    if choice == "yes":
        if not is_parquet(path):
            raise UsageError("--stream yes reads Parquet logs only (convert the CSV log to Parquet)")
        return True
    return streams_by_default(path)


def normalise_utc(text: str) -> str:
    """``--start-utc`` as the reader's normalised ISO-8601 UTC text (a one-line error if it is not a time)."""
    from ..reading.timebase import ns_to_iso, utc_to_ns

    try:
        return ns_to_iso(utc_to_ns(text))
    except (ValueError, TypeError, OverflowError):
        raise UsageError(f"--start-utc must be an ISO-8601 UTC time such as 2026-03-12T20:00:00Z, not {text!r}") \
            from None


def print_json(obj) -> None:
    from ..core.render import jsonable

    print(json.dumps(jsonable(obj), indent=2, allow_nan=False))


def with_provenance(d: dict, *, inputs=(), settings=None, seeds=None) -> dict:
    """``{"version", "provenance", ...d}``: the package version and what reproduces the result."""
    from .. import __version__
    from ..core.provenance import provenance

    prov = provenance(inputs, settings=settings, seeds=seeds)
    prov.pop("dropped_rows", None)  # the counts are in the result itself
    return {"version": __version__, "provenance": prov, **d}


def log_inputs(args, path=None) -> list:
    """The files a log was read from: the log and its manifest (if any)."""
    from pathlib import Path

    from ..reading.manifest import find_manifest

    p = Path(args.scan if path is None else path)
    out = [p]
    man = Path(args.manifest) if getattr(args, "manifest", None) else find_manifest(p)
    if man is not None and man.is_file():
        out.append(man)
    return out


# --------------------------------------------------------------------------- hypothesis
def parse_site(text: str) -> tuple[float, float]:
    """``--site LAT,LON`` in degrees."""
    try:
        lat, lon = (float(v) for v in text.split(","))
    except ValueError:
        raise UsageError(f"--site must be LAT,LON in degrees (e.g. 58.39,13.85), not {text!r}") from None
    return lat, lon


def hypothesis(args, scan=None):
    """(apparatus, site, velocity, speed) from the command line; None where not given.  The site
    options override single keys of the manifest's ``[site]`` when ``scan`` has one."""
    apparatus = site = velocity = None
    if (args.arm_length is None) != (args.wavelength is None):
        raise UsageError("give both --arm-length and --wavelength (or neither, to use the manifest's apparatus)")
    if args.arm_length is not None:
        from ..hypothesis.apparatus import Apparatus

        apparatus = Apparatus(args.arm_length, args.wavelength)
    site_keys: dict = {}
    given = (args.site, args.mark_azimuth, getattr(args, "table_sense", None))
    if scan is not None and getattr(scan.meta, "site", None) and any(v is not None for v in given):
        site_keys = dict(scan.meta.site)
    if args.site is not None:
        lat, lon = parse_site(args.site)
        site_keys.update(latitude_deg=lat, longitude_deg=lon)
    if args.mark_azimuth is not None:
        site_keys["mark_azimuth_deg"] = args.mark_azimuth
    if getattr(args, "table_sense", None) is not None:
        site_keys["table_sense"] = args.table_sense
    if site_keys:
        if "latitude_deg" not in site_keys or "longitude_deg" not in site_keys:
            raise UsageError("--mark-azimuth/--table-sense need a site: give --site LAT,LON "
                             "(or [site] latitude_deg and longitude_deg in the manifest)")
        from ..hypothesis.site import Site

        site = Site.from_mapping(site_keys)
    if args.wind is not None:
        from ..hypothesis.velocities import parse_velocity

        velocity = parse_velocity(args.wind)
    if apparatus is not None and args.speed is None and velocity is None:
        raise UsageError("--arm-length/--wavelength predict a signal only with --speed or --wind")
    return apparatus, site, velocity, args.speed


def analyse_run(args, scan, limits):
    from ..campaign.analysis import analyse

    apparatus, site, velocity, speed = hypothesis(args, scan)
    return analyse(scan, harmonics=args.harmonics, drift=args.drift, errors=args.errors, limits=limits,
                   confidence_level=args.cl, rng=args.seed, apparatus=apparatus, site=site, velocity=velocity,
                   speed_m_s=speed, progress=False if getattr(args, "json", False) else None,
                   aux=split_list(getattr(args, "aux", None)) or None, coupling=getattr(args, "coupling", "reading"))
