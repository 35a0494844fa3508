"""Vectorised per-turn demodulation: one row of harmonic coefficients per turn.

Inside turn ``i`` the model is ::

    y = Σ_{d ≤ D} a_{i,d} P_d(τ) + Σ_k [c_{i,k} cos kθ + s_{i,k} sin kθ] + noise,

with ``τ`` the time within the turn scaled to [−1, 1] (``P_0 = 1``, ``P_1 = τ``: an offset and
a slope for the default ``drift="per-turn"``).  Scaling ``τ`` changes only the drift
coefficients, not ``c``/``s``, so the result is the same as a per-turn least-squares fit with
columns ``1, t − t_mid, cos kθ, sin kθ``.

How it is vectorised (no Python loop over turns)
------------------------------------------------
The rows are processed in chunks of whole turns.  For every chunk the design columns are built
once (rows of a ``(q, m)`` array: drift, harmonics, aux, signal), the products of pairs of
columns are formed and summed over each turn with ``numpy.add.reduceat`` — this yields the
per-turn normal matrices ``G_i = X_iᵀX_i`` (:meth:`TurnEngine.segment_gram`, used by the joint
fit and the aux projection).  The per-turn demodulation itself (:meth:`TurnEngine.demodulate`)
runs on :class:`.kernel.TurnKernel`, which needs fewer products (product-to-sum identities for
the harmonic block), cache-sized chunks, and solves all turns at once; its RSS is exact (explicit
residuals) when ``yᵀy − βᵀXᵀy`` would lose digits.  The signal is centred on each turn's mean
before anything is summed, so an offset of 10⁶ does not cost digits.

The same engine (:class:`TurnEngine`) serves the joint fit in ``nullfit.fit``: per-turn drift is
projected out turn by turn from the per-turn normal matrices (Frisch–Waugh–Lovell).
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

from ..core.errors import AnalysisError, where
from .design import check_harmonics, harmonic_rows, scale_time
from .kernel import CHUNK_ROWS as KERNEL_CHUNK_ROWS
from .kernel import TurnKernel
from .linalg import stacked_inverse
from .segments import Exclusions, chunk_bounds, segment_sums, turn_segments

#: Rows per chunk (whole turns are kept together, so a chunk may be longer).
CHUNK_ROWS = 1 << 16
#: Largest cache of harmonic columns kept between the two passes of a joint fit (bytes).
HARMONIC_CACHE_BYTES = 512 * 2 ** 20


@dataclass
class Chunk:
    i0: int  # first segment
    i1: int  # one past the last segment
    a: int  # first row
    b: int  # one past the last row
    lengths: np.ndarray
    lstarts: np.ndarray  # segment starts relative to a
    sidx: np.ndarray  # segment index (relative to i0) of every row


class TurnEngine(Exclusions):
    """Turns used by a fit, and the column builder / per-turn normal matrices over them.

    Parameters
    ----------
    scan : Scan
    harmonics : tuple of int
    degree : int or None
        Order of the Legendre drift basis (1 = offset + slope); ``None`` for none (the caller
        builds its own drift basis, e.g. a spline).
    drift_mode : {"turn", "global"}
        Legendre polynomials of the time within each turn scaled to [−1, 1] (per-turn drift),
        or of the time of the whole fitted range scaled to [−1, 1] (``drift="poly"``).
    aux : sequence of str
        Names of auxiliary columns in ``scan.aux`` (standardised internally).
    complete_only : bool
        Leave partial turns out (counted in ``excluded``).
    min_samples : int
        Turns with fewer rows are left out (counted).
    """

    def __init__(self, scan, harmonics, *, degree: int | None = 1, drift_mode: str = "turn", aux=(),
                 complete_only: bool = True, min_samples: int = 1, chunk_rows: int | None = None):
        if drift_mode not in ("turn", "global"):
            raise ValueError(f"drift_mode must be 'turn' or 'global', not {drift_mode!r}")
        self.drift_mode = drift_mode
        self.scan = scan
        self.ks = check_harmonics(harmonics)
        self.degree = degree
        self.aux_names = tuple(aux or ())
        for name in self.aux_names:
            if name not in scan.aux:
                have = ", ".join(sorted(scan.aux)) or "none"
                raise ValueError(f"auxiliary column {name!r} is not in the scan (available: {have})")
        seg = self._every = turn_segments(scan)  # every turn of the scan; self.seg: those used
        keep = self.screen(seg.length, seg.complete, complete_only, min_samples, scan.source)
        idx = np.flatnonzero(keep)
        if idx.size < seg.n:
            seg = seg.take(keep)
        self.seg, self._idx = seg, idx
        self._means = None  # (segments, turn means, mean) of the used turns, on demand
        # about 8+ chunks for short scans (small buffers), at most CHUNK_ROWS rows for long ones;
        # the per-turn kernel has its own cache-sized chunks unless chunk_rows is given
        self.chunk_rows = int(min(chunk_rows or CHUNK_ROWS, max(4096, seg.n_rows // 8)))
        self._kernel_rows = KERNEL_CHUNK_ROWS if chunk_rows is None else int(chunk_rows)
        self._bounds = chunk_bounds(seg, self.chunk_rows)
        t = scan.time
        t_first, t_last = t[seg.start], t[seg.stop - 1]
        self.t_mid = 0.5 * (t_first + t_last)
        self.inv_half = 2.0 / (t_last - t_first)
        self.n_rows = seg.n_rows
        self.t_lo, self.t_hi = float(t_first[0]), float(t_last[-1])
        self.aux_center = np.zeros(len(self.aux_names))
        self.aux_scale = np.ones(len(self.aux_names))
        for j, name in enumerate(self.aux_names):
            v = np.asarray(scan.aux[name], dtype=float)
            mu = float(segment_sums(v, seg.start, seg.stop).sum() / self.n_rows)
            var = float(segment_sums((v - mu) ** 2, seg.start, seg.stop).sum() / self.n_rows)
            if not var > 0:
                raise ValueError(f"auxiliary column {name!r} is constant over the fitted rows; "
                                 "it is indistinguishable from the offset")
            self.aux_center[j], self.aux_scale[j] = mu, np.sqrt(var)
        # column layout of the chunk arrays
        self.n_drift = 0 if degree is None else degree + 1
        self.n_harm = 2 * len(self.ks)
        self.n_aux = len(self.aux_names)
        self.h_slice = slice(self.n_drift, self.n_drift + self.n_harm)
        self.a_slice = slice(self.h_slice.stop, self.h_slice.stop + self.n_aux)
        self.y_index = self.a_slice.stop
        self.q = self.y_index + 1
        self._harm_cache = None

    # ------------------------------------------------------------------ turn means (on demand)
    @functools.cached_property
    def _y_sum_every(self) -> np.ndarray:
        return segment_sums(self.scan.signal, self._every.start, self._every.stop)

    def _turn_means(self):
        if self._means is None or self._means[0] is not self.seg:
            y_sum = self._y_sum_every[self._idx]
            self._means = (self.seg, y_sum / self.seg.length, float(y_sum.sum() / self.n_rows))
        return self._means

    @property
    def y_mean_turn(self) -> np.ndarray:
        """Mean signal of every used turn."""
        return self._turn_means()[1]

    @property
    def y_mean(self) -> float:
        """Mean signal over the used rows."""
        return self._turn_means()[2]

    def cache_harmonics(self, max_bytes: int = HARMONIC_CACHE_BYTES) -> bool:
        """Keep the harmonic columns between passes over the data (the joint fit reads the
        data twice; cos/sin dominate the cost) when they take at most ``max_bytes``."""
        if self.n_rows * self.n_harm * 8 <= max_bytes:
            self._harm_cache = {}
            return True
        return False

    # ------------------------------------------------------------------ bookkeeping

    def drop_turns(self, bad: np.ndarray, why: str) -> None:
        """Leave out the turns flagged in ``bad`` (recomputing the per-turn quantities)."""
        if not bad.any():
            return
        self.exclude(why, bad.sum(), self.seg.length[bad].sum())
        keep = ~bad
        if not keep.any():
            raise AnalysisError(f"{where(self.scan.source)}: no usable turns left to fit ({self.excluded_text()})")
        self.seg, self._idx = self.seg.take(keep), self._idx[keep]
        if self._harm_cache is not None:
            self._harm_cache = {}
        self.t_mid, self.inv_half = self.t_mid[keep], self.inv_half[keep]
        self.n_rows = self.seg.n_rows
        self.t_lo, self.t_hi = float(self.scan.time[self.seg.start[0]]), float(self.scan.time[self.seg.stop[-1] - 1])
        self._bounds = chunk_bounds(self.seg, self.chunk_rows)

    # ------------------------------------------------------------------ chunks and columns
    def chunks(self):
        seg = self.seg
        for c in range(self._bounds.size - 1):
            i0, i1 = int(self._bounds[c]), int(self._bounds[c + 1])
            a, b = int(seg.start[i0]), int(seg.stop[i1 - 1])
            lengths = seg.length[i0:i1]
            lstarts = seg.start[i0:i1] - a
            sidx = np.repeat(np.arange(i1 - i0), lengths)
            yield Chunk(i0, i1, a, b, lengths, lstarts, sidx)

    def columns(self, ch: Chunk, *, y_center: str = "turn", delta=None) -> np.ndarray:
        """The chunk's columns as a ``(q, m)`` array: per-turn drift (if any), harmonics, aux
        (standardised), and the signal centred on its turn mean (``y_center="turn"``) or on the
        mean of all fitted rows (``"global"``).  ``delta`` (standardised aux coefficients) is
        subtracted from the signal when given."""
        m = ch.b - ch.a
        X = np.empty((self.q, m))
        if self.n_drift:
            self.drift_rows(ch, out=X[:self.n_drift])
        cached = self._harm_cache.get(ch.a) if self._harm_cache is not None else None
        if cached is not None:
            X[self.h_slice] = cached
        else:
            harmonic_rows(self.scan.angle[ch.a:ch.b], self.ks, out=X[self.h_slice])
            if self._harm_cache is not None:
                self._harm_cache[ch.a] = X[self.h_slice].copy()
        for j, name in enumerate(self.aux_names):
            X[self.a_slice.start + j] = (self.scan.aux[name][ch.a:ch.b] - self.aux_center[j]) / self.aux_scale[j]
        y = X[self.y_index]
        if y_center == "turn":
            np.subtract(self.scan.signal[ch.a:ch.b], self.y_mean_turn[ch.i0:ch.i1][ch.sidx], out=y)
        else:
            np.subtract(self.scan.signal[ch.a:ch.b], self.y_mean, out=y)
        if delta is not None and self.n_aux:
            y -= np.asarray(delta) @ X[self.a_slice]
        return X

    def drift_rows(self, ch: Chunk, out=None) -> np.ndarray:
        """The chunk's drift columns ``(n_drift, m)``: Legendre ``P_0 … P_D`` of the time within
        each turn scaled to [−1, 1] (``drift_mode="turn"``) or of the time scaled over the whole
        fitted range (``"global"``)."""
        X = np.empty((self.n_drift, ch.b - ch.a)) if out is None else out
        X[0] = 1.0
        if self.n_drift > 1:
            if self.drift_mode == "turn":
                tau = self.scan.time[ch.a:ch.b] - self.t_mid[ch.i0:ch.i1][ch.sidx]
                tau *= self.inv_half[ch.i0:ch.i1][ch.sidx]
            else:
                tau = self.scaled_time(ch)
            X[1] = tau
            # Bonnet recursion: (d+1) P_{d+1} = (2d+1) τ P_d − d P_{d−1}
            for d in range(1, self.n_drift - 1):
                X[d + 1] = ((2 * d + 1) * tau * X[d] - d * X[d - 1]) / (d + 1)
        return X

    def fit_drift(self, values) -> np.ndarray:
        """Per-turn least-squares fit of this engine's drift basis alone to ``values`` (one per
        scan row), evaluated at every row of the used turns (NaN elsewhere).  Each turn's values
        are centred on their mean before the sums, so large offsets cost no digits; a turn
        whose drift system is singular keeps its mean."""
        if not self.n_drift or self.drift_mode != "turn":
            raise ValueError("fit_drift needs a per-turn drift basis")
        v_all = np.asarray(values, dtype=float)
        out = np.full(self.scan.n_samples, np.nan)
        nd = self.n_drift
        for ch in self.chunks():
            v = v_all[ch.a:ch.b]
            mean = np.add.reduceat(v, ch.lstarts) / ch.lengths
            X = np.empty((nd + 1, ch.b - ch.a))
            self.drift_rows(ch, out=X[:nd])
            np.subtract(v, mean[ch.sidx], out=X[nd])
            G = self.segment_gram(X, ch)
            Ainv, _ = stacked_inverse(G[:, :nd, :nd])
            beta = np.einsum("sij,sj->si", Ainv, G[:, :nd, nd])
            beta[:, 0] += mean
            out[ch.a:ch.b] = np.einsum("ds,sd->s", X[:nd], beta[ch.sidx])
        return out

    def scaled_time(self, ch: Chunk) -> np.ndarray:
        """Time of the chunk's rows scaled to [−1, 1] over the whole fitted range."""
        return scale_time(self.scan.time[ch.a:ch.b], self.t_lo, self.t_hi)

    @staticmethod
    def segment_gram(X: np.ndarray, ch: Chunk, *, ones_first: bool = True) -> np.ndarray:
        """Per-turn normal matrices ``X_iᵀX_i`` of a chunk, shape ``(n_seg, q, q)``."""
        q, m = X.shape
        nseg = ch.lstarts.size
        G = np.empty((nseg, q, q))
        o = 1 if ones_first else 0
        if o:
            G[:, 0, 0] = ch.lengths
            sums = np.add.reduceat(X[1:], ch.lstarts, axis=1).T
            G[:, 0, 1:] = sums
            G[:, 1:, 0] = sums
        iu, ju = np.triu_indices(q - o)
        P = np.empty((iu.size, m))
        for r in range(iu.size):
            np.multiply(X[o + iu[r]], X[o + ju[r]], out=P[r])
        S = np.add.reduceat(P, ch.lstarts, axis=1).T
        G[:, o + iu, o + ju] = S
        G[:, o + ju, o + iu] = S
        return G

    def grams(self, *, y_center: str = "turn") -> np.ndarray:
        """Per-turn normal matrices of all used turns, ``(n_turns, q, q)`` (first column: ones)."""
        if not self.n_drift or self.drift_mode != "turn":
            raise ValueError("per-turn normal matrices need a per-turn drift basis")
        G = np.empty((self.seg.n, self.q, self.q))
        for ch in self.chunks():
            G[ch.i0:ch.i1] = self.segment_gram(self.columns(ch, y_center=y_center), ch)
        return G

    # ------------------------------------------------------------------ per-turn solve
    def demodulate(self, *, delta=None) -> "PerTurn":
        """Per-turn least squares of (signal − aux·delta) on per-turn drift + harmonics
        (:class:`.kernel.TurnKernel`)."""
        if not self.n_drift or self.drift_mode != "turn":
            raise ValueError("per-turn demodulation needs a per-turn drift basis")
        kern = TurnKernel(self.ks, self.degree, chunk_rows=self._kernel_rows)
        correct = None
        if delta is not None and self.n_aux:
            delta = np.asarray(delta, dtype=float)
            scan, center, scale = self.scan, self.aux_center, self.aux_scale

            def correct(a, b, y):
                for j, name in enumerate(self.aux_names):
                    y -= delta[j] * ((scan.aux[name][a:b] - center[j]) / scale[j])

        # every turn of the scan goes through the kernel (left-out turns are few), so that its
        # chunks, and the numbers, are those of the same scan streamed in pieces
        scan, every, i = self.scan, self._every, self._idx
        sol = kern.run(scan.time, scan.angle, scan.signal, every, first_rows=scan.row_of(every.start), correct=correct)
        if i.size and i[-1] - i[0] == i.size - 1:  # the used turns are consecutive: views, no copies
            i = slice(int(i[0]), int(i[-1]) + 1)
        return PerTurn(self, sol.coef[i], sol.cov[i], sol.rss[i], sol.ok[i], delta, sol.weight[i])


