"""Tests for nullfit.sky: sites, sidereal time, velocity presets, horizon projection, offline astropy."""

import math
import socket
import warnings

import numpy as np
import pytest

import astropy.units as u
from astropy.coordinates import AltAz, EarthLocation, SkyCoord
from astropy.time import Time

from nullfit.hypothesis.offline import EarthOrientationWarning, offline_astropy
from nullfit.hypothesis.apparatus import Apparatus
from nullfit.hypothesis.earth import EarthOrientation, sidereal_time_deg
from nullfit.hypothesis.horizontal import horizontal_velocity
from nullfit.hypothesis.site import Site
from nullfit.hypothesis.velocities import (CMBDipole, CustomVelocity, EarthOrbit, EarthRotation, LabWind,
                                           VelocitySum, parse_velocity)

ARCSEC = 1.0 / 3600.0


def _hms_deg(h, m, s):
    return (h + m / 60 + s / 3600) * 15.0


# ---------------------------------------------------------------- sidereal time
def test_gmst_j2000():
    # GMST at J2000.0 (JD 2451545.0 UT1) = 280.46061837° (IAU 1982 GMST formula; Meeus,
    # Astronomical Algorithms (1998), eq. 12.4).
    t = Time(2451545.0, format="jd", scale="ut1")
    assert sidereal_time_deg(t, kind="mean", model="IAU1982") == pytest.approx(280.46061837, abs=1e-7)


@pytest.mark.parametrize(
    "iso, expected_deg",
    [
        # Meeus, Astronomical Algorithms (1998), Example 12.a: 1987-04-10 0h UT -> 13h10m46.3668s
        ("1987-04-10 00:00:00", _hms_deg(13, 10, 46.3668)),
        # Meeus (1998), Example 12.b: 1987-04-10 19h21m00s UT -> 8h34m57.0896s (recalled from memory)
        ("1987-04-10 19:21:00", _hms_deg(8, 34, 57.0896)),
    ],
)
def test_gmst_meeus_examples(iso, expected_deg):
    got = sidereal_time_deg(Time(iso, scale="ut1"), kind="mean", model="IAU1982")
    assert got == pytest.approx(expected_deg, abs=2e-4 / 3600 * 15)  # 0.2 ms of time


def test_local_sidereal_time_is_east_positive_and_matches_astropy():
    rng = np.random.default_rng(20240601)
    unix = rng.uniform(Time("1995-01-01").unix, Time("2025-01-01").unix, 8)
    gst = sidereal_time_deg(unix, 0.0, kind="apparent")
    lst = sidereal_time_deg(unix, 40.0, kind="apparent")
    np.testing.assert_allclose(np.mod(lst - gst, 360.0), 40.0, atol=1e-9)
    # astropy as the independent reference: same instants built from ISO strings
    iso = Time(unix, format="unix").isot
    ref = Time(iso, scale="utc").sidereal_time("apparent", 40 * u.deg).deg
    np.testing.assert_allclose(lst, ref, atol=1e-8)


# ---------------------------------------------------------------- fast path vs astropy AltAz
def _enu_from_altaz(az_deg, alt_deg):
    az, alt = np.radians(az_deg), np.radians(alt_deg)
    return np.stack([np.cos(alt) * np.sin(az), np.cos(alt) * np.cos(az), np.sin(alt)], axis=-1)


def _angle_arcsec(a, b):
    cosang = np.clip(np.sum(a * b, axis=-1) / (np.linalg.norm(a, axis=-1) * np.linalg.norm(b, axis=-1)), -1, 1)
    return np.degrees(np.arccos(cosang)) * 3600


def test_projection_matches_astropy_altaz_random_times():
    rng = np.random.default_rng(7)
    for _ in range(4):
        lat, lon = rng.uniform(-70, 70), rng.uniform(-180, 180)
        ra, dec = rng.uniform(0, 360), rng.uniform(-80, 80)
        unix = np.sort(rng.uniform(Time("1990-01-01").unix, Time("2026-06-01").unix, 6))
        site = Site(lat, lon, 100.0)
        hv = horizontal_velocity(site, unix, CustomVelocity(1.0, ra_deg=ra, dec_deg=dec), node_spacing_s=None)
        mine = np.column_stack([hv.east, hv.north, hv.up])
        with offline_astropy():
            loc = EarthLocation.from_geodetic(lon * u.deg, lat * u.deg, 100 * u.m)
            t = Time(unix, format="unix")
            aa = SkyCoord(ra=ra * u.deg, dec=dec * u.deg).transform_to(AltAz(obstime=t, location=loc))
        ref = _enu_from_altaz(aa.az.deg, aa.alt.deg)
        # astropy's AltAz includes annual aberration (<= 20.5"), diurnal aberration (0.3"),
        # light deflection and polar motion (< 1"); a velocity direction has none of them.
        assert np.all(_angle_arcsec(mine, ref) < 25.0)
        np.testing.assert_allclose(hv.speed_m_s, 1.0, rtol=1e-12)


