"""Kernel cost per member of a lock-step layout (one step size, member index innermost).

A measurement behind the solver's step-size policy (DEVELOPERS.md, "Solver"): the
RHS and the sparse LU (factor + one solve), the bulk of a Rosenbrock step, written
for M members at once with the member index innermost (contiguous, SIMD-friendly),
against the per-member kernels the solver uses, called M times.  Prints the cost per
member and the ratio.  A lock-step batch also takes the union of every member's steps
(each member's rejection rejects all), which the second part estimates from the
per-member step counts of a real batch (a lower bound: max over members).

Usage: python benchmarks/bench_lockstep_kernels.py [--members 64]
Not a test: timings vary with the machine's load (CPU time of this process is printed).
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numba
import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from boxchem.runner import prepare  # noqa: E402
from boxchem.scenario import load_scenario  # noqa: E402
from boxchem.solver import compiled as cm  # noqa: E402
from boxchem.solver import integrate_batch  # noqa: E402
from boxchem.solver.sparselu import sparse_lu_structure  # noqa: E402


@numba.njit(cache=True, error_model="numpy")
def rhs_lockstep(n, y, k, fixed, mass, st_ptr, st_idx, st_val, c, rate, f):
    """RHS of M members: y (nv, M), k (nr, M), fixed (nf, M); mass-action part only."""
    nv, m_count = y.shape
    nf = fixed.shape[0]
    for _ in range(n):
        for i in range(nv):
            for m in range(m_count):
                c[i, m] = y[i, m]
        for i in range(nf):
            for m in range(m_count):
                c[nv + i, m] = fixed[i, m]
        for m in range(m_count):
            c[nv + nf, m] = 1.0
        for r in range(k.shape[0]):
            for m in range(m_count):
                rate[r, m] = k[r, m]
            for p in range(mass.shape[1]):
                s = mass[r, p]
                for m in range(m_count):
                    rate[r, m] *= c[s, m]
        for i in range(nv):
            for m in range(m_count):
                f[i, m] = 0.0
        for r in range(k.shape[0]):
            for q in range(st_ptr[r], st_ptr[r + 1]):
                i = st_idx[q]
                v = st_val[q]
                for m in range(m_count):
                    f[i, m] += v * rate[r, m]


@numba.njit(cache=True, error_model="numpy")
def rhs_members(n, y, k, fixed, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos, jac_cols,
                jac_vals, c, rate, d, f):
    """The solver's per-member RHS kernel, called for each member (y (M, nv))."""
    for _ in range(n):
        for m in range(y.shape[0]):
            cm._kinetics(y[m], k[m], fixed[m], mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos,
                         jac_cols, jac_vals, c, rate, d, f[m], f[m], True, False)


@numba.njit(cache=True, error_model="numpy")
def lu_lockstep(n, a0, a, l_pos, l_pivot, op_ptr, op_src, op_dst, ptr, col, diag, b, x):
    """Factor (no pivoting) and one solve for M members: a (nnz, M), b (nv, M) permuted."""
    nnz, m_count = a.shape
    nv = diag.shape[0]
    lik = np.empty(m_count)
    one = np.uint64(1)
    for _ in range(n):
        for p in range(nnz):
            for m in range(m_count):
                a[p, m] = a0[p, m]
        for e in range(l_pos.shape[0]):
            p = l_pos[e]
            piv = l_pivot[e]
            for m in range(m_count):
                lik[m] = a[p, m] / a[piv, m]
                a[p, m] = lik[m]
            for q in range(op_ptr[e], op_ptr[e + 1]):
                dst = op_dst[q]
                src = op_src[q]
                for m in range(m_count):
                    a[dst, m] -= lik[m] * a[src, m]
        for i in range(nv):
            for m in range(m_count):
                x[i, m] = b[i, m]
        for i in range(nv):
            for p in range(ptr[i], diag[i]):
                c = col[p]
                for m in range(m_count):
                    x[i, m] -= a[p, m] * x[c, m]
        for i in range(nv - 1, -1, -1):
            for p in range(diag[i] + one, ptr[i + 1]):
                c = col[p]
                for m in range(m_count):
                    x[i, m] -= a[p, m] * x[c, m]
            for m in range(m_count):
                x[i, m] /= a[diag[i], m]


