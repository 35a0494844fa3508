"""The (c_k, s_k) plane: the estimate, its confidence ellipse, the origin and the prediction."""

from __future__ import annotations

import math

import numpy as np

from ..core.conventions import amplitude_phase, check_confidence_level
from ..fitting.estimate import HarmonicEstimate, ellipse_axes, region_scale
from . import style as st

#: Above this ratio of predicted amplitude to the estimate's extent, a zoomed inset shows the estimate.
ZOOM_RATIO = 8.0


def _estimate(obj, harmonic: int):
    """``(c, s, cov, k, dof, unit, expected)`` from a ScanFit, RunAnalysis, HarmonicEstimate,
    Limit or lab combination."""
    expected = None
    if hasattr(obj, "fit") and hasattr(obj, "scan"):  # RunAnalysis
        expected = getattr(obj, "expected", None)
        obj = obj.fit
    if hasattr(obj, "harmonics") and callable(getattr(obj, "harmonic", None)):  # ScanFit
        obj = obj.harmonic(harmonic)
    if isinstance(obj, HarmonicEstimate):
        return obj.c, obj.s, obj.cov, obj.k if obj.k is not None else harmonic, obj.dof, obj.unit, expected
    if getattr(obj, "c", None) is not None and hasattr(obj, "s") and hasattr(obj, "cov"):  # Limit, LabCombination
        k = getattr(obj, "harmonic", None)
        k = harmonic if not isinstance(k, (int, np.integer)) else int(k)
        return (float(obj.c), float(obj.s), np.asarray(obj.cov, dtype=float), k, getattr(obj, "dof", None),
                getattr(obj, "unit", ""), expected)
    raise TypeError(f"plot_plane needs a ScanFit, RunAnalysis, HarmonicEstimate or Limit, not {type(obj).__name__}")


def _draw(ax, c, s, cov, q, k, unit, cl, region, *, labels: bool, ms: float = 6.5):
    from matplotlib.patches import Ellipse

    a, b, ang = ellipse_axes(cov, q)
    what = "2-D χ² quantile" if region == "chi2" else "Hotelling T² quantile"
    ell = Ellipse((c, s), 2 * a, 2 * b, angle=ang, facecolor=st.TEAL, alpha=0.16, edgecolor="none", zorder=2)
    ax.add_patch(ell)
    ell.set_gid("plane-ellipse")
    edge = Ellipse((c, s), 2 * a, 2 * b, angle=ang, fill=False, edgecolor=st.TEAL, lw=1.4, zorder=3,
                   label=f"{cl:.0%} confidence region ({what}, Δχ² = {q:.2f})" if labels else None)
    ax.add_patch(edge)
    amp, ph = amplitude_phase(c, s, k)
    ax.plot([c], [s], "o", ms=ms, color=st.TEAL, mec="white", mew=0.8, zorder=5, gid="plane-estimate",
            label=(f"estimate: A{st.sub(k)} = {st.number(amp)} {st.unit_text(unit)}, φ{st.sub(k)} = {ph:.0f}°"
                   if labels else None))
    ax.plot([0], [0], "+", ms=11, mew=1.6, color=st.INK, zorder=6, gid="plane-origin",
            label=f"origin (no {k}θ signal)" if labels else None)
    return a


