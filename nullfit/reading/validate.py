"""The validation rules that turn three columns into a `Scan` (or a one-line `ScanError`).

Order of the checks (each names file, row and column where it applies; when a log has several
faults, the first in this order is reported):

1. lengths agree, at least one row, numeric values;
2. non-finite readings (NaN, ±inf, empty cells): dropped and counted with a `ScanWarning`
   (``nonfinite="drop"``), or refused (``nonfinite="raise"``).  A row whose time, angle or signal
   is not finite is counted under :data:`NONFINITE_REASON`; a row that loses only an auxiliary
   value is counted under its own reason, naming the column (:func:`aux_reason`);
3. time: an epoch split (Unix seconds > 1e8 s become an integer-second epoch plus relative
   seconds, via int64 nanoseconds), times strictly increasing (a duplicate or a step back names
   the row), and relative times within ±1e8 s (about three years) of the epoch;
4. angles: not absurdly large, and plausible for the declared unit (degrees that look like
   radians, or the reverse);
5. turn numbering (:mod:`nullfit.reading.turn_numbering`, with the times, so that gaps in a
   modulo-360° log are bridged), at least one complete turn;
6. a signal that is not constant;
7. angle coverage (over the complete turns) able to separate cos 2θ from sin 2θ.

Checks 2–4 run in :class:`LogCheck`, which can be fed a log in chunks (the streaming reader does);
the first fault of each kind is remembered and the earliest kind raised by :meth:`LogCheck.finish`,
so a log read in chunks fails with the same message as the log read whole.  Whole-log typical
values (the median step of a log whose unit is in doubt) come from the histograms of
:mod:`nullfit.reading.histogram`.
"""

from __future__ import annotations

import math
import warnings
from typing import Any, Mapping

import numpy as np

from ..core.conventions import SIGNAL_UNITS, check_angle_unit
from ..core.errors import ScanError, ScanWarning, where
from .events import GapFinder
from .histogram import LogHistogram
from .row_numbers import ImpliedRows, row_numbers
from .timebase import NS_PER_S, UNIX_MAX_S, UNIX_THRESHOLD_S, float_seconds_to_ns
from .turn_numbering import REVERSAL_HYSTERESIS_DEG, TWO_PI, SecondLook, StepStats, TurnCounter, Unwrapper

#: Relative times (seconds from the epoch) must stay within this (about three years).
MAX_RELATIVE_S = 1e8
#: Angles beyond a billion turns are not a turntable angle (and would lose float precision).
MAX_ABS_TURNS = 1e9
#: Smallest eigenvalue of the normalised (cos 2θ, sin 2θ) Gram matrix below which the two cannot
#: be separated (uniform coverage gives 0.5).
MIN_COVERAGE = 1e-3
NONFINITE_REASON = "missing, NaN or infinite value"
#: Readings processed at a time by :func:`check_columns` (small temporaries that stay in cache).
BLOCK = 1 << 18
#: The kinds of fault of :class:`LogCheck`, in the order they are reported.
_ORDER = ("nonfinite", "time_split", "time_order", "time_far", "angle_big", "angle_unit")


def aux_reason(name: str) -> str:
    """The reason under which rows that lose only the auxiliary value ``name`` are counted."""
    return f"{NONFINITE_REASON} in auxiliary column {name!r}"


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


