"""Tests of the sidereal model's frames and clocks against astropy (independent reference, offline):
sidereal angle, lab axes, CMB direction, equinox, obliquity, sidereal year, orbital velocity.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from nullfit.core.conventions import SPEED_OF_LIGHT
from nullfit.hypothesis import sidereal as sd
from nullfit.hypothesis.offline import offline_astropy
from nullfit.hypothesis.site import Site

ECCENTRICITY = 0.0167  # Earth's orbital eccentricity (recalled from memory, common practice)


def _unix(iso: str) -> float:
    from astropy.time import Time

    with offline_astropy():
        return float(Time(iso, scale="utc").unix)


# ----------------------------------------------------------------------------- clocks and frames vs astropy
@pytest.mark.parametrize("iso,lon", [("2003-01-17T03:00:00", 13.4), ("2019-07-04T21:30:00", -71.1),
                                     ("2026-03-14T21:05:00", 151.2)])
def test_sidereal_angle_matches_astropy(iso, lon):
    # Reference: astropy Time.sidereal_time("mean", longitude) (independent reference, offline).
    import astropy.units as u
    from astropy.time import Time

    t = _unix(iso)
    got = sd.sidereal_angle_rad(epoch_unix=math.floor(t), time_s=[t - math.floor(t)], longitude_deg=lon)[0]
    with offline_astropy():
        ref = Time(iso, scale="utc").sidereal_time("mean", longitude=lon * u.deg).to_value(u.rad)
    assert abs((got - ref + math.pi) % (2 * math.pi) - math.pi) < 1e-9


def test_lab_axes_match_astropy_altaz_directions():
    # Reference: astropy AltAz → ICRS for the zenith, the south point and the east point of the
    # horizon (pressure 0: no refraction).  astropy's apparent directions include aberration
    # (≤ 21″ annual, common practice) and nutation (≤ 17″ in longitude, recalled), so the rows of
    # R(χ, w)·P agree with them to ≤ 3e-4 rad; without the precession matrix the axes are off by
    # the precession since 2000 (≈ 50″/yr, recalled: ≈ 6e-3 rad in 2025).
    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, SkyCoord
    from astropy.time import Time

    lat, lon, iso = 48.7, 9.1, "2025-02-11T04:20:00"
    t = _unix(iso)
    w = sd.sidereal_angle_rad(epoch_unix=math.floor(t), time_s=[t - math.floor(t)], longitude_deg=lon)[0]
    R = sd.sun_to_lab(sd.colatitude_rad(lat), w)
    P = sd.precession_matrix(epoch_unix=math.floor(t), time_s=[t - math.floor(t)])[0]
    with offline_astropy():
        frame = AltAz(obstime=Time(iso, scale="utc"), location=EarthLocation.from_geodetic(lon * u.deg, lat * u.deg),
                      pressure=0 * u.hPa)
        for row, (az, alt) in zip(range(3), ((180.0, 0.0), (90.0, 0.0), (0.0, 90.0))):
            ref = SkyCoord(az=az * u.deg, alt=alt * u.deg, frame=frame).icrs.cartesian.xyz.value
            ours = (R @ P)[row]
            assert np.linalg.norm(ours - ref) < 3e-4, row
            assert np.linalg.norm(R[row] - ref) > 3e-3  # the precession matters


def test_cmb_direction_matches_astropy_galactic_to_icrs():
    # Reference: astropy SkyCoord(l, b, frame="galactic").icrs for the Planck 2018 dipole
    # (l, b) = (264.021°, 48.253°), 369.82 km/s (Planck 2018 I, A&A 641, A1).
    import astropy.units as u
    from astropy.coordinates import SkyCoord

    with offline_astropy():
        ref = SkyCoord(l=264.021 * u.deg, b=48.253 * u.deg, frame="galactic").icrs
        unit = ref.cartesian.xyz.value
    v = sd.cmb_velocity_m_s()
    assert np.allclose(v, 369.82e3 * unit, rtol=0, atol=1e-6)
    # Equatorial direction ≈ (167.942°, −6.944°) (Planck 2018, recalled from memory).
    ra = math.degrees(math.atan2(v[1], v[0])) % 360
    dec = math.degrees(math.asin(v[2] / np.linalg.norm(v)))
    assert abs(ra - 167.942) < 0.01 and abs(dec + 6.944) < 0.01


def test_equinox_instant_is_where_the_sun_crosses_longitude_zero():
    # Reference: astropy get_sun → GeocentricTrueEcliptic (apparent longitude, true equinox of
    # date).  The Sun moves 0.041°/h (common practice), so 1e-3° is about 90 s.
    import astropy.units as u
    from astropy.coordinates import GeocentricTrueEcliptic, get_sun
    from astropy.time import Time

    with offline_astropy():
        t = Time(sd.EQUINOX_2000_UNIX, format="unix", scale="utc")
        lam = get_sun(t).transform_to(GeocentricTrueEcliptic(equinox=t)).lon.to_value(u.deg)
    assert abs((lam + 180) % 360 - 180) < 1e-3


def test_obliquity_matches_astropy_j2000_ecliptic():
    # Reference: angle between the ICRS pole and astropy's J2000 mean-ecliptic pole; the two
    # differ by the frame bias (a few mas, recalled), far below 1e-4°.
    import astropy.units as u
    from astropy.coordinates import BarycentricMeanEcliptic, SkyCoord

    with offline_astropy():
        pole = SkyCoord(lon=0 * u.deg, lat=90 * u.deg, frame=BarycentricMeanEcliptic(equinox="J2000")).icrs
    assert abs((90.0 - pole.dec.deg) - sd.OBLIQUITY_DEG) < 1e-4


def test_annual_rate_is_the_sidereal_year():
    # Reference: astropy builtin ephemeris (Earth and Sun barycentric positions, fixed ICRS axes).
    # After 20 sidereal years the Earth's heliocentric longitude in fixed J2000 ecliptic axes
    # returns to within planetary/lunar perturbations (≲ 0.02°); with the tropical year it would
    # be off by 20 × 50.3″ ≈ 0.28° (general precession, recalled from memory).
    import astropy.units as u
    from astropy.coordinates import get_body_barycentric
    from astropy.time import Time

    eta = math.radians(sd.OBLIQUITY_DEG)
    rot = np.array([[1, 0, 0], [0, math.cos(eta), math.sin(eta)], [0, -math.sin(eta), math.cos(eta)]])
    t0 = sd.EQUINOX_2000_UNIX + 30 * 86400.0
    lons = []
    for t in (t0, t0 + 20 * sd.SIDEREAL_YEAR_S):
        with offline_astropy():
            tt = Time(t, format="unix", scale="utc")
            r = (get_body_barycentric("earth", tt, ephemeris="builtin")
                 - get_body_barycentric("sun", tt, ephemeris="builtin")).xyz.to_value(u.au)
        e = rot @ r
        lons.append(math.degrees(math.atan2(e[1], e[0])))
    drift = (lons[1] - lons[0] + 180) % 360 - 180
    assert abs(drift) < 0.05
    assert 2 * math.pi / sd.ANNUAL_RATE_RAD_S == pytest.approx(365.256363004 * 86400.0, rel=1e-12)


def test_circular_orbit_agrees_with_ephemeris_to_eccentricity_order():
    # Reference: astropy's builtin barycentric Earth velocity (EarthOrbit).  For a Kepler orbit
    # the speed is v₀(1 + e cos ν), so over a year it spans 1 ± e around β⊕; the velocity
    # direction departs from the mean-longitude direction by e sin M, plus a constant
    # 2e sin M_eq (M_eq ≈ 75°, the mean anomaly at the March equinox, recalled) because W = 0 is
    # pinned to the true equinox (docs/sky.md): at most e(1 + 2 sin M_eq) < 3e.  The barycentric
    # ephemeris adds the Earth's motion about the Earth–Moon barycentre (≈ 12.5 m/s) and the
    # Sun's about the barycentre (≲ 15 m/s) (both recalled): ≤ 1e-3 rad of direction.
    # A sign error in any component would give errors of order 1 rad.
    t0 = sd.EQUINOX_2000_UNIX + 21 * sd.SIDEREAL_YEAR_S
    rel = np.arange(12) * sd.SIDEREAL_YEAR_S / 12
    W = sd.annual_phase_rad(epoch_unix=math.floor(t0), time_s=rel + (t0 - math.floor(t0)))
    circ = sd.orbital_beta_circular(W)
    eph = sd.orbital_beta_ephemeris(epoch_unix=math.floor(t0), time_s=rel + (t0 - math.floor(t0)))
    cosang = np.sum(circ * eph, axis=1) / np.linalg.norm(circ, axis=1) / np.linalg.norm(eph, axis=1)
    angle = np.arccos(np.clip(cosang, -1, 1))
    assert np.all(angle < 3 * ECCENTRICITY + 1e-3)
    assert np.max(angle) > 0.5 * ECCENTRICITY  # the eccentricity is visible: the check can fail
    ratio = np.linalg.norm(eph, axis=1) / sd.ORBITAL_BETA
    assert np.all(np.abs(ratio - 1) < ECCENTRICITY + 3e-3)
    # monthly sampling catches the extremes 1 ± e to within 1 − cos(15°) of e
    assert np.ptp(ratio) == pytest.approx(2 * ECCENTRICITY, rel=0.1)


def test_ephemeris_node_interpolation_error_is_as_stated():
    # Reference: the ephemeris evaluated at every time.  Linear interpolation on hourly nodes errs
    # by h²/8 · |v''| with |v''| ≈ v Ω⊕² (1 + 3e) near perihelion ≈ 2.04 mm/s, plus the monthly
    # Earth–Moon wobble 12.5 m/s × (2π/27.3 d)² × h²/8 ≈ 0.14 mm/s (recalled amplitudes): ≤ 2.5 mm/s.
    rel = np.linspace(0.0, 5 * 86400.0, 400)
    t0 = 1_704_067_200  # 2024-01-01, near perihelion
    a = sd.orbital_beta_ephemeris(epoch_unix=t0, time_s=rel)
    b = sd.orbital_beta_ephemeris(epoch_unix=t0, time_s=rel, node_spacing_s=None)
    err = np.abs(a - b).max() * SPEED_OF_LIGHT
    assert err < 2.5e-3
    assert err > 1e-4  # the nodes are really used


def test_rotation_speed_matches_astropy_site_radius():
    # Reference: astropy EarthLocation (WGS84) distance from the axis × Earth rotation rate.
    from nullfit.hypothesis.earth import EARTH_ROTATION_RATE_RAD_S

    for lat in (0.0, 37.0, -60.0):
        with offline_astropy():
            x, y, _ = Site(lat, 0.0).itrs_position_m()
        assert sd.rotation_speed_m_s(lat) == pytest.approx(EARTH_ROTATION_RATE_RAD_S * math.hypot(x, y), rel=1e-9)