def turn_frame(turn, t_mid, n_samples, complete, harm, cov, rss, *, ks, unit, source, degree, excluded):
    """The per-turn table (see :func:`nullfit.demodulate`) from per-turn arrays."""
    import pandas as pd

    n = np.asarray(n_samples).astype(np.int64)
    d = {"turn": np.asarray(turn), "time_mid_s": np.asarray(t_mid), "n_samples": n}
    for j, k in enumerate(ks):
        d[f"c{k}"] = harm[:, 2 * j]
        d[f"s{k}"] = harm[:, 2 * j + 1]
        d[f"sigma_c{k}"] = np.sqrt(cov[:, 2 * j, 2 * j])
        d[f"sigma_s{k}"] = np.sqrt(cov[:, 2 * j + 1, 2 * j + 1])
    d["resid_rms"] = np.sqrt(rss / n)
    d["complete"] = np.array(complete, dtype=bool)
    df = pd.DataFrame(d)
    df.attrs.update({"harmonics": list(ks), "unit": unit, "source": source,
                     "drift": "per-turn" if degree == 1 else f"per-turn:{degree}",
                     "excluded": {k: {"turns": v[0], "rows": v[1]} for k, v in excluded.items()}})
    return df


@dataclass
class PerTurn:
    """Raw per-turn results of :meth:`TurnEngine.demodulate` (arrays over the engine's turns)."""

    engine: TurnEngine
    coef: np.ndarray  # (n, p): drift then harmonics
    cov: np.ndarray  # (n, 2K, 2K) white-noise covariance of the harmonic coefficients of each turn
    rss: np.ndarray
    ok: np.ndarray  # turn could be solved (enough readings, non-singular)
    delta: np.ndarray | None
    weight: np.ndarray | None = None  # (n, 2K, 2K) harmonic normal matrix, drift projected out

    @property
    def harm(self) -> np.ndarray:
        return self.coef[:, self.engine.h_slice]

    def frame(self):
        """The per-turn table (see :func:`demodulate`)."""
        e = self.engine
        return turn_frame(e.seg.turn, e.t_mid, e.seg.length, e.seg.complete, self.harm, self.cov, self.rss,
                          ks=e.ks, unit=e.scan.unit, source=e.scan.source, degree=e.degree, excluded=e.excluded)
