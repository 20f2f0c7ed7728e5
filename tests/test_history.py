"""Time series, the PSC threshold rule, the Environment and trajectory files."""
from __future__ import annotations

import time as wallclock

import numpy as np
import pytest

from boxchem.environment import (
    Environment,
    PscThresholdRule,
    TimeSeries,
    load_trajectory_csv,
    load_trajectory_netcdf,
)
from boxchem.environment.atmosphere import air_number_density, standard_atmosphere
from boxchem.environment.solar import (
    earth_sun_distance_factor,
    horizon_zenith_angle,
    solar_zenith_angle,
    sun_events,
)
from boxchem.errors import DataFileError, ScenarioError

START = np.datetime64("2026-09-01T00:00:00", "ns")


def _env(**kw):
    args = dict(temperature=195.0, latitude=-70.0, longitude=0.0, ozone_column=250.0, altitude=18000.0)
    args.update(kw)
    return Environment("2026-09-01T00:00:00Z", **args)


# --- TimeSeries ---------------------------------------------------------------

def test_time_series_interpolates_linearly_and_holds_ends():
    s = TimeSeries([0.0, 100.0, 300.0], [10.0, 20.0, 0.0], name="T")
    np.testing.assert_allclose(s([-50.0, 0.0, 50.0, 100.0, 200.0, 300.0, 1e6]),
                               [10.0, 10.0, 15.0, 20.0, 10.0, 0.0, 0.0])
    # linear interpolation between (100 s, 20) and (300 s, 0) (closed form, common practice)
    assert float(s(250.0)) == pytest.approx(5.0, rel=1e-12, abs=0)
    assert float(TimeSeries([5.0], [3.0])(1e9)) == 3.0


@pytest.mark.parametrize("times, values, match", [
    ([0.0, 10.0, 10.0], [1.0, 2.0, 3.0], r"environment.temperature: times must increase strictly; time\[2\]"),
    ([0.0, 10.0, 5.0], [1.0, 2.0, 3.0], r"time\[2\] = 5 s follows time\[1\] = 10 s"),
    ([0.0, 10.0], [1.0, np.nan], r"environment.temperature: value\[1\] is nan"),
    ([0.0, np.inf], [1.0, 2.0], r"time\[1\] is inf"),
    ([0.0, 10.0], [1.0], r"2 times but 1 values"),
    ([], [], r"at least one point"),
])
def test_time_series_errors_name_the_series(times, values, match):
    with pytest.raises(ScenarioError, match=match):
        TimeSeries(times, values, name="environment.temperature")


def test_time_series_origin_moves_onto_the_run_clock():
    s = TimeSeries([0.0, 3600.0], [200.0, 190.0], name="T", origin="2026-09-01T06:00:00Z")
    r = s.relative_to(START)
    np.testing.assert_allclose(r.times_s, [21600.0, 25200.0])
    env = _env(temperature=s)
    # half-way between 200 K and 190 K on the run clock (linear interpolation; common practice)
    assert float(env.at(21600.0 + 1800.0).temperature) == pytest.approx(195.0, rel=1e-12, abs=0)
    assert float(env.at(0.0).temperature) == 200.0


# --- PSC threshold rule ---------------------------------------------------------

def test_psc_threshold_rule_ramp():
    rule = PscThresholdRule(2.0e-8, threshold_K=195.0, width_K=2.0)
    T = np.array([200.0, 195.0, 194.0, 193.0, 190.0])
    # smoothstep 3x^2 - 2x^3 of x = (195 - T)/2 (the documented rule; common practice, no source)
    np.testing.assert_allclose(rule(T), 2.0e-8 * np.array([0.0, 0.0, 0.5, 1.0, 1.0]))
    # continuous, with zero slope from both sides at both ends of the ramp
    # (one-sided difference quotients; the steepest slope, mid-ramp, is 1.5 A / width)
    eps = 1e-4
    for T0 in (193.0, 195.0):
        left, mid, right = rule(np.array([T0 - eps, T0, T0 + eps]))
        for slope in ((mid - left) / eps, (right - mid) / eps):
            assert abs(slope) < 1e-3 * 1.5 * 2.0e-8 / 2.0
    mid_slope = (rule(194.0 - eps) - rule(194.0 + eps)) / (2 * eps)
    assert mid_slope == pytest.approx(1.5 * 2.0e-8 / 2.0, rel=1e-6, abs=0)