def test_earth_rotation_part_matches_astropy_cirs_to_altaz():
    # Tighter check of ERA + local axes: feed my CIRS direction (GCRS rotated by c2i06a) to
    # astropy's CIRS -> AltAz (no annual aberration there; diurnal aberration 0.3" and polar
    # motion < 0.5" remain).
    rng = np.random.default_rng(11)
    unix = np.sort(rng.uniform(Time("2000-01-01").unix, Time("2026-06-01").unix, 6))
    site = Site(-33.0, 151.0, 50.0)
    ra, dec = 250.0, 35.0
    hv = horizontal_velocity(site, unix, CustomVelocity(1.0, ra_deg=ra, dec_deg=dec), node_spacing_s=None)
    eo = EarthOrientation(0.0, unix)
    vec = np.array([math.cos(math.radians(dec)) * math.cos(math.radians(ra)),
                    math.cos(math.radians(dec)) * math.sin(math.radians(ra)), math.sin(math.radians(dec))])
    cirs = np.einsum("nij,j->ni", eo.c2i, vec)
    from astropy.coordinates import CIRS

    with offline_astropy():
        t = Time(unix, format="unix")
        loc = EarthLocation.from_geodetic(151.0 * u.deg, -33.0 * u.deg, 50 * u.m)
        c = SkyCoord(x=cirs[:, 0], y=cirs[:, 1], z=cirs[:, 2], representation_type="cartesian",
                     frame=CIRS(obstime=t, location=loc))
        aa = c.transform_to(AltAz(obstime=t, location=loc))
    ref = _enu_from_altaz(aa.az.deg, aa.alt.deg)
    mine = np.column_stack([hv.east, hv.north, hv.up])
    assert np.all(_angle_arcsec(mine, ref) < 1.0)


# ---------------------------------------------------------------- presets
def test_cmb_apex_equatorial():
    # Planck 2018 (A&A 641, A1): (l, b) = (264.021°, 48.253°) <-> (RA, Dec) ≈ (167.942°, −6.944°).
    ra, dec = CMBDipole().radec_deg
    assert ra == pytest.approx(167.942, abs=1e-3)
    assert dec == pytest.approx(-6.944, abs=1e-3)
    v = CMBDipole().at(Time("2020-01-01").unix)
    assert np.linalg.norm(v) == pytest.approx(369.82e3, rel=1e-12)


def test_orbital_speed_annual_mean():
    # Mean orbital speed of the Earth ≈ 29.78 km/s; perihelion/aperihelion ≈ 30.29 / 29.29 km/s
    # (common practice; NASA Earth fact sheet values, recalled from memory).  Barycentric
    # velocity includes the Moon-induced wobble (~12 m/s), hence the tolerances.
    days = Time("2023-01-01").unix + 86400.0 * np.arange(365)
    speed = np.linalg.norm(EarthOrbit().at(days), axis=1)
    assert speed.mean() == pytest.approx(29.78e3, abs=15.0)
    assert speed.max() == pytest.approx(30.29e3, abs=50.0)
    assert speed.min() == pytest.approx(29.29e3, abs=50.0)
    # Annual harmonic of the speed: amplitude e·v ≈ 0.0167 × 29.78 km/s ≈ 0.50 km/s (eccentricity
    # 0.0167, common practice), maximum at perihelion, 2023-01-04 (almanac date, recalled from
    # memory).  A fit rather than argmax: the ±12 m/s lunar wobble moves the daily maximum by
    # weeks because the annual term is flat near its peak.
    d = np.arange(365.0)
    w = 2 * np.pi / 365.25
    X = np.column_stack([np.ones_like(d), np.cos(w * d), np.sin(w * d)])
    (_, a, b), *_ = np.linalg.lstsq(X, speed, rcond=None)
    assert math.hypot(a, b) == pytest.approx(0.0167 * 29.78e3, abs=20.0)
    day_of_max = np.mod(math.atan2(b, a) / w, 365.25)
    assert day_of_max == pytest.approx(3.7, abs=3.0)


