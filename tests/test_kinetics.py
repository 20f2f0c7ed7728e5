"""Compiled kinetics: rates, RHS and analytic Jacobian from index arrays."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from boxchem.mechanism.model import Mechanism, Reaction, Species, Term
from boxchem.solver.kinetics import SURFACE_COREACTANT_HALF, CompiledKinetics


def _sp(name, formula=None, fixed=False, mole_fraction=None):
    return Species(name, formula, fixed=fixed, mole_fraction=mole_fraction)


def _rx(rid, reactants, products, law="arrhenius", third_body=False):
    return Reaction(rid, tuple(Term(*t) if isinstance(t, tuple) else Term(t) for t in reactants),
                    tuple(Term(*t) if isinstance(t, tuple) else Term(t) for t in products),
                    law, third_body=third_body)


def toy_chlorine_mechanism() -> Mechanism:
    """A small closed Cl/O mechanism covering every rate form the kernels know."""
    species = (
        _sp("O3", {"O": 3}), _sp("O", {"O": 1}), _sp("Cl", {"Cl": 1}), _sp("ClO", {"Cl": 1, "O": 1}),
        _sp("Cl2O2", {"Cl": 2, "O": 2}), _sp("HCl", {"H": 1, "Cl": 1}),
        _sp("ClONO2", {"Cl": 1, "O": 3, "N": 1}), _sp("Cl2", {"Cl": 2}), _sp("HNO3", {"H": 1, "N": 1, "O": 3}),
        _sp("M", None, fixed=True), _sp("O2", {"O": 2}, fixed=True, mole_fraction=0.2095),
    )
    reactions = (
        _rx("cl_o3", ["Cl", "O3"], ["ClO", "O2"]),
        _rx("clo_dimer", [("ClO", 2.0)], ["Cl2O2"], law="falloff", third_body=True),
        _rx("dimer_back", ["Cl2O2"], [("ClO", 2.0)], law="arrhenius", third_body=True),
        _rx("j_dimer", ["Cl2O2"], [("Cl", 2.0), "O2"], law="photolysis"),
        _rx("o_o2", ["O", "O2"], ["O3"], law="arrhenius", third_body=True),
        _rx("het", ["ClONO2", "HCl"], ["Cl2", "HNO3"], law="surface"),
        _rx("j_cl2", ["Cl2"], [("Cl", 2.0)], law="photolysis"),
        _rx("clo_o", ["ClO", "O"], ["Cl", "O2"]),
    )
    return Mechanism(species, reactions)


@pytest.fixture()
def kin():
    return CompiledKinetics(toy_chlorine_mechanism())


def _state(kin, rng, members=()):
    y = 10 ** rng.uniform(4, 12, size=members + (kin.n_variable,))
    k = 10 ** rng.uniform(-16, -2, size=members + (kin.n_reactions,))
    fixed = kin.fixed_number_densities(10 ** rng.uniform(17, 18, size=members))
    return y, k, fixed


def _assert_jacobian_matches_central_differences(kin, y, k, fixed, jac):
    """Central differences (common practice, no source): truncation ~1e-8 relative for
    these low-degree rational rates; the round-off allowance is eps * (P + L) / h."""
    p, l = kin.production_loss(y, k, fixed)
    for j in range(kin.n_variable):
        h = 1e-4 * y[j]
        yp, ym = y.copy(), y.copy()
        yp[j] += h
        ym[j] -= h
        fd = (kin.rhs(yp, k, fixed) - kin.rhs(ym, k, fixed)) / (2 * h)
        allowed = 1e-6 * np.abs(jac).max(axis=1) + 1e-14 * (p + l) / h
        assert np.all(np.abs(jac[:, j] - fd) <= allowed), kin.variable_species[j]


def test_rates_follow_mass_action_by_hand(kin):
    # Mass-action rate law k * prod([X]^nu) (common practice, no source); values invented.
    v = dict(zip(kin.variable_species, range(kin.n_variable)))
    y = np.arange(1.0, kin.n_variable + 1) * 1e8
    k = np.arange(1.0, kin.n_reactions + 1) * 1e-12
    air = 2.0e18
    fixed = kin.fixed_number_densities(air)
    r = dict(zip(kin.reaction_ids, kin.rates(y, k, fixed)))
    o2 = 0.2095 * air
    assert r["cl_o3"] == pytest.approx(1e-12 * y[v["Cl"]] * y[v["O3"]], rel=1e-14, abs=0)
    # second order in ClO; falloff k already contains [M] (DEVELOPERS.md contract)
    assert r["clo_dimer"] == pytest.approx(2e-12 * y[v["ClO"]] ** 2, rel=1e-14, abs=0)
    # arrhenius with M on the left: rate k [M] [Cl2O2]
    assert r["dimer_back"] == pytest.approx(3e-12 * air * y[v["Cl2O2"]], rel=1e-14, abs=0)
    assert r["o_o2"] == pytest.approx(5e-12 * y[v["O"]] * o2 * air, rel=1e-14, abs=0)
    # surface: first order in ClONO2 times HCl/(HCl + B_half) (DEVELOPERS.md "Surface keys")
    hcl = y[v["HCl"]]
    assert r["het"] == pytest.approx(6e-12 * y[v["ClONO2"]] * hcl / (hcl + SURFACE_COREACTANT_HALF),
                                     rel=1e-14, abs=0)


def test_rhs_counts_stoichiometric_coefficients(kin):
    # 2 ClO -> Cl2O2 removes two ClO per reaction (common practice, no source).
    v = dict(zip(kin.variable_species, range(kin.n_variable)))
    y = np.zeros(kin.n_variable)
    y[v["ClO"]] = 1e9
    k = np.zeros(kin.n_reactions)
    k[kin.reaction_ids.index("clo_dimer")] = 1e-13
    f = kin.rhs(y, k, kin.fixed_number_densities(1e18))
    assert f[v["ClO"]] == pytest.approx(-2 * 1e-13 * 1e18, rel=1e-14, abs=0)
    assert f[v["Cl2O2"]] == pytest.approx(1e-13 * 1e18, rel=1e-14, abs=0)
    assert np.count_nonzero(f) == 2


def test_jacobian_matches_finite_differences(kin):
    # Central differences, error O(h^2) (common practice, no source).
    rng = np.random.default_rng(1)
    y, k, fixed = _state(kin, rng)
    y[kin.variable_species.index("HCl")] = 2e3  # near B_half: saturation curvature matters
    jac = kin.jacobian(y, k, fixed)
    _assert_jacobian_matches_central_differences(kin, y, k, fixed, jac)


def test_jacobian_exact_at_zero_concentrations(kin):
    # d(k[ClO]^2)/d[ClO] = 2k[ClO] = 0 at [ClO] = 0; d(k[Cl][O3])/d[Cl] = k[O3] (closed form).
    v = dict(zip(kin.variable_species, range(kin.n_variable)))
    y = np.zeros(kin.n_variable)
    y[v["O3"]] = 3e12
    k = np.ones(kin.n_reactions) * 1e-11
    jac = kin.jacobian(y, k, kin.fixed_number_densities(1e18))
    assert jac[v["Cl"], v["Cl"]] == pytest.approx(-1e-11 * 3e12, rel=1e-14, abs=0)
    assert jac[v["ClO"], v["Cl"]] == pytest.approx(1e-11 * 3e12, rel=1e-14, abs=0)
    assert jac[v["ClO"], v["ClO"]] == 0.0  # 2k[ClO] + k[O] with both zero
    assert np.all(np.isfinite(jac))


def test_batched_rhs_and_jacobian_equal_per_member(kin):
    rng = np.random.default_rng(2)
    y, k, fixed = _state(kin, rng, members=(5,))
    f = kin.rhs(y, k, fixed)
    jac = kin.jacobian(y, k, fixed)
    assert f.shape == (5, kin.n_variable)
    assert jac.shape == (5, kin.n_variable, kin.n_variable)
    for m in range(5):
        np.testing.assert_allclose(f[m], kin.rhs(y[m], k[m], fixed[m]), rtol=1e-13, atol=0)
        np.testing.assert_allclose(jac[m], kin.jacobian(y[m], k[m], fixed[m]), rtol=1e-13, atol=0)
    # shared k and fixed broadcast over members of y
    np.testing.assert_allclose(kin.rhs(y, k[0], fixed[0])[3], kin.rhs(y[3], k[0], fixed[0]), rtol=1e-13)


def test_rhs_conserves_atoms_exactly(kin):
    # Balanced reactions conserve every element (law of conservation of mass; common practice).
    # O2 is fixed, so only Cl, N and H are closed among the variable species here.
    rng = np.random.default_rng(3)
    y, k, fixed = _state(kin, rng, members=(4,))
    f = kin.rhs(y, k, fixed)
    mech = kin.mechanism
    for element in ("Cl", "N", "H"):
        w = np.array([mech.species_by_name(s).atoms(element) for s in kin.variable_species], float)
        total_rate = f @ w
        scale = np.abs(f).max(axis=-1) * w.max()
        assert np.all(np.abs(total_rate) <= 1e-13 * scale)


def test_production_minus_loss_is_rhs(kin):
    rng = np.random.default_rng(4)
    y, k, fixed = _state(kin, rng)
    p, l = kin.production_loss(y, k, fixed)
    assert np.all(p >= 0) and np.all(l >= 0)
    np.testing.assert_allclose(p - l, kin.rhs(y, k, fixed), rtol=1e-9, atol=1e-9 * np.abs(p).max())


def test_fixed_species_without_mole_fraction_is_an_error():
    mech = Mechanism((_sp("A"), _sp("H2O", {"H": 2, "O": 1}, fixed=True)),
                     (_rx("r", ["A", "H2O"], ["A"]),))
    kin = CompiledKinetics(mech)
    with pytest.raises(Exception, match="H2O"):
        kin.fixed_number_densities(1e18)
    fixed = kin.fixed_number_densities(1e18, {"H2O": 5e-6})
    # number density = mole fraction x [M] (definition; common practice, no source)
    assert fixed[kin.fixed_species.index("H2O")] == pytest.approx(5e-6 * 1e18, rel=1e-14, abs=0)


SHIPPED = Path(__file__).resolve().parents[1] / "mechanisms" / "stratosphere.mech"


@pytest.mark.skipif(not SHIPPED.exists(), reason="shipped stratosphere mechanism not present yet")
def test_jacobian_of_shipped_mechanism_matches_finite_differences():
    from boxchem.mechanism import load_mechanism
    kin = CompiledKinetics(load_mechanism(str(SHIPPED)))
    rng = np.random.default_rng(5)
    y, k, fixed = _state(kin, rng)
    fixed = kin.fixed_number_densities(
        3e17, {s: 1e-6 for s in kin.fixed_species if s != "M"})
    jac = kin.jacobian(y, k, fixed)
    _assert_jacobian_matches_central_differences(kin, y, k, fixed, jac)


# -- the compiled (numba) kernels against the numpy ones -------------------------------
compiled = pytest.importorskip("boxchem.solver.compiled")
needs_numba = pytest.mark.skipif(compiled._numba is None, reason="numba not installed")


@needs_numba
@pytest.mark.parametrize("which", ["toy", "shipped"])
def test_compiled_rhs_and_jacobian_equal_numpy_kernels(which, kin):
    # the same formulas summed in another order: equal to rounding (1e-12 relative of the
    # largest term; the RHS is a difference of production and loss, so relative to P + L)
    if which == "shipped":
        if not SHIPPED.exists():
            pytest.skip("shipped mechanism not present")
        from boxchem.mechanism import load_mechanism
        kin = CompiledKinetics(load_mechanism(str(SHIPPED)))
    rng = np.random.default_rng(11)
    for _ in range(3):
        y, k, fixed = _state(kin, rng)
        fixed = kin.fixed_number_densities(3e17, {s: 1e-6 for s in kin.fixed_species if s != "M"})
        y[rng.integers(0, kin.n_variable)] = 0.0          # exact zeros too
        p, l = kin.production_loss(y, k, fixed)
        f = compiled.compiled_rhs(kin, y, k, fixed)
        assert np.all(np.abs(f - kin.rhs(y, k, fixed)) <= 1e-12 * (p + l))
        jn = kin.jacobian(y, k, fixed)
        jc = compiled.compiled_jacobian(kin, y, k, fixed)
        scale = np.abs(jn).max(axis=1, keepdims=True)
        assert np.all(np.abs(jc - jn) <= 1e-12 * scale)
        assert np.array_equal(jc != 0, jn != 0)


@needs_numba
def test_compiled_lu_solves_systems_that_need_pivoting():
    # LU with partial pivoting (Golub & Van Loan 2013, alg. 3.4.1) against numpy.linalg.solve,
    # on a matrix with a zero leading entry (no factorisation without row swaps) and sparse rows
    rng = np.random.default_rng(3)
    n = 30
    a = rng.normal(size=(n, n)) * (rng.random((n, n)) < 0.2) + np.diag(rng.uniform(1, 2, n))
    a[0, 0] = 0.0
    a[0, 5] = 3.0
    b = rng.normal(size=n)
    lu, piv, cols = a.copy(), np.zeros(n, dtype=np.int64), np.zeros(n, dtype=np.int64)
    assert compiled._lu_factor(lu, piv, cols)
    x = b.copy()
    compiled._lu_solve(lu, piv, x)
    np.testing.assert_allclose(x, np.linalg.solve(a, b), rtol=1e-10, atol=1e-12)
    assert not compiled._lu_factor(np.zeros((3, 3)), np.zeros(3, dtype=np.int64), np.zeros(3, dtype=np.int64))


@pytest.mark.skipif(not SHIPPED.exists(), reason="shipped mechanism not present")
def test_fill_reducing_order_is_a_permutation_that_reduces_fill():
    # symbolic elimination without pivoting (common practice, no source): the degree order
    # must not give more fill-in than the mechanism order
    from boxchem.mechanism import load_mechanism
    kin = CompiledKinetics(load_mechanism(str(SHIPPED)))
    order = compiled.fill_reducing_order(kin)
    assert sorted(order.tolist()) == list(range(kin.n_variable))
    pattern = np.eye(kin.n_variable, dtype=bool)
    pattern.flat[kin._jac_rows] = True

    def fill(perm):
        p = pattern[np.ix_(perm, perm)].copy()
        for j in range(len(perm)):
            rows = np.nonzero(p[j + 1:, j])[0] + j + 1
            cols = np.nonzero(p[j, j + 1:])[0] + j + 1
            p[np.ix_(rows, cols)] = True
        return p.sum()

    assert fill(order) < 0.5 * fill(np.arange(kin.n_variable))
