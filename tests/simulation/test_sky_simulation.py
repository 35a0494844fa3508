"""Sky signals in simulated scans and campaigns: the injected signal against a log built by hand
from the arms' compass azimuths, schedules, reproducibility, metadata, and the per-turn shortcut
against the demodulated per-reading route.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from nullfit.campaign.sky_simulate import simulate_sky_turns
from nullfit.campaign.turn_table import TurnTable
from nullfit.hypothesis import sidereal as sd
from nullfit.hypothesis.apparatus import Apparatus
from nullfit.hypothesis.site import Site
from nullfit.simulation.scans import simulate_scan
from nullfit.simulation.sky import campaign_schedule, inject_sky, simulate_sky_campaign

TRUTH = {"e_XY": 3e-16, "e_XZ": -2e-16, "e_YZ": 1e-16, "e_XX-YY": 4e-16, "o_XY": 2e-12, "o_XZ": -1e-12,
         "o_YZ": 3e-12}


def _hand_built_log(scan, site, app, params):
    """The log of a pair with arm 1 at compass azimuth α = m ± θ (Site.azimuth_deg, the project's
    compass convention) and arm 2 at α + 90°: ½(n₁·K·n₁ − n₂·K·n₂) with the horizontal lab tensor
    K = [[C, B], [B, −C]] in (south, east) components (B = K_xy, C = ½(K_xx − K_yy), docs/sky.md),
    n(α) = (−cos α, sin α); then −readout_sign × (2L/λ for fringes)."""
    sig = sd.sidereal_signal("sme", params, site=site, epoch_unix=scan.epoch_unix, time_s=scan.time)
    a = np.radians(site.azimuth_deg(np.degrees(scan.angle)))
    n1 = np.stack([-np.cos(a), np.sin(a)], axis=-1)
    n2 = np.stack([-np.cos(a + np.pi / 2), np.sin(a + np.pi / 2)], axis=-1)
    K = np.stack([np.stack([sig.C, sig.B], -1), np.stack([sig.B, -sig.C], -1)], -2)
    pair = 0.5 * (np.einsum("ni,nij,nj->n", n1, K, n1) - np.einsum("ni,nij,nj->n", n2, K, n2))
    unit = 2 * app.arm_length_m / app.wavelength_m if app.signal == "fringe" else 1.0
    return -app.readout_sign * unit * pair


@pytest.mark.parametrize("site,app", [
    (Site(58.391, 13.845, mark_azimuth_deg=23.5, table_sense="counterclockwise"),
     Apparatus(None, None, signal="fractional", readout_sign=-1)),
    (Site(-33.0, 151.0, mark_azimuth_deg=200.0, table_sense="clockwise"),
     Apparatus(10.4, 5.32e-7, signal="fringe", readout_sign=1)),
])
def test_injected_signal_equals_a_log_built_from_the_arm_azimuths(site, app):
    scan, _ = simulate_scan(n_turns=6, period_s=400.0, samples_per_turn=24, noise=None, drift={"slope": 1e-6}, signal_unit=app.signal,
                            epoch_unix=1_780_000_000, sense=-1, start_angle_deg=30.0, rng=1)
    out, sky = inject_sky(scan, "sme", TRUTH, site=site, apparatus=app, run_id="X1")
    ref = _hand_built_log(scan, site, app, TRUTH)
    assert sky == pytest.approx(ref, rel=1e-9, abs=1e-12 * np.abs(ref).max())
    assert out.signal == pytest.approx(scan.signal + ref, rel=1e-9, abs=1e-12 * np.abs(ref).max())
    assert out.meta.run_id == "X1"
    assert Site.from_mapping(out.meta.site) == site
    assert Apparatus.from_mapping(out.meta.apparatus) == app


def test_injection_refuses_what_it_cannot_do():
    site = Site(50.0, 8.0, mark_azimuth_deg=10.0)
    app = Apparatus(None, None, signal="fractional", readout_sign=-1)
    scan, _ = simulate_scan(n_turns=2, epoch_unix=None, signal_unit="fractional", rng=1)
    with pytest.raises(ValueError, match="absolute time"):
        inject_sky(scan, "sme", TRUTH, site=site, apparatus=app)
    scan, _ = simulate_scan(n_turns=2, signal_unit="fringe", rng=1)
    with pytest.raises(ValueError, match="fringe"):
        inject_sky(scan, "sme", TRUTH, site=site, apparatus=app)
    with pytest.raises(ValueError, match="mark"):
        inject_sky(scan, "sme", TRUTH, site=Site(50.0, 8.0), apparatus=Apparatus(1.0, 1e-6))


def test_schedules():
    days = campaign_schedule("days", n_runs=12, span_days=365.0, start_unix=1_767_571_200)
    starts = np.array([r.start_unix for r in days])
    assert np.allclose(np.diff(starts), 365.0 * 86400 / 12, atol=1.0)
    assert all(r.duration_s == 86400.0 for r in days) and len({r.run_id for r in days}) == 12
    t0 = 1_767_571_200
    sc = campaign_schedule("scattered", n_runs=50, span_days=365.0, start_unix=t0, rng=5)
    slot = 365.0 * 86400 / 50
    for i, r in enumerate(sc):  # one run inside each slot
        assert t0 + i * slot - 1 <= r.start_unix <= r.start_unix + r.duration_s <= t0 + (i + 1) * slot + 1
        assert r.duration_s == 4 * 3600.0
    ends = np.array([r.start_unix + r.duration_s for r in sc])
    assert np.all(ends[:-1] <= np.array([r.start_unix for r in sc])[1:])
    assert sc == campaign_schedule("scattered", n_runs=50, span_days=365.0, start_unix=t0, rng=5)
    # runs scattered over the year cover the solar time of day roughly evenly
    hours = np.array([(r.start_unix % 86400) / 3600 for r in sc])
    assert np.histogram(hours, bins=4, range=(0, 24))[0].min() >= 5
    with pytest.raises(ValueError, match="fit"):
        campaign_schedule("days", n_runs=400, span_days=365.0)


def test_campaign_is_reproducible_and_its_manifests_reach_the_turn_table():
    site = Site(58.391, 13.845, mark_azimuth_deg=23.5, table_sense="ccw")
    app = Apparatus(None, None, signal="fractional", readout_sign=-1)
    sch = campaign_schedule("scattered", n_runs=3, span_days=30.0, run_hours=2.0, rng=2)
    kw = dict(site=site, apparatus=app, schedule=sch, period_s=600.0, samples_per_turn=12, sigma=1e-16,
              lab_amplitude=5e-16)
    a, ta = simulate_sky_campaign("sme", TRUTH, rng=9, **kw)
    b, tb = simulate_sky_campaign("sme", TRUTH, rng=9, **kw)
    assert all(np.array_equal(x.signal, y.signal) for x, y in zip(a, b))
    assert ta.seed == 9 and set(ta.lab_terms) == {r.run_id for r in sch}
    table = TurnTable.from_scans(a)
    for r in sch:
        meta = table.runs[r.run_id]
        assert Site.from_mapping(meta["site"]) == site
        assert meta["epoch_unix"] == r.start_unix
    assert ta.to_dict()["parameters"]["o_YZ"] == TRUTH["o_YZ"]
    assert "SYNTHETIC" in str(ta)


def test_per_turn_shortcut_matches_the_demodulated_per_reading_route():
    # The per-turn table drawn from the model (no noise) against the per-turn table demodulated from
    # noise-free per-reading logs of the same runs: equal to the turn-average error (2ωT)²/24 ≈ 1e-4 of
    # the amplitude for 5-minute turns (module docstring of sky_simulate), plus the ns rounding of times.
    site = Site(58.391, 13.845, mark_azimuth_deg=23.5, table_sense="ccw")
    app = Apparatus(0.2, 1.064e-6, signal="fringe", readout_sign=1)
    sch = campaign_schedule("days", n_runs=2, span_days=100.0, run_hours=3.0)
    scans, _ = simulate_sky_campaign("sme", TRUTH, site=site, apparatus=app, schedule=sch, period_s=300.0,
                                     samples_per_turn=32, noise=None, sigma=0.0,
                                     drift={"slope": 1e-9}, rng=1)
    per_reading = TurnTable.from_scans(scans, harmonics=(2,)).frame
    shortcut, truth = simulate_sky_turns("sme", TRUTH, site=site, apparatus=app, schedule=sch, turn_period_s=300.0,
                                         sigma_turn=1e-30, rng=1)
    f = shortcut.frame
    assert len(f) == len(per_reading)
    # mid times: the per-reading turn spans its first to last reading (31 of 32 steps)
    step_ns = 300e9 / 32
    assert np.abs(f["t_mid_ns"].to_numpy() - per_reading["t_mid_ns"].to_numpy() - step_ns / 2).max() < 2
    amp = np.hypot(f["c2"], f["s2"]).max()
    for col in ("c2", "s2"):
        assert np.abs(f[col].to_numpy() - per_reading[col].to_numpy()).max() < 3e-3 * amp
    assert truth.kind == "per-turn" and shortcut.meta["settings"]["seed"] == 1
    assert math.isnan(f["resid_rms"].iloc[0])
