"""Members of polar-spring with the ozone column following the box: batched vs one at a time.

Before, such members ran one at a time on the observing path (a J table per
feedback window at each member's observed column); now each member's own
column rides on the shared J table as ln offsets (photolysis/ozonefollow.py).
Prints, in one process: the batch's wall time and members/s, the same members
as single runs on the earlier observing path (a measured subset, extrapolated),
the ratio, and the largest O3 difference of the measured members.

    PYTHONPATH=. python benchmarks/bench_ozone_follow.py [--members 32] [--days 10] [--singles 4]
"""
from __future__ import annotations

import argparse
import time

import numpy as np


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--members", type=int, default=32)
    ap.add_argument("--days", type=float, default=10.0)
    ap.add_argument("--singles", type=int, default=4, help="single runs measured (extrapolated)")
    args = ap.parse_args()

    import boxchem
    from boxchem.runner import integrate, prepare
    from boxchem.scenario import load_scenario
    scenario = load_scenario("polar-spring").with_overrides(**{
        "photolysis.ozone_column_follows_box": True, "run.duration": f"{args.days:g} d",
        "run.start": "2026-09-10T00:00:00Z"})
    rng = np.random.default_rng(0)
    factors = np.exp(rng.normal(0.0, 0.2, args.members))
    boxchem.ensemble(scenario, {"scale.clo_clo_m": factors[:2]}, progress=False)   # compile, warm
    for policy in ("auto", "per-member"):
        t0 = time.perf_counter()
        ds = boxchem.ensemble(scenario, {"scale.clo_clo_m": factors}, step_policy=policy,
                              save="mole_fraction")
        batch_s = time.perf_counter() - t0
        print(f"batch ({policy}): {args.members} members x {args.days:g} d in {batch_s:.1f} s "
              f"({args.members / batch_s:.2f} members/s)")
        if policy == "auto":
            auto, auto_s = ds, batch_s
    o3 = list(auto.species.values).index("O3")
    single_s, worst = 0.0, 0.0
    for i in range(args.singles):
        s = scenario.with_overrides(scale={"clo_clo_m": float(factors[i])})
        setup = prepare(s)        # the engine built the setup once per group: not timed
        t0 = time.perf_counter()
        res = integrate(setup, ozone_feedback="observe")
        single_s += time.perf_counter() - t0
        air = np.asarray(setup.environment.at(res.times).air_density, dtype=float)
        x = res.y[:, list(res.species).index("O3")] / air
        worst = max(worst, float(np.max(np.abs(auto.mole_fraction.values[i, :, o3] / x - 1))))
    per = single_s / args.singles
    print(f"one at a time (earlier observing path, integration only): {per:.2f} s per member "
          f"(mean of {args.singles}) -> {per * args.members:.1f} s for {args.members}")
    print(f"ratio (auto batch vs one at a time): throughput x{per * args.members / auto_s:.1f}")
    print(f"largest O3 difference batched (auto) vs the earlier path: {worst:.1e} relative")


if __name__ == "__main__":
    main()
