"""``boxchem run SCENARIO``: integrate a scenario and write the result to netCDF."""
from __future__ import annotations

import argparse
import sys
import time
import tomllib
from pathlib import Path

from ..errors import IntegrationError, ScenarioError

EXAMPLE = """examples:
  boxchem run stratosphere-box                      # shipped scenario -> ./stratosphere-box.nc
  boxchem run my.toml -o out/my.nc --quiet
  boxchem run stratosphere-box --scale clo_clo_m=1.2 --set 'run.duration="5 d"'

The file is written under a temporary name and renamed when complete.  If
the integration fails, the result up to the failure is written to
OUT.partial.nc and the exit status is 1; input errors give exit status 2."""

#: species reported in the closing summary, when the mechanism has them
SPECIES_OF_INTEREST = ("O3", "ClO", "HCl", "ClONO2", "BrO", "HNO3")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "run", help="run a scenario and write the result to netCDF",
        description="Integrate a scenario (shipped name or path to a .toml file) and write "
                    "the output Dataset to a netCDF4 file.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("scenario", metavar="SCENARIO", help="shipped scenario name or path to a .toml file")
    p.add_argument("-o", "--output", metavar="OUT.nc",
                   help="output file (default: SCENARIO-STEM.nc in the current folder)")
    p.add_argument("--scale", metavar="ID=FACTOR", action="append", default=[],
                   help="multiply the rate coefficient of reaction ID by FACTOR (repeatable)")
    p.add_argument("--set", metavar="SECTION.KEY=VALUE", action="append", default=[],
                   dest="overrides",
                   help='override a scenario value, e.g. run.duration="2 d" or solver.rtol=1e-5 '
                        "(repeatable)")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar and no summary")
    p.set_defaults(func=main)


def parse_assignments(items: list[str], option: str) -> dict[str, str]:
    """``["A=1", "B=x"]`` -> ``{"A": "1", "B": "x"}``; a missing '=' names the option."""
    out: dict[str, str] = {}
    for item in items:
        key, sep, value = item.partition("=")
        if not sep or not key.strip() or not value.strip():
            raise ScenarioError(f"{option} {item!r}: expected KEY=VALUE, e.g. "
                                + ("clo_clo_m=1.2" if option == "--scale" else 'run.duration="2 d"'))
        out[key.strip()] = value.strip()
    return out


def _toml_value(text: str):
    """A command-line value read as a TOML value (number, bool, string), else as text."""
    try:
        return tomllib.loads(f"v = {text}")["v"]
    except tomllib.TOMLDecodeError:
        return text


def parse_scale(items: list[str]) -> dict[str, float]:
    scale = {}
    for key, value in parse_assignments(items, "--scale").items():
        try:
            scale[key] = float(value)
        except ValueError:
            raise ScenarioError(f"--scale {key}={value}: FACTOR must be a number, e.g. "
                                f"{key}=1.2") from None
    return scale


def _mixing_ratio(x: float) -> str:
    if x != x:
        return "nan"
    for factor, unit in ((1e-6, "ppmv"), (1e-9, "ppbv"), (1e-12, "pptv")):
        if abs(x) >= factor:
            return f"{x / factor:8.3f} {unit}"
    return f"{x / 1e-12:8.3g} pptv"


def summary(ds, out: Path, wall_s: float) -> str:
    """Species of interest at start and end, work counters, wall time."""
    lines = [f"wrote {out}  ({ds.sizes['time']} output times, {ds.sizes['species']} species, "
             f"{ds.sizes['reaction']} reactions)"]
    species = [s for s in SPECIES_OF_INTEREST if s in ds.species.values]
    if species:
        lines.append(f"  {'species':8s} {'start':>14s} {'end':>14s} {'change':>9s}")
        for s in species:
            x = ds.mole_fraction.sel(species=s).values
            start, end = float(x[0]), float(x[-1])
            change = f"{100 * (end - start) / start:+8.1f}%" if start > 0 else "        -"
            lines.append(f"  {s:8s} {_mixing_ratio(start):>14s} {_mixing_ratio(end):>14s} {change}")
    a = ds.attrs
    lines.append(f"  solver: {a.get('solver_steps')} steps ({a.get('solver_rejected_steps')} rejected), "
                 f"{a.get('solver_rhs_evaluations')} RHS, {a.get('solver_jacobian_evaluations')} "
                 f"Jacobians, {a.get('solver_lu_decompositions')} LU")
    lines.append(f"  wall time: {wall_s:.2f} s")
    return "\n".join(lines)


def default_output(scenario_arg: str) -> Path:
    """``<scenario stem>.nc`` in the current folder."""
    return Path.cwd() / f"{Path(scenario_arg).stem}.nc"


def partial_path(out: Path) -> Path:
    return out.with_name(f"{out.stem}.partial.nc")


def main(args) -> int:
    from ..io.netcdf import write_dataset
    from ..runner import run
    from ..scenario import load_scenario

    wall0 = time.perf_counter()
    scale = parse_scale(args.scale)
    settings = parse_assignments(args.overrides, "--set")
    from ..scenario import paths_from_working_folder
    # file paths typed here are read from the working folder, not the scenario's
    overrides = paths_from_working_folder({k: _toml_value(v) for k, v in settings.items()})
    # errors in these values name the option they came from, not the scenario file
    origins = {f"scale.{k}": f"--scale {k}={v}" for k, v in parse_assignments(args.scale, "--scale").items()}
    origins.update({k: f"--set {k}={v}" for k, v in settings.items()})
    scenario = load_scenario(args.scenario)
    if scale or overrides:
        scenario = scenario.with_overrides(scale=scale or None, origins=origins, **overrides)
    out = Path(args.output) if args.output else default_output(args.scenario)
    try:
        ds = run(scenario, progress=not args.quiet)
    except IntegrationError as exc:
        partial = exc.partial_result
        if partial is not None:
            path = write_dataset(partial, partial_path(out))
            print(f"boxchem run: integration failed: {exc}\n  result up to the failure written "
                  f"to {path}", file=sys.stderr)
        else:
            print(f"boxchem run: integration failed: {exc}", file=sys.stderr)
        return 1
    write_dataset(ds, out)
    if not args.quiet:
        print(summary(ds, out, time.perf_counter() - wall0))
    return 0
