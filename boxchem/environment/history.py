"""Time-dependent conditions of the box: time series, the PSC/ice threshold rule, Environment.

The scenario loader builds an :class:`Environment` from constants, inline
tables or trajectory files; the time loop calls ``env.at(t)`` every step, so
``at`` is kept cheap for scalar ``t`` (tens of microseconds, no pandas).

Times inside an Environment are seconds since the run start.  A
:class:`TimeSeries` may carry an ``origin`` (the UTC time of its ``t = 0``,
as for trajectory files with ISO times); the Environment shifts it onto the
run's clock.
"""
from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import DataFileError, ScenarioError
from . import solar
from .psc import STATE_RULES, CompositionHistory
from .sts import StsEquilibriumRule
from .atmosphere import (BOLTZMANN_J_PER_K, air_number_density, altitude_from_pressure,
                         standard_atmosphere)

__all__ = [
    "TimeSeries",
    "PscThresholdRule",
    "NAT_EXISTENCE_TEMPERATURE_K",
    "ICE_FROST_POINT_K",
    "Environment",
    "EnvironmentState",
    "load_trajectory_csv",
    "load_trajectory_netcdf",
    "parse_utc",
]

#: Typical existence temperature of nitric acid trihydrate (NAT) in the polar
#: lower stratosphere [K]: about 195 K near 50 hPa for 5 ppmv H2O and 10 ppbv
#: HNO3 (Hanson & Mauersberger 1988, GRL 15, 855, doi:10.1029/GL015i008p00855;
#: value recalled from memory).
NAT_EXISTENCE_TEMPERATURE_K = 195.0
#: Typical ice frost point in the polar lower stratosphere [K]: about 188 K
#: near 50 hPa for 5 ppmv H2O (ice vapour pressure of Marti & Mauersberger
#: 1993, GRL 20, 363, doi:10.1029/93GL00105; value recalled from memory).
ICE_FROST_POINT_K = 188.0


#: k_B [J K-1] times 1e6 cm3 m-3: n [cm-3] = p [Pa] / (T [K] * _BOLTZMANN_CM3)
_BOLTZMANN_CM3 = BOLTZMANN_J_PER_K * 1.0e6


def parse_utc(value, where: str = "time") -> np.datetime64:
    """A UTC time (``datetime64`` or ISO text such as ``"2026-09-01T00:00:00Z"``) -> datetime64[ns].

    Times outside :data:`boxchem.timerange.SUPPORTED_RANGE_TEXT` are errors
    naming ``where`` (never wrapped around).
    """
    from ..timerange import TimeRangeError, utc_nanoseconds
    if isinstance(value, np.datetime64) and np.isnat(value):
        raise ScenarioError(f"{where}: expected a UTC time, got NaT")
    if not isinstance(value, (np.datetime64, str)):
        import datetime as _dt
        if not isinstance(value, _dt.datetime):
            raise ScenarioError(f"{where}: expected a UTC time (ISO text or datetime64), got {value!r}")
    try:
        return utc_nanoseconds(value, where)
    except TimeRangeError as exc:
        if "cannot read" in str(exc):
            raise ScenarioError(
                f"{where}: cannot read {value!r} as a UTC time; expected ISO 8601 such as "
                "\"2026-09-01T00:00:00Z\"") from None
        raise


