"""The ensemble engine: many members of polar-spring with random multipliers on every reaction.

Prints, measured in this run:

* wall time, members per second and peak resident memory summed over this
  process and its worker processes (sampled every 0.2 s from /proc) for
  ensembles of 64, 256 and 1000 members on 1 and 2 workers (``--sizes``,
  ``--workers``);
* the baseline: the same members as single ``boxchem.run`` calls one after
  another in one process.  Only ``--singles`` of them are run and the time
  is extrapolated linearly to the ensemble size (each single run is
  independent, so the cost per member is constant); the ratio is the
  engine's throughput per core over the single-run throughput;
* CPU seconds of the ensemble summed over this process and its workers, and
  "per CPU s" = the single runs' CPU time (extrapolated) over it: the
  throughput per core that the machine's load does not change;
* accuracy: the measured single runs against the same members of the
  ensemble (O3 maximum relative difference; ClO maximum difference over its
  peak) at every output time.

Multipliers: f = exp(N(0, 0.2)) on every reaction, independently per member
(invented spread, seeded).  Not a test: the machine is shared and timings
vary with its load (the load average is printed with the figures).

Step-size policies (``--policy``, comma list): each is measured in the same run
(``integrate_batch(step_policy=...)``: "lock-step" groups share one step size,
"per-member" each member its own; "auto" is the engine's default).

State feedback: the shipped scenarios have state-dependent surfaces and the
NAT/ice phase equilibrium; members batch with each member's own surface k
(solver/statesurfaces.py), for the ensemble and the single runs alike.

Usage: python benchmarks/bench_ensemble.py [--quick] [--days 30] [--sizes 64,256,1000]
       [--workers 1,2] [--singles 8] [--batch-size 32] [--policy lock-step,per-member]
"""
from __future__ import annotations

import argparse
import os
import resource
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

import boxchem
from boxchem.scenario import load_scenario

SIGMA_LN_F = 0.2
SEED = 20261202


def process_tree_rss_mb(root: int) -> float:
    """Resident memory [MB] of ``root`` and all its descendants (Linux /proc)."""
    parents: dict[int, int] = {}
    rss: dict[int, int] = {}
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
            status = (entry / "status").read_text()
        except OSError:
            continue
        parents[int(entry.name)] = int(stat.rsplit(")", 1)[1].split()[1])
        for line in status.splitlines():
            if line.startswith("VmRSS:"):
                rss[int(entry.name)] = int(line.split()[1])
    tree, frontier = {root}, [root]
    while frontier:
        p = frontier.pop()
        for child, parent in parents.items():
            if parent == p and child not in tree:
                tree.add(child)
                frontier.append(child)
    return sum(rss.get(p, 0) for p in tree) / 1024.0


class PeakMemory:
    """Samples the summed RSS of this process tree in a thread; ``peak_mb`` after ``stop``."""

    def __init__(self, interval_s: float = 0.2):
        self.interval_s, self.peak_mb = interval_s, 0.0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def _run(self):
        while not self._stop.is_set():
            self.peak_mb = max(self.peak_mb, process_tree_rss_mb(os.getpid()))
            self._stop.wait(self.interval_s)

    def __enter__(self):
        self._thread.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        self._thread.join()
        self.peak_mb = max(self.peak_mb, process_tree_rss_mb(os.getpid()))


def cpu_seconds() -> float:
    """CPU time [s] of this process and of its finished (waited-for) worker processes."""
    own, children = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + children.ru_utime + children.ru_stime


def member_table(scenario, n: int) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(SEED)
    ids = scenario.mechanism.reaction_ids
    factors = np.exp(rng.normal(0.0, SIGMA_LN_F, (n, len(ids))))
    return {f"scale.{rid}": factors[:, j] for j, rid in enumerate(ids)}


