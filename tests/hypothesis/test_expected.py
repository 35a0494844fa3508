"""Tests for nullfit.hypothesis.expected: expected signal of a hypothesis for a scan."""

import json
import math
from types import SimpleNamespace

import numpy as np
import pytest

from nullfit.hypothesis.apparatus import Apparatus
from nullfit.core.conventions import SPEED_OF_LIGHT, amplitude_from_peak_to_peak
from nullfit.hypothesis.expected import ExpectedSignal, expected_for_scan, expected_signal
from nullfit.hypothesis.site import Site
from nullfit.hypothesis.velocities import CMBDipole, CustomVelocity, EarthOrbit, EarthRotation, LabWind

APP = Apparatus(11.0, 550e-9, name="invented bench")
J2000_UNIX = 946_728_000.0  # 2000-01-01T12:00:00Z
SIDEREAL_DAY_S = 86164.0905  # mean sidereal day (common practice)


# ---------------------------------------------------------------- lab-frame hypothesis
def test_lab_wind_needs_no_site_and_gives_trade_values():
    # Common practice: 11 m, 550 nm, 30 km/s -> peak-to-peak ≈ 0.40 fringe (amplitude ≈ 0.20).
    e = expected_signal(APP, velocity=LabWind(30e3, table_angle_deg=30.0))
    assert e.frame == "lab" and e.site is None
    assert e.peak_to_peak == pytest.approx(0.40, abs=0.005)
    assert e.amplitude == pytest.approx(e.peak_to_peak / 2, rel=1e-15)
    assert e.mean_amplitude == e.coherent_amplitude == APP.wind_amplitude(30e3)
    assert e.mean_peak_to_peak == e.coherent_peak_to_peak
    assert e.coherent_phase_deg == pytest.approx(30.0)
    assert e.coherent_c2 == pytest.approx(e.amplitude * math.cos(math.radians(60)))
    assert e.coherent_s2 == pytest.approx(e.amplitude * math.sin(math.radians(60)))


def test_ratio_forty_like_with_like():
    # Common practice: an observed (peak-to-peak) bound of 0.01 against 0.40 is a ratio of 40.
    e = expected_signal(APP, speed_m_s=30e3)  # lab wind, direction unspecified
    bound_amp = amplitude_from_peak_to_peak(0.01)
    assert e.ratio(bound_amp) == pytest.approx(40, abs=0.5)
    assert e.ratio(bound_amp) == pytest.approx(e.peak_to_peak / 0.01, rel=1e-12)
    assert e.coherent_phase_deg is None and e.coherent_c2 is None
    assert e.speed_bound(bound_amp) == pytest.approx(APP.speed_bound(bound_amp), rel=1e-12)
    assert e.rms_bound(e.amplitude) == pytest.approx(0.5)


def test_fractional_path_and_readout_sign():
    frac = Apparatus(None, None, signal="fractional", readout_sign=-1)
    e = expected_signal(frac, velocity="lab:speed=30000,angle=0")
    # fractional amplitude (v/c)²/2 for an orthogonal pair
    assert e.amplitude == pytest.approx(0.5 * (30e3 / SPEED_OF_LIGHT) ** 2, rel=1e-14)
    assert e.unit == "Δν/ν"
    # readout sign −1 flips (c₂, s₂): the maximum moves by 90° in table angle
    assert e.coherent_c2 == pytest.approx(-e.amplitude)
    assert e.coherent_phase_deg == pytest.approx(90.0)


def test_lab_wind_by_compass_azimuth_needs_mark():
    site = Site(50.0, 8.0, mark_azimuth_deg=100.0, table_sense="counterclockwise")
    e = expected_signal(APP, site, velocity=LabWind(1e4, azimuth_deg=70.0))
    assert e.coherent_phase_deg == pytest.approx(30.0)  # θ = mark − az for a counterclockwise table
    with pytest.raises(ValueError, match="mark"):
        expected_signal(APP, Site(50.0, 8.0), velocity=LabWind(1e4, azimuth_deg=70.0))


