"""Rate laws against hand calculations of the published forms.

Forms: NASA/JPL evaluation (Burkholder et al., 2019, JPL Publication 19-5):
Arrhenius (section 1), termolecular falloff and chemical activation
(section 2), equilibrium constants (section 3); parametric photolysis
J = l cos(chi)^m exp(-n sec(chi)) (Jenkin et al., 1997, Atmos. Environ. 31,
81); uptake k = gamma v S / 4 with v = sqrt(8RT/(pi M)) (kinetic theory,
Seinfeld and Pandis, 2016).  The parameter values below are from the JPL
evaluation as recalled from memory; what is checked is the arithmetic of the
form, written out by hand in each test.
"""
import math

import numpy as np
import pytest

from boxchem.mechanism import parse_mechanism
from boxchem.mechanism.ratelaws import (
    RateEvaluator, arrhenius, chemical_activation, equilibrium_constant, mean_molecular_speed,
    parametric_photolysis, surface_uptake, termolecular_falloff)

TEMPERATURES = (195.0, 230.0, 298.0)
DENSITIES = (1.0e17, 1.8e18, 2.46e19)


@pytest.mark.parametrize("T", TEMPERATURES)
def test_arrhenius_hand(T):
    # Cl + O3: A = 2.3e-11, E/R = 200 K (JPL evaluation, recalled from memory)
    hand = 2.3e-11 * math.exp(-200.0 / T)
    assert math.isclose(arrhenius(T, 2.3e-11, 200.0), hand, rel_tol=1e-12)
    # with a temperature exponent: O + O2 + M, k0 = 6.0e-34 (T/300)^-2.4 (JPL, recalled from memory)
    hand = 6.0e-34 * (T / 300.0) ** -2.4
    assert math.isclose(arrhenius(T, 6.0e-34, 0.0, -2.4, 300.0), hand, rel_tol=1e-12)


def test_arrhenius_matches_tabulated_298():
    # JPL table: k(298 K) of Cl + O3 = 1.2e-11 cm3 s-1 (recalled from memory; two digits)
    assert math.isclose(arrhenius(298.0, 2.3e-11, 200.0), 1.2e-11, rel_tol=0.03)


def _falloff_hand(T, M, k0, n, kinf, m, Fc=0.6, Tref=300.0):
    # JPL 19-5, section 2: k = k0(T)[M]/(1 + x) * Fc^(1/(1+log10(x)^2)), x = k0(T)[M]/kinf(T)
    k0T = k0 * (T / Tref) ** -n
    kinfT = kinf * (T / Tref) ** -m
    x = k0T * M / kinfT
    return k0T * M / (1 + x) * Fc ** (1.0 / (1.0 + math.log10(x) ** 2))


@pytest.mark.parametrize("T", TEMPERATURES)
@pytest.mark.parametrize("M", DENSITIES)
def test_falloff_hand(T, M):
    # ClO + ClO + M: k0 = 1.6e-32 n = 4.5, kinf = 3.0e-12 m = 2.0 (JPL, recalled from memory)
    hand = _falloff_hand(T, M, 1.6e-32, 4.5, 3.0e-12, 2.0)
    assert math.isclose(termolecular_falloff(T, M, 1.6e-32, 4.5, 3.0e-12, 2.0), hand, rel_tol=1e-12)
    # Tref = 298 K and a non-default Fc, as a user copying newer tables would write
    hand = _falloff_hand(T, M, 1.6e-32, 4.5, 3.0e-12, 2.0, Fc=0.45, Tref=298.0)
    got = termolecular_falloff(T, M, 1.6e-32, 4.5, 3.0e-12, 2.0, Fc=0.45, Tref=298.0)
    assert math.isclose(got, hand, rel_tol=1e-12)


def test_falloff_limits():
    # low pressure -> k0(T)[M]; high pressure -> kinf(T) (JPL 19-5, section 2; the
    # broadening factor tends to 1 only logarithmically, hence the extreme densities)
    T = 210.0
    k0T = 1.6e-32 * (T / 300.0) ** -4.5
    kinfT = 3.0e-12 * (T / 300.0) ** -2.0
    low = 1.0e-30
    assert math.isclose(termolecular_falloff(T, low, 1.6e-32, 4.5, 3.0e-12, 2.0), k0T * low, rel_tol=1e-3)
    high = 1.0e80
    assert math.isclose(termolecular_falloff(T, high, 1.6e-32, 4.5, 3.0e-12, 2.0), kinfT, rel_tol=1e-3)
    # [M] = 0 gives exactly zero, without warnings
    with np.errstate(all="raise"):
        assert termolecular_falloff(T, 0.0, 1.6e-32, 4.5, 3.0e-12, 2.0) == 0.0


