"""Across runs: the expected amplitude of a hypothesis against the upper limit of each run."""

from __future__ import annotations

import numpy as np

from . import style as st


def _table(run_table):
    import pandas as pd

    if isinstance(run_table, pd.DataFrame):
        return run_table
    items = list(run_table)
    if items and all(hasattr(a, "fit") and hasattr(a, "scan") for a in items):
        from ..campaign.runs import run_row

        return pd.DataFrame([run_row(a) for a in items])
    raise TypeError("plot_expected_vs_bound needs the run table of nullfit.compare_runs or a list of RunAnalysis")


def _wrap(text, n=58) -> str:
    import textwrap

    return "\n".join(textwrap.wrap(str(text), n))


def plot_expected_vs_bound(run_table, ax=None):
    """For every run, the expected 2θ amplitude of the hypothesis and the upper limit on the
    amplitude, on a log scale, with the ratio expected / bound annotated (amplitude over
    amplitude, equal to peak-to-peak over peak-to-peak); the right axis gives peak-to-peak.

    Parameters
    ----------
    run_table : DataFrame or list of RunAnalysis
        :func:`nullfit.compare_runs` output (columns ``run``, ``expected_amplitude``,
        ``upper_amplitude``; ``ratio_expected_to_bound``, ``unit``, ``date_utc``,
        ``hypothesis``, ``limit_method``, ``confidence_level`` are used when present).  All
        runs must share one signal unit.

    Returns
    -------
    matplotlib.axes.Axes
        Artists carry ``gid`` ``"runs-expected"``, ``"runs-bound"``.
    """
    df = _table(run_table)
    for col in ("run", "upper_amplitude"):
        if col not in df.columns:
            raise ValueError(f"the run table has no {col!r} column")
    units = sorted({str(v) for v in df.get("unit", []) if isinstance(v, str)})
    if len(units) > 1:
        raise ValueError(f"runs in different signal units ({', '.join(units)}) cannot share one amplitude axis: "
                         "plot each unit separately (filter the table by unit)")
    u = units[0] if units else ""
    n = len(df)
    if n == 0:
        raise ValueError("the run table is empty")
    x = np.arange(n, dtype=float)
    up = df["upper_amplitude"].to_numpy(dtype=float)
    exp = df["expected_amplitude"].to_numpy(dtype=float) if "expected_amplitude" in df else np.full(n, np.nan)
    if "ratio_expected_to_bound" in df:
        ratio = df["ratio_expected_to_bound"].to_numpy(dtype=float)
        ratio = np.where(np.isfinite(ratio), ratio, exp / up)
    else:
        ratio = exp / up
    ax = st.new_axes(ax, figsize=(max(5.6, 1.4 + 0.9 * n), 4.6))
    method = df["limit_method"].dropna().iloc[0] if "limit_method" in df and df["limit_method"].notna().any() else None
    cl = (df["confidence_level"].dropna().iloc[0]
          if "confidence_level" in df and df["confidence_level"].notna().any() else None)
    hyp = df["hypothesis"].dropna().iloc[0] if "hypothesis" in df and df["hypothesis"].notna().any() else None
    have = np.isfinite(exp) & np.isfinite(up) & (up > 0) & (exp > 0)
    for xi, e_, b_ in zip(x[have], exp[have], up[have]):
        ax.plot([xi, xi], [b_, e_], color=st.STONE, lw=1.0, zorder=2)
    names = {"feldman-cousins": "unified (Feldman–Cousins)", "neyman": "Neyman one-sided", "bayes": "Bayes credible",
             "bootstrap": "block bootstrap"}
    mtxt = names.get(method, method)
    bound_lab = "upper limit on A₂" + (f" ({mtxt}" + (f", {cl:.0%} CL)" if cl else ")") if method else "")
    ax.plot(x, up, ls="none", marker="v", ms=8, color=st.TEAL, mec="white", mew=0.6, zorder=4, label=bound_lab,
            gid="runs-bound")
    if np.isfinite(exp).any():
        ax.plot(x, exp, ls="none", marker="D", ms=7, color=st.RUST, mec="white", mew=0.6, zorder=4,
                label="expected A₂ (phase-coherent)" + (_wrap(f": {hyp}") if hyp else ""), gid="runs-expected")
        for xi, e_, b_, r in zip(x[have], exp[have], up[have], ratio[have]):
            ax.annotate(f"×{r:.3g}", (xi, float(np.sqrt(e_ * b_))), xytext=(5, 0), textcoords="offset points",
                        va="center", ha="left", fontsize=8, color=st.INK)
        ax.plot([], [], ls="none", label="×N = expected / bound (> 1: excluded at this CL)")
    ax.set_yscale("log")
    vals = np.r_[up[np.isfinite(up) & (up > 0)], exp[np.isfinite(exp) & (exp > 0)]]
    lo, hi = float(vals.min()), float(vals.max())
    ax.set_ylim(lo / 2.5, hi * 4.0)
    ax.set_xlim(-0.6, n - 0.4)
    ax.set_xticks(x)
    labels = [str(r) for r in df["run"]]
    xlabel = "run"
    if "date_utc" in df and df["date_utc"].map(lambda d: isinstance(d, str)).any():
        dates = [d if isinstance(d, str) else "" for d in df["date_utc"]]
        years = {d[:4] for d in dates if d}
        if len(years) == 1:  # one year: month-day under each run, the year in the axis label
            labels = [f"{r}\n{d[5:]}" if d else r for r, d in zip(labels, dates)]
            xlabel = f"run (start date in {years.pop()}, UTC)"
        else:
            labels = [f"{r}\n{d}" if d else r for r, d in zip(labels, dates)]
            xlabel = "run (start date, UTC)"
    ax.set_xticklabels(labels, fontsize=8)
    ax.set_xlabel(xlabel)
    st.tidy(ax, grid="y")
    ax.set_ylabel(f"2θ amplitude A₂ [{st.unit_text(u)}], log scale")
    right = ax.secondary_yaxis("right", functions=(lambda a: 2.0 * a, lambda p: 0.5 * p))
    right.set_ylabel(f"peak-to-peak 2A₂ [{st.unit_text(u)}]", fontsize=9)
    right.tick_params(labelsize=8, colors=st.INK)
    st.legend(ax, above=True, ncol=1)
    return ax