class TimeSeries:
    """Values given at times, linearly interpolated in time.

    Parameters
    ----------
    times_s : array_like
        Strictly increasing times [s] (seconds since the run start, or since
        ``origin`` when given).
    values : array_like
        Finite values at those times, same length.
    name : str
        Used in error messages (a key path such as ``environment.temperature``).
    origin : datetime64, optional
        UTC time of ``t = 0`` of ``times_s``; ``None`` means the run start.

    Outside the given times the first and last values are held constant
    (no extrapolation).  A single point is a constant.
    """

    __slots__ = ("times_s", "values", "name", "origin")

    def __init__(self, times_s, values, name: str = "series", origin=None):
        t = np.asarray(times_s, dtype=float)
        v = np.asarray(values, dtype=float)
        if t.ndim != 1 or v.ndim != 1:
            raise ScenarioError(f"{name}: times and values must be 1-D, got shapes {t.shape} and {v.shape}")
        if t.size == 0:
            raise ScenarioError(f"{name}: a time series needs at least one point, got none")
        if t.size != v.size:
            raise ScenarioError(f"{name}: {t.size} times but {v.size} values; give one value per time")
        bad = np.nonzero(~np.isfinite(t))[0]
        if bad.size:
            raise ScenarioError(f"{name}: time[{bad[0]}] is {t[bad[0]]}; times must be finite seconds")
        bad = np.nonzero(~np.isfinite(v))[0]
        if bad.size:
            raise ScenarioError(f"{name}: value[{bad[0]}] is {v[bad[0]]} (at t = {t[bad[0]]:g} s); values must be finite")
        steps = np.diff(t)
        bad = np.nonzero(~(steps > 0.0))[0]
        if bad.size:
            i = bad[0] + 1
            raise ScenarioError(
                f"{name}: times must increase strictly; time[{i}] = {t[i]:g} s follows time[{i - 1}] = {t[i - 1]:g} s")
        self.times_s = t
        self.values = v
        self.name = name
        self.origin = None if origin is None else parse_utc(origin, f"{name}: origin")

    def __call__(self, t):
        """Value at ``t`` [s] (scalar or array), linear in time, held constant outside."""
        return np.interp(t, self.times_s, self.values)

    def __len__(self) -> int:
        return self.times_s.size

    def __repr__(self) -> str:
        origin = "" if self.origin is None else f", origin={self.origin}"
        return (f"TimeSeries({self.name!r}, {self.times_s.size} points, "
                f"t = {self.times_s[0]:g}..{self.times_s[-1]:g} s{origin})")

    def relative_to(self, start) -> "TimeSeries":
        """The same series with times in seconds since ``start`` (UTC); unchanged without an origin."""
        if self.origin is None:
            return self
        shift = (self.origin - parse_utc(start, f"{self.name}: start")) / np.timedelta64(1, "s")
        return TimeSeries(self.times_s + shift, self.values, self.name)

    def map(self, function, name: str | None = None) -> "TimeSeries":
        """A series with ``function(values)`` at the same times and origin."""
        out = TimeSeries(self.times_s, function(self.values), name or self.name)
        out.origin = self.origin
        return out


@dataclass(frozen=True)
class PscThresholdRule:
    """PSC (or ice) surface area density that appears as the air cools below a threshold.

    area(T) = area_cm2_cm3 * s(x),  x = (threshold_K - T) / width_K clipped to [0, 1],
    s(x) = 3 x^2 - 2 x^3 (smoothstep: continuous with a continuous first
    derivative, so the chemistry's right-hand side has no jump).

    So there is no PSC area at T >= threshold_K and the full area at
    T <= threshold_K - width_K.  The default threshold is the typical NAT
    existence temperature of about 195 K (Hanson & Mauersberger 1988); use
    ``ICE_FROST_POINT_K`` (about 188 K) for ice clouds (``Environment(ice_area=
    PscThresholdRule(area, threshold_K=ICE_FROST_POINT_K))``).  The default width of
    1 K is a numerical choice (common practice, no source).

    Parameters
    ----------
    area_cm2_cm3 : float
        Surface area density when fully formed [cm2 cm-3].
    threshold_K : float
        Temperature [K] below which PSCs start to form.
    width_K : float
        Temperature range [K] over which the area ramps up.
    """

    area_cm2_cm3: float
    threshold_K: float = NAT_EXISTENCE_TEMPERATURE_K
    width_K: float = 1.0

    def __post_init__(self):
        for key, value, ok, valid in (
            ("area_cm2_cm3", self.area_cm2_cm3, lambda v: v >= 0.0, "a surface area density >= 0 [cm2 cm-3]"),
            ("threshold_K", self.threshold_K, lambda v: v > 0.0, "a temperature > 0 K"),
            ("width_K", self.width_K, lambda v: v > 0.0, "a temperature range > 0 K"),
        ):
            if not (isinstance(value, (int, float)) and np.isfinite(value) and ok(value)):
                raise ScenarioError(f"PscThresholdRule.{key}: expected {valid}, got {value!r}")

    def __call__(self, temperature_K):
        """PSC surface area density [cm2 cm-3] at temperature [K]."""
        if isinstance(temperature_K, float):  # fast path for the time loop (np.float64 included)
            x = min(1.0, max(0.0, (self.threshold_K - temperature_K) / self.width_K))
            return np.float64(self.area_cm2_cm3 * x * x * (3.0 - 2.0 * x))
        x = np.clip((self.threshold_K - temperature_K) / self.width_K, 0.0, 1.0)
        return self.area_cm2_cm3 * x * x * (3.0 - 2.0 * x)


