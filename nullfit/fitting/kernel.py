"""The per-turn kernel: normal-equation sums of whole turns, and all their small solves at once.

Turn ``i`` is fitted on its own (``docs/conventions.md``)::

    y − ȳ_i = Σ_{d ≤ D} a_d P_d(τ) + Σ_k [c_k cos kθ + s_k sin kθ] + noise,

``τ`` the time within the turn scaled to [−1, 1], ``ȳ_i`` the turn's mean signal.  The kernel
works on a block of whole, contiguous turns (a scan, or a piece of a stream) in chunks of whole
turns sized to stay in the processor's cache, and never builds a dense design.

What is computed per reading
----------------------------
* ``cos θ`` and ``sin θ`` (``numpy.cos``/``numpy.sin``, the floor of any harmonic fit) and the
  higher orders by the angle-addition recurrence, exactly as :func:`.design.harmonic_rows`;
* ``τ`` and the Legendre polynomials ``P_d(τ)``; the signal minus its turn mean;
* the products of pairs of columns, **except** most of the harmonic × harmonic ones: by the
  product-to-sum identities (``cos jθ cos kθ = ½[cos (k−j)θ + cos (k+j)θ]``,
  ``sin jθ sin kθ = ½[cos (k−j)θ − cos (k+j)θ]``, ``cos jθ sin kθ = ½[sin (k+j)θ + sin (k−j)θ]``)
  their sums over a turn follow from the sums of ``cos mθ``/``sin mθ``, which the single
  columns already give for ``m`` in the fitted orders (and ``m = 0``: the number of readings).
  One product per unknown frequency is enough (:class:`GramPlan`): for 1θ + 2θ, 4 products
  instead of 10.  The identities hold to rounding (``cos²θ + sin²θ = 1`` to an ulp), so the
  sums agree with the direct products to ~1e-16 of their scale;

and every row is summed over each turn with one ``numpy.add.reduceat``.

The solve
---------
The per-turn normal matrices are kept "structure of arrays": entry ``(i, j)`` is a vector over
turns.  Each matrix is equilibrated (unit diagonal) and factorised by Cholesky, written as a short
loop over the entries of vectorised operations — hundreds of numpy calls for all turns together
instead of a LAPACK call per turn.  With the signal as the last column, the forward substitution
gives ``z = L⁻¹ Xᵀy`` and ``RSS = yᵀy − zᵀz``; when the fit explains nearly all of ``yᵀy``
(``yᵀy > RSS_FORMULA_MAX · RSS``) that difference would lose digits, and the turn's residuals are
formed explicitly instead.  A matrix that is not positive definite, or whose equilibrated inverse
has a diagonal element above ``INV_DIAG_MAX`` (≈ 1/λ_min), marks its turn as unsolvable, as
:func:`.linalg.stacked_inverse` does.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .linalg import Workspace, inverse_soa, schur_soa
from .segments import Segments, segment_sums

#: Readings per chunk of whole turns: the columns and products of a chunk (~20 rows of 8 bytes)
#: then stay in a 2 MiB level-2 cache (measured on the development machine: 4096 to 32768 rows
#: within 10 % of each other, 8192 the fastest; 2048 is 20 % slower).
CHUNK_ROWS = 1 << 13
#: Above this ratio yᵀy / RSS the per-turn RSS is computed from explicit residuals.
RSS_FORMULA_MAX = 1e4
#: Chunks whose turns all have the same number of readings, at least this many, form the sums of
#: products of each turn with one small matrix product (faster than the products and
#: ``reduceat`` from 8 readings per turn on: 43 against 55 ms for 10⁶ readings at 72 per turn,
#: 71 against 83 ms at 17 per turn, measured on the development machine).
UNIFORM_MIN = 8
#: Turns solved together: the per-turn vectors of the solve then stay small and in cache.
SOLVE_TURNS = 2048


# ----------------------------------------------------------------------------- the plan
class GramPlan:
    """Which per-reading rows a chunk needs, and how every entry of the per-turn normal matrices
    follows from their sums over a turn.

    Columns of the per-turn system, in order: ``P_0 = 1, P_1 … P_D`` (``nd = D + 1``), then
    ``cos k₁θ, sin k₁θ, …`` (``nh = 2K``), then the signal (index ``p = nd + nh``).  Rows of the
    chunk buffer: every column but ``P_0`` (its sum is the number of readings), then the products.
    Each normal-matrix entry is a linear combination ``{row: weight}`` of row sums, with the
    special row ``-1`` standing for the number of readings.
    """

    def __init__(self, ks, n_drift: int):
        self.ks = tuple(ks)
        self.nd = int(n_drift)
        self.nh = 2 * len(self.ks)
        self.p = self.nd + self.nh
        self.q = self.p + 1
        self.col_row = {j: j - 1 for j in range(1, self.q)}  # buffer row of column j (P_0 has none)
        self.products: list[tuple[int, int, int]] = []  # (buffer row, column a, column b)
        self.entry: dict[tuple[int, int], dict[int, float]] = {}
        self._plan()

    def _product(self, a: int, b: int) -> dict[int, float]:
        r = self.q - 1 + len(self.products)
        self.products.append((r, a, b))
        return {r: 1.0}

    @staticmethod
    def _comb(*terms) -> dict[int, float]:
        out: dict[int, float] = {}
        for w, d in terms:
            for r, v in d.items():
                out[r] = out.get(r, 0.0) + w * v
        return {r: v for r, v in out.items() if v != 0.0}

    def _plan(self) -> None:
        nd, q, ks = self.nd, self.q, self.ks
        ent = self.entry
        ones = {-1: 1.0}
        ent[0, 0] = ones
        for j in range(1, q):
            ent[0, j] = {self.col_row[j]: 1.0}
        # every product that involves a drift column (other than P_0) or the signal is computed
        for a in range(1, q):
            for b in range(max(a, 1), q):
                if a >= nd and b < self.p:  # harmonic × harmonic: below
                    continue
                ent[a, b] = self._product(a, b)
        # harmonic × harmonic through sums of cos mθ / sin mθ
        C: dict[int, dict[int, float]] = {0: ones}
        S: dict[int, dict[int, float]] = {0: {}}
        for j, k in enumerate(ks):
            C[k] = ent[0, nd + 2 * j]
            S[k] = ent[0, nd + 2 * j + 1]
        pairs = [(j1, j2) for j1 in range(len(ks)) for j2 in range(j1, len(ks))]
        todo = list(pairs)
        while todo:  # the pair with the fewest unknown frequencies first: fewest products
            todo.sort(key=lambda jj: sum(f not in C for f in self._freqs(*jj)) + sum(f not in S for f in self._freqs(*jj)))
            self._pair(*todo.pop(0), C, S)
        self._group()

    def _group(self) -> None:
        """Order the product rows so that one column multiplies a run of consecutive columns in
        one numpy call (``groups``: ``[first row, a, b0, b1]``, the rows ``a × [b0, b1)``): the
        column in most of the remaining products is taken as the common factor first."""
        left = [(a, b) for _, a, b in self.products]
        row_of = {(a, b): r for r, a, b in self.products}
        order = []
        while left:
            count: dict[int, int] = {}
            for a, b in left:
                count[a] = count.get(a, 0) + 1
                if b != a:
                    count[b] = count.get(b, 0) + 1
            c = max(sorted(count), key=lambda j: count[j])
            mine = sorted((b if a == c else a, (a, b)) for a, b in left if c in (a, b))
            order += [(c, other, ab) for other, ab in mine]
            left = [ab for ab in left if c not in ab]
        remap = {row_of[ab]: self.q - 1 + i for i, (_, _, ab) in enumerate(order)}
        self.products = [(self.q - 1 + i, c, other) for i, (c, other, _) in enumerate(order)]
        self.entry = {k: {remap.get(r, r): w for r, w in d.items()} for k, d in self.entry.items()}
        self.prod_a = np.array([a - 1 for _, a, _ in self.products], dtype=np.intp)  # buffer rows
        self.prod_b = np.array([b - 1 for _, _, b in self.products], dtype=np.intp)
        self.groups: list[list[int]] = []
        for r, a, b in self.products:
            g = self.groups[-1] if self.groups else None
            if g is not None and g[1] == a and g[3] == b:
                g[3] = b + 1
            else:
                self.groups.append([r, a, b, b + 1])

    def _freqs(self, j1: int, j2: int):
        k1, k2 = self.ks[j1], self.ks[j2]
        return (k2 - k1, k2 + k1)

    def _pair(self, j1: int, j2: int, C, S) -> None:
        nd, comb = self.nd, self._comb
        fm, fp = self._freqs(j1, j2)
        ca, sa, cb, sb = nd + 2 * j1, nd + 2 * j1 + 1, nd + 2 * j2, nd + 2 * j2 + 1
        # cos family: Σ cc = ½(C[fm] + C[fp]), Σ ss = ½(C[fm] − C[fp])
        if fm in C and fp in C:
            cc = comb((0.5, C[fm]), (0.5, C[fp]))
        elif fm in C:
            cc = self._product(ca, cb)
            C[fp] = comb((2.0, cc), (-1.0, C[fm]))
        elif fp in C:
            cc = self._product(ca, cb)
            C[fm] = comb((2.0, cc), (-1.0, C[fp]))
        else:
            cc = self._product(ca, cb)
            ss = self._product(sa, sb)
            C[fm], C[fp] = comb((1.0, cc), (1.0, ss)), comb((1.0, cc), (-1.0, ss))
        self.entry[ca, cb] = cc
        self.entry[sa, sb] = comb((0.5, C[fm]), (-0.5, C[fp]))
        # sin family: Σ c_a s_b = ½(S[fp] + S[fm]), Σ s_a c_b = ½(S[fp] − S[fm])
        if fm in S and fp in S:
            cs = comb((0.5, S[fp]), (0.5, S[fm]))
        elif fm in S:
            cs = self._product(ca, sb)
            S[fp] = comb((2.0, cs), (-1.0, S[fm]))
        elif fp in S:
            cs = self._product(ca, sb)
            S[fm] = comb((2.0, cs), (-1.0, S[fp]))
        else:
            cs = self._product(ca, sb)
            sc = self._product(sa, cb)
            S[fp], S[fm] = comb((1.0, cs), (1.0, sc)), comb((1.0, cs), (-1.0, sc))
        self.entry[ca, sb] = cs
        if j1 != j2:
            self.entry[sa, cb] = comb((0.5, S[fp]), (-0.5, S[fm]))

    @property
    def n_rows(self) -> int:
        """Rows of the chunk buffer (columns without ``P_0``, then products)."""
        return self.q - 1 + len(self.products)

    def assemble(self, sums: np.ndarray, n: np.ndarray, out=None) -> np.ndarray:
        """The per-turn normal matrices of ``[P_0 … P_D, harmonics, y]`` as a ``(q, q, N)``
        array (entry ``(i, j)`` a vector over turns) from the row sums ``(n_rows, N)``."""
        q = self.q
        G = np.empty((q, q, n.size)) if out is None else out
        nf = n.astype(float)
        for (a, b), terms in self.entry.items():
            out = G[a, b]
            first = True
            for r, w in terms.items():
                v = nf if r == -1 else sums[r]
                if first:
                    np.multiply(v, w, out=out) if w != 1.0 else np.copyto(out, v)
                    first = False
                else:
                    out += w * v
            if first:
                out[:] = 0.0
            if a != b:
                G[b, a] = out
        return G


# ----------------------------------------------------------------------------- the solve
def solve_normal(G: np.ndarray, p: int, ws: Workspace | None = None, tail: int = 0):
    """Least squares of every turn from its augmented normal matrix ``G`` ``(p + 1, p + 1, N)``
    (last row/column: the signal).

    Returns ``(beta (N, p), inverse (p − tail, p − tail, N), yy − bᵀA⁻¹b (N,), good (N,), L)``:
    coefficients, the block ``[tail:, tail:]`` of the inverse normal matrices (entry-major, zero
    where not good), the formula RSS, whether the turn's matrix passed the screening of
    :func:`.linalg.inverse_soa`, and the Cholesky factors ``(p, p, N)`` (the inverse and the
    factors are views into the workspace ``ws`` when one is given).
    """
    if G.shape[2] == 1:  # as in inverse_soa: one lane is reduced in another order by numpy
        beta, inv, rs, good, L = solve_normal(np.repeat(G, 2, axis=2), p, tail=tail)
        return beta[:1], inv[:, :, :1], rs[:1], good[:1], L[:, :, :1]
    inv, W, good, L = inverse_soa(G[:p, :p], ws, tail=tail)
    b = G[p, :p]
    with np.errstate(invalid="ignore", over="ignore"):
        z = np.einsum("ijn,jn->in", W, b)  # z = L⁻¹ b
        beta = np.einsum("jin,jn->ni", W, z)  # β = L⁻ᵀ z = A⁻¹ b
        rs = G[p, p] - np.einsum("in,in->n", z, z)
    return beta, inv, rs, good, L


# ----------------------------------------------------------------------------- a block of turns
@dataclass
class TurnSolution:
    """Per-turn results of :meth:`TurnKernel.run` (arrays over the block's turns)."""

    coef: np.ndarray  # (N, p): drift then harmonics
    cov: np.ndarray  # (N, nh, nh) white-noise covariance of the harmonic coefficients
    rss: np.ndarray
    weight: np.ndarray  # (N, nh, nh) normal matrix of the harmonics, drift projected out (σ̂² cov⁻¹)
    ok: np.ndarray
    t_mid: np.ndarray
    harmonic_sums: np.ndarray  # (nh + 1, nh + 1): Σ over all rows of [1, harmonics] products


class TurnKernel:
    """Per-turn least squares of the signal on per-turn Legendre drift + harmonics, for blocks of
    whole, contiguous turns (see the module docstring).

    Parameters
    ----------
    ks : tuple of int
        Harmonic orders (checked).
    degree : int
        Legendre degree of the per-turn drift (1 = offset + slope).
    chunk_rows : int
        Target readings per chunk of whole turns.
    """

    def __init__(self, ks, degree: int = 1, chunk_rows: int = CHUNK_ROWS):
        self.ks = tuple(ks)
        self.degree = int(degree)
        self.plan = GramPlan(self.ks, self.degree + 1)
        self.chunk_rows = int(chunk_rows)
        self.nd, self.nh, self.p = self.plan.nd, self.plan.nh, self.plan.p
        self._buf = None
        self._one = np.ones(0)
        self._ws = Workspace()

    # ------------------------------------------------------------------ columns of a chunk
    def _per_row(self, v, ln, L):
        """Per-turn values ``v`` at every reading of a chunk: repeated, or (equal turn lengths
        ``L``) a broadcastable ``(n_turns, 1)`` view for ``(n_turns, L)`` rows."""
        return v[:, None] if L else np.repeat(v, ln)

    def _columns(self, B, scratch, t, angle, y, reps, ln, i0, i1, correct, a, L=0):
        """Fill the column rows of the buffer ``B`` (every column but ``P_0``) for one chunk.
        ``L > 0``: every turn of the chunk has ``L`` readings (rows handled as ``(n_turns, L)``).
        With an offset-and-slope drift, the slope column is ``t − t_mid`` (unscaled; the sums are
        scaled per turn afterwards), else ``τ`` and the Legendre polynomials of it."""
        t_mid, inv_half, y_mean = reps
        nd, plan = self.nd, self.plan
        m = t.size
        shape = (i1 - i0, L) if L else (m,)
        if nd > 1:
            tau = B[plan.col_row[1]]
            np.subtract(t.reshape(shape), self._per_row(t_mid[i0:i1], ln, L), out=tau.reshape(shape))
            if nd > 2:
                np.multiply(tau.reshape(shape), self._per_row(inv_half[i0:i1], ln, L), out=tau.reshape(shape))
            prev2, prev = None, tau
            for dd in range(1, nd - 1):  # Bonnet: (d+1) P_{d+1} = (2d+1) τ P_d − d P_{d−1}
                out = B[plan.col_row[dd + 1]]
                np.multiply(tau, prev, out=out)
                out *= (2 * dd + 1) / (dd + 1)
                if prev2 is None:
                    out -= dd / (dd + 1)
                else:
                    out -= (dd / (dd + 1)) * prev2
                prev2, prev = prev, out
        rows = {k: (B[plan.col_row[nd + 2 * j]], B[plan.col_row[nd + 2 * j + 1]]) for j, k in enumerate(self.ks)}
        free = [(scratch[0, :m], scratch[1, :m]), (scratch[2, :m], scratch[3, :m]), (scratch[4, :m], scratch[5, :m])]
        tmp = scratch[6, :m]
        c1, s1 = rows.get(1) or free.pop(0)
        np.cos(angle, out=c1)
        np.sin(angle, out=s1)
        ck, sk = c1, s1
        for k in range(2, max(self.ks) + 1):  # the recurrence of design.harmonic_rows
            if k in rows:
                nc, ns = rows[k]
            else:
                nc, ns = next(pair for pair in free if pair[0] is not ck)
            np.multiply(ck, c1, out=nc)
            np.multiply(sk, s1, out=tmp)
            nc -= tmp
            np.multiply(sk, c1, out=ns)
            if k == 2:
                ns += ns  # s1 c1 + c1 s1, as the recurrence writes it
            else:
                np.multiply(ck, s1, out=tmp)
                ns += tmp
            ck, sk = nc, ns
        yrow = B[plan.col_row[self.p]]
        np.subtract(y.reshape(shape), self._per_row(y_mean[i0:i1], ln, L), out=yrow.reshape(shape))
        if correct is not None:
            correct(a, a + m, yrow)

    def chunk_keys(self, first_rows: np.ndarray) -> np.ndarray:
        """The chunk of each turn from the source row of its first reading: turns starting in
        the same span of ``chunk_rows`` source rows form a chunk.  The chunks then do not depend
        on how the readings arrive (a scan in memory, or a stream in pieces of any size), and
        neither do the numbers: every turn is summed the same way."""
        return (np.asarray(first_rows, dtype=np.int64) - 1) // self.chunk_rows

    def _chunks(self, seg, first_rows=None):
        """Blocks of chunks: a list (one per block of about ``SOLVE_TURNS`` turns) of lists of
        ``(i0, i1, a, b, L)`` per chunk of whole turns (:meth:`chunk_keys`; a gap in the rows
        also ends a chunk); ``L`` the common length of its turns when they all have the same
        (and at least ``UNIFORM_MIN``) readings, else 0."""
        key = self.chunk_keys(seg.start + 1 if first_rows is None else first_rows)
        if seg.n > 1:
            key = key + np.r_[0, np.cumsum(seg.start[1:] != seg.stop[:-1])] * (1 << 40)
        bounds = np.r_[0, np.flatnonzero(key[1:] != key[:-1]) + 1, seg.n].tolist() if seg.n else [0]
        blocks, cur, first = [], [], 0
        for i0, i1 in zip(bounds[:-1], bounds[1:]):
            ln = seg.length[i0:i1]
            L = int(ln[0])
            uniform = L >= UNIFORM_MIN and bool((ln == L).all())
            cur.append((i0, i1, int(seg.start[i0]), int(seg.stop[i1 - 1]), L if uniform else 0))
            if i1 - first >= SOLVE_TURNS:
                blocks.append(cur)
                cur, first = [], i1
        if cur:
            blocks.append(cur)
        return blocks

    def _buffers(self, rows: int):
        """The chunk buffer and scratch rows, kept between calls (fresh large arrays cost page
        faults on every call)."""
        if self._buf is None or self._buf[0].shape[1] < rows:
            self._buf = (np.empty((self.plan.n_rows, rows)), np.empty((7, rows)))
        return self._buf

    # ------------------------------------------------------------------ a block
    def _sums(self, time, angle, signal, seg: Segments, chunks, reps, correct, means=False) -> np.ndarray:
        """Row sums ``(plan.n_rows, n)`` of the turns of ``chunks`` (see :class:`GramPlan`);
        ``means``: first fill in the turn means ``reps[2]`` of each chunk."""
        plan, q = self.plan, self.plan.q
        B, scratch = self._buffers(max(b - a for _, _, a, b, _ in chunks))
        j0 = chunks[0][0]
        out = self._ws.get("sums", (plan.n_rows, chunks[-1][1] - j0))
        for i0, i1, a, b, L in chunks:
            Bv = B[:, :b - a]
            ln = seg.length[i0:i1]
            if means:  # the sums of segment_sums: each turn reduced on its own
                np.divide(np.add.reduceat(signal[a:b], seg.start[i0:i1] - a), ln, out=reps[2][i0:i1])
            self._columns(Bv, scratch, time[a:b], angle[a:b], signal[a:b], reps, ln, i0, i1, correct, a, L)
            o = out[:, i0 - j0:i1 - j0]
            if L:  # equal turns: one matrix product per turn for all pairs, a matrix-vector product for sums
                X = Bv[:q - 1].reshape(q - 1, i1 - i0, L)
                M = np.matmul(X.transpose(1, 0, 2), X.transpose(1, 2, 0))
                o[:q - 1] = (Bv[:q - 1].reshape(-1, L) @ self._ones(L)).reshape(q - 1, i1 - i0)
                o[q - 1:] = M[:, plan.prod_a, plan.prod_b].T
            else:
                for r, ca, b0, b1 in plan.groups:
                    np.multiply(Bv[ca - 1], Bv[b0 - 1:b1 - 1], out=Bv[r:r + b1 - b0])
                o[:] = np.add.reduceat(Bv, seg.start[i0:i1] - a, axis=1)
        return out

    def _ones(self, L: int) -> np.ndarray:
        if self._one.size < L:
            self._one = np.ones(L)
        return self._one[:L]

    def references(self, time, signal, seg: Segments, y_mean=None, *, later: bool = False):
        """Per-turn ``(t_mid, inv_half, y_mean)``: the turn's mid time, 2 / its span (0 for a
        single reading), and its mean signal (``later``: an empty array that :meth:`_sums`
        fills chunk by chunk, while the chunk's signal is in cache)."""
        t_first, t_last = time[seg.start], time[seg.stop - 1]
        t_mid = 0.5 * (t_first + t_last)
        span = t_last - t_first
        inv_half = 2.0 / np.where(span > 0, span, np.inf)
        if y_mean is None:
            y_mean = np.empty(seg.n) if later else segment_sums(signal, seg.start, seg.stop) / seg.length
        return t_mid, inv_half, y_mean

    def gram(self, sums, lengths, inv_half) -> np.ndarray:
        """Per-turn normal matrices ``(q, q, n)`` in the basis ``[P_0(τ) … P_D(τ), harmonics, y]``."""
        G = self.plan.assemble(sums, lengths, out=self._ws.get("G", (self.plan.q, self.plan.q, lengths.size)))
        if self.nd == 2:  # the slope column was t − t_mid: scale it to τ
            G[1] *= inv_half
            G[:, 1] *= inv_half
        return G

    def run(self, time, angle, signal, seg: Segments, *, first_rows=None, y_mean=None,
            correct=None) -> TurnSolution:
        """Fit every turn of ``seg`` (row ranges into ``time``/``angle``/``signal``; turns with
        fewer than ``p + 1`` readings are not solved).  ``first_rows``: the source row of each
        turn's first reading (default: its position + 1), which fixes the chunks
        (:meth:`chunk_keys`).  ``y_mean`` (per turn) defaults to the turn means;
        ``correct(a, b, y)`` may adjust the centred signal of rows ``a:b`` in place (the aux
        correction)."""
        p, nd, nh = self.p, self.nd, self.nh
        N = seg.n
        lengths = seg.length
        means = y_mean is None
        reps = self.references(time, signal, seg, y_mean, later=True)
        coef = np.empty((N, p))
        cov = np.empty((N, nh, nh))
        weight = np.empty((N, nh, nh))
        rss = np.empty(N)
        ok = np.zeros(N, bool)
        keep = np.r_[0, nd:p]
        hsum = np.zeros((keep.size, keep.size))
        for chunks in self._chunks(seg, first_rows):
            j0, j1 = chunks[0][0], chunks[-1][1]
            ln = lengths[j0:j1]
            G = self.gram(self._sums(time, angle, signal, seg, chunks, reps, correct, means), ln, reps[1][j0:j1])
            beta, inv, rs, good, L = solve_normal(G, p, self._ws, tail=nd)
            good &= ln > p
            explicit = good & (G[p, p] > RSS_FORMULA_MAX * np.maximum(rs, 0.0))
            if explicit.any():
                self._explicit_rss(time, angle, signal, seg, chunks, reps, beta, rs, explicit, correct)
            hsum += G.sum(axis=2)[keep][:, keep]
            if good.all():
                coef[j0:j1] = beta
                rss[j0:j1] = rs
                ok[j0:j1] = True
                np.multiply(np.moveaxis(inv, 2, 0), (rs / (ln - p))[:, None, None], out=cov[j0:j1])
                schur_soa(L, nd, out=weight[j0:j1])
            elif good.any():
                sel = np.flatnonzero(good)
                gi = sel + j0
                coef[gi] = beta[sel]
                rss[gi] = rs[sel]
                ok[gi] = True
                s2 = rs[sel] / (ln[sel] - p)
                cov[gi] = np.moveaxis(inv[:, :, sel], 2, 0) * s2[:, None, None]
                weight[gi] = schur_soa(L[:, :, sel], nd)
        if not ok.all():
            coef[~ok], cov[~ok], weight[~ok], rss[~ok] = np.nan, np.nan, np.nan, np.nan
        return TurnSolution(coef, cov, rss, weight, ok, reps[0], hsum)

    def _explicit_rss(self, time, angle, signal, seg, chunks, reps, beta, rs, explicit, correct):
        """Replace the formula RSS of the flagged turns (``explicit``, over the turns of
        ``chunks``) by the sum of their squared residuals, in place."""
        j0 = chunks[0][0]
        B, scratch = self._buffers(max(b - a for _, _, a, b, _ in chunks))
        for i0, i1, a, b, _ in chunks:
            sel = explicit[i0 - j0:i1 - j0]
            if not sel.any():
                continue
            Bv = B[:, :b - a]
            ln = seg.length[i0:i1]
            self._columns(Bv, scratch, time[a:b], angle[a:b], signal[a:b], reps, ln, i0, i1, correct, a)
            bt = beta[i0 - j0:i1 - j0].copy()
            if self.nd == 2:
                bt[:, 1] *= reps[1][i0:i1]  # the slope column is t − t_mid here
            r = Bv[self.p - 1] - np.repeat(bt[:, 0], ln)
            for j in range(1, self.p):
                r -= Bv[j - 1] * np.repeat(bt[:, j], ln)
            r *= r
            rs[i0 - j0:i1 - j0][sel] = np.add.reduceat(r, seg.start[i0:i1] - a)[sel]
