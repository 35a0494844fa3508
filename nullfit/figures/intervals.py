"""Figures of the amplitude limits: the Bayes posterior, the unified belt, the four routes side by side."""

from __future__ import annotations

import math

import numpy as np

from ..core.conventions import check_confidence_level
from ..limits.unified import belt_curves
from . import style as st

METHOD_COLOURS = {"feldman-cousins": st.TEAL, "neyman": st.RUST, "bayes": st.HEATHER, "bootstrap": st.FERN}


def _k(limit) -> str:
    return st.sub(limit.harmonic) if getattr(limit, "harmonic", None) else ""


def _kθ(limit) -> str:
    return f"{limit.harmonic}θ " if getattr(limit, "harmonic", None) else ""


def _peak_to_peak_axis(ax, unit, harmonic=None):
    """A secondary axis on top in peak-to-peak units (``2·A``)."""
    top = ax.secondary_xaxis("top", functions=(lambda a: 2.0 * a, lambda p: 0.5 * p))
    e2 = st.exponent_for(2.0 * np.asarray(ax.get_xlim()))
    top.xaxis.set_major_formatter(st.scaled_formatter(e2))
    k = f"{st.sub(harmonic)}" if harmonic else ""
    where = " (orientations 90° apart)" if harmonic == 2 else ""
    top.set_xlabel(f"peak-to-peak shift 2A{k}{where} [{st.scaled_unit(unit, e2)}]", fontsize=9)
    top.tick_params(labelsize=8, colors=st.INK)
    top.spines["top"].set_color(st.INK)
    return top


# ----------------------------------------------------------------------------- posterior
def plot_posterior(limit, ax=None):
    """The Bayesian posterior of the amplitude with the credible upper limit and the observed
    amplitude; bottom axis amplitude, top axis the corresponding peak-to-peak shift.

    Parameters
    ----------
    limit : Limit
        A Bayesian limit (``method="bayes"``); it carries ``limit.posterior``.

    Returns
    -------
    matplotlib.axes.Axes
        Artists carry ``gid`` ``"posterior-density"``, ``"posterior-upper"``, ``"posterior-observed"``.
    """
    post = getattr(limit, "posterior", None)
    if post is None:
        raise ValueError(f"plot_posterior needs a Bayesian limit (method='bayes'); this one is {limit.method!r}")
    A = np.asarray(post.amplitude, dtype=float)
    d = np.asarray(post.density, dtype=float)
    cdf = post.cdf
    a_hi = float(np.interp(0.9995, cdf, A))
    a_hi = max(a_hi, 1.15 * limit.upper, 1.15 * limit.estimate)
    sel = A <= a_hi
    ax = st.new_axes(ax, figsize=(6.0, 5.2))
    u = limit.unit
    k = _k(limit)
    ax.plot(A[sel], d[sel], color=st.INK, lw=1.6, gid="posterior-density", zorder=3,
            label=f"posterior of A{k} (prior uniform in {'the (c, s) plane' if post.prior == 'plane' else 'A'})")
    inside = A <= limit.upper
    xs = np.r_[A[inside], limit.upper]
    ys = np.r_[d[inside], np.interp(limit.upper, A, d)]
    ax.fill_between(xs, 0, ys, color=st.TEAL, alpha=0.18, lw=0, zorder=2,
                    label=f"{limit.confidence_level:.0%} credible region")
    ax.axvline(limit.upper, color=st.TEAL, lw=1.6, zorder=4, gid="posterior-upper",
               label=(f"credible upper limit A{k} < {st.number(limit.upper)} {st.unit_text(u)} "
                      f"(peak-to-peak < {st.number(2 * limit.upper)})"))
    ax.axvline(limit.estimate, color=st.RUST, lw=1.2, ls="--", zorder=4, gid="posterior-observed",
               label=f"observed amplitude Â{k} = {st.number(limit.estimate)}")
    ax.set_xlim(0.0, a_hi)
    ax.set_ylim(0.0, 1.08 * float(np.max(d[sel])))
    st.tidy(ax)
    st.unit_axis(ax, "x", f"{_kθ(limit)}amplitude A{k}", u)
    st.unit_axis(ax, "y", "posterior density", u, power=-1)
    _peak_to_peak_axis(ax, u, limit.harmonic)
    st.legend(ax, loc="upper center", bbox_to_anchor=(0.5, -0.17), ncol=1)
    return ax