# ---------------------------------------------------------------- sky hypothesis, analytic cases
def test_equatorial_wind_over_a_sidereal_day_analytic():
    # Spherical astronomy (textbook hour-angle formulas): a direction at declination δ = 0 and
    # hour angle H has, at latitude φ, east = −sin H, north = −sin φ cos H.  Averaging
    # (north + i·east)² over a full turn of H: ⟨north²⟩ = sin²φ/2, ⟨east²⟩ = 1/2, cross term 0.
    # At φ = 45°, mark north, clockwise table:
    #   mean amplitude       = k v² (sin²φ + 1)/2 = 3/4 k v²
    #   coherent (c₂, s₂)    = k v² (−cos²φ/2, 0) -> amplitude 1/4 k v², phase 90° (east–west axis)
    # Near J2000 the ICRS equator is the equator of date to < 20″ ≈ 1e-4 rad (nutation), hence rel 1e-4.
    v = 30e3
    k_v2 = APP.wind_amplitude(v)
    site = Site(45.0, 0.0, mark_azimuth_deg=0.0)
    rel = np.linspace(0.0, SIDEREAL_DAY_S, 2000, endpoint=False)
    e = expected_signal(APP, site, velocity=CustomVelocity(v, ra_deg=123.0, dec_deg=0.0), epoch_unix=J2000_UNIX, time_s=rel)
    assert e.mean_amplitude == pytest.approx(0.75 * k_v2, rel=1e-4)
    assert e.coherent_amplitude == pytest.approx(0.25 * k_v2, rel=1e-4)
    assert e.coherent_phase_deg == pytest.approx(90.0, abs=0.01)
    assert e.coherence == pytest.approx(1 / 3, rel=2e-4)
    # the mark pointing east turns the table frame by 90°
    e_east = expected_signal(APP, Site(45.0, 0.0, mark_azimuth_deg=90.0), velocity=CustomVelocity(v, ra_deg=123.0, dec_deg=0.0),
                             epoch_unix=J2000_UNIX, time_s=rel)
    assert min(e_east.coherent_phase_deg, 180 - e_east.coherent_phase_deg) < 0.01


def test_polar_wind_does_not_turn():
    # A velocity toward the celestial pole has v_h = v cos φ along the meridian at all times:
    # coherent and mean amplitudes coincide, phase 0 with the mark north.
    site = Site(30.0, 50.0, mark_azimuth_deg=0.0)
    rel = np.linspace(0.0, 43200.0, 300)
    e = expected_signal(APP, site, velocity=CustomVelocity(1e4, ra_deg=0.0, dec_deg=90.0), epoch_unix=J2000_UNIX, time_s=rel)
    assert e.coherence == pytest.approx(1.0, abs=1e-6)
    assert e.speed_h_mean_m_s == pytest.approx(1e4 * math.cos(math.radians(30.0)), rel=1e-4)
    assert min(e.coherent_phase_deg, 180 - e.coherent_phase_deg) < 0.01


def test_coherent_never_exceeds_mean_and_ignores_the_mark():
    rng = np.random.default_rng(3)
    for _ in range(4):
        lat, lon = rng.uniform(-60, 60), rng.uniform(-180, 180)
        start = 1.6e9 + rng.uniform(0, 2e8)
        rel = np.linspace(0.0, rng.uniform(600.0, 2 * 86400.0), 400)
        vel = CustomVelocity(rng.uniform(1e3, 4e5), ra_deg=rng.uniform(0, 360), dec_deg=rng.uniform(-90, 90))
        amps = []
        for site in (Site(lat, lon), Site(lat, lon, mark_azimuth_deg=rng.uniform(0, 360)),
                     Site(lat, lon, mark_azimuth_deg=rng.uniform(0, 360), table_sense="counterclockwise")):
            e = expected_signal(APP, site, velocity=vel, epoch_unix=start, time_s=rel)
            assert e.coherent_amplitude <= e.mean_amplitude * (1 + 1e-12)  # triangle inequality
            assert e.amplitude_min <= e.mean_amplitude <= e.amplitude_max
            amps.append(e.coherent_amplitude)
        # |⟨A e^{2iφ}⟩| does not depend on where the mark points or which way the table turns
        np.testing.assert_allclose(amps, amps[0], rtol=1e-10)


