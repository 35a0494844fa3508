r"""Published SME and RMS results beside a campaign's own.

:func:`published_sky_bounds` reads a small table (``nullfit/campaign/data/published_sky_bounds.csv``,
or a CSV of the same columns given by the user):

``parameter``
    an SME name (``e_XY`` …) or a family (``e_*`` every ``κ̃_e−`` component, ``o_*`` every
    ``κ̃_o+`` component), or ``P_MM``;
``value``, ``sigma``
    the central value (may be empty) and one standard deviation;
``kind``
    ``sigma`` (``value ± sigma`` as published) or ``sigma_order`` (only the order of magnitude of
    the uncertainty is recorded);
``confidence_level``, ``year``, ``span_days``, ``experiment``, ``reference`` (journal citation),
``note``.

The bundled table holds orders of magnitude **recalled from memory**, as its notes say; it
places a campaign among the published ones, it is not a source to cite.

:func:`bounds_table` puts the campaign's central intervals and the published rows in one frame:
for each parameter the bound on ``|x|`` at the campaign's confidence level
(``max(|lower|, |upper|)`` for the campaign; ``|value| + z σ`` for a published row, ``z σ`` when
only the order of σ is known).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..core.errors import ScanError

__all__ = ["published_sky_bounds", "bounds_table", "BOUNDS_COLUMNS", "BUNDLED_BOUNDS"]

BUNDLED_BOUNDS = Path(__file__).resolve().parent / "data" / "published_sky_bounds.csv"
BOUNDS_COLUMNS = ("parameter", "value", "sigma", "kind", "confidence_level", "year", "span_days", "experiment",
                  "reference", "note")
_KINDS = ("sigma", "sigma_order")


def published_sky_bounds(path=None):
    """The published-bounds table as a DataFrame (the bundled one by default)."""
    import pandas as pd

    p = BUNDLED_BOUNDS if path is None else Path(path)
    try:
        df = pd.read_csv(p, comment="#")
    except (OSError, ValueError) as err:
        raise ScanError(f"{p}: not a readable bounds table ({' '.join(str(err).split())[:160]})") from None
    missing = [c for c in BOUNDS_COLUMNS if c not in df.columns]
    if missing:
        raise ScanError(f"{p}: bounds table lacks column(s) {missing}; needs {list(BOUNDS_COLUMNS)}")
    for i, row in df.iterrows():
        where = f"{p}, row {i + 1}"
        if row["kind"] not in _KINDS:
            raise ScanError(f"{where}, column 'kind': {row['kind']!r} is not one of {_KINDS}")
        s = float(row["sigma"])
        if not (np.isfinite(s) and s > 0):
            raise ScanError(f"{where}, column 'sigma': must be a positive number, not {row['sigma']!r}")
        if row["kind"] == "sigma" and not np.isfinite(float(row["value"])):
            raise ScanError(f"{where}, column 'value': kind 'sigma' needs the central value")
    return df[list(BOUNDS_COLUMNS)]


def _matches(family: str, name: str) -> bool:
    return family == name or (family.endswith("*") and name.startswith(family[:-1]))


def bounds_table(fit, published=None, *, confidence_level: float | None = None):
    """One row per (parameter, source): the campaign's interval and the published rows matching it.

    Columns ``parameter``, ``source`` (``"this campaign"`` or the reference), ``year``,
    ``estimate``, ``sigma``, ``lower``, ``upper``, ``bound_abs`` (bound on ``|x|`` at the
    confidence level), ``kind``, ``note``.  ``published`` is a DataFrame of
    :func:`published_sky_bounds` (None: the bundled table; False: none).
    """
    import pandas as pd
    from scipy import stats

    cl = fit.confidence_level if confidence_level is None else float(confidence_level)
    pub = published_sky_bounds() if published is None else published
    z = float(stats.norm.ppf(0.5 + cl / 2))
    rows = []
    lims = fit.intervals(cl)
    for n in fit.names:
        lim = lims[n]
        est, sig = fit[n]
        rows.append({"parameter": n, "source": "this campaign", "year": np.nan, "estimate": est, "sigma": sig,
                     "lower": lim.lower, "upper": lim.upper, "bound_abs": max(abs(lim.lower), abs(lim.upper)),
                     "kind": "central interval", "note": f"{fit.route} route, {fit.span_days:.0f} days"})
        if pub is False or pub is None:
            continue
        for _, r in pub.iterrows():
            if not _matches(str(r["parameter"]), n):
                continue
            s = float(r["sigma"])
            v = float(r["value"]) if np.isfinite(float(r["value"])) else np.nan
            lo, up = (v - z * s, v + z * s) if np.isfinite(v) else (np.nan, np.nan)
            rows.append({"parameter": n, "source": str(r["reference"]), "year": float(r["year"]), "estimate": v,
                         "sigma": s, "lower": lo, "upper": up,
                         "bound_abs": (abs(v) + z * s) if np.isfinite(v) else z * s,
                         "kind": str(r["kind"]), "note": str(r["note"])})
    out = pd.DataFrame(rows)
    out.attrs["confidence_level"] = cl  # every bound_abs is at this level (figures label it)
    return out