@dataclass(slots=True)
class EnvironmentState:
    """Conditions of the box at given times (arrays shaped like the times, or scalars)."""

    time_s: object              # s since the run start
    temperature: object         # K
    pressure: object            # Pa
    air_density: object         # cm-3
    latitude: object            # degrees north
    longitude: object           # degrees east, in [-180, 180)
    altitude: object            # m
    solar_zenith_angle: object  # degrees (geometric)
    horizon_zenith_angle: object  # degrees
    ozone_column: object        # DU (overhead column used for photolysis)
    psc_area: object            # cm2 cm-3
    sulfate_area: object        # cm2 cm-3
    ice_area: object            # cm2 cm-3 (ice clouds, below the frost point)
    distance_factor: object     # (1 AU / r)^2

    @property
    def sunlit(self):
        """True where the sun is above the box's horizon."""
        return np.asarray(self.solar_zenith_angle) < np.asarray(self.horizon_zenith_angle)


def _check_quantity(name, value, *, low=None, high=None, low_inclusive=True, valid="", allow_rule=False):
    """Validate a float / TimeSeries argument; returns a float or a TimeSeries."""
    if allow_rule and isinstance(value, (PscThresholdRule, *STATE_RULES)):
        return value
    if isinstance(value, TimeSeries):
        values = value.values
    elif isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool):
        values = np.array([float(value)])
        value = float(value)
    else:
        kinds = "a number, a TimeSeries" + (" or a PscThresholdRule" if allow_rule else "")
        raise ScenarioError(f"{name}: expected {kinds}, got {type(value).__name__} {value!r}")
    bad = ~np.isfinite(values)
    if low is not None:
        bad |= (values < low) if low_inclusive else (values <= low)
    if high is not None:
        bad |= values > high
    if np.any(bad):
        where = "" if not isinstance(value, TimeSeries) else f" (series {value.name!r}, index {np.nonzero(bad)[0][0]})"
        raise ScenarioError(f"{name}: got {float(values[bad][0])!r}{where}; expected {valid}")
    return value


def _wrap_longitude(lon):
    return np.mod(lon + 180.0, 360.0) - 180.0


