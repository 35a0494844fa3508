"""The unified (Feldman–Cousins) construction: belts, caching, phase treatment, brute-force checks."""

import math

import numpy as np
import pytest
from scipy import optimize, stats

from nullfit.limits import amplitude_limit
from nullfit.limits import belt
from nullfit.limits.amplitude_dist import aniso_log_kernel
from nullfit.limits.unified import RHO_GRID, rice_interval, shape_interval

RHO = 0.5  # a shape on the cached grid
S1 = math.sqrt(2 / (1 + RHO**2))
S2 = RHO * S1


def _direct_limits(key, cl, x, guess, width=0.01):
    """Limits by root-finding on directly computed belts (no cache, no interpolation).

    The bracket is ``guess ± width``; brentq raises if the root is not inside it, so a cached
    value further than ``width`` from the direct one fails the test.
    """
    def x1(t):
        return belt.band(key, [t], cl)[0][0]

    def x2(t):
        return belt.band(key, [t], cl)[1][0]

    # amplitude families: at Â = 0 the upper limit is where x1 leaves the edge
    target = 1e-9 if (x <= 0 and key != ("gauss1d",)) else x
    gl, gu = guess
    upper = optimize.brentq(lambda t: x1(t) - target, gu - width, gu + width, xtol=1e-8)
    lower = 0.0 if x2(0.0) >= x else optimize.brentq(lambda t: x2(t) - x, max(gl - width, 0.0), gl + width,
                                                     xtol=1e-8)
    return lower, upper


# ------------------------------------------------------------------------- Rice belt


@pytest.mark.parametrize("nu", [0.3, 1.2, 2.0, 3.5, 6.0])
def test_rice_acceptance_probability_and_ratio(nu):
    # Each acceptance interval holds exactly CL of the Rice law (scipy.stats.rice.cdf) and,
    # unless it starts at 0, its two ends have equal likelihood ratio (scipy's logpdf, with
    # the best fit found by scipy.optimize) — the defining property of the unified ordering.
    cl = 0.95
    fam = belt.family(("rice",))
    x1, x2, flat = belt.acceptance(fam, [nu], [0.0], cl)
    x1, x2 = float(x1[0]), float(x2[0])
    assert stats.rice.cdf(x2, nu) - stats.rice.cdf(x1, nu) == pytest.approx(cl, abs=1e-9)

    def log_ratio(x):
        best = optimize.minimize_scalar(lambda b: -stats.rice.logpdf(x, b), bounds=(0, x + 5), method="bounded",
                                        options={"xatol": 1e-10})
        return stats.rice.logpdf(x, nu) - max(-best.fun, stats.rice.logpdf(x, 0.0))

    if flat[0]:
        # the interval starts at 0 because the edge ratio, lim R(0+) = exp(−ν²/2), beats R(x2)
        assert x1 == 0.0
        assert log_ratio(x2) <= -0.5 * nu**2 + 1e-6
    else:
        assert log_ratio(x1) == pytest.approx(log_ratio(x2), abs=1e-5)


def _brute_rice_fc(nu, cl, dx=0.004):
    """Textbook discretised construction (FC 1998, sec. IV) with scipy.stats.rice."""
    x = np.arange(dx / 2, nu + 12.0, dx)
    grid = np.arange(0.0, x.max() + 1.0, 0.01)
    prof = stats.rice.logpdf(x[:, None], grid[None, :]).max(axis=1)
    p = stats.rice.pdf(x, nu) * dx
    r = stats.rice.logpdf(x, nu) - prof
    order = np.argsort(-r, kind="stable")
    take = order[: np.searchsorted(np.cumsum(p[order]), cl) + 1]
    return x[take].min() - dx / 2, x[take].max() + dx / 2


@pytest.mark.parametrize("nu", [0.5, 1.5, 2.5, 4.0])
def test_rice_belt_matches_brute_force_construction(nu):
    # Tolerance: two cells of the brute-force grid (2 × 0.004) plus its 0.01 profile grid.
    x1, x2 = belt.band(("rice",), [nu], 0.9)
    b1, b2 = _brute_rice_fc(nu, 0.9)
    assert x1[0] == pytest.approx(b1, abs=0.012)
    assert x2[0] == pytest.approx(b2, abs=0.012)


