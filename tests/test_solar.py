"""Solar geometry against an independent reference.

Reference: the NREL Solar Position Algorithm (SPA; Reda & Andreas 2004,
Solar Energy 76, 577, doi:10.1016/j.solener.2003.12.003) as implemented in
pvlib (``pvlib.spa.solar_position_numpy``, the engine of
``pvlib.solarposition.spa_python``), geometric zenith (no refraction).
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.special import kve

pvlib = pytest.importorskip("pvlib")
from pvlib import spa  # noqa: E402

from boxchem.environment import solar  # noqa: E402
from boxchem.environment.solar import (  # noqa: E402
    EARTH_RADIUS_M,
    chapman_air_mass,
    daylight_hours,
    earth_sun_distance_factor,
    equation_of_time,
    horizon_crossings,
    horizon_zenith_angle,
    is_sunlit,
    solar_declination,
    solar_zenith_angle,
    sun_events,
)

_EPOCH = np.datetime64("1970-01-01T00:00:00", "ns")


def _unix(times):
    return (np.asarray(times).astype("datetime64[ns]") - _EPOCH) / np.timedelta64(1, "s")


def spa_reference(times, latitude, longitude):
    """(geometric zenith [deg], equation of time [min], distance [AU]) from pvlib's SPA."""
    ut = np.asarray(_unix(times), dtype=float)
    lat, lon = np.broadcast_arrays(np.asarray(latitude, float), np.asarray(longitude, float))
    ut, lat, lon = np.broadcast_arrays(ut, lat, lon)
    year = 1970.0 + ut / (365.25 * 86400.0)
    delta_t = spa.calculate_deltat(np.floor(year), np.ones_like(year))
    out = spa.solar_position_numpy(ut.ravel(), lat.ravel(), lon.ravel(), 0.0, 1013.25, 12.0,
                                   delta_t.ravel(), 0.5667, 1)
    esd = spa.solar_position_numpy(ut.ravel(), lat.ravel(), lon.ravel(), 0.0, 1013.25, 12.0,
                                   delta_t.ravel(), 0.5667, 1, esd=True)[0]
    zenith, eot = out[1], out[5]
    return zenith.reshape(ut.shape), eot.reshape(ut.shape), esd.reshape(ut.shape)


def _random_times(rng, n):
    t0 = np.datetime64("1950-01-01T00:00:00", "s").astype(np.int64)
    t1 = np.datetime64("2100-12-31T23:59:59", "s").astype(np.int64)
    return rng.integers(t0, t1, n).astype("datetime64[s]")


def test_zenith_matches_nrel_spa_random_times_and_places():
    rng = np.random.default_rng(20260901)
    n = 1000
    times = _random_times(rng, n)
    lat = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n)))
    lat[:200] = rng.uniform(66.0, 90.0, 200) * rng.choice([-1.0, 1.0], 200)   # polar cases
    lon = rng.uniform(-180.0, 180.0, n)
    ours = solar_zenith_angle(times, lat, lon)
    ref, _eot, _r = spa_reference(times, lat, lon)
    assert np.sum(ref > 90.0) > 300           # night and twilight are covered
    assert np.sum(ref > 150.0) > 10
    # Issue 3 asks for 0.05 deg against a high-precision reference (NREL SPA,
    # Reda & Andreas 2004, via pvlib); the Meeus (1998) low-accuracy
    # coordinates reach about 0.012 deg, which the module documents.
    assert np.max(np.abs(ours - ref)) < 0.015


def test_zenith_public_pvlib_api_single_site():
    pd = pytest.importorskip("pandas")
    times = pd.date_range("2026-09-01", periods=48, freq="30min", tz="UTC")
    ref = pvlib.solarposition.spa_python(times, -70.0, 10.0, delta_t=69.0)["zenith"].to_numpy()
    ours = solar_zenith_angle(times.tz_localize(None).to_numpy(), -70.0, 10.0)
    # NREL SPA (Reda & Andreas 2004) via pvlib.solarposition.spa_python, geometric zenith
    assert np.max(np.abs(ours - ref)) < 0.015


