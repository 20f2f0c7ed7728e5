"""The batched time loop (integrate_batch) and the sparse LU of the compiled kernels."""
from __future__ import annotations

import numpy as np
import pytest

from boxchem.mechanism import parse_mechanism
from boxchem.solver import CompiledKinetics, RateCoefficientModel, integrate_batch, integrate_box

CHAIN = """
[species]
A  lumped
B  lumped
C  lumped
M  fixed
[reactions]
a_b   A -> B   constant  k=1e-3  ref="invented test value"
b_c   B -> C   constant  k=2.5e-4  ref="invented test value"
"""


def _chain():
    from boxchem.environment.history import Environment
    mech = parse_mechanism(CHAIN)
    kin = CompiledKinetics(mech)
    env = Environment("2026-06-01T00:00:00Z", latitude=-80.0, longitude=0.0, ozone_column=270.0,
                      altitude=19000.0, temperature=200.0, pressure=5500.0)
    return kin, RateCoefficientModel(mech, None, None, env, kinetics=kin)


@pytest.fixture(scope="module")
def polar():
    """Two days of the shipped polar-spring scenario (sunrise/sunset, PSCs, spectral J)."""
    from boxchem.runner import prepare
    from boxchem.scenario import load_scenario
    setup = prepare(load_scenario("polar-spring").with_overrides(
        **{"run.duration": "2 d", "run.start": "2026-09-10T00:00:00Z"}))
    return setup


def _run_batch(setup, y0, lm, **kw):
    sc = setup.scenario
    return integrate_batch(setup.kinetics, setup.coefficients, y0, setup.output_times_s,
                           log_multiplier=lm, breakpoints_s=setup.breakpoints_s, rtol=sc.rtol,
                           atol=sc.atol, **kw)


def test_batch_members_follow_the_bateman_solution_with_their_multipliers():
    # A -> B -> C with k1 f1 and k2 f2: B(t) = A0 k1/(k2 - k1) (exp(-k1 t) - exp(-k2 t))
    # (Bateman 1910, Proc. Camb. Phil. Soc. 15, 423); each member sees its own factors
    kin, coef = _chain()
    t = np.linspace(0.0, 20000.0, 41)
    factors = np.array([[1.0, 1.0], [2.0, 1.0], [1.0, 0.5], [0.0, 1.0]])
    with np.errstate(divide="ignore"):
        lm = np.log(factors)
    y0 = np.tile([1e12, 0.0, 0.0], (4, 1))
    res = integrate_batch(kin, coef, y0, t, log_multiplier=lm, rtol=1e-7, atol=1e-2)
    assert np.all(res.status == 0) and res.y.shape == (4, t.size, 3)
    for m, (f1, f2) in enumerate(factors):
        k1, k2, a0 = 1e-3 * f1, 2.5e-4 * f2, 1e12
        a_exact = a0 * np.exp(-k1 * t)
        b_exact = a0 * k1 / (k2 - k1) * (np.exp(-k1 * t) - np.exp(-k2 * t))
        np.testing.assert_allclose(res.y[m, :, 0], a_exact, rtol=1e-5, atol=1e-9 * a0)
        np.testing.assert_allclose(res.y[m, :, 1], b_exact, rtol=1e-5, atol=1e-6 * a0)
        np.testing.assert_allclose(res.member_k(m)[:, 0], k1, rtol=1e-14)
    # a member with f = 0 on A -> B: nothing moves (exact)
    np.testing.assert_array_equal(res.y[3, :, 0], 1e12)


