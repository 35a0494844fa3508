"""Figures of the per-turn coefficient series: against time, and their Allan deviation."""

from __future__ import annotations

import numpy as np

from . import style as st


def per_turn_frame(obj, harmonic: int):
    """The per-turn table behind ``obj`` (a ScanFit with turn/block errors, a RunAnalysis, or the
    DataFrame of :func:`nullfit.demodulate`), checked to hold harmonic ``harmonic``."""
    if hasattr(obj, "fit") and hasattr(obj, "scan"):  # RunAnalysis
        obj = obj.fit
    frame = getattr(obj, "per_turn", obj)
    if frame is None:
        raise ValueError("this fit has no per-turn coefficients (errors='hac'/'ols'); fit with errors='turns' "
                         "or 'blocks:B', or pass nullfit.demodulate(scan)")
    if not hasattr(frame, "columns"):
        raise TypeError(f"expected a ScanFit, RunAnalysis or per-turn DataFrame, not {type(obj).__name__}")
    need = [f"c{harmonic}", f"s{harmonic}", "time_mid_s"]
    missing = [c for c in need if c not in frame.columns]
    if missing:
        raise ValueError(f"the per-turn table has no column(s) {', '.join(missing)} (harmonic {harmonic} not fitted?)")
    ok = np.isfinite(frame[[f"c{harmonic}", f"s{harmonic}"]].to_numpy(dtype=float)).all(axis=1)
    return frame[ok]


def _unit(obj, frame) -> str:
    for o in (obj, getattr(obj, "fit", None)):
        u = getattr(o, "unit", None)
        if isinstance(u, str):
            return u
    return frame.attrs.get("unit", "")


def running_mean(y, window: int):
    """Centred running mean over ``window`` consecutive values (only where the window is full);
    returns ``(index_centre, mean)`` with fractional centres for even windows."""
    y = np.asarray(y, dtype=float)
    w = int(window)
    if w < 1 or w > y.size:
        return np.zeros(0), np.zeros(0)
    c = np.concatenate(([0.0], np.cumsum(y)))
    m = (c[w:] - c[:-w]) / w
    return np.arange(m.size) + 0.5 * (w - 1), m


