"""60-day diurnal polar run of the shipped mechanism: speed, work and accuracy.

Prints (all measured in this run, on this machine):

* the one-off cost of loading (or, on a fresh checkout, compiling) the
  compiled solver (numba caches the machine code next to the module);
* wall time, steps, rejected steps, RHS / Jacobian / LU counts of the boxchem
  integrator (Rosenbrock RODAS3, analytic Jacobian, sunrise/sunset
  breakpoints; the compiled loop, ``boxchem.solver.compiled``) at several
  absolute tolerances, and of the numpy path at the default tolerances;
* the error of O3 and ClO against a tight-tolerance reference (the numpy
  path, which evaluates k(t) exactly at every step, at rtol 1e-6, atol
  1e-4 cm-3; about a minute), as the largest relative deviation of O3 over the run and the
  largest deviation of ClO relative to its peak;
* the error of the compiled loop's k(t) tables against the exact k(t) on the
  first days (largest relative error where k > 1e-6 of its peak);
* the ratio to a naive integration of the same system: scipy solve_ivp BDF
  with a finite-difference Jacobian, no breakpoints, the same tolerances,
  RHS and exact k(t).  The naive run is slow, so it is measured on a shorter
  window (NAIVE_DAYS) and compared with boxchem on the same window (median
  of three runs each); the output says so.

Usage:  python benchmarks/bench_polar_run.py [--days 60] [--naive-days 2] [--quick]
The scenario is the shipped ``stratosphere-box`` with its duration replaced.
``--quick`` skips the numpy reference (then the tight reference is the compiled
loop at rtol 1e-7, which shares its k(t) tables with the runs it checks).
"""
from __future__ import annotations

import argparse
import statistics
import time

import numpy as np
from scipy.integrate import solve_ivp

from boxchem.runner import prepare
from boxchem.scenario import load_scenario
from boxchem.solver import DEFAULT_ATOL, DEFAULT_RTOL, RODAS3, integrate_box

REFERENCE_RTOL = 1e-6        # numpy path (exact k(t) at every step)
QUICK_REFERENCE_RTOL = 1e-7  # compiled path (--quick)
REFERENCE_ATOL = 1e-4  # cm-3
ATOLS = (1e-2, 1.0, 1e2)  # cm-3, compared at rtol = DEFAULT_RTOL


def _setup(days: float, output_interval: str):
    scenario = load_scenario("stratosphere-box").with_overrides(
        duration=f"{days:g} d", output_interval=output_interval)
    return scenario, prepare(scenario)


def _boxchem(setup, rtol, atol, t_end=None, compiled=True):
    times = setup.output_times_s if t_end is None else setup.output_times_s[setup.output_times_s <= t_end]
    breaks = setup.breakpoints_s[setup.breakpoints_s < times[-1]]
    t0 = time.perf_counter()
    res = integrate_box(setup.kinetics, setup.coefficients, setup.y0, times,
                        breakpoints_s=breaks, rtol=rtol, atol=atol, method=RODAS3, compiled=compiled)
    return res, time.perf_counter() - t0


def _naive(setup, t_end, rtol, atol):
    kin, coef = setup.kinetics, setup.coefficients

    def f(t, y):
        k, fx = coef(t)
        return kin.rhs(y, k, fx)

    t0 = time.perf_counter()
    sol = solve_ivp(f, (0.0, t_end), setup.y0.copy(), method="BDF", rtol=rtol, atol=atol)
    if not sol.success:
        raise RuntimeError(f"scipy BDF failed at t={sol.t[-1]:.6g} s: {sol.message}")
    return sol.y[:, -1], time.perf_counter() - t0, {"nfev": sol.nfev, "njev": sol.njev, "nlu": sol.nlu}


def _table_error(setup, days):
    """Largest relative error of the interval tables' k(t) where k > 1e-6 of its peak."""
    from boxchem.solver.coefficients import MAX_TABLE_INTERVAL_S
    coef, bp = setup.coefficients, setup.breakpoints_s
    t_end = days * 86400.0
    edges = np.union1d(bp[bp < t_end], [0.0, t_end])
    got, want = [], []
    for a, b in zip(edges[:-1], edges[1:]):
        n = max(1, int(np.ceil((b - a) / MAX_TABLE_INTERVAL_S)))
        for wa, wb in zip(a + (b - a) * np.arange(n) / n, a + (b - a) * np.arange(1, n + 1) / n):
            ta = wa + 1.0 if wa in bp else wa
            tb = wb - 1.0 if wb in bp else wb
            table = coef.interval_table(wa, wb, ta, tb)
            for x in np.linspace(0.0, 1.0, 61):
                got.append(table(wa + x * (wb - wa))[0])
                want.append(coef(ta + x * (tb - ta))[0])
    got, want = np.array(got), np.array(want)
    sig = want > 1e-6 * want.max(axis=0)
    err = np.abs(got - want)[sig] / want[sig]
    return err.max(), np.quantile(err, 0.999)


def _errors(res, ref, i_o3, i_clo):
    o3 = np.max(np.abs(res.y[:, i_o3] / ref.y[:, i_o3] - 1.0))
    clo = np.max(np.abs(res.y[:, i_clo] - ref.y[:, i_clo])) / np.max(ref.y[:, i_clo])
    return o3, clo