class Environment:
    """Time-dependent conditions of the box.

    Parameters (keyword-only except ``start``)
    ------------------------------------------
    start : datetime64 or ISO text
        UTC time of the run start (t = 0).
    temperature : float or TimeSeries
        Temperature [K], > 0.
    latitude, longitude : float or TimeSeries
        Position [degrees north, degrees east]; latitude in [-90, 90].
        Longitude series are unwrapped before interpolation, so a parcel
        crossing the date line moves the short way.
    pressure : float or TimeSeries, optional
        Pressure [Pa], > 0.
    altitude : float or TimeSeries, optional
        Geometric altitude [m].  At least one of pressure and altitude is
        needed.  Without a pressure, the pressure is that of the U.S.
        Standard Atmosphere 1976 at the altitude (a series is interpolated
        in log-pressure).  Without an altitude, the altitude (used for the
        horizon) is the standard-atmosphere altitude of the pressure.
    ozone_column : float or TimeSeries
        Overhead ozone column [DU], >= 0.
    psc_area : float, TimeSeries or PscThresholdRule
        PSC (NAT/STS) surface area density [cm2 cm-3], >= 0 (default 0).
    sulfate_area : float or TimeSeries
        Sulfate aerosol surface area density [cm2 cm-3], >= 0 (default 0).
    ice_area : float, TimeSeries or PscThresholdRule
        Ice PSC surface area density [cm2 cm-3], >= 0 (default 0); a rule
        usually takes ``threshold_K=ICE_FROST_POINT_K``.  Surface reactions
        with ``on=ice`` (and ``on=all``) see it.

    Time series carrying an ``origin`` are moved onto the run's clock.
    """

    def __init__(self, start, *, temperature, latitude, longitude, ozone_column,
                 pressure=None, altitude=None, psc_area=0.0, sulfate_area=0.0, ice_area=0.0):
        self.start = parse_utc(start, "start")
        self._start_days = float(solar.days_since_j2000(self.start))

        def prepared(name, value, **kw):
            q = _check_quantity(name, value, **kw)
            return q.relative_to(self.start) if isinstance(q, TimeSeries) else q

        self.temperature = prepared("temperature", temperature, low=0.0, low_inclusive=False,
                                    valid="a temperature > 0 K")
        self.latitude = prepared("latitude", latitude, low=-90.0, high=90.0,
                                 valid="a latitude in [-90, 90] degrees north")
        lon = prepared("longitude", longitude, valid="a finite longitude in degrees east")
        if isinstance(lon, TimeSeries):
            lon = lon.map(lambda v: np.unwrap(v, period=360.0))
        self.longitude = lon
        self.ozone_column = prepared("ozone_column", ozone_column, low=0.0,
                                     valid="an ozone column >= 0 DU")
        self.psc_area = prepared("psc_area", psc_area, low=0.0, allow_rule=True,
                                 valid="a surface area density >= 0 cm2 cm-3")
        # a liquid STS rule (sts.py) or a plain area; the threshold rule is for PSCs only
        self.sulfate_area = (sulfate_area if isinstance(sulfate_area, StsEquilibriumRule) else
                             prepared("sulfate_area", sulfate_area, low=0.0,
                                      valid="a surface area density >= 0 cm2 cm-3"))
        self.ice_area = prepared("ice_area", ice_area, low=0.0, allow_rule=True,
                                 valid="a surface area density >= 0 cm2 cm-3")
        # mole fractions the time loop records for composition-dependent area rules (psc.py)
        needs = sorted({s for a in (self.psc_area, self.ice_area, self.sulfate_area) if isinstance(a, STATE_RULES)
                        for s in a.needs})
        self.composition = CompositionHistory(needs) if needs else None
        if pressure is None and altitude is None:
            raise ScenarioError("pressure/altitude: give a pressure [Pa], an altitude [m], or both")
        if pressure is not None:
            self.pressure = prepared("pressure", pressure, low=0.0, low_inclusive=False,
                                     valid="a pressure > 0 Pa")
        if altitude is not None:
            self.altitude = prepared("altitude", altitude, low=-5000.0, high=86000.0 if pressure is None else None,
                                     valid="an altitude in metres"
                                     + (" within the standard atmosphere, -5000..86000 m" if pressure is None else ""))
        else:
            self.altitude = self._altitude_from(self.pressure)
        self._log_pressure = None
        if pressure is None:
            if isinstance(self.altitude, TimeSeries):
                self.pressure = None
                self._log_pressure = self.altitude.map(lambda z: np.log(standard_atmosphere(z)[0]),
                                                       "pressure (standard atmosphere)")
            else:
                self.pressure = float(standard_atmosphere(self.altitude)[0])
        self._horizon = (float(solar.horizon_zenith_angle(self.altitude))
                         if not isinstance(self.altitude, TimeSeries) else None)

    @staticmethod
    def _altitude_from(pressure):
        try:
            if isinstance(pressure, TimeSeries):
                return pressure.map(altitude_from_pressure, "altitude (standard atmosphere)")
            return float(altitude_from_pressure(pressure))
        except ValueError as exc:
            raise ScenarioError(f"pressure: no standard-atmosphere altitude for it ({exc}); "
                                "give the altitude as well") from None

    def at(self, t) -> EnvironmentState:
        """Conditions at ``t`` [s since the run start] (scalar or array).

        For scalar ``t`` the fields are numpy scalars; for an array they are
        arrays of the same shape.
        """
        if isinstance(t, (float, int, np.floating, np.integer)) or np.ndim(t) == 0:
            return self._at_scalar(float(t))
        t = np.asarray(t, dtype=float)

        def value(q):
            if isinstance(q, TimeSeries):
                return np.interp(t, q.times_s, q.values)
            return np.full(t.shape, q)

        T = value(self.temperature)
        if self._log_pressure is not None:
            p = np.exp(np.interp(t, self._log_pressure.times_s, self._log_pressure.values))
        else:
            p = value(self.pressure)
        lat = value(self.latitude)
        lon = value(self.longitude)
        z = value(self.altitude)
        sza, dist = solar._zenith_and_distance_factor(self._start_days + t / 86400.0, lat, lon)
        hz = np.full(t.shape, self._horizon) if self._horizon is not None else solar.horizon_zenith_angle(z)
        psc = self._area(self.psc_area, t, T, p, value)
        ice = self._area(self.ice_area, t, T, p, value)
        return EnvironmentState(
            time_s=t, temperature=T, pressure=p, air_density=air_number_density(p, T),
            latitude=lat, longitude=_wrap_longitude(lon), altitude=z,
            solar_zenith_angle=sza, horizon_zenith_angle=hz,
            ozone_column=value(self.ozone_column), psc_area=psc,
            sulfate_area=self._area(self.sulfate_area, t, T, p, value), ice_area=ice, distance_factor=dist)

    def _area(self, rule, t, T, p, value):
        """A surface area [cm2 cm-3]: a threshold rule of T, a composition rule of
        (T, p, the recorded mole fractions at t), or a constant/series."""
        if isinstance(rule, PscThresholdRule):
            return rule(T)
        if isinstance(rule, STATE_RULES):
            return rule(T, p, self.composition.at(t))
        return value(rule)

    def _at_scalar(self, t: float) -> EnvironmentState:
        """``at`` for one time, in float arithmetic (about ten microseconds per call)."""
        def value(q):
            if q.__class__ is float:
                return q
            return float(np.interp(t, q.times_s, q.values))

        T = value(self.temperature)
        if self._log_pressure is not None:
            p = math.exp(np.interp(t, self._log_pressure.times_s, self._log_pressure.values))
        else:
            p = value(self.pressure)
        lat = value(self.latitude)
        lon = value(self.longitude)
        z = value(self.altitude)
        sza, dist = solar._zenith_and_distance_factor_scalar(self._start_days + t / 86400.0, lat, lon)
        if self._horizon is not None:
            hz = self._horizon
        else:  # horizon_zenith_angle for one altitude
            hz = 90.0 + math.degrees(math.acos(solar.EARTH_RADIUS_M / (solar.EARTH_RADIUS_M + max(z, 0.0))))
        psc = (float(self.psc_area(T)) if self.psc_area.__class__ is PscThresholdRule
               else float(self._area(self.psc_area, t, T, p, value)))
        ice = (float(self.ice_area(T)) if self.ice_area.__class__ is PscThresholdRule
               else float(self._area(self.ice_area, t, T, p, value)))
        f64 = np.float64
        return EnvironmentState(
            f64(t), f64(T), f64(p), f64(p / (T * _BOLTZMANN_CM3)), f64(lat),
            f64((lon + 180.0) % 360.0 - 180.0), f64(z), f64(sza), f64(hz),
            f64(value(self.ozone_column)), f64(psc), f64(self._area(self.sulfate_area, t, T, p, value)),
            f64(ice), f64(dist))

    def solar_zenith_angle(self, t):
        """Solar zenith angle [deg] at ``t`` [s since start] along the box's path."""
        t = np.asarray(t, dtype=float)

        def value(q):
            return np.interp(t, q.times_s, q.values) if isinstance(q, TimeSeries) else q

        return solar._zenith_from_days(self._start_days + t / 86400.0,
                                       value(self.latitude), value(self.longitude))

    def horizon_zenith_angle(self, t):
        """Horizon zenith angle [deg] of the box at ``t`` [s since start]."""
        if self._horizon is not None:
            return np.full(np.shape(t), self._horizon)
        return solar.horizon_zenith_angle(np.interp(t, self.altitude.times_s, self.altitude.values))

    def horizon_crossings(self, t0: float, t1: float, *, sample_s: float = 600.0,
                          tolerance_s: float = 1.0) -> np.ndarray:
        """Sorted times [s since start] in (t0, t1) where the sun crosses the box's horizon.

        Sunrise and sunset at the box, for a fixed or moving box: the
        difference sza - horizon is sampled every ``sample_s`` and each sign
        change refined with Brent's method to ``tolerance_s`` (see
        ``solar.horizon_crossings``).
        """
        return solar.horizon_crossings(self.solar_zenith_angle, t0, t1, self.horizon_zenith_angle,
                                       sample_s=sample_s, tolerance_s=tolerance_s)

    def __repr__(self) -> str:
        def show(q):
            return repr(q) if not isinstance(q, float) else f"{q:g}"
        return (f"Environment(start={self.start}, temperature={show(self.temperature)}, "
                f"pressure={show(self.pressure) if self.pressure is not None else 'standard atmosphere'}, "
                f"latitude={show(self.latitude)}, longitude={show(self.longitude)}, "
                f"altitude={show(self.altitude)})")


