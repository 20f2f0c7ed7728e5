"""Long fuzz run: N inputs of each kind, counts of outcomes (issue 13 item 8).

    PYTHONPATH=. python scripts/fuzz.py                 # 10,000 of each kind
    PYTHONPATH=. python scripts/fuzz.py -n 500 --kinds mechanisms cli

Kinds: mechanisms, scenarios (validated), runs (scenarios integrated when
short), spectra (lab spectra), cli (command lines, in-process).  The inputs
come from the generators in tests/fuzzing.py (mutations of valid files, odd
characters and encodings, absurd numbers).  For each kind the script prints
tried / accepted / clean errors / tracebacks / slow (over --slow seconds),
and the first tracebacks in full.  Goal: 0 tracebacks and 0 slow inputs.
"""
from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
import warnings
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))
sys.path.insert(0, str(ROOT))

from hypothesis import HealthCheck, Phase, given, settings  # noqa: E402

import fuzzing  # noqa: E402

KINDS = {
    "mechanisms": (fuzzing.mechanism_bytes, fuzzing.try_mechanism),
    "scenarios": (fuzzing.scenario_bytes, fuzzing.try_scenario),
    "runs": (fuzzing.scenario_bytes, lambda data, folder: fuzzing.try_scenario(data, folder,
                                                                                integrate=True)),
    "spectra": (fuzzing.spectrum_bytes, fuzzing.try_spectrum),
    "cli": (fuzzing.cli_argv, fuzzing.try_cli),
}


def fuzz_kind(kind: str, n: int, slow_s: float, folder: Path, seed: int) -> dict:
    strategy, judge = KINDS[kind]
    counts = {"tried": 0, "ok": 0, "clean": 0, "traceback": 0, "slow": 0}
    examples: list[str] = []
    slowest = [0.0, None]

    @settings(max_examples=n, deadline=None, database=None, derandomize=False,
              suppress_health_check=list(HealthCheck), phases=[Phase.generate])
    @given(value=strategy())
    def one(value):
        t0 = time.perf_counter()
        outcome, detail = judge(value, folder)
        elapsed = time.perf_counter() - t0
        counts["tried"] += 1
        counts[outcome] += 1
        if elapsed > slow_s:
            counts["slow"] += 1
        if elapsed > slowest[0]:
            slowest[:] = [elapsed, value]
        if outcome == "traceback" and len(examples) < 3:
            lines = [ln if len(ln) <= 300 else ln[:300] + "..." for ln in detail.splitlines()]
            examples.append(f"input: {value!r:.300}\n" + "\n".join(lines))

    import random
    random.seed(seed)
    t0 = time.perf_counter()
    one()
    counts["wall_s"] = time.perf_counter() - t0
    counts["slowest_s"] = slowest[0]
    counts["examples"] = examples
    return counts


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("-n", type=int, default=10_000, help="inputs per kind (default 10000)")
    parser.add_argument("--kinds", nargs="+", choices=sorted(KINDS), default=list(KINDS))
    parser.add_argument("--runs", type=int, default=None,
                        help="inputs for the 'runs' kind (default: n / 10; each may integrate)")
    parser.add_argument("--slow", type=float, default=5.0, help="seconds that count as slow")
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args(argv)
    warnings.simplefilter("ignore")
    folder = Path(tempfile.mkdtemp(prefix="boxchem-fuzz-"))
    shutil.copy(fuzzing.MECH_DIR / "small.mech", folder / "small.mech")
    fuzzing.ensure_result_file(folder)
    print(f"{'kind':11s} {'tried':>7s} {'accepted':>9s} {'clean':>7s} {'tracebacks':>10s} "
          f"{'slow>' + format(args.slow, 'g') + 's':>8s} {'slowest':>8s} {'wall':>8s}", flush=True)
    total_bad = 0
    for kind in args.kinds:
        n = args.runs if (kind == "runs" and args.runs) else (max(1, args.n // 10) if kind == "runs"
                                                                else args.n)
        c = fuzz_kind(kind, n, args.slow, folder, args.seed)
        print(f"{kind:11s} {c['tried']:7d} {c['ok']:9d} {c['clean']:7d} {c['traceback']:10d} "
              f"{c['slow']:8d} {c['slowest_s']:7.2f}s {c['wall_s']:7.0f}s", flush=True)
        for example in c["examples"]:
            print(f"--- traceback ({kind}) ---\n{example}", flush=True)
        total_bad += c["traceback"] + c["slow"]
    shutil.rmtree(folder, ignore_errors=True)
    return 1 if total_bad else 0


if __name__ == "__main__":
    sys.exit(main())
