"""The look shared by every nullfit figure: palette, axes tidying, unit labels, scaled ticks.

Nothing here touches matplotlib's global state (``rcParams``, the backend): every setting is
applied to the Axes a function draws on, so a user's own style is left alone outside them.

Palette (own choice, restrained: a dark ink for fits, a warm grey for raw data, and four
muted accents that stay distinct in greyscale print by lightness and marker shape).
"""

from __future__ import annotations

import math
import textwrap

import numpy as np

#: Fitted curves, text, reference marks.
INK = "#1e2b33"
#: Raw readings.
STONE = "#8b8f93"
#: Light fills (acceptance regions, shading).
HAZE = "#dfe6e9"
#: Primary accent: cosine coefficients, estimates, the first limit route.
TEAL = "#17707a"
#: Second accent: sine coefficients, predictions, the second route.
RUST = "#b55d1f"
#: Third and fourth accents.
HEATHER = "#6e4f86"
FERN = "#5c7d2e"
#: Partial (excluded) turns.
SAND = "#e9d8b8"

SIGNAL_UNIT_TEXT = {"fringe": "fringe", "fractional": "Δν/ν"}
_SUB = str.maketrans("0123456789", "₀₁₂₃₄₅₆₇₈₉")


def sub(k) -> str:
    """``2`` → ``"₂"`` (harmonic index as a subscript)."""
    return str(k).translate(_SUB)


def unit_text(signal_unit: str | None) -> str:
    """Readable unit of a signal: ``"fringe"`` or ``"Δν/ν"``."""
    if not signal_unit:
        return "signal units"
    return SIGNAL_UNIT_TEXT.get(str(signal_unit), str(signal_unit))


def new_axes(ax=None, *, polar: bool = False, figsize=(6.4, 4.0)):
    """``ax`` itself, or a fresh figure's single Axes (polar if asked)."""
    if ax is not None:
        if polar and getattr(ax, "name", "") != "polar":
            raise ValueError("polar=True needs a polar Axes (e.g. fig.add_subplot(projection='polar')) or ax=None")
        return ax
    import matplotlib.pyplot as plt

    fig = plt.figure(figsize=figsize, layout="constrained")
    return fig.add_subplot(projection="polar" if polar else None)


def tidy(ax, *, grid: str = "both") -> None:
    """Quiet frame: no top/right spines, a faint grid under the data, ink-coloured ticks."""
    if getattr(ax, "name", "") == "polar":
        ax.grid(True, color=HAZE, lw=0.7)
        ax.spines["polar"].set_color(STONE)
        return
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(INK)
        ax.spines[side].set_linewidth(0.8)
    ax.tick_params(colors=INK, labelsize=9, width=0.8)
    if grid:
        ax.grid(True, axis=grid, color=HAZE, lw=0.7, zorder=0)
    ax.set_axisbelow(True)


#: characters of an 8-point legend label per inch of figure width (with room for the marker)
ABOVE_CHARS_PER_INCH = 11


def legend(ax, *, above: bool = False, ncol: int = 1, loc: str = "best", **kw):
    """A small, framed legend; ``above=True`` places it in a row above the plotting area so that it
    can never hide data."""
    opts = dict(fontsize=8, frameon=True, framealpha=0.92, edgecolor=HAZE, fancybox=False)
    opts.update(kw)
    if above:
        # a row above the axes must not be wider than the figure: wrap long labels at word boundaries
        handles, labels = ax.get_legend_handles_labels()
        handles, labels = opts.pop("handles", handles), opts.pop("labels", labels)
        width = max(24, int(ABOVE_CHARS_PER_INCH * ax.figure.get_figwidth() / max(ncol, 1)))
        labels = [textwrap.fill(t, width, break_long_words=False) for t in labels]
        return ax.legend(handles, labels, loc="lower left", bbox_to_anchor=(0.0, 1.01), ncol=ncol,
                         borderaxespad=0.0, **opts)
    return ax.legend(loc=loc, ncol=ncol, **opts)


# ----------------------------------------------------------------------------- scaled axes
def exponent_for(values) -> int:
    """Power of ten to factor out of tick labels: 0 for magnitudes in [0.01, 1000)."""
    v = np.abs(np.asarray(values, dtype=float)).ravel()
    v = v[np.isfinite(v) & (v > 0)]
    if v.size == 0:
        return 0
    e = int(math.floor(math.log10(float(v.max()))))
    return 0 if -2 <= e <= 2 else e


