"""Solar geometry at the box: position of the sun, horizon, air mass, sunrise/sunset.

All functions are pure and work on numpy arrays (broadcasting).  Times are UTC
``numpy.datetime64`` values; angles are degrees; distances are metres.

Solar coordinates
-----------------
The sun's apparent ecliptic longitude, the obliquity of the ecliptic, the
right ascension and declination follow the low-accuracy solar coordinates of
Meeus (1998), *Astronomical Algorithms*, 2nd ed., Willmann-Bell, chapter 25
(eqs. 25.2-25.8) with the mean obliquity of eq. 22.2 and the Greenwich mean
sidereal time of eq. 12.4.  The local hour angle is the apparent sidereal time
(mean sidereal time plus the nutation in right ascension, Meeus ch. 12) plus
the longitude minus the right ascension; the zenith angle follows from the
spherical-astronomy relation cos(chi) = sin(phi) sin(delta) + cos(phi)
cos(delta) cos(H) (Meeus eq. 13.6).  Meeus states an accuracy of 0.01 degree
for the solar coordinates; against the NREL Solar Position Algorithm (Reda &
Andreas 2004, Solar Energy 76, 577, doi:10.1016/j.solener.2003.12.003, as
implemented in pvlib) the geometric zenith angle differs by at most about
0.012 degree over 1950-2100 (tests/test_solar.py).  Universal time is used in
place of terrestrial time: the difference (under 4 minutes over 1950-2100)
moves the sun along the ecliptic by under 0.003 degree.

No atmospheric refraction is applied: the zenith angle is geometric.

Horizon of an elevated box
--------------------------
A box at altitude z above a spherical Earth of radius R sees the sun until the
zenith angle reaches 90 deg + the dip angle arccos(R / (R + z)) (elementary
spherical geometry; common practice, no source).  R is the IUGG mean Earth
radius R1 = 6371.0088 km (Moritz 2000, "Geodetic Reference System 1980",
J. Geodesy 74, 128, doi:10.1007/s001900050278).
"""
from __future__ import annotations

import math
from types import SimpleNamespace
from typing import Callable

import numpy as np

__all__ = [
    "EARTH_RADIUS_M",
    "solar_zenith_angle",
    "solar_declination",
    "equation_of_time",
    "earth_sun_distance",
    "earth_sun_distance_factor",
    "horizon_zenith_angle",
    "is_sunlit",
    "chapman_air_mass",
    "sun_events",
    "daylight_hours",
    "horizon_crossings",
    "days_since_j2000",
]

#: IUGG mean Earth radius R1 [m] (Moritz 2000, J. Geodesy 74, 128).
EARTH_RADIUS_M = 6371008.8

#: The epoch J2000.0 = 2000-01-01 12:00 (Meeus 1998, ch. 21), used as UTC here.
_J2000 = np.datetime64("2000-01-01T12:00:00", "ns")
_NS_PER_DAY = 86400.0e9
_SECONDS_PER_DAY = 86400.0
_DEG = np.pi / 180.0


def days_since_j2000(time) -> np.ndarray:
    """Days [d] from J2000.0 (2000-01-01 12:00 UTC) to the UTC ``time`` (datetime64, any shape); NaN for NaT."""
    t = np.asarray(time)
    if not np.issubdtype(t.dtype, np.datetime64):
        raise TypeError(
            f"time: expected numpy datetime64 values (UTC), got dtype {t.dtype}; "
            "use e.g. np.datetime64('2026-09-01T12:00')")
    if np.datetime_data(t.dtype)[0] != "ns":
        # microseconds hold +-290,000 years: a far date is computed, not wrapped around
        t = t.astype("datetime64[us]")
        days = (t - _J2000.astype("datetime64[us]")).astype(np.float64) / (_NS_PER_DAY / 1000.0)
    else:
        days = (t - _J2000).astype(np.float64) / _NS_PER_DAY
    return np.where(np.isnat(t), np.nan, days) if t.ndim else (np.nan if np.isnat(t) else days)


