"""Small linear-algebra kernels of the fit: stacked inverses of per-turn normal matrices, an
equilibrated SPD solve, and the banded solve of the spline drift."""

from __future__ import annotations

import math

import numpy as np

from ..core.errors import AnalysisError, where

#: Largest diagonal element of an equilibrated inverse normal matrix accepted (≈ 1/λ_min).
INV_DIAG_MAX = 1e10
#: Matrices inverted together by :func:`stacked_inverse`.
STACK_BLOCK = 4096


class Workspace:
    """Arrays reused by name between calls.  A large fresh array costs a page fault per 4 KiB on
    first touch (several microseconds each on a virtual machine), more than the arithmetic of
    the small solves below; blocks of the same size can share their buffers instead."""

    def __init__(self):
        self._buf: dict[str, np.ndarray] = {}

    def get(self, name: str, shape, *, zero: bool = False) -> np.ndarray:
        size = math.prod(shape)
        buf = self._buf.get(name)
        if buf is None or buf.size < size:
            buf = self._buf[name] = np.empty(max(size, 1))
        out = buf[:size].reshape(shape)
        if zero:
            out.fill(0.0)
        return out


def cholesky_soa(A: np.ndarray, ws: Workspace | None = None):
    """Cholesky factors of a stack of symmetric matrices held "structure of arrays": ``A`` is
    ``(p, p, N)`` (entry ``(i, j)`` a vector over the stack; only ``j ≤ i`` is read).

    Returns ``(L, ok)``: ``L`` lower triangular ``(p, p, N)`` (the entries above the diagonal
    are not set), ``ok`` False where a pivot is not positive (not positive definite; that
    matrix's factor is garbage).  One vectorised step per column: a few dozen numpy calls for
    the whole stack instead of a LAPACK call per matrix.  Cholesky needs no equilibration (a
    diagonal scaling ``D A D`` only scales the factor to ``D L``, with the same relative
    rounding)."""
    p, _, N = A.shape
    L = (ws or Workspace()).get("chol", (p, p, N))
    ok = np.ones(N, bool)
    with np.errstate(invalid="ignore"):
        for j in range(p):
            d = A[j, j] - np.einsum("kn,kn->n", L[j, :j], L[j, :j]) if j else np.array(A[j, j], dtype=float)
            good = d > 0
            ok &= good
            d[~good] = 1.0
            np.sqrt(d, out=d)
            L[j, j] = d
            if j < p - 1:
                r = A[j + 1:, j] - np.einsum("ikn,kn->in", L[j + 1:, :j], L[j, :j]) if j else np.array(A[1:, 0])
                r /= d
                L[j + 1:, j] = r
    return L, ok


def lower_inverse_soa(L: np.ndarray, ws: Workspace | None = None) -> np.ndarray:
    """Inverses of the lower-triangular factors ``L`` ``(p, p, N)`` (forward substitution);
    zero above the diagonal."""
    p = L.shape[0]
    W = (ws or Workspace()).get("linv", L.shape, zero=True)
    for i in range(p):
        np.divide(1.0, L[i, i], out=W[i, i])
        if i:
            W[i, :i] = np.einsum("kn,kjn->jn", L[i, :i], W[:i, :i]) * -W[i, i]
    return W


def inverse_soa(A: np.ndarray, ws: Workspace | None = None, tail: int = 0):
    """Inverses of a stack of symmetric positive (semi)definite matrices ``(p, p, N)`` (entry
    major) with the screening of :func:`stacked_inverse`.  Returns ``(inverse, W, good, L)`` with
    ``L`` the Cholesky factor (:func:`cholesky_soa`) and ``W = L⁻¹`` (so ``A⁻¹ = WᵀW``); the
    inverse is zero where not good.  Every matrix goes
    through the same arithmetic whatever the size of the stack and its place in it, so results
    do not depend on how turns are grouped (chunks of a scan, pieces of a stream).  With a
    workspace the results are views into it, valid until its next use.  ``tail > 0`` returns
    only the block ``[tail:, tail:]`` of the inverses (the screening still uses every diagonal
    element): as ``L`` is lower triangular, that block is ``W[tail:, tail:]ᵀ W[tail:, tail:]``."""
    p, _, N = A.shape
    if N == 1:  # numpy reduces a single lane in another order: keep every lane's arithmetic the same
        inv, W, good, L = inverse_soa(np.repeat(A, 2, axis=2), tail=tail)
        return inv[:, :, :1], W[:, :, :1], good[:1], L[:, :, :1]
    ws = ws or Workspace()
    diag = np.array([A[i, i] for i in range(p)])
    good = (diag > 0).all(axis=0)
    L, ok = cholesky_soa(A, ws)
    good &= ok
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        W = lower_inverse_soa(L, ws)
        Wt = W[tail:, tail:]
        inv = np.einsum("kin,kjn->ijn", Wt, Wt, out=ws.get("inv", (p - tail, p - tail, N)))
        # the equilibrated inverse D A⁻¹ D, D = diag(A)^(-1/2), has diagonal A⁻¹_ii A_ii
        idiag = np.einsum("kin,kin->in", W, W) * diag
    good &= np.isfinite(idiag).all(axis=0) & (idiag.max(axis=0) < INV_DIAG_MAX)
    if not good.all():
        inv[:, :, ~good] = 0.0
    return inv, W, good, L