def test_no_mark_gives_amplitudes_but_no_phase():
    rel = np.linspace(0, 3600, 50)
    e = expected_signal(APP, Site(40.0, 10.0), velocity="cmb", epoch_unix=1.7e9, time_s=rel)
    assert e.coherent_amplitude > 0 and e.coherent_phase_deg is None and e.coherent_c2 is None
    assert "no table-frame phase" in str(e)


# ---------------------------------------------------------------- time handling and options
def test_epoch_plus_relative_matches_absolute_and_nodes_match_exact():
    site = Site(52.0, 13.0, 40.0, mark_azimuth_deg=10.0)
    epoch = 1_780_000_000.0
    rel = np.arange(0.0, 86400.0, 40.0)  # 2160 samples, more than the 1441 default nodes
    v = CMBDipole() + EarthOrbit() + EarthRotation()
    a = expected_signal(APP, site, epoch + rel, v)
    b = expected_signal(APP, site, velocity=v, epoch_unix=epoch, time_s=rel)
    exact = expected_signal(APP, site, velocity=v, epoch_unix=epoch, time_s=rel, node_spacing_s=None)
    assert a.coherent_amplitude == pytest.approx(b.coherent_amplitude, rel=1e-9)
    assert b.n_nodes < exact.n_nodes == rel.size
    assert b.coherent_amplitude == pytest.approx(exact.coherent_amplitude, rel=1e-5)
    assert b.mean_amplitude == pytest.approx(exact.mean_amplitude, rel=1e-5)
    assert b.coherent_phase_deg == pytest.approx(exact.coherent_phase_deg, abs=1e-3)
    assert b.duration_s == pytest.approx(rel[-1])


def test_speed_override_scales_as_speed_squared():
    site = Site(20.0, -100.0, mark_azimuth_deg=0.0)
    rel = np.linspace(0, 7200, 100)
    e1 = expected_signal(APP, site, velocity="cmb", speed_m_s=30e3, epoch_unix=1.75e9, time_s=rel)
    e2 = expected_signal(APP, site, velocity="cmb", speed_m_s=60e3, epoch_unix=1.75e9, time_s=rel)
    assert e1.speed_mean_m_s == pytest.approx(30e3, rel=1e-12) and e1.speed_override_m_s == 30e3
    assert e2.coherent_amplitude == pytest.approx(4 * e1.coherent_amplitude, rel=1e-12)
    assert e2.coherent_phase_deg == pytest.approx(e1.coherent_phase_deg, abs=1e-9)
    # speed bound keeps the direction history: the expected amplitude bounds the speed at itself
    assert e1.speed_bound(e1.coherent_amplitude) == pytest.approx(30e3, rel=1e-12)
    assert e1.speed_bound(e2.coherent_amplitude) == pytest.approx(60e3, rel=1e-12)


def test_sky_hypothesis_needs_site_and_time():
    with pytest.raises(ValueError, match="needs a Site"):
        expected_signal(APP, None, 1.7e9, "orbital")
    with pytest.raises(ValueError, match="absolute times"):
        expected_signal(APP, Site(0.0, 0.0), velocity="orbital")
    with pytest.raises(ValueError, match="speed"):
        expected_signal(APP, velocity="lab:angle=0")


def test_summary_and_json_label_amplitude_and_peak_to_peak():
    site = Site(52.0, 13.0, mark_azimuth_deg=10.0, name="invented site")
    e = expected_signal(APP, site, velocity="orbital", epoch_unix=1.78e9, time_s=np.linspace(0, 3600, 20))
    assert isinstance(e, ExpectedSignal)
    text = str(e)
    assert "peak-to-peak" in text and "amplitude" in text and "invented site" in text
    d = json.loads(e.to_json())
    assert d["amplitude"] == pytest.approx(e.coherent_amplitude)
    assert d["peak_to_peak"] == pytest.approx(2 * e.coherent_amplitude)
    assert d["mean_peak_to_peak"] == pytest.approx(2 * e.mean_amplitude)
    assert d["start_utc"].endswith("Z") and d["site"]["name"] == "invented site"
    assert "<table>" in e._repr_html_()


