"""Limits checked against published tables and independent reference implementations (scipy)."""

import math

import numpy as np
import pytest
from scipy import integrate, optimize, special, stats

from nullfit.limits import amplitude_limit, detection_significance, unified_gaussian_interval
from nullfit.limits.amplitude_dist import (
    amplitude_cdf,
    aniso_cdf,
    aniso_cdf_student,
    aniso_log_kernel,
    aniso_sf,
    rice_cdf,
    rice_log_kernel,
    rice_nu_hat,
    student_cdf_int,
)
from nullfit.limits.bayes import bayes_upper
from nullfit.limits.covariance import hotelling_scale, student_law

# Feldman & Cousins, Phys. Rev. D 57, 3873 (1998), Table X: unified intervals for the mean of a
# Gaussian of unit σ with a physical boundary μ ≥ 0, observed x0, printed with two decimals.  The
# rows below are recalled from memory of the published table; every row is checked against an
# independent construction written here (_fc_reference), so a mis-remembered row fails.
FC_TABLE_X = [
    # (x0, CL, lower, upper)
    (0.0, 0.90, 0.00, 1.64),
    (0.0, 0.95, 0.00, 1.96),
    (2.6, 0.90, 1.02, 4.24),
    (-3.0, 0.6827, 0.00, 0.04),
    (-3.0, 0.90, 0.00, 0.26),
    (-3.0, 0.95, 0.00, 0.42),
    (-3.0, 0.99, 0.00, 0.80),
    (-2.0, 0.90, 0.00, 0.40),
    (-1.0, 0.90, 0.00, 0.81),
    (-1.0, 0.99, 0.00, 1.68),
    (0.0, 0.6827, 0.00, 1.00),
    (0.0, 0.99, 0.00, 2.58),
    (0.5, 0.90, 0.00, 2.14),
    (0.5, 0.6827, 0.02, 1.50),
    (1.5, 0.90, 0.22, 3.14),
    (2.0, 0.90, 0.58, 3.64),
    (3.0, 0.90, 1.37, 4.64),
    (3.1, 0.6827, 2.10, 4.10),
    (3.1, 0.90, 1.46, 4.74),
    (3.1, 0.95, 1.22, 5.06),
    (3.1, 0.99, 0.77, 5.68),
]
#: Half a unit in the last printed digit of the table.
TABLE_ROUNDING = 0.005
#: nullfit's cached, interpolated belt against the direct construction: measured maximum 5.4e-4 (at
#: x0 = −3, CL = 0.6827, where the upper end moves fastest), below 1e-4 elsewhere.
BELT_TOL = 6e-4


def _fc_acceptance(mu, cl):
    """Acceptance interval [x1, x2] of the likelihood-ratio ordering for x ~ N(μ, 1), μ ≥ 0: with
    R(x) = φ(x − μ)/φ(x − max(x, 0)), log R = −(x − μ)²/2 for x ≥ 0 and μx − μ²/2 for x < 0, so the
    two ends at a level log R = L are closed forms; L is found from P(x1 ≤ x ≤ x2) = CL."""
    def ends(L):
        x2 = mu + math.sqrt(-2 * L)
        x1 = mu - math.sqrt(-2 * L)
        if x1 < 0:
            x1 = (L + mu * mu / 2) / mu if mu > 0 else -math.inf
        return x1, x2

    L = optimize.brentq(lambda L: stats.norm.cdf(ends(L)[1] - mu) - stats.norm.cdf(ends(L)[0] - mu) - cl,
                        -60.0, -1e-15, xtol=1e-14)
    return ends(L)


def _fc_reference(x0, cl):
    """The unified interval by direct inversion of the acceptance intervals (scipy root finding)."""
    up = optimize.brentq(lambda mu: _fc_acceptance(mu, cl)[0] - x0, 1e-9, max(x0, 0) + 10, xtol=1e-10)
    if _fc_acceptance(1e-12, cl)[1] >= x0:
        return 0.0, up
    return optimize.brentq(lambda mu: _fc_acceptance(mu, cl)[1] - x0, 1e-12, max(x0, 0) + 10, xtol=1e-10), up