def test_zenith_broadcasts_times_against_places():
    times = np.arange(np.datetime64("2026-01-01"), np.datetime64("2026-01-05"), np.timedelta64(6, "h"))
    lat = np.array([-80.0, 0.0, 45.0])
    z = solar_zenith_angle(times[:, None], lat[None, :], 30.0)
    assert z.shape == (times.size, 3)
    for j, la in enumerate(lat):
        np.testing.assert_allclose(z[:, j], solar_zenith_angle(times, la, 30.0), rtol=0, atol=1e-12)


def test_not_a_time_gives_nan():
    t = np.array(["2026-01-01T12:00", "NaT"], dtype="datetime64[ns]")
    z = solar_zenith_angle(t, 0.0, 0.0)
    assert np.isfinite(z[0]) and np.isnan(z[1])
    assert np.isnan(solar_zenith_angle(np.datetime64("NaT"), 0.0, 0.0))


def test_zenith_rejects_bad_input():
    with pytest.raises(ValueError, match="latitude"):
        solar_zenith_angle(np.datetime64("2026-01-01"), 95.0, 0.0)
    with pytest.raises(TypeError, match="datetime64"):
        solar_zenith_angle(1.0e9, 10.0, 0.0)


def test_declination_at_solstices_equals_obliquity():
    # The sun's declination at the solstices equals +- the obliquity of the
    # ecliptic: 23.4393 deg at J2000, decreasing by 0.0130 deg per century
    # (IAU 1976 obliquity, Lieske et al. 1977, A&A 58, 1; recalled from memory),
    # give or take the nutation in obliquity (< 0.003 deg).
    for year in (1960, 2026, 2090):
        obliquity = 23.4393 - 0.0130 * (year - 2000) / 100.0
        june = np.arange(np.datetime64(f"{year}-06-18"), np.datetime64(f"{year}-06-25"), np.timedelta64(10, "m"))
        dec = np.array([np.max(solar_declination(june)), np.min(solar_declination(june + np.timedelta64(184, "D")))])
        np.testing.assert_allclose(dec, [obliquity, -obliquity], atol=0.004)


def test_declination_matches_spa_at_the_pole():
    # At the North Pole the zenith angle is 90 deg - declination (spherical
    # astronomy; common practice, no source), so SPA at latitude 90 gives the
    # reference declination (NREL SPA, Reda & Andreas 2004, via pvlib).
    rng = np.random.default_rng(7)
    times = _random_times(rng, 300)
    ref_zenith, _eot, _r = spa_reference(times, 90.0, 0.0)
    assert np.max(np.abs(solar_declination(times) - (90.0 - ref_zenith))) < 0.012


def test_equation_of_time_and_distance_match_spa():
    rng = np.random.default_rng(11)
    times = _random_times(rng, 300)
    _z, ref_eot, ref_r = spa_reference(times, 0.0, 0.0)
    # NREL SPA (Reda & Andreas 2004) equation of time [min] and Earth-Sun distance [AU], via pvlib
    assert np.max(np.abs(equation_of_time(times) - ref_eot)) < 0.1
    np.testing.assert_allclose(earth_sun_distance_factor(times), 1.0 / ref_r**2, rtol=2e-4)


def test_distance_factor_extremes():
    # Perihelion 0.98329 AU (early January), aphelion 1.01671 AU (early July),
    # recalled from memory: factor 1/r^2 = 1.0343 and 0.9674.
    year = np.arange(np.datetime64("2026-01-01"), np.datetime64("2027-01-01"), np.timedelta64(6, "h"))
    f = earth_sun_distance_factor(year)
    assert f.max() == pytest.approx(1.0343, abs=5e-4)
    assert f.min() == pytest.approx(0.9674, abs=5e-4)
    assert year[np.argmax(f)].astype("datetime64[M]") == np.datetime64("2026-01")
    assert year[np.argmin(f)].astype("datetime64[M]") == np.datetime64("2026-07")


def test_horizon_dip_at_20_km():
    # dip = arccos(R/(R+z)) ~ sqrt(2 z / R) rad for z << R: 4.54 deg at 20 km
    # (spherical geometry; common practice, no source)
    assert horizon_zenith_angle(20000.0) == pytest.approx(90.0 + np.degrees(np.sqrt(2 * 20000.0 / EARTH_RADIUS_M)), abs=0.01)
    assert horizon_zenith_angle(20000.0) == pytest.approx(94.54, abs=0.01)
    assert horizon_zenith_angle(0.0) == 90.0
    np.testing.assert_array_equal(is_sunlit([94.0, 94.6, 89.0], [20000.0, 20000.0, 0.0]), [True, False, True])