# The same formulas serve arrays (numpy) and single floats (math, about ten
# times faster per call: the time loop evaluates one time per step).
_NUMPY = SimpleNamespace(sin=np.sin, cos=np.cos, atan2=np.arctan2, asin=np.arcsin)
_MATH = SimpleNamespace(sin=math.sin, cos=math.cos, atan2=math.atan2, asin=math.asin)


def _solar_coordinates(d, m=_NUMPY):
    """Sun's apparent coordinates at ``d`` days since J2000.0 (Meeus 1998, ch. 25).

    ``m`` supplies sin, cos, atan2 and asin (numpy for arrays, math for floats).

    Returns right ascension alpha [deg], declination delta [deg], distance
    r [AU], apparent sidereal time at Greenwich theta [deg], and the mean
    longitude L0 [deg] (for the equation of time).
    """
    T = d / 36525.0                                      # Julian centuries (eq. 25.1)
    L0 = 280.46646 + T * (36000.76983 + 0.0003032 * T)  # mean longitude (eq. 25.2)
    M = 357.52911 + T * (35999.05029 - 0.0001537 * T)   # mean anomaly (eq. 25.3)
    e = 0.016708634 - T * (0.000042037 + 0.0000001267 * T)  # eccentricity (eq. 25.4)
    Mr = M * _DEG
    C = ((1.914602 - T * (0.004817 + 0.000014 * T)) * m.sin(Mr)
         + (0.019993 - 0.000101 * T) * m.sin(2.0 * Mr)
         + 0.000289 * m.sin(3.0 * Mr))                   # equation of centre
    true_longitude = L0 + C
    v = (M + C) * _DEG                                    # true anomaly
    r = 1.000001018 * (1.0 - e * e) / (1.0 + e * m.cos(v))  # distance (eq. 25.5)
    omega = (125.04 - 1934.136 * T) * _DEG                # longitude of the Moon's node
    # apparent longitude: aberration (-0.00569) and nutation (-0.00478 sin omega)
    lam = (true_longitude - 0.00569 - 0.00478 * m.sin(omega)) * _DEG
    eps0 = (23.0 + 26.0 / 60.0 + 21.448 / 3600.0
            - T * (46.8150 + T * (0.00059 - 0.001813 * T)) / 3600.0)  # eq. 22.2
    eps = (eps0 + 0.00256 * m.cos(omega)) * _DEG         # apparent obliquity (eq. 25.8)
    sin_lam = m.sin(lam)
    alpha = m.atan2(m.cos(eps) * sin_lam, m.cos(lam)) / _DEG  # eq. 25.6
    delta = m.asin(m.sin(eps) * sin_lam) / _DEG               # eq. 25.7
    # Greenwich mean sidereal time (eq. 12.4) plus nutation in right ascension
    # (delta_psi cos eps, with delta_psi ~ -0.00478 sin omega as above).
    theta = (280.46061837 + 360.98564736629 * d
             + T * T * (0.000387933 - T / 38710000.0)
             - 0.00478 * m.sin(omega) * m.cos(eps))
    return alpha, delta, r, theta, L0


def _hour_angle(d, longitude):
    """Local hour angle [deg] in [-180, 180) and declination [deg] at ``d`` days since J2000."""
    alpha, delta, _r, theta, _L0 = _solar_coordinates(d)
    H = np.mod(theta + longitude - alpha + 180.0, 360.0) - 180.0
    return H, delta


def _zenith_from_days(d, latitude, longitude):
    """Geometric solar zenith angle [deg] at ``d`` days since J2000.0 (floats)."""
    H, delta = _hour_angle(d, longitude)
    phi = latitude * _DEG
    dr = delta * _DEG
    cos_chi = np.sin(phi) * np.sin(dr) + np.cos(phi) * np.cos(dr) * np.cos(H * _DEG)
    return np.arccos(np.clip(cos_chi, -1.0, 1.0)) / _DEG