def _line(label, res, wall, ref, i_o3, i_clo):
    c = res.counters()
    o3, clo = _errors(res, ref, i_o3, i_clo)
    print(f"{label}: wall {wall:.2f} s, {c['steps']} steps, {c['rejected_steps']} rejected, "
          f"{c['rhs_evaluations']} RHS, {c['jacobian_evaluations']} Jacobians, "
          f"{c['lu_decompositions']} LU, {c['coefficient_evaluations']} k(t) evaluations/tables")
    print(f"  error vs reference: O3 max |rel| {o3:.2e} (target 5e-3); "
          f"ClO max |dev|/peak {clo:.2e} (target 2e-2)")


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--days", type=float, default=60.0)
    parser.add_argument("--naive-days", type=float, default=2.0)
    parser.add_argument("--output-interval", default="1 h")
    parser.add_argument("--quick", action="store_true")
    args = parser.parse_args(argv)

    t0 = time.perf_counter()
    scenario, setup = _setup(args.days, args.output_interval)
    t_prepare = time.perf_counter() - t0
    kin = setup.kinetics
    print(f"shipped mechanism: {kin.n_variable} integrated species, {kin.n_fixed} fixed, "
          f"{kin.n_reactions} reactions, {kin.jacobian_nonzeros} Jacobian non-zeros")
    print(f"scenario stratosphere-box, {args.days:g} days, output every {args.output_interval}, "
          f"{setup.breakpoints_s.size} sunrise/sunset breakpoints, photolysis "
          f"'{scenario.photolysis_method}'; setup {t_prepare:.2f} s (not counted below)")
    t0 = time.perf_counter()
    _boxchem(setup, DEFAULT_RTOL, DEFAULT_ATOL, t_end=3600.0)
    print(f"first compiled call (load or compile of the numba code): {time.perf_counter() - t0:.2f} s "
          f"(not counted below)")

    i_o3, i_clo = kin.variable_species.index("O3"), kin.variable_species.index("ClO")
    ref_rtol = QUICK_REFERENCE_RTOL if args.quick else REFERENCE_RTOL
    ref, wall_ref = _boxchem(setup, ref_rtol, REFERENCE_ATOL, compiled=args.quick)
    print(f"reference: {'compiled' if args.quick else 'numpy'} path, RODAS3 rtol={ref_rtol:g} "
          f"atol={REFERENCE_ATOL:g} cm-3: wall {wall_ref:.1f} s, {ref.steps} steps")
    print(f"O3 lost over the run (reference): {100 * (1 - ref.y[-1, i_o3] / ref.y[0, i_o3]):.1f} %")
    worst, q999 = _table_error(setup, min(args.days, 3.0))
    print(f"k(t) tables vs exact k(t), first {min(args.days, 3.0):g} days: max rel. error {worst:.1e}, "
          f"99.9th percentile {q999:.1e} (where k > 1e-6 of its peak)")

    print()
    for atol in ATOLS:
        res, wall = _boxchem(setup, DEFAULT_RTOL, atol)
        mark = " (default)" if atol == DEFAULT_ATOL else ""
        _line(f"boxchem compiled, rtol={DEFAULT_RTOL:g}, atol={atol:g} cm-3{mark}", res, wall,
              ref, i_o3, i_clo)
    res, wall = _boxchem(setup, 1e-3, DEFAULT_ATOL)
    _line(f"boxchem compiled, rtol=1e-3, atol={DEFAULT_ATOL:g} cm-3", res, wall, ref, i_o3, i_clo)
    res, wall = _boxchem(setup, DEFAULT_RTOL, DEFAULT_ATOL, compiled=False)
    _line(f"boxchem numpy path, rtol={DEFAULT_RTOL:g}, atol={DEFAULT_ATOL:g} cm-3", res, wall,
          ref, i_o3, i_clo)

    rtol, atol = DEFAULT_RTOL, DEFAULT_ATOL
    t_short = args.naive_days * 86400.0
    walls, naive_walls = [], []
    for _ in range(3):
        short, w = _boxchem(setup, rtol, atol, t_end=t_short)
        walls.append(w)
        y_naive, w_naive, cn = _naive(setup, short.times[-1], rtol, atol)
        naive_walls.append(w_naive)
    wall_short, wall_naive = statistics.median(walls), statistics.median(naive_walls)
    _, wall_numpy = _boxchem(setup, rtol, atol, t_end=t_short, compiled=False)
    print(f"\nnaive: scipy solve_ivp BDF, finite-difference Jacobian, no breakpoints, exact k(t), "
          f"rtol={rtol:g} atol={atol:g}, on the first {args.naive_days:g} days (median of 3):")
    print(f"  naive wall {wall_naive:.2f} s ({cn['nfev']} RHS incl. FD columns, {cn['njev']} Jacobians, "
          f"{cn['nlu']} LU) vs boxchem compiled {wall_short:.3f} s on the same window: "
          f"{wall_naive / wall_short:.0f}x faster (numpy path {wall_numpy:.3f} s: "
          f"{wall_naive / wall_numpy:.0f}x)")
    print(f"  naive O3 at the end of the window differs from boxchem by "
          f"{abs(y_naive[i_o3] / short.y[-1, i_o3] - 1):.1e} relative")


if __name__ == "__main__":
    main()