def plot_per_turn(fit, harmonic: int = 2, *, window: int | None = None, ax=None):
    """Per-turn ``c_k`` and ``s_k`` against time, with their within-turn standard errors and a
    centred running mean.

    Parameters
    ----------
    fit : ScanFit, RunAnalysis or DataFrame
        A fit with turn or block errors (it keeps ``per_turn``), or :func:`nullfit.demodulate`'s
        table.
    harmonic : int
        Harmonic order ``k``.
    window : int, optional
        Turns in the running mean (default ``max(3, N // 6)``); drawn only where the window is
        full.
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
        Artists carry ``gid`` ``"per-turn-c"``, ``"per-turn-s"``, ``"running-c"``, ``"running-s"``.
    """
    frame = per_turn_frame(fit, harmonic)
    u = _unit(fit, frame)
    k = harmonic
    n = len(frame)
    if n == 0:
        raise ValueError("no per-turn coefficients to plot")
    w = max(3, n // 6) if window is None else int(window)
    if w < 1:
        raise ValueError(f"window must be a positive number of turns, not {window}")
    ax = st.new_axes(ax, figsize=(7.2, 4.0))
    t = frame["time_mid_s"].to_numpy(dtype=float) / 3600.0
    series = (("c", st.TEAL, "o", f"c{st.sub(k)}"), ("s", st.RUST, "s", f"s{st.sub(k)}"))
    ax.axhline(0.0, color=st.STONE, lw=0.7, zorder=1)
    dt = np.median(np.diff(t)) if n > 1 else 0.0
    for j, (p, colour, marker, name) in enumerate(series):
        y = frame[f"{p}{k}"].to_numpy(dtype=float)
        col = f"sigma_{p}{k}"
        err = frame[col].to_numpy(dtype=float) if col in frame.columns else None
        shift = (j - 0.5) * 0.12 * dt  # a small horizontal offset keeps the two sets apart
        eb = ax.errorbar(t + shift, y, yerr=err, fmt=marker, ms=3.2, color=colour, mfc="white", mew=0.9,
                         elinewidth=0.7, capsize=0, alpha=0.9, zorder=3,
                         label=f"{name} per turn ± within-turn s.e.")
        eb[0].set_gid(f"per-turn-{p}")
        ic, m = running_mean(y, w)
        if m.size:
            tc = np.interp(ic, np.arange(n), t)
            ax.plot(tc, m, color=colour, lw=1.8, zorder=4, label=f"{name} running mean ({w} turns)",
                    gid=f"running-{p}")
    st.tidy(ax)
    ax.set_xlabel("turn mid-time since start of log [h]")
    st.unit_axis(ax, "y", f"{k}θ coefficient", u)
    handles, labels = ax.get_legend_handles_labels()
    order = sorted(range(len(labels)), key=lambda i: (labels[i][:2], "running" in labels[i]))
    st.legend(ax, above=True, ncol=2, handles=[handles[i] for i in order], labels=[labels[i] for i in order])
    return ax


def plot_allan(fit, harmonic: int = 2, ax=None):
    """Overlapping Allan deviation of the per-turn ``c_k`` and ``s_k`` series against averaging
    time (:func:`nullfit.allan.allan_deviation`, octave factors), with a ``τ^(−1/2)`` white-noise
    line through the mean of the two first points.

    The per-turn series is taken as evenly sampled at the median turn period ``τ0``; turns
    missing from the series (gaps, partial turns) are closed up, which the legend notes.
    Error bars are ``σ_A/√(number of differences)`` (a rough guide, common practice).

    Returns
    -------
    matplotlib.axes.Axes
        Artists carry ``gid`` ``"allan-c"``, ``"allan-s"`` (``x`` = τ in s, ``y`` = deviation)
        and ``"allan-white"``.
    """
    import matplotlib.ticker as mticker

    from ..fitting.allan import allan_deviation

    frame = per_turn_frame(fit, harmonic)
    u = _unit(fit, frame)
    k = harmonic
    if len(frame) < 3:
        raise ValueError(f"the Allan deviation needs at least 3 turns, not {len(frame)}")
    tm = frame["time_mid_s"].to_numpy(dtype=float)
    gaps = np.diff(tm)
    tau0 = float(np.median(gaps))
    ax = st.new_axes(ax, figsize=(6.0, 4.2))
    first = []
    for p, colour, marker in (("c", st.TEAL, "o"), ("s", st.RUST, "s")):
        a = allan_deviation(frame[f"{p}{k}"].to_numpy(dtype=float), tau0)
        eb = ax.errorbar(a.tau_s, a.adev, yerr=a.error, fmt=marker + "-", ms=4.0, lw=1.2, color=colour,
                         mfc="white", mew=1.0, elinewidth=0.8, capsize=2.0, zorder=3,
                         label=f"{p}{st.sub(k)} per-turn series")
        eb[0].set_gid(f"allan-{p}")
        first.append(a.adev[0])
        tau_max = a.tau_s[-1]
        taus = a.tau_s
    tt = np.geomspace(tau0, tau_max, 50)
    ref = float(np.mean(first)) * np.sqrt(tau0 / tt)
    ax.plot(tt, ref, color=st.INK, lw=1.0, ls=":", zorder=2, gid="allan-white",
            label=r"white noise $\propto\tau^{-1/2}$")
    ax.set_xscale("log")
    ax.set_yscale("log")
    st.tidy(ax)
    ax.grid(True, which="minor", color=st.HAZE, lw=0.4)
    # plain tick labels: τ at the octave points (s), deviations with a power of ten factored out
    ax.set_xlim(tau0 / 1.35, tau_max * 1.35)
    ax.xaxis.set_major_locator(mticker.FixedLocator(taus))
    ax.xaxis.set_major_formatter(mticker.FuncFormatter(lambda v, _p: f"{v:.4g}"))
    ax.xaxis.set_minor_formatter(mticker.NullFormatter())
    ylo, yhi = ax.get_ylim()
    e = st.exponent_for([yhi])
    st.log_ticks(ax.yaxis, ylo, yhi, e)
    ax.set_xlabel("averaging time τ [s]")
    ax.set_ylabel(f"Allan deviation of the {k}θ coefficients [{st.scaled_unit(u, e)}]")
    top = ax.secondary_xaxis("top", functions=(lambda x: x / tau0, lambda m: m * tau0))
    top.xaxis.set_major_locator(mticker.FixedLocator(taus / tau0))
    top.xaxis.set_major_formatter(mticker.FuncFormatter(lambda v, _p: f"{v:.0f}"))
    top.xaxis.set_minor_locator(mticker.NullLocator())
    top.set_xlabel("turns averaged (τ / turn period)", fontsize=9)
    top.tick_params(labelsize=8, colors=st.INK)
    title = None
    if gaps.size and gaps.max() > 1.5 * tau0:
        title = f"turn period {tau0:.4g} s; {int((gaps > 1.5 * tau0).sum())} gap(s) closed up"
    st.legend(ax, loc="lower left", title=title, title_fontsize=7)
    return ax
