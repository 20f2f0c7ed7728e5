"""HNO3 and H2O taken up into NAT, STS and ice leave the gas phase (boxchem/environment/condensation.py)."""
from __future__ import annotations

import numpy as np
import pytest

import boxchem
from boxchem.environment.condensation import equilibrium_gas_phase
from boxchem.environment.psc import ice_vapour_pressure, nat_existence_temperature, nat_hno3_equilibrium_pressure
from boxchem.environment.sts import StsEquilibriumRule, sts_composition
from boxchem.errors import BoxchemError
from boxchem.scenario import Scenario

P = 5000.0   # 50 hPa

# polar night at 77 S on 1 August: no photolysis, so no N2O -> N2 sink and Ntot is an invariant
BASE = """
[run]
mechanism = "stratosphere"
start = "2026-06-20T00:00:00Z"
duration = "{duration}"
output_interval = "2 h"
[location]
latitude = -80.0
longitude = 0.0
altitude = "19 km"
[environment]
temperature = {T}
pressure = "55 hPa"
ozone_column = "250 DU"
psc_surface_area = {psc}
ice_surface_area = {ice}
sulfate_surface_area = {sulfate}
[initial]
H2O = "4.5 ppmv"
HNO3 = "{hno3}"
HCl = "1.5 ppbv"
ClONO2 = "0.5 ppbv"
N2O5 = "0.2 ppbv"
O3 = "2.5 ppmv"
N2O = "150 ppbv"
"""


def _scenario(T='"190 K"', hno3="10 ppbv", psc='{ rule = "nat" }', ice='"0 um2 cm-3"',
              sulfate='"0.5 um2 cm-3"', duration="1 d"):
    return Scenario.from_text(BASE.format(T=T, hno3=hno3, psc=psc, ice=ice, sulfate=sulfate, duration=duration),
                              base_dir=".", source="cond.toml")


def _x(ds, species):
    return ds["mole_fraction"].sel(species=species).values


def _ntot(ds):
    weights = ds["family_weight"].sel(family="Ntot")
    return (ds["mole_fraction"] * weights).sum("species").values


def test_nat_existence_temperature_of_the_literature():
    # T_NAT for 10 ppbv HNO3 and 5 ppmv H2O at 50 hPa: about 195.7 K (the standard value quoted from
    # the Hanson and Mauersberger 1988 expression in PSC studies; recalled from memory).  A factor 2
    # in p_eq(HNO3) moves T_NAT by about 1 K (d ln p_eq/dT ~ 0.72 K-1 there), outside this window.
    assert 195.0 < nat_existence_temperature(10e-9 * P, 5e-6 * P) < 196.5


def test_equilibrium_gas_phase_is_min_of_total_and_saturation():
    T = np.array([188.0, 190.0, 192.0, 196.0])
    hno3, h2o = 10e-9, 5e-6
    gas, water = equilibrium_gas_phase(T, P, hno3, h2o, nat=True, ice=True)
    p_ice = ice_vapour_pressure(T)
    np.testing.assert_allclose(water, np.minimum(h2o, p_ice / P), rtol=1e-12)
    np.testing.assert_allclose(gas, np.minimum(hno3, nat_hno3_equilibrium_pressure(T, water * P) / P), rtol=1e-12)
    assert gas[-1] == hno3            # above T_NAT: all in the gas phase (evaporated)
    assert gas[0] < 0.01 * hno3       # far below T_NAT: almost all condensed


def test_nat_run_holds_the_gas_phase_at_saturation_and_conserves_nitrogen():
    ds = boxchem.run(_scenario())
    T, p = ds["temperature"].values, ds["pressure"].values
    gas, cond, h2o = _x(ds, "HNO3"), _x(ds, "HNO3_PSC"), _x(ds, "H2O")
    # after equilibration the gas phase is the saturation value at the box's T and H2O
    # (Hanson and Mauersberger 1988 through psc.py), at every output time
    np.testing.assert_allclose(gas, nat_hno3_equilibrium_pressure(T, h2o * p) / p, rtol=1e-9)
    assert np.all(cond > 8e-9)                                   # most of the 10 ppbv is in NAT
    # nothing is lost: total HNO3 changes only by chemistry (small in the dark), Ntot is invariant
    np.testing.assert_allclose(_ntot(ds), _ntot(ds)[0], rtol=1e-9)
    assert abs((gas + cond)[-1] - 10e-9 - 2 * 0.2e-9) < 0.5e-9  # N2O5 + H2O on NAT makes 2 HNO3
    # the area is from the condensed mass (psc.py) and the result shows both phases
    assert np.all(ds["psc_surface_area"].values > 1e-9)
    assert "HNO3_PSC" in ds["species"].values


def test_warming_returns_the_condensed_hno3_to_the_gas():
    T = '{ times = ["0 h", "12 h", "24 h"], values = ["189 K", "189 K", "200 K"] }'
    ds = boxchem.run(_scenario(T=T))
    gas, cond = _x(ds, "HNO3"), _x(ds, "HNO3_PSC")
    assert cond[0] > 5e-9 and cond[-1] == 0.0
    # all back in the gas phase (plus what N2O5 and ClONO2 made on the particles meanwhile)
    assert gas[-1] > 20 * gas[0] and gas[-1] >= gas[0] + cond[0]
    np.testing.assert_allclose(_ntot(ds), _ntot(ds)[0], rtol=1e-9)
    assert ds["psc_surface_area"].values[-1] == 0.0


