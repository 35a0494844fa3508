"""Figures of the sky analysis: per-turn ``B``, ``C`` folded on sidereal time with the fitted model,
the per-day quadratures against the annual phase, and the parameter bounds beside published ones.

Drawing only: the folded data come from :func:`nullfit.campaign.sky.sidereal_fold`, the per-day
quadratures and the model curve from :func:`nullfit.campaign.sky.quadrature_curves`, the bounds
from :func:`nullfit.campaign.sky_bounds.bounds_table`.
"""

from __future__ import annotations

import numpy as np

from . import style as st

CHANNEL_COLOURS = {"C": st.TEAL, "B": st.RUST}
_MARKERS = ("s", "D", "^", "P", "X", "*", "h")


def _need(df, cols, what):
    missing = [c for c in cols if c not in df.columns]
    if missing:
        raise ValueError(f"{what} needs the column(s) {missing}")


def plot_sidereal_fold(fold, ax=None):
    """Per-turn ``B`` and ``C`` (segment offsets removed) binned in local sidereal time, mean ± s.e.,
    with the fitted model averaged over the same turns.

    Parameters
    ----------
    fold : DataFrame
        :func:`nullfit.campaign.sky.sidereal_fold` output.

    Returns
    -------
    matplotlib.axes.Axes
        Artists carry ``gid`` ``"sky-fold-C"``, ``"sky-fold-B"``, ``"sky-model-C"``, ``"sky-model-B"``.
    """
    _need(fold, ("channel", "hour", "mean", "sigma", "model"), "plot_sidereal_fold")
    ax = st.new_axes(ax, figsize=(6.8, 4.0))
    e = st.exponent_for(np.r_[fold["mean"].to_numpy(float), fold["model"].to_numpy(float)])
    scale = 10.0 ** e
    for ch, dx in (("C", -0.12), ("B", 0.12)):
        f = fold[fold["channel"] == ch].sort_values("hour")
        if f.empty:
            continue
        col = CHANNEL_COLOURS[ch]
        ax.errorbar(f["hour"] + dx, f["mean"] / scale, yerr=f["sigma"] / scale, fmt="o" if ch == "C" else "s",
                    ms=4, color=col, ecolor=col, elinewidth=0.8, capsize=0, label=f"{ch} per-turn (binned)",
                    gid=f"sky-fold-{ch}", zorder=3)
        ax.plot(f["hour"], f["model"] / scale, color=col, lw=1.4, ls="-" if ch == "C" else "--",
                label=f"{ch} fitted model", gid=f"sky-model-{ch}", zorder=4)
    ax.axhline(0.0, color=st.STONE, lw=0.8, zorder=1)
    ax.set_xlim(0, 24)
    ax.set_xticks(range(0, 25, 3))
    ax.set_xlabel("local sidereal time [h]")
    ax.set_ylabel(f"B, C of (ν₁ − ν₂)/ν [{st.scaled_unit('fractional', e)}]")
    st.tidy(ax)
    st.legend(ax, above=True, ncol=2)
    return ax


def plot_quadratures(days, curve, quadrature: str = "Cs2", ax=None):
    """One sidereal quadrature per sidereal day (± its within-day σ) against the annual phase ``W``,
    with the fitted model ``M(W) p̂``.

    Parameters
    ----------
    days, curve : DataFrame
        The two frames of :func:`nullfit.campaign.sky.quadrature_curves`.
    quadrature : str
        One of ``C0 Cs1 Cc1 Cs2 Cc2 B0 Bs1 Bc1 Bs2 Bc2``.

    Returns
    -------
    matplotlib.axes.Axes
        Artists carry ``gid`` ``"sky-days"`` and ``"sky-curve"``.
    """
    _need(days, ("W_deg", quadrature, f"sigma_{quadrature}"), "plot_quadratures")
    _need(curve, ("W_deg", quadrature), "plot_quadratures")
    ax = st.new_axes(ax, figsize=(6.4, 3.8))
    y, s = days[quadrature].to_numpy(float), days[f"sigma_{quadrature}"].to_numpy(float)
    e = st.exponent_for(np.r_[y, curve[quadrature].to_numpy(float)])
    scale = 10.0 ** e
    ax.errorbar(np.mod(days["W_deg"], 360.0), y / scale, yerr=s / scale, fmt="o", ms=3.5, color=st.TEAL,
                ecolor=st.STONE, elinewidth=0.7, capsize=0, label="per sidereal day", gid="sky-days", zorder=3)
    c = curve.assign(Wm=np.mod(curve["W_deg"], 360.0)).sort_values("Wm")
    ax.plot(c["Wm"], c[quadrature] / scale, color=st.INK, lw=1.4, label="fitted model M(W) p̂", gid="sky-curve",
            zorder=4)
    ax.axhline(0.0, color=st.STONE, lw=0.8, zorder=1)
    ax.set_xlim(0, 360)
    ax.set_xticks(range(0, 361, 60))
    ax.set_xlabel("annual phase W [deg] (0 at the March equinox)")
    ax.set_ylabel(f"{quadrature} [{st.scaled_unit('fractional', e)}]")
    st.tidy(ax)
    st.legend(ax, above=True, ncol=2)
    return ax


def plot_sky_bounds(table, ax=None):
    """Bounds on ``|x|`` for every parameter: this campaign's central interval and the published
    rows beside it (open grey markers: only the order of σ is recorded), on a log axis.

    Parameters
    ----------
    table : DataFrame
        :func:`nullfit.campaign.sky_bounds.bounds_table` output.

    Returns
    -------
    matplotlib.axes.Axes
        Artists carry ``gid`` ``"sky-bound-campaign"`` and ``"sky-bound-published"``.
    """
    _need(table, ("parameter", "source", "bound_abs", "kind"), "plot_sky_bounds")
    params = list(dict.fromkeys(table["parameter"]))
    if not params:
        raise ValueError("the bounds table is empty")
    ypos = {p: i for i, p in enumerate(params[::-1])}
    pub = table[table["source"] != "this campaign"]
    sources = list(dict.fromkeys(pub["source"]))
    step = 0.7 / (len(sources) + 1)
    ax = st.new_axes(ax, figsize=(7.2, 1.6 + (0.3 + 0.1 * len(sources)) * len(params)))
    own = table[table["source"] == "this campaign"]
    ax.plot(own["bound_abs"], [ypos[p] for p in own["parameter"]], ls="none", marker="v", ms=8, color=st.TEAL,
            mec="white", mew=0.6, label="this campaign (|x| bound)", gid="sky-bound-campaign", zorder=4)
    for j, src in enumerate(sources):
        f = pub[pub["source"] == src]
        order = f["kind"].iloc[0] == "sigma_order"
        ax.plot(f["bound_abs"], [ypos[p] - step * (j + 1) for p in f["parameter"]],
                ls="none", marker=_MARKERS[j % len(_MARKERS)], ms=5.5, color=st.STONE if order else st.RUST,
                mfc="none" if order else None, label=src + (" (order of σ)" if order else ""),
                gid="sky-bound-published", zorder=3)
    ax.set_xscale("log")
    ax.set_yticks(list(ypos.values()))
    ax.set_yticklabels(list(ypos.keys()))
    ax.set_ylim(-0.85, len(params) - 0.5)
    cl = table.attrs.get("confidence_level")
    at = f"at {100 * cl:g} % CL" if cl is not None else "at the confidence level of the campaign"
    ax.set_xlabel(f"bound on |parameter| {at} (dimensionless)")
    st.tidy(ax, grid="x")
    st.legend(ax, above=True, ncol=2, fontsize=7)
    return ax