def test_earth_radius_and_horizon_use_the_mean_earth_radius():
    # The geometry (horizon, Chapman air mass, sunrise at the box) rests on one radius: the
    # mean radius R1 = (2a + b)/3 = 6371008.7714 m of the Geodetic Reference System 1980
    # (Moritz 2000, J. Geodesy 74, 128; recalled from memory).  The tests above take the
    # radius from the module, so a wrong constant (e.g. the equatorial 6378137 m) would pass
    # them; here it is pinned to the published value.
    assert EARTH_RADIUS_M == pytest.approx(6371008.7714, rel=0, abs=0.1)
    r1 = 6371008.7714
    for z in (0.0, 10000.0, 20000.0, 30000.0):
        # dip of the horizon: 90 deg + arccos(R/(R + z)) (spherical geometry; common practice, no source)
        assert horizon_zenith_angle(z) == pytest.approx(90.0 + np.degrees(np.arccos(r1 / (r1 + z))), rel=0, abs=1e-6)


def _ray_column(chi_deg, z, H=7000.0):
    """Slant column / vertical column by brute-force quadrature along the ray (common practice, no source)."""
    r0 = EARTH_RADIUS_M + z
    c = np.cos(np.radians(chi_deg))

    def n(s):
        return np.exp(-(np.sqrt(r0 * r0 + s * s + 2.0 * r0 * s * c) - r0) / H) / H

    s_t = max(0.0, -r0 * c)  # distance to the tangent point
    pieces = [(0.0, s_t), (s_t, s_t + 3.0e5), (s_t + 3.0e5, s_t + 3.0e6)] if s_t > 0 else [(0.0, 3.0e5), (3.0e5, 3.0e6)]
    return sum(quad(n, a, b, limit=400, epsabs=0, epsrel=1e-11)[0] for a, b in pieces)


def test_chapman_air_mass_is_secant_at_small_angles():
    chi = np.array([0.0, 10.0, 30.0, 45.0])
    # plane-parallel limit: sec(chi) (Chapman 1931), curvature correction ~ tan^2(chi) H/R
    np.testing.assert_allclose(chapman_air_mass(chi, 20000.0), 1.0 / np.cos(np.radians(chi)), rtol=2e-3)
    assert chapman_air_mass(0.0, 20000.0) == pytest.approx(1.0, rel=1e-9, abs=0)


def test_chapman_air_mass_grazing_closed_form():
    # Ch(x, 90 deg) = x e^x K1(x), x = (R + z)/H (Huestis 2001, JQSRT 69, 709; recalled from memory)
    for z, H in [(0.0, 7000.0), (20000.0, 7000.0), (30000.0, 5000.0)]:
        x = (EARTH_RADIUS_M + z) / H
        assert chapman_air_mass(90.0, z, H) == pytest.approx(x * kve(1, x), rel=1e-8, abs=0)


def test_chapman_air_mass_against_ray_quadrature_below_90():
    for chi in (60.0, 85.0, 91.0, 93.0, 94.3):
        assert chapman_air_mass(chi, 20000.0) == pytest.approx(_ray_column(chi, 20000.0), rel=1e-6, abs=0)


def test_chapman_air_mass_finite_increasing_then_infinite():
    hz = horizon_zenith_angle(20000.0)
    chi = np.linspace(0.0, hz, 2000)
    m = chapman_air_mass(chi, 20000.0)
    assert np.all(np.isfinite(m))
    assert np.all(np.diff(m) > 0)
    assert np.isfinite(chapman_air_mass(92.0, 20000.0))
    assert chapman_air_mass(hz + 0.01, 20000.0) == np.inf
    assert chapman_air_mass(100.0, 20000.0) == np.inf
    assert chapman_air_mass(90.5, 0.0) == np.inf
    np.testing.assert_array_equal(np.shape(chapman_air_mass(np.zeros((3, 1)), np.zeros(4))), (3, 4))


def _spa_zenith_at(events, lat, lon):
    ok = ~np.isnat(events)
    return spa_reference(events[ok], lat, lon)[0]


@pytest.mark.parametrize("lat, lon, altitude", [(0.0, 0.0, 0.0), (48.1, 11.6, 0.0), (-33.9, 151.2, 0.0),
                                                (-70.0, 0.0, 20000.0), (-78.0, 166.7, 18000.0),
                                                (65.0, -150.0, 15000.0)])