# --- trajectory files --------------------------------------------------------

#: trajectory column -> (Environment argument, factor to internal units)
_TRAJECTORY_COLUMNS = {
    "temperature_K": ("temperature", 1.0),
    "pressure_Pa": ("pressure", 1.0),
    "pressure_hPa": ("pressure", 100.0),
    "latitude": ("latitude", 1.0),
    "longitude": ("longitude", 1.0),
    "altitude_m": ("altitude", 1.0),
}


def _parse_time_cell(text: str):
    """(seconds, None) for a number, (None, datetime64) for ISO UTC text, (None, None) otherwise."""
    try:
        return float(text), None
    except ValueError:
        pass
    try:
        return None, parse_utc(text)
    except ScenarioError as exc:
        if "outside the supported range" in str(exc):
            raise
        return None, None


#: file suffixes read as netCDF trajectories; any other suffix is read as CSV
NETCDF_SUFFIXES = (".nc", ".nc4", ".cdf", ".netcdf")


def load_trajectory(path) -> dict[str, TimeSeries]:
    """Read a parcel trajectory file, netCDF (by suffix, see ``NETCDF_SUFFIXES``) or CSV.

    Same columns/variables and return value as :func:`load_trajectory_csv`
    and :func:`load_trajectory_netcdf`.
    """
    if Path(path).suffix.lower() in NETCDF_SUFFIXES:
        return load_trajectory_netcdf(path)
    return load_trajectory_csv(path)