class LogCheck:
    """Checks 2–4 of the module docstring, fed chunk by chunk (:meth:`add`), with the whole-log
    step statistics of :class:`nullfit.reading.unwrap.StepStats` gathered on the way.

    ``add`` returns the kept readings of the chunk — relative time, angle in radians, signal, aux
    columns and source rows — and remembers which rows it kept (:attr:`last_keep`)."""

    def __init__(self, *, source: str, columns: Mapping[str, str], aux_names=(), angle_unit: str = "deg",
                 epoch_unix=None, nonfinite: str = "drop", angle_unit_origin: str | None = None,
                 hysteresis_deg: float = REVERSAL_HYSTERESIS_DEG):
        self.source, self.cols, self.aux_names = source, dict(columns), tuple(aux_names)
        self.unit, self.nonfinite, self.origin = angle_unit, nonfinite, angle_unit_origin
        self.hyst_deg = float(hysteresis_deg)
        self.errors: dict[str, str] = {}
        self.drops: dict[str, int] = {}
        self.first_bad: tuple[int, str] | None = None
        self.n_bad = 0
        self.n_kept = 0
        self.last_keep: np.ndarray | None = None  # None: every row of the last chunk was kept
        self.epoch = None
        self._frac = 0.0
        self._mode = None  # "epoch" (given), "unix", "rel"
        if epoch_unix is not None:
            self.set_epoch(epoch_unix)
        self._prev_t = self._prev_row = None
        self.lo, self.hi = math.inf, -math.inf
        self.ymin, self.ymax, self.y0 = math.inf, -math.inf, None
        self._prev_raw = None
        self._h_move = LogHistogram()  # |raw steps| > 1e-9 (declared radians only)
        self._rad = np.zeros(5, np.int64)  # moving +, moving -, big +, big -, whole-numbered values
        self.steps = StepStats()

    def set_epoch(self, epoch_unix) -> None:
        """The Unix seconds of ``time == 0`` (a fraction moves into the times); a chunked reader
        sets it once its time column has shown the epoch, before the first kept reading."""
        e = float(epoch_unix)
        if not (math.isfinite(e) and abs(e) < UNIX_MAX_S):
            raise ValueError(f"epoch_unix must be Unix seconds before the year 2262, not {epoch_unix!r}")
        self.epoch, self._frac, self._mode = int(math.floor(e)), e - math.floor(e), "epoch"

    @property
    def decided(self) -> bool:
        """Has the time base (epoch or relative) been fixed?"""
        return self._mode is not None

    def relative_time(self, t: np.ndarray) -> np.ndarray:
        """The relative times :meth:`add_kept` makes of kept times ``t`` (no checks): for a
        chunked reader's later passes."""
        if self._mode == "unix":
            ns, _ = float_seconds_to_ns(t)
            return (ns - self.epoch * NS_PER_S).astype(float) / NS_PER_S
        if self._mode == "epoch" and self._frac:
            return t + self._frac
        return t

    def _fault(self, kind: str, msg: str) -> None:
        self.errors.setdefault(kind, msg)

    # -------------------------------------------------------------- one chunk
    def add(self, t, a, y, aux: Mapping[str, np.ndarray], rows):
        """Check the next chunk (step 2, then :meth:`add_kept`)."""
        t, a, y, aux, rows = self.drop_nonfinite(t, a, y, aux, rows)
        if t.size == 0:
            return t, a, y, aux, rows
        t, a_rad = self.add_kept(t, a, y, rows)
        return t, a_rad, y, aux, rows

    def drop_nonfinite(self, t, a, y, aux: Mapping[str, np.ndarray], rows):
        """Step 2: the readings whose time, angle, signal and aux values are all finite (the rows
        dropped are counted by reason, the first one remembered for the message)."""
        cols = self.cols
        names = [(cols["time"], t), (cols["angle"], a), (cols["signal"], y)]
        main_ok = np.isfinite(t)
        main_ok &= np.isfinite(a)
        main_ok &= np.isfinite(y)
        keep = main_ok
        aux_bad = []
        for name in self.aux_names:
            ok = np.isfinite(aux[name])
            if not ok.all():
                aux_bad.append((name, ok))
                keep = keep & ok
        n_main_bad = int(main_ok.size - np.count_nonzero(main_ok))
        if not (n_main_bad or aux_bad):
            self.last_keep = None
            return t, a, y, aux, rows
        if n_main_bad:
            self.drops[NONFINITE_REASON] = self.drops.get(NONFINITE_REASON, 0) + n_main_bad
        seen = main_ok.copy()
        for name, ok in aux_bad:
            lost = int(np.count_nonzero(seen & ~ok))
            if lost:
                self.drops[aux_reason(name)] = self.drops.get(aux_reason(name), 0) + lost
            seen &= ok
        if self.first_bad is None:
            i = int(np.argmin(keep))
            col = next((c for c, v in names if not np.isfinite(v[i])), None)
            if col is None:
                col = next(nm for nm in self.aux_names if not np.isfinite(aux[nm][i]))
            self.first_bad = (int(rows[i]), col)
        self.n_bad += int(keep.size - np.count_nonzero(keep))
        self.last_keep = keep
        return t[keep], a[keep], y[keep], {k: v[keep] for k, v in aux.items()}, rows[keep]

    def add_kept(self, t, a, y, rows):
        """Steps 3–4 on finite readings: ``(relative time, angle in radians)``."""
        self.n_kept += t.size
        if t.size == 0:
            return t, a
        t = self._time(t, rows)
        a_rad, lo, hi = self._angles(a, rows)
        self.ymin, self.ymax = min(self.ymin, float(y.min())), max(self.ymax, float(y.max()))
        if self.y0 is None:
            self.y0 = float(y[0])
        # deg2rad is monotonic, so the extremes of the radians are those of the degrees converted
        self.steps.add(a_rad, t, *((math.radians(lo), math.radians(hi)) if self.unit == "deg" else (lo, hi)))
        return t, a_rad

    def to_rad(self, a: np.ndarray) -> np.ndarray:
        """Raw angles in radians (as :meth:`add_kept` converts them)."""
        return np.deg2rad(a) if self.unit == "deg" else a

    def _time(self, t, rows):
        src, col = self.source, self.cols["time"]
        if self._mode is None:
            if t[0] > UNIX_THRESHOLD_S:
                self._mode = "unix"
            elif t[0] < -UNIX_THRESHOLD_S:
                self._fault("time_split", f"{where(src, int(rows[0]), col)}: time {t[0]:.9g} s is neither relative "
                                          "seconds (|t| < 1e8) nor Unix seconds")
                self._mode = "rel"
            else:
                self._mode = "rel"
        if self._mode == "unix":
            over = ~(t < UNIX_MAX_S)
            if over.any():
                i = int(np.argmax(over))
                self._fault("time_split", f"{where(src, int(rows[i]), col)}: time {t[i]:.9g} s is too large in "
                                          f"magnitude for Unix seconds (limit {UNIX_MAX_S:.2g} s, the year 2261); "
                                          "not a time in seconds")
            ns, ok = float_seconds_to_ns(t)
            if self.epoch is None:
                self.epoch = int(ns[0]) // NS_PER_S
            t = (ns - self.epoch * NS_PER_S).astype(float) / NS_PER_S
        elif self._mode == "epoch" and self._frac:
            t = t + self._frac
        # strictly increasing (across chunks too)
        first = 1 if self._prev_t is None else 0
        dt = np.empty(t.size - first)
        if first == 0:
            dt[0] = t[0] - self._prev_t
        np.subtract(t[1:], t[:-1], out=dt[1 - first:])
        increasing = bool((dt > 0).all())
        if dt.size and not increasing:
            j = int(np.argmin(dt > 0))
            i = j + first
            prev_t = t[i - 1] if i > 0 else self._prev_t
            prev_row = int(rows[i - 1]) if i > 0 else self._prev_row
            kind = "duplicate" if dt[j] == 0 else "decreasing"
            self._fault("time_order", f"{where(src, int(rows[i]), col)}: {kind} time ({t[i]:.9g} s after "
                                      f"{prev_t:.9g} s in row {prev_row}); times must strictly increase")
        self._prev_t, self._prev_row = float(t[-1]), int(rows[-1])
        t_lo, t_hi = (float(t[0]), float(t[-1])) if increasing else (float(t.min()), float(t.max()))
        if t_lo < -MAX_RELATIVE_S or t_hi > MAX_RELATIVE_S:
            i = int(np.argmax(np.abs(t) > MAX_RELATIVE_S))
            self._fault("time_far", f"{where(src, int(rows[i]), col)}: time {t[i]:.9g} s from the "
                                    f"{'epoch' if self.epoch is not None else 'start'} is more than 1e8 s (3 years) "
                                    "away; mixed relative and Unix times, or not seconds?")
        return t

    def _angles(self, a, rows):
        limit = MAX_ABS_TURNS * (360.0 if self.unit == "deg" else TWO_PI)
        lo, hi = float(a.min()), float(a.max())
        if lo < -limit or hi > limit:
            i = int(np.argmax(np.abs(a) > limit))
            self._fault("angle_big", f"{where(self.source, int(rows[i]), self.cols['angle'])}: angle {a[i]:.6g} "
                                     f"{self.unit} is more than a billion turns; not a turntable angle")
        self.lo, self.hi = min(self.lo, lo), max(self.hi, hi)
        if self.unit == "deg":
            return np.deg2rad(a), lo, hi
        d = np.diff(a) if self._prev_raw is None else np.diff(a, prepend=self._prev_raw)
        self._prev_raw = float(a[-1])
        ad = np.abs(d)
        mv = ad > 1e-9
        self._h_move.add(ad[mv])
        big = ad > 300.0
        self._rad += [np.count_nonzero(d > 1e-9), np.count_nonzero(d < -1e-9), np.count_nonzero(big & (d > 0)),
                      np.count_nonzero(big & (d < 0)), np.count_nonzero(a - np.floor(a) < 1e-9)]
        return a, lo, hi

    # -------------------------------------------------------------- the whole log
    def finish(self):
        """Raise the first fault (in the order of the module docstring), warn about dropped rows,
        and return the whole-log step statistics (:class:`~nullfit.reading.unwrap.StepSummary`)."""
        src = self.source
        if self.n_bad:
            row, col = self.first_bad
            if self.nonfinite == "raise":
                self.errors = {"nonfinite": f"{where(src, row, col)}: value is missing, NaN or infinite "
                                            f"({self.n_bad} such row(s); pass nonfinite='drop' to drop and count "
                                            "them)"}
            else:
                warnings.warn(f"{where(src, row, col)}: dropped {self.n_bad} row(s) with missing, NaN or infinite "
                              "values", ScanWarning, stacklevel=4)
        if self.n_kept == 0 and "nonfinite" not in self.errors:
            raise ScanError(f"{where(src)}: no rows left after dropping {self.n_bad} row(s) with missing, "
                            "NaN or infinite values")
        if not self.errors:
            self._unit_fault()
        for kind in _ORDER:
            if kind in self.errors:
                raise ScanError(self.errors[kind])
        order = [NONFINITE_REASON] + [aux_reason(n) for n in self.aux_names]  # the same whatever the chunks
        self.drops = {why: self.drops[why] for why in order if why in self.drops}
        return self.steps.finish(math.radians(self.hyst_deg))

    def _unit_fault(self):
        declared = self.origin or f"angle_unit={self.unit!r}"
        lo, hi, col = self.lo, self.hi, self.cols["angle"]
        span = hi - lo
        if self.unit == "deg":
            # everything inside ±2π: radians (as degrees it would be less than one turn anyway)
            if 0 < span and max(abs(lo), abs(hi)) <= TWO_PI * 1.001:
                self._fault("angle_unit", f"{where(self.source, None, col)}: angles span only {lo:.4g}..{hi:.4g} "
                                          f"although degrees were declared ({declared}); they look like radians (set "
                                          "angle_unit='rad'), and as degrees they would cover less than one turn")
            return
        if span <= TWO_PI + math.radians(self.hyst_deg) or self._h_move.n == 0:
            return
        pos, neg, big_pos, big_neg, whole = (int(x) for x in self._rad)
        med = self._h_move.median()
        wraps = (big_neg if pos >= neg else big_pos) > 0 and max(abs(lo), abs(hi)) <= 360.5
        integral = whole / max(self.n_kept, 1)
        if wraps or med > math.pi / 2 or (integral > 0.5 and hi >= 90):
            why = ("jumps back by about 360 at wraps" if wraps else
                   f"steps of {med:.4g} per reading" if med > math.pi / 2 else "whole-numbered values")
            self._fault("angle_unit", f"{where(self.source, None, col)}: angles reach {hi:.6g} with {why} although "
                                      f"radians were declared ({declared}); they look like degrees (set "
                                      "angle_unit='deg')")


