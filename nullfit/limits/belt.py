"""Likelihood-ratio ordered confidence belts (the unified Neyman construction), cached in tiles.

A *family* is a one-parameter law of a scalar statistic ``x`` with parameter ``θ ≥ 0`` (and,
optionally, a nuisance phase ``φ`` on a grid).  For every ``(θ, φ)`` the acceptance interval
``[x1, x2]`` collects the ``x`` with the largest likelihood ratio

    R(x | θ, φ) = f(x | θ, φ) / sup_{θ', φ'} f(x | θ', φ')

until it holds probability ``CL`` (Feldman & Cousins, Phys. Rev. D 57, 3873 (1998), sec. IV).
``log R`` is unimodal in ``x`` for every family used here, so the region is an interval and is
found without discretising ``x``: parametrise it by its left end ``xL`` (the right end ``xR``
solves ``R(xR) = R(xL)`` on the other side of the mode) and solve
``F(xR) − F(xL) = CL``.  When even ``xL`` at the lower edge of the support gives too much
probability the interval starts at the edge and ``F(x2) = CL + F(edge)``.

The unknown phase is handled by projection: the belt at ``θ`` is the union over the phase grid
of the per-phase intervals, ``[min_φ x1, max_φ x2]``.  The confidence set for ``θ`` is then the
projection of the joint ``(θ, φ)`` confidence region, so it covers at least ``CL`` whatever
the true phase; for each side the binding phase is the most conservative one.

Belts are computed on tiles of unit width in ``θ`` (in units of σ) and cached per
``(family, CL, tile)``; a limit then costs an interpolation.  Near ``θ → 0`` the even families
(Rice, anisotropic) have ``x2(θ) − x2(0) ∝ θ²`` and, after the belt leaves the edge at
``θ0``, ``x1² ∝ θ − θ0``; both are interpolated in those variables and ``θ0`` is inserted as
a node.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy import special

from . import amplitude_dist as ad
from .solvers import find_root, golden_max

TILE_WIDTH = 1.0

#: At ``θ = 0`` the best fit is ``θ' = 0`` for every ``x`` in a region ``[edge, x_flat]``, where
#: therefore ``R = 1``: for the Rice law ``x_flat = √2`` (the slope of the log-likelihood in ``ν``
#: at 0 is ``ν(x²/2 − 1)``), a region of probability ``1 − e^{−1}``; for a Gaussian mean with a
#: boundary at 0, ``x ≤ 0``, probability 1/2.  Below that level the ordering cannot rank the
#: acceptance region of ``θ = 0`` (every point ties) and the construction is undefined.  The
#: anisotropic shapes have a smaller flat region, and they tend to the Rice law as ρ → 1, so the
#: Rice bound is applied to every amplitude family.
FLAT_LEVEL = {"gauss1d": 0.5, "rice": 1.0 - math.exp(-1.0), "aniso": 1.0 - math.exp(-1.0)}


def check_level(key, confidence_level: float) -> None:
    """Refuse a confidence level at which the likelihood-ratio ordering is undefined (see
    :data:`FLAT_LEVEL`): a ValueError naming the reason and the alternatives."""
    lim = FLAT_LEVEL[key[0]]
    if float(confidence_level) > lim + 1e-12:
        return
    if key[0] == "gauss1d":
        why = ("for a Gaussian mean μ ≥ 0 the likelihood ratio at μ = 0 is 1 for every x ≤ 0 (the best fit is "
               "μ = 0 there), a region of probability 0.5")
    else:
        why = ("at A = 0 the likelihood ratio is 1 for every observed amplitude up to √2 σ (the best fit is A = 0 "
               "there), a region of probability 1 − 1/e ≈ 0.632")
    raise ValueError(f"the unified (Feldman–Cousins) construction is undefined at confidence_level="
                     f"{float(confidence_level):g}: {why}, so no acceptance region can be ranked below that level; "
                     f"use confidence_level > {lim:.3f}, or method='neyman' or 'bayes'")


# ------------------------------------------------------------------------------- families


class Gaussian1D:
    """``x ~ N(μ, 1)`` with ``μ ≥ 0``: the Gaussian-with-boundary case of FC's Table X."""

    key = ("gauss1d",)
    phases = np.array([0.0])
    even = False
    spacing = 0.01
    s_major = 1.0

    def bounds(self, theta, phi):
        return theta - 40.0, theta + 14.0

    def mode_range(self, theta, phi):
        return theta - 6.0, theta + 6.0

    def logratio(self, x, theta, phi):
        # best fit is μ̂ = max(x, 0)
        return np.where(x >= 0, -0.5 * (x - theta) ** 2, x * theta - 0.5 * theta**2)

    def cdf(self, x, theta, phi):
        return special.ndtr(x - theta)