def plot_plane(fit_or_estimate, harmonic: int = 2, *, confidence_level: float = 0.95, expected=None,
               region: str = "chi2", ax=None):
    """The ``(c_k, s_k)`` plane with the estimate, its confidence ellipse, the origin and the
    prediction of a hypothesis.

    The ellipse is ``dᵀ C⁻¹ d = q`` around the estimate, ``q`` the ``confidence_level`` quantile
    of χ² with 2 degrees of freedom (``region="chi2"``, said in the legend), or of Hotelling's
    T² for a covariance with few degrees of freedom (``region="hotelling"``).  Its semi-axes are
    ``sqrt(q λ_i)`` along the eigenvectors of ``C``.  Distance from the origin is the amplitude;
    the polar angle is ``k·φ_k``.

    Parameters
    ----------
    fit_or_estimate : ScanFit, RunAnalysis, HarmonicEstimate or Limit
    harmonic : int
        Harmonic order (for a ScanFit or RunAnalysis).
    confidence_level : float
    expected : ExpectedSignal, optional
        Draws the predicted ``(c₂, s₂)`` when it has a table-frame phase, else a circle of radius
        ``expected.amplitude``.  A RunAnalysis supplies its own unless ``expected=False``.  When
        the prediction is far larger than the estimate, a zoomed inset shows the estimate.
    region : {"chi2", "hotelling"}
    ax : matplotlib Axes, optional

    Returns
    -------
    matplotlib.axes.Axes
        The ellipse patch carries ``gid`` ``"plane-ellipse"``.
    """
    from matplotlib.patches import Circle

    c, s, cov, k, dof, unit, exp_own = _estimate(fit_or_estimate, harmonic)
    if expected is None:
        expected = exp_own if k == 2 else None  # a hypothesis predicts the 2θ term only
    elif expected is False:
        expected = None
    cl = check_confidence_level(confidence_level)
    q = region_scale(cl, dof, region)
    ax = st.new_axes(ax, figsize=(5.6, 5.6))
    a = _draw(ax, c, s, cov, q, k, unit, cl, region, labels=True)
    reach = max(math.hypot(c, s) + a, a)  # the estimate's extent from the origin
    R = 0.0
    if expected is not None:
        if k != 2:
            raise ValueError("an expected signal predicts the 2θ term: use harmonic=2")
        R = float(expected.amplitude)
        hyp = getattr(expected, "hypothesis_label", None) or expected.hypothesis  # words, not the spec code
        if getattr(expected, "coherent_c2", None) is not None:
            ax.plot([expected.coherent_c2], [expected.coherent_s2], "*", ms=13, color=st.RUST, mec="white",
                    mew=0.6, zorder=6, gid="plane-predicted",
                    label=(f"predicted ({hyp}): A₂ = {st.number(R)} {st.unit_text(unit)}, "
                           f"φ₂ = {expected.coherent_phase_deg:.0f}°"))
        else:
            circ = Circle((0, 0), R, fill=False, edgecolor=st.RUST, lw=1.4, ls="--", zorder=3,
                          label=f"predicted amplitude ({hyp}): A₂ = {st.number(R)} "
                                f"{st.unit_text(unit)}, phase unknown")
            circ.set_gid("plane-predicted")
            ax.add_patch(circ)
    zoom = R > ZOOM_RATIO * reach
    if zoom:
        half = 1.18 * R
        cx = cy = 0.0
    else:
        pts = [(c - a, s - a), (c + a, s + a), (0, 0)]
        if expected is not None:
            if getattr(expected, "coherent_c2", None) is not None:
                pts.append((expected.coherent_c2, expected.coherent_s2))
            else:
                pts += [(-R, -R), (R, R)]
        p = np.array(pts)
        lo, hi = p.min(axis=0), p.max(axis=0)
        cx, cy = 0.5 * (lo + hi)
        half = 0.5 * max(hi - lo) * 1.2 or 1.0
    ax.set_xlim(cx - half, cx + half)
    ax.set_ylim(cy - half, cy + half)
    ax.set_aspect("equal", adjustable="box")
    ax.axhline(0, color=st.HAZE, lw=0.8, zorder=1)
    ax.axvline(0, color=st.HAZE, lw=0.8, zorder=1)
    st.tidy(ax, grid="")
    e = st.exponent_for([cx - half, cx + half, cy - half, cy + half])
    st.unit_axis(ax, "x", f"c{st.sub(k)} (cos {k}θ coefficient)", unit, exponent=e)
    st.unit_axis(ax, "y", f"s{st.sub(k)} (sin {k}θ coefficient)", unit, exponent=e)
    if zoom:
        ins = ax.inset_axes([0.31, 0.31, 0.38, 0.38])
        ins.set_zorder(10)  # above the main panel's own (tiny) estimate and origin marks
        _draw(ins, c, s, cov, q, k, unit, cl, region, labels=False, ms=5.0)
        pts = np.array([(c - a, s - a), (c + a, s + a), (0, 0)])
        lo, hi = pts.min(axis=0), pts.max(axis=0)
        ic = 0.5 * (lo + hi)
        ih = 0.5 * max(hi - lo) * 1.2
        ins.set_xlim(ic[0] - ih, ic[0] + ih)
        ins.set_ylim(ic[1] - ih, ic[1] + ih)
        ins.set_aspect("equal", adjustable="box")
        ins.axhline(0, color=st.HAZE, lw=0.8, zorder=1)
        ins.axvline(0, color=st.HAZE, lw=0.8, zorder=1)
        ie = st.exponent_for([ic[0] - ih, ic[0] + ih, ic[1] - ih, ic[1] + ih])
        ins.xaxis.set_major_formatter(st.scaled_formatter(ie))
        ins.yaxis.set_major_formatter(st.scaled_formatter(ie))
        ins.tick_params(labelsize=7, colors=st.INK, length=2)
        ins.locator_params(nbins=4)
        for side in ins.spines.values():
            side.set_color(st.STONE)
        ins.set_facecolor("white")
        ins.text(0.03, 0.97, f"zoom ×{half / ih:.0f}\n[{st.scaled_unit(unit, ie)}]", transform=ins.transAxes,
                 fontsize=7, va="top", ha="left", color=st.INK)
    st.legend(ax, above=True, ncol=1)
    return ax