@pytest.mark.parametrize("T", TEMPERATURES)
@pytest.mark.parametrize("M", DENSITIES)
def test_chemact_hand(T, M):
    # OH + CO -> H + CO2 through HOCO: k0 = 1.5e-13 n = -0.6, kinf = 2.1e9 s-1 m = -6.1
    # (JPL chemical-activation entry, recalled from memory)
    k0T = 1.5e-13 * (T / 300.0) ** 0.6
    kinfT = 2.1e9 * (T / 300.0) ** 6.1
    x = k0T * M / kinfT
    hand = k0T / (1 + x) * 0.6 ** (1.0 / (1.0 + math.log10(x) ** 2))
    assert math.isclose(chemical_activation(T, M, 1.5e-13, -0.6, 2.1e9, -6.1), hand, rel_tol=1e-12)


def test_chemact_limits():
    # low pressure -> k0(T); high pressure -> kinf(T)/[M] (JPL 19-5, section 2)
    T = 250.0
    k0T = 1.5e-13 * (T / 300.0) ** 0.6
    kinfT = 2.1e9 * (T / 300.0) ** 6.1
    assert math.isclose(chemical_activation(T, 1e-40, 1.5e-13, -0.6, 2.1e9, -6.1), k0T, rel_tol=1e-3)
    high = 1e90
    assert math.isclose(chemical_activation(T, high, 1.5e-13, -0.6, 2.1e9, -6.1), kinfT / high, rel_tol=1e-3)


@pytest.mark.parametrize("T", TEMPERATURES)
def test_equilibrium_hand(T):
    # ClO dimer: K = 2.16e-27 exp(8537/T) cm3 (JPL, recalled from memory)
    assert math.isclose(equilibrium_constant(T, 2.16e-27, 8537.0), 2.16e-27 * math.exp(8537.0 / T),
                        rel_tol=1e-12)


def test_parametric_photolysis_hand_and_horizon():
    # J = l cos(chi)^m exp(-n sec(chi)) (Jenkin et al., 1997); parameters invented for the check
    l, m, n = 6.073e-5, 1.743, 0.474
    for chi in (0.0, 45.0, 80.0):
        c = math.cos(math.radians(chi))
        assert math.isclose(parametric_photolysis(chi, l, m, n), l * c ** m * math.exp(-n / c), rel_tol=1e-12)
    # zero at and below the horizon (common practice, no source)
    assert np.all(parametric_photolysis(np.array([90.0, 95.0, 180.0]), l, m, n) == 0.0)
    assert parametric_photolysis(91.0, l, m, n, horizon_zenith_angle=94.0) == 0.0  # cos < 0
    assert parametric_photolysis(89.0, l, m, n, horizon_zenith_angle=88.0) == 0.0


def test_mean_molecular_speed():
    # N2 at 298.15 K: mean speed 475 m s-1 (physical chemistry textbook tables, e.g. Atkins;
    # recalled from memory)
    assert math.isclose(mean_molecular_speed(298.15, 28.013), 475.0e2, rel_tol=3e-3)
    # closed form sqrt(8RT/(pi M)) with R = 8.314462618 J mol-1 K-1 (SI 2019 exact value)
    hand = math.sqrt(8 * 8.314462618 * 195.0 / (math.pi * 97.46e-3)) * 100
    assert math.isclose(mean_molecular_speed(195.0, 97.46), hand, rel_tol=1e-12)


def test_surface_uptake_hand():
    # k = gamma v S / 4 (kinetic regime; Seinfeld and Pandis, 2016); ClONO2 on a PSC
    gamma, S, T, M = 0.3, 1.0e-8, 195.0, 97.46
    v = math.sqrt(8 * 8.314462618 * T / (math.pi * M * 1e-3)) * 100
    assert math.isclose(surface_uptake(T, gamma, M, S), gamma * v * S / 4, rel_tol=1e-12)


