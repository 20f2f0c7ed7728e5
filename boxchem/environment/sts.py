"""Supercooled ternary solution (STS) droplets: HNO3/H2SO4/H2O composition and volume.

The analytic expression of Carslaw, K. S., Luo, B. P. and Peter, T. (1995),
An analytic expression for the composition of aqueous HNO3-H2SO4
stratospheric aerosols including gas phase removal of HNO3, Geophys. Res.
Lett. 22, 1877-1880: binary H2SO4/H2O and HNO3/H2O molalities from the water
partial pressure, effective Henry's-law coefficients of HNO3 in the two
binary solutions, and a cubic for the H2SO4 molality of the ternary solution
in equilibrium with the box's water vapour, with the HNO3 taken up removed
from the gas phase.  Density of the solution: Luo, B. P. et al. (1996),
Densities and refractive indices of H2SO4/HNO3/H2O solutions to
stratospheric temperatures, Geophys. Res. Lett. 23, 3707.

About the coefficients: the paper's text was not found by the team's search
tools; the coefficients below are those the authors distributed with the paper
(FORTRAN77 "distribution version 1", 2 August 1995), read in a public copy of
that routine found by search, and the H2SO4 set also matches our memory.
Valid (as the authors state) for 2e-5 < p(H2O) < 2e-3 hPa, T from 185 K (or
the frost point - 3 K, whichever is higher) to 240 K; HNO3 uptake is computed
to 215 K (above it the droplets are taken as binary H2SO4/H2O).  Below the
lower limit the composition of the limit is used (the authors' advice).

Pure array functions: T [K], pressures [Pa], mole fractions [mol mol-1]
broadcast against each other (members, times), so a batch of members can be
evaluated in one call.
"""
from __future__ import annotations

import numpy as np

__all__ = ["sts_composition", "StsComposition", "LOWEST_TEMPERATURE_K", "HIGHEST_UPTAKE_TEMPERATURE_K"]

_PA_PER_ATM = 101325.0
_R_SI = 8.314             # J mol-1 K-1 (the authors' value)
_R_ATM = 8.205e-5         # m3 atm mol-1 K-1 (the authors' value)
_WATER_MOL_PER_KG = 55.51
_M_H2SO4 = 98.076         # g mol-1
_M_HNO3 = 63.012          # g mol-1
#: lower temperature limit of the expression [K] (or the frost point - 3 K)
LOWEST_TEMPERATURE_K = 185.0
#: HNO3 uptake is computed up to this temperature [K] (Carslaw et al. 1995)
HIGHEST_UPTAKE_TEMPERATURE_K = 215.0

# binary-solution mole fractions: ln p_w[atm] = k1 x + k2 x/T + k3 x^2 + k4 x^2/T + k5 + k6/T + k7 ln T
_KS = (-21.661, 2724.2, 51.81, -15732.0, 47.004, -6969.0, -4.6183)      # H2SO4/H2O
_KN = (-39.136, 6358.4, 83.29, -17650.0, 198.53, -11948.0, -28.469)     # HNO3/H2O
# ln H [mol kg-1 atm-1] of HNO3 in the binary solutions, polynomial in tr = 1e4/T - 43.4782608
# and pr = ln p_w[atm] + 18.4
_QS = (14.4700, 0.0638795, -3.29597, 1.778224, -0.223244, 0.0086486, 0.536695, -0.335164,
       0.0265153, 0.0157550)
_QN = (14.5734, 0.0615994, -1.14895, 0.691693, -0.098863, 0.0051579, 0.123472, -0.115574,
       0.0110113, 0.0097914)


def _binary_molality(k, T, ln_pw):
    """Molality [mol kg-1] of the binary solution in equilibrium with p_w (root of the quadratic in x)."""
    a = k[2] + k[3] / T
    b = k[0] + k[1] / T
    c = k[4] + k[5] / T + k[6] * np.log(T) - ln_pw
    x = (-b - np.sqrt(np.maximum(b * b - 4.0 * a * c, 0.0))) / (2.0 * a)
    return _WATER_MOL_PER_KG * x / (1.0 - x)


def _henry(q, tr, pr):
    """Effective Henry's-law coefficient of HNO3 [mol kg-1 atm-1] in a binary solution."""
    return np.exp(q[0] + q[1] * tr ** 2 + (q[2] + q[3] * tr + q[4] * tr ** 2 + q[5] * tr ** 3) * pr
                  + (q[6] + q[7] * tr + q[8] * tr ** 2) * pr ** 2 + q[9] * tr * pr ** 3)


