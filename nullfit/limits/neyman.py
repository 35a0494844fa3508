"""Classical one-sided Neyman upper limit on a harmonic amplitude.

The upper limit ``A_up`` solves ``P(Â ≤ Â_obs | A_up) = 1 − CL``; the confidence set is
``{A : P(Â ≤ Â_obs | A) > 1 − CL}``, which covers exactly ``CL`` for a continuous statistic
whose CDF falls with ``A`` (Rice law: scipy.stats.rice as reference).

Empty sets.  At ``A = 0`` the probability is the Rayleigh CDF ``1 − exp(−Â²/(2σ²))``; when it
is already below ``1 − CL`` (``Â < σ sqrt(−2 ln CL)``, 0.32σ at 95 %) *no* amplitude is
compatible and the set is empty.  That is a correct outcome of the construction (it happens in
a fraction ``1 − CL`` of experiments with ``A = 0``), not a limit of zero, so ``empty=True`` is
returned with a note and no number.

Anisotropic covariance: the CDF depends on the phase; the set is projected over phases,
``{A : max_φ P(Â ≤ Â_obs | A, φ) > 1 − CL}`` (9-point quadrant grid with three rounds of local refinement),
i.e. the most conservative phase sets the limit.

Few turns (``dof``): a constant covariance inflation cannot serve a one-sided limit (it makes
empty sets too frequent at ``A = 0`` while still too short at large ``A``).  Instead the
Gaussian law of ``(ĉ, ŝ) − μ`` is replaced by the bivariate Student (Hotelling) law with
``dof − 1`` degrees of freedom and scale ``cov · dof/(dof − 1)``
(:func:`nullfit.limits.covariance.student_law`), whose quadratic form has exactly the Hotelling
distribution; its CDF has a closed-form radial integral
(:func:`nullfit.limits.amplitude_dist.aniso_cdf_student`).

Measured coverage with few turns (``tests/limits/test_limits_coverage.py``; 600–2000 simulated runs
per case; 5, 10, 20 turns; isotropic and anisotropic truth; A = 0–4σ): 0.94–1.00 at 95 % CL —
within 2 points of nominal at small A, conservative at large A.  With an estimated (noisy)
shape the projection over phases already adds conservatism, so treating the covariance as
exact is only slightly worse; the Student law matters at large A on the major axis (5 turns,
A = 4σ: ≥ 0.95 with it, ≈ 0.944 treating the covariance as exact, 2000 runs).
"""

from __future__ import annotations

import math

import numpy as np

from .amplitude_dist import amplitude_cdf, n_psi_buckets
from .covariance import CovarianceShape, covariance_shape, student_law
from .result import Limit, estimate_fields
from .solvers import find_root

PHASES = np.linspace(0.0, 0.5 * math.pi, 9)


def _cdf(x, A, phi, s1, s2, student):
    if student is None:
        return amplitude_cdf(x, A, phi, s1, s2)
    nu, k = student
    return amplitude_cdf(x, A, phi, s1, s2, student_nu=nu, student_scale=k)


def _span(s1, alpha, student):
    """How far above ``x`` the root can lie (Gaussian or Student tails)."""
    if student is None:
        return 12.0 * s1
    from scipy import stats

    nu, k = student
    return s1 * math.sqrt(k) * (12.0 + 2.0 * float(stats.t.isf(alpha / 4.0, nu)))


def _solve(x, phi, s1, s2, alpha, student):
    """Per-(x, φ) roots ``A`` of ``P(Â ≤ x | A, φ) = alpha`` (x not empty)."""
    s1 = np.broadcast_to(s1, x.shape)
    s2 = np.broadcast_to(s2, x.shape)
    span = _span(s1, alpha, student)
    return find_root(lambda A, i: _cdf(x[i], A, phi[i], s1[i], s2[i], student) - alpha,
                     np.zeros_like(x), x + span, xtol=1e-10)


def neyman_upper(x, s1, s2, confidence_level: float, student=None):
    """Upper limits on ``A/σ`` for observations ``x = Â/σ`` (vectorised; ``s1``, ``s2`` may be
    per-observation arrays).

    Returns ``(upper, empty)``; ``upper`` is NaN where the set is empty.
    """
    x = np.atleast_1d(np.asarray(x, dtype=float))
    s1 = np.broadcast_to(np.asarray(s1, dtype=float), x.shape)
    s2 = np.broadcast_to(np.asarray(s2, dtype=float), x.shape)
    if s2.size == 0 or np.ptp(s2) == 0.0:
        return _neyman_upper(x, s1, s2, confidence_level, student)
    upper = np.full(x.shape, np.nan)
    empty = np.zeros(x.shape, dtype=bool)
    reach = x + _span(s1, 1.0 - float(confidence_level), student)
    for ids in n_psi_buckets(reach, s2, s1):
        upper[ids], empty[ids] = _neyman_upper(x[ids], s1[ids], s2[ids], confidence_level, student)
    return upper, empty


