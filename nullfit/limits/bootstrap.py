"""Block-bootstrap percentile upper limit on a harmonic amplitude.

Input is the series of per-turn coefficient pairs ``(c_t, s_t)``, t = 1…N.  Turns are
resampled in blocks (never single turns: the per-turn coefficients of a drifting, correlated
record are dependent), the mean pair is recomputed for each replicate, and the fluctuation
``m* − m̄`` is added to the supplied estimate ``(c, s)`` (so a joint-fit estimate that differs
slightly from the per-turn mean keeps its value).  The upper limit is the ``CL`` percentile of
``A* = |(c, s) + m* − m̄|``.

Schemes (as in arch's bootstrap module; only how block starts and lengths are drawn differs)
    ``"moving"``   blocks of fixed length ``b`` starting anywhere in ``[0, N − b]``;
    ``"circular"`` fixed length, the series wrapped on a circle (every turn equally likely);
    ``"stationary"`` geometric lengths with mean ``b``, wrapped (Politis & Romano 1994).

Block length: by default the Politis–White rule (Politis & White 2004, with the correction of
Patton, Politis & White 2009) as implemented in :func:`arch.bootstrap.optimal_block_length`,
applied to the ``c`` and ``s`` series; the larger of the two is used (ceil) and recorded.

Vectorisation: a replicate mean needs only block *sums*, which are differences of a cumulative
sum (of the series repeated twice, for wrapping).  A replicate therefore costs ``N/b`` lookups
instead of ``N``, and no resampled series is ever built.

Bias (stated in every result).  The percentile limit is biased upward at small amplitudes: the
observed ``Â`` is already biased upward (Rice), and the bootstrap distribution of ``A*`` is
centred near ``Â`` rather than near ``A``, adding the same bias a second time.  It therefore
over-covers for ``A ≲ 2σ`` and covers in *every* case at ``A = 0``.  At large ``A`` it tends
to nominal, slightly *below* it with few turns, because the block-bootstrap variance of a mean
is biased low by terms of order ``b/N`` and because blocks cut the dependence at their joins.
Measured coverage at 95 % (``tests/test_limits_coverage.py``; per-turn AR(1) noise with
coefficient 0.5, 2000 series per case): with 400 turns, 1.00 for ``A ≤ σ``, ≥ 0.99 at 2σ,
0.96–0.97 at 4σ (circular, moving and stationary schemes alike), 0.956 at 8σ; with 100 turns
≈ 0.94 at 4σ and 0.93 at 8σ.  ``σ`` is the standard deviation of the mean coefficient.
BCa and jackknife corrections assume independent resampling and are not offered
for block schemes.
"""

from __future__ import annotations

import math

import numpy as np

from ..core.conventions import make_rng
from .result import Limit, estimate_fields

SCHEMES = ("moving", "circular", "stationary")
MIN_TURNS = 10


def check_scheme(scheme: str) -> str:
    if scheme not in SCHEMES:
        raise ValueError(f"scheme must be one of {', '.join(SCHEMES)}, not {scheme!r}")
    return scheme