@pytest.mark.parametrize("x0,cl,lo,up", FC_TABLE_X)
def test_fc_table_x(x0, cl, lo, up):
    ref_lo, ref_up = _fc_reference(x0, cl)
    # the recalled table row is the direct construction rounded to two decimals
    assert abs(ref_lo - lo) <= TABLE_ROUNDING + 1e-9 and abs(ref_up - up) <= TABLE_ROUNDING + 1e-9
    got_lo, got_up = unified_gaussian_interval(x0, confidence_level=cl)
    assert abs(got_lo - ref_lo) <= BELT_TOL and abs(got_up - ref_up) <= BELT_TOL


def test_fc_gaussian_large_x_is_central():
    # Far from the boundary the unified interval is the central one, x0 ± z_{(1+CL)/2}
    # (Feldman & Cousins 1998, sec. IV B; z from scipy.stats.norm).
    for cl in (0.9, 0.95):
        z = stats.norm.ppf(0.5 + cl / 2)
        lo, up = unified_gaussian_interval(8.0, confidence_level=cl)
        assert lo == pytest.approx(8.0 - z, abs=2e-4)
        assert up == pytest.approx(8.0 + z, abs=2e-4)


def test_fc_gaussian_scales_with_sigma():
    lo1, up1 = unified_gaussian_interval(1.3, confidence_level=0.9)
    lo2, up2 = unified_gaussian_interval(2.6, confidence_level=0.9, sigma=2.0)
    assert (lo2, up2) == pytest.approx((2 * lo1, 2 * up1), rel=1e-12)


# ----------------------------------------------------------------------------- Rice law


def test_rice_density_and_cdf_against_scipy():
    # scipy.stats.rice(b=ν) is the unit-σ Rice law (independent reference implementation).
    x = np.array([0.05, 0.4, 1.0, 2.2, 3.7, 6.0, 11.0])
    for nu in (0.0, 0.3, 1.0, 2.5, 5.0, 9.0):
        pdf = x * np.exp(rice_log_kernel(x, nu))
        np.testing.assert_allclose(pdf, stats.rice.pdf(x, nu), rtol=1e-10, atol=1e-300)
        np.testing.assert_allclose(rice_cdf(x, nu), stats.rice.cdf(x, nu), rtol=1e-10, atol=1e-14)


def test_anisotropic_law_reduces_to_rice():
    # The angular-quadrature law with s1 = s2 = 1 against scipy.stats.rice.
    x = np.array([0.05, 0.4, 1.0, 2.2, 3.7, 6.0])
    for nu in (0.0, 0.7, 2.0, 4.5):
        for phi in (0.0, 0.9):
            np.testing.assert_allclose(aniso_cdf(x, nu, phi, 1.0, 1.0), stats.rice.cdf(x, nu), atol=1e-12)
            np.testing.assert_allclose(aniso_sf(x, nu, phi, 1.0, 1.0), stats.rice.sf(x, nu), rtol=1e-9, atol=1e-15)
            np.testing.assert_allclose(x * np.exp(aniso_log_kernel(x, nu, phi, 1.0, 1.0)), stats.rice.pdf(x, nu),
                                       rtol=1e-9)