def test_earth_rotation_speed_and_direction():
    # Equator, sea level: ω·a = 7.2921150e-5 rad/s × 6378137 m = 465.10 m/s (common practice;
    # WGS84 equatorial radius), due east.
    hv = horizontal_velocity(Site(0.0, 30.0), Time("2024-03-01").unix + np.arange(5) * 3600.0, EarthRotation())
    np.testing.assert_allclose(hv.speed_h_m_s, 465.10, atol=0.01)
    np.testing.assert_allclose(hv.azimuth_deg, 90.0, atol=1e-6)
    np.testing.assert_allclose(hv.up, 0.0, atol=1e-6)
    # 45° N, 300 m: ρ = (N + h) cos φ with N = a / sqrt(1 − e² sin² φ) (WGS84, independent formula)
    a, f = 6378137.0, 1 / 298.257223563
    e2 = f * (2 - f)
    phi = math.radians(45.0)
    rho = (a / math.sqrt(1 - e2 * math.sin(phi) ** 2) + 300.0) * math.cos(phi)
    omega = 7.2921150e-5  # IERS Conventions (2010) nominal mean angular velocity
    hv = horizontal_velocity(Site(45.0, -70.0, 300.0), Time("2024-03-01").unix, EarthRotation())
    assert hv.speed_h_m_s[0] == pytest.approx(omega * rho, rel=1e-7)
    assert hv.north[0] == pytest.approx(0.0, abs=1e-6)


def test_velocity_sum_and_fixed_speed():
    t = Time("2021-06-21").unix + np.arange(3) * 7200.0
    site = Site(10.0, 20.0)
    total = (CMBDipole() + EarthOrbit() + EarthRotation()).at(t, site)
    parts = CMBDipole().at(t) + EarthOrbit().at(t) + EarthRotation().at(t, site)
    np.testing.assert_allclose(total, parts, rtol=1e-14)
    fixed = EarthOrbit().with_speed(1000.0).at(t)
    np.testing.assert_allclose(np.linalg.norm(fixed, axis=1), 1000.0, rtol=1e-13)
    direction = EarthOrbit().at(t)
    np.testing.assert_allclose(fixed / 1000.0, direction / np.linalg.norm(direction, axis=1)[:, None], atol=1e-14)
    with pytest.raises(ValueError, match="needs a Site"):
        EarthRotation().at(t)


# ---------------------------------------------------------------- projection check values
def _icrs_direction_of(alt_deg, az_deg, unix, site):
    with offline_astropy():
        loc = EarthLocation.from_geodetic(site.longitude_deg * u.deg, site.latitude_deg * u.deg, site.elevation_m * u.m)
        c = SkyCoord(alt=alt_deg * u.deg, az=az_deg * u.deg, frame=AltAz(obstime=Time(unix, format="unix"), location=loc))
        icrs = c.icrs
    return float(icrs.ra.deg), float(icrs.dec.deg)


def test_vertical_velocity_has_no_in_plane_speed():
    site = Site(48.0, 11.0, 500.0, mark_azimuth_deg=20.0)
    t0 = Time("2025-02-03T04:05:06").unix
    ra, dec = _icrs_direction_of(90.0, 0.0, t0, site)  # the zenith, found by astropy
    hv = horizontal_velocity(site, t0, CustomVelocity(30e3, ra_deg=ra, dec_deg=dec))
    # aberration in astropy's AltAz -> ICRS is ≤ 20.5" ≈ 1e-4 rad
    assert hv.speed_h_m_s[0] / 30e3 < 1.2e-4
    assert Apparatus(11.0, 550e-9).wind_amplitude(hv.speed_h_m_s[0]) < 1e-8 * 0.2


