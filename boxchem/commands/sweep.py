"""``boxchem sweep SCENARIO --vary KEY=V1,V2,...``: a grid of members on the ensemble engine."""
from __future__ import annotations

import argparse

EXAMPLE = """examples:
  boxchem sweep polar-spring --vary location.latitude=-60,-70,-80 -o lat.nc
  boxchem sweep polar-spring --vary environment.temperature_offset=-2,0,2 \\
                             --vary scale.clo_clo_m=0.8,1.2 --workers 2
  boxchem sweep polar-spring --vary run.start=2026-08-15,2026-09-01

KEY is section.key of the scenario file, scale.<reaction id> (a factor on the
rate coefficient), initial.<species> or environment.temperature_offset (the
scenario key: kelvin added to the scenario's temperature, replacing an offset
the file sets).  Every combination is one member of a member table (the last
--vary varies fastest), run by the same engine as `boxchem ensemble`; the
output is its member file (dimension member; the grid is in the attributes
sweep_keys / sweep_shape).  A member that fails is recorded in member_status /
member_message and the others complete (exit status 1 if any failed).  Every value is checked
before any member runs (an invalid one is an input error, exit status 2).
budget, plot, compare and summary read the file (per member with --member, or
across members)."""


def register(subparsers) -> None:
    from .ensemble import add_engine_options
    p = subparsers.add_parser(
        "sweep", help="run a scenario for every combination of varied values",
        description="Run a scenario for every combination of the --vary values on the ensemble "
                    "engine and write one member file.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("scenario", metavar="SCENARIO", help="shipped scenario name or path to a .toml file")
    p.add_argument("--vary", action="append", required=True, metavar="KEY=V1,V2,...",
                   help="values of one scenario key (repeatable)")
    add_engine_options(p, default_output="SCENARIO-STEM-sweep.nc")
    p.set_defaults(func=run)


def run(args) -> int:
    from pathlib import Path

    from ..analysis.sweep import parse_vary, sweep_table
    from .ensemble import run_engine, scenario_of
    vary = parse_vary(args.vary)
    check_vary(scenario_of(args), vary)
    table = sweep_table(vary)
    out = Path(args.output) if args.output else Path(f"{Path(str(args.scenario)).stem}-sweep.nc")
    return run_engine(args, table, out)


def check_vary(scenario, vary) -> None:
    """Refuse unknown keys, reaction ids, species and invalid values before any member runs (exit 2).

    A typo in a key (``location.latitud``, ``scale.clo_clo_mm``,
    ``initial.ClONo2``) or an impossible value (``location.latitude=-95``)
    would make members fail after all of them were started; it is an input
    error naming the --vary item instead.  Each value is applied alone to the
    scenario, which validates it as a run would (no integration).  Members
    can still fail in the integration; those are recorded as failed and the
    others complete.
    """
    import difflib

    from ..analysis.sweep import TEMPERATURE_OFFSET_KEY, vary_label
    from ..errors import BoxchemError
    from ..scenario import SCENARIO_KEYS

    valid = [f"{sec}.{k}" for sec, ks in SCENARIO_KEYS.items() for k in ks] + [TEMPERATURE_OFFSET_KEY]
    base = None
    for key in vary:
        section, name = key.split(".", 1)
        if section not in ("scale", "initial"):
            if key not in valid:
                close = difflib.get_close_matches(key, valid, n=1)
                hint = f" - did you mean {close[0]!r}?" if close else ""
                raise BoxchemError(f"--vary: unknown key {key!r}{hint}; valid: {', '.join(valid)}, "
                                   f"scale.<reaction id>, initial.<species>")
            continue
        base = base or _loaded(scenario)
        # neutral values: only the reaction id or species name is checked here
        origins = {key: vary_label(key)}
        if section == "scale":
            base.with_overrides(scale={name: 1.0}, origins=origins)
        else:
            base.with_overrides(initial={name: "0 ppbv"}, origins=origins)
    check_vary_values(scenario, vary)


def _loaded(scenario):
    """A Scenario as given, or loaded from a shipped name or path."""
    from ..scenario import Scenario, load_scenario
    return scenario if isinstance(scenario, Scenario) else load_scenario(scenario)


def check_vary_values(scenario, vary) -> None:
    """Apply every --vary value alone to the scenario (validation only, no run); errors name it."""
    from ..analysis.sweep import vary_label
    base = _loaded(scenario)
    for key, values in vary.items():
        section, name = key.split(".", 1)
        for value in values:
            origins = {key: vary_label(key, value)}
            if section == "scale":
                base.with_overrides(scale={name: value}, origins=origins)
            elif section == "initial":
                base.with_overrides(initial={name: value}, origins=origins)
            else:
                base.with_overrides(origins=origins, **{key: value})