def test_batch_members_equal_single_runs_with_the_same_multipliers(polar):
    # per-member step control: a member's numbers do not depend on its batch (to rounding,
    # here bit for bit); work counters are the member's own
    rng = np.random.default_rng(8)
    nr = polar.kinetics.n_reactions
    lm = np.log(rng.lognormal(0.0, 0.3, size=(3, nr)))
    y0 = np.tile(polar.y0, (3, 1))
    batch = _run_batch(polar, y0, lm)
    assert np.all(batch.status == 0)
    for m in range(3):
        single = _run_batch(polar, y0[m:m + 1], lm[m:m + 1])
        np.testing.assert_allclose(batch.y[m], single.y[0], rtol=1e-12, atol=0)
        assert batch.steps[m] == single.steps[0] and batch.rejected_steps[m] == single.rejected_steps[0]
    # the members really differ (the multipliers matter at the 1e-3 level or more)
    o3 = polar.kinetics.variable_species.index("ClO")
    assert np.ptp(batch.y[:, -1, o3]) / batch.y[0, -1, o3] > 1e-3
    # a batch of one equals integrate_box (the thin wrapper)
    sc = polar.scenario
    box = integrate_box(polar.kinetics, polar.coefficients, polar.y0, polar.output_times_s,
                        breakpoints_s=polar.breakpoints_s, rtol=sc.rtol, atol=sc.atol)
    one = _run_batch(polar, polar.y0, None)
    np.testing.assert_array_equal(box.y, one.y[0])
    assert box.steps == one.steps[0]


def test_a_failing_member_is_recorded_and_the_others_finish_as_single_runs(polar):
    nr = polar.kinetics.n_reactions
    lm = np.zeros((3, nr))
    lm[1, :] = np.log(1e300)          # absurd: every k times 1e300
    lm[2, 0] = np.log(1.5)
    y0 = np.tile(polar.y0, (3, 1))
    batch = _run_batch(polar, y0, lm)
    assert list(batch.status[[0, 2]]) == [0, 0] and batch.status[1] > 0
    assert "step size fell below the minimum" in batch.message[1]
    assert np.isfinite(batch.failure_time_s[1]) and np.isnan(batch.failure_time_s[0])
    assert batch.outputs_reached[1] < len(polar.output_times_s)
    assert np.all(np.isnan(batch.y[1, batch.outputs_reached[1]:]))
    for m in (0, 2):
        single = _run_batch(polar, y0[m:m + 1], lm[m:m + 1])
        np.testing.assert_allclose(batch.y[m], single.y[0], rtol=1e-12, atol=0)
    part = batch.member(1)
    assert part.status == -1 and part.y.shape[0] == batch.outputs_reached[1]


def test_batch_argument_errors_name_the_argument(polar):
    kin, coef = polar.kinetics, polar.coefficients
    with pytest.raises(ValueError, match=r"log_multiplier: expected shape \(2, "):
        integrate_batch(kin, coef, np.tile(polar.y0, (2, 1)), [0.0, 10.0], log_multiplier=np.zeros(3))
    bad = np.zeros((1, kin.n_reactions))
    bad[0, 4] = np.nan
    with pytest.raises(ValueError, match=rf"log_multiplier: member 0, reaction '{kin.reaction_ids[4]}'"):
        integrate_batch(kin, coef, polar.y0, [0.0, 10.0], log_multiplier=bad)
    with pytest.raises(ValueError, match=r"y0: expected shape \(n_members, "):
        integrate_batch(kin, coef, np.zeros((2, 3)), [0.0, 10.0])
    with pytest.raises(ValueError, match="on_accept: only for a batch of one"):
        integrate_batch(kin, coef, np.tile(polar.y0, (2, 1)), [0.0, 10.0], on_accept=print)