def politis_white_block_length(turns, scheme: str = "circular") -> tuple[int, tuple[float, float]]:
    """Politis–White block length (via arch) for the ``c`` and ``s`` series: ``(b, (b_c, b_s))``."""
    from arch.bootstrap import optimal_block_length

    x = np.asarray(turns, dtype=float)
    col = "stationary" if scheme == "stationary" else "circular"
    table = optimal_block_length(x)
    raw = tuple(float(v) for v in table[col].to_numpy())
    b = int(math.ceil(max(raw)))
    return max(1, min(b, x.shape[0] // 2)), raw


def _stationary_lengths(rng, reps, n, b):
    p = 1.0 / b
    k = int(math.ceil(n / b + 8.0 * math.sqrt(n / b) + 16))
    lengths = rng.geometric(p, size=(reps, k))
    short = lengths.sum(axis=1) < n
    while np.any(short):  # astronomically rare; redraw those rows with more blocks
        k *= 2
        extra = rng.geometric(p, size=(reps, k))
        lengths = np.where(short[:, None], extra[:, : lengths.shape[1]], lengths)
        if lengths.shape[1] < k:
            lengths = np.concatenate([lengths, np.where(short[:, None], extra[:, lengths.shape[1]:], 0)], axis=1)
        short = lengths.sum(axis=1) < n
    end = np.cumsum(lengths, axis=1)
    begin = end - lengths
    return np.clip(np.minimum(lengths, n - begin), 0, None)


def block_means(turns, block_length: int, scheme: str, replicates: int, rng, *, progress=None):
    """Replicate means ``(replicates, 2)`` of a block bootstrap of the ``(N, 2)`` series."""
    x = np.asarray(turns, dtype=float)
    n = x.shape[0]
    b = int(min(max(1, block_length), n))
    check_scheme(scheme)
    csum = np.zeros((2 * n + 1, x.shape[1]))
    csum[1:] = np.cumsum(np.concatenate([x, x]), axis=0)
    cols = [np.ascontiguousarray(csum[:, j]) for j in range(x.shape[1])]
    total = csum[n]
    k = int(math.ceil(n / b))
    per_rep = k if scheme != "stationary" else int(n / b + 8 * math.sqrt(n / b) + 16)
    chunk = max(1, min(replicates, int(4_000_000 // max(per_rep, 1))))
    show = progress if progress is not None else replicates * per_rep > 30_000_000
    from tqdm import tqdm

    out = np.empty((replicates, x.shape[1]))
    bar = tqdm(total=replicates, disable=not show, desc=f"{scheme} block bootstrap", unit="rep", leave=False)
    try:
        done = 0
        while done < replicates:
            r = min(chunk, replicates - done)
            if scheme == "stationary":
                lengths = _stationary_lengths(rng, r, n, b)
                starts = rng.integers(0, n, size=lengths.shape)
            else:
                lengths = np.full(k, b)
                lengths[-1] = n - (k - 1) * b
                high = n - b + 1 if scheme == "moving" else n
                starts = rng.integers(0, high, size=(r, k))
                lengths = np.broadcast_to(lengths, starts.shape)
            q, rem = np.divmod(lengths, n)
            stop = starts + rem
            for j, cj in enumerate(cols):
                s = (cj[stop] - cj[starts]).sum(axis=1)
                if np.any(q):
                    s = s + q.sum(axis=1) * total[j]
                out[done:done + r, j] = s / n
            done += r
            bar.update(r)
    finally:
        bar.close()
    return out


def bootstrap(c: float, s: float, turns, confidence_level: float, rng, *, scheme: str = "circular",
              block_length=None, replicates: int = 10_000, progress=None, interval: str = "percentile"):
    """Percentile block-bootstrap upper limit; returns a dict of :class:`Limit` fields."""
    if interval != "percentile":
        if str(interval).lower() in ("bca", "jackknife"):
            raise ValueError("BCa/jackknife corrections assume independent resampling; "
                             "they are not offered for block bootstraps (use interval='percentile')")
        raise ValueError(f"interval must be 'percentile', not {interval!r}")
    check_scheme(scheme)
    x = np.asarray(turns, dtype=float)
    if x.ndim != 2 or x.shape[1] != 2:
        raise ValueError(f"turns must be an (N, 2) array of per-turn (c, s), got shape {x.shape}")
    notes = []
    keep = np.all(np.isfinite(x), axis=1)
    if not np.all(keep):
        notes.append(f"{int((~keep).sum())} turns with missing coefficients dropped")
        x = x[keep]
    n = x.shape[0]
    if n < MIN_TURNS:
        raise ValueError(f"the bootstrap needs at least {MIN_TURNS} turns, got {n}")
    replicates = int(replicates)
    if replicates < 100:
        raise ValueError(f"replicates must be at least 100, not {replicates}")
    if block_length is None:
        b, raw = politis_white_block_length(x, scheme)
        notes.append(f"block length {b} turns by the Politis–White rule (arch.bootstrap.optimal_block_length; "
                     f"c: {raw[0]:.3g}, s: {raw[1]:.3g}, larger one used)")
    else:
        b = int(block_length)
        if not 1 <= b <= n:
            raise ValueError(f"block_length must lie in [1, {n}], not {block_length!r}")
        notes.append(f"block length {b} turns (given)")
    m = block_means(x, b, scheme, replicates, rng, progress=progress)
    dev = m - x.mean(axis=0)
    rep = np.array([c, s]) + dev
    a_star = np.hypot(rep[:, 0], rep[:, 1])
    upper = float(np.quantile(a_star, confidence_level))
    cov = np.cov(dev, rowvar=False)
    notes.append(f"{scheme} block bootstrap of {n} per-turn coefficient pairs, {replicates} replicates; "
                 "percentile upper limit of |(c, s) + m* − m̄|")
    notes.append("known bias: the percentile limit is biased upward at small A (Â is biased up and the "
                 "bootstrap adds that bias again), so it over-covers for A ≲ 2σ and always covers at A = 0; "
                 "with few turns (≈ 100) it falls 1–2 points below nominal at large A")
    return dict(lower=0.0, upper=upper, cov=cov, block_length=b, replicates=replicates, scheme=scheme,
                notes=tuple(notes), n_turns=n)


def limit(est, confidence_level: float, *, rng=None, scheme: str = "circular", block_length=None,
          replicates: int = 10_000, progress=None, interval: str = "percentile") -> Limit:
    """The block-bootstrap percentile limit on the amplitude of a harmonic estimate (registry
    signature); needs the per-turn series ``est.turns``."""
    if est.turns is None:
        raise ValueError("the bootstrap needs the per-turn coefficients: pass turns=(N, 2) array of (c, s), "
                         "or an estimate from a fit with turn or block errors")
    gen, seed = make_rng(rng)
    out = bootstrap(est.c, est.s, est.turns, confidence_level, gen, scheme=scheme, block_length=block_length,
                    replicates=replicates, progress=progress, interval=interval)
    bcov = np.asarray(out["cov"], dtype=float)
    bsig = math.sqrt(0.5 * np.trace(bcov))
    notes = out["notes"] + (f"bootstrap σ = {bsig:.4g} (supplied covariance: σ = {est.sigma:.4g})",)
    return Limit(method="bootstrap", confidence_level=float(confidence_level), lower=0.0, upper=out["upper"],
                 cov=bcov, sigma=bsig, sigma_label="sqrt(trace(bootstrap cov)/2)", block_length=out["block_length"],
                 replicates=out["replicates"], scheme=out["scheme"], seed=seed, notes=notes, **estimate_fields(est))
