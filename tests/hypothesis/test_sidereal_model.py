"""Tests of the sidereal quadratures (nullfit.hypothesis.sidereal): closed form vs numeric
projection, the geometry that holds for any sun-fixed tensor, the linear design, parameters and
result objects.  Conventions and derivations: docs/sky.md.  Every check value names its source.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from nullfit.core.conventions import SPEED_OF_LIGHT
from nullfit.hypothesis import sidereal as sd
from nullfit.hypothesis.offline import offline_astropy

LATITUDES = (0.0, 23.0, 46.2, -33.9, 78.0)
PHASES_DEG = (0.0, 61.0, 250.0)


def _random_sme(rng, scale=1e-15):
    return {k: scale * rng.normal() for k in sd.SME_NAMES}


def _rel_diff(a: dict, b: dict) -> float:
    scale = max(abs(v) for v in a.values())
    return max(abs(a[k] - b[k]) for k in a) / scale


def _unix(iso: str) -> float:
    from astropy.time import Time

    with offline_astropy():
        return float(Time(iso, scale="utc").unix)


# ----------------------------------------------------------------------------- closed form vs numeric
@pytest.mark.parametrize("rotation", [False, True])
def test_sme_closed_form_matches_numeric_grid(rotation):
    # Reference: direct evaluation of ½(n₁·K_lab·n₁ − n₂·K_lab·n₂) on a (θ_S, w) grid, projected on
    # the harmonics (independent numeric route); agreement to 1e-10 relative.
    rng = np.random.default_rng(20240611)
    for lat in LATITUDES:
        for W in PHASES_DEG:
            p = _random_sme(rng)
            a = sd.quadratures("sme", p, latitude_deg=lat, annual_phase_deg=W, rotation=rotation)
            b = sd.quadratures("sme", p, latitude_deg=lat, annual_phase_deg=W, rotation=rotation, method="numeric")
            assert _rel_diff(a, b) < 1e-10, (lat, W)


@pytest.mark.parametrize("rotation", [False, True])
def test_rms_closed_form_matches_numeric_grid(rotation):
    # Reference: same numeric route as above, RMS tensor −2 P_MM β⃗β⃗ᵀ with the CMB dipole (+ orbit).
    for lat in LATITUDES:
        for W in PHASES_DEG:
            for orbit in (False, True):
                kw = dict(latitude_deg=lat, annual_phase_deg=W, orbit=orbit, rotation=rotation)
                a = sd.quadratures("rms", {"P_MM": 3e-9}, **kw)
                b = sd.quadratures("rms", {"P_MM": 3e-9}, method="numeric", **kw)
                assert _rel_diff(a, b) < 1e-10, (lat, W, orbit)


def test_closed_form_matches_numeric_with_precession():
    # Reference: numeric route with the J2000 → mean-of-date rotation applied to the velocity.
    t = _unix("2024-09-01T12:00:00")
    rng = np.random.default_rng(7)
    p = _random_sme(rng)
    for model, params in (("sme", p), ("rms", {"P_MM": 1e-8})):
        kw = dict(latitude_deg=52.4, annual_phase_deg=163.0, rotation=True, precess_to_unix=t)
        a = sd.quadratures(model, params, **kw)
        b = sd.quadratures(model, params, method="numeric", **kw)
        assert _rel_diff(a, b) < 1e-10


# ----------------------------------------------------------------------------- geometry of the quadratures
def test_geometric_ratios_for_any_sun_fixed_tensor():
    # Reference: from the closed form (docs/sky.md, "Closed form"): for any sun-fixed K,
    # C_s2/B_c2 = (1 + cos²χ)/(2 cos χ) = −C_c2/B_s2, C_c1/B_s1 = −cos χ, C_s1/B_c1 = cos χ.
    # Checked here on the numeric route, which does not use the closed form.
    rng = np.random.default_rng(11)
    for lat in (12.0, 46.2, -33.9, 70.0):
        chi = math.radians(90 - lat)
        g2 = (1 + math.cos(chi) ** 2) / (2 * math.cos(chi))
        for W in (0.0, 130.0):
            for model, p in (("sme", _random_sme(rng)), ("rms", {"P_MM": 1e-9})):
                q = sd.quadratures(model, p, latitude_deg=lat, annual_phase_deg=W, method="numeric")
                assert q["Cs2"] / q["Bc2"] == pytest.approx(g2, rel=1e-9)
                assert q["Cc2"] / q["Bs2"] == pytest.approx(-g2, rel=1e-9)
                assert q["Cc1"] / q["Bs1"] == pytest.approx(-math.cos(chi), rel=1e-9)
                assert q["Cs1"] / q["Bc1"] == pytest.approx(math.cos(chi), rel=1e-9)
                assert abs(q["B0"]) < 1e-12 * max(abs(v) for v in q.values())


def test_velocity_along_the_axis_leaves_only_C0():
    # Reference: numeric route; K ∝ Ẑ Ẑᵀ is invariant under the sidereal rotation (docs/sky.md).
    q = sd.quadratures("rms", {"P_MM": 0.5}, latitude_deg=40.0, velocity=[0, 0, 3e5], orbit=False,
                       method="numeric")
    expected_c0 = 0.25 * math.sin(math.radians(50.0)) ** 2 * 2 * (-2 * 0.5 * (3e5 / SPEED_OF_LIGHT) ** 2)
    assert q["C0"] == pytest.approx(expected_c0, rel=1e-12)
    for k, v in q.items():
        if k != "C0":
            assert abs(v) < 1e-12 * abs(q["C0"]), k


def test_equator_kills_2w_of_B_and_1w_of_C():
    # Reference: numeric route at χ = 90°: B's 2w terms carry cos χ and C's 1w terms sin 2χ.
    rng = np.random.default_rng(5)
    for model, p in (("sme", _random_sme(rng)), ("rms", {"P_MM": 1e-9})):
        q = sd.quadratures(model, p, latitude_deg=0.0, annual_phase_deg=40.0, method="numeric")
        scale = max(abs(v) for v in q.values())
        for k in ("Bs2", "Bc2", "Cs1", "Cc1"):
            assert abs(q[k]) < 1e-12 * scale, (model, k)
        for k in ("Cs2", "Bs1", "Bc1"):
            assert abs(q[k]) > 1e-3 * scale, (model, k)
    # With the lab-fixed Earth-rotation velocity, C keeps 1w terms at the equator: C_s1 = A_X,
    # C_c1 = −A_Y with A = −2 P_MM u β⃗_s (docs/sky.md, "Earth rotation"), checked on the numeric route.
    beta_s = np.array([1e-3, -2e-3, 0.5e-3])
    q = sd.quadratures("rms", {"P_MM": 0.5}, latitude_deg=0.0, velocity=beta_s * SPEED_OF_LIGHT, orbit=False,
                       rotation=True, method="numeric")
    A = -2 * 0.5 * (sd.rotation_speed_m_s(0.0) / SPEED_OF_LIGHT) * beta_s
    assert q["Cs1"] == pytest.approx(A[0], rel=1e-9) and q["Cc1"] == pytest.approx(-A[1], rel=1e-9)


# ----------------------------------------------------------------------------- design, parameters, results
def test_design_is_linear_and_annual_terms_rebuild_it():
    # Reference: the quadratures function itself (linearity), evaluated at random parameters and W.
    rng = np.random.default_rng(23)
    for model in ("sme", "rms"):
        ad = sd.annual_design(model, latitude_deg=33.3)
        for W in rng.uniform(0, 360, 3):
            d = sd.design_matrix(model, latitude_deg=33.3, annual_phase_deg=W)
            assert d.matrix.shape == (10, 8 if model == "sme" else 1)
            p = _random_sme(rng) if model == "sme" else {"P_MM": 1e-9}
            q = sd.quadratures(model, p, latitude_deg=33.3, annual_phase_deg=W)
            assert np.allclose(d.predict(p), [q[k] for k in sd.QUADRATURE_KEYS], rtol=1e-12, atol=1e-30)
            assert np.allclose(ad.at(W), d.matrix, rtol=1e-12, atol=1e-14 * np.abs(d.matrix).max())
        if model == "sme":  # linear in β⃗⊕: no 2W sidebands (docs/sky.md)
            assert np.abs(ad.terms["s2W"]).max() < 1e-14 and np.abs(ad.terms["c2W"]).max() < 1e-14
        else:  # quadratic in the velocity: 2W sidebands from the orbital speed alone
            assert np.abs(ad.terms["c2W"]).max() > 0


def test_sme_design_matches_the_formulas_written_out_in_the_docs():
    # Reference: docs/sky.md section 5, "SME written out" — hand-expanded expressions, evaluated
    # here independently of the code's tensor route.
    lat, W_deg = 38.0, 117.0
    chi, W, eta, b = math.radians(90 - lat), math.radians(W_deg), math.radians(sd.OBLIQUITY_DEG), sd.ORBITAL_BETA
    sc, cc, s2c, g = math.sin(chi), math.cos(chi), math.sin(2 * chi), 1 + math.cos(chi) ** 2
    sW, cW, se, ce = math.sin(W), math.cos(W), math.sin(eta), math.cos(eta)
    M = sd.design_matrix("sme", latitude_deg=lat, annual_phase_deg=W_deg).matrix
    col = {name: M[:, j] for j, name in enumerate(sd.SME_NAMES)}
    row = {k: i for i, k in enumerate(sd.QUADRATURE_KEYS)}
    # static part
    assert col["e_ZZ"][row["C0"]] == pytest.approx(0.75 * sc**2)
    assert col["e_YZ"][row["Cs1"]] == pytest.approx(-0.5 * s2c)
    assert col["e_XZ"][row["Cc1"]] == pytest.approx(-0.5 * s2c)
    assert col["e_XY"][row["Cs2"]] == pytest.approx(0.5 * g)
    assert col["e_XX-YY"][row["Cc2"]] == pytest.approx(0.25 * g)
    assert col["e_XZ"][row["Bs1"]] == pytest.approx(sc)
    assert col["e_YZ"][row["Bc1"]] == pytest.approx(-sc)
    assert col["e_XX-YY"][row["Bs2"]] == pytest.approx(-0.5 * cc)
    assert col["e_XY"][row["Bc2"]] == pytest.approx(cc)
    # boost part, per unit o_XY, o_XZ, o_YZ
    kxy = {"o_XY": 0.0, "o_XZ": b * sW, "o_YZ": b * ce * cW}
    kxz = {"o_XY": -b * sW, "o_XZ": 0.0, "o_YZ": b * se * cW}
    kyz = {"o_XY": b * ce * cW, "o_XZ": -b * se * cW, "o_YZ": 0.0}
    dxy = {"o_XY": 0.0, "o_XZ": 2 * b * ce * cW, "o_YZ": -2 * b * sW}
    zz = {"o_XY": 4 * b * se * cW, "o_XZ": 2 * b * ce * cW, "o_YZ": 2 * b * sW}
    for o in ("o_XY", "o_XZ", "o_YZ"):
        expected = {"C0": 0.25 * sc**2 * zz[o], "Cs1": -0.5 * s2c * kyz[o], "Cc1": -0.5 * s2c * kxz[o],
                    "Cs2": 0.5 * g * kxy[o], "Cc2": 0.25 * g * dxy[o], "B0": 0.0, "Bs1": sc * kxz[o],
                    "Bc1": -sc * kyz[o], "Bs2": -0.5 * cc * dxy[o], "Bc2": cc * kxy[o]}
        for k, v in expected.items():
            assert col[o][row[k]] == pytest.approx(v, rel=1e-12, abs=1e-20), (o, k)


def test_parameters_missing_are_zero_and_unknown_raise():
    q0 = sd.quadratures("sme", {"e_ZZ": 1e-16}, latitude_deg=30.0)
    q1 = sd.quadratures("sme", {k: (1e-16 if k == "e_ZZ" else 0.0) for k in sd.SME_NAMES}, latitude_deg=30.0)
    assert q0 == q1
    with pytest.raises(ValueError, match="e_XX"):
        sd.quadratures("sme", {"e_XX": 1.0}, latitude_deg=30.0)
    with pytest.raises(ValueError, match="P_MM"):
        sd.quadratures("rms", {"P": 1.0}, latitude_deg=30.0)
    with pytest.raises(ValueError, match="model"):
        sd.quadratures("sm", {}, latitude_deg=30.0)
    assert sd.SkyParameters.sme(e_XX_YY=2.0)["e_XX-YY"] == 2.0


def test_traceless_sme_tensor_from_e_xx_minus_yy_and_e_zz():
    # Reference: definition (docs/sky.md): κ̃^{XX} − κ̃^{YY} = e_XX-YY, κ̃^{ZZ} = e_ZZ, trace 0.
    from nullfit.hypothesis.sidereal.parameters import check_values, sme_tensors

    em, op, k = sme_tensors(check_values("sme", {"e_XX-YY": 3.0, "e_ZZ": 1.0, "o_XY": 2.0}))
    assert np.trace(em) == 0 and em[0, 0] - em[1, 1] == 3.0 and em[2, 2] == 1.0
    assert np.allclose(op, -op.T) and op[0, 1] == 2.0 and np.allclose(k, [0, 0, -2.0])


def test_result_objects_render_and_are_frozen():
    params = sd.SkyParameters.rms(1e-9)
    q = sd.Quadratures.compute(params, latitude_deg=45.0, annual_phase_deg=10.0)
    text, html = str(q), q._repr_html_()
    for key in sd.QUADRATURE_KEYS:
        assert key in text and key in html
    data = json.loads(q.to_json())
    assert data["quadratures"]["C0"] == pytest.approx(q["C0"])
    with pytest.raises(AttributeError):
        q.latitude_deg = 0.0  # type: ignore[misc]
    assert "P_MM" in str(params)
    d = sd.design_matrix("sme", latitude_deg=45.0)
    assert "e_XY" in str(d) and not d.matrix.flags.writeable
