"""Figures of one scan: the raw log with its drift model, and the signal folded by table angle."""

from __future__ import annotations

import numpy as np

from ..fitting.segments import turn_segments
from . import style as st
from ..fitting.model import drift_model, fold, harmonic_part

#: Readings drawn at most (a longer log is thinned by a regular stride for display only).
MAX_POINTS = 200_000


def _thin(n: int, max_points: int) -> slice:
    return slice(None, None, max(1, -(-n // max_points)))


def _epoch_text(scan) -> str:
    iso = getattr(scan, "epoch_iso", None)
    return f"time since {iso[:16].replace('T', ' ')} UTC" if iso else "time since start of log"


def _drift_label(fit, model) -> str:
    drift = str(fit.drift)
    what = {"per-turn": "offset + slope in each turn"}.get(drift, drift)
    if drift.startswith("per-turn:"):
        what = f"degree-{drift.split(':')[1]} polynomial in each turn"
    elif drift.startswith("poly"):
        what = f"Legendre polynomial, degree {drift.split(':')[1]}"
    elif drift.startswith("spline"):
        what = f"cubic B-spline, knots every {drift.split(':')[1]} turns"
    elif drift == "none":
        what = "constant offset"
    return f"drift model ({what}{' + aux terms' if model.includes_aux else ''})"


def plot_scan(scan, fit=None, ax=None, *, max_points: int = MAX_POINTS):
    """The raw log against time, with the fitted drift model and the partial (excluded) turns.

    Parameters
    ----------
    scan : Scan
    fit : ScanFit, optional
        The fit of ``scan``; its drift model (see :func:`nullfit.plots._model.drift_model`) is
        drawn turn by turn.  Without it only the readings are drawn.
    ax : matplotlib Axes, optional
    max_points : int
        Longer logs are thinned by a regular stride for display (the drift is computed from
        every reading).

    Returns
    -------
    matplotlib.axes.Axes
        Artists carry ``gid`` ``"scan-readings"``, ``"scan-drift"`` and ``"scan-partial"``.
    """
    ax = st.new_axes(ax, figsize=(7.2, 3.8))
    t = np.asarray(scan.time, dtype=float)
    y = np.asarray(scan.signal, dtype=float)
    div, tu = st.time_axis(t)
    step = _thin(t.size, max_points)
    seg = turn_segments(scan)
    used = None
    model = None
    if fit is not None:
        model = drift_model(scan, fit)
        used = model.fitted
    else:
        used = np.asarray(scan.turn_complete)[np.asarray(scan.turn)]
    ax.plot(t[step] / div, y[step], ls="none", marker=".", ms=2.2, color=st.STONE, alpha=0.8,
            label="readings (fitted turns)" if fit is not None else "readings", gid="scan-readings", zorder=2)
    # readings that were not fitted: partial (or otherwise excluded) turns
    out = ~used
    if out.any():
        for a, b in zip(seg.start, seg.stop):
            if not out[a]:
                continue
            ax.axvspan(t[a] / div, t[b - 1] / div, color=st.SAND, alpha=0.55, lw=0, zorder=0)
        what = "partial turn, excluded" if fit is not None else "partial turn"
        ax.plot(t[out] / div, y[out], ls="none", marker="x", ms=3.0, mew=0.8, color=st.RUST,
                label=what, gid="scan-partial", zorder=3)
    if model is not None:
        # one line per turn: NaN between turns breaks the line where the per-turn model jumps
        d = model.drift.copy()
        brk = np.zeros(t.size, bool)
        brk[seg.start[1:]] = True
        tt = np.insert(t / div, np.flatnonzero(brk), np.nan)
        dd = np.insert(d, np.flatnonzero(brk), np.nan)
        ax.plot(tt, dd, color=st.TEAL, lw=1.3, label=_drift_label(fit, model), gid="scan-drift", zorder=4)
    st.tidy(ax)
    ax.set_xlabel(f"{_epoch_text(scan)} [{tu}]")
    ax.margins(x=0.01)
    st.unit_axis(ax, "y", "signal", scan.unit)
    st.legend(ax, above=True, ncol=3)
    return ax


def _curve(fit, ks, theta_deg):
    return harmonic_part(np.deg2rad(theta_deg), fit, ks)


def plot_folded(scan, fit, *, bins: int = 16, polar: bool = False, harmonic: int = 2, ax=None):
    """The drift-removed signal folded by table angle: binned means ± standard errors and the
    fitted harmonics (all fitted orders together, and the ``harmonic`` term alone).

    Bins are centred on ``j·360°/bins``; each mean is the average over turns of the turn's mean
    in the bin and its error the standard error of those per-turn means (see
    :func:`nullfit.plots._model.fold`).  For continuous sampling a bin mean of ``cos kθ`` is the
    curve's value times ``sinc(k·w/2)`` (``w`` the bin width): 2.5 % lower at 2θ with 16 bins.

    Parameters
    ----------
    scan, fit : Scan, ScanFit
    bins : int
        Number of angle bins over one turn.
    polar : bool
        Draw on a polar Axes (radius = signal − drift + an offset, so that no radius is negative
        and the inner edge lies below the lowest value; the zero level is drawn as a circle).  ``ax`` must then be polar or None.
    harmonic : int
        The term drawn on its own (default 2θ); must be among the fitted harmonics.
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
        Artists carry ``gid`` ``"folded-means"`` (binned means; ``x`` in degrees, or radians on a
        polar Axes), ``"folded-fit"`` (sum of the fitted harmonics) and ``"folded-term"``.
    """
    if harmonic not in fit.harmonics:
        raise ValueError(f"harmonic {harmonic} was not fitted (fitted: {tuple(fit.harmonics)})")
    ax = st.new_axes(ax, polar=polar, figsize=(5.2, 5.2) if polar else (6.4, 4.0))
    f = fold(scan, fit, bins)
    u = scan.unit
    grid = np.linspace(0.0, 360.0, 721)
    full = _curve(fit, fit.harmonics, grid)
    term = _curve(fit, (harmonic,), grid)
    h = fit.harmonic(harmonic)
    k = harmonic
    names = " + ".join(f"{j}θ" for j in fit.harmonics)
    lab_full = f"fitted {names}"
    lab_term = f"{k}θ term alone: amplitude A{st.sub(k)} = {st.number(h.amplitude)} {st.unit_text(u)}"
    lab_means = f"binned mean ± s.e. ({bins} bins, scatter of {int(f.n_turns.max())} turns)"
    if not polar:
        ax.axhline(0.0, color=st.STONE, lw=0.7, zorder=1)
        ax.errorbar(f.centers_deg, f.mean, yerr=f.sem, fmt="o", ms=4.0, color=st.INK, mfc="white", mew=1.0,
                    elinewidth=1.0, capsize=2.0, label=lab_means, zorder=4)[0].set_gid("folded-means")
        ax.plot(grid, full, color=st.TEAL, lw=1.6, label=lab_full, gid="folded-fit", zorder=3)
        ax.plot(grid, term, color=st.RUST, lw=1.3, ls="--", label=lab_term, gid="folded-term", zorder=3)
        ax.set_xlim(0.0, 360.0)
        ax.set_xticks(np.arange(0, 361, 45))
        ax.set_xlabel("table angle θ of arm 1 [deg]")
        st.tidy(ax)
        lo = np.nanmin(np.r_[f.mean - np.nan_to_num(f.sem), full, term])
        hi = np.nanmax(np.r_[f.mean + np.nan_to_num(f.sem), full, term])
        pad = 0.08 * (hi - lo if hi > lo else 1.0)
        ax.set_ylim(lo - pad, hi + pad)
        st.unit_axis(ax, "y", "signal − drift", u)
        st.legend(ax, above=True, ncol=1)
        return ax

    # polar: radius r = value − r0 ≥ 0 with the centre at r0 below the lowest value (a radius is never
    # negative); the level "signal − drift = 0" is the circle r = −r0
    lo = np.nanmin(np.r_[f.mean - np.nan_to_num(f.sem), full, term])
    hi = np.nanmax(np.r_[f.mean + np.nan_to_num(f.sem), full, term])
    span = hi - lo if hi > lo else 1.0
    r0 = min(lo - 0.25 * span, 0.0)  # ≤ 0, so the zero circle (r = −r0) is always on the plot
    ax.set_theta_zero_location("N")
    ax.set_theta_direction(1)  # the table's positive sense, counterclockwise on the page
    th = np.deg2rad(grid)
    ax.plot(th, np.full_like(th, -r0), color=st.STONE, lw=0.8, label="zero (drift removed)", zorder=1)
    ax.errorbar(np.deg2rad(f.centers_deg), f.mean - r0, yerr=f.sem, fmt="o", ms=3.5, color=st.INK, mfc="white",
                mew=1.0, elinewidth=1.0, capsize=1.5, label=lab_means, zorder=4)[0].set_gid("folded-means")
    ax.plot(th, full - r0, color=st.TEAL, lw=1.6, label=lab_full, gid="folded-fit", zorder=3)
    ax.plot(th, term - r0, color=st.RUST, lw=1.3, ls="--", label=lab_term, gid="folded-term", zorder=3)
    ax.set_rlim(0.0, hi - r0 + 0.12 * span)
    import matplotlib.ticker as mticker

    e = st.exponent_for([lo, hi])
    # ticks at round values of signal − drift, placed at their radii (value − r0 ≥ 0)
    vals = mticker.MaxNLocator(4).tick_values(r0, hi)
    ax.yaxis.set_major_locator(mticker.FixedLocator(vals[(vals >= r0) & (vals <= hi + 0.12 * span)] - r0))
    ax.yaxis.set_major_formatter(st.scaled_formatter(e, offset=r0))  # ticks read signal − drift, not r
    ax.set_rlabel_position(101.25)  # between bin centres (multiples of 360°/bins for 16 bins)
    ax.tick_params(labelsize=8, colors=st.INK)
    for lab in ax.get_yticklabels():
        lab.set_bbox(dict(facecolor="white", alpha=0.75, edgecolor="none", pad=0.6))
    ax.set_xticks(np.deg2rad(np.arange(0, 360, 45)))
    ax.set_xticklabels([f"{a}°" for a in range(0, 360, 45)])
    ax.set_xlabel("table angle θ of arm 1 [deg], counterclockwise from the reference mark", fontsize=9)
    ax.set_ylabel(f"signal − drift [{st.scaled_unit(u, e)}] (centre of the plot at {st.number(r0)} {st.unit_text(u)})", fontsize=9, labelpad=24)
    st.tidy(ax)
    st.legend(ax, loc="upper center", bbox_to_anchor=(0.5, -0.12), ncol=1)
    return ax
