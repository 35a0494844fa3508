"""Figures for a scan, its limits and a campaign (matplotlib only).

Every function takes ``ax=None`` (a new figure is made when None) and returns the Axes it drew
on; it never calls ``plt.show()`` and never changes matplotlib's global settings.  Axes carry
units (fringe or Δν/ν from the scan's ``unit``, seconds or hours, degrees); a power of
ten is factored out of tick labels and named in the axis label.  Amplitude and peak-to-peak
(``2A``) are labelled as such wherever a shift is shown.

=============================  =====================================================================
function                       figure
=============================  =====================================================================
:func:`plot_scan`              raw log against time, drift model, partial (excluded) turns shaded
:func:`plot_folded`            signal − drift folded by table angle: binned means ± s.e., fitted
                               harmonics and the 2θ term alone; ``polar=True`` for a polar view
:func:`plot_per_turn`          per-turn c_k, s_k against time, with a running mean
:func:`plot_allan`             Allan deviation of the per-turn c_k, s_k series, τ^(−1/2) reference
:func:`plot_plane`             the (c_k, s_k) plane: estimate, confidence ellipse, origin, prediction
:func:`plot_posterior`         Bayes posterior of the amplitude with the credible upper limit
:func:`plot_belt`              unified (Feldman–Cousins) confidence belt with the interval marked
:func:`plot_limits`            the limits of every route side by side (amplitude and peak-to-peak)
:func:`plot_expected_vs_bound` expected amplitude vs upper limit across runs, ratio annotated
:func:`plot_sidereal_fold`     per-turn B, C of a campaign folded on sidereal time, fitted model
:func:`plot_quadratures`       one sidereal quadrature per day against the annual phase, model
:func:`plot_sky_bounds`        SME/RMS bounds of a campaign beside published ones (log axis)
=============================  =====================================================================

Figures draw; they do not compute.  What they show comes from the stages: the drift model and
the folded signal from :mod:`nullfit.fitting.model`, the belt from
:func:`nullfit.limits.unified.belt_curves`, the run table from :mod:`nullfit.campaign.runs`.
Artists that tests and reports may want to find carry a ``gid`` (listed in each docstring).
"""

from __future__ import annotations

from .campaign import plot_expected_vs_bound
from .intervals import plot_belt, plot_limits, plot_posterior
from .plane import plot_plane
from .scan import plot_folded, plot_scan
from .series import plot_allan, plot_per_turn
from .sky import plot_quadratures, plot_sidereal_fold, plot_sky_bounds

__all__ = [
    "plot_scan",
    "plot_folded",
    "plot_per_turn",
    "plot_allan",
    "plot_plane",
    "plot_posterior",
    "plot_belt",
    "plot_limits",
    "plot_expected_vs_bound",
    "plot_sidereal_fold",
    "plot_quadratures",
    "plot_sky_bounds",
]