def test_ice_holds_the_water_above_the_frost_point():
    ds = boxchem.run(_scenario(T='"185 K"', ice='{ rule = "ice" }'))
    T, p = ds["temperature"].values, ds["pressure"].values
    h2o, ice = _x(ds, "H2O"), _x(ds, "H2O_ICE")
    # gas-phase water at the ice vapour pressure of Murphy and Koop (2005); the ice holds the rest
    np.testing.assert_allclose(h2o, ice_vapour_pressure(T) / p, rtol=1e-9)
    np.testing.assert_allclose(h2o + ice, 4.5e-6, rtol=1e-4)
    # the NAT equilibrium then uses the gas-phase (frost-point) water
    np.testing.assert_allclose(_x(ds, "HNO3"), nat_hno3_equilibrium_pressure(T, h2o * p) / p, rtol=1e-9)
    assert np.all(ds["ice_surface_area"].values > 0.0)


def test_sts_run_takes_up_hno3_as_carslaw_et_al_give():
    sts = '{ rule = "sts", h2so4 = "0.5 ppbv", particle_number_density = "10 cm-3" }'
    ds = boxchem.run(_scenario(T='"190.5 K"', psc='"0 um2 cm-3"', sulfate=sts))
    T, p = ds["temperature"].values, ds["pressure"].values
    gas, cond, h2o = _x(ds, "HNO3"), _x(ds, "HNO3_PSC"), _x(ds, "H2O")
    share = sts_composition(T, p, h2o, gas + cond, 0.5e-9).hno3_gas_fraction
    np.testing.assert_allclose(gas, share * (gas + cond), rtol=1e-9)
    assert np.all(cond > 0.3 * (gas + cond))            # 190.5 K: about half in the droplets
    np.testing.assert_allclose(_ntot(ds), _ntot(ds)[0], rtol=1e-9)
    # the liquid area is the rule's at the box's composition, larger than the binary droplets'
    rule = StsEquilibriumRule(0.5e-9, 10.0)
    area = rule(T, p, {"HNO3": gas, "HNO3_PSC": cond, "H2O": h2o})
    np.testing.assert_allclose(ds["sulfate_surface_area"].values, area, rtol=2e-2)
    binary = rule(T, p, {"HNO3": 0 * gas, "H2O": h2o})
    assert np.all(area > 2.0 * binary)


def test_mechanism_without_condensed_species_keeps_the_old_treatment(tmp_path):
    # a mechanism that does not declare HNO3_PSC: the rules take the gas phase as the total
    from boxchem.resources import resolve
    text = resolve("stratosphere", "mechanisms").read_text()
    text = text.replace("HNO3_PSC   formula=HNO3\n", "").replace(" + HNO3_PSC", "")
    text = text.replace("HNO3tot = HNO3\n", "")
    mech = tmp_path / "no_condensed.mech"
    mech.write_text(text)
    s = _scenario().with_overrides(**{"run.mechanism": str(mech)})
    ds = boxchem.run(s)
    assert "HNO3_PSC" not in ds["species"].values
    assert _x(ds, "HNO3")[-1] > 9e-9


@pytest.mark.parametrize("sulfate, words", [
    ('{ rule = "sts" }', ["sulfate_surface_area.h2so4", "needs", "0.5 ppbv"]),
    ('{ rule = "sts", h2so4 = "0.5 ppbv", radius = "1 um" }', ["sulfate_surface_area.radius", "unknown key",
                                                                "h2so4, particle_number_density"]),
    ('{ rule = "sts", h2so4 = "5e8 cm-3" }', ["sulfate_surface_area.h2so4", "mole fraction"]),
    ('{ rule = "sts", h2so4 = "0.5 ppbv", particle_number_density = "0 cm-3" }',
     ["particle_number_density", "> 0"]),
    ('{ rule = "sts", h2so4 = "0.5 ppbv", geometric_std = 0.5 }', ["geometric_std", ">= 1"]),
    ('{ rule = "nat" }', ["sulfate_surface_area.rule", "\"sts\""]),
])
def test_bad_sts_rule_keys_say_file_key_value_and_what_is_valid(sulfate, words):
    with pytest.raises(BoxchemError) as exc:
        _scenario(psc='"0 um2 cm-3"', sulfate=sulfate)
    msg = str(exc.value)
    assert "cond.toml" in msg and "Traceback" not in msg
    for w in words:
        assert w in msg, msg


def test_nat_and_sts_together_are_refused_with_a_clear_error():
    with pytest.raises(BoxchemError) as exc:
        _scenario(sulfate='{ rule = "sts", h2so4 = "0.5 ppbv" }')
    msg = str(exc.value)
    assert "cond.toml" in msg and "psc_surface_area" in msg and "sulfate_surface_area" in msg
    assert "choose one" in msg
    # the same for an Environment built by hand (no file): the partition refuses it
    from boxchem.environment.condensation import phase_equilibrium_for
    from boxchem.environment.history import Environment
    from boxchem.environment.psc import NatEquilibriumRule
    env = Environment("2026-08-01T00:00:00Z", temperature=190.0, pressure=5000.0,
                      latitude=-80.0, longitude=0.0, ozone_column=250.0, psc_area=NatEquilibriumRule(),
                      sulfate_area=StsEquilibriumRule(5e-10))
    with pytest.raises(BoxchemError, match="choose one"):
        phase_equilibrium_for(env, ("HNO3", "HNO3_PSC", "H2O"))