MECH = """
[species]
O
O3
ClO
Cl2O2
ClONO2
HCl
Cl2
HNO3
OH
CO
H
CO2
M fixed
O2 fixed 0.2095
[reactions]
r_const  O + O3 -> 2 O2                    constant   k=8.0e-15
r_arr    O + O3 -> O2 + O2                 arrhenius  A=8.0e-12 E/R=2060
r_m      O + O2 + M -> O3 + M              arrhenius  A=6.0e-34 n=-2.4
r_fall   ClO + ClO + M -> Cl2O2 + M        falloff    k0=1.6e-32 n=4.5 kinf=3.0e-12 m=2.0
r_rev    Cl2O2 + M -> ClO + ClO + M        reverse    of=r_fall K=2.16e-27 B=8537
r_chem   OH + CO -> H + CO2                chemact    k0=1.5e-13 n=-0.6 kinf=2.1e9 m=-6.1
j_o3     O3 + hv -> O + O2                 photolysis l=5e-4 m=1.0 n=0.2 scale=2
j_dimer  Cl2O2 + hv -> ClO + ClO           photolysis data=Cl2O2
s_psc    ClONO2 + HCl -> Cl2 + HNO3        surface    gamma=0.2 on=psc
s_sulf   ClONO2 + HCl -> Cl2 + HNO3        surface    gamma=0.1 on=sulfate
s_all    ClONO2 -> ClONO2                  surface    gamma=0.05 on=all
"""


@pytest.fixture(scope="module")
def evaluator():
    return parse_mechanism(MECH), RateEvaluator(parse_mechanism(MECH))


def test_evaluator_thermal_matches_laws(evaluator):
    mech, ev = evaluator
    T = np.array([[195.0, 220.0], [250.0, 298.0]])
    M = np.array([1.0e17, 2.46e19])  # broadcast along the last axis of T
    k = ev.thermal(T, M)
    assert k.shape == (2, 2, len(mech.reactions))
    col = {r.id: i for i, r in enumerate(mech.reactions)}
    for idx in np.ndindex(T.shape):
        t, m = T[idx], M[idx[-1]]
        kk = k[idx]
        # hand calculations of each form (JPL 19-5 forms; values recalled from memory)
        assert kk[col["r_const"]] == 8.0e-15
        assert math.isclose(kk[col["r_arr"]], 8.0e-12 * math.exp(-2060 / t), rel_tol=1e-12)
        assert math.isclose(kk[col["r_m"]], 6.0e-34 * (t / 300) ** -2.4, rel_tol=1e-12)
        kf = _falloff_hand(t, m, 1.6e-32, 4.5, 3.0e-12, 2.0)
        assert math.isclose(kk[col["r_fall"]], kf, rel_tol=1e-12)
        assert math.isclose(kk[col["r_rev"]], kf / (2.16e-27 * math.exp(8537 / t)), rel_tol=1e-12)
        assert kk[col["j_o3"]] == 0.0 and kk[col["s_psc"]] == 0.0
    assert list(ev.photolysis_index) == [col["j_o3"], col["j_dimer"]]


def test_evaluator_surface_areas(evaluator):
    mech, ev = evaluator
    col = {r.id: i for i, r in enumerate(mech.reactions)}
    T, psc, sulf = np.array([195.0, 200.0]), np.array([1e-8, 0.0]), np.array([2e-9, 3e-9])
    k = ev.surface(T, psc, sulf)
    m_clono2 = 35.45 + 14.007 + 3 * 15.999  # g mol-1, IUPAC standard atomic weights (recalled)
    v = np.sqrt(8 * 8.314462618 * T / (np.pi * m_clono2 * 1e-3)) * 100  # kinetic theory
    np.testing.assert_allclose(k[:, col["s_psc"]], 0.2 * v * psc / 4, rtol=1e-12)
    np.testing.assert_allclose(k[:, col["s_sulf"]], 0.1 * v * sulf / 4, rtol=1e-12)
    np.testing.assert_allclose(k[:, col["s_all"]], 0.05 * v * (psc + sulf) / 4, rtol=1e-12)
    assert np.all(k[:, col["r_arr"]] == 0.0)

