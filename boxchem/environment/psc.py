"""Polar stratospheric clouds from thermodynamics: NAT and ice existence and surface area.

Pure array functions of temperature [K] and partial pressures [Pa], and the
two area rules a scenario can choose instead of the temperature threshold
(``psc_surface_area = { rule = "nat", ... }``, ``ice_surface_area = { rule =
"ice", ... }``; docs/heterogeneous.md):

* NAT (nitric acid trihydrate) exists where the box's HNO3 partial pressure
  exceeds the equilibrium pressure over NAT at the box's H2O partial pressure
  (Hanson, D. and Mauersberger, K. (1988), Laboratory studies of the nitric
  acid trihydrate: implications for the south polar stratosphere, Geophys.
  Res. Lett. 15, 855-858; eq. 1 and Table 1).
* Ice exists below the frost point: vapour pressure over hexagonal ice of
  Murphy, D. M. and Koop, T. (2005), Review of the vapour pressures of ice
  and supercooled water for atmospheric applications, Q. J. R. Meteorol.
  Soc. 131, 1539-1565, eq. (7) (T > 110 K).
* Surface area from the condensed mass: the excess of HNO3 (or H2O) over the
  equilibrium pressure is taken as condensed, as NAT (HNO3.3H2O, 117.06 g
  mol-1, density 1.62 g cm-3) or ice (0.92 g cm-3), in particles with a
  lognormal size distribution of given number density N and geometric
  standard deviation sigma: S = (36 pi N)^(1/3) V^(2/3) exp(-ln^2 sigma)
  (moments of the lognormal distribution, e.g. Seinfeld and Pandis 2016,
  section 8.1).  N and sigma are the user's choice (defaults below).

The rules read the box's totals: gas-phase ``HNO3`` plus the condensed
``HNO3_PSC`` (and ``H2O`` plus ``H2O_ICE``) when the mechanism declares
these condensed-phase species; ``environment/condensation.py`` then keeps
the gas phase at the equilibrium pressure (the condensed excess is taken out
of the gas; docs/heterogeneous.md).  Without them the gas-phase mole
fractions are taken as totals.  No sedimentation.  The densities are
recalled from memory (NAT: Taesler et al. 1975; ice: common value).
"""
from __future__ import annotations

import bisect
import math
from dataclasses import dataclass

import numpy as np

from ..errors import ScenarioError

__all__ = ["nat_hno3_equilibrium_pressure", "ice_vapour_pressure", "nat_saturation_ratio",
           "nat_existence_temperature", "frost_point", "lognormal_surface_area",
           "NatEquilibriumRule", "IceEquilibriumRule", "CompositionHistory", "STATE_RULES"]

_TORR_PA = 101325.0 / 760.0
_AVOGADRO = 6.02214076e23
_BOLTZMANN = 1.380649e-23
NAT_MOLAR_MASS = 117.06      # g mol-1, HNO3 + 3 H2O
NAT_DENSITY = 1.62           # g cm-3 (Taesler et al. 1975; recalled from memory)
ICE_MOLAR_MASS = 18.015
ICE_DENSITY = 0.92           # g cm-3 (common value, no source)


def nat_hno3_equilibrium_pressure(temperature, water_pressure_Pa):
    """HNO3 partial pressure [Pa] over NAT at T [K] and p(H2O) [Pa].

    log10 p_HNO3 = m(T) log10 p_H2O + b(T), pressures in torr,
    m = -2.7836 - 0.00088 T, b = 38.9855 - 11397/T + 0.009179 T
    (Hanson and Mauersberger 1988, eq. 1; recalled from memory; valid ~180-200 K).
    """
    T = np.asarray(temperature, dtype=float)
    p_h2o = np.maximum(np.asarray(water_pressure_Pa, dtype=float), 1e-30) / _TORR_PA
    m = -2.7836 - 0.00088 * T
    b = 38.9855 - 11397.0 / T + 0.009179 * T
    return 10.0 ** (m * np.log10(p_h2o) + b) * _TORR_PA


def ice_vapour_pressure(temperature):
    """Vapour pressure over hexagonal ice [Pa] at T [K] (Murphy and Koop 2005, eq. 7)."""
    T = np.asarray(temperature, dtype=float)
    return np.exp(9.550426 - 5723.265 / T + 3.53068 * np.log(T) - 0.00728332 * T)