def test_flip_from_upper_limit_to_two_sided_and_never_empty():
    cl = 0.95
    x = np.linspace(0.0, 8.0, 161)
    lo, up = rice_interval(x, cl)
    assert np.all(np.isfinite(up)) and np.all(lo <= up)
    # lower = 0 exactly while Â ≤ x2(0) = sqrt(−2 ln(1 − CL)) (Rayleigh quantile), > 0 beyond
    x2_0 = math.sqrt(-2 * math.log(1 - cl))
    assert np.all(lo[x <= x2_0 - 1e-6] == 0.0)
    assert np.all(lo[x >= x2_0 + 0.02] > 0.0)
    assert np.all(np.diff(up) > 0) and np.all(np.diff(lo) >= 0)
    # far from zero the interval becomes the central one, Â ± z σ (up to the Rice bias 1/(2Â))
    z = stats.norm.ppf(0.975)
    assert up[-1] == pytest.approx(8.0 + z - 1 / (2 * 8.0), abs=0.03)
    assert lo[-1] == pytest.approx(8.0 - z - 1 / (2 * 8.0), abs=0.03)


@pytest.mark.parametrize("key,xs", [
    (("rice",), [0.0, 0.1, 0.3, 1.0, 2.6, 3.0]),
    pytest.param(("aniso", RHO), [0.0, 2.7], marks=pytest.mark.slow),
    (("gauss1d",), [-1.0, 0.5, 1.7, 2.6]),
])
def test_cached_belt_interpolation_matches_direct_solution(key, xs):
    # Claim (belt.py, unified.py): cached-belt interpolation is within 1e-3σ of the direct solution.
    cl = 0.95
    lo, up = belt.invert(key, cl, np.array(xs))
    for x, l, u in zip(xs, lo, up):
        dl, du = _direct_limits(key, cl, x, (l, u))
        assert u == pytest.approx(du, abs=1e-3)
        assert l == pytest.approx(dl, abs=1e-3)


def test_public_limit_uses_the_rice_belt_in_sigma_units():
    sigma = 0.013
    lim = amplitude_limit(2.0 * sigma * 0.6, 2.0 * sigma * 0.8, np.eye(2) * sigma**2)
    lo, up = rice_interval([2.0], 0.95)
    assert lim.lower == pytest.approx(lo[0] * sigma, rel=1e-12)
    assert lim.upper == pytest.approx(up[0] * sigma, rel=1e-12)


# --------------------------------------------------------------------- anisotropic


def test_anisotropic_family_tends_to_rice():
    th = np.array([0.5, 1.5, 2.5, 4.0])
    r1, r2 = belt.band(("rice",), th, 0.95)
    a1, a2 = belt.band(("aniso", 0.9999), th, 0.95)
    np.testing.assert_allclose(a1, r1, atol=1e-3)
    np.testing.assert_allclose(a2, r2, atol=1e-3)


def test_phase_union_refinement_matches_fine_phase_grid():
    # The cached belt uses 9 phases plus local refinement; a 65-phase grid is the reference.
    th = np.array([1.0, 2.0, 2.5, 3.0, 4.0])
    for rho in (0.3, RHO):
        b1, b2 = belt.band(("aniso", rho), th, 0.95)
        f1, f2 = belt.band(("aniso", rho), th, 0.95, phases=np.linspace(0, math.pi / 2, 65))
        assert np.all(b1 <= f1 + 2e-3) and np.all(b2 >= f2 - 2e-3)


def test_best_fit_phase_lies_on_a_principal_axis():
    # Justifies searching the profile (denominator of R) on the two axes only.
    for rho in (0.3, 0.7):
        s1 = math.sqrt(2 / (1 + rho**2))
        s2 = rho * s1
        a = np.linspace(0.2, 10.0, 13)
        A = np.linspace(0.0, 11.0, 221)
        phases = np.linspace(0, math.pi / 2, 17)
        k = aniso_log_kernel(a[:, None, None], A[None, :, None], phases[None, None, :], s1, s2)
        best = k.max(axis=1)  # over A'
        assert np.all(best.max(axis=1) <= np.maximum(best[:, 0], best[:, -1]) + 1e-9)


def test_anisotropic_acceptance_holds_cl_for_every_phase():
    # For each phase the per-phase interval holds exactly CL (exact angular integration) and
    # the projected belt contains every per-phase interval.
    fam = belt.family(("aniso", RHO))
    th = np.repeat([0.7, 2.2, 3.5], 5)
    ph = np.tile(np.linspace(0, math.pi / 2, 5), 3)
    x1, x2, _ = belt.acceptance(fam, th, ph, 0.9)
    prob = fam.cdf(x2, th, ph) - fam.cdf(x1, th, ph)
    np.testing.assert_allclose(prob, 0.9, atol=1e-8)
    b1, b2 = belt.band(("aniso", RHO), [0.7, 2.2, 3.5], 0.9)
    assert np.all(np.repeat(b1, 5) <= x1 + 1e-12) and np.all(np.repeat(b2, 5) >= x2 - 1e-12)