def _zenith_and_distance_factor(d, latitude, longitude):
    """Geometric zenith angle [deg] and (1 AU / r)^2 [1] at ``d`` days since J2000.0 (one evaluation)."""
    alpha, delta, r, theta, _L0 = _solar_coordinates(d)
    H = (theta + longitude - alpha) * _DEG
    phi = latitude * _DEG
    dr = delta * _DEG
    cos_chi = np.sin(phi) * np.sin(dr) + np.cos(phi) * np.cos(dr) * np.cos(H)
    return np.arccos(np.clip(cos_chi, -1.0, 1.0)) / _DEG, 1.0 / (r * r)


def _zenith_and_distance_factor_scalar(d: float, latitude: float, longitude: float):
    """``_zenith_and_distance_factor`` for single floats, with the math module."""
    alpha, delta, r, theta, _L0 = _solar_coordinates(d, _MATH)
    H = (theta + longitude - alpha) * _DEG
    phi = latitude * _DEG
    dr = delta * _DEG
    cos_chi = math.sin(phi) * math.sin(dr) + math.cos(phi) * math.cos(dr) * math.cos(H)
    return math.acos(min(1.0, max(-1.0, cos_chi))) / _DEG, 1.0 / (r * r)


def solar_zenith_angle(time, latitude, longitude) -> np.ndarray:
    """Geometric solar zenith angle [degrees] (no refraction).

    Parameters
    ----------
    time : datetime64, any shape
        UTC times.
    latitude : array_like
        Latitude [degrees north], -90..90.  Broadcasts with ``time``.
    longitude : array_like
        Longitude [degrees east].  Broadcasts with ``time``.

    Notes
    -----
    Low-accuracy solar coordinates of Meeus (1998), *Astronomical Algorithms*,
    ch. 25, with sidereal time from ch. 12 and the zenith angle of eq. 13.6.
    Within about 0.012 degree of the NREL SPA (Reda & Andreas 2004) over
    1950-2100.  Values above 90 degrees (sun below the astronomical
    horizon) are returned as they are, up to 180 degrees.
    """
    lat = np.asarray(latitude, dtype=float)
    if np.any(np.abs(lat) > 90.0):
        raise ValueError(f"latitude: expected values in [-90, 90] degrees, got {lat[np.abs(lat) > 90.0].ravel()[:3]}")
    return _zenith_from_days(days_since_j2000(time), lat, np.asarray(longitude, dtype=float))


def solar_declination(time) -> np.ndarray:
    """Apparent solar declination [degrees] at UTC ``time`` (Meeus 1998, eq. 25.7)."""
    return _solar_coordinates(days_since_j2000(time))[1]


def equation_of_time(time) -> np.ndarray:
    """Equation of time [minutes]: apparent minus mean solar time at UTC ``time``.

    E = L0 - 0.0057183 deg - alpha + delta_psi cos(eps) (Meeus 1998, eq. 28.1),
    converted at 4 minutes per degree.
    """
    d = days_since_j2000(time)
    alpha, _delta, _r, _theta, L0 = _solar_coordinates(d)
    T = d / 36525.0
    omega = (125.04 - 1934.136 * T) * _DEG
    eps = 23.439291 * _DEG
    E = L0 - 0.0057183 - alpha - 0.00478 * np.sin(omega) * np.cos(eps)
    return 4.0 * (np.mod(E + 180.0, 360.0) - 180.0)


def earth_sun_distance(time) -> np.ndarray:
    """Earth-Sun distance [AU] at UTC ``time`` (Meeus 1998, eq. 25.5)."""
    return _solar_coordinates(days_since_j2000(time))[2]


