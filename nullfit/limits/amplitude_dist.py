"""The law of an observed harmonic amplitude ``Â = |(ĉ, ŝ)|``.

All functions work in units of the covariance scale ``σ = sqrt(trace/2)`` and in the
principal frame of the covariance, ``Σ = diag(s1², s2²)`` with ``s1 ≥ s2`` and
``s1² + s2² = 2`` (see :mod:`nullfit.limits.covariance`).  The true signal is
``μ = A (cos φ, sin φ)``; ``φ`` is measured from the major axis.

Isotropic covariance (``s1 = s2 = 1``)
    ``Â`` is Rice distributed: ``f(a | A) = a exp(−(a² + A²)/2) I0(a A)`` — scipy.stats.rice
    with ``b = A``.  Its CDF is the non-central χ² CDF with 2 degrees of freedom at ``a²``.

Anisotropic covariance
    No closed form.  Writing the estimate in polar coordinates ``(r, ψ)`` the density of ``Â``
    is a single integral over ``ψ``,

        f(a) = a ∫₀^{2π} N₂(a e_ψ; μ, Σ) dψ,

    and the radial integral of the CDF has a closed form: with ``α = e_ψᵀΣ⁻¹e_ψ``,
    ``β = e_ψᵀΣ⁻¹μ``, ``γ = μᵀΣ⁻¹μ``, ``m = β/α``, ``s = α^{-1/2}``,

        ∫₀^a r e^{−(αr² − 2βr + γ)/2} dr
            = s² (e^{−γ/2} − e^{−(αa² − 2βa + γ)/2})
              + e^{−(γ − β²/α)/2} m s √(2π) [Φ((a − m)/s) − Φ(−m/s)],

    so ``F(a) = (2π s1 s2)⁻¹ ∫₀^{2π} (…) dψ``.  The ``ψ`` integrands are smooth and periodic,
    so the trapezoid rule converges geometrically; the number of nodes is chosen from the
    angular width ``s2/a`` of the integrand (:func:`n_psi_for`).  In the isotropic limit these
    formulas reproduce the Rice law (tested against scipy.stats.rice).
"""

from __future__ import annotations

import functools
import math

import numpy as np
from scipy import special

_LOG_2PI = math.log(2.0 * math.pi)
_SQRT_2PI = math.sqrt(2.0 * math.pi)


# --------------------------------------------------------------------------- Rice (isotropic)


def rice_log_kernel(x, nu):
    """``log(f(x | ν)/x)`` for the unit-σ Rice density: ``log I0(xν) − (x² + ν²)/2``."""
    x = np.asarray(x, dtype=float)
    nu = np.asarray(nu, dtype=float)
    return np.log(special.i0e(x * nu)) - 0.5 * (x - nu) ** 2


def rice_cdf(x, nu):
    """``P(Â ≤ x | ν)`` for the unit-σ Rice law (non-central χ²₂ CDF at ``x²``)."""
    x = np.asarray(x, dtype=float)
    nu = np.asarray(nu, dtype=float)
    return np.where(x > 0, special.chndtr(np.maximum(x, 0.0) ** 2, 2, nu**2), 0.0)


def rice_nu_hat(x):
    """Maximum-likelihood ``ν`` from one Rice observation ``x`` (unit σ).

    ``d/dν log f = x I1(xν)/I0(xν) − ν``; the slope at ``ν = 0`` is ``ν(x²/2 − 1)``, so the
    estimate is 0 for ``x ≤ √2`` and otherwise the unique positive root (found by bisection).
    """
    x = np.atleast_1d(np.asarray(x, dtype=float))
    lo = np.zeros_like(x)
    hi = np.maximum(x, 0.0)
    pos = x > math.sqrt(2.0)
    for _ in range(64):
        mid = 0.5 * (lo + hi)
        z = x * mid
        slope = x * special.i1e(z) / special.i0e(z) - mid
        up = slope > 0
        lo = np.where(up, mid, lo)
        hi = np.where(up, hi, mid)
    return np.where(pos, 0.5 * (lo + hi), 0.0)


_PROFILE_STEP = 0.002
_PROFILE_MAX = 64.0