# ---------------------------------------------------------------- scan interface
def _fake_scan(epoch, apparatus=None, site=None):
    # stands in for nullfit.reading.scan.Scan: time relative to epoch_unix, manifest tables in meta
    meta = SimpleNamespace(apparatus=apparatus or {}, site=site or {})
    return SimpleNamespace(time=np.linspace(0.0, 1800.0, 200), epoch_unix=epoch, meta=meta)


def test_expected_for_scan_reads_manifest_tables():
    app_map = {"arm_length_m": 11.0, "wavelength_m": 5.5e-7, "folds": 8, "physical_arm_m": 1.375}
    site_map = {"latitude_deg": 52.0, "longitude_deg": 13.0, "mark_azimuth_deg": 10.0}
    scan = _fake_scan(1_780_000_000, app_map, site_map)
    e = expected_for_scan(scan, "orbital")
    ref = expected_signal(Apparatus.from_mapping(app_map), Site.from_mapping(site_map), velocity="orbital",
                          epoch_unix=1_780_000_000, time_s=scan.time)
    assert e.coherent_amplitude == ref.coherent_amplitude and e.coherent_phase_deg == ref.coherent_phase_deg
    assert e.start_unix == 1_780_000_000


def test_expected_for_scan_lab_wind_without_epoch_or_site():
    scan = _fake_scan(None, {"arm_length_m": 1.2, "wavelength_m": 5.5e-7})
    e = expected_for_scan(scan, speed_m_s=30e3)
    # 2 L v²/(λ c²) computed here from the formula (docs/conventions.md), with c exact (SI):
    exact = 2 * 1.2 * 30e3 ** 2 / (5.5e-7 * 299_792_458.0 ** 2)  # 0.04370 fringe
    assert e.peak_to_peak == pytest.approx(exact, rel=1e-12)
    # the value quoted in textbooks, to one significant digit (common practice): 0.04 fringe
    assert round(e.peak_to_peak, 2) == 0.04
    assert e.start_unix is None and e.duration_s == pytest.approx(1800.0) and e.n_times == 200
    with pytest.raises(ValueError, match="epoch_unix"):
        expected_for_scan(scan, "cmb", site=Site(0.0, 0.0))
    with pytest.raises(ValueError, match="no apparatus"):
        expected_for_scan(_fake_scan(None), speed_m_s=30e3)


def test_expected_for_scan_signal_unit_must_match():
    app_map = {"arm_length_m": 1.2, "wavelength_m": 5.5e-7}
    scan = _fake_scan(None, app_map)
    scan.unit = "fractional"
    # a manifest table without "signal" takes the scan's unit: (v/c)²/2
    e = expected_for_scan(scan, speed_m_s=30e3)
    assert e.unit == "Δν/ν" and e.amplitude == pytest.approx(0.5 * (30e3 / SPEED_OF_LIGHT) ** 2)
    with pytest.raises(ValueError, match="'fractional' but the apparatus predicts a 'fringe'"):
        expected_for_scan(scan, speed_m_s=30e3, apparatus=Apparatus(1.2, 5.5e-7))


def test_expected_for_scan_with_a_real_scan_object():
    from nullfit.reading.manifest import Manifest
    from nullfit.reading.scan import Scan

    t = np.arange(0.0, 600.0, 0.5)
    meta = Manifest(apparatus={"arm_length_m": 11.0, "wavelength_m": 5.5e-7},
                    site={"latitude_deg": 52.0, "longitude_deg": 13.0, "mark_azimuth_deg": 10.0})
    signal = np.random.default_rng(5).normal(size=t.size)
    scan = Scan.from_arrays(t, np.mod(t * 6.0, 360.0), signal, epoch_unix=1_780_000_000, meta=meta)
    e = expected_for_scan(scan, "cmb")
    ref = expected_signal(Apparatus(11.0, 5.5e-7), Site(52.0, 13.0, mark_azimuth_deg=10.0), velocity="cmb",
                          epoch_unix=1_780_000_000, time_s=t)
    assert e.coherent_amplitude == pytest.approx(ref.coherent_amplitude, rel=1e-12)
