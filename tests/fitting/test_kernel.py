"""The per-turn kernel's pieces against independent references (numpy products and lstsq,
numpy.linalg.inv), and the coverage check on long logs.

* `GramPlan`: the per-turn normal matrices built from fewer products (product-to-sum identities)
  equal ``XᵀX`` formed directly with numpy, for several harmonic sets and drift degrees;
* `solve_normal` equals numpy.linalg.lstsq per matrix (and its Schur complements the projected
  normal matrices formed with numpy); `stacked_inverse` equals numpy.linalg.inv
  and flags the singular and ill-conditioned matrices;
* the two ways of summing a chunk (one matrix product per turn when its turns have equal
  lengths, products and ``reduceat`` otherwise) agree; the chunk size does not change the result.
"""

import warnings

import numpy as np
import pytest

from nullfit.core.errors import AnalysisError
from nullfit.fitting import kernel as K
from nullfit.fitting.design import SEPARABILITY_SAMPLE, check_separable, harmonic_rows
from nullfit.fitting.linalg import INV_DIAG_MAX, stacked_inverse
from nullfit.fitting.segments import Segments
from nullfit.reading.scan import Scan


def random_turns(rng, n_turns=30, lo=20, hi=90):
    lengths = rng.integers(lo, hi, n_turns)
    stop = np.cumsum(lengths)
    start = stop - lengths
    n = int(stop[-1])
    t = np.cumsum(rng.uniform(0.2, 0.4, n))
    # one turn each, unevenly sampled, at large unwrapped angles
    theta = 1e4 + 2 * np.pi * np.concatenate([i + (np.arange(L) + rng.uniform(0, 0.8, L)) / L
                                              for i, L in enumerate(lengths)])
    y = 3.0 + np.sin(t) + 0.5 * np.cos(2 * theta - 0.4) + 0.01 * rng.normal(size=n)
    return t, theta, y, Segments(start.astype(np.int64), stop.astype(np.int64), np.arange(n_turns), np.ones(n_turns, bool))


def direct_gram(t, theta, y, seg, ks, degree):
    """XᵀX of ``[P_0..P_D(τ), cos kθ, sin kθ, y − ȳ]`` per turn, columns built with numpy
    (``cos kθ`` in extended precision: at θ ≈ 1e4 rad, rounding ``kθ`` to float64 would cost
    ~1e-12)."""
    out = []
    for a, b in zip(seg.start, seg.stop):
        tt = t[a:b]
        tau = (tt - 0.5 * (tt[0] + tt[-1])) * 2.0 / (tt[-1] - tt[0])
        cols = list(np.polynomial.legendre.legvander(tau, degree).T)
        th = theta[a:b].astype(np.longdouble)
        for k in ks:
            cols += [np.cos(k * th).astype(float), np.sin(k * th).astype(float)]
        cols.append(y[a:b] - y[a:b].mean())
        X = np.array(cols)
        out.append(X @ X.T)
    return np.moveaxis(np.array(out), 0, 2)


@pytest.mark.parametrize("ks,degree", [((1, 2), 1), ((2,), 0), ((1, 2, 3), 2), ((1, 3), 3), ((2, 4), 1)])
def test_normal_matrices_from_fewer_products_equal_the_direct_ones(ks, degree):
    rng = np.random.default_rng(1)
    t, theta, y, seg = random_turns(rng)
    kern = K.TurnKernel(ks, degree, chunk_rows=200)
    plan = kern.plan
    assert len(plan.products) < plan.q * (plan.q - 1) // 2  # the identities save products
    reps = kern.references(t, y, seg)
    G = kern.gram(kern._sums(t, theta, y, seg, [c for b in kern._chunks(seg) for c in b], reps, None),
                  seg.length, reps[1])
    ref = direct_gram(t, theta, y, seg, ks, degree)
    scale = np.sqrt(np.einsum("iin,jjn->ijn", ref, ref))  # |G_ij| ≤ sqrt(G_ii G_jj)
    assert np.max(np.abs(G - ref) / scale) < 1e-13


def test_solve_equals_lstsq_per_turn():
    rng = np.random.default_rng(2)
    t, theta, y, seg = random_turns(rng)
    kern = K.TurnKernel((1, 2), 1)
    sol = kern.run(t, theta, y, seg)
    for i, (a, b) in enumerate(zip(seg.start, seg.stop)):
        tt = t[a:b]
        X = np.column_stack([np.ones(b - a), tt - 0.5 * (tt[0] + tt[-1]), np.cos(theta[a:b]), np.sin(theta[a:b]),
                             np.cos(2 * theta[a:b]), np.sin(2 * theta[a:b])])
        beta, rss, *_ = np.linalg.lstsq(X, y[a:b], rcond=None)  # numpy as the reference
        np.testing.assert_allclose(sol.coef[i, 2:], beta[2:], rtol=1e-10, atol=1e-12)
        np.testing.assert_allclose(sol.rss[i], rss[0], rtol=1e-9)
        cov = rss[0] / (b - a - 6) * np.linalg.inv(X.T @ X)[2:, 2:]
        np.testing.assert_allclose(sol.cov[i], cov, rtol=1e-9, atol=1e-12 * np.abs(cov).max())
        # the harmonics' normal matrix with the drift projected out (Schur complement), by numpy
        Xd, Xh = X[:, :2], X[:, 2:]
        S = Xh.T @ Xh - Xh.T @ Xd @ np.linalg.solve(Xd.T @ Xd, Xd.T @ Xh)
        np.testing.assert_allclose(sol.weight[i], S, rtol=1e-9, atol=1e-12 * np.abs(S).max())


