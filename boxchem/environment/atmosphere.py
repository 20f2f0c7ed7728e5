"""Air number density, the U.S. Standard Atmosphere 1976, and an ozone profile shape.

Pure array functions.  Pressures in Pa, temperatures in K, altitudes in
metres (geometric unless a name says geopotential), number densities in cm-3.
"""
from __future__ import annotations

import numpy as np

from ..units import DOBSON_UNIT_CM2

__all__ = [
    "BOLTZMANN_J_PER_K",
    "air_number_density",
    "standard_atmosphere",
    "altitude_from_pressure",
    "geopotential_altitude",
    "geometric_altitude",
    "ozone_profile",
    "ozone_column_above",
]

#: Boltzmann constant [J K-1], exact since the 2019 SI (CODATA 2018).
BOLTZMANN_J_PER_K = 1.380649e-23


def air_number_density(pressure_Pa, temperature_K) -> np.ndarray:
    """Number density of air [cm-3] from the ideal-gas law, n = p / (k_B T).

    Parameters
    ----------
    pressure_Pa : array_like
        Pressure [Pa].
    temperature_K : array_like
        Temperature [K].

    Notes
    -----
    k_B = 1.380649e-23 J K-1 (CODATA 2018, exact).  At 273.15 K and
    101325 Pa this gives the Loschmidt constant 2.6868e19 cm-3.
    """
    p = np.asarray(pressure_Pa, dtype=float)
    T = np.asarray(temperature_K, dtype=float)
    return p / (BOLTZMANN_J_PER_K * T) * 1.0e-6


# --- U.S. Standard Atmosphere 1976 -------------------------------------------
# U.S. Standard Atmosphere, 1976, NOAA/NASA/USAF, Washington DC (NOAA-S/T 76-1562),
# section 1.2: seven layers of constant lapse rate in geopotential altitude
# from 0 to 84.852 km' (86 km geometric), with the constants below.
_G0 = 9.80665                 # m s-2, standard gravity (1976 standard)
_R_STAR = 8.31432             # J mol-1 K-1, gas constant as adopted by the 1976 standard
_M0 = 28.9644e-3              # kg mol-1, mean molar mass of sea-level air (1976 standard)
_R0_GEOPOTENTIAL = 6356766.0  # m, effective Earth radius for geopotential (1976 standard)
_H_BASE = np.array([0.0, 11000.0, 20000.0, 32000.0, 47000.0, 51000.0, 71000.0, 84852.0])
_LAPSE = np.array([-6.5e-3, 0.0, 1.0e-3, 2.8e-3, 0.0, -2.8e-3, -2.0e-3])  # K m-1
_T0 = 288.15                  # K, sea-level temperature
_P0 = 101325.0                # Pa, sea-level pressure
_GMR = _G0 * _M0 / _R_STAR    # K m-1, hydrostatic constant


def _layer_bases():
    T = [_T0]
    p = [_P0]
    for i, lapse in enumerate(_LAPSE):
        dh = _H_BASE[i + 1] - _H_BASE[i]
        Tn = T[i] + lapse * dh
        if lapse == 0.0:
            pn = p[i] * np.exp(-_GMR * dh / T[i])
        else:
            pn = p[i] * (T[i] / Tn) ** (_GMR / lapse)
        T.append(Tn)
        p.append(pn)
    return np.array(T), np.array(p)


_T_BASE, _P_BASE = _layer_bases()
#: valid range of the standard's lower part [m geometric]: -5 km to 86 km
_Z_MIN, _Z_MAX = -5000.0, 86000.0


def geopotential_altitude(altitude_m) -> np.ndarray:
    """Geopotential altitude [m'] from geometric altitude [m]: H = r0 Z / (r0 + Z), r0 = 6356.766 km (USSA 1976)."""
    z = np.asarray(altitude_m, dtype=float)
    return _R0_GEOPOTENTIAL * z / (_R0_GEOPOTENTIAL + z)


def geometric_altitude(geopotential_m) -> np.ndarray:
    """Geometric altitude [m] from geopotential altitude [m']: Z = r0 H / (r0 - H) (USSA 1976)."""
    h = np.asarray(geopotential_m, dtype=float)
    return _R0_GEOPOTENTIAL * h / (_R0_GEOPOTENTIAL - h)


def standard_atmosphere(altitude_m):
    """Pressure [Pa] and temperature [K] of the U.S. Standard Atmosphere 1976.

    Parameters
    ----------
    altitude_m : array_like
        Geometric altitude [m], from -5 km to 86 km.

    Returns
    -------
    (pressure_Pa, temperature_K)

    Notes
    -----
    U.S. Standard Atmosphere, 1976 (NOAA, NASA, USAF; NOAA-S/T 76-1562):
    seven layers of linear temperature in geopotential altitude (base
    heights 0, 11, 20, 32, 47, 51, 71, 84.852 km'; lapse rates -6.5, 0,
    +1.0, +2.8, 0, -2.8, -2.0 K/km'), hydrostatic pressure with
    g0 = 9.80665 m s-2, R* = 8.31432 J mol-1 K-1, M0 = 28.9644 g mol-1.
    The temperature is the standard's molecular-scale temperature, equal to
    the kinetic temperature below 80 km (above 80 km the kinetic
    temperature is lower by up to 0.04 %, which is ignored here).
    """
    z = np.asarray(altitude_m, dtype=float)
    bad = ~((z >= _Z_MIN) & (z <= _Z_MAX))
    if np.any(bad):
        raise ValueError(
            f"altitude_m: the U.S. Standard Atmosphere 1976 is used from {_Z_MIN:g} m to "
            f"{_Z_MAX:g} m here, got {z[bad].ravel()[:3]} m")
    h = geopotential_altitude(z)
    i = np.clip(np.searchsorted(_H_BASE, h, side="right") - 1, 0, len(_LAPSE) - 1)
    lapse = _LAPSE[i]
    Tb = _T_BASE[i]
    pb = _P_BASE[i]
    dh = h - _H_BASE[i]
    T = Tb + lapse * dh
    iso = lapse == 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        p = np.where(iso, pb * np.exp(-_GMR * dh / Tb),
                     pb * (Tb / T) ** (_GMR / np.where(iso, 1.0, lapse)))
    return p, T


