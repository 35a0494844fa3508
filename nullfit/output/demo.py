"""`nullfit demo`: the whole job on the bundled, invented demo data.

For every single scan: fit (per-turn drift, turn-scatter errors), the four limits on the 2θ
amplitude, the detection p-value, and the classical wind hypothesis at 30 km/s as a fixed
in-plane wind (expected amplitude, ratio, speed bound).  For the campaign: the run table, the
lab-frame combination with its consistency test, and the sky-frame scale fit for Earth's orbital
velocity projected at the invented site.  Figures and one HTML report go to an output folder,
which is never overwritten without ``force``.
"""

from __future__ import annotations

from pathlib import Path

#: Assumed speed of the classical wind hypothesis in the demo (order of Earth's orbital speed).
DEMO_SPEED_M_S = 30_000.0


def demo_data_dir(data: str | Path | None = None) -> Path:
    """The demo data folder: ``data`` if given, else the bundled copy (wheel) or the
    repository's ``data_demo/`` (editable install)."""
    if data is not None:
        p = Path(data)
        if not p.is_dir():
            raise FileNotFoundError(2, "demo data folder not found", str(p))
        return p
    package = Path(__file__).resolve().parent.parent  # nullfit/
    for cand in (package / "data_demo", package.parent / "data_demo"):
        if (cand / "README.md").is_file():
            return cand
    raise FileNotFoundError(2, "bundled demo data not found (pass --data DIR)", str(package.parent / "data_demo"))


def demo_scans(folder: Path) -> tuple[list[Path], list[Path]]:
    """(single scans, campaign runs) in the demo folder, sorted; Parquet files that are per-turn
    tables (the sky demo) are not scan logs and are left out."""
    from ..campaign.turn_table import is_turn_table

    parquet = [p for p in sorted(folder.glob("*.parquet")) if not is_turn_table(p)]
    singles = sorted(folder.glob("*.csv")) + parquet
    campaign = sorted((folder / "campaign").glob("*.csv")) if (folder / "campaign").is_dir() else []
    return singles, campaign


FIGURES = ("scan.png", "folded.png", "folded_polar.png", "per_turn.png", "plane.png", "limits.png", "posterior.png",
           "belt.png", "allan.png", "campaign_expected_vs_bound.png")
REPORT = "report.html"
TABLE = "campaign_runs.csv"


def run_demo(data=None, out=None, force: bool = False, seed: int = 20261201, progress: bool | None = None) -> int:
    """Run the demo; print the summary; write figures + report into ``out`` (unless None)."""
    from ..campaign.analysis import analyse, child_seeds
    from ..campaign.combine import combine_lab, combine_sky
    from ..campaign.runs import compare_runs
    from ..hypothesis.velocities import parse_velocity
    from ..reading.files import read_scan
    from .files import prepare_output_dir
    from .wording import plain_summary

    folder = demo_data_dir(data)
    singles, campaign = demo_scans(folder)
    inputs = singles + campaign
    outdir = None
    if out is not None:  # check before any work, so a refusal costs nothing
        outdir = prepare_output_dir(out, FIGURES + (REPORT, TABLE), force=force, inputs=inputs)

    print("nullfit demo — INVENTED scenario, SYNTHETIC data "
          f"(see {folder / 'README.md'}); nothing here was measured.\n")
    seeds = child_seeds(seed, len(singles) + 2)
    analyses = []
    print(f"Single scans — hypothesis: classical wind at {DEMO_SPEED_M_S:.0f} m/s as a fixed in-plane wind\n")
    for path, s in zip(singles, seeds):
        scan = read_scan(path)
        # a log with auxiliary channels (the tilted table): correct its 2θ by a turn-level coupling fit
        extra = {"aux": list(scan.aux), "coupling": "turn"} if scan.aux else {}
        a = analyse(scan, rng=s, speed_m_s=DEMO_SPEED_M_S, progress=progress, **extra)
        analyses.append(a)
        print(plain_summary(a.summary()).as_text())
        print()

    table = lab = sky = sky_limits = None
    if campaign:
        print(f"Campaign of {len(campaign)} runs (a): run table — hypothesis: classical wind at "
              f"{DEMO_SPEED_M_S:.0f} m/s as a fixed in-plane wind\n")
        table = compare_runs(campaign, speed_m_s=DEMO_SPEED_M_S, rng=seeds[-2], progress=progress)
        cols = ["run", "date_utc", "expected_amplitude", "expected_peak_to_peak", "upper_amplitude",
                "upper_peak_to_peak", "ratio_expected_to_bound", "speed_bound_m_s"]
        print(table[cols].to_string(index=False, float_format=lambda v: f"{v:.4g}"))
        print(f"(amplitudes and peak-to-peak values in {table['unit'].iloc[0]}; upper limits: feldman-cousins, "
              "95 %)\n")
        runs = [read_scan(p) for p in campaign]
        orbital = parse_velocity("orbital")
        cseeds = child_seeds(seeds[-1], len(runs))
        sky_runs = [analyse(r, rng=cs, velocity=orbital, limits=("feldman-cousins",)) for r, cs in zip(runs, cseeds)]
        lab = combine_lab(sky_runs)
        print("Campaign (b): lab-frame combination — no hypothesis: the runs' (c₂, s₂) averaged in the table "
              "frame\n")
        print(plain_summary(lab.summary()).as_text())
        print()
        sky = combine_sky(sky_runs)
        sky_limits = sky.limits_frame(0.95)
        print("Campaign (c): sky-frame scale fit — hypothesis: Earth's orbital velocity, projected on the table "
              "at the invented site and each run's times\n")
        print(plain_summary(sky.summary()).as_text())
        print(sky_limits.to_string(index=False, float_format=lambda v: f"{v:.4g}"))
        print()

    if outdir is not None:
        _write_outputs(outdir, analyses, table, lab, sky, sky_limits, inputs, seed)
        print(f"figures, {TABLE} and {REPORT} written to {outdir}/")
    return 0


