"""The validation rules that turn three columns into a `Scan` (or a one-line `ScanError`).

Order of the checks (each names file, row and column where it applies):

1. lengths agree, at least one row, numeric values;
2. non-finite readings (NaN, ±inf, empty cells): dropped and counted with a `ScanWarning`
   (``nonfinite="drop"``), or refused (``nonfinite="raise"``);
3. time: an epoch split (Unix seconds > 1e8 s become an integer-second epoch plus relative
   seconds, via int64 nanoseconds), times strictly increasing (a duplicate or a step back names
   the row), and relative times within ±1e8 s (about three years) of the epoch;
4. angles: not absurdly large, and plausible for the declared unit (degrees that look like
   radians, or the reverse);
5. turn numbering (:func:`nullfit.reading.turn_numbering.number_turns`, with the times, so that gaps in a
   modulo-360° log are bridged), at least one complete turn;
6. a signal that is not constant;
7. angle coverage (over the complete turns) able to separate cos 2θ from sin 2θ.
"""

from __future__ import annotations

import math
import warnings
from typing import Any, Mapping

import numpy as np

from ..core.conventions import SIGNAL_UNITS, check_angle_unit
from ..core.errors import ScanError, ScanWarning, where
from .timebase import UNIX_MAX_S, UNIX_THRESHOLD_S, float_seconds_to_ns, split_epoch
from .turn_numbering import REVERSAL_HYSTERESIS_DEG, TWO_PI, number_turns

#: Relative times (seconds from the epoch) must stay within this (about three years).
MAX_RELATIVE_S = 1e8
#: Angles beyond a billion turns are not a turntable angle (and would lose float precision).
MAX_ABS_TURNS = 1e9
#: Smallest eigenvalue of the normalised (cos 2θ, sin 2θ) Gram matrix below which the two cannot
#: be separated (uniform coverage gives 0.5).
MIN_COVERAGE = 1e-3
NONFINITE_REASON = "missing, NaN or infinite value"


# ---------------------------------------------------------------------------------- checks
def coverage_condition(angle_rad: np.ndarray, k: int = 2) -> float:
    """Smallest eigenvalue of the normalised Gram matrix of (cos kθ, sin kθ) after removing
    the mean: 0.5 for uniform coverage, 0 when cos kθ and sin kθ cannot be separated."""
    angle_rad = np.asarray(angle_rad, dtype=float)
    if angle_rad.size == 0:
        return 0.0
    c = np.cos(k * angle_rad)
    s = np.sin(k * angle_rad)
    c = c - c.mean()
    s = s - s.mean()
    g = np.array([[c @ c, c @ s], [c @ s, s @ s]]) / angle_rad.size
    return float(np.linalg.eigvalsh(g)[0])


def _as_float(x, source, name) -> np.ndarray:
    try:
        return np.asarray(x, dtype=float).ravel()
    except (TypeError, ValueError) as err:
        raise ScanError(f"{where(source, None, name)}: values are not numeric ({err})".replace("\n", " ")) from None