def scaled_unit(signal_unit: str | None, exponent: int) -> str:
    """``"10⁻⁴ fringe"`` style unit text (mathtext power) for an axis label."""
    u = unit_text(signal_unit)
    return u if exponent == 0 else f"$10^{{{exponent}}}$ {u}"


def _tick_text(v: float, exponent: int) -> str:
    x = v / 10.0**exponent
    if abs(x) < 1e-9:
        x = 0.0
    return f"{x:.6g}".replace("-", "−")


def unit_axis(ax, which: str, quantity: str, signal_unit: str | None, *, exponent: int | None = None,
              power: int = 1) -> int:
    """Label axis ``which`` (``"x"``, ``"y"``) as ``quantity [unit]`` with a power of ten
    factored out of the tick labels (the data stay in signal units).

    ``power`` = −1 labels a density per unit (``[1/fringe]``).  Returns the exponent used.
    """
    import matplotlib.ticker as mticker

    axis = ax.xaxis if which == "x" else ax.yaxis
    lim = ax.get_xlim() if which == "x" else ax.get_ylim()
    e = exponent_for(lim) if exponent is None else int(exponent)
    axis.set_major_formatter(mticker.FuncFormatter(lambda v, _pos: _tick_text(v, e)))
    if power == -1:
        base = unit_text(signal_unit)
        inv = f"{base}⁻¹" if " " not in base and "/" not in base else f"({base})⁻¹"
        u = inv if e == 0 else f"$10^{{{e}}}$ {inv}"
    else:
        u = scaled_unit(signal_unit, e)
    axis.set_label_text(f"{quantity} [{u}]")
    return e


def scaled_formatter(exponent: int, offset: float = 0.0):
    """Tick labels ``(v + offset) / 10**exponent``: ``offset`` labels a shifted coordinate (the
    radius of a polar plot, which cannot be negative) with the value it stands for."""
    import matplotlib.ticker as mticker

    return mticker.FuncFormatter(lambda v, _pos: _tick_text(v + offset, exponent))


def number(v, digits: int = 3) -> str:
    """Compact number for annotations: ``1.40×10⁻³`` style (mathtext)."""
    if v is None or not np.isfinite(v):
        return "—"
    v = float(v)
    if v == 0:
        return "0"
    e = int(math.floor(math.log10(abs(v))))
    if -2 <= e <= 3:
        return f"{v:.{max(digits - 1 - e, 0)}f}" if e < digits else f"{v:.0f}"
    m = v / 10.0**e
    return f"{m:.{digits - 1}f}$\\times10^{{{e}}}$"


def time_axis(seconds, *, force: str | None = None):
    """Choose seconds or hours for a time span: returns ``(divisor, unit)``."""
    span = float(np.nanmax(seconds) - np.nanmin(seconds)) if np.size(seconds) else 0.0
    if force == "h" or (force is None and span >= 7200.0):
        return 3600.0, "h"
    return 1.0, "s"


def log_ticks(axis, lo: float, hi: float, exponent: int = 0, *, steps=(1, 2, 3, 5)) -> None:
    """Major ticks of a log axis at ``steps × 10ⁿ`` inside ``[lo, hi]`` with plain labels
    (divided by ``10**exponent``) and no minor labels (avoids crowded ``3×10²`` style text)."""
    import matplotlib.ticker as mticker

    lo, hi = float(lo), float(hi)
    if not (lo > 0 and hi > lo):
        return
    ticks = [s * 10.0**n for n in range(int(math.floor(math.log10(lo))) - 1, int(math.ceil(math.log10(hi))) + 1)
             for s in steps]
    ticks = [t for t in ticks if lo <= t <= hi]
    if len(ticks) < 2:
        ticks = [t for t in (s * 10.0**n for n in range(int(math.floor(math.log10(lo))) - 1,
                                                            int(math.ceil(math.log10(hi))) + 1)
                             for s in range(1, 10)) if lo <= t <= hi]
    axis.set_major_locator(mticker.FixedLocator(ticks))
    axis.set_major_formatter(scaled_formatter(exponent))
    axis.set_minor_formatter(mticker.NullFormatter())
