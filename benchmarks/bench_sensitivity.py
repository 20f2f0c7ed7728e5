"""Local sensitivities of the polar-spring season: cost of every coefficient by the
tangent-linear run and by batched central differences, against a single run measured in
the same process, and the check of the ten largest coefficients of O3 on 1 October
against separate single runs.

    python benchmarks/bench_sensitivity.py                     # 1 August -> 15 October (long)
    python benchmarks/bench_sensitivity.py --days 3            # the last days before 1 October
    python benchmarks/bench_sensitivity.py --method tangent    # skip the differences (fast)

Prints, all measured in this process:
* the wall time of one ``boxchem.run`` of the scenario (the faster of two: the machine
  is shared) - the unit "single runs";
* ``local_sensitivities`` for every reaction by each method (wall time, including its
  setup and the metric evaluation) and its cost in single runs;
* the kernel alone: ``integrate_batch`` of the prepared setup without and with the
  sensitivities (both pay the same Python window tables; the difference is the
  tangent kernel's own cost);
* for the ten largest coefficients of O3 on 1 October, S of each method beside brute-force
  central differences of separate single runs (``boxchem.run(scale=...)``, h = 0.02) -
  the agreement the issue asks for (2 %).
"""
from __future__ import annotations

import argparse
import time

import numpy as np

import boxchem
from boxchem.analysis.sensitivity import local_sensitivities, ranking


def _kernel_times(scenario) -> tuple[float, float, int]:
    from boxchem.runner import phase_state_map, prepare, solver_options, state_observer
    from boxchem.solver.tangent import TangentParameters
    from boxchem.solver.timeloop import integrate_batch
    setup = prepare(scenario)
    kin = setup.kinetics

    def run(tangent=None):
        t0 = time.perf_counter()
        integrate_batch(kin, setup.coefficients, setup.y0[None], setup.output_times_s,
                        breakpoints_s=setup.breakpoints_s, on_accept=state_observer(setup),
                        state_map=phase_state_map(setup), tangent=tangent, **solver_options(scenario))
        return time.perf_counter() - t0
    base = run()
    tangent = run(TangentParameters(tuple(range(kin.n_reactions))))
    return base, tangent, kin.n_reactions


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--days", type=float, default=None,
                        help="run only this many days before 1 October (default: the season)")
    parser.add_argument("--workers", type=int, default=None)
    parser.add_argument("--method", default="both", choices=("both", "tangent", "differences"))
    parser.add_argument("--no-check", action="store_true", help="skip the 20 separate single runs")
    args = parser.parse_args()
    base = boxchem.load_scenario("polar-spring")
    metrics = ["oct1 = O3 at 2026-10-01"]
    if args.days:
        start = np.datetime64("2026-10-01T00:00:00") - np.timedelta64(int(args.days * 86400), "s")
        scenario = base.with_overrides(**{"run.start": f"{start}Z", "run.duration": f"{args.days} d"})
    else:
        scenario = base
        metrics.append("oct15 = O3 at 2026-10-15")
    short = scenario.with_overrides(**{"run.duration": "1 d"})
    boxchem.run(short)                                                  # compile / load caches
    local_sensitivities(short, "O3 at end", reactions=["clo_clo_m"], species=())
    singles = []
    for _ in range(2):                  # the faster of two: the machine is shared
        t0 = time.perf_counter()
        boxchem.run(scenario)
        singles.append(time.perf_counter() - t0)
    single = min(singles)
    n_reactions = len(scenario.mechanism.reactions)
    print(f"scenario polar-spring from {scenario.start} for {scenario.duration_s / 86400:g} d, "
          f"{n_reactions} reactions; single run {single:.1f} s (boxchem.run, faster of two)")
    results = {}
    methods = ("tangent", "differences") if args.method == "both" else (args.method,)
    for method in methods:
        t0 = time.perf_counter()
        results[method] = local_sensitivities(scenario, metrics, species=(), method=method,
                                              workers=args.workers)
        wall = time.perf_counter() - t0
        what = "1 run" if method == "tangent" else f"{results[method].attrs['members']} members"
        print(f"{method:12s}: every coefficient ({what}) in {wall:.1f} s = {wall / single:.1f} "
              f"single runs")
    if "tangent" in methods:
        kb, kt, n = _kernel_times(scenario)
        print(f"kernel alone (integrate_batch, same window tables): plain {kb:.1f} s, with {n} "
              f"sensitivities {kt:.1f} s = {kt / kb:.1f}x")
    first = results[methods[0]]
    for metric in first["metric"].values:
        print(f"\nranking of {metric} ({first['metric_definition'].sel(metric=metric).item()}):")
        for row in ranking(first, str(metric), 12):
            others = "  ".join(f"{m} {float(results[m]['sensitivity'].sel(metric=metric, parameter=row['parameter'])):+.4f}"
                               for m in methods)
            print(f"  {row['rank']:3d} {row['parameter']:28s} {others}  {row['equation']}")
    if len(methods) == 2:
        a, b = (results[m]["sensitivity"].sel(metric="oct1").values for m in methods)
        top = np.argsort(-np.abs(b))[:10]
        print(f"\ntangent against differences, ten largest of oct1: largest relative difference "
              f"{100 * np.max(np.abs(a[top] / b[top] - 1)):.3f} %")
    if args.no_check:
        return
    print("\nten largest of O3 on 1 October against separate single runs (h = 0.02):")
    until_oct1 = scenario.with_overrides(**{
        "run.duration": f"{(np.datetime64('2026-10-01T00:00:00') - scenario.start) / np.timedelta64(1, 's')} s"})
    worst = {m: 0.0 for m in methods}
    t0 = time.perf_counter()
    for row in ranking(first, "oct1", 10):
        rid = row["parameter"].split(".", 1)[1]
        o3 = [float(boxchem.run(until_oct1, scale={rid: np.exp(s * 0.02)})
                    .mole_fraction.sel(species="O3").isel(time=-1)) for s in (1.0, -1.0)]
        brute = (np.log(o3[0]) - np.log(o3[1])) / 0.04
        line = []
        for m in methods:
            s = float(results[m]["sensitivity"].sel(metric="oct1", parameter=row["parameter"]))
            worst[m] = max(worst[m], abs(s / brute - 1))
            line.append(f"{m} {s:+.5f} ({100 * (s / brute - 1):+.3f} %)")
        print(f"  {rid:20s} single runs {brute:+.5f}  " + "  ".join(line))
    print("largest difference " + ", ".join(f"{m} {100 * w:.3f} %" for m, w in worst.items()) +
          f" (target 2 %); brute force took {time.perf_counter() - t0:.0f} s for 20 runs")


if __name__ == "__main__":
    main()
