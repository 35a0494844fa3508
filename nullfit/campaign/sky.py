r"""From a campaign's per-turn table to SME and RMS parameters: the entry point of the sky analysis.

:func:`fit_sky` converts the table once into per-turn ``(B, C)`` (:mod:`.sky_data`) and runs one of
two routes that must agree on the same data:

``route="global"`` (:mod:`.sky_global`)
    every turn fitted at once with per-segment nuisance offsets, jackknife errors over segments —
    works with runs of a few hours scattered over a year;
``route="days"`` (:mod:`.sky_days`)
    the five-term sidereal expansion per sidereal day, then the quadratures across days against
    the annual phase, errors from the day-to-day scatter — needs whole sidereal days.

The result is a :class:`~nullfit.campaign.sky_result.SkyFit`.  A short span (``κ̃_e−`` and
``κ̃_o+`` nearly degenerate) issues a ``FitWarning``; ``combined=True`` fits ``κ̃_e−`` alone,
each estimate then measuring the combination with ``κ̃_o+`` that the span constrains.

:func:`sidereal_fold` and :func:`quadrature_curves` prepare what the sky figures draw
(``nullfit.figures.sky``).  Conventions and derivations: ``docs/sky.md``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..core.errors import ScanError
from .sky_data import ESTIMATOR_ORBITS, WEIGHTS, SkyData, concat_turn_tables, quadrature_design, sidereal_hours, \
    sky_data, turn_design
from .sky_days import day_quadratures, fit_days
from .sky_global import fit_global
from .sky_result import SkyFit, span_warnings

__all__ = ["fit_sky", "ROUTES", "SEGMENTS", "load_turns", "sidereal_fold", "quadrature_curves"]

ROUTES = ("global", "days")
SEGMENTS = ("day", "run")


def fit_sky(data, model: str = "sme", *, route: str = "global", use_c0: bool = False, combined: bool = False,
            segments: str = "day", weights: str = "segment", orbit: str = "circular", pair: bool = True,
            confidence_level: float = 0.95) -> SkyFit:
    """Estimate the SME (``model="sme"``) or RMS (``"rms"``) parameters of a campaign.

    Parameters
    ----------
    data : TurnTable or SkyData
        A per-turn table whose runs carry absolute time and their manifest's site (latitude,
        longitude, mark azimuth, table sense) and apparatus (signal, readout sign, L and λ for
        fringes); or the :class:`SkyData` made from one by :func:`sky_data`.
    route : {"global", "days"}
        Global fit with jackknife errors, or per-day demodulation (see the module docstring).
    use_c0 : bool
        Use ``C₀`` for ``e_ZZ`` instead of treating it as nuisance (``B₀`` is always nuisance and
        reported as a null check).
    combined : bool
        SME only: fit ``κ̃_e−`` alone (``κ̃_o+`` folded in; the alias matrix is recorded).
    segments : {"day", "run"}
        Global route: nuisance offsets and jackknife per sidereal-day window or per run.
    weights : {"segment", "turn", "equal"}
        Per-turn weights (:func:`nullfit.campaign.sky_data.turn_weights`).
    orbit : {"circular", "ephemeris"}
        Earth's orbital velocity: the circular formula or astropy's ephemeris.
    pair : bool
        True for an orthogonal pair; False for one resonator turning against a fixed one.
    confidence_level : float
        Of the central intervals the result reports.
    """
    from ..core.conventions import check_confidence_level

    if route not in ROUTES:
        raise ValueError(f"route must be one of {ROUTES}, not {route!r}")
    if segments not in SEGMENTS:
        raise ValueError(f"segments must be one of {SEGMENTS}, not {segments!r}")
    if weights not in WEIGHTS:
        raise ValueError(f"weights must be one of {WEIGHTS}, not {weights!r}")
    if orbit not in ESTIMATOR_ORBITS:
        raise ValueError(f"orbit must be one of {ESTIMATOR_ORBITS}, not {orbit!r}")
    cl = check_confidence_level(confidence_level)
    d = data if isinstance(data, SkyData) else sky_data(data)
    if route == "global":
        fit = fit_global(d, model, use_c0=use_c0, combined=combined, segments=segments, weights=weights,
                         orbit=orbit, pair=pair, confidence_level=cl)
    else:
        if segments != "day":
            raise ValueError("the days route works per sidereal day: segments must be 'day'")
        fit = fit_days(d, model, use_c0=use_c0, combined=combined, weights=weights, orbit=orbit, pair=pair,
                       confidence_level=cl)
    span_warnings(fit)
    return fit


def load_turns(paths, *, harmonics=(1, 2)):
    """A per-turn table from files: ``.parquet`` per-turn tables (``TurnTable.read``) and scan logs
    (CSV or Parquet with manifests, demodulated serially with ``TurnTable.from_scans``)."""
    from ..reading.files import read_scan
    from .turn_table import TurnTable, is_turn_table

    tables, scans = [], []
    for path in map(Path, paths):
        if not path.is_file():
            raise FileNotFoundError(2, "no such file", str(path))
        if path.suffix.lower() == ".parquet" and is_turn_table(path):  # else read as a log (its own errors)
            tables.append(TurnTable.read(path))
        else:
            scans.append(read_scan(path))
    if scans:
        tables.append(TurnTable.from_scans(scans, harmonics=harmonics))
    if not tables:
        raise ScanError("no input files")
    return concat_turn_tables(tables)


def sidereal_fold(data: SkyData, fit: SkyFit, *, bins: int = 24):
    """Per-turn ``B`` and ``C`` with their segment offsets removed, binned in local sidereal time,
    and the fitted model on the same bins (averaged over the campaign's turns).

    Returns a DataFrame: ``channel`` (B or C), ``hour`` (bin centre), ``mean``, ``sigma`` (scatter
    of the turns in the bin over √n), ``n``, ``model``.  With ``use_c0`` the C offsets stay in.
    """
    import pandas as pd

    from ..hypothesis.sidereal import MODEL_NAMES

    seg = data.segments(fit.segments)
    cols = [MODEL_NAMES[fit.model].index(n) for n in fit.names]
    XC, XB = turn_design(data, fit.model, use_c0=fit.use_c0, orbit=fit.orbit, pair=fit.pair)
    hours = sidereal_hours(data.w)
    b = np.minimum((hours / 24.0 * bins).astype(int), bins - 1)
    G = int(seg.max()) + 1
    rows = []
    for ch, y, X, demean in (("C", data.C, XC[:, cols], not fit.use_c0), ("B", data.B, XB[:, cols], True)):
        m = X @ fit.estimate
        if demean:
            n_g = np.bincount(seg, minlength=G)
            off = np.bincount(seg, weights=y - m, minlength=G) / np.maximum(n_g, 1)
            y = y - off[seg]
        for k in range(bins):
            sel = b == k
            n = int(sel.sum())
            if n == 0:
                continue
            yy = y[sel]
            rows.append({"channel": ch, "hour": (k + 0.5) * 24.0 / bins, "mean": float(yy.mean()),
                         "sigma": float(yy.std(ddof=1) / np.sqrt(n)) if n > 1 else np.nan, "n": n,
                         "model": float(m[sel].mean())})
    return pd.DataFrame(rows)


def quadrature_curves(data: SkyData, fit: SkyFit, *, n: int = 181):
    """Per-day quadratures (stage 1 of the days route) and the fitted model ``M(W) p̂`` over the
    campaign's span: ``(days, curve)`` DataFrames (``curve``: ``t_unix``, ``W_deg`` and every
    quadrature; the first site's latitude)."""
    import pandas as pd

    from ..hypothesis.sidereal import MODEL_NAMES, QUADRATURE_KEYS

    dq = day_quadratures(data, weights=fit.weights)
    t = np.linspace(data.time_s.min(), data.time_s.max(), n)
    M = quadrature_design(fit.model, data.sites[0], data.epoch_unix, t, orbit=fit.orbit, pair=fit.pair,
                          precess_to_unix=data.mid_unix)
    cols = [MODEL_NAMES[fit.model].index(x) for x in fit.names]
    q = M[:, :, cols] @ fit.estimate
    from ..hypothesis.sidereal import annual_phase_rad

    curve = {"t_unix": data.epoch_unix + t, "W_deg": np.rad2deg(annual_phase_rad(epoch_unix=data.epoch_unix,
                                                                                  time_s=t))}
    curve.update({k: q[:, i] for i, k in enumerate(QUADRATURE_KEYS)})
    return dq.frame(), pd.DataFrame(curve)