def check_columns(time, angle, signal, *, angle_unit="deg", epoch_unix=None, signal_unit="fringe",
                  source="<data>", rows=None, columns: Mapping[str, str] | None = None,
                  aux: Mapping[str, Any] | None = None, dropped: Mapping[str, int] | None = None,
                  nonfinite: str = "drop", angle_unit_origin: str | None = None,
                  hysteresis_deg: float = REVERSAL_HYSTERESIS_DEG) -> dict:
    """Run the checks of this module; return the fields of a `Scan` as a dict.

    ``angle_unit_origin`` says where the declared angle unit came from (e.g. ``"run.toml
    [units] angle"``), for messages.  See :meth:`nullfit.reading.scan.Scan.from_arrays` for the
    rest.
    """
    check_angle_unit(angle_unit)
    if nonfinite not in ("drop", "raise"):
        raise ValueError(f"nonfinite must be 'drop' or 'raise', not {nonfinite!r}")
    if signal_unit not in SIGNAL_UNITS:
        raise ValueError(f"signal_unit must be 'fringe' or 'fractional', not {signal_unit!r}")
    source = str(source)
    cols = {"time": "time", "angle": "angle", "signal": "signal"}
    cols.update(columns or {})
    t = _as_float(time, source, cols["time"])
    a = _as_float(angle, source, cols["angle"])
    y = _as_float(signal, source, cols["signal"])
    n = t.size
    if not (a.size == n and y.size == n):
        raise ScanError(f"{where(source)}: columns have different lengths ({n}, {a.size}, {y.size})")
    rows = np.arange(1, n + 1) if rows is None else np.asarray(rows, dtype=np.int64).ravel()
    if rows.size != n:
        raise ValueError(f"rows has {rows.size} entries for {n} readings")
    aux_arr = {str(k): _as_float(v, source, str(k)) for k, v in (aux or {}).items()}
    for k, v in aux_arr.items():
        if v.size != n:
            raise ScanError(f"{where(source, None, k)}: auxiliary column has {v.size} values for {n} rows")
    if n == 0:
        raise ScanError(f"{where(source)}: the log has no data rows")
    drops: dict[str, int] = dict(dropped or {})

    # 2. non-finite readings
    named = [(cols["time"], t), (cols["angle"], a), (cols["signal"], y)] + list(aux_arr.items())
    finite = np.ones(n, bool)
    for _, v in named:
        finite &= np.isfinite(v)
    if not finite.all():
        bad = int(np.flatnonzero(~finite)[0])
        name = next(k for k, v in named if not np.isfinite(v[bad]))
        nbad = int((~finite).sum())
        if nonfinite == "raise":
            raise ScanError(f"{where(source, int(rows[bad]), name)}: value is missing, NaN or infinite "
                            f"({nbad} such row(s); pass nonfinite='drop' to drop and count them)")
        warnings.warn(f"{where(source, int(rows[bad]), name)}: dropped {nbad} row(s) with missing, NaN or "
                      "infinite values", ScanWarning, stacklevel=3)
        drops[NONFINITE_REASON] = drops.get(NONFINITE_REASON, 0) + nbad
        t, a, y, rows = t[finite], a[finite], y[finite], rows[finite]
        aux_arr = {k: v[finite] for k, v in aux_arr.items()}
        n = t.size
        if n == 0:
            raise ScanError(f"{where(source)}: no rows left after dropping {nbad} row(s) with missing, "
                            "NaN or infinite values")

    # 3. time: epoch split, strictly increasing, bounded
    t, epoch_unix = _split_time(t, epoch_unix, source, rows, cols["time"])
    dt = np.diff(t)
    if dt.size and not (dt > 0).all():
        i = int(np.flatnonzero(~(dt > 0))[0]) + 1
        kind = "duplicate" if dt[i - 1] == 0 else "decreasing"
        raise ScanError(f"{where(source, int(rows[i]), cols['time'])}: {kind} time "
                        f"({t[i]:.9g} s after {t[i - 1]:.9g} s in row {int(rows[i - 1])}); times must strictly increase")
    far = np.abs(t) > MAX_RELATIVE_S
    if far.any():
        i = int(np.flatnonzero(far)[0])
        raise ScanError(f"{where(source, int(rows[i]), cols['time'])}: time {t[i]:.9g} s from the "
                        f"{'epoch' if epoch_unix is not None else 'start'} is more than 1e8 s (3 years) "
                        "away; mixed relative and Unix times, or not seconds?")

    # 4. angles
    too_big = np.abs(a) > MAX_ABS_TURNS * (360.0 if angle_unit == "deg" else TWO_PI)
    if too_big.any():
        i = int(np.flatnonzero(too_big)[0])
        raise ScanError(f"{where(source, int(rows[i]), cols['angle'])}: angle {a[i]:.6g} {angle_unit} is more "
                        "than a billion turns; not a turntable angle")
    a_rad = _angles_to_rad(a, angle_unit, source, cols["angle"], angle_unit_origin, hysteresis_deg)

    # 5. turns
    turns = number_turns(a_rad, time=t, hysteresis_deg=hysteresis_deg)
    if not turns.complete.any():
        raise ScanError(_no_turn_message(a, a_rad, turns, angle_unit, source, cols["angle"]))

    # 6. constant signal
    if float(y.max()) == float(y.min()):
        raise ScanError(f"{where(source, None, cols['signal'])}: the signal is constant ({y[0]:.9g}); "
                        "nothing to fit")

    # 7. coverage over the complete turns: can cos 2θ and sin 2θ be separated?
    use = turns.complete[turns.turn]
    cond = coverage_condition(turns.unwrapped[use], 2)
    if cond < MIN_COVERAGE:
        az = np.mod(np.rad2deg(turns.unwrapped[use]), 360.0)
        nuniq = np.unique(np.round(az, 2) % 360.0).size
        raise ScanError(f"{where(source, None, cols['angle'])}: angle coverage cannot separate cos 2θ from "
                        f"sin 2θ (readings at {nuniq} distinct azimuth(s) in the complete turns, "
                        f"condition {cond:.2g} < {MIN_COVERAGE:g}); read at least 3 azimuths spread over half a turn")

    return dict(time=t, angle=turns.unwrapped, signal=y, turn=turns.turn, turn_complete=turns.complete,
                turn_sense=turns.sense, rows=rows, epoch_unix=epoch_unix, unit=signal_unit,
                source=source, dropped=tuple(drops.items()), aux=aux_arr, n_reversals=turns.n_reversals)