def _pick_main(analyses):
    """The scan the figures show: the one with the injected 2θ signal if present (else the first)."""
    for a in analyses:
        if "inject" in a.scan.source:
            return a
    return analyses[0]


def _write_outputs(outdir: Path, analyses, table, lab, sky, sky_limits, inputs, seed) -> None:
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    from .. import figures
    from ..core.provenance import provenance
    from .report import render_report
    from .scan_report import scan_figures

    main = _pick_main(analyses)
    figs = scan_figures(main)
    if table is not None:
        ax = figures.plot_expected_vs_bound(table)
        figs.append(("campaign_expected_vs_bound.png", "Campaign: expected 2θ amplitude (classical wind, "
                     f"{DEMO_SPEED_M_S:.0f} m/s) against the 95 % upper limit, per run", ax.figure))
        table.to_csv(outdir / TABLE, index=False)
    for name, _, fig in figs:
        fig.savefig(outdir / name, dpi=130, bbox_inches="tight")
    sections = [(f"Run {a.run_id} — classical wind at {DEMO_SPEED_M_S:.0f} m/s, fixed in-plane wind",
                 [a, a.limits_frame()]) for a in analyses]
    if table is not None:
        sections.append((f"Campaign (a): run table — classical wind at {DEMO_SPEED_M_S:.0f} m/s, fixed in-plane "
                         "wind", [table]))
        sections.append(("Campaign (b): lab-frame combination — no hypothesis", [lab]))
        sections.append(("Campaign (c): sky-frame scale fit — Earth's orbital velocity at the invented site",
                         [sky, sky_limits]))
    dropped = {a.run_id: f"{a.scan.dropped_rows} dropped while reading, {a.fit.excluded_rows} in partial turns"
               for a in analyses}
    prov = provenance(inputs, settings={"speed_m_s": DEMO_SPEED_M_S, **dict(main.settings)},
                      seeds={"demo": seed, **{a.run_id: a.seed for a in analyses}}, dropped=dropped)
    html = render_report("nullfit demo report (invented, synthetic data)", sections,
                         figures=[(cap, fig) for _, cap, fig in figs], provenance_info=prov,
                         intro="Every scan in this report was simulated for the invented Brennmoor scenario; "
                               "nothing was measured.")
    (outdir / REPORT).write_text(html, encoding="utf-8")
    plt.close("all")
