"""``boxchem compile``: build and cache the solver's compiled kernels now (after installing)."""
from __future__ import annotations

import argparse

EXAMPLE = """examples:
  pip install boxchem && boxchem compile     # once, after installing: later runs start at once

The first run after installing compiles the solver's kernels (10-20 s) and
caches them next to the package; 'boxchem compile' does that ahead of time by
running a 2-hour integration of a shipped scenario.  Figures:
benchmarks/bench_startup.py and benchmarks/README.md."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "compile", help="compile and cache the solver kernels (once, after installing)",
        description="Compile the compiled solver path and store it in numba's cache, so that the "
                    "first real run does not wait for compilation.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.set_defaults(func=run)


def run(args) -> int:
    from ..warmup import compile_kernels
    result = compile_kernels()
    if result["compiled"]:
        print(f"solver kernels compiled and cached ({result['seconds']:.1f} s)")
    else:
        print(f"numba is not available or BOXCHEM_JIT=0: runs use the numpy path; nothing to compile "
              f"({result['seconds']:.1f} s)")
    return 0