def _luo_density(ms, mn, T):
    """Solution density [g cm-3] from the H2SO4 and HNO3 molalities (Luo et al. 1996)."""
    rho_s = (1000.0 + 123.64 * ms - 5.6e-4 * ms * T ** 2 - 29.54 * ms ** 1.5 + 1.814e-4 * ms ** 1.5 * T ** 2
             + 2.343 * ms ** 2 - 1.487e-3 * ms ** 2 * T - 1.324e-5 * ms ** 2 * T ** 2)
    rho_n = (1000.0 + 85.107 * mn - 5.043e-4 * mn * T ** 2 - 18.96 * mn ** 1.5 + 1.427e-4 * mn ** 1.5 * T ** 2
             + 1.458 * mn ** 2 - 1.198e-3 * mn ** 2 * T - 9.703e-6 * mn ** 2 * T ** 2)
    total = ms + mn
    return 1e-3 / (ms / total / rho_s + mn / total / rho_n)


class StsComposition(dict):
    """Result of :func:`sts_composition` (a dict of arrays with attribute access)."""

    __getattr__ = dict.__getitem__


def sts_composition(temperature, pressure_Pa, h2o, hno3_total, h2so4) -> StsComposition:
    """Equilibrium STS composition and volume (Carslaw, Luo and Peter 1995).

    Parameters: T [K], air pressure [Pa], gas-phase H2O mole fraction (the
    water taken up is negligible), total (gas + liquid) HNO3 and total
    H2SO4 mole fractions [mol mol-1].

    Returns (arrays): ``h2so4_molality``, ``hno3_molality`` [mol kg-1 water],
    ``h2so4_wt``, ``hno3_wt`` [mass fraction, 0-1], ``density`` [g cm-3],
    ``volume`` [cm3 of solution per cm3 of air], ``hno3_gas_fraction`` [1]
    (gas-phase HNO3 / total HNO3; 1 without HNO3 or above 215 K) and
    ``binary_h2so4_wt`` (the H2SO4/H2O solution at the same p(H2O)).
    """
    with np.errstate(all="ignore"):
        out = _sts_composition(temperature, pressure_Pa, h2o, hno3_total, h2so4)
    # no water vapour or H2SO4 (e.g. before the first observation of the box): no droplets
    valid = np.isfinite(out["volume"]) & np.isfinite(out["hno3_gas_fraction"])
    out["volume"] = np.where(valid, out["volume"], 0.0)
    out["hno3_gas_fraction"] = np.where(valid, out["hno3_gas_fraction"], 1.0)
    return out


def _sts_composition(temperature, pressure_Pa, h2o, hno3_total, h2so4) -> StsComposition:
    T0 = np.asarray(temperature, dtype=float)
    p = np.asarray(pressure_Pa, dtype=float)
    x_w = np.maximum(np.asarray(h2o, dtype=float), 1e-30)
    x_n = np.maximum(np.asarray(hno3_total, dtype=float), 0.0)
    x_s = np.maximum(np.asarray(h2so4, dtype=float), 0.0)
    T0, p, x_w, x_n, x_s = np.broadcast_arrays(T0, p, x_w, x_n, x_s)
    pw = x_w * p / _PA_PER_ATM                                   # atm
    ln_pw = np.log(pw)
    # frost point over ice of the water partial pressure (the authors' expression, torr)
    t_ice = 2668.70 / (10.4310 - (ln_pw + np.log(760.0)) / np.log(10.0))
    T = np.maximum(T0, np.maximum(LOWEST_TEMPERATURE_K, t_ice - 3.0))
    pn0 = x_n * p / _PA_PER_ATM                                  # atm, all HNO3 as gas
    ns = x_s * p / (_R_SI * T)                                   # mol H2SO4 per m3 of air
    tt = _R_ATM * T * ns                                         # atm
    tr = 1.0e4 / T - 43.4782608
    pr = ln_pw + 18.4

    msb = _binary_molality(_KS, T, ln_pw)
    mnb = _binary_molality(_KN, T, ln_pw)
    hsb = _henry(_QS, tr, pr)
    hnb = _henry(_QN, tr, pr)
    # cubic ms^3 + A ms^2 + B ms + C = 0 for the ternary H2SO4 molality (the paper's eqs),
    # solved with the trigonometric form (three real roots; the physical one is taken)
    A = ((tt * hnb * mnb ** 2 - tt * hsb * mnb * msb - 2.0 * mnb ** 2 * msb + mnb * msb ** 2
          + hnb * mnb * msb * pn0 - hsb * msb ** 2 * pn0) / (mnb ** 2 - mnb * msb))
    B = msb * (-2.0 * tt * hnb * mnb + tt * hsb * msb + mnb * msb - hnb * msb * pn0) / (mnb - msb)
    C = tt * hnb * mnb * msb ** 2 / (mnb - msb)
    q = A ** 2 - 3.0 * B
    r = -2.0 * A ** 3 + 9.0 * A * B - 27.0 * C
    phi = np.arctan(np.sqrt(np.maximum(4.0 * q ** 3 - r ** 2, 0.0)) / r)
    phi = np.where(phi < 0.0, phi + np.pi, phi)
    ms_t = -(A + 2.0 * np.sqrt(np.maximum(q, 0.0)) * np.cos((np.pi + phi) / 3.0)) / 3.0
    uptake = (T0 <= HIGHEST_UPTAKE_TEMPERATURE_K) & (pn0 > 0.0) & (ns > 0.0) & np.isfinite(ms_t)
    ms = np.where(uptake, np.clip(ms_t, 1e-12, msb), msb)
    mn = np.where(uptake, np.maximum(mnb * (1.0 - ms / msb), 0.0), 0.0)
    pn = np.where(uptake & (mn > 0.0), mn / (hnb * mn / (mn + ms) + hsb * ms / (mn + ms)), pn0)
    gas_fraction = np.where(pn0 > 0.0, np.clip(pn / np.where(pn0 > 0, pn0, 1.0), 0.0, 1.0), 1.0)
    solution_per_water = 1.0 + ms * _M_H2SO4 * 1e-3 + mn * _M_HNO3 * 1e-3    # kg per kg of water
    ws = ms * _M_H2SO4 * 1e-3 / solution_per_water
    wn = mn * _M_HNO3 * 1e-3 / solution_per_water
    rho = _luo_density(ms, mn, T)
    volume = ns * _M_H2SO4 / np.maximum(ws, 1e-30) / rho * 1e-6           # cm3 cm-3
    ws_binary = msb * _M_H2SO4 * 1e-3 / (1.0 + msb * _M_H2SO4 * 1e-3)
    return StsComposition(h2so4_molality=ms, hno3_molality=mn, h2so4_wt=ws, hno3_wt=wn, density=rho,
                          volume=np.where(ns > 0.0, volume, 0.0), hno3_gas_fraction=gas_fraction,
                          binary_h2so4_wt=ws_binary)


