"""State-dependent surfaces: single-run speed, accuracy, and batching (issues 8, 11).

Prints, all measured in this run on this machine:

* the 75-day ``polar-spring`` single integration (setup excluded, numba code
  loaded first) with
  - "rebuild": the earlier treatment, a k(t) table rebuilt every feedback window
    from the observed composition, exact k at every output time
    (``surface_feedback="rebuild"``);
  - "member_exact": per-member ln offsets on reference-composition table
    columns, every member's gamma ratio re-evaluated every window;
  - "member" (default): the same with each member's gamma ratio re-evaluated only
    when its own T, p or composition moved beyond ``statesurfaces`` tolerances;
  with the time in the compiled kernel (``compiled.advance_batch``), the number of
  tables built, and the largest differences of O3, HCl, HNO3 (relative) and ClO
  (of its peak) against "rebuild" at every output time;
* members/s of a batch of M members (default 64; 10 days of polar-spring; random
  factors on every k, lognormal with sigma ln 1.3, and random initial HNO3 / H2O)
  in one call, against the same members as single runs one after another (all
  of them with "member"; the "rebuild" single runs on the first few members only,
  per member), and the largest difference batch vs single runs.

Usage:  python benchmarks/bench_state_surfaces.py [--members 64] [--days 10] [--rebuild-singles 4]
"""
from __future__ import annotations

import argparse
import time

import numpy as np

from boxchem import runner
from boxchem.scenario import load_scenario
from boxchem.solver import compiled as cm
from boxchem.solver.timeloop import integrate_batch

SPECIES = ("O3", "ClO", "HCl", "HNO3")


class KernelTimer:
    """Wraps ``compiled.advance_batch`` to add up the time spent in the compiled kernel."""

    def __init__(self):
        self.seconds = 0.0
        self._inner = cm.advance_batch

    def __enter__(self):
        def timed(*args):
            t0 = time.perf_counter()
            try:
                return self._inner(*args)
            finally:
                self.seconds += time.perf_counter() - t0
        cm.advance_batch = timed
        return self

    def __exit__(self, *exc):
        cm.advance_batch = self._inner


def _single(setup, mode):
    with KernelTimer() as kt:
        t0 = time.perf_counter()
        res = runner.integrate(setup, surface_feedback=mode)
        wall = time.perf_counter() - t0
    return res, wall, kt.seconds


def _differences(setup, y, y_ref):
    sp = setup.kinetics.variable_species
    out = []
    for name in SPECIES:
        i = sp.index(name)
        d = np.abs(y[..., i] - y_ref[..., i])
        if name == "ClO":
            out.append(f"ClO {np.nanmax(d) / np.nanmax(y_ref[..., i]):.2e} of peak")
        else:
            out.append(f"{name} {np.nanmax(d / np.maximum(y_ref[..., i], 1e-30)):.2e} rel")
    return ", ".join(out)


def single_runs():
    setup = runner.prepare(load_scenario("polar-spring"))
    short = runner.prepare(load_scenario("polar-spring").with_overrides(**{"run.duration": "1 d"}))
    t0 = time.perf_counter()
    runner.integrate(short)
    print(f"first compiled call (load or compile of the numba code): {time.perf_counter() - t0:.2f} s")
    print(f"polar-spring: 75 days, {setup.output_times_s.size} output times, "
          f"{setup.kinetics.n_variable} species, {setup.kinetics.n_reactions} reactions, "
          f"{len(setup.coefficients.state_surfaces)} state-dependent surface columns")
    results = {}
    for mode in ("rebuild", "member_exact", "member"):
        res, wall, kernel = _single(setup, mode)
        results[mode] = res
        print(f"  {mode:>12}: integration {wall:6.2f} s, of which kernel {kernel:5.2f} s; "
              f"{res.steps} steps, {res.coefficient_evaluations} tables/k evaluations")
    ref = results["rebuild"].y
    for mode in ("member_exact", "member"):
        print(f"  {mode:>12} vs rebuild, max over all output times: "
              f"{_differences(setup, results[mode].y, ref)}")


def batches(n_members, days, rebuild_singles):
    scenario = load_scenario("polar-spring").with_overrides(**{"run.duration": f"{days:g} d"})
    setup = runner.prepare(scenario)
    kin, sp = setup.kinetics, setup.kinetics.variable_species
    rng = np.random.default_rng(2026)
    air = float(setup.environment.at(0.0).air_density)
    y0 = np.tile(setup.y0, (n_members, 1))
    y0[:, sp.index("HNO3")] = rng.uniform(0.5, 12.0, n_members) * 1e-9 * air
    y0[:, sp.index("H2O")] = rng.uniform(3.5, 6.0, n_members) * 1e-6 * air
    lm = rng.normal(0.0, np.log(1.3), (n_members, kin.n_reactions))
    opts = dict(runner.solver_options(scenario), breakpoints_s=setup.breakpoints_s)
    with KernelTimer() as kt:
        t0 = time.perf_counter()
        batch = integrate_batch(kin, setup.coefficients, y0, setup.output_times_s, log_multiplier=lm, **opts)
        wall_batch = time.perf_counter() - t0
    print(f"\n{n_members} members x {days:g} days of polar-spring (random factors on every k, "
          f"initial HNO3 0.5-12 ppbv, H2O 3.5-6 ppmv); {int(np.sum(batch.status == 0))} succeeded")
    print(f"  one batch call:            {wall_batch:6.2f} s ({n_members / wall_batch:6.2f} members/s; "
          f"kernel {kt.seconds:.2f} s)")
    t0 = time.perf_counter()
    singles = [integrate_batch(kin, setup.coefficients, y0[i:i + 1], setup.output_times_s,
                               log_multiplier=lm[i:i + 1], **opts) for i in range(n_members)]
    wall_single = time.perf_counter() - t0
    print(f"  {n_members} single runs (member): {wall_single:6.2f} s ({n_members / wall_single:6.2f} members/s)"
          f" -> batch {wall_single / wall_batch:.1f}x")
    y_single = np.stack([s.y[0] for s in singles])
    same = all(np.array_equal(s.y[0], batch.y[i], equal_nan=True) for i, s in enumerate(singles))
    print(f"  batch vs single runs: bit-identical {same}; {_differences(setup, batch.y, y_single)}")
    if rebuild_singles:
        observe = setup.coefficients.observe_state
        t0 = time.perf_counter()
        for i in range(rebuild_singles):
            integrate_batch(kin, setup.coefficients, y0[i:i + 1], setup.output_times_s,
                            log_multiplier=lm[i:i + 1], on_accept=observe, surface_feedback="rebuild",
                            **opts)
        per = (time.perf_counter() - t0) / rebuild_singles
        print(f"  single runs, rebuild (the earlier treatment, first {rebuild_singles} members): "
              f"{per:.2f} s per member ({1.0 / per:.2f} members/s) -> batch {per * n_members / wall_batch:.1f}x")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--members", type=int, default=64)
    parser.add_argument("--days", type=float, default=10.0)
    parser.add_argument("--rebuild-singles", type=int, default=4)
    parser.add_argument("--skip-single", action="store_true", help="skip the 75-day single runs")
    args = parser.parse_args()
    if not args.skip_single:
        single_runs()
    batches(args.members, args.days, args.rebuild_singles)


if __name__ == "__main__":
    main()
