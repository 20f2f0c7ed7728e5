"""Compile (and cache) the solver's kernels ahead of the first real run.

numba compiles the compiled solver path on first use and caches the machine
code (``cache=True``), so only the first run after installing pays the
compilation (10-20 s; benchmarks/bench_startup.py).  :func:`compile_kernels`
pays it on purpose, e.g. right after ``pip install`` (``boxchem compile``): it
runs a two-hour integration of a shipped scenario through the ordinary
``boxchem.run`` path, so it compiles exactly the kernels a run uses, whatever
the solver exposes, without knowing their names.
"""
from __future__ import annotations

import time

__all__ = ["compile_kernels", "kernels_cached", "cold_start_note", "WARMUP_SCENARIO"]

#: a shipped scenario with sunrise and sunset (breakpoints), photolysis and surfaces
WARMUP_SCENARIO = "polar-spring"


def compile_kernels(scenario: str = WARMUP_SCENARIO) -> dict:
    """Run a short integration so the compiled kernels are built and cached.

    Returns ``{"compiled": bool, "seconds": float}`` (``compiled`` is False when
    numba is missing or BOXCHEM_JIT=0: then there is nothing to build).
    """
    from .runner import run
    t0 = time.perf_counter()
    run(scenario, progress=False, **{"run.duration": "2 h", "run.output_interval": "1 h"})
    return {"compiled": _jit_available(), "seconds": time.perf_counter() - t0}


def _jit_available() -> bool:
    try:
        from .solver.compiled import jit_available
    except ImportError:
        return False
    return jit_available()


def kernels_cached() -> bool:
    """True when numba's cache already holds compiled code of the solver package (or no JIT is used).

    Looks for numba's index files (``*.nbi``) where numba keeps them: under
    NUMBA_CACHE_DIR when set, else in ``__pycache__`` next to the solver's
    modules.  Any index counts (the check does not know the kernels' names).
    """
    import os
    from pathlib import Path
    if not _jit_available():
        return True
    from . import solver
    here = Path(solver.__file__).resolve().parent
    root = os.environ.get("NUMBA_CACHE_DIR")
    places = [Path(root)] if root else [here / "__pycache__"]
    return any(any(p.rglob("*.nbi")) for p in places if p.is_dir())


def cold_start_note() -> str:
    """The line a run prints when it is about to compile (empty when the kernels are cached)."""
    if kernels_cached():
        return ""
    return ("boxchem: compiling the solver kernels once (10-20 s; later runs load them in under a second; "
            "'boxchem compile' does this ahead of time)")