def test_sunrise_sunset_sit_on_the_box_horizon(lat, lon, altitude):
    dates = np.arange(np.datetime64("2026-01-01"), np.datetime64("2027-01-01"), np.timedelta64(9, "D"))
    rise, sets = sun_events(dates, lat, lon, altitude)
    horizon = horizon_zenith_angle(altitude)
    for ev in (rise, sets):
        z = _spa_zenith_at(ev, lat, lon)
        assert z.size > 0
        # the reference zenith (NREL SPA, Reda & Andreas 2004, via pvlib) at our event equals the horizon
        assert np.max(np.abs(z - horizon)) < 0.02
    both = ~np.isnat(rise) & ~np.isnat(sets)
    assert np.all(rise[both] < sets[both])
    # events belong to the date's local solar day (noon ~ 12 UT - lon/15 h)
    noon = dates.astype("datetime64[ns]") + np.timedelta64(int((12 - lon / 15) * 3600), "s")
    assert np.all(np.abs((rise[both] - noon[both]) / np.timedelta64(1, "h")) < 12.5)


def test_daylight_hours_match_horizon_geometry():
    # Day length from the hour angle of the horizon, cos H0 = (cos chi_h - sin phi sin d)/(cos phi cos d),
    # with the declination d from SPA at the pole (common practice, no source; SPA via pvlib)
    dates = np.array(["2026-03-20", "2026-05-01", "2026-06-21", "2026-10-10", "2026-12-21"], dtype="datetime64[D]")
    for lat, altitude in [(0.0, 0.0), (45.0, 0.0), (-60.0, 20000.0), (60.0, 10000.0)]:
        noon = dates.astype("datetime64[ns]") + np.timedelta64(12, "h")
        dec = np.radians(90.0 - spa_reference(noon, 90.0, 0.0)[0])
        phi = np.radians(lat)
        cos_h0 = (np.cos(np.radians(horizon_zenith_angle(altitude))) - np.sin(phi) * np.sin(dec)) / (np.cos(phi) * np.cos(dec))
        expected = 2.0 * np.degrees(np.arccos(cos_h0)) / 15.0
        # the declination changes during the day, hence the 0.05 h tolerance
        np.testing.assert_allclose(daylight_hours(dates, lat, 0.0, altitude), expected, atol=0.05)
    # equinox at the equator: about 12 h (spherical geometry; common practice, no source)
    assert daylight_hours(np.datetime64("2026-03-20"), 0.0, 0.0) == pytest.approx(12.0, abs=0.02)


def test_polar_night_and_midnight_sun():
    june = np.datetime64("2026-06-21")
    # 70 S at the ground in mid-June: the sun stays below 90 deg all day (polar night)
    rise, sets = sun_events(june, -70.0, 0.0, 0.0)
    assert np.isnat(rise) and np.isnat(sets)
    assert daylight_hours(june, -70.0, 0.0, 0.0) == 0.0
    day = np.arange(np.datetime64("2026-06-21T00:00"), np.datetime64("2026-06-22T00:00"), np.timedelta64(5, "m"))
    z = spa_reference(day, -70.0, 0.0)[0]
    assert z.min() > 90.0                      # NREL SPA via pvlib agrees: no sunrise at the ground
    # At 20 km the horizon is 94.54 deg while the noon zenith is about 70 + 23.44 = 93.44 deg:
    # a short day of about 2.7 h (SPA via pvlib confirms the sun passes above the horizon)
    assert z.min() < horizon_zenith_angle(20000.0)
    rise, sets = sun_events(june, -70.0, 0.0, 20000.0)
    assert not np.isnat(rise) and not np.isnat(sets)
    assert 2.0 < daylight_hours(june, -70.0, 0.0, 20000.0) < 3.5
    # 80 S at 20 km in mid-June: noon zenith about 103 deg > 94.5 deg, polar night at the box
    assert z.min() + 10.0 > horizon_zenith_angle(20000.0)
    assert np.all(np.isnat(sun_events(june, -80.0, 0.0, 20000.0)))
    assert daylight_hours(june, -80.0, 0.0, 20000.0) == 0.0
    # 70 N in mid-June: midnight sun (SPA via pvlib: zenith below 90 deg all day)
    assert spa_reference(day, 70.0, 0.0)[0].max() < 90.0
    assert np.all(np.isnat(sun_events(june, 70.0, 0.0, 0.0)))
    assert daylight_hours(june, 70.0, 0.0, 0.0) == 24.0