# ----------------------------------------------------------------------------- belt
def plot_belt(limit=None, ax=None, *, cov=None, sigma: float | None = None, confidence_level: float | None = None,
              dof=None, observed: float | None = None, unit: str | None = None, amplitude_max: float | None = None):
    """The unified (Feldman–Cousins) confidence belt: for every true amplitude ``A`` (vertical)
    the acceptance interval of the observed amplitude ``Â`` (horizontal), with the observed
    amplitude and the resulting interval marked.

    Parameters
    ----------
    limit : Limit, optional
        A ``method="feldman-cousins"`` limit: its covariance, ``dof``, confidence level, observed
        amplitude and interval are used.  Otherwise give ``cov`` (2×2) or ``sigma`` (isotropic),
        and optionally ``confidence_level`` (0.95), ``dof`` and ``observed`` (the interval is
        then computed with :func:`nullfit.amplitude_limit`).
    ax : matplotlib Axes, optional
    unit : str, optional
        Signal unit for the labels (default: the limit's).
    amplitude_max : float, optional
        Top of the drawn range (default: a little above the interval and the observation).

    Returns
    -------
    matplotlib.axes.Axes
        Artists carry ``gid`` ``"belt-region"``, ``"belt-observed"``, ``"belt-interval"``.
    """
    if limit is not None:
        if limit.method != "feldman-cousins":
            raise ValueError(f"plot_belt draws the unified (Feldman–Cousins) belt; this limit is {limit.method!r}: "
                             "pass a method='feldman-cousins' limit, or cov=/sigma= explicitly")
        cov = np.asarray(limit.cov, dtype=float)
        cl = limit.confidence_level if confidence_level is None else check_confidence_level(confidence_level)
        dof = limit.dof if dof is None else dof
        observed = limit.estimate if observed is None else observed
        unit = limit.unit if unit is None else unit
        lower, upper = limit.lower, limit.upper
        k = _k(limit)
    else:
        if cov is None:
            if sigma is None:
                raise ValueError("plot_belt needs a limit, or cov= (2×2) or sigma= (isotropic σ of c and s)")
            cov = np.eye(2) * float(sigma) ** 2
        cov = np.asarray(cov, dtype=float)
        cl = check_confidence_level(0.95 if confidence_level is None else confidence_level)
        unit = unit or ""
        k = ""
        lower = upper = None
        if observed is not None:
            from ..limits import amplitude_limit

            lim = amplitude_limit(float(observed), 0.0, cov, method="feldman-cousins", confidence_level=cl, dof=dof)
            lower, upper = lim.lower, lim.upper
    sig_rms = math.sqrt(0.5 * np.trace(cov))
    if amplitude_max is None:
        cand = [4.0 * sig_rms]
        if observed is not None:
            cand.append(observed + 3.0 * sig_rms)
        if upper is not None:
            cand.append(upper + 1.5 * sig_rms)
        amplitude_max = max(cand)
    # far from zero only a window around the interval is drawn (belts cost ~1 s per σ there)
    amplitude_min = 0.0
    if lower is not None and lower > 6.0 * sig_rms:
        amplitude_min = lower - 3.0 * sig_rms
    A, x1, x2, sig, desc = belt_curves(cov, cl, dof, amplitude_max * 1.02, amplitude_min=amplitude_min)
    ax = st.new_axes(ax, figsize=(5.6, 5.0))
    poly = ax.fill_betweenx(A, x1, x2, color=st.TEAL, alpha=0.17, lw=0, zorder=2,
                            label=f"{cl:.0%} acceptance region of Â{k} (likelihood-ratio ordering)")
    poly.set_gid("belt-region")
    ax.plot(x1, A, color=st.TEAL, lw=1.2, zorder=3)
    ax.plot(x2, A, color=st.TEAL, lw=1.2, zorder=3)
    ax.plot([amplitude_min, amplitude_max], [amplitude_min, amplitude_max], color=st.STONE, lw=0.8, ls=":",
            zorder=1, label="Â = A")
    if observed is not None:
        ax.axvline(observed, color=st.RUST, lw=1.3, ls="--", zorder=4, gid="belt-observed",
                   label=f"observed Â{k} = {st.number(observed)} {st.unit_text(unit)}")
    if upper is not None:
        lo = 0.0 if lower is None else lower
        txt = (f"interval [{st.number(lo)}, {st.number(upper)}]" if lo > 0
               else f"upper limit A{k} < {st.number(upper)}")
        ax.plot([observed, observed], [lo, upper], color=st.INK, lw=4.0, solid_capstyle="butt", zorder=5,
                gid="belt-interval", label=f"{txt} {st.unit_text(unit)} (amplitude)")
        for v in ([upper] if lo <= 0 else [lo, upper]):
            ax.plot([amplitude_min, observed], [v, v], color=st.INK, lw=0.8, ls=":", zorder=4)
    ax.set_xlim(amplitude_min, amplitude_max)
    ax.set_ylim(amplitude_min, amplitude_max)
    ax.text(0.98, 0.02, f"belt for σ = {st.number(sig)} {st.unit_text(unit)}\n{desc}", transform=ax.transAxes,
            ha="right", va="bottom", fontsize=7.5, color=st.INK)
    st.tidy(ax)
    e = st.exponent_for([amplitude_max])
    st.unit_axis(ax, "x", f"observed amplitude Â{k}", unit, exponent=e)
    st.unit_axis(ax, "y", f"true amplitude A{k}", unit, exponent=e)
    st.legend(ax, above=True, ncol=1)
    return ax


# ----------------------------------------------------------------------------- all limits
_METHOD_TEXT = {"feldman-cousins": "unified\n(Feldman–Cousins)", "neyman": "Neyman\none-sided"}