def load_trajectory_csv(path) -> dict[str, TimeSeries]:
    """Read a parcel trajectory CSV into time series keyed by Environment argument.

    Format: a header line naming the columns, then one line per time;
    lines starting with ``#`` and blank lines are skipped.  Columns:
    ``time`` (required; ISO 8601 UTC such as ``2026-09-01T06:00:00Z``, or
    seconds since the run start) and any of ``temperature_K``,
    ``pressure_Pa`` or ``pressure_hPa``, ``latitude`` [deg N],
    ``longitude`` [deg E], ``altitude_m``.

    Returns a dict with keys among ``temperature``, ``pressure``,
    ``latitude``, ``longitude``, ``altitude`` (pressure in Pa).  With ISO
    times the series carry the first time as ``origin``.  Errors name
    ``file:line``.
    """
    from ..textio import read_text_file, split_lines
    path = Path(path)
    text = read_text_file(path, DataFileError, "trajectory file")
    rows = [(n, row) for n, row in enumerate(csv.reader(split_lines(text)), start=1)
            if row and any(c.strip() for c in row) and not row[0].lstrip().startswith("#")]
    if not rows:
        raise DataFileError(f"{path}: empty trajectory file; expected a header line starting with 'time'")
    header_line, header = rows[0]
    names = [c.strip() for c in header]
    if not names or names[0] != "time":
        raise DataFileError(f"{path}:{header_line}: the first column must be 'time', got {names[0]!r}")
    for col, name in enumerate(names[1:], start=2):
        if name not in _TRAJECTORY_COLUMNS:
            raise DataFileError(
                f"{path}:{header_line}: unknown column {name!r} (column {col}); expected any of "
                f"{', '.join(_TRAJECTORY_COLUMNS)}")
    if len(set(names)) != len(names) or ("pressure_Pa" in names and "pressure_hPa" in names):
        raise DataFileError(f"{path}:{header_line}: each quantity may appear once (one pressure column), got {names}")
    if len(names) == 1:
        raise DataFileError(f"{path}:{header_line}: no data columns; expected any of {', '.join(_TRAJECTORY_COLUMNS)}")
    if len(rows) < 2:
        raise DataFileError(f"{path}: no data lines after the header")

    seconds, stamps, lines = [], [], []
    data = np.empty((len(rows) - 1, len(names) - 1))
    for k, (line, row) in enumerate(rows[1:]):
        cells = [c.strip() for c in row]
        if len(cells) != len(names):
            raise DataFileError(f"{path}:{line}: {len(cells)} values but {len(names)} columns in the header")
        try:
            s, stamp = _parse_time_cell(cells[0])
        except ScenarioError as exc:
            raise DataFileError(f"{path}:{line}: {str(exc).split(': ', 1)[-1]}") from None
        if s is None and stamp is None:
            raise DataFileError(f"{path}:{line}: cannot read time {cells[0]!r}; expected ISO UTC "
                                "(2026-09-01T06:00:00Z) or seconds")
        if (stamps and stamp is None) or (seconds and s is None):
            raise DataFileError(f"{path}:{line}: time {cells[0]!r} mixes ISO times and seconds; use one kind")
        (seconds if s is not None else stamps).append(s if s is not None else stamp)
        lines.append(line)
        for j, cell in enumerate(cells[1:]):
            try:
                x = float(cell)
            except ValueError:
                x = np.nan
            if not np.isfinite(x):
                raise DataFileError(f"{path}:{line}: column {names[j + 1]!r}: cannot read {cell!r} as a finite number")
            data[k, j] = x

    if stamps:
        origin = stamps[0]
        times = np.array([(s - origin) / np.timedelta64(1, "s") for s in stamps])
    else:
        origin = None
        times = np.array(seconds)
    steps = np.diff(times)
    if np.any(steps <= 0):
        i = int(np.nonzero(steps <= 0)[0][0]) + 1
        raise DataFileError(f"{path}:{lines[i]}: times must increase strictly; this time is not after "
                            f"the one on line {lines[i - 1]}")
    out = {}
    for j, name in enumerate(names[1:]):
        key, factor = _TRAJECTORY_COLUMNS[name]
        out[key] = TimeSeries(times, data[:, j] * factor, name=f"{path}:{name}", origin=origin)
    return out


