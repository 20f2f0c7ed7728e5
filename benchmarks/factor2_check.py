"""Which science tests catch a factor-2 error?  (issue 11, item 6)

For each key quantity (tests/perturb_plugin.py ROWS: ClO + ClO + M, J(Cl2O2),
ClO + BrO, Cl + O3, the sulfate and NAT gammas, the O3 cross section, the
HNO3 pressure over NAT and the HNO3 solubility in STS) and each
factor (2 and 0.5), run the science tests with the model's quantity multiplied
by the factor and print which tests fail.  Every row must fail at least one
test; the script exits with status 1 if one does not.

    python benchmarks/factor2_check.py [--tests tests/test_science_factor2.py ...]

Runs pytest once per (row, factor) in a subprocess (about 30-60 s each on a
shared 2-core machine).  The printed table is kept in docs/heterogeneous.md.
"""
from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))
from perturb_plugin import ROW_TESTS, ROWS  # noqa: E402

DEFAULT_TESTS = ["tests/test_science_factor2.py"]


def failing_tests(row: str, factor: float, tests: list[str]) -> tuple[list[str], int]:
    env = dict(os.environ, BOXCHEM_PERTURB=f"{row}={factor:g}",
               PYTHONPATH=os.pathsep.join([str(ROOT), str(ROOT / "tests"), os.environ.get("PYTHONPATH", "")]))
    cmd = [sys.executable, "-m", "pytest", "-q", "-p", "perturb_plugin", "-rf", "--no-header", *tests]
    out = subprocess.run(cmd, cwd=ROOT, env=env, capture_output=True, text=True)
    failed = sorted({m.group(1).split("::", 1)[1] for m in re.finditer(r"^FAILED (\S+)", out.stdout, re.M)})
    passed = re.search(r"(\d+) passed", out.stdout)
    return failed, int(passed.group(1)) if passed else 0


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--tests", nargs="+", default=None,
                   help="test files to run per row (default: tests/test_science_factor2.py and the "
                        "row's own files, perturb_plugin.ROW_TESTS)")
    p.add_argument("--rows", nargs="+", default=list(ROWS), choices=list(ROWS))
    args = p.parse_args(argv)
    missed = []
    print(f"{'quantity':<18} {'factor':>6}  {'failed':>6} {'passed':>6}  failing tests")
    for row in args.rows:
        for factor in (2.0, 0.5):
            tests = args.tests if args.tests else DEFAULT_TESTS + list(ROW_TESTS.get(row, ()))
            failed, n_passed = failing_tests(row, factor, tests)
            if not failed:
                missed.append((row, factor))
            names = ", ".join(f.split("[")[0] + ("[" + f.split("[")[1] if "[" in f else "") for f in failed)
            print(f"{row:<18} {factor:>6g}  {len(failed):>6} {n_passed:>6}  {names or 'NONE - not caught'}",
                  flush=True)
    if missed:
        print(f"NOT CAUGHT: {missed}")
        return 1
    print("every row fails at least one test")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