@functools.cache
def _rice_profile_table():
    x = np.arange(0.0, _PROFILE_MAX + _PROFILE_STEP / 2, _PROFILE_STEP)
    return x, rice_log_kernel(x, rice_nu_hat(x))


def rice_log_profile(x):
    """``max_ν log(f(x | ν)/x)``: the best-fit (profile) log density, Jacobian removed."""
    x = np.asarray(x, dtype=float)
    grid, table = _rice_profile_table()
    out = np.interp(x, grid, table)
    big = x > _PROFILE_MAX
    if np.any(big):
        xb = x[big]
        out = np.array(out, dtype=float)
        out[big] = rice_log_kernel(xb, rice_nu_hat(xb))
    return out


# --------------------------------------------------------------------- anisotropic covariance


def n_psi_buckets(a_max, s2, s1):
    """Group problems by the angular grid they need (powers of two), so that one very
    elongated shape does not set the grid for a whole vectorised batch."""
    a_max, s2, s1 = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (a_max, s2, s1)))
    need = np.array([n_psi_for(a, b, c) for a, b, c in zip(a_max.ravel(), s2.ravel(), s1.ravel())])
    key = np.ceil(np.log2(need)).astype(int)
    return [np.flatnonzero(key == k) for k in np.unique(key)]


def n_psi_for(a_max: float, s2: float, s1: float | None = None) -> int:
    """Trapezoid nodes over ``ψ`` for the angular integrals.

    Two requirements.  (i) Resolve an integrand of angular width ``s2/a_max``: the aliasing
    error for a Gaussian bump of width ``w`` sampled with spacing ``h`` is
    ≈ ``2 exp(−2π² w²/h²)``, and ``n = 6 a_max/s2`` keeps it below 1e-7 (relative).
    (ii) Resolve the shape factor ``1/(cos²ψ/s1² + sin²ψ/s2²)``, whose Fourier coefficients
    in ``2ψ`` fall like ``r^j`` with ``r = (s1 − s2)/(s1 + s2)``: ``n ≥ 2·25.3/(−ln r)``
    makes the aliased term ``r^{n/2}`` smaller than 1e-11.
    """
    n = 6.0 * max(float(a_max), 1.0) / s2
    if s1 is not None and s1 > s2 * (1 + 1e-9):
        r = (s1 - s2) / (s1 + s2)
        n = max(n, 2.0 * 25.3 / -math.log(r))
    n = int(math.ceil(min(n, 65536.0)))  # cap: only near-singular shapes get there
    return max(32, 8 * int(math.ceil(n / 8)))


@functools.lru_cache(maxsize=64)
def _psi_grid(n: int):
    psi = 2.0 * math.pi * np.arange(n) / n
    return np.cos(psi), np.sin(psi)


def _prep(a, A, phi, n_psi, s1, s2):
    a, A, phi, s1, s2 = np.broadcast_arrays(
        np.asarray(a, dtype=float), np.asarray(A, dtype=float), np.asarray(phi, dtype=float),
        np.asarray(s1, dtype=float), np.asarray(s2, dtype=float),
    )
    if n_psi is None:
        # Beyond ~6σ from the signal the integrand is negligible; resolving the far tail
        # to full relative precision would only cost time.
        a_top = float(np.max(a, initial=0.0))
        A_top = float(np.max(A, initial=0.0))
        s1_top = float(np.max(s1, initial=1.0))
        s2_min = float(np.min(s2, initial=1.0))
        n_psi = n_psi_for(max(min(a_top, A_top + 6.0 * s1_top), A_top), s2_min, float(np.max(s1, initial=1.0)))
    cp, sp = _psi_grid(int(n_psi))
    e = (..., None)
    return a[e], A[e], phi[e], s1[e], s2[e], cp, sp, int(n_psi)