def nat_saturation_ratio(temperature, hno3_pressure_Pa, water_pressure_Pa):
    """S_NAT = p(HNO3) / p_eq(T, p(H2O)) [1]; NAT can exist where S_NAT > 1."""
    return np.asarray(hno3_pressure_Pa, dtype=float) / nat_hno3_equilibrium_pressure(temperature,
                                                                                     water_pressure_Pa)


def _bisect(f, lo=150.0, hi=260.0):
    flo = f(lo)
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        fm = f(mid)
        if (fm > 0) == (flo > 0):
            lo, flo = mid, fm
        else:
            hi = mid
    return 0.5 * (lo + hi)


def nat_existence_temperature(hno3_pressure_Pa, water_pressure_Pa):
    """T_NAT [K]: the temperature where S_NAT = 1 (scalar pressures) (Hanson and Mauersberger 1988)."""
    return _bisect(lambda T: float(np.log(nat_saturation_ratio(T, hno3_pressure_Pa, water_pressure_Pa))))


def frost_point(water_pressure_Pa):
    """Frost point [K]: where p(H2O) equals the ice vapour pressure (Murphy and Koop 2005)."""
    return _bisect(lambda T: math.log(float(water_pressure_Pa) / float(ice_vapour_pressure(T))))


def lognormal_surface_area(volume_cm3_cm3, number_density_cm3, geometric_std):
    """Surface area density [cm2 cm-3] of lognormal particles holding volume V [cm3 cm-3].

    S = (36 pi N)^(1/3) V^(2/3) exp(-ln^2 sigma): from the second and third moments
    of the lognormal distribution (Seinfeld and Pandis 2016, section 8.1).
    """
    V = np.maximum(np.asarray(volume_cm3_cm3, dtype=float), 0.0)
    s = math.log(geometric_std)
    return (36.0 * math.pi * number_density_cm3) ** (1.0 / 3.0) * V ** (2.0 / 3.0) * math.exp(-s * s)


def lognormal_surface_weighted_radius(volume_cm3_cm3, number_density_cm3, geometric_std):
    """Surface-area-weighted mean radius [cm] of lognormal particles holding volume V [cm3 cm-3].

    r_s = M3 / M2 = 3 V / S = r_g exp(2.5 ln^2 sigma), the ratio of the third to the second
    moment of the lognormal distribution (Seinfeld and Pandis 2016, section 8.1); 0 where V = 0.
    """
    V = np.maximum(np.asarray(volume_cm3_cm3, dtype=float), 0.0)
    S = lognormal_surface_area(V, number_density_cm3, geometric_std)
    return np.where(S > 0.0, 3.0 * V / np.where(S > 0.0, S, 1.0), 0.0)


def _check(name, value, ok, valid):
    if not (isinstance(value, (int, float)) and np.isfinite(value) and ok(value)):
        raise ScenarioError(f"{name}: expected {valid}, got {value!r}")


@dataclass(frozen=True)
class NatEquilibriumRule:
    """NAT surface area from the box's HNO3 and H2O (Hanson and Mauersberger 1988).

    area = lognormal_surface_area(V, N, sigma), V the NAT volume holding the
    HNO3 in excess of the equilibrium pressure; 0 where S_NAT <= 1.
    ``number_density_cm3`` N [cm-3] and ``geometric_std`` sigma [1] of the
    particles (defaults: 1 cm-3 and 1.8, our choice for demonstration; see docs).
    """

    number_density_cm3: float = 1.0
    geometric_std: float = 1.8
    needs = ("HNO3", "H2O", "HNO3_PSC")

    def __post_init__(self):
        _check("rule nat: particle_number_density", self.number_density_cm3, lambda v: v > 0,
               "a number density > 0 cm-3")
        _check("rule nat: geometric_std", self.geometric_std, lambda v: v >= 1.0, "a factor >= 1")

    def __call__(self, temperature, pressure_Pa, mole_fractions):
        T = np.asarray(temperature, dtype=float)
        p = np.asarray(pressure_Pa, dtype=float)
        # total HNO3 (gas + condensed); the gas-phase H2O (the ice holds the rest)
        p_hno3 = (np.asarray(mole_fractions.get("HNO3", 0.0), dtype=float)
                  + np.asarray(mole_fractions.get("HNO3_PSC", 0.0), dtype=float)) * p
        p_h2o = np.asarray(mole_fractions.get("H2O", 0.0), dtype=float) * p
        excess_Pa = np.maximum(p_hno3 - nat_hno3_equilibrium_pressure(T, p_h2o), 0.0)
        molecules = excess_Pa / (_BOLTZMANN * T) * 1e-6                     # cm-3
        volume = molecules * NAT_MOLAR_MASS / _AVOGADRO / NAT_DENSITY        # cm3 cm-3
        return lognormal_surface_area(volume, self.number_density_cm3, self.geometric_std)