def _split_time(t, epoch_unix, source, rows, col):
    """Apply the epoch rules of :func:`build_scan` (step 3)."""
    if epoch_unix is None:
        if t[0] > UNIX_THRESHOLD_S:
            over = ~(t < UNIX_MAX_S)
            if over.any():
                i = int(np.flatnonzero(over)[0])
                raise ScanError(f"{where(source, int(rows[i]), col)}: time {t[i]:.9g} s is too large in magnitude "
                                f"for Unix seconds (limit {UNIX_MAX_S:.2g} s, the year 2261); not a time in seconds")
            ns, ok = float_seconds_to_ns(t)
            epoch, rel = split_epoch(ns, ok)
            return rel, epoch
        if t[0] < -UNIX_THRESHOLD_S:
            raise ScanError(f"{where(source, int(rows[0]), col)}: time {t[0]:.9g} s is neither relative seconds "
                            "(|t| < 1e8) nor Unix seconds")
        return t, None
    e = float(epoch_unix)
    if not (math.isfinite(e) and abs(e) < UNIX_MAX_S):
        raise ValueError(f"epoch_unix must be Unix seconds before the year 2262, not {epoch_unix!r}")
    whole = math.floor(e)
    if e != whole:  # keep the epoch a whole second; the fraction moves into the times
        t = t + (e - whole)
    return t, int(whole)


def _no_turn_message(a, a_rad, turns, unit, source, col) -> str:
    span = float(np.ptp(turns.unwrapped)) * 180 / math.pi
    msg = (f"{where(source, None, col)}: less than one complete turn (the table turned through {span:.4g}°"
           f"{f' in {turns.n_reversals + 1} segments between direction changes' if turns.n_reversals else ''}")
    if span >= 360:
        msg += "; a complete turn needs at least 3 readings"
    msg += ")"
    if unit == "deg" and float(np.ptp(a)) >= TWO_PI and number_turns(a).complete.any():
        msg += "; as radians they would make complete turns: set angle_unit='rad' if they are radians"
    return msg


def _angles_to_rad(a: np.ndarray, unit: str, source, col, origin, hysteresis_deg) -> np.ndarray:
    """Convert to radians, refusing angles that clearly are in the other unit."""
    declared = origin or f"angle_unit={unit!r}"
    lo, hi = float(a.min()), float(a.max())
    span = hi - lo
    if unit == "deg":
        # everything inside ±2π: radians (as degrees it would be less than one turn anyway)
        if 0 < span and max(abs(lo), abs(hi)) <= TWO_PI * 1.001:
            raise ScanError(f"{where(source, None, col)}: angles span only {lo:.4g}..{hi:.4g} although degrees "
                            f"were declared ({declared}); they look like radians (set angle_unit='rad'), and as "
                            "degrees they would cover less than one turn")
        return np.deg2rad(a)
    # declared radians
    if span > TWO_PI + math.radians(hysteresis_deg):
        d = np.diff(a)
        moving = d[np.abs(d) > 1e-9]
        if moving.size:
            med = float(np.median(np.abs(moving)))
            sense = 1.0 if np.median(moving) >= 0 else -1.0
            wraps = (np.abs(moving) > 300.0) & (np.sign(moving) != sense) & (max(abs(lo), abs(hi)) <= 360.5)
            integral = float((np.abs(np.mod(a, 1.0)) < 1e-9).mean())
            if wraps.any() or med > math.pi / 2 or (integral > 0.5 and hi >= 90):
                why = ("jumps back by about 360 at wraps" if wraps.any() else
                       f"steps of {med:.4g} per reading" if med > math.pi / 2 else "whole-numbered values")
                raise ScanError(f"{where(source, None, col)}: angles reach {hi:.6g} with {why} although radians "
                                f"were declared ({declared}); they look like degrees (set angle_unit='deg')")
    return a.copy()