def test_psc_rule_default_threshold_is_nat_existence_temperature():
    # NAT exists below about 195 K near 50 hPa (Hanson & Mauersberger 1988, GRL 15, 855; recalled from memory)
    rule = PscThresholdRule(1e-8)
    assert rule.threshold_K == pytest.approx(195.0)
    assert rule(196.0) == 0.0 and rule(190.0) == 1e-8


@pytest.mark.parametrize("kw, match", [
    (dict(area_cm2_cm3=-1.0), "area_cm2_cm3"),
    (dict(area_cm2_cm3=1e-8, width_K=0.0), "width_K"),
    (dict(area_cm2_cm3=1e-8, threshold_K=-3.0), "threshold_K"),
])
def test_psc_rule_errors(kw, match):
    with pytest.raises(ScenarioError, match=match):
        PscThresholdRule(**kw)


def test_environment_applies_psc_rule_to_temperature_history():
    T = TimeSeries([0.0, 86400.0], [200.0, 190.0], name="T")
    env = _env(temperature=T, psc_area=PscThresholdRule(3.0e-8, threshold_K=195.0, width_K=1.0))
    st = env.at(np.array([0.0, 43200.0, 0.55 * 86400.0, 0.6 * 86400.0]))
    np.testing.assert_allclose(st.psc_area, [0.0, 0.0, 3.0e-8 * 0.5, 3.0e-8])


# --- Environment ------------------------------------------------------------------

def test_environment_constant_state_matches_the_functions():
    env = _env(sulfate_area=5e-9)
    t = np.array([0.0, 3600.0, 43200.0, 5 * 86400.0 + 7.0])
    st = env.at(t)
    times = START + (t * 1e9).astype("timedelta64[ns]")
    np.testing.assert_allclose(st.solar_zenith_angle, solar_zenith_angle(times, -70.0, 0.0), atol=1e-9)
    np.testing.assert_allclose(st.distance_factor, earth_sun_distance_factor(times), rtol=1e-12)
    p, _T = standard_atmosphere(18000.0)
    np.testing.assert_allclose(st.pressure, p)
    np.testing.assert_allclose(st.air_density, air_number_density(p, 195.0), rtol=1e-12)
    np.testing.assert_allclose(st.horizon_zenith_angle, horizon_zenith_angle(18000.0))
    np.testing.assert_allclose(st.sulfate_area, 5e-9)
    np.testing.assert_allclose(st.ozone_column, 250.0)
    assert st.temperature.shape == t.shape and st.psc_area.shape == t.shape
    # scalar input gives scalars equal to the array result
    s1 = env.at(3600.0)
    assert np.ndim(s1.solar_zenith_angle) == 0
    assert float(s1.solar_zenith_angle) == pytest.approx(st.solar_zenith_angle[1], abs=1e-12)
    assert float(s1.air_density) == pytest.approx(st.air_density[1], rel=1e-15, abs=0)


def test_environment_from_pressure_gets_a_standard_altitude():
    env = Environment(START, temperature=200.0, latitude=45.0, longitude=10.0, ozone_column=300.0,
                      pressure=5529.3)
    # 5529.3 Pa is the USSA 1976 pressure at 20 km (Table I, recalled from memory)
    assert float(env.at(0.0).altitude) == pytest.approx(20000.0, abs=2.0)
    assert float(env.at(0.0).pressure) == 5529.3


def test_environment_altitude_series_interpolates_log_pressure():
    z = TimeSeries([0.0, 1000.0], [15000.0, 25000.0], name="altitude")
    env = _env(altitude=z)
    st = env.at(np.array([0.0, 500.0, 1000.0]))
    p15, p25 = standard_atmosphere(15000.0)[0], standard_atmosphere(25000.0)[0]
    np.testing.assert_allclose(st.pressure, [p15, np.sqrt(p15 * p25), p25], rtol=1e-12)
    np.testing.assert_allclose(st.horizon_zenith_angle, horizon_zenith_angle([15000.0, 20000.0, 25000.0]))


def test_environment_longitude_crosses_the_date_line_the_short_way():
    lon = TimeSeries([0.0, 100.0], [170.0, -170.0], name="longitude")
    env = _env(longitude=lon)
    np.testing.assert_allclose(env.at(np.array([50.0, 75.0])).longitude, [-180.0, -175.0])
    # a quarter of the 20 deg path 170 E -> 170 W across the date line (closed form)
    assert float(env.at(25.0).longitude) == pytest.approx(175.0, rel=0, abs=1e-9)