@pytest.mark.parametrize("sense", ["clockwise", "counterclockwise"])
def test_horizontal_velocity_along_mark_gives_full_amplitude_at_phase_zero(sense):
    mark = 37.0
    site = Site(-23.0, -46.0, 760.0, mark_azimuth_deg=mark, table_sense=sense)
    t0 = Time("2026-03-15T12:00:00").unix
    app = Apparatus(11.0, 550e-9)
    ra, dec = _icrs_direction_of(0.0, mark, t0, site)
    hv = horizontal_velocity(site, t0, CustomVelocity(30e3, ra_deg=ra, dec_deg=dec))
    c2, s2 = hv.c2s2(app)
    assert math.hypot(c2[0], s2[0]) == pytest.approx(app.wind_amplitude(30e3), rel=1e-7)
    phase = hv.table_phase_deg[0]
    assert min(phase, 180 - phase) < 0.01
    # 30° further round the compass: table angle +30° (clockwise table) or −30° ≡ 150° (counterclockwise)
    ra, dec = _icrs_direction_of(0.0, mark + 30.0, t0, site)
    hv = horizontal_velocity(site, t0, CustomVelocity(30e3, ra_deg=ra, dec_deg=dec))
    expected = 30.0 if sense == "clockwise" else 150.0
    assert hv.table_phase_deg[0] == pytest.approx(expected, abs=0.01)
    assert site.table_angle_deg(mark + 30.0) == pytest.approx(30.0 if sense == "clockwise" else 330.0)


def test_no_mark_azimuth_means_lab_frame_only():
    site = Site(52.0, 0.0)
    hv = horizontal_velocity(site, Time("2026-01-01").unix, CMBDipole())
    assert hv.speed_h_m_s[0] > 0  # in-plane speed is a lab-frame statement
    with pytest.raises(ValueError, match="azimuth of the table's reference mark"):
        hv.table_phase_deg
    with pytest.raises(ValueError, match="reference mark"):
        hv.c2s2(Apparatus(1.0, 1e-6))


def test_node_interpolation_matches_exact_evaluation():
    # Documented bound: relative error ≲ (2π·60 s / 1 day)²/8 ≈ 2e-6 for 60 s nodes.
    site = Site(35.0, 139.0, mark_azimuth_deg=0.0)
    epoch = Time("2026-07-01").unix
    rel = np.linspace(0.0, 86400.0, 1500)
    v = CMBDipole() + EarthOrbit() + EarthRotation()
    fast = horizontal_velocity(site, epoch_unix=epoch, time_s=rel, velocity=v)
    exact = horizontal_velocity(site, epoch_unix=epoch, time_s=rel, velocity=v, node_spacing_s=None)
    assert fast.n_nodes < exact.n_nodes == 1500
    scale = exact.speed_m_s.max()
    for comp in ("east", "north", "up"):
        assert np.max(np.abs(getattr(fast, comp) - getattr(exact, comp))) / scale < 1e-5


def test_epoch_plus_relative_equals_absolute_times():
    site = Site(-30.0, 20.0, mark_azimuth_deg=90.0)
    epoch = 1_780_000_000.0
    rel = np.array([0.0, 1.25, 3600.5])
    a = horizontal_velocity(site, epoch + rel, EarthOrbit())
    b = horizontal_velocity(site, epoch_unix=epoch, time_s=rel, velocity=EarthOrbit())
    np.testing.assert_allclose(a.east, b.east, rtol=1e-9)
    np.testing.assert_allclose(a.table_phase_deg, b.table_phase_deg, atol=1e-7)


# ---------------------------------------------------------------- site and parsing
def test_site_from_mapping_and_validation():
    s = Site.from_mapping({"latitude_deg": 47.4, "longitude_deg": 8.5, "elevation_m": 400, "mark_azimuth_deg": 12.5,
                           "table_sense": "ccw", "name": "invented lab"})
    assert s.table_sense == "counterclockwise" and s.has_mark
    assert Site.from_mapping(s.to_dict()) == s
    theta = np.array([0.0, 10.0, 200.0])
    np.testing.assert_allclose(s.table_angle_deg(s.azimuth_deg(theta)), theta, atol=1e-12)
    with pytest.raises(ValueError, match="unknown"):
        Site.from_mapping({"latitude_deg": 1, "longitude_deg": 2, "lat": 3})
    with pytest.raises(ValueError, match="latitude_deg"):
        Site(91.0, 0.0)
    with pytest.raises(ValueError, match="table_sense"):
        Site(0.0, 0.0, table_sense="sideways")
    with pytest.raises(ValueError, match="needs"):
        Site.from_mapping({"latitude_deg": 1.0})
    assert "no mark azimuth" in str(Site(1.0, 2.0))