def _check(name, value, ok, valid):
    from ..errors import ScenarioError
    if not (isinstance(value, (int, float)) and not isinstance(value, bool) and np.isfinite(value)
            and ok(value)):
        raise ScenarioError(f"{name}: expected {valid}, got {value!r}")


class StsEquilibriumRule:
    """Liquid (sulfate / STS) surface area from the box's H2SO4, HNO3 and H2O (Carslaw et al. 1995).

    The droplets hold ``h2so4_mole_fraction`` [mol mol-1] of H2SO4 (all in
    the liquid) and take up HNO3 and H2O in equilibrium with the gas
    (:func:`sts_composition`); their number density N [cm-3] stays fixed, so
    the radius grows with the volume; lognormal size distribution of width
    sigma: S = (36 pi N)^(1/3) V^(2/3) exp(-ln^2 sigma) (psc.lognormal_surface_area).
    The HNO3 read is the total (gas ``HNO3`` + condensed ``HNO3_PSC``).
    """

    needs = ("HNO3", "H2O", "HNO3_PSC")

    def __init__(self, h2so4_mole_fraction: float, number_density_cm3: float = 10.0,
                 geometric_std: float = 1.8):
        _check("rule sts: h2so4", h2so4_mole_fraction, lambda v: v > 0, "a mole fraction > 0, e.g. \"0.5 ppbv\"")
        _check("rule sts: particle_number_density", number_density_cm3, lambda v: v > 0,
               "a number density > 0 cm-3")
        _check("rule sts: geometric_std", geometric_std, lambda v: v >= 1.0, "a factor >= 1")
        self.h2so4_mole_fraction = float(h2so4_mole_fraction)
        self.number_density_cm3 = float(number_density_cm3)
        self.geometric_std = float(geometric_std)

    def __repr__(self):
        return (f"StsEquilibriumRule(h2so4_mole_fraction={self.h2so4_mole_fraction!r}, "
                f"number_density_cm3={self.number_density_cm3!r}, geometric_std={self.geometric_std!r})")

    def composition(self, temperature, pressure_Pa, mole_fractions) -> StsComposition:
        """:func:`sts_composition` at the box's H2O and total HNO3."""
        hno3 = (np.asarray(mole_fractions.get("HNO3", 0.0), dtype=float)
                + np.asarray(mole_fractions.get("HNO3_PSC", 0.0), dtype=float))
        return sts_composition(temperature, pressure_Pa, mole_fractions.get("H2O", 0.0), hno3,
                               self.h2so4_mole_fraction)

    def droplet_radius_cm(self, temperature, pressure_Pa, mole_fractions):
        """Surface-area-weighted droplet radius [cm] of the rule's lognormal droplets (3 V / S,
        psc.lognormal_surface_weighted_radius); 0 where there are no droplets."""
        from .psc import lognormal_surface_weighted_radius
        volume = self.composition(temperature, pressure_Pa, mole_fractions).volume
        return lognormal_surface_weighted_radius(volume, self.number_density_cm3, self.geometric_std)

    def __call__(self, temperature, pressure_Pa, mole_fractions):
        from .psc import lognormal_surface_area
        volume = self.composition(temperature, pressure_Pa, mole_fractions).volume
        return lognormal_surface_area(volume, self.number_density_cm3, self.geometric_std)