# ---------------------------------------------------------------------------------- numbering checks
def check_turns(info, *, source, angle_col, signal_col, ymin, ymax, y0, hint=None, azimuths=None) -> None:
    """Checks 5–7 on the numbered log: at least one complete turn, a signal that varies, and a
    coverage that separates cos 2θ from sin 2θ.  ``hint()`` adds the "radians read as degrees"
    advice to the no-turn message (it re-numbers the raw angles, so it runs only then);
    ``azimuths()`` counts the distinct azimuths of the complete turns for the coverage message."""
    if not info.complete.any():
        span = math.degrees(info.phi_hi - info.phi_lo)
        segs = info.n_reversals + 1
        msg = (f"{where(source, None, angle_col)}: less than one complete turn (the table turned through "
               f"{span:.4g}°{f' in {segs} segments between direction changes' if info.n_reversals else ''}")
        if span >= 360:
            msg += "; a complete turn needs at least 3 readings"
        msg += ")"
        if hint is not None and hint():
            msg += "; as radians they would make complete turns: set angle_unit='rad' if they are radians"
        raise ScanError(msg)
    if ymax == ymin:
        raise ScanError(f"{where(source, None, signal_col)}: the signal is constant ({y0:.9g}); nothing to fit")
    cond = info.coverage()
    if cond < MIN_COVERAGE:
        raise ScanError(f"{where(source, None, angle_col)}: angle coverage cannot separate cos 2θ from "
                        f"sin 2θ (readings at {azimuths()} distinct azimuth(s) in the complete turns, "
                        f"condition {cond:.2g} < {MIN_COVERAGE:g}); read at least 3 azimuths spread over half a turn")