def aniso_log_kernel(a, A, phi, s1, s2, n_psi: int | None = None):
    """``log(f(a | A, φ)/a) = log ∫₀^{2π} N₂(a e_ψ; A e_φ, diag(s1², s2²)) dψ`` (all broadcast)."""
    a, A, phi, s1, s2, cp, sp, n = _prep(a, A, phi, n_psi, s1, s2)
    dc = (a * cp - A * np.cos(phi)) / s1
    ds = (a * sp - A * np.sin(phi)) / s2
    e = -0.5 * (dc * dc + ds * ds)
    top = e.max(axis=-1, keepdims=True)
    lse = np.log(np.exp(e - top).sum(axis=-1)) + top[..., 0]
    return lse + math.log(2.0 * math.pi / n) - _LOG_2PI - np.log(s1 * s2)[..., 0]


def _radial_terms(a, A, phi, s1, s2, n_psi):
    a, A, phi, s1, s2, cp, sp, n = _prep(a, A, phi, n_psi, s1, s2)
    i1, i2 = 1.0 / s1**2, 1.0 / s2**2
    alpha = cp * cp * i1 + sp * sp * i2
    beta = A * (cp * np.cos(phi) * i1 + sp * np.sin(phi) * i2)
    gamma = A * A * (np.cos(phi) ** 2 * i1 + np.sin(phi) ** 2 * i2)
    m = beta / alpha
    s = 1.0 / np.sqrt(alpha)
    kappa = np.exp(-0.5 * np.maximum(gamma - beta * m, 0.0))
    return a, alpha, beta, gamma, m, s, kappa, n, (s1 * s2)[..., 0]


def _phi_diff(upper, lower):
    """``Φ(upper) − Φ(lower)`` without cancellation in the upper tail."""
    return np.where(lower > 0, special.ndtr(-lower) - special.ndtr(-upper),
                    special.ndtr(upper) - special.ndtr(lower))


def aniso_cdf(a, A, phi, s1, s2, n_psi: int | None = None):
    """``P(Â ≤ a | A, φ)`` for ``Σ = diag(s1², s2²)`` (closed-form radial integral, trapezoid in ψ)."""
    a, alpha, beta, gamma, m, s, kappa, n, det = _radial_terms(a, A, phi, s1, s2, n_psi)
    a = np.maximum(a, 0.0)
    t1 = s * s * (np.exp(-0.5 * gamma) - np.exp(-0.5 * (alpha * a * a - 2 * beta * a + gamma)))
    t2 = kappa * m * s * _SQRT_2PI * _phi_diff((a - m) / s, -m / s)
    return np.clip((t1 + t2).sum(axis=-1) / (n * det), 0.0, 1.0)


def aniso_sf(a, A, phi, s1, s2, n_psi: int | None = None):
    """``P(Â > a | A, φ)``, computed directly (accurate for tiny tail probabilities)."""
    a, alpha, beta, gamma, m, s, kappa, n, det = _radial_terms(a, A, phi, s1, s2, n_psi)
    a = np.maximum(a, 0.0)
    t1 = s * s * np.exp(-0.5 * (alpha * a * a - 2 * beta * a + gamma))
    t2 = kappa * m * s * _SQRT_2PI * special.ndtr(-(a - m) / s)
    return np.clip((t1 + t2).sum(axis=-1) / (n * det), 0.0, 1.0)


# --------------------------------------------------------------------- Student (few turns)


def student_cdf_int(n: int, t):
    """Student CDF with an integer number ``n`` of degrees of freedom (closed-form series).

    Abramowitz & Stegun 26.7.3–4: with ``θ = atan(t/√n)``, ``P(|T| ≤ t)`` is
    ``(2/π)[θ + sin θ (cos θ + (2/3)cos³θ + …)]`` for odd ``n`` and
    ``sin θ [1 + (1/2)cos²θ + (1·3)/(2·4)cos⁴θ + …]`` for even ``n`` (``n − 1``-th power last).
    About 15 times faster than :func:`scipy.special.stdtr`, to which it is tested.
    """
    t = np.asarray(t, dtype=float)
    th = np.arctan(np.abs(t) / math.sqrt(n))
    sn, cs = np.sin(th), np.cos(th)
    c2 = cs * cs
    if n % 2:
        term = cs.copy()
        acc = np.zeros_like(t) if n == 1 else term.copy()
        for j in range(3, n - 1, 2):  # coefficients 2/3, 2·4/(3·5), ...
            term = term * c2 * (j - 1) / j
            acc = acc + term
        a = (2.0 / math.pi) * (th + sn * acc)
    else:
        term = np.ones_like(t)
        acc = term.copy()
        for j in range(2, n - 1, 2):  # coefficients 1/2, 1·3/(2·4), ...
            term = term * c2 * (j - 1) / j
            acc = acc + term
        a = sn * acc
    return 0.5 + 0.5 * np.sign(t) * a