def load_trajectory_netcdf(path) -> dict[str, TimeSeries]:
    """Read a parcel trajectory netCDF file into time series keyed by Environment argument.

    The file holds a ``time`` coordinate (CF-decoded UTC times, or numbers in
    seconds since the run start) and any of the variables named as the CSV
    columns of ``load_trajectory_csv`` (``temperature_K``, ``pressure_Pa`` or
    ``pressure_hPa``, ``latitude``, ``longitude``, ``altitude_m``), each
    along ``time`` only.
    """
    import xarray as xr

    path = Path(path)
    import warnings
    try:
        # times decoded as cftime objects when outside datetime64[ns] (never wrapped);
        # refused below with the supported range, so xarray's own warning is noise
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ds = xr.open_dataset(path, decode_times=xr.coders.CFDatetimeCoder(use_cftime=None)
                                 if hasattr(xr, "coders") else True)
    except (OSError, ValueError, OverflowError) as exc:
        raise DataFileError(f"{path}: cannot open the trajectory file as netCDF ({exc})") from None
    with ds:
        if "time" not in ds.coords and "time" not in ds.variables:
            raise DataFileError(f"{path}: no 'time' variable; expected a time coordinate")
        time = ds["time"].values
        if time.dtype == object and time.size and hasattr(time.flat[0], "calendar"):
            from ..timerange import SUPPORTED_RANGE_TEXT
            raise DataFileError(f"{path}: time: {time.flat[0]} .. {time.flat[-1]} lies outside the "
                                f"supported range {SUPPORTED_RANGE_TEXT} (or uses a non-standard "
                                f"calendar); give times inside it, or numbers in seconds")
        if time.size == 0:
            raise DataFileError(f"{path}: the time coordinate is empty")
        if np.issubdtype(time.dtype, np.datetime64):
            origin = time[0].astype("datetime64[ns]")
            times = (time.astype("datetime64[ns]") - origin) / np.timedelta64(1, "s")
        else:
            origin = None
            times = np.asarray(time, dtype=float)
        found = [v for v in ds.data_vars if v in _TRAJECTORY_COLUMNS]
        unknown = [v for v in ds.data_vars if v not in _TRAJECTORY_COLUMNS]
        if unknown:
            raise DataFileError(f"{path}: unknown variable(s) {unknown}; expected any of {', '.join(_TRAJECTORY_COLUMNS)}")
        if not found:
            raise DataFileError(f"{path}: no trajectory variables; expected any of {', '.join(_TRAJECTORY_COLUMNS)}")
        out = {}
        for name in found:
            var = ds[name]
            if var.dims != ("time",):
                raise DataFileError(f"{path}: variable {name!r} has dimensions {var.dims}; expected ('time',)")
            key, factor = _TRAJECTORY_COLUMNS[name]
            if key in out:
                raise DataFileError(f"{path}: more than one pressure variable; give pressure_Pa or pressure_hPa")
            try:
                out[key] = TimeSeries(times, var.values * factor, name=f"{path}:{name}", origin=origin)
            except ScenarioError as exc:
                raise DataFileError(str(exc)) from None
    return out