def _neyman_upper(x, s1, s2, confidence_level, student):
    alpha = 1.0 - float(confidence_level)
    empty = _cdf(x, 0.0, 0.0, s1, s2, student) < alpha
    upper = np.full(x.shape, np.nan)
    ok = np.flatnonzero(~empty)
    if ok.size == 0:
        return upper, empty
    xs, t1, t2 = x[ok], s1[ok], s2[ok]
    if np.all(np.abs(t1 - t2) < 1e-12):
        upper[ok] = _solve(xs, np.zeros_like(xs), t1, t2, alpha, student)
        return upper, empty
    xx, pp = np.meshgrid(xs, PHASES, indexing="ij")
    ss1 = np.repeat(t1[:, None], PHASES.size, axis=1)
    ss2 = np.repeat(t2[:, None], PHASES.size, axis=1)
    roots = _solve(xx.ravel(), pp.ravel(), ss1.ravel(), ss2.ravel(), alpha, student).reshape(xx.shape)
    k = roots.argmax(axis=1)
    best = roots[np.arange(xs.size), k]
    phi = PHASES[k]
    h = PHASES[1] - PHASES[0]
    for r in (0.5, 0.25, 0.125):
        cand = np.clip(np.stack([phi - r * h, phi + r * h], axis=1), 0.0, 0.5 * math.pi)
        xr = np.repeat(xs[:, None], 2, axis=1)
        cr = _solve(xr.ravel(), cand.ravel(), np.repeat(t1, 2), np.repeat(t2, 2), alpha,
                    student).reshape(cand.shape)
        j = cr.argmax(axis=1)
        val = cr[np.arange(xs.size), j]
        better = val > best
        best = np.where(better, val, best)
        phi = np.where(better, cand[np.arange(xs.size), j], phi)
    upper[ok] = best
    return upper, empty


def neyman(amplitude: float, shape: CovarianceShape, confidence_level: float, dof=None):
    """One-sided Neyman upper limit for one estimate: ``(upper or None, empty, notes)``."""
    cl = float(confidence_level)
    s1, s2 = shape.unit_axes()
    iso = shape.isotropic
    if iso:
        s1 = s2 = 1.0
    student = None
    notes = ["classical one-sided Neyman construction: P(Â ≤ Â_obs | A_up) = 1 − CL"]
    notes.append("Rice law of Â (isotropic covariance)" if iso else
                 f"anisotropic law of Â (σ_minor/σ_major = {shape.rho:.3f}), exact integration over the angle; "
                 "unknown phase: most conservative phase (projection over phases)")
    if dof is not None:
        student = student_law(dof)
        notes.append(f"covariance estimated from {dof + 1} turns: bivariate Student (Hotelling) law with "
                     f"{student[0]} dof and scale cov × {student[1]:.4g} in place of the Gaussian")
    x = amplitude / shape.sigma
    up, empty = neyman_upper([x], s1, s2, cl, student)
    if empty[0]:
        thr = math.sqrt(-2.0 * math.log(cl)) if (iso and dof is None) else None
        why = (f"Â = {x:.3g}σ lies below {thr:.3g}σ, the (1 − CL) quantile of Â at A = 0"
               if thr is not None else "Â lies below the (1 − CL) quantile of Â at A = 0")
        notes.append(f"empty confidence set: {why}; no amplitude is compatible at this CL "
                     "(this happens in a fraction 1 − CL of experiments with A = 0). "
                     "Quote the Feldman–Cousins interval instead.")
        return None, True, tuple(notes)
    return float(up[0]) * shape.sigma, False, tuple(notes)


def limit(est, confidence_level: float, *, rng=None) -> Limit:
    """The one-sided Neyman limit on the amplitude of a harmonic estimate (registry signature)."""
    shape = covariance_shape(est.cov)
    up, empty, notes = neyman(est.amplitude, shape, confidence_level, est.dof)
    label = "sqrt(trace(cov)/2): the unit of the construction, which uses the full covariance"
    if est.dof is not None:
        label += f" (Student law, scale × {student_law(est.dof)[1]:.4g})"
    return Limit(method="neyman", confidence_level=float(confidence_level), lower=None if empty else 0.0,
                 upper=up, empty=empty, empty_reason=notes[-1] if empty else None, cov=shape.array,
                 sigma=shape.sigma, sigma_label=label, dof=est.dof, notes=notes + est.caveats, **estimate_fields(est))