@pytest.mark.parametrize("kw, match", [
    (dict(temperature=0.0), r"temperature: got 0.0; expected a temperature > 0 K"),
    (dict(temperature=TimeSeries([0, 1], [200.0, -1.0], name="T")), r"temperature: got -1.0 \(series 'T', index 1\)"),
    (dict(latitude=91.0), r"latitude: got 91.0; expected a latitude in \[-90, 90\]"),
    (dict(ozone_column=-5.0), "ozone_column"),
    (dict(psc_area="2 um2 cm-3"), r"psc_area: expected a number, a TimeSeries or a PscThresholdRule, got str"),
    (dict(sulfate_area=PscThresholdRule(1e-8)), r"sulfate_area: expected a number, a TimeSeries, got PscThresholdRule"),
    (dict(altitude=None), "give a pressure"),
    (dict(altitude=95000.0), "altitude: got 95000.0"),
    (dict(pressure=0.0), "pressure: got 0.0"),
])
def test_environment_errors_name_the_argument(kw, match):
    with pytest.raises(ScenarioError, match=match):
        _env(**kw)


def test_environment_bad_start():
    with pytest.raises(ScenarioError, match="start: cannot read 'yesterday'"):
        Environment("yesterday", temperature=200.0, latitude=0.0, longitude=0.0, ozone_column=300.0, altitude=0.0)


def test_environment_horizon_crossings_equal_sun_events():
    env = _env()
    crossings = env.horizon_crossings(0.0, 4 * 86400.0)
    days = np.arange(np.datetime64("2026-09-01"), np.datetime64("2026-09-05"))
    rise, sets = sun_events(days, -70.0, 0.0, 18000.0)
    expected = np.sort(np.concatenate([(rise - START), (sets - START)]) / np.timedelta64(1, "s"))
    expected = expected[(expected > 0) & (expected < 4 * 86400.0)]
    np.testing.assert_allclose(crossings, expected, atol=2.0)
    st = env.at(crossings)
    np.testing.assert_allclose(st.solar_zenith_angle, st.horizon_zenith_angle, atol=1e-3)


def test_moving_parcel_horizon_crossings():
    # a parcel drifting south into the polar night: every crossing found sits on the horizon
    lat = TimeSeries([0.0, 10 * 86400.0], [-60.0, -85.0], name="latitude")
    lon = TimeSeries([0.0, 10 * 86400.0], [0.0, 720.0], name="longitude")
    z = TimeSeries([0.0, 10 * 86400.0], [16000.0, 22000.0], name="altitude")
    env = Environment("2026-06-01T00:00Z", temperature=195.0, latitude=lat, longitude=lon, altitude=z,
                      ozone_column=280.0)
    tc = env.horizon_crossings(0.0, 10 * 86400.0)
    assert tc.size >= 4
    st = env.at(tc)
    np.testing.assert_allclose(st.solar_zenith_angle, st.horizon_zenith_angle, atol=1e-3)
    # between consecutive crossings the sun is alternately up and down
    mid = env.at(0.5 * (tc[:-1] + tc[1:]))
    assert np.all(np.diff(mid.sunlit.astype(int)) != 0)
    # and there is no crossing after the last one: the sun stays down at 85 S in June
    assert not env.at(np.linspace(tc[-1] + 60.0, 10 * 86400.0, 500)).sunlit.any()


def test_scalar_and_array_paths_agree_for_a_moving_parcel():
    day = 86400.0
    env = Environment("2026-08-15T00:00Z",
                      temperature=TimeSeries([0.0, 3 * day], [200.0, 188.0], name="T"),
                      latitude=TimeSeries([0.0, 3 * day], [-60.0, -75.0], name="lat"),
                      longitude=TimeSeries([0.0, 3 * day], [170.0, 200.0], name="lon"),
                      altitude=TimeSeries([0.0, 3 * day], [17000.0, 21000.0], name="z"),
                      ozone_column=TimeSeries([0.0, 3 * day], [300.0, 200.0], name="o3"),
                      psc_area=PscThresholdRule(2e-8), sulfate_area=TimeSeries([0.0, day], [1e-8, 5e-9]))
    t = np.linspace(-100.0, 4 * day, 41)
    arrays = env.at(t)
    for i, ti in enumerate(t):
        one = env.at(float(ti))
        for field in arrays.__dataclass_fields__:
            a = getattr(arrays, field)[i]
            b = getattr(one, field)
            assert np.ndim(b) == 0
            assert float(b) == pytest.approx(float(a), rel=1e-12, abs=1e-20), field


