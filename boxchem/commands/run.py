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
OUT.partial.nc and the exit status is 1.  The output folder is checked
(writable, room for the estimated size) before the integration starts; if
writing fails after it, the result goes to a fallback file in the temporary
folder, named in the message.  Element totals and fixed mixing ratios are
checked at the end (docs/guards.md): a drift is a warning, or with --strict
an error (exit 1, result in OUT.partial.nc).
Exit status: 0 success, 1 integration failed, 2 input error, 3 output error,
130 interrupted."""

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
    p.add_argument("--strict", action="store_true",
                   help="a failed conservation check (element totals, fixed mixing ratios) is an "
                        "error (exit status 1) instead of a warning")
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
    if "conservation_check" in a:
        lines.append(f"  conservation: {a['conservation_check']} - {a.get('conservation_message', '')}")
    lines.append(f"  wall time: {wall_s:.2f} s")
    return "\n".join(lines)


def default_output(scenario_arg: str) -> Path:
    """``<scenario stem>.nc`` in the current folder."""
    return Path.cwd() / f"{Path(scenario_arg).stem}.nc"


def partial_path(out: Path) -> Path:
    return out.with_name(f"{out.stem}.partial.nc")


def print_mechanism_warnings(mechanism) -> None:
    """Warnings about the mechanism's data files (partial lab spectra) as file:line:col messages.

    Only those: the other warnings of a mechanism (species never produced, ...)
    are the business of ``boxchem check``, but what a run does with a user's
    spectrum must be seen by whoever runs it.
    """
    from ..photolysis.datacheck import photolysis_file_problems
    from .check import _in_shipped_file
    for w in photolysis_file_problems(mechanism):
        if w.severity == "warning" and not _in_shipped_file(w):
            print(w.format(), file=sys.stderr)


def print_scenario_spectrum_warnings(scenario) -> None:
    """What ``[photolysis].cross_sections`` files that miss part of the shipped range will do.

    Said before the integration starts (a refused file is an error here); the
    run records the same notes in its ``photolysis_notes`` attribute.
    """
    from ..errors import DataFileError
    from ..photolysis.splice import reaction_cross_section
    for rid, path in scenario.photolysis_cross_sections.items():
        where = f"{scenario.source}: [photolysis].cross_sections.{rid}"
        try:
            _, note = reaction_cross_section(scenario.mechanism.reaction(rid), str(path))
        except DataFileError as exc:
            raise DataFileError(f"{where}: {exc}") from None
        if note:
            print(f"{where}: warning: {note}", file=sys.stderr)
def _estimated_bytes(scenario) -> int:
    from ..io.outputcheck import estimated_result_bytes
    from ..preflight import output_time_count
    m = scenario.mechanism
    return estimated_result_bytes(output_time_count(scenario.duration_s, scenario.output_interval_s),
                                  len(m.species), len(m.reactions), len(m.families), len(m.cycles))


def conservation_warning(ds) -> str | None:
    """The conservation guard's message when it failed (attribute written by the runner)."""
    if ds.attrs.get("conservation_check") == "failed":
        return f"warning: {ds.attrs.get('conservation_message', 'conservation check failed')}"
    return None


def main(args) -> int:
    from ..exitcodes import INTEGRATION_FAILED, OK
    from ..io.outputcheck import check_output_location, write_with_fallback
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
    print_mechanism_warnings(scenario.mechanism)
    print_scenario_spectrum_warnings(scenario)
    # before the integration: a long run must not be lost to an unwritable or full disk
    check_output_location(out, _estimated_bytes(scenario))
    try:
        ds = run(scenario, progress=not args.quiet)
    except IntegrationError as exc:
        partial = exc.partial_result
        print(f"boxchem run: integration failed: {exc}", file=sys.stderr)
        if partial is not None:
            path = write_with_fallback(partial, partial_path(out))
            print(f"  result up to the failure written to {path}", file=sys.stderr)
        return INTEGRATION_FAILED
    warning = conservation_warning(ds)
    if warning and args.strict:
        path = write_with_fallback(ds, partial_path(out))
        print(f"boxchem run: {warning[len('warning: '):]} (an error under --strict)\n  result "
              f"written to {path}", file=sys.stderr)
        return INTEGRATION_FAILED
    write_with_fallback(ds, out)
    if warning:
        print(f"boxchem run: {warning}", file=sys.stderr)
    if not args.quiet:
        print(summary(ds, out, time.perf_counter() - wall0))
    return OK