class Rice:
    """Observed amplitude under an isotropic covariance (unit σ): the Rice law."""

    key = ("rice",)
    phases = np.array([0.0])
    even = True
    spacing = 0.01
    s_major = 1.0

    def bounds(self, theta, phi):
        return np.zeros_like(theta), theta + 14.0

    def mode_range(self, theta, phi):
        return np.zeros_like(theta), theta + 4.0

    def logratio(self, x, theta, phi):
        return ad.rice_log_kernel(x, theta) - ad.rice_log_profile(x)

    def cdf(self, x, theta, phi):
        return ad.rice_cdf(x, theta)


_PROFILE_CHUNK = 4.0
_PROFILE_STEP = 0.02


class Anisotropic:
    """Observed amplitude for principal standard deviations ``s1 ≥ s2`` (``s1² + s2² = 2``)."""

    even = True
    spacing = 0.025
    phases = np.linspace(0.0, 0.5 * math.pi, 9)

    def __init__(self, rho: float):
        self.rho = float(rho)
        self.key = ("aniso", self.rho)
        self.s1 = math.sqrt(2.0 / (1.0 + self.rho**2))
        self.s2 = self.rho * self.s1
        self.s_major = self.s1

    def bounds(self, theta, phi):
        return np.zeros_like(theta), theta + 8.5 * self.s1

    def mode_range(self, theta, phi):
        return np.zeros_like(theta), theta + 4.0 * self.s1

    def logratio(self, x, theta, phi):
        return ad.aniso_log_kernel(x, theta, phi, self.s1, self.s2) - self.log_profile(x)

    def cdf(self, x, theta, phi):
        return ad.aniso_cdf(x, theta, phi, self.s1, self.s2)

    def log_profile(self, x):
        x = np.asarray(x, dtype=float)
        chunk = np.floor(np.maximum(x, 0.0) / _PROFILE_CHUNK).astype(int)
        out = np.empty(x.shape)
        for k in np.unique(chunk):
            grid, table = _aniso_profile(self.rho, int(k))
            sel = chunk == k
            out[sel] = np.interp(x[sel], grid, table)
        return out


#: phases searched for the best fit (the denominator of R).  Numerically the maximising phase
#: always lies on a principal axis (checked on a 17-phase grid in the tests); the ordering only
#: decides *which* values enter the acceptance region, so it cannot spoil coverage.
PROFILE_PHASES = np.array([0.0, 0.5 * math.pi])


@functools.lru_cache(maxsize=256)
def _aniso_profile(rho: float, chunk: int):
    """``max_{A', φ'} log(f(a | A', φ')/a)`` on a grid of ``a`` (one chunk of width 4σ)."""
    fam = family(("aniso", rho))
    n = int(round(_PROFILE_CHUNK / _PROFILE_STEP))
    a = chunk * _PROFILE_CHUNK + _PROFILE_STEP * np.arange(n + 1)
    aa, pp = np.meshgrid(a, PROFILE_PHASES, indexing="ij")
    aa, pp = aa.ravel(), pp.ravel()

    def k(A, i):
        return ad.aniso_log_kernel(aa[i], A, pp[i], fam.s1, fam.s2)

    best = golden_max(k, np.zeros_like(aa), aa + 2.0 * fam.s1, iters=40)
    val = k(best, np.arange(aa.size)).reshape(a.size, -1)
    # the boundary A' = 0 is a candidate golden section may approach but not reach
    val0 = k(np.zeros_like(aa), np.arange(aa.size)).reshape(a.size, -1)
    return a, np.maximum(val, val0).max(axis=1)


@functools.lru_cache(maxsize=64)
def family(key):
    if key == ("gauss1d",):
        return Gaussian1D()
    if key == ("rice",):
        return Rice()
    if key[0] == "aniso":
        return Anisotropic(key[1])
    raise KeyError(key)


# --------------------------------------------------------------------- acceptance intervals


