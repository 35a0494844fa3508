"""``nullfit compare LOGS... [--bounds TABLE.csv]``: the run table (expected vs bound, one row per run)."""

from __future__ import annotations

from .options import UsageError, column_options, expected_options, fit_options, hypothesis, limit_options, read_log

DEFAULT_SPEED_M_S = 30_000.0


def add_parser(sub) -> None:
    c = sub.add_parser("compare", help="run table across many scans (expected vs bound)",
                       description="One row per run: expected 2θ amplitude and peak-to-peak, the upper limit "
                                   "(one method) as amplitude and peak-to-peak, their ratio and the speed bound. "
                                   "A run without an apparatus keeps empty expected/ratio columns (see its note). "
                                   "--bounds adds runs known only by a quoted bound (docs/bounds.md).")
    c.add_argument("runs", nargs="*", metavar="RUN", help="scan logs (manifests beside them)")
    c.add_argument("--bounds", metavar="TABLE.csv",
                   help="quoted bounds of other runs: columns run, arm_length_m, wavelength_m, signal, bound, "
                        "bound_kind (amplitude | peak-to-peak), confidence_level, speed_m_s")
    column_options(c)
    fit_options(c)
    limit_options(c, default="feldman-cousins", single=True)
    expected_options(c, speed_default=f"{DEFAULT_SPEED_M_S:g}")
    out = c.add_mutually_exclusive_group()
    out.add_argument("--json", action="store_true", help="print JSON (one object per row)")
    out.add_argument("--csv", action="store_true", help="print CSV")


def run(args) -> int:
    from ..campaign.runs import compare_runs

    if not args.runs and not args.bounds:
        raise UsageError("give at least one RUN log or --bounds TABLE.csv")
    apparatus, site, velocity, speed = hypothesis(args)
    methods = [m for m in (args.limits or "feldman-cousins").split(",") if m.strip()]
    if len(methods) != 1:
        raise UsageError("compare puts one limit method in the run table: give --limits METHOD (e.g. neyman)")
    scans = [read_log(args, path) for path in args.runs]
    table = compare_runs(scans, harmonics=args.harmonics, drift=args.drift, errors=args.errors,
                         method=methods[0].strip(), confidence_level=args.cl,
                         rng=args.seed, apparatus=apparatus, site=site, velocity=velocity,
                         speed_m_s=speed if speed is not None else DEFAULT_SPEED_M_S, bounds=args.bounds)
    if args.json:
        print(table.to_json(orient="records", indent=2))
    elif args.csv:
        print(table.to_csv(index=False), end="")
    else:
        import pandas as pd

        cols = [c for c in ("run", "source", "date_utc", "unit", "expected_amplitude", "upper_amplitude",
                            "upper_peak_to_peak", "ratio_expected_to_bound", "speed_bound_m_s") if c in table]
        with pd.option_context("display.width", 200, "display.max_columns", 30):
            print(table[cols].to_string(index=False, float_format=lambda v: f"{v:.4g}"))
        cl = table["confidence_level"].dropna()
        print(f"(amplitudes in each row's unit; upper limits: {methods[0].strip()}"
              + (f", {cl.iloc[0] * 100:g} %" if len(cl) else "") + "; expected: classical wind hypothesis)")
        from .wording import to_flags

        for run_id, note in zip(table["run"], table.get("note", [])):
            if isinstance(note, str) and note:
                print(f"note: {run_id}: {to_flags(note)}")
    return 0
