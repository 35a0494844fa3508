"""``nullfit sidereal LOGS_OR_TURN_TABLE...``: SME or RMS parameters from a campaign."""

from __future__ import annotations

from pathlib import Path

from .options import UsageError, print_json, with_provenance
from .wording import to_user_text


def add_parser(sub) -> None:
    s = sub.add_parser("sidereal", help="SME / RMS parameters from a campaign (sidereal and annual analysis)",
                       description="Fit the per-turn 2θ coefficients of a campaign to the sidereal model of the "
                                   "SME photon sector (8 coefficients; e_ZZ only with --use-c0) or of RMS (P_MM). "
                                   "Inputs are per-turn tables (.parquet written by nullfit) and/or scan logs with "
                                   "manifests giving absolute time, site (with mark azimuth) and apparatus; logs "
                                   "are demodulated turn by turn first. Conventions: docs/sky.md.")
    s.add_argument("inputs", nargs="+", metavar="LOG_OR_TURN_TABLE", help="scan logs and/or per-turn tables")
    s.add_argument("--model", choices=("sme", "rms"), default="sme", help="test theory (default sme)")
    s.add_argument("--route", choices=("global", "days"), default="global",
                   help="global fit with jackknife errors (default), or per-sidereal-day demodulation")
    s.add_argument("--use-c0", action="store_true", help="use C₀ for e_ZZ (default: C₀ and B₀ are nuisance)")
    s.add_argument("--combined", action="store_true",
                   help="SME: fit κ̃_e− alone, κ̃_o+ folded in (for spans well short of a year)")
    s.add_argument("--segments", choices=("day", "run"), default="day",
                   help="global route: offsets and jackknife per sidereal day (default) or per run")
    s.add_argument("--weights", choices=("segment", "turn", "equal"), default="segment",
                   help="per-turn weights: segment scatter (default), per-turn errors, or equal")
    s.add_argument("--orbit", choices=("circular", "ephemeris"), default="circular",
                   help="Earth's orbital velocity: circular formula (default) or astropy's ephemeris")
    s.add_argument("--single-resonator", action="store_true",
                   help="one resonator turning against a fixed one (half the pair's signal)")
    s.add_argument("--cl", type=float, default=0.95, metavar="LEVEL", help="confidence level (default 0.95)")
    s.add_argument("--bounds", action="store_true",
                   help="print published bounds beside the campaign's (the bundled table holds orders of "
                        "magnitude recalled from memory)")
    s.add_argument("--bounds-table", metavar="CSV", default=None,
                   help="a CSV of published bounds to use with --bounds (columns: docs/sky-analysis.md)")
    s.add_argument("--json", action="store_true", help="print one JSON object on stdout")


def run(args) -> int:
    from ..campaign.sky import fit_sky, load_turns

    if args.combined and args.model != "sme":
        raise UsageError("--combined applies to --model sme")
    if args.route == "days" and args.segments != "day":
        raise UsageError("--route days works per sidereal day: drop --segments run")
    if args.bounds_table is not None and not args.bounds:
        raise UsageError("--bounds-table needs --bounds")
    table = load_turns(args.inputs)
    settings = dict(model=args.model, route=args.route, use_c0=args.use_c0, combined=args.combined,
                    segments=args.segments, weights=args.weights, orbit=args.orbit, pair=not args.single_resonator,
                    confidence_level=args.cl)
    fit = fit_sky(table, **settings)  # warnings: one line each, in flags (the CLI's warning hook)
    bounds = None
    if args.bounds:
        from ..campaign.sky_bounds import bounds_table, published_sky_bounds

        bounds = bounds_table(fit, published_sky_bounds(args.bounds_table))
    if args.json:
        d = fit.to_dict()
        if bounds is not None:
            d["published"] = bounds[bounds["source"] != "this campaign"].to_dict(orient="records")
        print_json(with_provenance(d, inputs=[Path(p) for p in args.inputs], settings=settings))
        return 0
    print(to_user_text(fit.summary().as_text()))
    if bounds is not None:
        import pandas as pd

        print()
        recalled = (" (the bundled table holds orders of magnitude recalled from memory: not a source to cite)"
                    if args.bounds_table is None else f" (from {args.bounds_table})")
        print(f"bounds on |parameter| at {fit.confidence_level:.0%} CL beside published results{recalled}")
        wide = bounds.pivot_table(index="parameter", columns="source", values="bound_abs", sort=False)
        with pd.option_context("display.width", 250, "display.max_columns", 20):
            print(wide.to_string(float_format=lambda v: f"{v:.2g}"))
    return 0
