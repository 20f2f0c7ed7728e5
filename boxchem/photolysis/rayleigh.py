"""Rayleigh scattering cross section of air.

Bodhaine, B. A., Wood, N. B., Dutton, E. G. and Slusser, J. R. (1999), "On
Rayleigh optical depth calculations", J. Atmos. Oceanic Technol. 16, 1854-1861,
doi:10.1175/1520-0426(1999)016<1854:ORODC>2.0.CO;2, Eq. (2):

    sigma = 24 pi^3 (n_s^2 - 1)^2 / (lambda^4 N_s^2 (n_s^2 + 2)^2) * F_air(lambda)

with the refractive index of standard air of Peck and Reeder (1972), J. Opt.
Soc. Am. 62, 958 (scaled for CO2 as in Bodhaine et al. Eq. 19), the King
correction factors of N2 and O2 of Bates (1984), Planet. Space Sci. 32, 785
(Ar 1.00, CO2 1.15), and N_s the number density of standard air
(288.15 K, 1013.25 hPa).  Valid in the near UV and visible (the refractive
index formula is fitted from 0.23 um upwards; used here down to 175 nm,
where Rayleigh extinction is negligible next to O2 and O3 absorption).
"""
from __future__ import annotations

import numpy as np

#: number density of standard air at 288.15 K and 1013.25 hPa [cm-3] (Bodhaine et al. 1999, Table 1)
STANDARD_AIR_DENSITY_CM3 = 2.546899e19
#: volume percentages of dry air used in the King factor (Bodhaine et al. 1999, Eq. 23)
_N2_PERCENT, _O2_PERCENT, _AR_PERCENT = 78.084, 20.946, 0.934


def refractive_index_minus_one(wavelength_nm, co2_ppm=360.0):
    """(n - 1) of dry air at 288.15 K, 1013.25 hPa [1].

    Peck and Reeder (1972) for 300 ppm CO2, scaled by 1 + 0.54 (C - 0.0003)
    with C the CO2 mole fraction (Bodhaine et al. 1999, Eqs. 18-19).
    """
    inv2 = (np.asarray(wavelength_nm, dtype=float) * 1e-3) ** -2      # um-2
    n300 = (8060.51 + 2480990.0 / (132.274 - inv2) + 17455.7 / (39.32957 - inv2)) * 1e-8
    return n300 * (1.0 + 0.54 * (co2_ppm * 1e-6 - 0.0003))


def king_factor(wavelength_nm, co2_ppm=360.0):
    """Depolarisation (King) correction factor of air F_air [1] (Bates 1984; Bodhaine et al. 1999 Eq. 23)."""
    inv2 = (np.asarray(wavelength_nm, dtype=float) * 1e-3) ** -2      # um-2
    f_n2 = 1.034 + 3.17e-4 * inv2
    f_o2 = 1.096 + 1.385e-3 * inv2 + 1.448e-4 * inv2**2
    co2_percent = co2_ppm * 1e-4
    total = _N2_PERCENT + _O2_PERCENT + _AR_PERCENT + co2_percent
    return (_N2_PERCENT * f_n2 + _O2_PERCENT * f_o2 + _AR_PERCENT * 1.00 + co2_percent * 1.15) / total


def rayleigh_cross_section(wavelength_nm, co2_ppm=360.0):
    """Rayleigh scattering cross section per molecule of dry air [cm2].

    ``wavelength_nm`` [nm] (array), ``co2_ppm`` [ppm].  Bodhaine et al. (1999) Eq. (2).
    """
    wl_cm = np.asarray(wavelength_nm, dtype=float) * 1e-7
    nm1 = refractive_index_minus_one(wavelength_nm, co2_ppm)
    n2 = (1.0 + nm1) ** 2
    return (24.0 * np.pi**3 * (n2 - 1.0) ** 2 / (wl_cm**4 * STANDARD_AIR_DENSITY_CM3**2 * (n2 + 2.0) ** 2)
            * king_factor(wavelength_nm, co2_ppm))
