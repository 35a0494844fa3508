r"""From a per-turn table to the sky analysis's inputs: per-turn ``(B, C)``, clocks, segments, design.

Every turn's table-frame ``(c₂, s₂)`` (the log's unit) is converted **once** into the sky
quadratures ``(B, C)`` of ``(ν₁ − ν₂)/ν`` with the site and apparatus of its run
(:func:`nullfit.hypothesis.sidereal.bc_from_c2s2`): mark azimuth, table sense, readout sign and
``2L/λ`` are used here and nowhere after.  The per-turn white-noise variance becomes
``var = (σ_c² + σ_s²) / (2 g²)`` with the log gain ``g``.

Clocks: the local mean sidereal angle ``w`` of each turn's mid time at its site's longitude, and the
annual phase ``W`` (``docs/sky.md``).

Segments: each run is cut into consecutive windows of one sidereal day (86164.0905 s, common
practice) counted from its first turn; ``"day"`` segments are these windows, ``"run"`` segments
the runs.  A run shorter than a sidereal day is one window.

Left out, and counted (``SkyData.dropped``): partial turns, turns with non-finite coefficients or
errors, and runs whose manifest lacks absolute time.  A run without a usable site (latitude,
longitude, mark azimuth) or apparatus is refused with one line naming it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..core.errors import AnalysisError, ScanError
from ..hypothesis.apparatus import Apparatus
from ..hypothesis.sidereal import (
    MODEL_NAMES,
    QUADRATURE_KEYS,
    annual_phase_rad,
    bc_from_c2s2,
    design_matrix,
    log_gain,
    orbital_beta_ephemeris,
    sidereal_angle_rad,
)
from ..hypothesis.site import Site
from .turn_table import NS_PER_S

__all__ = ["SkyData", "sky_data", "turn_design", "SIDEREAL_DAY_S", "ESTIMATOR_ORBITS", "concat_turn_tables"]

#: Mean sidereal day in SI seconds (common practice).
SIDEREAL_DAY_S = 86164.0905
#: Orbit models the estimators accept (the circular formula, or astropy's ephemeris velocity).
ESTIMATOR_ORBITS = ("circular", "ephemeris")
_CHUNK = 50_000


@dataclass(frozen=True, eq=False)
class SkyData:
    """Per-turn sky inputs, one entry per usable turn (arrays aligned), sorted by run and time."""

    run_ids: tuple[str, ...]
    run: np.ndarray = field(repr=False)          # index into run_ids
    epoch_unix: int = 0
    time_s: np.ndarray = field(default=None, repr=False)   # seconds since epoch_unix (turn mid times)
    B: np.ndarray = field(default=None, repr=False)
    C: np.ndarray = field(default=None, repr=False)
    var: np.ndarray = field(default=None, repr=False)      # white-noise variance of B and of C per turn
    w: np.ndarray = field(default=None, repr=False)        # local mean sidereal angle, rad
    W: np.ndarray = field(default=None, repr=False)        # annual phase, rad
    sites: tuple[Site, ...] = ()
    site: np.ndarray = field(default=None, repr=False)     # index into sites
    window: np.ndarray = field(default=None, repr=False)   # sidereal-day window, global index
    dropped: tuple[tuple[str, int], ...] = ()
    seed: int | None = None

    @property
    def n_turns(self) -> int:
        return int(self.time_s.size)

    @property
    def span_days(self) -> float:
        return float(self.time_s.max() - self.time_s.min()) / 86400.0 if self.n_turns else 0.0

    @property
    def mid_unix(self) -> float:
        return self.epoch_unix + 0.5 * float(self.time_s.min() + self.time_s.max())

    def segments(self, kind: str) -> np.ndarray:
        """Segment index per turn, numbered 0 … G−1 over the segments present: sidereal-day windows
        (``"day"``) or runs (``"run"``)."""
        if kind == "day":
            ids = self.window
        elif kind == "run":
            ids = self.run
        else:
            raise ValueError(f"segments must be 'day' or 'run', not {kind!r}")
        return np.unique(ids, return_inverse=True)[1].ravel().astype(np.int64)

    def subset(self, mask) -> "SkyData":
        """The turns where ``mask`` is True (segments renumbered; runs and sites kept)."""
        m = np.asarray(mask, dtype=bool)
        _, win = np.unique(self.window[m], return_inverse=True)
        arrays = {k: getattr(self, k)[m] for k in ("run", "time_s", "B", "C", "var", "w", "W", "site")}
        return SkyData(self.run_ids, epoch_unix=self.epoch_unix, sites=self.sites, window=win.astype(np.int64),
                       dropped=self.dropped + (("left out by selection", int((~m).sum())),), seed=self.seed,
                       **arrays)


def _run_setup(run_id: str, meta: dict) -> tuple[Site, Apparatus]:
    try:
        site = Site.from_mapping(meta.get("site") or {})
    except (TypeError, ValueError) as err:
        raise ScanError(f"run {run_id}: [site] of its manifest: {err}") from None
    if not site.has_mark:
        raise ScanError(f"run {run_id}: [site] has no mark_azimuth_deg; the sky analysis needs the compass "
                        "azimuth of the table's reference mark")
    app_tab = dict(meta.get("apparatus") or {})
    unit = meta.get("unit")
    if "signal" in app_tab and unit is not None and app_tab["signal"] != unit:
        raise ScanError(f"run {run_id}: [apparatus] signal = {app_tab['signal']!r} but the log is in {unit!r}")
    app_tab.setdefault("signal", unit or "fringe")
    try:
        app = Apparatus.from_mapping(app_tab)
    except (TypeError, ValueError) as err:
        raise ScanError(f"run {run_id}: [apparatus] of its manifest: {err}") from None
    return site, app


def sky_data(table) -> SkyData:
    """The per-turn sky inputs of a :class:`~nullfit.campaign.turn_table.TurnTable`."""
    frame, runs = table.frame, table.runs
    if 2 not in tuple(table.harmonics):
        raise AnalysisError("the per-turn table has no 2θ coefficients (c2, s2); demodulate with harmonics "
                            "including 2")
    if len(frame) == 0:
        raise AnalysisError("the per-turn table has no turns")
    dropped: dict[str, int] = {}
    site_keys: dict[tuple, int] = {}
    sites: list[Site] = []
    run_ids: list[str] = []
    parts = []
    for run_id, rows in frame.groupby("run", sort=True):
        meta = runs.get(run_id)
        if meta is None:
            raise ScanError(f"run {run_id}: no entry in the table's metadata (runs)")
        if not meta.get("absolute_time", meta.get("epoch_unix") is not None):
            dropped["turns of runs without absolute time"] = dropped.get("turns of runs without absolute time", 0) \
                + len(rows)
            continue
        site, app = _run_setup(str(run_id), meta)
        complete = rows["complete"].to_numpy(dtype=bool)
        c2, s2 = rows["c2"].to_numpy(dtype=float), rows["s2"].to_numpy(dtype=float)
        sc, ss = rows["sigma_c2"].to_numpy(dtype=float), rows["sigma_s2"].to_numpy(dtype=float)
        finite = np.isfinite(c2) & np.isfinite(s2) & np.isfinite(sc) & np.isfinite(ss) & (sc > 0) & (ss > 0)
        n_part = int((~complete).sum())
        n_bad = int((complete & ~finite).sum())
        if n_part:
            dropped["partial turns"] = dropped.get("partial turns", 0) + n_part
        if n_bad:
            dropped["turns with non-finite coefficients or errors"] = \
                dropped.get("turns with non-finite coefficients or errors", 0) + n_bad
        keep = complete & finite
        if not keep.any():
            continue
        B, C = bc_from_c2s2(c2[keep], s2[keep], site=site, apparatus=app)
        var = 0.5 * (sc[keep] ** 2 + ss[keep] ** 2) / log_gain(app) ** 2
        key = (site.latitude_deg, site.longitude_deg)
        if key not in site_keys:
            site_keys[key] = len(sites)
            sites.append(site)
        run_ids.append(str(run_id))
        ns = rows["t_mid_ns"].to_numpy(dtype=np.int64)[keep]
        order = np.argsort(ns, kind="stable")
        parts.append((len(run_ids) - 1, site_keys[key], ns[order], B[order], C[order], var[order]))
    if not parts:
        raise AnalysisError("no usable turns: " + ", ".join(f"{v} {k}" for k, v in dropped.items()))
    ns_all = np.concatenate([p[2] for p in parts])
    epoch = int(ns_all.min() // NS_PER_S)
    time_s = (ns_all - epoch * NS_PER_S).astype(float) / NS_PER_S
    run = np.concatenate([np.full(p[2].size, p[0], np.int64) for p in parts])
    site = np.concatenate([np.full(p[2].size, p[1], np.int64) for p in parts])
    # sidereal-day windows per run, counted from the run's first turn
    win_local = np.concatenate([np.floor((p[2] - p[2][0]) / (SIDEREAL_DAY_S * NS_PER_S)).astype(np.int64)
                                for p in parts])
    _, window = np.unique(np.stack([run, win_local]), axis=1, return_inverse=True)
    w = np.empty(time_s.size)
    for j, s in enumerate(sites):
        m = site == j
        w[m] = sidereal_angle_rad(epoch_unix=epoch, time_s=time_s[m], longitude_deg=s.longitude_deg)
    W = annual_phase_rad(epoch_unix=epoch, time_s=time_s)
    seed = (table.meta.get("settings") or {}).get("seed")
    return SkyData(tuple(run_ids), run, epoch, time_s, np.concatenate([p[3] for p in parts]),
                   np.concatenate([p[4] for p in parts]), np.concatenate([p[5] for p in parts]), w, W,
                   tuple(sites), site, window.ravel().astype(np.int64), tuple(sorted(dropped.items())),
                   seed if isinstance(seed, int) else None)


def _orbit_arg(orbit: str, epoch: float, time_s: np.ndarray):
    if orbit == "circular":
        return True
    if orbit == "ephemeris":
        from ..core.conventions import SPEED_OF_LIGHT

        return orbital_beta_ephemeris(epoch_unix=epoch, time_s=time_s) * SPEED_OF_LIGHT
    raise ValueError(f"orbit must be one of {ESTIMATOR_ORBITS}, not {orbit!r}")


def quadrature_design(model: str, site: Site, epoch: float, time_s: np.ndarray, *, orbit: str = "circular",
                      pair: bool = True, precess_to_unix: float | None = None) -> np.ndarray:
    """``M(W)`` at the given times: shape ``(n, 10, p)`` (rows ``QUADRATURE_KEYS``, columns the model's)."""
    W = np.rad2deg(annual_phase_rad(epoch_unix=epoch, time_s=time_s))
    orb = _orbit_arg(orbit, epoch, time_s)
    return design_matrix(model, latitude_deg=site.latitude_deg, annual_phase_deg=W, orbit=orb, pair=pair,
                         precess_to_unix=precess_to_unix).matrix


def turn_design(data: SkyData, model: str, *, use_c0: bool = False, orbit: str = "circular",
                pair: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Per-turn design ``(X_C, X_B)``, each ``(n, p)`` with p the model's parameters (all of them).

    ``X_C[i] = Σ_k f_k(w_i) M_{C k}(W_i)`` over ``k ∈ {s1, c1, s2, c2}`` (and ``C0`` when
    ``use_c0``), likewise ``X_B`` without ``B0`` (nuisance, no signal at this order).  The
    sun-frame axes are precessed to the mean equator and equinox of the campaign's middle.
    """
    p = len(MODEL_NAMES[model])
    n = data.n_turns
    XC, XB = np.zeros((n, p)), np.zeros((n, p))
    idx = {k: i for i, k in enumerate(QUADRATURE_KEYS)}
    ref = data.mid_unix
    for j, site in enumerate(data.sites):
        rows = np.flatnonzero(data.site == j)
        for start in range(0, rows.size, _CHUNK):
            r = rows[start:start + _CHUNK]
            M = quadrature_design(model, site, data.epoch_unix, data.time_s[r], orbit=orbit, pair=pair,
                                  precess_to_unix=ref)
            w = data.w[r][:, None]
            f = {"s1": np.sin(w), "c1": np.cos(w), "s2": np.sin(2 * w), "c2": np.cos(2 * w)}
            xc = sum(f[k] * M[:, idx["C" + k], :] for k in f)
            xb = sum(f[k] * M[:, idx["B" + k], :] for k in f)
            if use_c0:
                xc = xc + M[:, idx["C0"], :]
            XC[r], XB[r] = xc, xb
    return XC, XB


def concat_turn_tables(tables):
    """One per-turn table from several (run ids must be unique; harmonics must agree)."""
    import pandas as pd

    from .turn_table import TurnTable

    tables = list(tables)
    if len(tables) == 1:
        return tables[0]
    harm = {tuple(t.harmonics) for t in tables}
    if len(harm) != 1:
        raise ScanError(f"per-turn tables with different harmonics {sorted(harm)} cannot be combined")
    runs: dict = {}
    for t in tables:
        for r, m in t.runs.items():
            if r in runs:
                raise ScanError(f"run id {r!r} appears in two per-turn tables; run ids must be unique")
            runs[r] = m
    meta = dict(tables[0].meta)
    meta["runs"] = runs
    meta["failed"] = {k: v for t in tables for k, v in (t.meta.get("failed") or {}).items()}
    return TurnTable(pd.concat([t.frame for t in tables], ignore_index=True), meta)


def sidereal_hours(w) -> np.ndarray:
    """Local sidereal time in hours for sidereal angles in radians."""
    return np.mod(np.asarray(w, dtype=float), 2 * math.pi) * 12.0 / math.pi


#: Per-turn weighting schemes of the estimators.
WEIGHTS = ("segment", "turn", "equal")


def turn_weights(data: SkyData, seg: np.ndarray, kind: str = "segment") -> np.ndarray:
    """Relative weights of the turns (normalised to mean 1).

    ``"segment"``: 1/s² with s² the noise variance of the turn's segment from the differences of
    consecutive turns, ``s² = Σ (Δy)² / (2 (n − 1))`` pooled over B and C (the successive-difference
    estimator: insensitive to the slow sidereal signal and to the offset, so that the weights do not
    depend on the signal; segments with fewer than 3 turns take the median s² of the others) —
    robust to per-turn error estimates with few degrees of freedom.  ``"turn"``: 1/var from each
    turn's white-noise errors.  ``"equal"``: all 1.
    """
    if kind == "equal":
        w = np.ones(data.n_turns)
    elif kind == "turn":
        w = 1.0 / data.var
    elif kind == "segment":
        G = int(seg.max()) + 1
        order = np.lexsort((data.time_s, seg))
        s_ord = seg[order]
        same = s_ord[1:] == s_ord[:-1]
        ss = np.zeros(G)
        for y in (data.B, data.C):
            d = np.diff(y[order])
            ss += np.bincount(s_ord[1:][same], weights=d[same] ** 2, minlength=G)
        n = np.bincount(seg, minlength=G).astype(float)
        ok = n >= 3
        if not ok.any():
            raise AnalysisError("weights='segment' needs segments of at least 3 turns; use weights='turn'")
        s2 = np.where(ok, ss / np.maximum(4.0 * (n - 1.0), 1.0), np.nan)  # 2 channels × 2 (n − 1)
        s2 = np.where(ok & (s2 > 0), s2, np.nanmedian(s2[ok]))
        w = 1.0 / s2[seg]
    else:
        raise ValueError(f"weights must be one of {WEIGHTS}, not {kind!r}")
    return w / w.mean()