def altitude_from_pressure(pressure_Pa) -> np.ndarray:
    """Geometric altitude [m] at which the U.S. Standard Atmosphere 1976 has the given pressure [Pa].

    The exact inverse of ``standard_atmosphere`` (layer by layer, closed form);
    valid for pressures between the values at 86 km (about 0.37 Pa) and
    -5 km (about 1.78e5 Pa).
    """
    p = np.asarray(pressure_Pa, dtype=float)
    p_top = standard_atmosphere(_Z_MAX)[0]
    p_bottom = standard_atmosphere(_Z_MIN)[0]
    bad = ~((p >= p_top) & (p <= p_bottom))
    if np.any(bad):
        raise ValueError(
            f"pressure_Pa: the U.S. Standard Atmosphere 1976 covers {p_top:.4g} Pa to "
            f"{p_bottom:.5g} Pa here, got {p[bad].ravel()[:3]} Pa")
    # _P_BASE decreases; layer i holds p in (_P_BASE[i+1], _P_BASE[i]]
    i = np.clip(np.searchsorted(-_P_BASE, -p, side="left") - 1, 0, len(_LAPSE) - 1)
    lapse = _LAPSE[i]
    Tb = _T_BASE[i]
    pb = _P_BASE[i]
    iso = lapse == 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        h = np.where(iso, _H_BASE[i] - Tb / _GMR * np.log(p / pb),
                     _H_BASE[i] + Tb / np.where(iso, 1.0, lapse)
                     * ((p / pb) ** (-np.where(iso, 1.0, lapse) / _GMR) - 1.0))
    return geometric_altitude(h)


# --- ozone profile shape -----------------------------------------------------
# An idealised shape, not a measured climatology: a Gaussian layer in
# altitude.  Typical peak heights and widths (recalled from memory; no
# source): mid-latitudes peak near 22 km, polar regions near 18 km, with a
# layer about 15 km wide (FWHM).  Only the shape is used; the amount comes from
# the total column the caller gives.
_OZONE_SHAPES = {
    "midlatitude": (22000.0, 15000.0 / 2.3548),   # (peak altitude [m], sigma [m])
    "polar": (18000.0, 14000.0 / 2.3548),
}


def _ozone_shape(kind: str):
    try:
        return _OZONE_SHAPES[kind]
    except KeyError:
        raise ValueError(f"kind: unknown ozone profile {kind!r}; expected one of {sorted(_OZONE_SHAPES)}") from None


def ozone_profile(altitude_m, total_column_DU, kind: str = "midlatitude") -> np.ndarray:
    """Ozone number density [cm-3] of an idealised layer holding ``total_column_DU`` [DU].

    n(z) = N / (sigma sqrt(2 pi)) exp(-(z - z_peak)^2 / (2 sigma^2)) with N the
    column [molecule cm-2] (1 DU = 2.6867e16 cm-2), normalised so that the
    integral from 0 to infinity equals the column.  ``kind`` is
    ``"midlatitude"`` (peak 22 km) or ``"polar"`` (peak 18 km); shape values
    recalled from memory, not a climatology.
    """
    z_peak, sigma = _ozone_shape(kind)
    z = np.asarray(altitude_m, dtype=float)
    column_cm2 = np.asarray(total_column_DU, dtype=float) * DOBSON_UNIT_CM2
    norm = _fraction_above(0.0, z_peak, sigma)
    sigma_cm = sigma * 100.0
    return column_cm2 / norm / (sigma_cm * np.sqrt(2.0 * np.pi)) * np.exp(-0.5 * ((z - z_peak) / sigma) ** 2)


def _fraction_above(z, z_peak, sigma):
    from scipy.special import erfc
    return 0.5 * erfc((np.asarray(z, dtype=float) - z_peak) / (sigma * np.sqrt(2.0)))


def ozone_column_above(altitude_m, total_column_DU, kind: str = "midlatitude") -> np.ndarray:
    """Ozone column above ``altitude_m`` [DU] for the idealised layer of ``ozone_profile``."""
    z_peak, sigma = _ozone_shape(kind)
    frac = _fraction_above(altitude_m, z_peak, sigma) / _fraction_above(0.0, z_peak, sigma)
    return np.asarray(total_column_DU, dtype=float) * np.minimum(frac, 1.0)