def test_sparse_lu_solves_like_dense_lu_on_the_shipped_jacobian(polar):
    # LU without pivoting on the symbolic pattern (Sandu et al. 1996, J. Comput. Phys. 129, 101)
    # against numpy's dense LAPACK solve of the same W = I/(h gamma) - J, at several h
    from boxchem.solver import compiled as cm
    from boxchem.solver.sparselu import sparse_lu_structure
    kin, coef = polar.kinetics, polar.coefficients
    lu = sparse_lu_structure(kin)
    perm, ptr, col, diag, l_pos, l_pivot, op_ptr, op_src, op_dst = lu.arrays()
    rng = np.random.default_rng(2)
    k, fixed = coef(43200.0)
    y = polar.y0 * rng.uniform(0.5, 2.0, kin.n_variable) + 1e3
    jac = cm.compiled_jacobian(kin, y, k, fixed)
    jv = cm.compiled_sparse_jacobian(kin, y, k, fixed)
    nv = kin.n_variable
    a, rowmax = np.empty(lu.nnz), np.empty(nv)
    w, piv, cols = np.empty((nv, nv)), np.empty(nv, np.int64), np.empty(nv, np.int64)
    for h in (1e-3, 10.0, 600.0, 1e5):
        shift = 1.0 / (h * 0.5)
        mode = cm._factor_w(jv, shift, ptr, col, diag, l_pos, l_pivot, op_ptr, op_src, op_dst, a,
                            rowmax, w, piv, cols, cm.PIVOT_TOLERANCE)
        assert mode == 1                     # the static pivots were good enough (no fallback)
        b = rng.normal(size=nv) * 1e6
        x = b.copy()
        cm._solve_w(mode, a, ptr, col, diag, perm, w, piv, x, np.empty(nv))
        dense = np.linalg.solve(np.eye(nv) * shift - jac, b)
        np.testing.assert_allclose(x, dense, rtol=1e-12, atol=1e-12 * np.abs(dense).max())
    # fewer stored entries than the dense matrix, and fill-in far below it
    assert lu.nnz < 0.35 * nv * nv


def test_a_zero_static_pivot_falls_back_to_the_pivoting_dense_lu():
    # A <-> B: W = shift I - J with shift = J of the first species in the LU order has a
    # zero first pivot but is not singular (det = -k1 k2): no LU without row exchanges
    # exists (Golub & Van Loan 2013, 3.4), so the kernel must take the dense pivoting LU
    from boxchem.environment.history import Environment
    from boxchem.solver import compiled as cm
    from boxchem.solver.sparselu import sparse_lu_structure
    mech = parse_mechanism("""
[species]
A  lumped
B  lumped
M  fixed
[reactions]
a_b   A -> B   constant  k=1e-3  ref="invented test value"
b_a   B -> A   constant  k=4e-3  ref="invented test value"
""")
    kin = CompiledKinetics(mech)
    env = Environment("2026-06-01T00:00:00Z", latitude=0.0, longitude=0.0, ozone_column=270.0,
                      altitude=19000.0, temperature=200.0, pressure=5500.0)
    k, fixed = RateCoefficientModel(mech, None, None, env, kinetics=kin)(0.0)
    lu = sparse_lu_structure(kin)
    perm, ptr, col, diag, l_pos, l_pivot, op_ptr, op_src, op_dst = lu.arrays()
    y = np.array([1.0, 1.0])
    jv = cm.compiled_sparse_jacobian(kin, y, k, fixed)
    jac = cm.compiled_jacobian(kin, y, k, fixed)
    first = int(lu.perm[0])
    shift = jac[first, first]
    nv = kin.n_variable
    a, colmax = np.empty(lu.nnz), np.empty(nv)
    w, piv, cols = np.empty((nv, nv)), np.empty(nv, np.int64), np.empty(nv, np.int64)
    mode = cm._factor_w(jv, shift, ptr, col, diag, l_pos, l_pivot, op_ptr, op_src, op_dst, a, colmax,
                        w, piv, cols, cm.PIVOT_TOLERANCE)
    assert mode == 2
    b = np.array([1.0, -2.0])
    x = b.copy()
    cm._solve_w(mode, a, ptr, col, diag, perm, w, piv, x, np.empty(nv))
    np.testing.assert_allclose(x, np.linalg.solve(np.eye(nv) * shift - jac, b), rtol=1e-12)
