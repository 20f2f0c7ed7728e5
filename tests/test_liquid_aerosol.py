"""Liquid sulfate aerosol reactivity (boxchem/mechanism/liquid_aerosol.py) and the `uptake` law.

Sources beside each check.  The coefficients of the parameterizations are
recalled from memory of the papers (see the module docstring); the checks
below compare with (a) limits that hold whatever the coefficients, (b) values
recalled from the papers' figures, marked so, and (c) hand calculations.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from boxchem.errors import MechanismError
from boxchem.mechanism import parse_mechanism
from boxchem.mechanism.liquid_aerosol import (gamma_brono2_h2o_hanson2003, gamma_clono2_shi2001,
                                              gamma_hocl_hcl_shi2001, liquid_gammas, solution_properties,
                                              sulfuric_acid_weight_percent, water_saturation_pressure_hPa)
from boxchem.mechanism.ratelaws import RateEvaluator, gamma_from_table, parse_gamma_table

P = 5000.0          # 50 hPa
H2O = 5e-6 * P      # 5 ppmv [Pa]
HCL = 1.5e-9 * P


def test_water_vapour_pressure_near_triple_point():
    # supercooled-water vapour pressure at 273.15 K: 6.11 hPa (Murphy and Koop 2005, Table;
    # common value); the Shi et al. (2001) fit is meant for stratospheric T but must be close here
    assert water_saturation_pressure_hPa(273.15) == pytest.approx(6.11, rel=0.03, abs=0)


@pytest.mark.parametrize("T, wt", [(195.0, 52.0), (200.0, 60.0), (220.0, 75.0)])
def test_sulfate_composition_at_5_ppmv_50_hpa(T, wt):
    # binary H2SO4/H2O droplets at 5 ppmv H2O, 50 hPa: about 50 wt% at 195 K, 60 wt% at 200 K and
    # 75 wt% at 220 K (Tabazadeh et al. 1997 Fig. 1 and Carslaw et al. 1995; recalled from memory,
    # +-4 wt%)
    assert sulfuric_acid_weight_percent(T, H2O) == pytest.approx(wt, abs=4.0)


def test_composition_follows_water():
    # more water vapour, more dilute droplets (thermodynamics; common knowledge)
    T = np.array([195.0, 205.0, 215.0])
    assert np.all(sulfuric_acid_weight_percent(T, 2 * H2O) < sulfuric_acid_weight_percent(T, H2O))
    props = solution_properties(T, H2O)
    assert np.all(np.diff(props["wt"]) > 0) and np.all((props["aw"] > 0) & (props["aw"] <= 1))
    # HCl solubility falls steeply as the droplet warms and concentrates (Shi et al. 2001 Fig. 2;
    # recalled from memory: several orders of magnitude between 195 and 215 K)
    assert props["h_hcl"][0] > 1e3 * props["h_hcl"][2]


def test_gammas_are_probabilities_and_vanish_without_hcl():
    T = np.linspace(185.0, 240.0, 56)
    for hcl in (0.0, HCL, 100 * HCL):
        g = liquid_gammas(T, H2O, hcl, 0.5e-9 * P)
        for name, v in g.items():
            assert np.all((v >= 0) & (v <= 1)), name
    g0 = liquid_gammas(T, H2O, 0.0, 0.0)
    # no dissolved HCl: no ClONO2 + HCl and no HOCl + HCl (Shi et al. 2001, by construction)
    assert np.all(g0["shi2001_clono2_hcl"] == 0.0) and np.all(g0["shi2001_hocl_hcl"] == 0.0)
    assert np.all(g0["shi2001_clono2_h2o"] > 0.0)


def test_clono2_hcl_switches_on_below_about_197_k():
    # gamma(ClONO2 + HCl) on sulfate at 5 ppmv H2O / 50 hPa rises through 0.01 near 196-198 K and
    # is of order 0.1-1 near 190 K (Shi et al. 2001 Fig. 10 / JPL 19-5 Fig. for stratospheric
    # conditions; recalled from memory).  A factor 2 moves the 0.01 crossing by ~0.8 K only, so
    # this checks shape, not the factor; test_science_factor2.py checks the model's use of it.
    T = np.linspace(190.0, 205.0, 1501)
    _, g = gamma_clono2_shi2001(T, H2O, HCL)
    crossing = T[np.argmax(g < 0.01)]
    assert 195.0 < crossing < 199.0
    assert 0.1 < float(g[0]) <= 1.0
    # falls with T, but for one small step where the Tabazadeh et al. (1997) fit changes range at
    # a_w = 0.05 (about 203 K here: the two fitted ranges differ by 0.3 wt% there)
    up = np.nonzero(np.diff(g) >= 0)[0]
    assert up.size <= 1 and np.all(g[up + 1] / g[up] < 1.2)


def test_clono2_hydrolysis_slows_as_droplets_concentrate():
    # ClONO2 + H2O without HCl falls by orders of magnitude from ~40 to ~70 wt% (Hanson and
    # Ravishankara 1994 / Shi et al. 2001 Fig. 5; recalled from memory)
    g_cold, _ = gamma_clono2_shi2001(195.0, H2O, 0.0)
    g_warm, _ = gamma_clono2_shi2001(215.0, H2O, 0.0)
    assert 1e-3 < g_cold < 0.1 and g_warm < g_cold / 30


def test_reacto_diffusive_limit_small_droplets():
    # a droplet much smaller than the reacto-diffusive length reacts in its whole volume:
    # f = coth(q) - 1/q -> q/3, so gamma_bulk ~ r (Shi et al. 2001, Hanson et al. 1994)
    g1 = gamma_hocl_hcl_shi2001(205.0, H2O, HCL, 0.0, radius_cm=1e-6)
    g2 = gamma_hocl_hcl_shi2001(205.0, H2O, HCL, 0.0, radius_cm=2e-6)
    assert float(g2 / g1) == pytest.approx(2.0, rel=0.02, abs=0)


def test_brono2_hydrolysis_hanson2003():
    # Hanson (2003): gamma = 1/(1/0.88 + 1/(exp(29.24 - 0.396 wt) + 0.114)); hand calculation at
    # the droplet composition of 220 K (wt from the composition above)
    wt = float(sulfuric_acid_weight_percent(220.0, H2O))
    expected = 1.0 / (1.0 / 0.88 + 1.0 / (math.exp(29.24 - 0.396 * wt) + 0.114))
    assert float(gamma_brono2_h2o_hanson2003(220.0, H2O)) == pytest.approx(expected, rel=1e-12, abs=0)
    # about 0.8 on the dilute cold droplets (JPL 19-5 Table 5 "0.8"; recalled from memory)
    assert float(gamma_brono2_h2o_hanson2003(200.0, H2O)) == pytest.approx(0.8, rel=0.15, abs=0)


def test_scalar_and_array_paths_agree():
    T = np.array([192.0, 201.0, 222.0])
    arr = liquid_gammas(T, H2O, HCL, 1e-6)
    for i, t in enumerate(T):
        h2o, hcl = gamma_clono2_shi2001(float(t), H2O, HCL, 1e-6)
        assert h2o == pytest.approx(arr["shi2001_clono2_h2o"][i], rel=1e-12, abs=0)
        assert hcl == pytest.approx(arr["shi2001_clono2_hcl"][i], rel=1e-12, abs=0)
        assert gamma_hocl_hcl_shi2001(float(t), H2O, HCL, 1e-6) == pytest.approx(arr["shi2001_hocl_hcl"][i],
                                                                                 rel=1e-12, abs=0)


# ---------------------------------------------------------------- the uptake law and gamma tables
MECH = """
[species]
ClONO2
HCl
H2O
HNO3
Cl2
N2O5
[reactions]
a  ClONO2 + HCl -> Cl2 + HNO3  uptake gamma_from=shi2001_clono2_hcl on=sulfate  f298=1.5 ref="test"
b  N2O5 + H2O -> HNO3 + HNO3   uptake gamma_table="190:0.3 200:0.1 210:0.01" on=psc scale=2  ref="lab table"
c  ClONO2 + H2O -> HNO3 + HNO3 surface gamma=0.01 on=sulfate ref="constant" unbalanced
"""


def test_gamma_table_interpolates_ln_gamma_and_holds_ends():
    T, g = parse_gamma_table("190:0.3, 200:0.1 210:0.01")
    np.testing.assert_array_equal(T, [190.0, 200.0, 210.0])
    assert gamma_from_table(200.0, T, g) == pytest.approx(0.1, rel=1e-9, abs=0)
    assert gamma_from_table(195.0, T, g) == pytest.approx(math.sqrt(0.3 * 0.1), rel=1e-9, abs=0)   # geometric mean
    assert gamma_from_table(180.0, T, g) == pytest.approx(0.3, rel=1e-9, abs=0) and gamma_from_table(230.0, T, g) == pytest.approx(0.01, rel=1e-9, abs=0)


@pytest.mark.parametrize("text, words", [("", "no T:gamma pair"), ("190-0.3", "is not T:gamma"),
                                         ("190:1.5", "not a reaction probability"),
                                         ("200:0.1 190:0.2", "increase strictly"), ("-5:0.1", "> 0 K")])
def test_gamma_table_errors(text, words):
    with pytest.raises(ValueError, match=words):
        parse_gamma_table(text)


def test_uptake_law_evaluates_tables_and_parameterizations():
    mech = parse_mechanism(MECH)
    ev = RateEvaluator(mech)
    assert ev.state_dependent_surface and ev.temperature_dependent_gamma
    pp = {"H2O": H2O, "HCl": HCL, "ClONO2": 0.0}
    gamma = ev.surface_gamma(np.array([195.0]), {k: np.array([v]) for k, v in pp.items()})[0]
    col = {mech.reaction_ids[i]: j for j, i in enumerate(ev.surface_index)}
    assert gamma[col["a"]] == pytest.approx(float(gamma_clono2_shi2001(195.0, H2O, HCL, 0.0)[1]), rel=1e-12, abs=0)
    assert gamma[col["b"]] == pytest.approx(2 * math.sqrt(0.3 * 0.1), rel=1e-9, abs=0)     # scale=2 on the table
    assert gamma[col["c"]] == 0.01
    # k = gamma v S / 4 (kinetic theory, common practice) for the table line on the psc area
    k = ev.surface(195.0, 1e-8, 0.0, 0.0, partial_pressures=pp)
    v = math.sqrt(8 * 8.314462618 * 195.0 / (math.pi * 0.10801)) * 100
    assert k[mech.reaction_ids.index("b")] == pytest.approx(gamma[col["b"]] * v * 1e-8 / 4, rel=1e-3, abs=0)
    # without the composition a gamma_from line with area is NaN, never a silent number
    assert np.isnan(ev.surface(195.0, 0.0, 1e-8)[mech.reaction_ids.index("a")])
    assert ev.surface(195.0, 1e-8, 0.0)[mech.reaction_ids.index("a")] == 0.0


@pytest.mark.parametrize("line, words", [
    ("x ClONO2 + HCl -> Cl2 + HNO3 uptake on=sulfate", "exactly one of gamma_from"),
    ("x ClONO2 + HCl -> Cl2 + HNO3 uptake gamma_from=shi2001_clono2_hcl gamma_table=\"190:0.1\" on=sulfate",
     "exactly one of gamma_from"),
    ("x ClONO2 + HCl -> Cl2 + HNO3 uptake gamma_from=shi2001_clono2_hlc on=sulfate", "did you mean"),
    ("x ClONO2 + HCl -> Cl2 + HNO3 uptake gamma_from=shi2001_clono2_hcl on=psc", "valid: on=sulfate"),
    ("x ClONO2 + HCl -> Cl2 + HNO3 uptake gamma_table=\"190:2\" on=psc", "not a reaction probability"),
    ("x ClONO2 + HCl -> Cl2 + HNO3 uptake gamma_table=\"190:0.2\" on=psc radius_um=-1", "radius_um"),
])
def test_uptake_law_errors_name_the_line(line, words):
    text = MECH.split("[reactions]")[0] + "[reactions]\n" + line + "\n"
    with pytest.raises(MechanismError) as exc:
        parse_mechanism(text, source="t.mech")
    message = str(exc.value)
    assert words in message and "t.mech:" in message
