"""The SME tensor of the sidereal model checked against a Lorentz boost of the photon coefficients.

Independent route (everything below is written out in this file, from the published definitions
in Kostelecký & Mewes, Phys. Rev. D 66, 056005 (2002), as summarised in docs/sky.md):

1. build the four-index (k_F)^{κλμν} (upper indices, metric +−−−) from (κ_DE, κ_HB, κ_DB) with
   (κ_DE)^{jk} = −2 k^{0j0k}, (κ_HB)^{jk} = ½ ε^{jpq} ε^{krs} k^{pqrs}, (κ_DB)^{jk} = ε^{kpq} k^{0jpq},
   and κ̃_e+ = ½(κ_DE + κ_HB), κ̃_e− = ½(κ_DE − κ_HB) − ⅓ tr κ_DE, κ̃_o± = ½(κ_DB ± κ_HE),
   κ_HE = −κ_DBᵀ, κ̃_tr = ⅓ tr κ_DE;
2. boost it exactly into the frame moving with velocity β⃗ (x'^μ = Λ^μ_ν x^ν);
3. (a) read off the lab κ̃_e−; (b) solve the plane-wave dispersion of the boosted constitutive
   relations D = (1 + κ_DE)E + κ_DB B, H = (1 + κ_HB)B + κ_HE E numerically and form the
   two-way speeds along two orthogonal directions.

The model's claim: the pair signal is ½(n₁·K·n₁ − n₂·K·n₂) with K = κ̃_e− + β⃗kᵀ + kβ⃗ᵀ,
k = (−κ̃_o+^{YZ}, κ̃_o+^{XZ}, −κ̃_o+^{XY}).  Finding (a): the lab κ̃_e− is the *traceless part* of K;
the trace 2β⃗·k goes, with κ̃_tr' = −(4/3) β⃗·k, into an isotropic shift that no pair can see.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from nullfit.hypothesis.sidereal import SME_NAMES, tensor_for_velocity
from nullfit.hypothesis.sidereal.parameters import check_values, sme_tensors

EPS = np.zeros((3, 3, 3))
for _i, _j, _k in itertools.permutations(range(3)):
    EPS[_i, _j, _k] = np.linalg.det(np.eye(3)[[_i, _j, _k]])


def kf_from_kappas(kDE, kHB, kDB):
    """(k_F)^{κλμν} with the Riemann-like symmetries, from the 3 × 3 blocks (definitions above)."""
    kF = np.zeros((4, 4, 4, 4))
    for j, k in itertools.product(range(3), repeat=2):
        v = -0.5 * kDE[j, k]
        kF[0, j + 1, 0, k + 1], kF[j + 1, 0, 0, k + 1] = v, -v
        kF[0, j + 1, k + 1, 0], kF[j + 1, 0, k + 1, 0] = -v, v
    kF[1:, 1:, 1:, 1:] = 0.5 * np.einsum("pqj,rsk,jk->pqrs", EPS, EPS, kHB)
    m = 0.5 * np.einsum("kpq,jk->jpq", EPS, kDB)  # k^{0jpq}
    for j, p, q in itertools.product(range(3), repeat=3):
        v = m[j, p, q]
        kF[0, j + 1, p + 1, q + 1], kF[j + 1, 0, p + 1, q + 1] = v, -v
        kF[p + 1, q + 1, 0, j + 1], kF[p + 1, q + 1, j + 1, 0] = v, -v
    return kF


def kappas_from_kf(kF):
    kDE = -2.0 * kF[0, 1:, 0, 1:]
    kHB = 0.5 * np.einsum("jpq,krs,pqrs->jk", EPS, EPS, kF[1:, 1:, 1:, 1:])
    kDB = np.einsum("kpq,jpq->jk", EPS, kF[0, 1:, 1:, 1:])
    return kDE, kHB, kDB, -kDB.T


def boost(beta):
    b = np.asarray(beta, dtype=float)
    b2 = b @ b
    g = 1.0 / np.sqrt(1.0 - b2)
    L = np.eye(4)
    L[0, 0], L[0, 1:], L[1:, 0] = g, -g * b, -g * b
    L[1:, 1:] += (g - 1.0) * np.outer(b, b) / b2
    return L


def boosted(kF, beta):
    L = boost(beta)
    return np.einsum("ka,lb,mc,nd,abcd->klmn", L, L, L, L, kF)


def _random_set(rng, scale):
    vals = check_values("sme", {k: scale * rng.normal() for k in SME_NAMES})
    e_minus, o_plus, k = sme_tensors(vals)
    return vals, e_minus, o_plus, k


def test_kf_construction_round_trips_and_has_the_symmetries():
    # Reference: the definitions in the module docstring (published decomposition).
    rng = np.random.default_rng(1)
    _, em, op, _ = _random_set(rng, 1.0)
    kF = kf_from_kappas(em, -em, op)
    assert np.allclose(kF, kF.transpose(2, 3, 0, 1), atol=0)  # pair symmetry
    assert np.allclose(kF, -kF.transpose(1, 0, 2, 3), atol=0)  # antisymmetric pairs
    assert np.allclose(kF + kF.transpose(0, 2, 3, 1) + kF.transpose(0, 3, 1, 2), 0, atol=1e-15)  # cyclic
    kDE, kHB, kDB, kHE = kappas_from_kf(kF)
    assert np.allclose(kDE, em) and np.allclose(kHB, -em) and np.allclose(kDB, op) and np.allclose(kHE, op)


def test_boosted_kappa_e_minus_is_the_traceless_part_of_the_model_tensor():
    # Reference: exact Lorentz boost of k_F (this file).  Residual is second order: ≲ 10 β²|κ|.
    rng = np.random.default_rng(2)
    for _ in range(5):
        vals, em, op, k = _random_set(rng, 1.0)
        beta = rng.normal(size=3)
        beta *= 1e-3 / np.linalg.norm(beta)
        kDE, kHB, kDB, kHE = kappas_from_kf(boosted(kf_from_kappas(em, -em, op), beta))
        em_lab = 0.5 * (kDE - kHB) - np.trace(kDE) / 3.0 * np.eye(3)
        K = tensor_for_velocity("sme", vals, beta)
        K_traceless = K - np.trace(K) / 3.0 * np.eye(3)
        first_order = np.abs(K - em).max()
        assert np.abs(em_lab - K_traceless).max() < 1e-2 * first_order
        # the opposite sign of the boost term is clearly excluded
        K_wrong = 2 * em - K
        assert np.abs(em_lab - (K_wrong - np.trace(K_wrong) / 3 * np.eye(3))).max() > 0.5 * first_order
        # no parity-even birefringent or parity-odd κ̃_o− part appears at first order
        assert np.abs(0.5 * (kDE + kHB)).max() < 1e-2 * first_order
        assert np.abs(0.5 * (kDB - kHE)).max() < 1e-2 * first_order
        # the isotropic part: κ̃_tr' = −(4/3) β⃗·k (derived in docs/sky.md)
        assert np.trace(kDE) / 3.0 == pytest.approx(-4.0 / 3.0 * (beta @ k), rel=1e-2)


def _cross(n):
    return np.array([[0.0, -n[2], n[1]], [n[2], 0.0, -n[0]], [-n[1], n[0], 0.0]])


def _two_way_speed(kF, n):
    """Two-way phase speed along n from the plane-wave dispersion of the constitutive relations."""
    kDE, kHB, kDB, kHE = kappas_from_kf(kF)
    N, I3, Z = _cross(n), np.eye(3), np.zeros((3, 3))
    # N(1+κ_HB)N E + v (N κ_HE + κ_DB N) E + v² (1+κ_DE) E = 0, linearised (companion form)
    M2, M1, M0 = I3 + kDE, N @ kHE + kDB @ N, N @ (I3 + kHB) @ N
    A = np.block([[Z, I3], [-np.linalg.solve(M2, M0), -np.linalg.solve(M2, M1)]])
    ev = np.linalg.eigvals(A).real
    forward, backward = ev[np.abs(ev - 1) < 0.5], -ev[np.abs(ev + 1) < 0.5]
    assert forward.size == 2 and backward.size == 2
    return 2.0 / (1.0 / forward.mean() + 1.0 / backward.mean())


def test_plane_wave_two_way_speeds_give_the_model_pair_signal():
    # Reference: numerical plane-wave dispersion in the boosted frame (this file).  Coefficients
    # 1e-6 and β = 1e-4; the parts linear in κ and odd/even in β are separated by sign flips, so
    # the remaining errors are O(β²) ≈ 1e-8 relative to the boost term and rounding (≈ 1e-5).
    rng = np.random.default_rng(3)
    vals, em, op, k = _random_set(rng, 1e-6)
    beta = rng.normal(size=3)
    beta *= 1e-4 / np.linalg.norm(beta)

    def pair(sk, sb, n1, n2):
        kF = boosted(kf_from_kappas(sk * em, -sk * em, sk * op), sb * beta)
        return _two_way_speed(kF, n1) - _two_way_speed(kF, n2)

    K_boost = np.outer(beta, k) + np.outer(k, beta)
    for _ in range(4):
        n1 = rng.normal(size=3)
        n1 /= np.linalg.norm(n1)
        n2 = rng.normal(size=3)
        n2 -= (n2 @ n1) * n1
        n2 /= np.linalg.norm(n2)
        lin = {sb: 0.5 * (pair(1, sb, n1, n2) - pair(-1, sb, n1, n2)) for sb in (1, -1)}
        odd, even = 0.5 * (lin[1] - lin[-1]), 0.5 * (lin[1] + lin[-1])
        assert odd == pytest.approx(0.5 * (n1 @ K_boost @ n1 - n2 @ K_boost @ n2), rel=1e-4)
        assert even == pytest.approx(0.5 * (n1 @ em @ n1 - n2 @ em @ n2), rel=1e-6)
        K = tensor_for_velocity("sme", vals, beta)
        assert pair(1, 1, n1, n2) == pytest.approx(0.5 * (n1 @ K @ n1 - n2 @ K @ n2), rel=1e-4)
        # one direction, isotropic part included: c₂(n) − 1 = β⃗·k + ½ n·K·n (docs/sky.md, section 4)
        one = {sk: _two_way_speed(boosted(kf_from_kappas(sk * em, -sk * em, sk * op), beta), n1) for sk in (1, -1)}
        assert 0.5 * (one[1] - one[-1]) == pytest.approx(beta @ k + 0.5 * n1 @ K @ n1, rel=1e-4)
