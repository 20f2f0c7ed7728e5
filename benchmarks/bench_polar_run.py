"""60-day diurnal polar run of the shipped mechanism: speed, work and accuracy.

Prints (all measured in this run, on this machine):

* wall time, steps, rejected steps, RHS / Jacobian / LU counts of the boxchem
  integrator (Rosenbrock RODAS3, analytic Jacobian, sunrise/sunset breakpoints)
  at the solver's default tolerances and at those of the shipped scenario;
* the error of O3 and ClO against a tight-tolerance reference (rtol 1e-6, atol 1e-4 cm-3),
  as the largest relative deviation of O3 over the run and the largest
  deviation of ClO relative to its peak;
* the ratio to a naive integration of the same system: scipy solve_ivp BDF
  with a finite-difference Jacobian, no breakpoints, the solver's default
  tolerances, the same compiled RHS and k(t).  The
  naive run is slow, so it is measured on a shorter window (NAIVE_DAYS) and
  compared with boxchem on the same window; the output says so;
* for the record, scipy BDF / Radau / LSODA fed the analytic Jacobian and
  restarted at each sunrise/sunset, on the same window.

Usage:  python benchmarks/bench_polar_run.py [--days 60] [--naive-days 2]
The scenario is the shipped ``stratosphere-box`` with its duration replaced.
"""
from __future__ import annotations

import argparse
import time

import numpy as np
from scipy.integrate import solve_ivp

from boxchem.runner import prepare
from boxchem.scenario import load_scenario
from boxchem.solver import DEFAULT_ATOL, DEFAULT_RTOL, RODAS3, integrate_box

REFERENCE_RTOL = 1e-6
REFERENCE_ATOL = 1e-4  # cm-3


def _setup(days: float, output_interval: str):
    scenario = load_scenario("stratosphere-box").with_overrides(
        duration=f"{days:g} d", output_interval=output_interval)
    return scenario, prepare(scenario)


def _boxchem(setup, rtol, atol, t_end=None):
    times = setup.output_times_s if t_end is None else setup.output_times_s[setup.output_times_s <= t_end]
    breaks = setup.breakpoints_s[setup.breakpoints_s < times[-1]]
    t0 = time.perf_counter()
    res = integrate_box(setup.kinetics, setup.coefficients, setup.y0, times,
                        breakpoints_s=breaks, rtol=rtol, atol=atol, method=RODAS3)
    return res, time.perf_counter() - t0


def _scipy(setup, t_end, rtol, atol, method, analytic_jacobian, breakpoints):
    kin, coef = setup.kinetics, setup.coefficients
    counts = {"nfev": 0, "njev": 0, "nlu": 0}

    def f(t, y):
        k, fx = coef(t)
        return kin.rhs(y, k, fx)

    def jac(t, y):
        k, fx = coef(t)
        return kin.jacobian(y, k, fx)

    edges = [0.0] + ([b for b in setup.breakpoints_s if b < t_end] if breakpoints else []) + [t_end]
    y = setup.y0.copy()
    t0 = time.perf_counter()
    for a, b in zip(edges[:-1], edges[1:]):
        sol = solve_ivp(f, (a, b), y, method=method, rtol=rtol, atol=atol,
                        jac=jac if analytic_jacobian else None)
        if not sol.success:
            raise RuntimeError(f"scipy {method} failed at t={sol.t[-1]:.6g} s: {sol.message}")
        y = np.maximum(sol.y[:, -1], 0.0)
        for key in counts:
            counts[key] += getattr(sol, key)
    return y, time.perf_counter() - t0, counts


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--days", type=float, default=60.0)
    parser.add_argument("--naive-days", type=float, default=2.0)
    parser.add_argument("--output-interval", default="1 h")
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

    ref, wall_ref = _boxchem(setup, REFERENCE_RTOL, REFERENCE_ATOL)
    print(f"reference RODAS3 rtol={REFERENCE_RTOL:g} atol={REFERENCE_ATOL:g} cm-3: wall {wall_ref:.1f} s, "
          f"{ref.steps} steps")
    i_o3, i_clo = kin.variable_species.index("O3"), kin.variable_species.index("ClO")
    o3_loss = 1.0 - ref.y[-1, i_o3] / ref.y[0, i_o3]
    print(f"O3 lost over the run (reference): {100 * o3_loss:.1f} %")

    settings = [("solver defaults", DEFAULT_RTOL, DEFAULT_ATOL),
                ("scenario as shipped", scenario.rtol, scenario.atol),
                ("looser rtol", 1e-3, DEFAULT_ATOL)]
    for label, rtol_i, atol_i in settings:
        res, wall = _boxchem(setup, rtol_i, atol_i)
        c = res.counters()
        o3_err = np.max(np.abs(res.y[:, i_o3] / ref.y[:, i_o3] - 1.0))
        clo_err = np.max(np.abs(res.y[:, i_clo] - ref.y[:, i_clo])) / np.max(ref.y[:, i_clo])
        print(f"\nboxchem RODAS3, {label} (rtol={rtol_i:g}, atol={atol_i:g} cm-3): wall {wall:.2f} s, "
              f"{c['steps']} steps, {c['rejected_steps']} rejected, {c['rhs_evaluations']} RHS, "
              f"{c['jacobian_evaluations']} Jacobians, {c['lu_decompositions']} LU, "
              f"{c['coefficient_evaluations']} k(t) evaluations")
        print(f"  error vs reference: O3 max |rel| {o3_err:.2e} (target 5e-3); "
              f"ClO max |dev|/peak {clo_err:.2e} (target 2e-2)")

    rtol, atol = DEFAULT_RTOL, DEFAULT_ATOL
    t_short = args.naive_days * 86400.0
    short, wall_short = _boxchem(setup, rtol, atol, t_end=t_short)
    y_naive, wall_naive, cn = _scipy(setup, short.times[-1], rtol, atol, "BDF",
                                     analytic_jacobian=False, breakpoints=False)
    print(f"\nnaive: scipy solve_ivp BDF, finite-difference Jacobian, no breakpoints, rtol={rtol:g} "
          f"atol={atol:g} (solver defaults), "
          f"measured on the first {args.naive_days:g} days only (too slow for {args.days:g}):")
    print(f"  naive wall {wall_naive:.2f} s ({cn['nfev']} RHS incl. FD columns, {cn['njev']} Jacobians, "
          f"{cn['nlu']} LU) vs boxchem {wall_short:.3f} s on the same window: "
          f"{wall_naive / wall_short:.0f}x faster")
    dev = abs(y_naive[i_o3] / short.y[-1, i_o3] - 1)
    print(f"  naive O3 at the end of the window differs from boxchem by {dev:.1e} relative")

    print(f"\nscipy solvers with the analytic Jacobian, restarted at each sunrise/sunset, "
          f"same window ({args.naive_days:g} days):")
    for method in ("BDF", "Radau", "LSODA"):
        try:
            y_m, wall_m, cm = _scipy(setup, short.times[-1], rtol, atol, method,
                                     analytic_jacobian=True, breakpoints=True)
            print(f"  {method:6s} wall {wall_m:.2f} s ({wall_m / wall_short:.1f}x boxchem), "
                  f"{cm['nfev']} RHS, {cm['njev']} Jacobians, {cm['nlu']} LU; O3 vs boxchem "
                  f"{abs(y_m[i_o3] / short.y[-1, i_o3] - 1):.1e}")
        except RuntimeError as exc:
            print(f"  {method:6s} {exc}")


if __name__ == "__main__":
    main()
