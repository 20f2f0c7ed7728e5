"""PhotolysisRates: parametric form, horizon behaviour, shapes, scale and distance factor."""
from __future__ import annotations

from types import MappingProxyType

import numpy as np
import pytest

from boxchem.environment.solar import chapman_air_mass, horizon_zenith_angle
from boxchem.errors import BoxchemError
from boxchem.mechanism.model import Mechanism, Reaction, Species, Term
from boxchem.photolysis.rates import PhotolysisRates


def _reaction(rid, law, **params):
    return Reaction(id=rid, reactants=(Term("O3"),), products=(Term("O2"), Term("O")),
                    law=law, parameters=MappingProxyType(params), photolysis=law == "photolysis")


def _mechanism(*reactions):
    species = tuple(Species(n, {"O": k}) for n, k in (("O3", 3), ("O2", 2), ("O", 1)))
    return Mechanism(species=species, reactions=tuple(reactions))


# l m n of the two test reactions: invented shapes for a unit test of the formula,
# not physical values
L1, M1, N1 = 1.0e-3, 1.2, 0.3
L2, M2, N2 = 5.0e-5, 0.5, 1.5

MECH = _mechanism(
    _reaction("thermal", "arrhenius", A=1e-11, ER=100.0),
    _reaction("j1", "photolysis", l=L1, m=M1, n=N1, qy=1.0, scale=1.0),
    _reaction("j2", "photolysis", l=L2, m=M2, n=N2, qy=1.0, scale=2.0),
)


@pytest.fixture(scope="module")
def rates():
    return PhotolysisRates(MECH, altitude_m=20_000.0, method="parametric")


def test_parametric_form_matches_closed_form_at_moderate_sza(rates):
    # J = l cos^m exp(-n sec) (the classic parametric form; common practice, no source),
    # kept exact up to 75 deg by construction
    sza = np.array([0.0, 30.0, 60.0, 75.0])
    j = rates(sza, 300.0, 220.0)
    c = np.cos(np.radians(sza))
    expected1 = L1 * c**M1 * np.exp(-N1 / c)
    expected2 = 2.0 * L2 * c**M2 * np.exp(-N2 / c)
    assert j.shape == (4, 3)
    assert np.all(j[:, 0] == 0.0)
    np.testing.assert_allclose(j[:, 1], expected1, rtol=1e-9)
    np.testing.assert_allclose(j[:, 2], expected2, rtol=1e-9)


def test_parametric_uses_chapman_air_mass_beyond_90(rates):
    # the documented extension: sec -> Ch(chi, z), cos -> 1/Ch (Chapman 1931 grazing
    # incidence), Ch scaled to match sec at 75 deg
    sza = np.array([88.0, 92.0, 94.0])
    match = (1.0 / np.cos(np.radians(75.0))) / chapman_air_mass(75.0, 20_000.0)
    assert 1.0 < match < 1.03
    a = chapman_air_mass(sza, 20_000.0) * match
    j = rates(sza, 300.0, 220.0)
    np.testing.assert_allclose(j[:, 1], L1 * a**-M1 * np.exp(-N1 * a), rtol=1e-4)
    assert np.all(j[:, 1] > 0.0) and j[1, 2] > 0.0
    # continuity across the 75 deg switch
    j74, j76 = rates(np.array([74.999, 75.001]), 300.0, 220.0)[:, 1]
    assert abs(j76 / j74 - 1.0) < 1e-3   # smooth slope alone gives 3e-4 over 0.002 deg


def test_zero_beyond_horizon_positive_before(rates):
    # horizon at 20 km: 90 + arccos(R/(R+z)) = 94.5 deg (geometry, common practice, no source)
    hz = float(horizon_zenith_angle(20_000.0))
    assert 94.0 < hz < 95.0
    j = rates(np.array([92.0, hz, 96.0, 120.0, 180.0]), 300.0, 220.0)
    assert np.all(j[0, 1:] > 0.0)
    assert np.all(j[1:] == 0.0)


def test_broadcasting_and_distance_factor(rates):
    sza = np.array([[20.0, 40.0], [60.0, 80.0]])
    j1 = rates(sza, 300.0, 220.0)
    j2 = rates(sza, np.full((2, 2), 250.0), 200.0, distance_factor=1.0339)
    assert j1.shape == (2, 2, 3)
    # parametric J does not depend on ozone column or temperature; scales with (1 AU/r)^2
    np.testing.assert_allclose(j2, 1.0339 * j1, rtol=1e-12)


def test_scalar_call_shape_and_value(rates):
    j = rates(45.0, 300.0, 220.0)
    assert j.shape == (3,)
    # the same closed form as above at 45 deg, scalar path (l cos^m exp(-n sec); common practice, no source)
    c = np.cos(np.radians(45.0))
    np.testing.assert_allclose(j, [0.0, L1 * c**M1 * np.exp(-N1 / c), 2.0 * L2 * c**M2 * np.exp(-N2 / c)],
                               rtol=1e-9, atol=0)


def test_nan_sza_is_not_silently_zero(rates):
    assert np.all(np.isnan(rates(np.nan, 300.0, 220.0)[1:]))


def test_bad_arguments_name_themselves():
    with pytest.raises(BoxchemError, match="method"):
        PhotolysisRates(MECH, altitude_m=20_000.0, method="guess")
    with pytest.raises(BoxchemError, match="albedo"):
        PhotolysisRates(MECH, altitude_m=20_000.0, albedo=1.5, method="parametric")
    only_data = _mechanism(_reaction("jd", "photolysis", data="O3", qy=1.0, scale=1.0))
    with pytest.raises(BoxchemError, match="l= m= n="):
        PhotolysisRates(only_data, altitude_m=20_000.0, method="parametric")
