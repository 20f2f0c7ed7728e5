"""The seasonal polar-spring run and a 6-member latitude sweep: wall times.

Prints, measured in this run:

* the wall time of the shipped ``polar-spring`` scenario (about 75 days,
  diurnal sun, PSC threshold rule, spectral photolysis) and its work counters;
* a 6-member latitude sweep of a shortened polar-spring run, once in one
  process (baseline) and once on a process pool with one worker per core,
  and the ratio of the two (close to the core count when both cores work).

Usage: python benchmarks/bench_polar_spring.py [--sweep-days 30] [--skip-season]

Not a test: the machine is shared and timings vary with its load.
"""
from __future__ import annotations

import argparse
import os
import time

import numpy as np

import boxchem
from boxchem.analysis.sweep import run_sweep

LATITUDES = [-65.0, -68.0, -71.0, -74.0, -77.0, -80.0]


def season() -> None:
    t0 = time.perf_counter()
    ds = boxchem.run("polar-spring")
    wall = time.perf_counter() - t0
    o3 = ds.mole_fraction.sel(species="O3")
    days = float((ds.time[-1] - ds.time[0]).values / np.timedelta64(1, "D"))
    print(f"polar-spring: {days:.0f} days, {ds.sizes['time']} output times, "
          f"{ds.sizes['species']} species, {ds.sizes['reaction']} reactions")
    print(f"  wall time (incl. setup)   {wall:6.2f} s   (solver alone {ds.attrs['wall_time_s']:.2f} s)")
    print(f"  steps / rejected          {ds.attrs['solver_steps']} / {ds.attrs['solver_rejected_steps']}")
    print(f"  O3 start -> end           {float(o3[0]) * 1e6:.2f} -> {float(o3[-1]) * 1e6:.2f} ppmv")


def sweep(days: float) -> None:
    vary = {"location.latitude": LATITUDES, "run.duration": [f"{days:g} d"]}
    t0 = time.perf_counter()
    serial = run_sweep("polar-spring", vary, workers=1, quiet=True, save=["number_density"])
    t_serial = time.perf_counter() - t0
    cores = os.cpu_count() or 1
    t0 = time.perf_counter()
    parallel = run_sweep("polar-spring", vary, workers=cores, quiet=True, save=["number_density"])
    t_parallel = time.perf_counter() - t0
    ok = int((parallel.member_status == 1).sum())
    same = bool((abs(serial.number_density - parallel.number_density)
                 <= 1e-9 * abs(serial.number_density) + 1e-30).all())
    print(f"latitude sweep: {len(LATITUDES)} members x {days:g} days, {ok} ok, "
          f"serial and parallel results identical: {same}")
    print(f"  one process               {t_serial:6.2f} s")
    print(f"  {cores} worker processes        {t_parallel:6.2f} s")
    print(f"  speed-up                  {t_serial / t_parallel:6.2f} x  (ideal {min(cores, len(LATITUDES))} x)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sweep-days", type=float, default=30.0)
    parser.add_argument("--skip-season", action="store_true")
    args = parser.parse_args()
    if not args.skip_season:
        season()
    sweep(args.sweep_days)


if __name__ == "__main__":
    main()
