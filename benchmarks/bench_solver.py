"""The solver's speed: sparse LU, batched members, cost against mechanism size.

Prints, all measured in this run: CPU time of this process (``time.process_time``,
minimum of the repeats), because the machine is shared and wall times follow its load:

1. the integration phase (``integrate_box``: k(t) tables, compiled steps, exact k at
   the output times) of the shipped ``polar-spring`` scenario (75 days), on
   * the base commit of this branch (today's main, extracted with ``git archive``
     into a temporary folder and run in a subprocess),
   * this branch with the dense pivoting LU at every step (``lu="dense"``),
   * this branch with the fixed-pattern sparse LU (the default),
   with work counters and the differences of O3 and ClO between the three;
2. batch throughput: N members x D days of polar-spring with random factors on every
   reaction (lognormal, sigma 0.3) in one ``integrate_batch`` call, against single runs
   of the first few of those members one after another in this process (members per
   second and the ratio), and the largest difference between a batch member and its
   single run;
3. the doubled mechanism: every integrated species and every reaction copied under a
   new name (two independent copies of the chemistry, same initial values), D days:
   integration time relative to the original mechanism (from 10 September, when the sun
   rises and sets every day).

Usage: python benchmarks/bench_solver.py [--members 64] [--singles 8] [--batch-days 30]
       [--double-days 10] [--repeats 2] [--skip-main]

Not a test: timings vary with the machine's load.
"""
from __future__ import annotations

import argparse
import dataclasses
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from boxchem.runner import prepare  # noqa: E402
from boxchem.scenario import load_scenario  # noqa: E402
from boxchem.solver import integrate_batch, integrate_box  # noqa: E402

BASE_COMMIT = "e9992e5"      # main at the start of this branch (coord/CONTRACTS.md)
DOUBLED_START = "2026-09-10T00:00:00Z"   # sunrise and sunset every day (the chemistry works)

MAIN_SCRIPT = r"""
import json, sys, time
import numpy as np
from boxchem.runner import prepare
from boxchem.scenario import load_scenario
from boxchem.solver import integrate_box
repeats, out_path = int(sys.argv[1]), sys.argv[2]
sc = load_scenario("polar-spring")
setup = prepare(sc)
kw = dict(breakpoints_s=setup.breakpoints_s, rtol=sc.rtol, atol=sc.atol)
integrate_box(setup.kinetics, setup.coefficients, setup.y0, setup.output_times_s[:30], **kw)
walls = []
for _ in range(repeats):
    setup = prepare(sc)
    t0 = time.process_time()
    r = integrate_box(setup.kinetics, setup.coefficients, setup.y0, setup.output_times_s, **kw)
    walls.append(time.process_time() - t0)
np.save(out_path, r.y)
print(json.dumps({"walls": walls, "steps": r.steps, "rejected": r.rejected_steps,
                  "lu": r.lu_decompositions}))
"""


def _setup(days=None, mechanism=None, start=None):
    sc = load_scenario("polar-spring")
    if days is not None:
        sc = sc.with_overrides(**{"run.duration": f"{days:g} d"})
    if start is not None:
        sc = sc.with_overrides(**{"run.start": start})
    if mechanism is not None:
        sc = dataclasses.replace(sc, mechanism=mechanism)
    return prepare(sc)


def _integrate(setup, **kw):
    sc = setup.scenario
    t0 = time.process_time()
    res = integrate_batch(setup.kinetics, setup.coefficients, setup.y0, setup.output_times_s,
                          breakpoints_s=setup.breakpoints_s, rtol=sc.rtol, atol=sc.atol, **kw)
    return time.process_time() - t0, res


def _differences(kin, a, b):
    o3, clo = kin.variable_species.index("O3"), kin.variable_species.index("ClO")
    d_o3 = float(np.max(np.abs(a[:, o3] / b[:, o3] - 1)))
    d_clo = float(np.max(np.abs(a[:, clo] - b[:, clo])) / np.max(np.abs(b[:, clo])))
    return d_o3, d_clo