@pytest.mark.parametrize("A,phi,a", [(0.0, 0.0, 1.3), (1.5, 0.4, 0.8), (1.5, 0.4, 2.7), (3.0, 1.2, 3.4)])
def test_anisotropic_cdf_against_2d_integration(A, phi, a):
    # Brute-force 2-D integration of the bivariate normal over the disc |x| ≤ a (scipy dblquad).
    s1 = math.sqrt(2 / 1.25)
    s2 = 0.5 * s1
    mu = (A * math.cos(phi), A * math.sin(phi))

    def f(r, psi):
        x, y = r * math.cos(psi), r * math.sin(psi)
        return r * math.exp(-0.5 * (((x - mu[0]) / s1) ** 2 + ((y - mu[1]) / s2) ** 2)) / (2 * math.pi * s1 * s2)

    ref = integrate.dblquad(f, 0, 2 * math.pi, 0, a, epsabs=1e-12, epsrel=1e-10)[0]
    assert float(aniso_cdf(a, A, phi, s1, s2)) == pytest.approx(ref, abs=1e-9)
    assert float(aniso_sf(a, A, phi, s1, s2)) == pytest.approx(1 - ref, abs=1e-9)


def test_rice_mle_threshold():
    # The Rice likelihood in ν is maximal at 0 for x ≤ √2 (slope x²/2 − 1 at 0), else at the
    # root of x I1(xν)/I0(xν) = ν; cross-checked with scipy.optimize on scipy.stats.rice.logpdf.
    assert rice_nu_hat(np.array([0.5, 1.41]))[0] == 0.0
    for x in (1.5, 2.0, 4.0, 9.0):
        ref = optimize.minimize_scalar(lambda nu: -stats.rice.logpdf(x, nu), bounds=(1e-9, x), method="bounded",
                                       options={"xatol": 1e-10}).x
        assert rice_nu_hat(np.array([x]))[0] == pytest.approx(ref, abs=1e-6)


# ---------------------------------------------------------------------- Student (few turns)


def test_student_cdf_series_against_scipy():
    t = np.linspace(-40, 40, 801)
    for n in (1, 2, 3, 4, 7, 12, 25):
        np.testing.assert_allclose(student_cdf_int(n, t), special.stdtr(n, t), atol=1e-14)


@pytest.mark.parametrize("dof", [2, 4, 9, 19])
def test_student_law_at_zero_is_hotelling(dof):
    # With A = 0 and an isotropic scale the radius of a bivariate Student (ν, scale k) obeys
    # |x|²/(2k) ~ F(2, ν) (scipy.stats.f as reference); ν = dof − 1, k = dof/(dof − 1).
    nu, k = student_law(dof)
    a = np.array([0.3, 1.0, 2.0, 4.0, 9.0])
    np.testing.assert_allclose(amplitude_cdf(a, 0.0, 0.0, 1.0, 1.0, student_nu=nu, student_scale=k),
                               stats.f.cdf(a**2 / (2 * k), 2, nu), atol=1e-13)


def test_student_cdf_against_2d_integration():
    # scipy.stats.multivariate_t density integrated over the disc (independent reference).
    s1, s2, nu, k = 1.2, math.sqrt(2 - 1.44), 4, 1.25
    A, phi, a = 1.5, 0.4, 2.0
    dist = stats.multivariate_t(loc=[A * math.cos(phi), A * math.sin(phi)], shape=k * np.diag([s1**2, s2**2]), df=nu)
    ref = integrate.dblquad(lambda r, p: r * dist.pdf([r * math.cos(p), r * math.sin(p)]), 0, 2 * math.pi, 0, a,
                            epsabs=1e-11, epsrel=1e-9)[0]
    assert float(aniso_cdf_student(a, A, phi, s1, s2, nu, k)) == pytest.approx(ref, abs=1e-8)


def test_hotelling_scale_formula():
    # T²_CL = 2 dof/(dof−1) F_{2,dof−1}(CL) (Hotelling; common practice) over χ²_2(CL) = −2 ln(1−CL).
    for dof, cl in [(4, 0.95), (19, 0.9)]:
        t2 = 2 * dof / (dof - 1) * stats.f.ppf(cl, 2, dof - 1)
        assert hotelling_scale(dof, cl) == pytest.approx(t2 / (-2 * math.log(1 - cl)), rel=1e-12)
    # it tends to 1 as the number of turns grows
    assert hotelling_scale(10_000, 0.95) == pytest.approx(1.0, abs=2e-3)


# --------------------------------------------------------------------------------- Neyman


