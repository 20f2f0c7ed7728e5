"""Start-up costs: ``import boxchem``, the command line, and the first run after installing.

Each figure is measured in a fresh interpreter (subprocess), median of
``--repeat`` runs.  "Cold" runs point NUMBA_CACHE_DIR at an empty folder, which
is what a fresh install sees (numba then compiles the kernels); "warm" runs
reuse that folder.  Options compared for the first run after installing:

* A - nothing: the first run compiles (cold run);
* B - ``boxchem compile`` once after installing (cold), then the first run is warm;
* C - compiling in a background thread at import would overlap only the run's
  setup (mechanism, J tables), printed here as "setup", with the compilation.

Usage: python benchmarks/bench_startup.py [--repeat 3] [--days 10]
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def timed(code: str, env_extra: dict | None = None) -> float:
    env = dict(os.environ, PYTHONPATH=str(ROOT), **(env_extra or {}))
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-c", code], check=True, env=env, cwd=ROOT,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - t0


def inner(code: str, env_extra: dict | None = None) -> float:
    """Seconds measured inside the child (excludes interpreter start-up)."""
    env = dict(os.environ, PYTHONPATH=str(ROOT), **(env_extra or {}))
    out = subprocess.run([sys.executable, "-c", code], check=True, env=env, cwd=ROOT,
                         capture_output=True, text=True).stdout
    return float(out.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--days", type=float, default=10.0, help="length of the timed polar-spring run")
    args = ap.parse_args()
    med = (lambda f: statistics.median(f() for _ in range(args.repeat)))

    baseline = med(lambda: timed("pass"))
    print(f"python -c pass (interpreter start, baseline): {baseline:.3f} s")
    t_import = med(lambda: inner("import time; t=time.perf_counter(); import boxchem; "
                                 "print(time.perf_counter()-t)"))
    print(f"import boxchem:                         {t_import:.3f} s   (target <= 0.5 s)")
    t_cli = med(lambda: inner("import time; t=time.perf_counter(); import boxchem.cli as c; c.build_parser(); "
                              "print(time.perf_counter()-t)"))
    print(f"build the command line (all commands):  {t_cli:.3f} s")
    t_runner = med(lambda: inner("import time; t=time.perf_counter(); import boxchem.runner; "
                                 "print(time.perf_counter()-t)"))
    print(f"import boxchem.runner (xarray, scipy):  {t_runner:.3f} s")

    run_code = ("import time, boxchem; t=time.perf_counter(); "
                f"boxchem.run('polar-spring', progress=False, **{{'run.duration': '{args.days:g} d'}}); "
                "print(time.perf_counter()-t)")
    setup_code = ("import time, boxchem.runner as r, boxchem.scenario as s; t=time.perf_counter(); "
                  f"r.prepare(s.load_scenario('polar-spring').with_overrides(**{{'run.duration': '{args.days:g} d'}})); "
                  "print(time.perf_counter()-t)")
    compile_code = ("import time; t=time.perf_counter(); from boxchem.warmup import compile_kernels; "
                    "compile_kernels(); print(time.perf_counter()-t)")
    colds, warms, compiles, warm_after = [], [], [], []
    for _ in range(args.repeat):
        with tempfile.TemporaryDirectory() as cache:
            env = {"NUMBA_CACHE_DIR": cache}
            colds.append(inner(run_code, env))            # A: first run compiles
            warms.append(inner(run_code, env))            # later runs load the cache
        with tempfile.TemporaryDirectory() as cache:
            env = {"NUMBA_CACHE_DIR": cache}
            compiles.append(inner(compile_code, env))     # B: boxchem compile after installing ...
            warm_after.append(inner(run_code, env))       # ... then the first run
    numpy_run = inner(run_code, {"BOXCHEM_JIT": "0"})
    setup = med(lambda: inner(setup_code))
    c, w = statistics.median(colds), statistics.median(warms)
    print(f"\npolar-spring, {args.days:g} days (times inside the process, median of {args.repeat}):")
    print(f"  A first run after install (cold cache): {c:6.2f} s")
    print(f"    later runs (warm cache):               {w:6.2f} s   -> compilation costs {c - w:.1f} s")
    print(f"  B 'boxchem compile' (cold cache):        {statistics.median(compiles):6.2f} s, once")
    print(f"    first run after it:                    {statistics.median(warm_after):6.2f} s "
          f"({statistics.median(warm_after) / w:.2f} x a warm run)")
    print(f"  C setup a background compile could overlap: {setup:.2f} s of the {c - w:.1f} s")
    print(f"  numpy path (BOXCHEM_JIT=0, no compilation): {numpy_run:6.2f} s")


if __name__ == "__main__":
    main()
