"""The range of UTC times boxchem supports, and conversions that refuse to wrap.

Times inside boxchem are ``numpy.datetime64[ns]`` (what xarray and netCDF
writers use).  That type holds 1677-09-21 to 2262-04-11 only; numpy converts
a later or earlier time without complaint into a wrapped-around one (2300-01-01
becomes 1715-06-13).  So every time a user gives (scenario start and end,
series date-times, trajectory files, command-line dates) is first read at
second resolution, where the range is practically unlimited, checked against
:data:`EARLIEST_UTC` .. :data:`LATEST_UTC`, and only then converted to
nanoseconds.  The limits are whole years inside the datetime64[ns] range, so
that a run's end (start + duration) and a day's output times stay inside too.
"""
from __future__ import annotations

import datetime as _dt

import numpy as np

from .errors import ScenarioError

__all__ = ["EARLIEST_UTC", "LATEST_UTC", "SUPPORTED_RANGE_TEXT", "TimeRangeError",
           "utc_seconds", "utc_nanoseconds", "check_utc_range", "range_problem"]

#: first supported UTC time (inclusive)
EARLIEST_UTC = np.datetime64("1678-01-01T00:00:00", "s")
#: end of the supported UTC range (exclusive): the last supported time is 2261-12-31T23:59:59
LATEST_UTC = np.datetime64("2262-01-01T00:00:00", "s")
SUPPORTED_RANGE_TEXT = "1678-01-01T00:00:00Z to 2261-12-31T23:59:59Z"


class TimeRangeError(ScenarioError):
    """A UTC time cannot be read or lies outside the supported range."""


def utc_seconds(value) -> np.datetime64:
    """A UTC time (ISO text, ``datetime``, ``date`` or ``datetime64``) -> ``datetime64[s]``.

    Raises ``ValueError``/``TypeError`` for text that is not a date-time.  No
    range check (see :func:`check_utc_range`); sub-second parts are kept by
    rounding to the nearest second only for text and datetime input.
    """
    if isinstance(value, np.datetime64):
        if np.isnat(value):
            raise ValueError("NaT is not a time")
        return value.astype("datetime64[s]")
    value = _as_datetime(value)
    if isinstance(value, _dt.datetime):
        if value.tzinfo is not None:
            value = value.astimezone(_dt.timezone.utc).replace(tzinfo=None)
        return np.datetime64(value.replace(microsecond=0), "s")
    if isinstance(value, _dt.date):
        return np.datetime64(value, "s")
    raise TypeError(f"expected a UTC date-time, got {type(value).__name__}")


def _as_datetime(value):
    """ISO text -> naive UTC ``datetime``; other values unchanged."""
    if isinstance(value, str):
        text = value.strip()
        if text[-1:] in ("Z", "z"):
            text = text[:-1] + "+00:00"
        value = _dt.datetime.fromisoformat(text)
    if isinstance(value, _dt.datetime) and value.tzinfo is not None:
        value = value.astimezone(_dt.timezone.utc).replace(tzinfo=None)
    return value


def range_problem(t_s: np.datetime64, what: str = "time") -> str | None:
    """A message when ``t_s`` (datetime64, any unit) lies outside the supported range, else None."""
    t = np.datetime64(t_s, "s")
    if EARLIEST_UTC <= t < LATEST_UTC:
        return None
    return (f"{what} {np.datetime_as_string(t, unit='s')}Z is outside the supported range "
            f"{SUPPORTED_RANGE_TEXT} (times are held as datetime64[ns] internally)")


def check_utc_range(t_s: np.datetime64, where: str, what: str = "time") -> None:
    """Raise :class:`TimeRangeError` naming ``where`` when ``t_s`` is outside the range."""
    problem = range_problem(t_s, what)
    if problem:
        raise TimeRangeError(f"{where}: {problem}")


def utc_nanoseconds(value, where: str) -> np.datetime64:
    """A UTC time -> ``datetime64[ns]``, refusing unreadable text and times outside the range.

    Errors (:class:`TimeRangeError`) name ``where`` (a key path or option).
    """
    try:
        value = _as_datetime(value)
        t = utc_seconds(value)
    except (ValueError, TypeError, OverflowError):
        raise TimeRangeError(f"{where}: cannot read {value!r} as a UTC date-time; write e.g. "
                             f"\"2026-09-01T00:00:00Z\"") from None
    check_utc_range(t, where)
    if isinstance(value, np.datetime64):
        return value.astype("datetime64[ns]")
    if isinstance(value, _dt.datetime) and value.microsecond:
        return t.astype("datetime64[ns]") + np.timedelta64(value.microsecond * 1000, "ns")
    return t.astype("datetime64[ns]")