def check_columns(time, angle, signal, *, angle_unit="deg", epoch_unix=None, signal_unit="fringe",
                  source="<data>", rows=None, columns: Mapping[str, str] | None = None,
                  aux: Mapping[str, Any] | None = None, dropped: Mapping[str, int] | None = None,
                  nonfinite: str = "drop", angle_unit_origin: str | None = None,
                  hysteresis_deg: float = REVERSAL_HYSTERESIS_DEG, owned: bool = False) -> dict:
    """Run the checks of this module; return the fields of a `Scan` as a dict.

    ``angle_unit_origin`` says where the declared angle unit came from (e.g. ``"run.toml
    [units] angle"``), for messages.  ``owned=True`` says the arrays are the caller's own
    temporaries (a file reader's), which the `Scan` may keep without copying.  See
    :meth:`nullfit.reading.scan.Scan.from_arrays` for the rest.
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
    rows = row_numbers(rows, n)  # None: rows 1..n, implied (no array)
    aux_arr = {str(k): _as_float(v, source, str(k)) for k, v in (aux or {}).items()}
    for k, v in aux_arr.items():
        if v.size != n:
            raise ScanError(f"{where(source, None, k)}: auxiliary column has {v.size} values for {n} rows")
    if n == 0:
        raise ScanError(f"{where(source)}: the log has no data rows")
    inputs = [t, a, y, *aux_arr.values()] + ([] if isinstance(rows, ImpliedRows) else [rows])
    chk = LogCheck(source=source, columns=cols, aux_names=tuple(aux_arr), angle_unit=angle_unit,
                   epoch_unix=epoch_unix, nonfinite=nonfinite, angle_unit_origin=angle_unit_origin,
                   hysteresis_deg=hysteresis_deg)
    hyst = math.radians(hysteresis_deg)
    with np.errstate(over="ignore", invalid="ignore"):
        t, a, y, aux_arr, rows = chk.drop_nonfinite(t, a, y, aux_arr, rows)
        n = t.size
        blocks = [slice(i, min(n, i + BLOCK)) for i in range(0, n, BLOCK)]
        # relative times are written over the times when those are ours (a reader's, or compacted here)
        t_rel = t if (owned or t is not inputs[0]) and t.flags.writeable else np.empty(n)
        for sl in blocks:  # in blocks: the temporaries stay small and in cache
            out = chk.add_kept(t[sl], a[sl], y[sl], rows[sl])[0]
            if t_rel is not t or not np.may_share_memory(out, t):
                t_rel[sl] = out
        summary = chk.finish()
        unw, phi = Unwrapper(summary), np.empty(n)
        look, gaps = SecondLook(summary.tol, hyst), GapFinder(summary.interval)
        for sl in blocks:
            phi[sl] = unw.feed(chk.to_rad(a[sl]), t_rel[sl])
            look.feed(phi[sl])
            gaps.feed(t_rel[sl], rows[sl], phi[sl])
        lk = look.finish()
        counter = TurnCounter(tol=summary.tol, r_typ=lk.r_typ, sense0=lk.sense0, hysteresis_rad=hyst)
        for k, sl in enumerate(blocks):
            counter.feed(phi[sl], final=k == len(blocks) - 1)
        info = counter.finish()

    def hint():
        return angle_unit == "deg" and float(np.ptp(a)) >= TWO_PI and any_complete_turn([a], hyst)

    def azimuths():
        acc = AzimuthSet(info)
        acc.feed(phi, 0)
        return acc.count()

    check_turns(info, source=source, angle_col=cols["angle"], signal_col=cols["signal"], ymin=chk.ymin,
                ymax=chk.ymax, y0=chk.y0, hint=hint, azimuths=azimuths)
    drops: dict[str, int] = dict(dropped or {})
    for why, c in chk.drops.items():
        drops[why] = drops.get(why, 0) + c

    def fresh(x):  # never keep (and freeze) an array the caller still holds
        return x.copy() if not owned and any(np.may_share_memory(x, i) for i in inputs) else x

    return dict(time=t_rel, angle=phi, signal=fresh(y), turn_start=info.start, turn_complete=info.complete,
                turn_sense=info.sense, kept_rows=None if isinstance(rows, ImpliedRows) else fresh(rows),
                epoch_unix=chk.epoch, unit=signal_unit, source=source,
                dropped=tuple(drops.items()), aux={k: fresh(v) for k, v in aux_arr.items()},
                n_reversals=info.n_reversals, reversal_rows=tuple(int(r) for r in rows[info.seg_starts[1:]]),
                gaps=gaps.gaps())


class AzimuthSet:
    """The distinct azimuths (to 0.01°) of the readings of the complete turns, fed chunk by chunk
    (unwrapped angles and the index of the chunk's first reading among the kept readings)."""

    def __init__(self, info):
        self.info = info
        self.values = np.zeros(0)

    def feed(self, phi: np.ndarray, first: int) -> None:
        use = self.info.complete[self.info.turn_of(np.arange(first, first + phi.size))]
        az = np.mod(np.rad2deg(phi[use]), 360.0)
        self.values = np.union1d(self.values, np.unique(np.round(az, 2) % 360.0))

    def count(self) -> int:
        return int(self.values.size)


def any_complete_turn(chunks, hyst: float) -> bool:
    """Would these raw angle values (a re-iterable of chunks), read as radians, make a complete turn?"""
    st = StepStats()
    for c in chunks:
        st.add(c)
    summary = st.finish(hyst)
    unw = Unwrapper(summary)
    look = SecondLook(summary.tol, hyst)
    for c in chunks:
        look.feed(unw.feed(c))
    lk = look.finish()
    unw = Unwrapper(summary)
    counter = TurnCounter(tol=summary.tol, r_typ=lk.r_typ, sense0=lk.sense0, hysteresis_rad=hyst)
    for c in chunks:
        counter.feed(unw.feed(c))
    counter.feed(np.zeros(0), final=True)
    return bool(counter.finish().complete.any())