@dataclass(frozen=True)
class IceEquilibriumRule:
    """Ice surface area from the box's H2O above the frost point (Murphy and Koop 2005).

    As :class:`NatEquilibriumRule` with the H2O in excess of the ice vapour
    pressure condensed as ice (defaults N = 0.01 cm-3, sigma = 1.8; our choice).
    """

    number_density_cm3: float = 0.01
    geometric_std: float = 1.8
    needs = ("H2O", "H2O_ICE")

    def __post_init__(self):
        _check("rule ice: particle_number_density", self.number_density_cm3, lambda v: v > 0,
               "a number density > 0 cm-3")
        _check("rule ice: geometric_std", self.geometric_std, lambda v: v >= 1.0, "a factor >= 1")

    def __call__(self, temperature, pressure_Pa, mole_fractions):
        T = np.asarray(temperature, dtype=float)
        p_h2o = ((np.asarray(mole_fractions.get("H2O", 0.0), dtype=float)
                  + np.asarray(mole_fractions.get("H2O_ICE", 0.0), dtype=float))
                 * np.asarray(pressure_Pa, dtype=float))          # total water (gas + ice)
        excess_Pa = np.maximum(p_h2o - ice_vapour_pressure(T), 0.0)
        molecules = excess_Pa / (_BOLTZMANN * T) * 1e-6
        volume = molecules * ICE_MOLAR_MASS / _AVOGADRO / ICE_DENSITY
        return lognormal_surface_area(volume, self.number_density_cm3, self.geometric_std)


from .sts import StsEquilibriumRule  # noqa: E402  (the liquid rule; sts.py imports nothing from here)

#: rule classes whose area depends on the box's composition
STATE_RULES = (NatEquilibriumRule, IceEquilibriumRule, StsEquilibriumRule)


class CompositionHistory:
    """The box's mole fractions of a few species, as observed by the time loop.

    Piecewise constant in time: ``at(t)`` is the last record at or before t
    (the first record before it).  The solver records the state at the start
    and at every output time (``RateCoefficientModel.observe_state``), so
    state-dependent surfaces and gammas lag the chemistry by at most one
    output interval; evaluating ``at`` after the run reproduces exactly what
    the integration used.  A record at or before the last one (a new run)
    drops the later records.
    """

    def __init__(self, species):
        self.species = tuple(species)
        self._times: list[float] = []
        self._values: list[np.ndarray] = []
        self._arrays = None          # (times, values) as arrays, rebuilt after a record

    def record(self, t_s: float, mole_fractions) -> None:
        t = float(t_s)
        while self._times and self._times[-1] >= t:
            self._times.pop()
            self._values.pop()
        self._times.append(t)
        self._values.append(np.asarray(mole_fractions, dtype=float).copy())
        self._arrays = None

    def __len__(self) -> int:
        return len(self._times)

    def at(self, t) -> dict:
        """{species: mole fraction} at t [s] (scalar or array; zeros before any record)."""
        if not self._times:
            return {s: np.zeros(np.shape(t)) if np.ndim(t) else 0.0 for s in self.species}
        if np.ndim(t) == 0:
            tf = float(t)
            if tf >= self._times[-1]:        # the time loop asks about the latest record
                row = self._values[-1]
            else:
                row = self._values[max(0, bisect.bisect_right(self._times, tf) - 1)]
            return {s: float(row[j]) for j, s in enumerate(self.species)}
        if self._arrays is None:
            self._arrays = (np.array(self._times), np.array(self._values))
        times, values = self._arrays
        ta = np.asarray(t, dtype=float)
        if ta.size and float(ta.min()) >= times[-1]:      # the time loop: all after the last record
            return {s: np.full(ta.shape, values[-1, j]) for j, s in enumerate(self.species)}
        i = np.clip(np.searchsorted(times, ta, side="right") - 1, 0, None)
        return {s: values[i, j] for j, s in enumerate(self.species)}