def test_environment_at_is_fast_for_scalars():
    env = _env(temperature=TimeSeries([0.0, 1e6], [200.0, 190.0], name="T"),
               psc_area=PscThresholdRule(1e-8))
    env.at(1.0)
    n = 2000
    t0 = wallclock.perf_counter()
    for i in range(n):
        env.at(float(i))
    per_call = (wallclock.perf_counter() - t0) / n
    # budget for the time loop (common practice, no source): well under a millisecond per call
    assert per_call < 5e-4


# --- trajectory files ------------------------------------------------------------

def test_trajectory_csv_iso_times(tmp_path):
    f = tmp_path / "traj.csv"
    f.write_text("# parcel\n"
                 "time,temperature_K,pressure_hPa,latitude,longitude,altitude_m\n"
                 "2026-09-01T06:00:00Z,200.0,60.0,-70.0,10.0,18500\n"
                 "\n"
                 "2026-09-01T12:00:00Z,190.0,55.0,-72.0,20.0,18800\n")
    series = load_trajectory_csv(f)
    assert set(series) == {"temperature", "pressure", "latitude", "longitude", "altitude"}
    np.testing.assert_allclose(series["pressure"].values, [6000.0, 5500.0])   # 1 hPa = 100 Pa
    env = Environment(START, ozone_column=250.0, **series)
    st = env.at(np.array([0.0, 9 * 3600.0, 86400.0]))
    np.testing.assert_allclose(st.temperature, [200.0, 195.0, 190.0])
    np.testing.assert_allclose(st.latitude, [-70.0, -71.0, -72.0])


def test_trajectory_csv_seconds(tmp_path):
    f = tmp_path / "traj.csv"
    f.write_text("time,temperature_K,pressure_Pa\n0,200,5000\n3600,198,5100\n")
    series = load_trajectory_csv(f)
    assert series["temperature"].origin is None
    np.testing.assert_allclose(series["pressure"].times_s, [0.0, 3600.0])


@pytest.mark.parametrize("text, match", [
    ("temp,temperature_K\n0,200\n", r"traj.csv:1: the first column must be 'time'"),
    ("time,temperature_C\n0,200\n", r"traj.csv:1: unknown column 'temperature_C'"),
    ("time,temperature_K\n0,200\n10,abc\n", r"traj.csv:3: column 'temperature_K': cannot read 'abc'"),
    ("time,temperature_K\n0,200\n0,190\n", r"traj.csv:3: times must increase strictly"),
    ("time,temperature_K\n0,200\n2026-09-01T00:00Z,190\n", r"traj.csv:3: time .* mixes ISO times and seconds"),
    ("time,temperature_K\n0,200,5\n", r"traj.csv:2: 3 values but 2 columns"),
    ("time,temperature_K\nnoon,200\n", r"traj.csv:2: cannot read time 'noon'"),
    ("time,pressure_Pa,pressure_hPa\n0,1,2\n", r"traj.csv:1: each quantity may appear once"),
    ("# only a comment\n", r"empty trajectory file"),
])
def test_trajectory_csv_errors_name_file_and_line(tmp_path, text, match):
    f = tmp_path / "traj.csv"
    f.write_text(text)
    with pytest.raises(DataFileError, match=match):
        load_trajectory_csv(f)


def test_trajectory_netcdf(tmp_path):
    xr = pytest.importorskip("xarray")
    times = np.array(["2026-09-01T00:00", "2026-09-01T06:00"], dtype="datetime64[ns]")
    ds = xr.Dataset({"temperature_K": ("time", [200.0, 190.0]), "pressure_hPa": ("time", [50.0, 40.0])},
                    coords={"time": times})
    path = tmp_path / "traj.nc"
    ds.to_netcdf(path)
    series = load_trajectory_netcdf(path)
    np.testing.assert_allclose(series["pressure"].values, [5000.0, 4000.0])
    assert series["temperature"].origin == times[0]
    bad = xr.Dataset({"wind": ("time", [1.0, 2.0])}, coords={"time": times})
    bad.to_netcdf(tmp_path / "bad.nc")
    with pytest.raises(DataFileError, match=r"bad.nc: unknown variable\(s\) \['wind'\]"):
        load_trajectory_netcdf(tmp_path / "bad.nc")