def schur_soa(L: np.ndarray, tail: int, out: np.ndarray | None = None) -> np.ndarray:
    """Schur complements ``A_tt − A_tl A_ll⁻¹ A_lt`` of the leading ``tail × tail`` blocks, from the
    Cholesky factors ``L`` ``(p, p, N)`` of :func:`cholesky_soa` (entries above the diagonal are not
    read): the trailing block of ``L`` factors it, ``S = L_tt L_ttᵀ``.  For a per-turn normal matrix
    with the drift first, ``S`` is the normal matrix of the harmonics with the drift projected out,
    the inverse of the harmonic block of ``A⁻¹``.  Returns ``(N, m, m)``, ``m = p − tail``."""
    p, _, N = L.shape
    m = p - tail
    S = np.empty((N, m, m)) if out is None else out
    for i in range(m):
        for j in range(i + 1):
            v = np.einsum("kn,kn->n", L[tail + i, tail:tail + j + 1], L[tail + j, tail:tail + j + 1])
            S[:, i, j] = v
            if i != j:
                S[:, j, i] = v
    return S

def stacked_inverse(A: np.ndarray):
    """Inverses of a stack of symmetric positive (semi)definite matrices ``(s, p, p)``.

    Each matrix is factorised by Cholesky and inverted by forward substitution
    (``A⁻¹ = L⁻ᵀL⁻¹``), vectorised over the stack (:func:`inverse_soa`).  Returns
    ``(inverse, good)``; ``good`` is False where a matrix is singular, not positive definite,
    or so ill-conditioned that its equilibrated inverse (unit-diagonal ``A``) has a diagonal
    element above ``INV_DIAG_MAX`` (those inverses are set to zero).
    """
    n, p, _ = A.shape
    out = np.empty((n, p, p))
    good = np.empty(n, bool)
    ws = Workspace()
    for a in range(0, n, STACK_BLOCK):  # blocks: small temporaries that stay in cache
        b = min(a + STACK_BLOCK, n)
        At = ws.get("A", (p, p, b - a))
        At[...] = np.moveaxis(A[a:b], 0, 2)
        inv, _, good[a:b], _ = inverse_soa(At, ws)
        out[a:b] = np.moveaxis(inv, 2, 0)
    return out, good


def solve_spd(A: np.ndarray, B: np.ndarray):
    """Solve ``A X = B`` for a symmetric positive (semi)definite ``A`` after equilibration;
    returns ``(X, A⁻¹, condition number of the equilibrated A)``."""
    d = np.sqrt(np.diag(A))
    if not (d > 0).all():
        raise np.linalg.LinAlgError("a column of the design is identically zero")
    As = A / d[:, None] / d[None, :]
    ev = np.linalg.eigvalsh(As)
    cond = float(ev[-1] / ev[0]) if ev[0] > 0 else math.inf
    Ainv = np.linalg.inv(As) / d[:, None] / d[None, :]
    Ainv = 0.5 * (Ainv + Ainv.T)
    return Ainv @ B, Ainv, cond


def banded_solve(DD, RHS, source):
    """Solve the banded SPD system of the cubic B-spline drift (bandwidth 3) for ``RHS``."""
    from scipy.linalg import cho_solve_banded, cholesky_banded

    nb = RHS.shape[0]
    u = 3
    diag0 = DD.diagonal(0)
    if np.any(diag0 <= 0):
        raise AnalysisError(f"{where(source)}: a spline knot interval holds no data (a gap in the log?); "
                        "use a wider knot spacing or drift='per-turn'")
    ab = np.zeros((u + 1, nb))
    for k in range(u + 1):
        ab[u - k, k:] = DD.diagonal(k)
    try:
        c = cholesky_banded(ab, lower=False)
    except np.linalg.LinAlgError:
        raise AnalysisError(f"{where(source)}: the spline drift basis is singular over the data (gaps?); "
                        "use a wider knot spacing") from None
    return cho_solve_banded((c, False), RHS)