def _method_text(lim) -> str:
    if lim.method == "bayes":
        return "Bayes credible\n(prior uniform in " + ("c, s)" if lim.prior == "plane" else "A)")
    if lim.method == "bootstrap":
        return f"block bootstrap\n({lim.scheme or 'blocks'}, {lim.block_length or '?'} turns)"
    return _METHOD_TEXT.get(lim.method, lim.method)


def _as_limits(obj):
    """A list of Limit objects (and the observed amplitude) from a RunAnalysis, mapping,
    ``limits_table`` DataFrame, a single Limit or a sequence of them."""
    if hasattr(obj, "limits") and hasattr(obj, "fit"):  # RunAnalysis
        obj = obj.limits
    if hasattr(obj, "attrs") and "limits" in getattr(obj, "attrs", {}):  # limits_table DataFrame
        obj = obj.attrs["limits"]
    if hasattr(obj, "values") and callable(obj.values) and not hasattr(obj, "method"):
        obj = list(obj.values())
    if hasattr(obj, "method") and hasattr(obj, "upper"):
        obj = [obj]
    lims = list(obj)
    if not lims or not all(hasattr(x, "method") and hasattr(x, "upper") for x in lims):
        raise TypeError("plot_limits needs a RunAnalysis, a mapping or list of Limit objects, or a limits_table frame")
    return lims


def plot_limits(analysis_or_limits, ax=None):
    """The limits of every route side by side: one row per method, a bar from the lower end
    (0 for one-sided limits) to the upper end, on an amplitude axis with the peak-to-peak shift
    (``2A``) on a secondary axis at the top; the observed amplitude is marked.

    Parameters
    ----------
    analysis_or_limits : RunAnalysis, mapping/list of Limit, or a ``limits_table`` DataFrame

    Returns
    -------
    matplotlib.axes.Axes
        Each bar carries ``gid`` ``"limit-<method>"``.
    """
    lims = _as_limits(analysis_or_limits)
    units = {x.unit for x in lims if x.unit}
    if len(units) > 1:
        raise ValueError(f"limits in different units ({', '.join(sorted(units))}) cannot share one axis")
    u = units.pop() if units else ""
    cls = {x.confidence_level for x in lims}
    ax = st.new_axes(ax, figsize=(6.8, 1.7 + 0.75 * len(lims)))
    n = len(lims)
    ys = np.arange(n)[::-1].astype(float)
    ups = [x.upper for x in lims if x.upper is not None]
    obs = lims[0].estimate
    x_max = 1.38 * max(ups + [obs] + [1e-300])
    k = _k(lims[0])
    for y, lim in zip(ys, lims):
        colour = METHOD_COLOURS.get(lim.method, st.INK)
        cl_txt = "" if len(cls) == 1 else f" ({lim.confidence_level:.0%})"
        if lim.empty or lim.upper is None:
            ax.text(0.02 * x_max, y, "empty set at this confidence level" + cl_txt, va="center", ha="left",
                    fontsize=8, color=colour, style="italic", zorder=6,
                    bbox=dict(facecolor="white", edgecolor="none", alpha=0.85, pad=1.0))
            continue
        lo = lim.lower or 0.0
        bar = ax.barh(y, lim.upper - lo, left=lo, height=0.46, color=colour, alpha=0.28, edgecolor=colour, lw=1.0,
                      zorder=3)
        bar.patches[0].set_gid(f"limit-{lim.method}")
        ax.plot([lim.upper, lim.upper], [y - 0.3, y + 0.3], color=colour, lw=2.4, zorder=4)
        if lo > 0:
            ax.plot([lo, lo], [y - 0.3, y + 0.3], color=colour, lw=2.4, zorder=4)
            txt = f"[{st.number(lo)}, {st.number(lim.upper)}]"
        else:
            txt = f"< {st.number(lim.upper)}"
        ax.text(lim.upper + 0.015 * x_max, y, txt + cl_txt, va="center", ha="left", fontsize=8, color=st.INK)
    ax.axvline(obs, color=st.INK, lw=1.0, ls="--", zorder=5,
               label=f"observed Â{k} = {st.number(obs)} (biased upward near 0)")
    ax.set_yticks(ys)
    ax.set_yticklabels([_method_text(x) for x in lims], fontsize=8)
    ax.set_ylabel("route to the limit")
    ax.set_ylim(-0.7, n - 0.3)
    ax.set_xlim(0.0, x_max)
    st.tidy(ax, grid="x")
    ax.tick_params(axis="y", length=0)
    cl_label = f"{cls.pop():.0%} CL " if len(cls) == 1 else ""
    st.unit_axis(ax, "x", f"{cl_label}limit on the {_kθ(lims[0])}amplitude A{k}", u)
    _peak_to_peak_axis(ax, u, lims[0].harmonic)
    st.legend(ax, loc="upper center", bbox_to_anchor=(0.5, -0.16 - 0.12 / n))
    return ax
