"""The box's environment: solar geometry, air, and time-dependent conditions.

See docs/environment.md for how temperature, pressure, position, surface
areas and the ozone column can be given, the PSC threshold rule and the
horizon rule.
"""
from __future__ import annotations

from .atmosphere import (
    BOLTZMANN_J_PER_K,
    air_number_density,
    altitude_from_pressure,
    geometric_altitude,
    geopotential_altitude,
    ozone_column_above,
    ozone_profile,
    standard_atmosphere,
)
from .history import (
    ICE_FROST_POINT_K,
    NAT_EXISTENCE_TEMPERATURE_K,
    Environment,
    EnvironmentState,
    PscThresholdRule,
    TimeSeries,
    load_trajectory_csv,
    load_trajectory_netcdf,
    parse_utc,
)
from .solar import (
    EARTH_RADIUS_M,
    chapman_air_mass,
    daylight_hours,
    earth_sun_distance,
    earth_sun_distance_factor,
    equation_of_time,
    horizon_crossings,
    horizon_zenith_angle,
    is_sunlit,
    solar_declination,
    solar_zenith_angle,
    sun_events,
)

__all__ = [
    "BOLTZMANN_J_PER_K", "air_number_density", "altitude_from_pressure", "geometric_altitude",
    "geopotential_altitude", "ozone_column_above", "ozone_profile", "standard_atmosphere",
    "ICE_FROST_POINT_K", "NAT_EXISTENCE_TEMPERATURE_K", "Environment", "EnvironmentState",
    "PscThresholdRule", "TimeSeries", "load_trajectory_csv", "load_trajectory_netcdf", "parse_utc",
    "EARTH_RADIUS_M", "chapman_air_mass", "daylight_hours", "earth_sun_distance",
    "earth_sun_distance_factor", "equation_of_time", "horizon_crossings", "horizon_zenith_angle",
    "is_sunlit", "solar_declination", "solar_zenith_angle", "sun_events",
]