@numba.njit(cache=True, error_model="numpy")
def lu_members(n, a0, a, l_pos, l_pivot, op_ptr, op_src, op_dst, ptr, col, diag, perm, b, x, cmax):
    """The solver's sparse factor + one solve, per member (a (M, nnz))."""
    for _ in range(n):
        for m in range(a.shape[0]):
            for p in range(a.shape[1]):
                a[m, p] = a0[m, p]
            cm._sparse_factor(a[m], diag, l_pos, l_pivot, op_ptr, op_src, op_dst, cmax, -1.0)
            cm._sparse_solve(a[m], ptr, col, diag, perm, b[m], x)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--members", type=int, default=64)
    ap.add_argument("--calls", type=int, default=300)
    args = ap.parse_args(argv)
    M, n = args.members, args.calls
    setup = prepare(load_scenario("polar-spring").with_overrides(
        **{"run.duration": "4 d", "run.start": "2026-09-10T00:00:00Z"}))
    kin, coef = setup.kinetics, setup.coefficients
    lu = sparse_lu_structure(kin)
    ka = cm.kinetics_arrays(kin)
    perm, ptr, col, diag, l_pos, l_pivot, op_ptr, op_src, op_dst = lu.arrays()
    rng = np.random.default_rng(1)
    k1, fx1 = coef(43200.0)
    nv, nf, nr = kin.n_variable, kin.n_fixed, kin.n_reactions
    y = (setup.y0 + 1e3) * rng.uniform(0.8, 1.2, (M, nv))
    k = k1 * rng.lognormal(0, 0.3, (M, nr))
    fx = np.tile(fx1, (M, 1))
    c, rate, d = cm._work(ka, nv, nf)
    f = np.empty((M, nv))
    rhs_args = (y, k, fx, *ka[:6], lu.jac_pos_unsigned, *ka[6:8], c, rate, d, f)
    lock_args = (np.ascontiguousarray(y.T), np.ascontiguousarray(k.T), np.ascontiguousarray(fx.T),
                 ka[0], ka[3], ka[4], ka[5], np.empty((nv + nf + 1, M)), np.empty((nr, M)),
                 np.empty((nv, M)))
    a0 = np.empty((M, lu.nnz))
    for m in range(M):
        jv = cm.compiled_sparse_jacobian(kin, y[m], k[m], fx[m])
        cm._sparse_w(jv, 1.0 / (0.5 * 60.0), col, diag, a0[m], np.empty(nv))
    b = rng.normal(size=(M, nv))
    mem_lu = (a0, np.empty_like(a0), l_pos, l_pivot, op_ptr, op_src, op_dst, ptr, col, diag, perm,
              b.copy(), np.empty(nv), np.empty(nv))
    lock_lu = (np.ascontiguousarray(a0.T), np.empty((lu.nnz, M)), l_pos, l_pivot, op_ptr, op_src,
               op_dst, ptr, col, diag, np.ascontiguousarray(b[:, perm].T), np.empty((nv, M)))
    print(f"kernels, {M} members, {nv} species, {nr} reactions (CPU time per member and call)")
    # the lock-step RHS leaves out the surface co-reactant factors (about 10 reactions): a
    # slight advantage to it
    for label, fa, aa, fb, ab in (("RHS", rhs_members, rhs_args, rhs_lockstep, lock_args),
                                  ("sparse LU + solve", lu_members, mem_lu, lu_lockstep, lock_lu)):
        fa(1, *aa)
        fb(1, *ab)
        t0 = time.process_time()
        fa(n, *aa)
        t_mem = (time.process_time() - t0) / (n * M)
        t0 = time.process_time()
        fb(n, *ab)
        t_lock = (time.process_time() - t0) / (n * M)
        print(f"  {label:20s} per member {t_mem * 1e6:6.2f} us, lock-step {t_lock * 1e6:6.2f} us "
              f"-> lock-step kernel speed-up {t_mem / t_lock:.2f}x")
    sc = setup.scenario
    lm = rng.normal(0.0, 0.3, size=(M, nr))
    res = integrate_batch(kin, coef, np.tile(setup.y0, (M, 1)), setup.output_times_s, log_multiplier=lm,
                          breakpoints_s=setup.breakpoints_s, rtol=sc.rtol, atol=sc.atol)
    att = res.steps + res.rejected_steps
    print(f"step attempts per member over 4 sunlit days (per-member control): mean {att.mean():.0f}, "
          f"max {att.max()}; a lock-step batch needs at least max/mean = {att.max() / att.mean():.2f}x "
          f"the attempts per member (a lower bound: it takes the union of all members' steps)")


if __name__ == "__main__":
    main()