def test_parse_velocity():
    assert isinstance(parse_velocity("orbital"), EarthOrbit)
    assert isinstance(parse_velocity("cmb"), CMBDipole)
    total = parse_velocity("cmb+orbital+earth-rotation")
    assert isinstance(total, VelocitySum) and total.spec == "cmb+orbital+earth-rotation"
    c = parse_velocity("custom:ra=10,dec=+5,speed=3e+4")  # '+' inside numbers is not a sum
    assert c.speed_m_s == 3e4 and c.dec_deg == 5.0
    g = parse_velocity("custom:l=264.021,b=48.253,speed=369820")
    np.testing.assert_allclose(g.radec_deg, CMBDipole().radec_deg, atol=1e-12)
    lab = parse_velocity("lab:speed=30000,angle=15")
    assert isinstance(lab, LabWind) and lab.phase_deg() == 15.0
    for v in (total, c, g, lab, parse_velocity("custom:ra=1,dec=2+earth-rotation")):
        assert parse_velocity(v.spec).spec == v.spec
    for bad in ("", "sun", "custom:ra=1", "custom:ra=1,dec=2,foo=3", "lab:speed=fast", "cmb+lab:speed=1"):
        with pytest.raises(ValueError):
            parse_velocity(bad)


# ---------------------------------------------------------------- no network
class _NetworkBlocked:
    def __init__(self):
        self.calls = []

    def __call__(self, *args, **kwargs):
        self.calls.append(args[:2])
        raise OSError("network disabled by test")


@pytest.fixture
def no_network(monkeypatch):
    blocker = _NetworkBlocked()
    monkeypatch.setattr(socket.socket, "connect", lambda self, *a, **k: blocker(*a, **k))
    monkeypatch.setattr(socket, "getaddrinfo", blocker)
    monkeypatch.setattr(socket, "create_connection", blocker)
    return blocker


def test_network_block_intercepts_astropy_downloads(no_network):
    # Control: the fixture really catches astropy's download path (else the next test is vacuous).
    from astropy.utils.data import conf as data_conf
    from astropy.utils.data import download_file

    with data_conf.set_temp("allow_internet", True), pytest.raises(Exception):
        download_file("https://datacenter.iers.org/data/9/finals2000A.all", cache=False, timeout=1)
    assert no_network.calls


def test_offline_computation_never_touches_network(no_network, monkeypatch):
    import astropy.time.core as time_core
    from astropy.utils import iers

    # Fresh state: force astropy to (re)load its IERS and leap-second tables inside the test,
    # with the *default* permissive configuration that would download and refuse stale tables.
    monkeypatch.setattr(iers.IERS_Auto, "iers_table", None)
    monkeypatch.setattr(time_core, "_LEAP_SECONDS_CHECK", time_core._LeapSecondsCheck.NOT_STARTED)
    monkeypatch.setattr(iers.conf, "auto_download", True)
    monkeypatch.setattr(iers.conf, "auto_max_age", 30.0)
    site = Site(40.0, -3.7, 650.0, mark_azimuth_deg=5.0)
    v = CMBDipole() + EarthOrbit() + EarthRotation()
    near_unix = 1_797_735_600.0  # 2026-12-20T03:00:00Z, after the bundled table's predictive start
    far_unix = 5_605_632_000.0  # 2147-08-21T00:00:00Z, beyond every bundled table
    with warnings.catch_warnings(record=True) as near_caught:
        warnings.simplefilter("always")
        near = horizontal_velocity(site, near_unix + np.arange(3) * 600.0, v)
    assert np.all(np.isfinite(near.table_phase_deg))
    with warnings.catch_warnings(record=True) as far_caught:
        warnings.simplefilter("always")
        far = horizontal_velocity(site, far_unix + np.arange(3) * 600.0, v)
    assert np.all(np.isfinite(far.table_phase_deg)) and np.all(far.speed_m_s > 3e5)
    assert not no_network.calls, f"network was touched: {no_network.calls}"
    # erfa's and astropy's range warnings are folded into nullfit's EarthOrientationWarning
    from erfa import ErfaWarning

    assert not any(issubclass(w.category, (ErfaWarning, EarthOrientationWarning)) for w in near_caught)
    assert not any(issubclass(w.category, ErfaWarning) for w in far_caught)
    far_msgs = [str(w.message) for w in far_caught if issubclass(w.category, EarthOrientationWarning)]
    assert any("outside the bundled" in m for m in far_msgs)
    assert any("1900-2100" in m for m in far_msgs)
    # the user's configuration is restored afterwards
    assert iers.conf.auto_download is True and iers.conf.auto_max_age == 30.0
