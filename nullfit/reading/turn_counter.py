"""The turn counter: steps 2–5 of :mod:`nullfit.reading.turn_numbering`, fed chunk by chunk.

:class:`TurnCounter` takes unwrapped angles in order and ends with a :class:`TurnInfo`: the first
reading, length, completeness and sense of every turn, the first reading of every monotonic
segment, and the angle coverage of the complete turns.  The work is arranged so that every
reading is touched by a handful of vectorised passes: turn boundaries are found from the sparse
places where the turn index changes, and the per-turn statistics that decide completeness
(angle range, largest step) are computed only for the turns that might be partial — those not
entered from the previous turn or not left into the next one (every other turn with three
readings is complete).

Coverage (check 7 of :mod:`nullfit.reading.validate`): the readings are counted in
:data:`COVERAGE_BINS` bins of 2θ (bins 0.088° wide in 2θ); the Gram matrix of (cos 2θ, sin 2θ)
over the complete turns is taken from the bin centres (all readings, minus the partial turns).
Readings at the same azimuth fall in the same bin, so a coverage that cannot separate cos 2θ
from sin 2θ stays singular.

While chunks arrive, readings from the start of the stop that holds the current segment's extreme
onwards stay pending: a later retreat could still end the segment there, and a stop is only
numbered whole.  They are numbered with the next chunk; the result does not depend on the chunk
sizes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .unwrap import TWO_PI

#: An uncrossed end of a turn is covered when the arc to the nearest reading is at most this many
#: times the largest step between consecutive readings inside the turn.  At a steady rate an arc
#: shorter than one step means no reading is missing; the 10 % margin covers a rate that changes
#: smoothly along the turn (the largest step is taken where the rate peaks, and there neighbouring
#: steps differ only to second order) and jitter of single steps.  One missing reading at a steady
#: rate (an arc of more than one step plus the offset of the first reading) makes the turn partial
#: unless that offset is below a tenth of a step.
EDGE_STEPS = 1.1
#: Bins of 2θ over a full circle for the coverage check (a power of two).
COVERAGE_BINS = 4096
_CENTRES = (np.arange(COVERAGE_BINS) + 0.5) * (TWO_PI / COVERAGE_BINS)
_COS, _SIN = np.cos(_CENTRES), np.sin(_CENTRES)
#: Per-turn record: first reading, readings, largest step, lowest and highest progress (turns),
#: turn index k, segment, sense, entered from the previous turn, left into the next one, a partial
#: candidate, then the five coverage sums (Σc, Σs, Σc², Σs², Σcs) of candidates.
_FIELDS = 16
# a pass over more candidate turns than this is vectorised; fewer are sliced one by one
_MANY = 24


def _scan_retreat(P, scan, s, best, e, hyst):
    """First ``k >= scan`` where ``s*P[k]`` retreats by more than ``hyst`` from its running
    maximum (which starts at ``best``), in doubling windows: ``(k or None, best, e)`` with ``e``
    the first index of the maximum before ``k``."""
    n = P.size
    a, w = scan, 64
    while a < n:
        b = min(n, a + w)
        v = P[a:b] if s > 0 else -P[a:b]
        cm = np.maximum.accumulate(v)
        np.maximum(cm, best, out=cm)
        cm -= hyst
        hit = np.flatnonzero(v < cm)
        upto = v if not hit.size else v[: hit[0]]
        if upto.size:
            j = int(np.argmax(upto))
            if upto[j] > best:
                best, e = float(upto[j]), a + j
        if hit.size:
            return a + int(hit[0]), best, e
        a, w = b, 2 * w
    return None, best, e


def _segmented_cummax(values: np.ndarray, group: np.ndarray) -> np.ndarray:
    """Running maximum of int64 ``values`` restarted at every new ``group`` (groups ascending)."""
    if values.size == 0:
        return values
    lo, hi = int(values.min()), int(values.max())
    span = hi - lo + 1
    if span * (int(group[-1]) + 1) < 2**62:  # exact offset trick
        off = (values - lo) + group * span
        return np.maximum.accumulate(off) - group * span + lo
    out = values.copy()
    for g in np.unique(group):
        sel = group == g
        out[sel] = np.maximum.accumulate(values[sel])
    return out


class TurnCounter:
    """Numbers the turns of a log fed chunk by chunk (see the module docstring).

    ``feed(phi, final)`` takes the next unwrapped angles (radians); :meth:`finish` returns the
    :class:`TurnInfo`."""

    def __init__(self, *, tol: float, r_typ: int, sense0: int, hysteresis_rad: float):
        self.tol, self.tol_t, self.r_typ, self.hyst = tol, tol / TWO_PI, int(r_typ), hysteresis_rad
        self.buf = np.zeros(0)
        self.pos = 0  # index of buf[0] among the log's readings
        self.s, self.seg_lo, self.best, self.best_at = int(sense0), 0, -math.inf, -1
        self.seg_starts, self.seg_senses, self.entries = [0], [int(sense0)], [math.nan]
        self.prev_k = None  # k of the last final stop of the open segment
        self.prev_krow = None  # turn index k of the last final reading
        self.prev_prog = math.nan
        self.open: np.ndarray | None = None  # record of the open turn
        self.closed: list[np.ndarray] = []  # records of closed turns that may be partial
        self.plain: list[tuple] = []  # (first reading, readings, sense) of the other closed turns
        self.bins = np.zeros(COVERAGE_BINS, np.int64)
        self.phi_lo, self.phi_hi = math.inf, -math.inf

    # -------------------------------------------------------------- segments
    def _segments(self, P):
        s, best, e = self.s, self.best, self.best_at - self.pos
        starts, senses = [], []
        scan = 0
        while True:
            k, best, e = _scan_retreat(P, scan, s, best, e, self.hyst)
            if k is None:
                return starts, senses, s, e
            seg = P[e + 1: k] if s > 0 else -P[e + 1: k]
            below = np.flatnonzero(seg < best - self.tol)
            end = e + 1 + int(below[0]) if below.size else k
            s = -s
            starts.append(end)
            senses.append(s)
            self.entries.append(s * float(P[end - 1]) / TWO_PI)
            best, e, scan = s * float(P[end]), end, end + 1

    # -------------------------------------------------------------- feeding
    def feed(self, phi: np.ndarray, final: bool = False) -> None:
        if phi.size:
            self.phi_lo, self.phi_hi = min(self.phi_lo, float(phi.min())), max(self.phi_hi, float(phi.max()))
        P = phi if self.buf.size == 0 else np.concatenate((self.buf, phi))
        n = P.size
        if n == 0:
            if final:
                self._close_open(False)
            return
        seg0 = len(self.seg_starts) - 1  # global number of the segment open at P[0]
        starts, senses, s_open, e_open = self._segments(P)
        lseg = np.array([0] + starts, np.int64)  # local first reading of every segment in P
        lsense = np.array([self.s] + senses, np.int64)
        prog = P / TWO_PI  # progress in turns, increasing within each segment
        if not starts:
            if self.s < 0:
                np.negative(prog, out=prog)
        else:
            prog *= np.repeat(lsense, np.diff(np.append(lseg, n)))
        dprog = np.diff(prog)
        brk = np.empty(n, bool)
        brk[0] = True
        np.greater(dprog, self.tol_t, out=brk[1:])
        brk[lseg] = True
        stops = np.flatnonzero(brk)  # first reading of every stop
        ns = stops.size
        if ns == n:
            mean = prog
        else:
            mean = np.add.reduceat(prog, stops)
            mean /= np.diff(np.append(stops, n))
        stop_seg = None if not starts else np.searchsorted(lseg, stops, side="right") - 1
        k = mean + self.tol_t
        np.floor(k, out=k)
        if max(abs(self.phi_lo), abs(self.phi_hi)) / TWO_PI > 2.0**51:
            np.clip(k, -(2.0**52), 2.0**52, out=k)
        k = k.astype(np.int64)
        if self.prev_k is not None:  # the open segment already has final stops: continue its running max
            n0 = ns if stop_seg is None else int(np.searchsorted(stop_seg, 1))
            np.maximum(k[:n0], self.prev_k, out=k[:n0])
        if stop_seg is None:
            np.maximum.accumulate(k, out=k)
        else:
            k = _segmented_cummax(k, stop_seg)
        if final:
            p, nf = n, ns
        else:
            nf = int(np.searchsorted(stops, e_open, side="right")) - 1
            p = int(stops[nf])
        for L, sg in zip(starts, senses):  # every boundary found lies at or before p
            self.seg_starts.append(self.pos + L)
            self.seg_senses.append(sg)
        if p > 0:
            self._finalise(P, prog, dprog, stops, k, mean, stop_seg, lseg, lsense, seg0, p, nf, ns, final)
        # state for the readings still pending
        open_lo = int(lseg[-1])
        if starts:
            self.seg_lo = self.pos + open_lo
        self.s = s_open
        if p > open_lo:
            v = P[open_lo:p] if s_open > 0 else -P[open_lo:p]
            j = int(np.argmax(v))
            if starts or v[j] > self.best:
                self.best, self.best_at = float(v[j]), self.pos + open_lo + j
        elif starts:
            self.best, self.best_at = -math.inf, -1
        self.buf = P[p:].copy() if p < n else np.zeros(0)
        self.pos += p
        if final:
            self._close_open(False)

    def _finalise(self, P, prog, dprog, stops, k, mean, stop_seg, lseg, lsense, seg0, p, nf, ns, final):
        tol_t = self.tol_t
        kf = k[:nf]
        def sseg(i):  # segment (local) of stop(s) i
            return (np.zeros(np.shape(i), np.int64) if stop_seg is None else stop_seg[i])

        def length(i):
            nxt = np.where(i + 1 < ns, stops[np.minimum(i + 1, ns - 1)], P.size)
            return nxt - stops[i]

        # stops where the turn index jumps: the only places a turn can start (plus closings)
        J = np.flatnonzero(kf[1:] != kf[:-1]) + 1
        if stop_seg is None:
            seg_first = np.zeros(0, np.int64)
        else:  # the first final stop of every new segment
            seg_first = np.searchsorted(stop_seg[:nf], np.arange(1, lseg.size))
            seg_first = seg_first[seg_first < nf]
        cont0 = self.prev_k is not None and int(sseg(0)) == 0  # stop 0 follows a final stop of its segment
        if cont0 and kf[0] != self.prev_k:
            J = np.concatenate(([0], J))
        Jm1 = np.maximum(J - 1, 0)
        kprev = np.where(J > 0, kf[Jm1], self.prev_k if self.prev_k is not None else 0)
        same = np.where(J > 0, sseg(J) == sseg(Jm1), cont0)
        mJ = mean[J]
        closing = same & (np.abs(mJ - np.round(mJ)) <= tol_t) & (kf[J] == kprev + 1)
        C = J[closing]
        if C.size:
            last = (C + 1 >= ns) if final else np.zeros(C.size, bool)
            last |= (C + 1 < ns) & (sseg(np.minimum(C + 1, ns - 1)) != sseg(C))
            L = length(C)
            nc = np.where(last, L, L - self.r_typ)
            keep = nc > 0
            C, nc, L = C[keep], nc[keep], L[keep]
        else:
            nc = L = np.zeros(0, np.int64)
        whole = C[nc == L]
        part, part_n = C[nc < L], nc[nc < L]
        # k of the first and of the last reading of every stop that can start a turn
        S = np.unique(np.concatenate((J, whole + 1, seg_first, [0])))
        S = S[S < nf]
        ks = kf[S] - np.isin(S, C)
        prevS = S - 1
        ke_prev = np.where(prevS >= 0, kf[np.maximum(prevS, 0)] - np.isin(prevS, whole),
                           self.prev_krow if self.prev_krow is not None else 0)
        starts_here = (ks != ke_prev) | np.isin(S, seg_first)
        if S.size and S[0] == 0:
            starts_here[0] |= self.prev_krow is None or self.seg_lo == self.pos
        tb = np.concatenate((stops[S[starts_here]], stops[part] + part_n))
        kv = np.concatenate((ks[starts_here], kf[part]))
        order = np.argsort(tb, kind="stable")
        tb, kv = tb[order], kv[order]
        self.prev_krow = int(kf[nf - 1] - (whole.size > 0 and whole[-1] == nf - 1))
        # coverage bins of every final reading
        bins = (P[:p] * (COVERAGE_BINS / math.pi)).astype(np.int64)
        np.bitwise_and(bins, COVERAGE_BINS - 1, out=bins)
        self.bins += np.bincount(bins, minlength=COVERAGE_BINS)
        # the turns: the open one continues up to tb[0]; new ones start at tb
        tseg = np.searchsorted(lseg, tb, side="right") - 1
        m = tb.size
        rec = np.zeros((m, _FIELDS))
        rec[:, 0] = self.pos + tb
        rec[:, 1] = np.diff(np.append(tb, p))
        rec[:, 5] = kv
        rec[:, 6] = seg0 + tseg
        rec[:, 7] = lsense[tseg]
        prev_kv = np.concatenate(([self.open[5]] if self.open is not None else [np.nan], kv[:-1]))
        prev_sg = np.concatenate(([self.open[6]] if self.open is not None else [np.nan], rec[:-1, 6]))
        rec[:, 8] = (prev_sg == rec[:, 6]) & (prev_kv == kv - 1)
        rec[:-1, 9] = rec[1:, 8]
        cand = np.ones(m, bool)
        cand[:-1] = (rec[:-1, 8] == 0) | (rec[:-1, 9] == 0) | (rec[:-1, 1] < 3)
        ranges = [(int(tb[j]), int(tb[j + 1]) if j + 1 < m else p, j) for j in np.flatnonzero(cand)]
        first_new = int(tb[0]) if m else p
        if self.open is not None and first_new > 0:  # the open turn's readings in this chunk
            self._stats(self.open, prog, dprog, bins, 0, first_new, True)
            self.open[1] += first_new
        if len(ranges) > _MANY:
            self._stats_many(rec, cand, tb, prog, dprog, bins, p)
        else:
            for a, b, j in ranges:
                self._stats(rec[j], prog, dprog, bins, a, b, False)
        if self.open is not None and m:
            self._close_open(bool(rec[0, 8]))
        if m:
            self.closed.append(rec[:-1][cand[:-1]])
            plain = rec[:-1][~cand[:-1]]
            if plain.size:
                self.plain.append((plain[:, 0].astype(np.int64), plain[:, 1].astype(np.int32),
                                   plain[:, 7].astype(np.int8)))
            self.open = rec[-1].copy()
        self.prev_prog = float(prog[p - 1])
        self.prev_k = int(kf[-1]) if nf and int(sseg(nf - 1)) == lseg.size - 1 else None

    def _stats(self, r, prog, dprog, bins, a, b, continuing):
        """Fold readings ``a:b`` into the record ``r`` (range, largest step, coverage sums)."""
        pr = prog[a:b]
        lo, hi = float(pr.min()), float(pr.max())
        steps = dprog[a: b - 1]
        big = float(steps.max()) if steps.size else 0.0
        if continuing and a == 0 and not math.isnan(self.prev_prog):
            big = max(big, float(pr[0] - self.prev_prog))
        c, s = _COS[bins[a:b]], _SIN[bins[a:b]]
        sums = (c.sum(), s.sum(), c @ c, s @ s, c @ s)
        if continuing:
            r[3], r[4], r[2] = min(r[3], lo), max(r[4], hi), max(r[2], big)
            r[11:16] += sums
        else:
            r[3], r[4], r[2] = lo, hi, big
            r[11:16] = sums

    def _stats_many(self, rec, cand, tb, prog, dprog, bins, p):
        """:meth:`_stats` for every new turn at once (many candidates, e.g. frequent reversals)."""
        pr = prog[:p]
        rec[:, 3] = np.minimum.reduceat(pr, tb)
        rec[:, 4] = np.maximum.reduceat(pr, tb)
        step = np.empty(p)
        step[0] = 0.0
        step[1:] = dprog[: p - 1]
        step[tb] = 0.0
        rec[:, 2] = np.maximum.reduceat(step, tb)
        c, s = _COS[bins], _SIN[bins]
        for i, x in enumerate((c, s, c * c, s * s, c * s)):
            rec[:, 11 + i] = np.add.reduceat(x, tb)
        rec[~cand, 2:5] = np.nan
        rec[~cand, 11:16] = 0.0

    def _close_open(self, next_entered: bool):
        if self.open is not None:
            r = self.open
            r[9] = next_entered
            r[10] = not (r[8] and r[9] and r[1] >= 3)
            self.closed.append(r[None, :].copy())
            self.open = None

    # -------------------------------------------------------------- result
    def finish(self) -> "TurnInfo":
        rec = np.concatenate(self.closed) if self.closed else np.zeros((0, _FIELDS))
        rec = rec[np.argsort(rec[:, 0], kind="stable")]
        start = rec[:, 0].astype(np.int64)
        count = rec[:, 1].astype(np.int64)
        kval = rec[:, 5].astype(np.int64)
        has_prev, has_next = rec[:, 8] > 0, rec[:, 9] > 0
        cand = ~(has_prev & has_next & (count >= 3))
        pmin, pmax, maxstep = rec[:, 3].copy(), rec[:, 4], rec[:, 2]
        sense = rec[:, 7].astype(np.int64)
        seg_starts = np.array(self.seg_starts, np.int64)
        for g in range(1, seg_starts.size):  # after a reversal the turning point starts the segment's first turn
            j = int(np.searchsorted(start, seg_starts[g]))
            if j < start.size and start[j] == seg_starts[g]:
                entry = self.entries[g]
                if math.floor(entry + self.tol_t) == kval[j]:
                    pmin[j] = min(pmin[j], entry)
        slack = EDGE_STEPS * maxstep + self.tol_t
        with np.errstate(invalid="ignore"):
            edge_ok = (has_prev | (pmin - kval <= slack)) & (has_next | (kval + 1 - pmax <= slack))
        complete = (count >= 3) & np.where(cand, edge_ok, True)
        sums = np.array([self.bins @ _COS, self.bins @ _SIN, self.bins @ (_COS * _COS), self.bins @ (_SIN * _SIN),
                         self.bins @ (_COS * _SIN)], dtype=float)
        sums -= rec[cand & ~complete, 11:16].sum(axis=0)
        n_cov = int(self.bins.sum() - count[cand & ~complete].sum())
        if self.plain:  # merge the turns that were complete when they closed
            p_start = np.concatenate([p[0] for p in self.plain] + [start])
            order = np.argsort(p_start, kind="stable")
            start = p_start[order]
            count = np.concatenate([p[1] for p in self.plain] + [count]).astype(np.int64)[order]
            sense = np.concatenate([p[2] for p in self.plain] + [sense]).astype(np.int64)[order]
            complete = np.concatenate([np.ones(sum(p[0].size for p in self.plain), bool), complete])[order]
        return TurnInfo(start=start, count=count, complete=complete, sense=sense, seg_starts=seg_starts,
                        coverage_sums=sums, coverage_n=n_cov, phi_lo=self.phi_lo, phi_hi=self.phi_hi)


@dataclass(frozen=True)
class TurnInfo:
    """Turns of a whole log: first reading (index among the kept readings), readings, completeness
    and sense of every turn; first reading of every segment; the coverage sums (Σ cos 2θ, Σ sin 2θ,
    Σ cos² 2θ, Σ sin² 2θ, Σ cos 2θ sin 2θ) over the readings of the complete turns."""

    start: np.ndarray
    count: np.ndarray
    complete: np.ndarray
    sense: np.ndarray
    seg_starts: np.ndarray
    coverage_sums: np.ndarray
    coverage_n: int
    phi_lo: float = math.nan  # range of the unwrapped angle (radians)
    phi_hi: float = math.nan

    @property
    def n_reversals(self) -> int:
        return int(self.seg_starts.size - 1)

    def turn_of(self, index: np.ndarray) -> np.ndarray:
        """Turn number of the readings with these indices (among the kept readings)."""
        return np.searchsorted(self.start, index, side="right") - 1

    def turn_numbers(self) -> np.ndarray:
        """The turn number of every reading."""
        out = np.zeros(int(self.count.sum()), np.int64)
        out[self.start[1:]] = 1
        np.cumsum(out, out=out)
        return out

    def coverage(self) -> float:
        """Smallest eigenvalue of the normalised Gram matrix of (cos 2θ, sin 2θ), mean removed, over
        the complete turns: 0.5 for uniform coverage, 0 when they cannot be separated."""
        n = float(self.coverage_n)
        if n <= 0:
            return 0.0
        sc, ss, scc, sss, scs = (float(x) for x in self.coverage_sums)
        cc = scc / n - (sc / n) ** 2
        s2 = sss / n - (ss / n) ** 2
        cs = scs / n - (sc / n) * (ss / n)
        return float(np.linalg.eigvalsh(np.array([[cc, cs], [cs, s2]]))[0])