def test_equal_length_and_general_chunks_agree(monkeypatch):
    rng = np.random.default_rng(3)
    n_turns, L = 40, 64
    start = np.arange(n_turns) * L
    seg = Segments(start, start + L, np.arange(n_turns), np.ones(n_turns, bool))
    t = np.arange(n_turns * L) * 0.3
    theta = np.arange(n_turns * L) * 2 * np.pi / L + 0.1
    y = 1e3 + 0.2 * np.cos(2 * theta) + 0.01 * rng.normal(size=t.size)
    a = K.TurnKernel((1, 2), 1).run(t, theta, y, seg)
    monkeypatch.setattr(K, "UNIFORM_MIN", 10 ** 9)  # every chunk through products + reduceat
    b = K.TurnKernel((1, 2), 1).run(t, theta, y, seg)
    for x, z in ((a.coef, b.coef), (a.cov, b.cov), (a.rss, b.rss)):
        np.testing.assert_allclose(x, z, rtol=1e-12, atol=1e-12 * np.abs(z).max())


def test_chunk_size_does_not_change_the_numbers():
    rng = np.random.default_rng(4)
    t, theta, y, seg = random_turns(rng, n_turns=60)
    ref = K.TurnKernel((1, 2), 1, chunk_rows=10 ** 6).run(t, theta, y, seg)
    for rows in (1, 50, 333):
        got = K.TurnKernel((1, 2), 1, chunk_rows=rows).run(t, theta, y, seg)
        for x, z in ((got.coef, ref.coef), (got.cov, ref.cov), (got.rss, ref.rss)):
            np.testing.assert_allclose(x, z, rtol=1e-12, atol=1e-12 * np.abs(z).max())


def test_stacked_inverse_equals_numpy_and_flags_bad_matrices():
    rng = np.random.default_rng(5)
    X = rng.normal(size=(50, 30, 5))
    A = np.einsum("nli,nlj->nij", X, X)
    A[3, 2, :] = A[3, :, 2] = 0.0  # a zero column: singular
    A[7] = np.outer(X[7, 0], X[7, 0])  # rank one
    v = X[11, :, 0]
    B = np.column_stack([v, v + 1e-7 * X[11, :, 1], X[11, :, 2:]])  # nearly collinear columns
    A[11] = B.T @ B
    inv, good = stacked_inverse(A)
    assert not good[3] and not good[7] and not good[11]
    assert good.sum() == 47
    for i in np.flatnonzero(good):
        np.testing.assert_allclose(inv[i], np.linalg.inv(A[i]), rtol=1e-10, atol=1e-13)  # numpy as the reference
    assert not inv[~good].any()
    # the screening is the equilibrated inverse's diagonal against INV_DIAG_MAX
    d = 1 / np.sqrt(np.diag(A[11]))
    assert np.max(np.diag(np.linalg.inv(A[11] * np.outer(d, d)))) > INV_DIAG_MAX


def test_coverage_check_samples_runs_not_strides():
    # 5 marks: a stride of 5 readings would see one azimuth only and refuse a fine log
    n = 5 * (SEPARABILITY_SAMPLE // 2)
    theta = np.deg2rad(np.tile(np.arange(5) * 72.0, n // 5))
    check_separable(theta, (1, 2), marks=5)
    # readings over 30° of every turn only: refused, however long the log
    rng = np.random.default_rng(6)
    narrow = np.deg2rad(rng.uniform(0, 30, 4 * SEPARABILITY_SAMPLE))
    with pytest.raises(AnalysisError, match="cannot separate"):
        check_separable(narrow, (1, 2))
    h = harmonic_rows(narrow, (1, 2))
    h -= h.mean(axis=1, keepdims=True)
    assert np.linalg.eigvalsh(h @ h.T / h.shape[1] / 0.5)[0] < 1e-6  # numpy on every reading agrees


def test_fit_of_a_long_marks_log_is_not_refused():
    # 8 marks and 480 000 readings: a sample of every second reading sees 4 marks, where
    # cos 2θ = ±1 and sin 2θ = 0, and would refuse the log
    n = 8 * 60_000
    ang = np.tile(np.arange(8) * 45.0, n // 8)
    th = np.deg2rad(ang)
    y = 0.1 * np.cos(2 * th) + 0.01 * np.random.default_rng(7).normal(size=n)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        s = Scan.from_arrays(np.arange(n) * 0.5, ang, y)
        from nullfit.fitting.fit import fit_scan

        f = fit_scan(s)
    assert s.marks == 8 and abs(f.coef[2] - 0.1) < 5 * np.sqrt(f.cov[2, 2])