def _extract_main(tmp):
    """The base commit's package, mechanisms and scenarios in ``tmp``; False when git fails."""
    archive = subprocess.run(["git", "-C", str(ROOT), "archive", BASE_COMMIT, "boxchem", "mechanisms",
                              "scenarios"], capture_output=True)
    if archive.returncode != 0:
        print(f"  (no baseline: git archive {BASE_COMMIT} failed: {archive.stderr.decode().strip()})")
        return False
    subprocess.run(["tar", "-x", "-C", tmp], input=archive.stdout, check=True)
    return True


def _main_baseline(tmp, repeats):
    """Today's main in a subprocess (code in ``tmp``): (info, y) or None when it fails."""
    out = os.path.join(tmp, "y.npy")
    env = dict(os.environ, PYTHONPATH=tmp)
    proc = subprocess.run([sys.executable, "-c", MAIN_SCRIPT, str(repeats), out], cwd=tmp, env=env,
                          capture_output=True, text=True)
    if proc.returncode != 0:
        print(f"  (baseline failed: {proc.stderr.strip()[-500:]})")
        return None
    info = json.loads(proc.stdout.strip().splitlines()[-1])
    return info, np.load(out)


def single_run(repeats, skip_main):
    print("1. integration phase of one polar-spring run (75 days, defaults rtol 1e-4, atol 1 cm-3)")
    setup = _setup()
    kin = setup.kinetics
    _integrate(_setup(days=1))                       # compile / load the cached machine code
    _integrate(_setup(days=1), lu="dense")
    walls = {"sparse": [], "dense": [], "main": []}
    results = {}
    base = None
    tmp = tempfile.TemporaryDirectory(prefix="boxchem-main-")
    have_main = not skip_main and _extract_main(tmp.name)
    for _ in range(repeats):                         # interleaved, so that load hits all alike
        if have_main:
            got = _main_baseline(tmp.name, 1)
            if got is not None:
                base = got
                walls["main"].extend(got[0]["walls"])
        for lu in ("dense", "sparse"):
            wall, res = _integrate(_setup(), lu=lu)
            walls[lu].append(wall)
            results[lu] = res
    tmp.cleanup()
    sparse, dense = results["sparse"], results["dense"]
    print(f"  {kin.n_variable} species, {kin.n_reactions} reactions, "
          f"{sparse.settings['lu']}")
    rows = [("sparse LU (this branch)", "sparse", sparse), ("dense LU (this branch)", "dense", dense)]
    for label, key, res in rows:
        print(f"  {label:28s} {min(walls[key]):6.2f} s   steps {res.steps[0]} / rejected "
              f"{res.rejected_steps[0]}, LU {res.lu_decompositions[0]}, dense fallbacks "
              f"{res.lu_fallbacks[0]}")
    if base is not None:
        info, y_main = base
        print(f"  {'main ' + BASE_COMMIT + ' (dense LU)':28s} {min(walls['main']):6.2f} s   steps {info['steps']}"
              f" / rejected {info['rejected']}, LU {info['lu']}")
        print(f"  speed-up against main: {min(walls['main']) / min(walls['sparse']):.2f}x; "
              f"against the dense LU here: {min(walls['dense']) / min(walls['sparse']):.2f}x")
        d_o3, d_clo = _differences(kin, sparse.y[0], y_main)
        print(f"  sparse vs main: O3 max rel. difference {d_o3:.1e}, ClO max difference / peak {d_clo:.1e}")
    else:
        print(f"  speed-up against the dense LU: {min(walls['dense']) / min(walls['sparse']):.2f}x")
    d_o3, d_clo = _differences(kin, sparse.y[0], dense.y[0])
    print(f"  sparse vs dense: O3 max rel. difference {d_o3:.1e}, ClO max difference / peak {d_clo:.1e}")


