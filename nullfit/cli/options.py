"""Shared pieces of the sub-commands: option groups, reading a log, printing JSON, the hypothesis
options, and the usage error.  Parsing and printing only."""

from __future__ import annotations

import argparse
import json

EXIT_BAD_INPUT = 2


class UsageError(Exception):
    """A problem with the command line or the files it names (exit 2, one line)."""


# --------------------------------------------------------------------------- parser
def scan_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("reading the log")
    g.add_argument("--time", metavar="COL", help="time column (default time_s or the manifest's)")
    g.add_argument("--angle", metavar="COL", help="turntable angle column (default angle_deg)")
    g.add_argument("--signal", metavar="COL", help="signal column (default fringe)")
    g.add_argument("--angle-unit", choices=("deg", "rad"), default=None,
                   help="unit of the angle column (default deg, or the manifest's)")
    g.add_argument("--manifest", metavar="FILE", help="TOML manifest (default: SCAN's stem + .toml if present)")
    g.add_argument("--strict", action="store_true",
                   help="refuse NaN/inf readings instead of dropping and counting them")


def fit_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("fit")
    g.add_argument("--harmonics", default="1,2", metavar="K,K",
                   help="harmonics of the table angle to fit (default 1,2)")
    g.add_argument("--drift", default="per-turn", metavar="MODEL",
                   help="per-turn | poly:DEG | spline:TURNS | none (default per-turn)")
    g.add_argument("--errors", default="turns", metavar="KIND",
                   help="turns | hac | ols | blocks:N (default turns: scatter of per-turn coefficients)")


def limit_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("upper limits on the 2θ amplitude")
    g.add_argument("--cl", type=float, default=0.95, metavar="LEVEL", help="confidence level (default 0.95)")
    g.add_argument("--limits", default=None, metavar="METHODS",
                   help="comma list of feldman-cousins,neyman,bayes,bootstrap (default: none for fit)")
    g.add_argument("--seed", type=int, default=None, help="random seed for bootstrap/simulation (recorded)")


def expected_options(p: argparse.ArgumentParser) -> None:
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



def read_log(args):
    from ..reading.files import read_scan

    return read_scan(args.scan, time=args.time, angle=args.angle, signal=args.signal,
                     angle_unit=args.angle_unit, manifest=args.manifest,
                     nonfinite="raise" if args.strict else "drop")


def print_json(obj) -> None:
    from ..core.render import jsonable

    print(json.dumps(jsonable(obj), indent=2, allow_nan=False))




def hypothesis(args):
    """(apparatus, site, velocity, speed) from the command line; None where not given."""
    apparatus = site = velocity = None
    if (args.arm_length is None) != (args.wavelength is None):
        raise UsageError("give both --arm-length and --wavelength (or neither, to use the manifest's apparatus)")
    if args.arm_length is not None:
        from ..hypothesis.apparatus import Apparatus

        apparatus = Apparatus(args.arm_length, args.wavelength)
    if args.site is not None:
        from ..hypothesis.site import Site

        try:
            lat, lon = (float(v) for v in args.site.split(","))
        except ValueError:
            raise UsageError(f"--site must be LAT,LON in degrees (e.g. 58.39,13.85), not {args.site!r}") from None
        site = Site(lat, lon, mark_azimuth_deg=args.mark_azimuth)
    elif args.mark_azimuth is not None:
        raise UsageError("--mark-azimuth needs --site LAT,LON")
    if args.wind is not None:
        from ..hypothesis.velocities import parse_velocity

        velocity = parse_velocity(args.wind)
    if apparatus is not None and args.speed is None and velocity is None:
        raise UsageError("--arm-length/--wavelength predict a signal only with --speed or --wind")
    return apparatus, site, velocity, args.speed


def analyse_run(args, scan, limits):
    from ..campaign.analysis import analyse

    apparatus, site, velocity, speed = hypothesis(args)
    return analyse(scan, harmonics=args.harmonics, drift=args.drift, errors=args.errors, limits=limits,
                   confidence_level=args.cl, rng=args.seed, apparatus=apparatus, site=site, velocity=velocity,
                   speed_m_s=speed, progress=False if getattr(args, "json", False) else None)
