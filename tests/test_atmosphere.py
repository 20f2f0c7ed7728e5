"""Air number density, U.S. Standard Atmosphere 1976, ozone profile shape."""
from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import quad

from boxchem.environment.atmosphere import (
    air_number_density,
    altitude_from_pressure,
    geometric_altitude,
    geopotential_altitude,
    ozone_column_above,
    ozone_profile,
    standard_atmosphere,
)


def test_loschmidt_constant():
    # Loschmidt constant at 273.15 K and 101.325 kPa: 2.686780111e25 m-3 (CODATA 2018)
    assert air_number_density(101325.0, 273.15) == pytest.approx(2.686780111e19, rel=1e-9, abs=0)


def test_air_density_broadcasts_and_scales():
    n = air_number_density(np.array([[5000.0], [10000.0]]), np.array([200.0, 250.0]))
    assert n.shape == (2, 2)
    # ideal gas: n proportional to p / T (common practice, no source)
    assert n[1, 0] / n[0, 0] == pytest.approx(2.0, rel=1e-12, abs=0)
    assert n[0, 0] / n[0, 1] == pytest.approx(1.25, rel=1e-12, abs=0)


# U.S. Standard Atmosphere, 1976 (NOAA-S/T 76-1562), Table I (geometric altitude);
# values recalled from memory to the digits shown.
_USSA_TABLE = [
    # altitude [m], pressure [Pa], temperature [K]
    (0.0, 101325.0, 288.150),
    (5000.0, 54048.0, 255.676),
    (10000.0, 26500.0, 223.252),
    (20000.0, 5529.3, 216.650),
    (30000.0, 1197.0, 226.509),
    (50000.0, 79.779, 270.650),
    # the three upper layers (51-71 km', 71-84.852 km'); below 80 km the standard's
    # kinetic and molecular-scale temperatures are equal (same table, recalled from memory)
    (60000.0, 21.958, 247.021),
    (70000.0, 5.2209, 219.585),
    (80000.0, 1.0524, 198.639),
]


@pytest.mark.parametrize("z, p, T", _USSA_TABLE)
def test_standard_atmosphere_table(z, p, T):
    pz, Tz = standard_atmosphere(z)
    assert pz == pytest.approx(p, rel=2e-4, abs=0)
    assert Tz == pytest.approx(T, abs=2e-3)


def test_standard_atmosphere_layer_base_at_20_km_geopotential():
    # USSA 1976 layer base at 20 km geopotential: p = 5474.889 Pa, T = 216.65 K
    # (the standard's Table 4; recalled from memory)
    p, T = standard_atmosphere(geometric_altitude(20000.0))
    assert p == pytest.approx(5474.889, rel=1e-6, abs=0)
    assert T == pytest.approx(216.65, abs=1e-9)
    # and at the 11 km' base: 22632.06 Pa (same table, recalled from memory)
    assert standard_atmosphere(geometric_altitude(11000.0))[0] == pytest.approx(22632.06, rel=1e-6, abs=0)


def test_geopotential_round_trip():
    z = np.linspace(-5000.0, 86000.0, 50)
    np.testing.assert_allclose(geometric_altitude(geopotential_altitude(z)), z, atol=1e-6)
    # H = r0 Z/(r0 + Z) with r0 = 6356.766 km (USSA 1976): 86 km geometric is 84.852 km'
    assert geopotential_altitude(86000.0) == pytest.approx(84852.0, abs=1.0)


def test_altitude_from_pressure_inverts_standard_atmosphere():
    z = np.linspace(-5000.0, 86000.0, 301)
    p, _T = standard_atmosphere(z)
    np.testing.assert_allclose(altitude_from_pressure(p), z, atol=1e-6)
    # the table's own pairs read backwards (USSA 1976 Table I, recalled from memory)
    assert altitude_from_pressure(5529.3) == pytest.approx(20000.0, abs=2.0)
    assert altitude_from_pressure(1197.0) == pytest.approx(30000.0, abs=2.0)


def test_standard_atmosphere_range_errors_name_the_argument():
    with pytest.raises(ValueError, match="altitude_m"):
        standard_atmosphere(90000.0)
    with pytest.raises(ValueError, match="pressure_Pa"):
        altitude_from_pressure(0.01)
    with pytest.raises(ValueError, match="altitude_m"):
        standard_atmosphere(np.nan)


@pytest.mark.parametrize("kind, peak", [("midlatitude", 22000.0), ("polar", 18000.0)])
def test_ozone_profile_holds_the_column(kind, peak):
    du = 2.6867e16  # molecule cm-2 per Dobson unit (definition; common practice, no source)
    column = quad(lambda z: ozone_profile(z, 300.0, kind) * 100.0, 0.0, 100000.0, points=[peak])[0] / du
    assert column == pytest.approx(300.0, rel=1e-6, abs=0)
    z = np.linspace(0.0, 60000.0, 6001)
    # peak heights: the module's documented profile shapes (common practice, no source)
    assert z[np.argmax(ozone_profile(z, 300.0, kind))] == pytest.approx(peak, abs=1e-9)
    above = quad(lambda zz: ozone_profile(zz, 250.0, kind) * 100.0, 20000.0, 100000.0)[0] / du
    assert ozone_column_above(20000.0, 250.0, kind) == pytest.approx(above, rel=1e-6, abs=0)
    # the column above the ground is the whole column (definition; common practice, no source)
    assert ozone_column_above(0.0, 250.0, kind) == pytest.approx(250.0, rel=1e-6, abs=0)


def test_ozone_profile_unknown_kind():
    with pytest.raises(ValueError, match="'tropical'"):
        ozone_profile(20000.0, 300.0, "tropical")