@pytest.mark.parametrize("x", [0.5, 1.0, 2.0, 3.5, 6.0])
@pytest.mark.parametrize("cl", [0.9, 0.95])
def test_neyman_against_scipy_rice(x, cl):
    # Classical upper limit: rice.cdf(x; b=ν_up) = 1 − CL, solved with scipy's brentq on scipy.stats.rice.
    ref = optimize.brentq(lambda nu: stats.rice.cdf(x, nu) - (1 - cl), 0.0, x + 15, xtol=1e-12)
    sigma = 0.37
    lim = amplitude_limit(x * sigma, 0.0, np.eye(2) * sigma**2, method="neyman", confidence_level=cl)
    assert not lim.empty
    assert lim.upper == pytest.approx(ref * sigma, rel=1e-8)


def test_neyman_empty_threshold():
    # Empty exactly when the Rayleigh CDF at A = 0, 1 − exp(−x²/2), is below 1 − CL,
    # i.e. x < sqrt(−2 ln CL) (= 0.3203 at 95 %).
    thr = math.sqrt(-2 * math.log(0.95))
    empty = amplitude_limit(thr * 0.99, 0.0, np.eye(2), method="neyman")
    assert empty.empty and empty.upper is None and empty.lower is None
    assert any("empty" in n for n in empty.notes)
    # Just above the threshold the limit starts from 0 and grows like sqrt(x − x_thr)
    # (F(x | ν) − F(x | 0) ∝ ν² for small ν), so 100× the excess gives 10× the limit.
    u1 = amplitude_limit(thr * (1 + 1e-6), 0.0, np.eye(2), method="neyman").upper
    u2 = amplitude_limit(thr * (1 + 1e-4), 0.0, np.eye(2), method="neyman").upper
    assert u1 < 0.01
    assert u2 / u1 == pytest.approx(10.0, rel=0.02)


# ---------------------------------------------------------------------------------- Bayes


@pytest.mark.parametrize("cl", [0.9, 0.95, 0.99])
def test_bayes_plane_prior_at_zero(cl):
    # Plane prior, Â = 0: Rayleigh posterior, A_up = σ sqrt(−2 ln(1 − CL)) (derived in bayes.py).
    sigma = 0.8
    lim = amplitude_limit(0.0, 0.0, np.eye(2) * sigma**2, method="bayes", prior="plane", confidence_level=cl)
    assert lim.upper == pytest.approx(sigma * math.sqrt(-2 * math.log(1 - cl)), rel=1e-7)


@pytest.mark.parametrize("cl", [0.9, 0.95, 0.99])
def test_bayes_amplitude_prior_at_zero(cl):
    # Amplitude prior, Â = 0: half-normal posterior (scipy.stats.halfnorm as reference).
    sigma = 0.8
    lim = amplitude_limit(0.0, 0.0, np.eye(2) * sigma**2, method="bayes", prior="amplitude", confidence_level=cl)
    assert lim.upper == pytest.approx(sigma * stats.halfnorm.ppf(cl), rel=1e-7)


@pytest.mark.parametrize("ahat", [0.5, 1.7, 4.0])
def test_bayes_plane_prior_is_rice_in_amplitude(ahat):
    # Isotropic, plane prior: the posterior of A is Rice with b = Â/σ (derived in bayes.py);
    # reference quantile from scipy.stats.rice.ppf.
    sigma = 1.3
    c, s = ahat * sigma * math.cos(0.3), ahat * sigma * math.sin(0.3)
    lim = amplitude_limit(c, s, np.eye(2) * sigma**2, method="bayes", prior="plane")
    assert lim.upper == pytest.approx(sigma * stats.rice.ppf(0.95, ahat), rel=1e-7)