def earth_sun_distance_factor(time) -> np.ndarray:
    """Solar flux factor (1 AU / r)^2 [1] at UTC ``time`` (Meeus 1998, eq. 25.5).

    Multiply a spectrum given at 1 AU by this factor to get the flux at the
    Earth's actual distance; it ranges from about 0.967 (early July) to
    1.034 (early January).
    """
    r = earth_sun_distance(time)
    return 1.0 / (r * r)


def horizon_zenith_angle(altitude_m) -> np.ndarray:
    """Zenith angle of the horizon seen from altitude z [degrees].

    chi_h = 90 + arccos(R / (R + z)) with R = ``EARTH_RADIUS_M`` (spherical
    Earth; common practice, no source).  About 94.5 degrees at 20 km.
    Negative altitudes are treated as 0 (the horizon is then 90 degrees).
    """
    z = np.maximum(np.asarray(altitude_m, dtype=float), 0.0)
    return 90.0 + np.arccos(EARTH_RADIUS_M / (EARTH_RADIUS_M + z)) / _DEG


def is_sunlit(sza_deg, altitude_m) -> np.ndarray:
    """True where the sun is above the box's horizon: ``sza < horizon_zenith_angle(altitude)``."""
    return np.asarray(sza_deg) < horizon_zenith_angle(altitude_m)


# --- Chapman grazing-incidence air mass ---------------------------------------

# Gauss-Legendre nodes on [0, 1] for the two path integrals below.  48 nodes
# integrate the smooth Gaussian-like integrands to ~1e-10 relative.
_GL_X, _GL_W = np.polynomial.legendre.leggauss(48)
_GL_X = 0.5 * (_GL_X + 1.0)
_GL_W = 0.5 * _GL_W
#: exp(-_TAIL) is where the outer integral is cut off (relative contribution < 1e-13)
_TAIL = 30.0


def chapman_air_mass(sza_deg, altitude_m, scale_height_m: float = 7000.0) -> np.ndarray:
    """Slant air column along the sun's ray to the box over the vertical column above it [1].

    Parameters
    ----------
    sza_deg : array_like
        Solar zenith angle [degrees], 0..180.
    altitude_m : array_like
        Altitude of the box [m].  Broadcasts with ``sza_deg``.
    scale_height_m : float
        Scale height H of the exponential atmosphere [m] (default 7 km).

    Returns
    -------
    The Chapman grazing-incidence function Ch(x, chi), x = (R + z) / H:
    equal to sec(chi) at small angles, finite and increasing up to the box's
    horizon (``horizon_zenith_angle``), ``+inf`` beyond it (the ray to the
    sun meets the ground).

    Notes
    -----
    Chapman (1931), Proc. Phys. Soc. 43, 483 (Part II, grazing incidence),
    evaluated here by direct numerical integration over a spherical
    exponential atmosphere n(r) = n0 exp(-(r - r0)/H).  Along a ray whose
    tangent radius is r_t = r0 sin(chi), substituting r = r_t + H p^2 removes
    the tangent-point singularity:

        Ch = 2/sqrt(H) * integral exp((r0 - r_t)/H - p^2) (r_t + H p^2) / sqrt(2 r_t + H p^2) dp

    taken from p_a = sqrt((r0 - r_t)/H) to infinity for chi <= 90 degrees;
    for chi > 90 degrees the ray first descends to the tangent point and
    rises again on the far side, so the segment 0..p_a counts twice.  Both
    integrals use fixed 48-point Gauss-Legendre rules (vectorised; about
    1e-9 relative accuracy, checked in the tests against the closed form
    Ch(x, 90 deg) = x e^x K1(x), recalled from Huestis 2001, JQSRT 69, 709).
    """
    chi, z = np.broadcast_arrays(np.asarray(sza_deg, dtype=float), np.asarray(altitude_m, dtype=float))
    shape = chi.shape
    chi = chi.ravel()
    z = np.maximum(z.ravel(), 0.0)
    H = float(scale_height_m)
    if not H > 0.0:
        raise ValueError(f"scale_height_m: expected a positive scale height [m], got {scale_height_m!r}")
    out = np.full(chi.shape, np.inf)
    r0 = EARTH_RADIUS_M + z
    ok = chi <= horizon_zenith_angle(z)
    if np.any(~np.isfinite(chi)):
        out[~np.isfinite(chi)] = np.nan
        ok &= np.isfinite(chi)
    if np.any(ok):
        c = chi[ok] * _DEG
        r0k = r0[ok]
        rt = r0k * np.sin(c)
        pa2 = (r0k - rt) / H           # (r0 - r_t)/H >= 0
        pa = np.sqrt(pa2)

        # Outer part p in [p_a, inf): p = p_a + y, exponent -(2 p_a y + y^2);
        # cut off where that exponent reaches -_TAIL.
        ymax = np.sqrt(pa2 + _TAIL) - pa
        y = ymax[:, None] * _GL_X[None, :]
        p = pa[:, None] + y
        f = (rt[:, None] + H * p * p) / np.sqrt(2.0 * rt[:, None] + H * p * p)
        outer = ymax * np.sum(_GL_W * np.exp(-(2.0 * pa[:, None] * y + y * y)) * f, axis=1)

        # Inner part p in [0, p_a) for chi > 90 deg, counted twice: the ray
        # descends from the box to the tangent point and climbs back to r0.
        below = c > 0.5 * np.pi
        inner = np.zeros_like(outer)
        if np.any(below):
            pab = pa[below]
            rtb = rt[below]
            p = pab[:, None] * _GL_X[None, :]
            f = (rtb[:, None] + H * p * p) / np.sqrt(2.0 * rtb[:, None] + H * p * p)
            inner[below] = pab * np.sum(_GL_W * np.exp(pab[:, None] ** 2 - p * p) * f, axis=1)
        out[ok] = 2.0 / np.sqrt(H) * (outer + 2.0 * inner)
    return out.reshape(shape)