def _edge_probability(fam, theta, phi):
    """Mode of ``log R``, and the probability of ``{R ≥ R(edge)}`` (the region touching the edge)."""
    lo, hi = fam.bounds(theta, phi)
    mlo, mhi = fam.mode_range(theta, phi)

    def lr(x, i):
        return fam.logratio(x, theta[i], phi[i])

    mode = golden_max(lr, mlo, mhi, iters=32)
    idx = np.arange(theta.size)
    t0 = lr(lo, idx)
    xr0 = find_root(lambda x, j: lr(x, j) - t0[j], mode, hi, xtol=1e-10)
    flo = fam.cdf(lo, theta, phi)
    p0 = fam.cdf(xr0, theta, phi) - flo
    return mode, xr0, flo, p0


def acceptance(fam, theta, phi, confidence_level: float):
    """Per-``(θ, φ)`` acceptance intervals ``(x1, x2)`` and whether they touch the lower edge."""
    theta, phi = np.broadcast_arrays(np.ravel(np.asarray(theta, float)), np.ravel(np.asarray(phi, float)))
    theta, phi = theta.copy(), phi.copy()
    cl = confidence_level
    lo, hi = fam.bounds(theta, phi)

    def lr(x, i):
        return fam.logratio(x, theta[i], phi[i])

    def cdf(x, i):
        return fam.cdf(x, theta[i], phi[i])

    mode, xr0, flo, p0 = _edge_probability(fam, theta, phi)

    def right(t, ids):
        return find_root(lambda x, j: lr(x, ids[j]) - t[j], mode[ids], hi[ids], xtol=1e-10)

    flat = p0 <= cl
    x1 = lo.astype(float).copy()
    x2 = np.empty(theta.size)
    f_ids = np.flatnonzero(flat)
    if f_ids.size:
        target = cl + flo[f_ids]
        x2[f_ids] = find_root(lambda x, j: cdf(x, f_ids[j]) - target[j], xr0[f_ids], hi[f_ids], xtol=1e-10)
    n_ids = np.flatnonzero(~flat)
    if n_ids.size:

        def excess(xl, j):
            ids = n_ids[j]
            xr = right(lr(xl, ids), ids)
            return cdf(xr, ids) - cdf(xl, ids) - cl

        xl = find_root(excess, lo[n_ids], mode[n_ids], xtol=1e-9)
        x1[n_ids] = xl
        x2[n_ids] = right(lr(xl, n_ids), n_ids)
    return x1, x2, flat


def band(key, theta, confidence_level: float, *, phases=None, refine: bool = True):
    """Belt ``(x1, x2)`` at the given ``θ`` (union over phases), computed directly.

    ``phases`` overrides the family's phase grid (tests use a much finer one); ``refine``
    applies the same local phase refinement as the cached tiles.
    """
    check_level(key, confidence_level)
    fam = family(key)
    theta = np.atleast_1d(np.asarray(theta, dtype=float))
    grid = fam.phases if phases is None else np.asarray(phases, dtype=float)
    tt, pp = np.meshgrid(theta, grid, indexing="ij")
    x1, x2, flat = acceptance(fam, tt.ravel(), pp.ravel(), confidence_level)
    x1, x2, flat = x1.reshape(tt.shape), x2.reshape(tt.shape), flat.reshape(tt.shape)
    if refine and phases is None and grid.size > 1:
        b1, b2, _, _ = _refine_phases(fam, theta, x1, x2, flat, confidence_level)
        return b1, b2
    return x1.min(axis=1), x2.max(axis=1)


# ------------------------------------------------------------------------------------ tiles


@dataclass(frozen=True)
class Tile:
    theta: np.ndarray
    x1: np.ndarray
    x2: np.ndarray
    at_edge: np.ndarray  # x1 sits on the lower edge of the support


def _edge_transition(fam, theta_a, theta_b, phi, cl):
    """``θ0`` in ``[θa, θb]`` where the acceptance interval leaves the lower edge (``p0 = CL``)."""

    def g(t, i):
        return _edge_probability(fam, t, phi[i])[3] - cl

    return find_root(g, theta_a, theta_b, xtol=1e-9)