@pytest.mark.parametrize("prior", ["plane", "amplitude"])
@pytest.mark.parametrize("c,s", [(0.9, 0.1), (0.1, -0.25)])
def test_bayes_anisotropic_against_2d_integration(prior, c, s):
    # Correlated covariance; brute-force posterior mass P(A ≤ A_up | x̂) by scipy dblquad.
    cov = np.array([[0.09, 0.03], [0.03, 0.04]])
    lim = amplitude_limit(c, s, cov, method="bayes", prior=prior)
    icov = np.linalg.inv(cov)

    def f(phi, A):
        d = np.array([c - A * math.cos(phi), s - A * math.sin(phi)])
        return math.exp(-0.5 * d @ icov @ d) * (A if prior == "plane" else 1.0)

    top = lim.upper + 3.0
    num = integrate.dblquad(f, 0, lim.upper, 0, 2 * math.pi, epsabs=1e-13, epsrel=1e-10)[0]
    den = num + integrate.dblquad(f, lim.upper, top, 0, 2 * math.pi, epsabs=1e-13, epsrel=1e-10)[0]
    assert num / den == pytest.approx(0.95, abs=1e-7)


def test_bayes_student_kernel_at_zero():
    # dof given, Â = 0, plane prior: the posterior of (c, s) is bivariate Student, so
    # P(|μ| ≤ A_up) = F_{2,ν}(A_up²/(2kσ²)) = CL (scipy.stats.f).
    for dof in (3, 9, 39):
        nu, k = student_law(dof)
        up = bayes_upper([0.0], [0.0], 1.0, 1.0, 0.95, "plane", (nu, k))[0]
        assert stats.f.cdf(up**2 / (2 * k), 2, nu) == pytest.approx(0.95, abs=1e-7)


# --------------------------------------------------------------------------- significance


def test_rayleigh_significance():
    # Rayleigh tail exp(−a²/(2σ²)) = scipy.stats.rayleigh.sf(a/σ).
    sig = detection_significance(0.3, 0.4, np.eye(2) * 0.04)
    assert sig.method == "rayleigh"
    assert sig.p_value == pytest.approx(stats.rayleigh.sf(0.5 / 0.2), rel=1e-12)
    assert sig.z == pytest.approx(stats.norm.isf(sig.p_value))


def test_anisotropic_significance_integration_vs_quadrature_and_simulation():
    cov = np.array([[0.09, 0.03], [0.03, 0.04]])
    c, s = 0.45, 0.1
    exact = detection_significance(c, s, cov)
    assert exact.method == "integration"
    # reference: P(xᵀx ≥ a²) for x ~ N(0, cov), by scipy dblquad over the disc
    icov = np.linalg.inv(cov)
    norm = 1 / (2 * math.pi * math.sqrt(np.linalg.det(cov)))
    a = math.hypot(c, s)
    inside = integrate.dblquad(
        lambda r, p: r * norm * math.exp(-0.5 * np.array([r * math.cos(p), r * math.sin(p)]) @ icov
                                         @ np.array([r * math.cos(p), r * math.sin(p)])),
        0, 2 * math.pi, 0, a, epsabs=1e-12, epsrel=1e-10)[0]
    assert exact.p_value == pytest.approx(1 - inside, abs=1e-9)
    sim = detection_significance(c, s, cov, method="simulation", rng=12, n_sim=400_000)
    assert sim.seed == 12
    # binomial standard error of the simulated p-value; 5 standard errors a priori
    se = math.sqrt(exact.p_value * (1 - exact.p_value) / 400_000)
    assert abs(sim.p_value - exact.p_value) < 5 * se


def test_hotelling_significance():
    # Hotelling T² test (common practice): p = F.sf(T² (dof−1)/(2 dof), 2, dof−1).
    cov = np.array([[0.09, 0.03], [0.03, 0.04]])
    x = np.array([0.3, 0.2])
    t2 = x @ np.linalg.solve(cov, x)
    sig = detection_significance(*x, cov, dof=7)
    assert sig.method == "hotelling"
    assert sig.p_value == pytest.approx(stats.f.sf(t2 * 6 / 14, 2, 6), rel=1e-12)