# --- sunrise and sunset at the box ------------------------------------------

#: Apparent motion of the sun in hour angle [deg per day of UT] (common practice, no source).
_HOUR_ANGLE_RATE = 360.0
_SUN_EVENT_ITERATIONS = 6


def _as_day_start(date) -> np.ndarray:
    d = np.asarray(date)
    if not np.issubdtype(d.dtype, np.datetime64):
        raise TypeError(f"date: expected numpy datetime64 dates (UTC), got dtype {d.dtype}")
    d = d.astype("datetime64[D]")
    valid = d[~np.isnat(d)] if d.ndim else (d if not np.isnat(d) else None)
    if valid is not None and np.size(valid):
        from ..timerange import check_utc_range
        check_utc_range(np.min(valid), "date")        # datetime64[ns] would wrap it silently
        check_utc_range(np.max(valid), "date")
    return d.astype("datetime64[ns]")


def _days_to_datetime(d) -> np.ndarray:
    ns = np.round(np.asarray(d) * _NS_PER_DAY)
    out = np.full(ns.shape, np.datetime64("NaT", "ns"))
    good = np.isfinite(ns)
    out[good] = _J2000 + ns[good].astype("int64").astype("timedelta64[ns]")
    return out


def _sun_event_days(day0, latitude, longitude, horizon_deg):
    """Sunrise, transit and sunset [days since J2000] in the solar day around each date's local noon.

    Iterates the hour-angle relation (Meeus 1998, ch. 15, method of
    successive corrections): transit where the hour angle is 0; rising and
    setting where the hour angle is -/+ H0 with
    cos H0 = (cos chi_h - sin(phi) sin(delta)) / (cos(phi) cos(delta)),
    the declination taken at the event itself.  The solar day runs from 12 h
    before to 12 h after the transit.  An event is NaN where the sun does
    not cross the horizon on its side of the transit; ``up_before`` /
    ``up_after`` tell whether the sun is then up all that half day.
    """
    phi = latitude * _DEG
    cos_h = np.cos(horizon_deg * _DEG)
    # Start from mean local noon: 12 UT minus longitude / 15 h.
    transit = day0 + 0.5 - longitude / 360.0
    for _ in range(_SUN_EVENT_ITERATIONS):
        H, _delta = _hour_angle(transit, longitude)
        transit = transit - H / _HOUR_ANGLE_RATE

    def cos_h0_at(t):
        H, delta = _hour_angle(t, longitude)
        dr = delta * _DEG
        with np.errstate(invalid="ignore", divide="ignore"):
            c = (cos_h - np.sin(phi) * np.sin(dr)) / (np.cos(phi) * np.cos(dr))
        # hour angle counted from this transit without wrapping: the uniform
        # part 360 deg/day plus the small (wrapped) deviation from it
        uniform = _HOUR_ANGLE_RATE * (t - transit)
        dH = uniform + (np.mod(H - uniform + 180.0, 360.0) - 180.0)
        return c, dH

    def event(sign):
        t = transit.copy()
        for _ in range(_SUN_EVENT_ITERATIONS):
            c, dH = cos_h0_at(t)
            h0 = np.arccos(np.clip(c, -1.0, 1.0)) / _DEG
            t = t + (sign * h0 - dH) / _HOUR_ANGLE_RATE
        c, _dH = cos_h0_at(t)
        crossed = np.abs(c) < 1.0
        return np.where(crossed, t, np.nan), ~crossed & (c <= -1.0)

    rise, up_before = event(-1.0)
    sets, up_after = event(+1.0)
    return rise, transit, sets, up_before, up_after


