"""``boxchem demo [DIR]``: run the polar-spring scenario and explain what happened.

Writes into DIR the result (netCDF), the standard figures of
:func:`boxchem.plotting.plot_all` and ``summary.txt``: how much ozone the box
lost, by which catalytic cycles, and when (peak loss day, minimum ozone,
chlorine activation and deactivation dates).  The summary is computed by
:func:`summarize` (a dict, testable) and worded by :func:`format_summary`.
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

from ..errors import BoxchemError, IntegrationError

__all__ = ["register", "main", "choose_output_dir", "summarize", "format_summary",
           "DEMO_SCENARIO", "DEFAULT_DIR_NAME"]

DEMO_SCENARIO = "polar-spring"


def __getattr__(name: str):
    # summarize / format_summary moved to boxchem.diagnostics.summary; imported on use so that
    # building the command line does not import xarray
    if name in ("summarize", "format_summary"):
        from ..diagnostics import summary
        return getattr(summary, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
DEFAULT_DIR_NAME = "boxchem-demo"

EXAMPLE = """examples:
  boxchem demo                       # runs polar-spring into ./boxchem-demo/ (about a minute)
  boxchem demo my-demo               # into ./my-demo/ (must be new or empty)
  boxchem demo --set 'initial.HNO3="9 ppbv"'   # the undenitrified variant
  boxchem demo quick --days 10       # a shortened run (first 10 days only; for trying things out)
  boxchem demo night --scenario polar-night   # another shipped scenario

Writes DIR/SCENARIO.nc (polar-spring.nc by default), the figures (mixing_ratios, diurnal_clo_cl2o2,
ozone_loss, chlorine_partitioning, solar_zenith_angle; PNG) and
DIR/summary.txt, which is also printed.  An existing non-empty DIR is never
overwritten: without DIR the next free name (boxchem-demo-2, ...) is used.
The scenario and its variants are described in docs/polar-scenarios.md."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "demo", help="run a shipped scenario (polar-spring by default) and write its figures and a summary",
        description="Run a shipped scenario (default polar-spring: Antarctic vortex, 1 August to "
                    "15 October) and write the result, the standard figures and a short "
                    "text summary of the ozone loss into a new folder.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("directory", nargs="?", metavar="DIR", default=None,
                   help=f"output folder, new or empty (default: ./{DEFAULT_DIR_NAME}, or the "
                        "next free ./boxchem-demo-N)")
    p.add_argument("--scenario", default=DEMO_SCENARIO, metavar="NAME",
                   help=f"shipped scenario name (polar-spring, polar-night, midlatitude, ...) or path "
                        f"to a .toml file (default {DEMO_SCENARIO})")
    p.add_argument("--days", type=float, default=None, metavar="N",
                   help="run only the first N days (a shortened run for quick trials and tests; "
                        "default: the whole scenario)")
    p.add_argument("--set", metavar="SECTION.KEY=VALUE", action="append", default=[],
                   dest="overrides", help="override a scenario value, as in 'boxchem run' (repeatable)")
    p.add_argument("--format", choices=("png", "pdf"), default="png", help="figure format (default png)")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar and no printed summary")
    p.set_defaults(func=main)


# ---------------------------------------------------------------------------
# output folder
# ---------------------------------------------------------------------------
def _is_empty_dir(path: Path) -> bool:
    return path.is_dir() and not any(path.iterdir())


def choose_output_dir(directory: str | None, cwd: Path | None = None) -> Path:
    """The folder to write into: DIR if new or empty, else an error; default the next free name."""
    cwd = Path.cwd() if cwd is None else cwd
    if directory is not None:
        path = Path(directory)
        if path.exists() and not path.is_dir():
            raise BoxchemError(f"DIR {str(path)!r} exists and is not a folder; give a new folder name")
        if path.exists() and not _is_empty_dir(path):
            raise BoxchemError(f"DIR {str(path)!r} exists and is not empty; give a new or empty "
                               "folder (the demo never overwrites files)")
        return path
    for n in range(1, 1000):
        path = cwd / (DEFAULT_DIR_NAME if n == 1 else f"{DEFAULT_DIR_NAME}-{n}")
        if not path.exists() or _is_empty_dir(path):
            return path
    raise BoxchemError(f"no free folder name {DEFAULT_DIR_NAME}-N in {str(cwd)!r}; give DIR")


# ---------------------------------------------------------------------------
# command
# ---------------------------------------------------------------------------
def main(args) -> int:
    from ..io.netcdf import write_dataset
    from ..plotting import plot_all
    from ..runner import run
    from ..scenario import load_scenario
    from .run import _toml_value, parse_assignments

    if args.days is not None and not args.days > 0:
        raise BoxchemError(f"--days {args.days:g}: give a positive number of days, e.g. --days 10")
    outdir = choose_output_dir(args.directory)
    overrides = {k: _toml_value(v) for k, v in parse_assignments(args.overrides, "--set").items()}
    from ..diagnostics.summary import format_summary, summarize
    scenario = load_scenario(args.scenario)
    name = Path(str(args.scenario)).stem if str(args.scenario).endswith(".toml") else str(args.scenario)
    if args.days is not None:
        overrides["run.duration"] = f"{args.days:g} d"
    if not args.quiet:
        days = args.days if args.days is not None else scenario.duration_s / 86400.0
        print(f"boxchem demo: running {name} ({days:g} days) into {outdir}/", file=sys.stderr)
    wall0 = time.perf_counter()
    outdir.mkdir(parents=True, exist_ok=True)
    nc = outdir / f"{name}.nc"
    try:
        ds = run(scenario, progress=not args.quiet, **overrides)
    except IntegrationError as exc:
        if exc.partial_result is not None:
            path = write_dataset(exc.partial_result, outdir / f"{name}.partial.nc")
            print(f"boxchem demo: integration failed: {exc}\n  result up to the failure written to "
                  f"{path}", file=sys.stderr)
        else:
            print(f"boxchem demo: integration failed: {exc}", file=sys.stderr)
        return 1
    wall = time.perf_counter() - wall0
    write_dataset(ds, nc)
    figures, skipped = plot_all(ds, outdir, fmt=args.format)
    text = format_summary(summarize(ds), scenario=name, wall_s=wall, heading="boxchem demo")
    (outdir / "summary.txt").write_text(text, encoding="utf-8")
    if not args.quiet:
        print(text)
        print(f"wrote {nc}, {len(figures)} figures and {outdir / 'summary.txt'}")
        for note in skipped:
            print(f"skipped figure {note}", file=sys.stderr)
    return 0
