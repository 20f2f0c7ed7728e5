"""Chemical formula parsing and molar masses."""
import math

import pytest

from boxchem.mechanism.formula import FormulaError, molar_mass, parse_formula


@pytest.mark.parametrize("text, counts", [
    ("ClONO2", {"Cl": 1, "O": 3, "N": 1}),     # example of the issue text
    ("CF2Cl2", {"C": 1, "F": 2, "Cl": 2}),
    ("CH3O2", {"C": 1, "H": 3, "O": 2}),
    ("HO2NO2", {"H": 1, "O": 4, "N": 1}),
    ("Cl2O2", {"Cl": 2, "O": 2}),
    ("CH3CCl3", {"C": 2, "H": 3, "Cl": 3}),
    ("N2O5", {"N": 2, "O": 5}),
])
def test_formula_counts(text, counts):
    assert parse_formula(text) == counts


@pytest.mark.parametrize("text", ["O1D", "NOx", "Cly", "", "h2o", "O0", "O02", "Cl(g)"])
def test_not_formulas(text):
    with pytest.raises(FormulaError):
        parse_formula(text)


@pytest.mark.parametrize("text, expected", [
    # CRC Handbook of Chemistry and Physics, molar masses of inorganic compounds
    # (recalled from memory): H2O 18.015, O3 47.997, HCl 36.46, ClONO2 97.46, N2O5 108.01
    ("H2O", 18.015),
    ("O3", 47.997),
    ("HCl", 36.46),
    ("ClONO2", 97.46),
    ("N2O5", 108.01),
])
def test_molar_mass(text, expected):
    assert math.isclose(molar_mass(parse_formula(text)), expected, rel_tol=2e-4)