def sun_events(date, latitude, longitude, altitude_m=0.0):
    """Sunrise and sunset at the box [UTC datetime64] for each UTC date.

    Parameters
    ----------
    date : datetime64, any shape
        UTC dates; the events are those around the local solar noon of that
        date (noon at about 12 h UTC - longitude / 15 h).
    latitude, longitude : array_like
        Position [degrees north, degrees east]; broadcast with ``date``.
    altitude_m : array_like
        Altitude of the box [m]; the sun rises and sets when the geometric
        zenith angle crosses ``horizon_zenith_angle(altitude_m)``.

    Returns
    -------
    (sunrise, sunset) : datetime64[ns] arrays; NaT where the sun stays below
    the box's horizon all day (polar night) or above it all day (midnight
    sun).  On the days where midnight sun begins or ends only one of the
    two events exists; the other is NaT.

    Notes
    -----
    Successive corrections of the hour angle of the horizon crossing (Meeus
    1998, ch. 15) with the solar coordinates of ``solar_zenith_angle``; the
    events converge to well under a second of the exact crossing.
    """
    day0 = days_since_j2000(_as_day_start(date))
    lat = np.asarray(latitude, dtype=float)
    lon = np.asarray(longitude, dtype=float)
    day0, lat, lon, hz = np.broadcast_arrays(day0, lat, lon, horizon_zenith_angle(altitude_m))
    rise, _transit, sets, _up_before, _up_after = _sun_event_days(day0, lat, lon, hz)
    return _days_to_datetime(rise), _days_to_datetime(sets)


def daylight_hours(date, latitude, longitude, altitude_m=0.0) -> np.ndarray:
    """Hours of sun above the box's horizon in the solar day of each date [hours].

    The solar day runs from 12 h before to 12 h after the local transit
    (see ``sun_events``): sunset minus sunrise, where a missing event on a
    side where the sun stays up counts from/to the end of that day.  24 for
    midnight sun, 0 for polar night.
    """
    day0 = days_since_j2000(_as_day_start(date))
    lat = np.asarray(latitude, dtype=float)
    lon = np.asarray(longitude, dtype=float)
    day0, lat, lon, hz = np.broadcast_arrays(day0, lat, lon, horizon_zenith_angle(altitude_m))
    rise, transit, sets, up_before, up_after = _sun_event_days(day0, lat, lon, hz)
    start = np.where(np.isnan(rise), np.where(up_before, transit - 0.5, transit), rise)
    end = np.where(np.isnan(sets), np.where(up_after, transit + 0.5, transit), sets)
    return np.maximum(end - start, 0.0) * 24.0