def _stdtr(n, t):
    if float(n).is_integer() and n <= 400:
        return student_cdf_int(int(n), t)
    return special.stdtr(n, t)


def aniso_cdf_student(a, A, phi, s1, s2, nu: int, scale: float = 1.0, n_psi: int | None = None):
    """``P(Â ≤ a)`` when ``(ĉ, ŝ) − μ`` is bivariate Student (``ν`` dof, scale ``scale·diag(s1², s2²)``).

    Same structure as :func:`aniso_cdf`.  With ``Q(r) = α(r − m)² + δ`` (``δ = γ − β²/α``) the
    kernel is ``(1 + Q/ν)^{−(ν+2)/2} = K (1 + w²/B)^{−(ν+2)/2}``, ``w = r − m``,
    ``B = (ν + δ)/α``, ``K = (1 + δ/ν)^{−(ν+2)/2}``, and

        ∫₀^a r (1 + Q/ν)^{−(ν+2)/2} dr = K [ (B/ν)((1 + m²/B)^{−ν/2} − (1 + (a−m)²/B)^{−ν/2})
                                          + m √(Bπ) Γ((ν+1)/2)/Γ((ν+2)/2) ΔT_{ν+1} ],

    where ``ΔT`` is the Student CDF with ``ν + 1`` dof between ``−m√((ν+1)/B)`` and
    ``(a − m)√((ν+1)/B)``.  As ``ν → ∞`` this tends to the Gaussian formula.
    """
    k = math.sqrt(scale)
    s1 = np.asarray(s1, dtype=float) * k
    s2 = np.asarray(s2, dtype=float) * k
    a, alpha, beta, gamma, m, s, kappa, n, det = _radial_terms(a, A, phi, s1, s2, n_psi)
    a = np.maximum(a, 0.0)
    delta = np.maximum(gamma - beta * m, 0.0)
    B = (nu + delta) / alpha
    K = np.exp(-0.5 * (nu + 2.0) * np.log1p(delta / nu))
    t1 = (B / nu) * ((1.0 + m * m / B) ** (-0.5 * nu) - (1.0 + (a - m) ** 2 / B) ** (-0.5 * nu))
    c = math.exp(special.gammaln(0.5 * (nu + 1.0)) - special.gammaln(0.5 * (nu + 2.0))) * math.sqrt(math.pi)
    r = np.sqrt((nu + 1.0) / B)
    lo, hi = -m * r, (a - m) * r
    dt = np.where(lo > 0, _stdtr(nu + 1, -lo) - _stdtr(nu + 1, -hi),
                  _stdtr(nu + 1, hi) - _stdtr(nu + 1, lo))
    t2 = m * np.sqrt(B) * c * dt
    return np.clip((K * (t1 + t2)).sum(axis=-1) / (n * det), 0.0, 1.0)


def amplitude_cdf(a, A, phi, s1, s2, *, student_nu: int | None = None, student_scale: float = 1.0):
    """``P(Â ≤ a | A, φ)``: Rice, anisotropic, or the bivariate Student (few-turn) law.

    ``s1``, ``s2`` may be arrays (one shape per element).  With ``student_nu`` the law of
    ``(ĉ, ŝ) − μ`` is the bivariate Student with ``ν`` degrees of freedom and scale matrix
    ``student_scale · diag(s1², s2²)``.
    """
    a, A, phi, s1, s2 = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (a, A, phi, s1, s2)))
    if student_nu is not None:
        return aniso_cdf_student(a, A, phi, s1, s2, int(student_nu), student_scale)
    if np.all(np.abs(s1 - s2) <= 1e-12):
        return rice_cdf(a / s1, A / s1)
    return aniso_cdf(a, A, phi, s1, s2)
