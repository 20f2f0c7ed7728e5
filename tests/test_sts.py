"""Supercooled ternary solution composition and volume (Carslaw, Luo and Peter 1995; boxchem/environment/sts.py)."""
from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import brentq

from boxchem.environment.sts import StsEquilibriumRule, sts_composition
from boxchem.errors import ScenarioError
from boxchem.mechanism.liquid_aerosol import sulfuric_acid_weight_percent

P = 5000.0             # 50 hPa
# the conditions of the paper's example figure: 5 ppmv H2O, 10 ppbv HNO3, 0.5 ppbv H2SO4 at 50 hPa
H2O, HNO3, H2SO4 = 5e-6, 10e-9, 0.5e-9


def _half_uptake_temperature():
    return brentq(lambda T: float(sts_composition(T, P, H2O, HNO3, H2SO4).hno3_gas_fraction) - 0.5, 186.0, 196.0)


@pytest.mark.parametrize("T", [195.0, 200.0, 210.0, 220.0, 230.0])
def test_binary_limit_agrees_with_tabazadeh_1997(T):
    # two independent published parameterizations of H2SO4/H2O droplets at the same p(H2O):
    # Carslaw et al. (1995)'s binary expression and Tabazadeh et al. (1997, liquid_aerosol.py)
    # agree within 1.5 wt% (both fit the same thermodynamic models; common practice, no source)
    c = sts_composition(T, P, H2O, 0.0, H2SO4)
    wt = float(sulfuric_acid_weight_percent(T, H2O * P))
    assert float(c.h2so4_wt) * 100 == pytest.approx(wt, abs=1.5)
    assert float(c.hno3_wt) == 0.0 and float(c.hno3_gas_fraction) == 1.0


def test_half_of_the_hno3_is_in_the_droplets_near_191_k():
    # Carslaw et al. (1995), example figure (their conditions above): the gas-phase HNO3 falls to half
    # about 2 K above the frost point (188.7 K here), near 191 K (recalled from memory).  A factor 2 in
    # both effective Henry's-law coefficients moves this temperature by 0.8 K (measured on this code),
    # outside the window.
    assert 190.2 < _half_uptake_temperature() < 191.2


def test_composition_at_190_k():
    # at 190 K the droplets are mostly HNO3/H2O: about 40 wt% HNO3 and a few wt% H2SO4
    # (Carslaw et al. 1995, example figure; recalled from memory)
    c = sts_composition(190.0, P, H2O, HNO3, H2SO4)
    assert 0.35 < float(c.hno3_wt) < 0.47
    assert 0.02 < float(c.h2so4_wt) < 0.08


def test_volume_growth_near_192_k():
    # from the binary droplets at 195-200 K (~0.2 um3 cm-3 for 0.5 ppbv H2SO4) the volume grows by
    # about an order of magnitude by 190 K (Carslaw et al. 1995, example figure; recalled from memory)
    v = {T: float(sts_composition(T, P, H2O, HNO3, H2SO4).volume) * 1e12 for T in (190.0, 192.0, 195.0, 200.0)}
    assert 0.12 < v[200.0] < 0.25
    assert 1.5 < v[192.0] / v[195.0] < 4.0
    assert 6.0 < v[190.0] / v[200.0] < 40.0


@pytest.mark.parametrize("T", [189.0, 190.5, 192.0, 194.0])
def test_mass_balance_of_the_droplets(T):
    # the droplets hold exactly the H2SO4 and the HNO3 that left the gas (common practice, no source):
    # volume * density * wt fraction = condensed mass per cm3 of air
    c = sts_composition(T, P, H2O, HNO3, H2SO4)
    air = P / (1.380649e-23 * T) * 1e-6                      # cm-3 (ideal gas)
    mass = float(c.volume * c.density)                        # g of solution per cm3 of air
    h2so4_mass = H2SO4 * air * 98.076 / 6.02214076e23
    hno3_mass = HNO3 * (1.0 - float(c.hno3_gas_fraction)) * air * 63.012 / 6.02214076e23
    assert mass * float(c.h2so4_wt) == pytest.approx(h2so4_mass, rel=2e-3)
    assert mass * float(c.hno3_wt) == pytest.approx(hno3_mass, rel=2e-2)


def test_no_uptake_above_215_k_and_when_dry():
    assert float(sts_composition(216.0, P, H2O, HNO3, H2SO4).hno3_gas_fraction) == 1.0
    dry = sts_composition(190.0, P, 0.0, 0.0, 0.0)       # before any observation of the box
    assert float(dry.volume) == 0.0


def test_arrays_in_arrays_out():
    # members x times evaluated in one call (the per-member batch)
    T = np.array([[189.0, 195.0], [191.0, 200.0]])
    c = sts_composition(T, P, H2O, np.array([[HNO3], [2e-9]]), H2SO4)
    assert c.volume.shape == (2, 2)
    assert float(c.volume[0, 0]) == pytest.approx(float(sts_composition(189.0, P, H2O, HNO3, H2SO4).volume))


def test_rule_area_grows_with_the_volume():
    rule = StsEquilibriumRule(H2SO4, number_density_cm3=10.0, geometric_std=1.8)
    cold = rule(190.0, P, {"HNO3": HNO3, "H2O": H2O})
    warm = rule(200.0, P, {"HNO3": HNO3, "H2O": H2O})
    v = [float(sts_composition(T, P, H2O, HNO3, H2SO4).volume) for T in (190.0, 200.0)]
    # fixed number of droplets: S ~ V^(2/3) (lognormal moments)
    assert cold / warm == pytest.approx((v[0] / v[1]) ** (2.0 / 3.0), rel=1e-9)
    with pytest.raises(ScenarioError, match="h2so4"):
        StsEquilibriumRule(0.0)