def run_ensemble(scenario, members, workers: int, batch_size: int, folder: Path, policy: str):
    out = folder / f"bench-{len(next(iter(members.values())))}-{workers}-{policy}.nc"
    with PeakMemory() as mem:
        t0, c0 = time.perf_counter(), cpu_seconds()
        ds = boxchem.ensemble(scenario, members, output=out, workers=workers, batch_size=batch_size,
                              save=["mole_fraction"], step_policy=policy)
        wall, cpu = time.perf_counter() - t0, cpu_seconds() - c0
    return ds, wall, cpu, mem.peak_mb, out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="10 days, 16 and 64 members, 3 singles")
    parser.add_argument("--days", type=float, default=30.0)
    parser.add_argument("--sizes", default="64,256,1000")
    parser.add_argument("--workers", default="1,2")
    parser.add_argument("--singles", type=int, default=8)
    parser.add_argument("--batch-size", type=int, default=32)
    parser.add_argument("--policy", default="lock-step,per-member",
                        help="step-size policies to measure (comma list of auto, lock-step, per-member)")
    args = parser.parse_args()
    policies = [p.strip() for p in args.policy.split(",") if p.strip()]
    if args.quick:
        args.days, args.sizes, args.singles = 10.0, "16,64", 3
    sizes = [int(s) for s in args.sizes.split(",")]
    worker_counts = [int(w) for w in args.workers.split(",")]
    scenario = load_scenario("polar-spring").with_overrides(**{"run.duration": f"{args.days:g} d"})
    largest = member_table(scenario, max(sizes))
    print(f"polar-spring, {args.days:g} days, {len(scenario.mechanism.reactions)} reactions each with "
          f"f = exp(N(0, {SIGMA_LN_F})) per member; batch size {args.batch_size}; "
          f"{os.cpu_count()} cores; load average {os.getloadavg()[0]:.1f}; state feedback on")

    # warm-up: numba compilation (or loading its cache) is a once-per-checkout cost, not the
    # engine's; done in this process and in worker processes (which load the cache it leaves)
    short = scenario.with_overrides(**{"run.duration": "1 d"})
    for policy in policies:
        boxchem.ensemble(short, {k: v[:2] for k, v in largest.items()}, save=["mole_fraction"],
                         step_policy=policy)
        if max(worker_counts) > 1:
            boxchem.ensemble(short, {k: v[:2] for k, v in largest.items()}, save=["mole_fraction"],
                             workers=2, batch_size=1, step_policy=policy)

    # baseline: single runs one after another in this process
    single_ds = []
    t0, c0 = time.perf_counter(), cpu_seconds()
    for i in range(args.singles):
        scale = {k.split(".", 1)[1]: float(v[i]) for k, v in largest.items()}
        try:
            single_ds.append(boxchem.run(scenario, scale=scale))
        except boxchem.BoxchemError as exc:     # reported; the ensemble records it as well
            print(f"single run {i} failed: {exc}")
            single_ds.append(None)
    t_single = (time.perf_counter() - t0) / args.singles
    c_single = (cpu_seconds() - c0) / args.singles
    print(f"single runs: {args.singles} measured, {t_single:.2f} s each (setup included; CPU "
          f"{c_single:.2f} s), extrapolated to N members as N x {t_single:.2f} s")

    print(f"\n{'policy':>10} {'members':>8} {'workers':>7} {'wall s':>8} {'members/s':>10} "
          f"{'peak RSS MB':>12} {'singles s (extrap.)':>20} {'speed-up':>9} {'per core':>9} {'load':>5} "
          f"{'CPU s':>7} {'per CPU s':>9}")
    walls = {}
    with tempfile.TemporaryDirectory(prefix="bench-ensemble-") as tmp:
        for policy in policies:
            for n in sizes:
                members = {k: v[:n] for k, v in largest.items()}
                for w in worker_counts:
                    ds, wall, cpu, peak, out = run_ensemble(scenario, members, w, args.batch_size, Path(tmp),
                                                       policy)
                    walls[policy, n, w] = wall
                    ok = int((ds["member_status"] == 1).sum())
                    rate = n / wall
                    speedup = n * t_single / wall
                    print(f"{policy:>10} {n:>8} {w:>7} {wall:>8.1f} {rate:>10.2f} {peak:>12.0f} "
                          f"{n * t_single:>20.1f} {speedup:>8.1f}x {speedup / w:>8.1f}x "
                          f"{os.getloadavg()[0]:>5.1f} {cpu:>7.1f} {n * c_single / cpu:>8.1f}x"
                          + ("" if ok == n else f"  ({n - ok} failed)"),
                          flush=True)
                    if n == max(sizes) and w == max(worker_counts):
                        size_mb = out.stat().st_size / 2**20
                        o3_err, clo_err = [], []
                        for i, single in enumerate(single_ds):
                            if single is None:
                                continue
                            member = ds["mole_fraction"].isel(member=i)
                            o3s = single["mole_fraction"].sel(species="O3").values
                            o3m = member.sel(species="O3").values
                            clos = single["mole_fraction"].sel(species="ClO").values
                            clom = member.sel(species="ClO").values
                            o3_err.append(np.max(np.abs(o3m - o3s) / o3s))
                            clo_err.append(np.max(np.abs(clom - clos)) / np.max(clos))
                        accuracy = (f"{len(o3_err)} members vs single runs, every output time: O3 "
                                    f"max relative difference {max(o3_err):.2e} (bar 1e-3), ClO max "
                                    f"difference / peak {max(clo_err):.2e} (bar 1e-2)" if o3_err
                                    else "no single run succeeded: accuracy not measured")
                        print(f"{'':>10} member file {size_mb:.0f} MB (mole_fraction only); {accuracy}",
                              flush=True)
                    ds.close()
        if len(policies) > 1:
            base = policies[-1]
            for policy in policies[:-1]:
                ratios = ", ".join(f"{n} x {w}w: {walls[base, n, w] / walls[policy, n, w]:.2f}x"
                                   for n in sizes for w in worker_counts)
                print(f"{policy} against {base} (wall-time ratio): {ratios}")


if __name__ == "__main__":
    main()