def test_the_poles():
    # At the poles the sun circles at a constant height, 90 deg - |declination| from the zenith
    # (spherical astronomy; common practice, no source): midnight sun in local summer, night in winter
    d = np.array(["2026-06-21", "2026-12-21"], dtype="datetime64[D]")
    np.testing.assert_array_equal(daylight_hours(d, 90.0, 0.0, 0.0), [24.0, 0.0])
    np.testing.assert_array_equal(daylight_hours(d, -90.0, 0.0, 20000.0), [0.0, 24.0])
    assert np.all(np.isnat(sun_events(d, 90.0, 0.0, 0.0)[0]))
    z = solar_zenith_angle(np.datetime64("2026-06-21T00:00") + np.arange(0, 24, 3).astype("timedelta64[h]"), 90.0, 0.0)
    assert np.ptp(z) < 0.01


def test_day_when_midnight_sun_begins():
    # At 65 N, 150 W, 15 km the sun stops setting in late May 2026: the last
    # days have a sunrise whose sunset comes ever later, then one day with a
    # sunrise only, then neither; the day length grows smoothly to 24 h.
    dates = np.arange(np.datetime64("2026-05-18"), np.datetime64("2026-06-01"))
    rise, sets = sun_events(dates, 65.0, -150.0, 15000.0)
    hours = daylight_hours(dates, 65.0, -150.0, 15000.0)
    assert np.all(np.diff(hours) >= 0) and hours[-1] == 24.0 and hours[0] < 23.0
    only_rise = ~np.isnat(rise) & np.isnat(sets)
    assert only_rise.sum() == 1
    # SPA (Reda & Andreas 2004, via pvlib) never reaches the horizon in the 12 h after that day's transit
    i = int(np.nonzero(only_rise)[0][0])
    noon = dates[i].astype("datetime64[ns]") + np.timedelta64(22, "h")
    after = noon + np.arange(0, 12 * 3600, 120).astype("timedelta64[s]")
    assert spa_reference(after, 65.0, -150.0)[0].max() < horizon_zenith_angle(15000.0)
    z = _spa_zenith_at(rise[i:i + 1], 65.0, -150.0)
    assert abs(z[0] - horizon_zenith_angle(15000.0)) < 0.02


def test_horizon_crossings_of_a_known_function():
    # sza = 90 + 10 sin(2 pi t / 1 d) crosses 90 at multiples of half a day (closed form)
    def sza(t):
        return 90.0 + 10.0 * np.sin(2.0 * np.pi * np.asarray(t) / 86400.0)

    roots = horizon_crossings(sza, 1000.0, 3 * 86400.0, 90.0)
    np.testing.assert_allclose(roots, np.arange(1, 6) * 43200.0, atol=1.0)


def test_horizon_crossings_find_a_dip_between_samples():
    # a 5-minute dip below the horizon, narrower than the 10-minute sampling:
    # sza - 94 = 1 - 2 exp(-((t - t0)/200 s)^2) is negative for |t - t0| < 200 sqrt(ln 2) s
    t0 = 12345.0

    def sza(t):
        return 95.0 - 2.0 * np.exp(-(((np.asarray(t) - t0) / 200.0) ** 2))

    roots = horizon_crossings(sza, 0.0, 86400.0, 94.0, sample_s=600.0)
    half = 200.0 * np.sqrt(np.log(2.0))
    np.testing.assert_allclose(roots, [t0 - half, t0 + half], atol=1.0)


def test_horizon_crossings_with_a_varying_horizon():
    roots = horizon_crossings(lambda t: np.full(np.shape(t), 92.0), 0.0, 1000.0,
                              lambda t: 90.0 + np.asarray(t) / 250.0, sample_s=300.0)
    np.testing.assert_allclose(roots, [500.0], atol=1.0)


def test_scalar_and_array_days_agree():
    d = np.linspace(-18000.0, 36000.0, 7)
    z = solar._zenith_from_days(d, 10.0, 20.0)
    for i, di in enumerate(d):
        assert float(solar._zenith_from_days(di, 10.0, 20.0)) == pytest.approx(z[i], abs=1e-12)