# --- horizon crossings of an arbitrary (moving) box ------------------------------

def horizon_crossings(sza_function: Callable, t0: float, t1: float,
                      horizon: float | Callable = 90.0, *,
                      sample_s: float = 600.0, tolerance_s: float = 1.0) -> np.ndarray:
    """Times [s] in [t0, t1] where the sun crosses the horizon, sorted.

    Parameters
    ----------
    sza_function : callable
        ``sza_function(t)`` -> solar zenith angle [deg] for an array of times
        ``t`` [s] (e.g. seconds since a run start, for a moving parcel).
    t0, t1 : float
        Search interval [s].
    horizon : float or callable
        Horizon zenith angle [deg], or ``horizon(t)`` for a box that changes
        altitude.
    sample_s : float
        Sampling interval [s].  Sign changes of sza - horizon between samples
        are refined with Brent's method (scipy.optimize.brentq) to
        ``tolerance_s``.  A local extremum of sza - horizon between samples
        that stays on one side at the samples is searched with a bounded
        minimisation, so a brief dip of the sun below (or rise above) the
        horizon shorter than ``sample_s`` is still found.

    The ends ``t0`` and ``t1`` are not reported as crossings even if the sun
    sits exactly on the horizon there.
    """
    t0 = float(t0)
    t1 = float(t1)
    if not t1 > t0:
        return np.empty(0)
    if callable(horizon):
        def g(t):
            return np.asarray(sza_function(t), dtype=float) - np.asarray(horizon(t), dtype=float)
    else:
        hz = float(horizon)

        def g(t):
            return np.asarray(sza_function(t), dtype=float) - hz

    def g_scalar(t):
        return float(g(np.asarray(t, dtype=float)))

    n = max(int(np.ceil((t1 - t0) / float(sample_s))), 2)
    ts = np.linspace(t0, t1, n + 1)
    gs = g(ts)
    brackets: list[tuple[float, float]] = []
    for i in np.nonzero(np.sign(gs[:-1]) * np.sign(gs[1:]) < 0)[0]:
        brackets.append((ts[i], ts[i + 1]))
    # Interior sample extrema that do not change sign: look between the
    # neighbours for a hidden pair of crossings.
    interior = np.arange(1, len(ts) - 1)
    is_min = (gs[interior] <= gs[interior - 1]) & (gs[interior] <= gs[interior + 1]) & (gs[interior] > 0)
    is_max = (gs[interior] >= gs[interior - 1]) & (gs[interior] >= gs[interior + 1]) & (gs[interior] < 0)
    for i, sgn in [(j, 1.0) for j in interior[is_min]] + [(j, -1.0) for j in interior[is_max]]:
        from scipy.optimize import minimize_scalar  # imported here: ~0.5 s, only sunrise/sunset search needs it
        res = minimize_scalar(lambda t: sgn * g_scalar(t), bounds=(ts[i - 1], ts[i + 1]),
                              method="bounded", options={"xatol": tolerance_s})
        if sgn * res.fun < 0.0:
            tm = float(res.x)
            brackets.append((ts[i - 1], tm))
            brackets.append((tm, ts[i + 1]))
    roots = [float(t) for t in ts[1:-1][gs[1:-1] == 0.0]]
    for a, b in brackets:
        ga, gb = g_scalar(a), g_scalar(b)
        if ga == 0.0 or gb == 0.0 or np.sign(ga) == np.sign(gb):
            continue
        from scipy.optimize import brentq
        roots.append(brentq(g_scalar, a, b, xtol=tolerance_s))
    return np.unique(np.asarray(roots, dtype=float))