def _refine_phases(fam, theta, x1, x2, flat, cl, rounds=(0.5, 0.25)):
    """Local refinement of ``min_φ x1`` and ``max_φ x2`` around the best grid phase.

    The per-phase ends are continuous in ``φ`` but can peak between grid phases (next to the
    phase where the interval leaves the lower edge); two rounds of bisection-like search
    around the best grid phase resolve the peak to an eighth of the grid spacing.
    """
    h = fam.phases[1] - fam.phases[0]
    rows = np.arange(theta.size)
    k1, k2 = x1.argmin(axis=1), x2.argmax(axis=1)
    best1, phi1 = x1[rows, k1], fam.phases[k1]
    best2, phi2 = x2[rows, k2], fam.phases[k2]
    edge = flat.any(axis=1)
    lo_p, hi_p = fam.phases[0], fam.phases[-1]
    for r in rounds:
        cand = np.stack([phi1 - r * h, phi1 + r * h, phi2 - r * h, phi2 + r * h], axis=1)
        cand = np.clip(cand, lo_p, hi_p)
        tt = np.repeat(theta[:, None], 4, axis=1)
        c1, c2, cf = acceptance(fam, tt.ravel(), cand.ravel(), cl)
        c1, c2, cf = c1.reshape(-1, 4), c2.reshape(-1, 4), cf.reshape(-1, 4)
        j1 = c1[:, :2].argmin(axis=1)
        better1 = c1[rows, j1] < best1
        best1 = np.where(better1, c1[rows, j1], best1)
        phi1 = np.where(better1, cand[rows, j1], phi1)
        j2 = 2 + c2[:, 2:].argmax(axis=1)
        better2 = c2[rows, j2] > best2
        best2 = np.where(better2, c2[rows, j2], best2)
        phi2 = np.where(better2, cand[rows, j2], phi2)
        edge = edge | cf.any(axis=1)
    return best1, best2, edge, phi1


@functools.lru_cache(maxsize=4096)
def tile(key, confidence_level: float, index: int) -> Tile:
    """The belt on ``θ ∈ [index, index + 1]`` (units of σ), cached."""
    check_level(key, confidence_level)
    fam = family(key)
    n = int(round(TILE_WIDTH / fam.spacing))
    theta = index * TILE_WIDTH + fam.spacing * np.arange(n + 1)
    tt, pp = np.meshgrid(theta, fam.phases, indexing="ij")
    x1, x2, flat = acceptance(fam, tt.ravel(), pp.ravel(), confidence_level)
    shape = tt.shape
    x1, x2, flat = x1.reshape(shape), x2.reshape(shape), flat.reshape(shape)
    if fam.phases.size > 1:
        X1, X2, edge, phi1 = _refine_phases(fam, theta, x1, x2, flat, confidence_level)
    else:
        X1, X2, edge, phi1 = x1[:, 0], x2[:, 0], flat[:, 0], np.zeros(theta.size)
    if fam.even:
        ks = np.flatnonzero(edge[:-1] & ~edge[1:])
        for k in ks[::-1]:
            phases = np.unique(np.append(fam.phases[flat[k]], phi1[k]))
            t0 = _edge_transition(
                fam, np.full(phases.size, theta[k]), np.full(phases.size, theta[k + 1]), phases,
                confidence_level,
            ).max()
            if not (theta[k] < t0 < theta[k + 1]):
                continue
            _, b2 = band(key, [t0], confidence_level)
            lo_edge = fam.bounds(np.array([t0]), np.array([0.0]))[0][0]
            theta = np.insert(theta, k + 1, t0)
            X1 = np.insert(X1, k + 1, lo_edge)
            X2 = np.insert(X2, k + 1, b2[0])
            edge = np.insert(edge, k + 1, True)
    return Tile(theta, X1, X2, edge)


def _belt(key, cl, i0, i1):
    parts = [tile(key, cl, i) for i in range(i0, i1 + 1)]
    th = np.concatenate([p.theta if j == 0 else p.theta[1:] for j, p in enumerate(parts)])
    x1 = np.concatenate([p.x1 if j == 0 else p.x1[1:] for j, p in enumerate(parts)])
    x2 = np.concatenate([p.x2 if j == 0 else p.x2[1:] for j, p in enumerate(parts)])
    edge = np.concatenate([p.at_edge if j == 0 else p.at_edge[1:] for j, p in enumerate(parts)])
    return th, x1, x2, edge


@functools.lru_cache(maxsize=16384)
def _boundary(key, confidence_level: float, index: int) -> tuple[float, float]:
    """Belt ends ``(x1, x2)`` at the tile boundary ``θ = index`` (union over phases, refined as
    the tiles are), computed alone: about 1/40 of the cost of a tile."""
    b1, b2 = band(key, [index * TILE_WIDTH], confidence_level)
    return float(b1[0]), float(b2[0])


def _boundaries(key, confidence_level: float, top: float):
    """Running envelopes of the belt ends at the tile boundaries ``0, 1, …, K``, with ``K`` the
    first boundary where ``x1 > top`` (beyond it no observation ``≤ top`` has a crossing)."""
    b1, b2 = [], []
    i = 0
    while True:
        v1, v2 = _boundary(key, confidence_level, i)
        b1.append(v1)
        b2.append(v2)
        if i >= 1 and v1 > top:
            break
        i += 1
    return np.minimum.accumulate(np.array(b1)[::-1])[::-1], np.maximum.accumulate(np.array(b2))


