"""The validation rules that turn three columns into a `Scan` (or a one-line `ScanError`).

Order of the checks (each names file, row and column where it applies):

1. lengths agree, at least two rows;
2. non-finite readings: dropped and counted with a `ScanWarning` (``nonfinite="drop"``), or
   refused (``nonfinite="raise"``);
3. times strictly increasing (a duplicate or a step back names the row);
4. angle unit plausibility (degrees that look like radians, or the reverse);
5. turn numbering, at least one complete turn;
6. a signal that is not constant;
7. angle coverage able to separate cos 2θ from sin 2θ.
"""

from __future__ import annotations

import math
import warnings
from typing import Any, Mapping

import numpy as np

from .conventions import check_angle_unit
from .scan import TWO_PI, Manifest, ScanError, ScanWarning, number_turns, where

#: Relative times larger than this are taken as Unix seconds (1e8 s ≈ 3 years).
UNIX_THRESHOLD_S = 1e8


def coverage_condition(angle_rad: np.ndarray, k: int = 2) -> float:
    """Smallest eigenvalue of the normalised Gram matrix of (cos kθ, sin kθ) after removing
    the mean: 0.5 for uniform coverage, 0 when cos kθ and sin kθ cannot be separated."""
    c = np.cos(k * angle_rad)
    s = np.sin(k * angle_rad)
    c = c - c.mean()
    s = s - s.mean()
    g = np.array([[c @ c, c @ s], [c @ s, s @ s]]) / max(angle_rad.size, 1)
    return float(np.linalg.eigvalsh(g)[0])


