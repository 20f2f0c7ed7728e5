"""Local mean solar time at the box, and times worded in UTC and local solar time.

Local mean solar time = UTC + longitude / 15 h (degrees east positive); the
equation of time (at most about 16 min) is ignored, as in
:func:`boxchem.diagnostics.ozone_loss.local_solar_time` (common practice, no
source).  Day boundaries "at local midnight" use the same shift.
"""
from __future__ import annotations

import numpy as np
import xarray as xr

__all__ = ["scenario_location", "box_longitude", "local_shift", "format_time", "TIME_BASES"]

#: what a user can ask for as the clock of days and day plots
TIME_BASES = ("utc", "local")


def box_longitude(ds: xr.Dataset) -> float | None:
    """Longitude of the box [degrees east] at the start (None when the result has none)."""
    if "longitude" in ds.variables:
        v = np.asarray(ds["longitude"].values, dtype=float).ravel()
        v = v[np.isfinite(v)]
        if v.size:
            return float(v[0])
    lon = ds.attrs.get("longitude", scenario_location(ds).get("longitude"))
    try:
        return None if lon is None else float(lon)
    except (TypeError, ValueError):
        return None


def scenario_location(ds: xr.Dataset) -> dict:
    """[location] of the scenario text recorded in the file (the run's own input), or {}."""
    text = ds.attrs.get("scenario")
    if not isinstance(text, str) or "[location]" not in text:
        return {}
    import tomllib
    try:
        return dict(tomllib.loads(text).get("location", {}))
    except tomllib.TOMLDecodeError:
        return {}





def local_shift(longitude: float | None) -> np.timedelta64:
    """UTC -> local mean solar time offset (longitude / 15 h), zero when the longitude is unknown."""
    if longitude is None:
        return np.timedelta64(0, "ns")
    return np.timedelta64(int(round(float(longitude) / 15.0 * 3600e9)), "ns")


def format_time(t, longitude: float | None) -> str:
    """'2026-09-10 00:00 UTC (11:07 local solar time)'; UTC alone when the longitude is unknown."""
    t = np.datetime64(t, "m")
    text = np.datetime_as_string(t, unit="m").replace("T", " ") + " UTC"
    if longitude is None:
        return text
    local = t + local_shift(longitude).astype("timedelta64[m]")
    same_day = local.astype("datetime64[D]") == t.astype("datetime64[D]")
    clock = np.datetime_as_string(local, unit="m")
    clock = clock[11:] if same_day else clock.replace("T", " ")
    return f"{text} ({clock} local solar time)"