def _upper(th, x1, edge, x, even):
    m = np.minimum.accumulate(x1[::-1])[::-1]
    k = np.searchsorted(m, x, side="right") - 1
    kk = np.clip(k, 0, th.size - 2)
    dm = m[kk + 1] - m[kk]
    frac = np.where(dm > 0, (x - m[kk]) / np.where(dm > 0, dm, 1.0), 0.0)
    if even:
        # just after leaving the edge x1² grows linearly in θ − θ0
        sq = edge[kk] & ~edge[kk + 1]
        frac = np.where(sq, frac**2, frac)
    upper = th[kk] + np.clip(frac, 0.0, 1.0) * (th[kk + 1] - th[kk])
    return np.where(k < 0, np.nan, upper)


def _lower(th, x2, x, even):
    M = np.maximum.accumulate(x2)
    j = np.searchsorted(M, x, side="left")
    jj = np.clip(j, 1, th.size - 1)
    dM = M[jj] - M[jj - 1]
    g = np.clip(np.where(dM > 0, (x - M[jj - 1]) / np.where(dM > 0, dM, 1.0), 1.0), 0.0, 1.0)
    if even:
        lower = np.sqrt(th[jj - 1] ** 2 + g * (th[jj] ** 2 - th[jj - 1] ** 2))
    else:
        lower = th[jj - 1] + g * (th[jj] - th[jj - 1])
    return np.where(j == 0, th[0], lower)


def invert(key, confidence_level: float, x):
    """Confidence interval ``[lower, upper]`` on ``θ`` for observed ``x`` (vectorised).

    ``upper = sup{θ : x1(θ) ≤ x}``, ``lower = inf{θ : x2(θ) ≥ x}``; robust to tiny
    non-monotonicity by working with the running envelopes of ``x1`` and ``x2``.  ``upper``
    is NaN where ``x`` lies below the belt (never for the amplitude families).

    Only the tiles that hold a crossing are built: the belt ends at the tile boundaries
    (:func:`_boundary`, cheap) locate the tile where ``x1`` (resp. ``x2``) crosses each ``x``;
    that tile is built and inverted (with its two neighbours when the boundary value and the
    tile's own end differ in the last digits, so that a crossing at a boundary is never missed).  For ``x2(0) ≥ x`` the lower end is 0
    without building any tile.
    """
    check_level(key, confidence_level)
    fam = family(key)
    x = np.atleast_1d(np.asarray(x, dtype=float))
    lower, upper = np.zeros(x.shape), np.full(x.shape, np.nan)
    if x.size == 0:
        return lower, upper
    b1, b2 = _boundaries(key, confidence_level, float(x.max()))
    iu = np.searchsorted(b1, x, side="right") - 1  # tile holding the upper crossing (−1: below the belt)
    il = np.searchsorted(b2, x, side="left") - 1  # tile holding the lower crossing (−1: lower = 0)
    cl = confidence_level
    for g in np.unique(iu):
        if g < 0:
            continue
        sel = np.flatnonzero(iu == g)
        th, x1, _, edge = _belt(key, cl, int(g), int(g))
        m = np.minimum.accumulate(x1[::-1])[::-1]
        inside = (x[sel] >= m[0]) & (x[sel] < m[-1])
        upper[sel[inside]] = _upper(th, x1, edge, x[sel[inside]], fam.even)
        if not inside.all():  # the boundary value and the tile differ in the last digits
            out = sel[~inside]
            th, x1, _, edge = _belt(key, cl, max(int(g) - 1, 0), int(g) + 1)
            upper[out] = _upper(th, x1, edge, x[out], fam.even)
    for g in np.unique(il):
        sel = np.flatnonzero(il == g)
        if g < 0:
            lower[sel] = 0.0
            continue
        th, _, x2, _ = _belt(key, cl, int(g), int(g))
        M = np.maximum.accumulate(x2)
        inside = (x[sel] > M[0]) & (x[sel] <= M[-1])
        lower[sel[inside]] = _lower(th, x2, x[sel[inside]], fam.even)
        if not inside.all():
            out = sel[~inside]
            th, _, x2, _ = _belt(key, cl, max(int(g) - 1, 0), int(g) + 1)
            lower[out] = _lower(th, x2, x[out], fam.even)
    return lower, upper