def _brute_aniso_band(rho, thetas, cl, rng, width=0.05):
    """Brute-force simulated unified construction for the anisotropic amplitude.

    Densities are histograms of simulated Â; the best-fit density of each bin is the maximum
    over a grid of (A', φ') histograms; each acceptance region is filled with bins in order
    of decreasing ratio; the phase is projected by the union over 9 phases.
    """
    s1 = math.sqrt(2 / (1 + rho**2))
    s2 = rho * s1
    edges = np.arange(0.0, 14.0 + 1e-9, width)

    def hist(A, phi, n):
        a = np.hypot(rng.normal(A * math.cos(phi), s1, n), rng.normal(A * math.sin(phi), s2, n))
        return np.histogram(a, edges)[0] / n

    prof = np.zeros(edges.size - 1)
    for Ap in np.arange(0.0, 8.0, 0.1):
        for php in np.linspace(0, math.pi / 2, 5):
            prof = np.maximum(prof, hist(Ap, php, 60_000))
    out = []
    for th in thetas:
        lo, hi = np.inf, -np.inf
        for phi in np.linspace(0, math.pi / 2, 9):
            p = hist(th, phi, 400_000)
            with np.errstate(divide="ignore", invalid="ignore"):
                r = np.where(p > 0, p / np.maximum(prof, p), 0.0)
            order = np.argsort(-r, kind="stable")
            take = order[: np.searchsorted(np.cumsum(p[order]), cl) + 1]
            lo, hi = min(lo, edges[take].min()), max(hi, edges[take + 1].max())
        out.append((lo, hi))
    return np.array(out)


def test_anisotropic_belt_matches_brute_force_simulated_construction():
    # Tolerance set before running: two bins (0.1σ) for the histogram discretisation and the
    # noise of the simulated best-fit densities.
    rng = np.random.default_rng(20240611)
    thetas = [0.5, 1.5, 3.0]
    brute = _brute_aniso_band(RHO, thetas, 0.9, rng)
    b1, b2 = belt.band(("aniso", RHO), thetas, 0.9)
    np.testing.assert_allclose(b1, brute[:, 0], atol=0.1)
    np.testing.assert_allclose(b2, brute[:, 1], atol=0.1)


@pytest.mark.parametrize("xs", [
    [0.0],
    pytest.param([0.0, 0.5, 1.5, 2.5, 3.5, 5.0], marks=pytest.mark.slow),
])
def test_rho_interpolation_error_is_small(xs):
    # Claim (unified.py): limits for a shape between grid points, interpolated linearly in ρ,
    # are within 3e-3σ of an exact belt for that shape.
    rho = 0.725
    assert not np.any(np.isclose(RHO_GRID, rho))
    xs = np.array(xs)
    lo_i, up_i = shape_interval(xs, rho, 0.9)
    lo_d, up_d = belt.invert(("aniso", rho), 0.9, xs)
    np.testing.assert_allclose(up_i, up_d, atol=3e-3)
    np.testing.assert_allclose(lo_i, lo_d, atol=3e-3)


def test_anisotropic_limit_is_rotation_invariant_and_uses_the_shape():
    # A correlated covariance is an anisotropic one in rotated axes: same amplitude, same law.
    sig2 = np.array([S1**2, S2**2]) * 0.01
    ang = 0.6
    R = np.array([[math.cos(ang), -math.sin(ang)], [math.sin(ang), math.cos(ang)]])
    cov_rot = R @ np.diag(sig2) @ R.T
    amp = math.hypot(0.15, 0.05)
    a = amplitude_limit(0.15, 0.05, np.diag(sig2))
    b = amplitude_limit(amp * math.cos(0.3), amp * math.sin(0.3), cov_rot)
    c = amplitude_limit(amp, 0.0, cov_rot)
    assert b.upper == pytest.approx(c.upper, rel=1e-9) and b.lower == pytest.approx(c.lower, abs=1e-12)
    assert a.upper == pytest.approx(c.upper, rel=1e-9)
    # the projection over phases is more conservative than the isotropic law with the same σ
    iso = amplitude_limit(amp, 0.0, np.eye(2) * 0.01)
    assert a.upper > iso.upper
    assert any("projection" in n for n in a.notes)


@pytest.mark.slow
def test_normal_regime_joins_the_exact_construction():
    # Above 30σ the anisotropic interval uses the conservative-phase normal form; just below,
    # the exact construction must already agree with it.
    x = 29.5
    lo, up = shape_interval([x], RHO, 0.95)
    z = stats.norm.ppf(0.975)
    centre = x - S2**2 / (2 * x)
    assert up[0] == pytest.approx(centre + z * S1, abs=0.02)
    assert lo[0] == pytest.approx(centre - z * S1, abs=0.02)