def build_scan(cls, time, angle, signal, *, angle_unit="deg", epoch_unix=None, signal_unit="fringe",
               source="<data>", rows=None, columns: Mapping[str, str] | None = None,
               aux: Mapping[str, Any] | None = None, meta: Manifest | None = None,
               dropped: Mapping[str, int] | None = None, nonfinite: str = "drop"):
    check_angle_unit(angle_unit)
    if nonfinite not in ("drop", "raise"):
        raise ValueError(f"nonfinite must be 'drop' or 'raise', not {nonfinite!r}")
    cols = {"time": "time", "angle": "angle", "signal": "signal"}
    cols.update(columns or {})
    t = np.asarray(time, dtype=float).ravel()
    a = np.asarray(angle, dtype=float).ravel()
    y = np.asarray(signal, dtype=float).ravel()
    n = t.size
    if not (a.size == n and y.size == n):
        raise ScanError(f"{where(source)}: columns have different lengths ({n}, {a.size}, {y.size})")
    rows = np.arange(1, n + 1) if rows is None else np.asarray(rows, dtype=np.int64).ravel()
    aux_arr = {k: np.asarray(v, dtype=float).ravel() for k, v in (aux or {}).items()}
    if n == 0:
        raise ScanError(f"{where(source)}: the log has no data rows")
    drops: dict[str, int] = dict(dropped or {})

    # 2. non-finite readings
    finite = np.isfinite(t) & np.isfinite(a) & np.isfinite(y)
    for v in aux_arr.values():
        finite &= np.isfinite(v)
    if not finite.all():
        bad = int(np.flatnonzero(~finite)[0])
        name = next(cols[k] for k, v in (("time", t), ("angle", a), ("signal", y)) if not np.isfinite(v[bad])) \
            if not (np.isfinite(t[bad]) and np.isfinite(a[bad]) and np.isfinite(y[bad])) else \
            next(k for k, v in aux_arr.items() if not np.isfinite(v[bad]))
        nbad = int((~finite).sum())
        if nonfinite == "raise":
            raise ScanError(f"{where(source, int(rows[bad]), name)}: value is NaN or infinite "
                            f"({nbad} such row(s); pass nonfinite='drop' to drop and count them)")
        warnings.warn(f"{where(source, int(rows[bad]), name)}: dropped {nbad} row(s) with NaN or infinite values",
                      ScanWarning, stacklevel=3)
        drops["NaN or infinite value"] = drops.get("NaN or infinite value", 0) + nbad
        t, a, y, rows = t[finite], a[finite], y[finite], rows[finite]
        aux_arr = {k: v[finite] for k, v in aux_arr.items()}
        n = t.size
        if n == 0:
            raise ScanError(f"{where(source)}: no finite rows left")

    # 3. time: epoch split, strictly increasing
    if epoch_unix is None and abs(t[0]) > UNIX_THRESHOLD_S:
        epoch_unix = float(math.floor(t[0]))
        t = t - epoch_unix
    elif epoch_unix is not None:
        epoch_unix = float(epoch_unix)
    dt = np.diff(t)
    if dt.size and not (dt > 0).all():
        i = int(np.flatnonzero(~(dt > 0))[0]) + 1
        kind = "duplicate" if dt[i - 1] == 0 else "decreasing"
        raise ScanError(f"{where(source, int(rows[i]), cols['time'])}: {kind} time "
                        f"({t[i]:.9g} s after {t[i - 1]:.9g} s); times must strictly increase")

    # 4. angle unit plausibility
    a_rad = _angles_to_rad(a, angle_unit, source, rows, cols["angle"])

    # 5. turns
    turns = number_turns(a_rad)
    if not turns.complete.any():
        span = float(np.ptp(turns.unwrapped)) * 180 / math.pi
        raise ScanError(f"{where(source, None, cols['angle'])}: less than one complete turn "
                        f"(the table turned through {span:.1f}°)")
    n_partial_rows = int((~turns.complete[turns.turn]).sum())

    # 6. constant signal
    if np.ptp(y) == 0:
        raise ScanError(f"{where(source, None, cols['signal'])}: the signal is constant ({y[0]:.9g}); "
                        "nothing to fit")

    # 7. coverage: can cos 2θ and sin 2θ be separated?
    cond = coverage_condition(turns.unwrapped, 2)
    if cond < 1e-3:
        nuniq = np.unique(np.round(np.mod(a_rad, TWO_PI), 6)).size
        raise ScanError(f"{where(source, None, cols['angle'])}: angle coverage cannot separate cos 2θ from "
                        f"sin 2θ ({nuniq} distinct azimuth(s); need at least 5 spread over the turn)")

    if n_partial_rows:
        pass  # partial turns are kept and flagged; the fit decides what to use (and counts it)
    return cls(time=t, angle=turns.unwrapped, signal=y, turn=turns.turn, turn_complete=turns.complete,
               turn_sense=turns.sense, rows=rows, epoch_unix=epoch_unix, signal_unit=signal_unit,
               source=str(source), dropped=tuple(drops.items()), aux=aux_arr,
               meta=meta if meta is not None else Manifest(), n_reversals=turns.n_reversals)


def _angles_to_rad(a: np.ndarray, unit: str, source, rows, col) -> np.ndarray:
    """Convert to radians, refusing angles that look like the other unit."""
    lo, hi = float(a.min()), float(a.max())
    steps = np.abs(np.diff(a))
    moving = steps[steps > 0]
    if unit == "deg":
        # a full turn in degrees spans far more than 2π; radians declared as degrees span ≤ 2π·(turns)
        # with steps far below a degree.  Flag logs whose whole range fits in [−2π, 2π] while
        # the reading steps are small: that is a radian log (less than 7° of rotation otherwise).
        if hi - lo <= TWO_PI * 1.001 and max(abs(lo), abs(hi)) <= TWO_PI * 1.001 and moving.size \
                and np.median(moving) < 1.0:
            raise ScanError(f"{where(source, None, col)}: angles span only {lo:.4g}..{hi:.4g} while degrees "
                            "were declared; they look like radians (set angle_unit='rad')")
        return np.deg2rad(a)
    # declared radians
    if moving.size:
        wraps = moving > math.pi
        med = float(np.median(moving[~wraps])) if (~wraps).any() else float(np.median(moving))
        if hi > TWO_PI * 1.001 and (med > 1.0 or (np.abs(np.mod(a, 1.0)) < 1e-9).mean() > 0.5 and hi >= 90):
            raise ScanError(f"{where(source, None, col)}: angles reach {hi:.4g} with steps of {med:.4g} while "
                            "radians were declared; they look like degrees (set angle_unit='deg')")
    return a.copy()
