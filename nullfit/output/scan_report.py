"""The standard figures and the self-contained HTML report of one analysed run."""

from __future__ import annotations


def scan_figures(a):
    """The standard figures of one analysed run: list of (file name, caption, Figure)."""
    from .. import figures

    out = []
    fit, scan = a.fit, a.scan
    out.append(("scan.png", f"Run {a.run_id}: raw log with the drift model", figures.plot_scan(scan, fit).figure))
    out.append(("folded.png", f"Run {a.run_id}: signal folded by table angle after drift removal",
                figures.plot_folded(scan, fit).figure))
    out.append(("folded_polar.png", f"Run {a.run_id}: folded signal, polar form",
                figures.plot_folded(scan, fit, polar=True).figure))
    if fit.per_turn is not None:
        out.append(("per_turn.png", f"Run {a.run_id}: per-turn 2θ coefficients", figures.plot_per_turn(fit).figure))
    out.append(("plane.png", f"Run {a.run_id}: (c₂, s₂) plane with the error ellipse",
                figures.plot_plane(fit, expected=a.expected).figure))
    if a.limits:
        out.append(("limits.png", f"Run {a.run_id}: the limit routes side by side", figures.plot_limits(a).figure))
    if "bayes" in a.limits:
        out.append(("posterior.png", f"Run {a.run_id}: amplitude posterior (Bayes)",
                    figures.plot_posterior(a.limits["bayes"]).figure))
    if "feldman-cousins" in a.limits:
        out.append(("belt.png", f"Run {a.run_id}: unified confidence belt",
                    figures.plot_belt(a.limits["feldman-cousins"]).figure))
    if fit.per_turn is not None and len(fit.per_turn) >= 4:
        out.append(("allan.png", f"Run {a.run_id}: Allan deviation of the per-turn 2θ coefficients",
                    figures.plot_allan(fit).figure))
    return out


def scan_report(a, *, inputs=(), settings=None) -> str:
    """A self-contained HTML report for one analysed run."""
    import matplotlib.pyplot as plt

    from ..core.provenance import provenance
    from .report import render_report

    figs = scan_figures(a)
    facts = a.facts
    dropped = {"dropped while reading": facts["dropped_rows"],
               **{f"dropped while reading ({why})": c for why, c in facts["dropped"].items()},
               "in partial turns (not fitted)": facts["partial_turn_rows"]}
    prov = provenance(inputs, settings={**dict(a.settings), **dict(settings or {})},
                      seeds={"run": a.seed}, dropped=dropped)
    items = [a.scan.summary(), a]
    if a.limits:
        items.append(a.limits_frame())
    html = render_report(f"nullfit report — run {a.run_id}", [("Run", items)],
                         figures=[(cap, fig) for _, cap, fig in figs], provenance_info=prov)
    for _, _, fig in figs:
        plt.close(fig)
    return html