def batch_throughput(n_members, n_singles, days):
    print(f"\n2. batch throughput: {n_members} members x {days:g} days of polar-spring, factors "
          f"lognormal(sigma 0.3) on every reaction")
    setup = _setup(days=days)
    kin = setup.kinetics
    rng = np.random.default_rng(2026)
    lm = rng.normal(0.0, 0.3, size=(n_members, kin.n_reactions))
    y0 = np.tile(setup.y0, (n_members, 1))
    wall_batch, batch = _integrate(dataclasses.replace(setup, y0=y0), log_multiplier=lm)
    singles = []
    worst = 0.0
    for m in range(n_singles):
        wall, res = _integrate(dataclasses.replace(setup, y0=y0[m:m + 1]), log_multiplier=lm[m:m + 1])
        singles.append(wall)
        worst = max(worst, float(np.max(np.abs(res.y[0] - batch.y[m]) / np.maximum(np.abs(res.y[0]), 1e-300))))
    per_single = float(np.mean(singles))
    rate_batch = n_members / wall_batch
    ok = int(np.sum(batch.status == 0))
    print(f"  batch of {n_members}: {wall_batch:6.2f} s, {rate_batch:6.2f} members/s ({ok} ok; "
          f"steps per member {np.mean(batch.steps):.0f} mean, {batch.steps.min()}-{batch.steps.max()})")
    print(f"  {n_singles} single runs one after another: {per_single:6.3f} s each, "
          f"{1.0 / per_single:6.2f} members/s")
    print(f"  batch / single throughput per core: {rate_batch * per_single:.2f}x; largest relative "
          f"difference batch member vs its single run: {worst:.1e}")


def _doubled(mechanism):
    """Every integrated species and reaction copied under new names (fixed species shared)."""
    from boxchem.mechanism.model import Mechanism
    variable = {s.name for s in mechanism.species if not s.fixed}

    def rename(name):
        return f"{name}_b" if name in variable else name

    def terms(ts):
        return tuple(dataclasses.replace(t, species=rename(t.species)) for t in ts)

    species = mechanism.species + tuple(dataclasses.replace(s, name=rename(s.name))
                                        for s in mechanism.species if s.name in variable)
    copies = []
    for r in mechanism.reactions:
        params = dict(r.parameters)
        if "of" in params:
            params["of"] = f"{params['of']}_b"
        copies.append(dataclasses.replace(r, id=f"{r.id}_b", reactants=terms(r.reactants),
                                          products=terms(r.products), parameters=params))
    return Mechanism(species=species, reactions=mechanism.reactions + tuple(copies),
                     source=mechanism.source, text=mechanism.text + "\n# doubled")


def doubled_mechanism(days, repeats):
    print(f"\n3. cost against mechanism size: {days:g} sunlit days from 10 September, the mechanism "
          f"and its doubled copy")
    one = _setup(days=days, start=DOUBLED_START)
    two = _setup(days=days, mechanism=_doubled(one.mechanism), start=DOUBLED_START)
    names = two.kinetics.variable_species
    index = {n: i for i, n in enumerate(one.kinetics.variable_species)}
    y0 = np.array([one.y0[index[n[:-2] if n.endswith("_b") and n[:-2] in index else n]] for n in names])
    two = dataclasses.replace(two, y0=y0)
    _integrate(two)                                   # compile for the new sizes (cached)
    walls = {1: [], 2: []}
    for _ in range(repeats):
        for key, setup in ((1, one), (2, two)):
            wall, res = _integrate(setup)
            walls[key].append(wall)
            if key == 2:
                r2 = res
            else:
                r1 = res
    for key, setup, res in ((1, one, r1), (2, two, r2)):
        kin = setup.kinetics
        print(f"  {kin.n_variable:3d} species, {kin.n_reactions:3d} reactions: {min(walls[key]):6.2f} s  "
              f"(steps {res.steps[0]}, {res.settings['lu']})")
    o3, o3b = names.index("O3"), names.index("O3_b")
    same = float(np.max(np.abs(r2.y[0][:, o3b] / r2.y[0][:, o3] - 1)))
    print(f"  doubled / original: {min(walls[2]) / min(walls[1]):.2f}x (goal <= 2.3x); O3 of the two "
          f"copies differs by at most {same:.1e} relative")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--members", type=int, default=64)
    ap.add_argument("--singles", type=int, default=8)
    ap.add_argument("--batch-days", type=float, default=30.0)
    ap.add_argument("--double-days", type=float, default=10.0)
    ap.add_argument("--repeats", type=int, default=2)
    ap.add_argument("--skip-main", action="store_true", help="do not run the base commit's code")
    args = ap.parse_args(argv)
    single_run(args.repeats, args.skip_main)
    batch_throughput(args.members, args.singles, args.batch_days)
    doubled_mechanism(args.double_days, args.repeats)


if __name__ == "__main__":
    main()
