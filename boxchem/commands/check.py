"""``boxchem check MECH``: validate a mechanism and print a summary."""
from __future__ import annotations

import argparse
import dataclasses
import sys
from collections import Counter
from pathlib import Path

from ..mechanism.model import RATE_LAWS, Mechanism

EXAMPLE = """examples:
  boxchem check stratosphere            # a shipped mechanism, by name
  boxchem check my_run.mech --strict    # warnings count as errors

A file that extends another ('extends "stratosphere"') gets a list of every
reaction it changed, dropped or added, with the old and new definitions.

Errors are printed as file:line:column with the offending line and a caret;
the exit status is 0 when the mechanism is valid and 2 when it is not."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "check", help="validate a mechanism file and summarise it",
        description="Read a mechanism (shipped name or path), report every error and warning, "
                    "and summarise its species, reactions, families and cycles.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("mechanism", metavar="MECH", help="shipped mechanism name or path to a .mech file")
    p.add_argument("--strict", action="store_true", help="treat warnings as errors (exit status 2)")
    p.set_defaults(func=run)


def summary(mechanism: Mechanism, hidden: tuple[int, str] = (0, "")) -> str:
    """Counts of species (variable/fixed/lumped), reactions by law, families, cycles, warnings.

    ``hidden`` is (number, what) of warnings not shown, e.g. (6, "boxchem check
    stratosphere"): they are left out of the count and mentioned beside it.
    """
    sp = mechanism.species
    n_fixed = sum(s.fixed for s in sp)
    n_lumped = sum(s.lumped for s in sp)
    laws = Counter(r.law for r in mechanism.reactions)
    by_law = ", ".join(f"{laws[law]} {law}" for law in RATE_LAWS if laws[law])
    return "\n".join([
        f"{mechanism.source}: OK",
        f"  species:   {len(sp)} ({len(sp) - n_fixed} variable, {n_fixed} fixed, {n_lumped} lumped)",
        f"  reactions: {len(mechanism.reactions)}" + (f" ({by_law})" if by_law else ""),
        f"  families:  {len(mechanism.families)}",
        f"  cycles:    {len(mechanism.cycles)}",
        f"  warnings:  {len(mechanism.warnings) - hidden[0]}"
        + (f" (and {hidden[0]} of the extended shipped mechanism, not shown: see '{hidden[1]}')"
           if hidden[0] else ""),
    ])


def _in_shipped_file(problem, _cache: dict = {}) -> bool:
    """True for a problem located in a shipped mechanism file (an extended one).

    Answers are cached per file name: ``check`` stays linear in the number of warnings.
    """
    from ..resources import shipped_dir
    if problem.location is None:
        return False
    name = problem.location.file
    if name not in _cache:
        try:
            Path(name).resolve().relative_to(shipped_dir("mechanisms").resolve())
            _cache[name] = True
        except (ValueError, OSError):
            _cache[name] = False
    return _cache[name]


#: conditions ``check`` evaluates every thermal k over (a scenario checks its own range):
#: 150-330 K and [M] from 1e14 cm-3 (about 60 km) to 3e19 cm-3 (the surface) - common practice
CHECK_TEMPERATURE_RANGE_K = (150.0, 330.0)
CHECK_AIR_DENSITY_RANGE_CM3 = (1.0e14, 3.0e19)


def _rate_coefficient_errors(mechanism) -> list:
    """Problems (located at the reaction's line) for k non-finite, negative or absurd in the range."""
    from ..errors import Problem
    from ..preflight import rate_coefficient_problems
    found = rate_coefficient_problems(mechanism, CHECK_TEMPERATURE_RANGE_K, CHECK_AIR_DENSITY_RANGE_CM3)
    return [Problem(f"reaction {reaction.id!r}: " + message.split(": ", 1)[1] + f" (checked over {CHECK_TEMPERATURE_RANGE_K[0]:g}-"
                    f"{CHECK_TEMPERATURE_RANGE_K[1]:g} K, [M] {CHECK_AIR_DENSITY_RANGE_CM3[0]:g}-"
                    f"{CHECK_AIR_DENSITY_RANGE_CM3[1]:g} cm-3)", reaction.location)
            for reaction, message in found]


def run(args) -> int:
    from ..errors import MechanismError
    from ..mechanism import load_mechanism
    mechanism = load_mechanism(args.mechanism)
    from ..errors import SourceLocation, Problem
    if not mechanism.reactions:
        # an empty (or comment-only) file parses, but is no mechanism: nothing could run
        what = "no species and no reactions" if not mechanism.species else "no reactions"
        raise MechanismError([Problem(
            f"the mechanism has {what}; a mechanism needs a [species] section and a [reactions] "
            f"section with at least one reaction (see docs/mechanism-language.md)",
            SourceLocation(str(mechanism.source or args.mechanism), 1))])
    from ..resources import resolve
    checking_shipped = _in_shipped_file(Problem("", SourceLocation(str(resolve(args.mechanism, "mechanisms")), 1)))
    # Warnings of an extended shipped mechanism (e.g. its source gases, never
    # produced) are the shipped file's, not the user's: listed only when the
    # shipped mechanism itself is checked, and never errors under --strict for
    # a user's file that extends it.
    own, inherited = [], []
    for w in mechanism.warnings:            # one pass: linear in the number of warnings
        (own if checking_shipped or not _in_shipped_file(w) else inherited).append(w)
    shipped = sorted({Path(w.location.file).stem for w in inherited})
    see = f"boxchem check {' '.join(shipped)}"
    rate_errors = _rate_coefficient_errors(mechanism)
    if rate_errors:
        raise MechanismError(rate_errors)
    if args.strict and own:
        raise MechanismError([dataclasses.replace(w, severity="error",
                                                  message=f"{w.message} (error under --strict)")
                              for w in own])
    if own:
        sys.stderr.write("".join(f"{w.format()}\n" for w in own))
    print(summary(mechanism, (len(inherited), see)))
    if mechanism.changes:
        print(changes_report(mechanism))
    return 0


def changes_report(mechanism: Mechanism) -> str:
    """What the files that extend a base changed: one block per reaction, in file order."""
    counts = Counter(c.kind for c in mechanism.changes)
    head = ", ".join(f"{counts[k]} {k}" for k in ("changed", "dropped", "added") if counts[k])
    lines = [f"  changes to the base mechanism: {head}"]
    for c in mechanism.changes:
        where = f"{c.location.file}:{c.location.line}" if c.location else ""
        base = f"{c.base_location.file}:{c.base_location.line}" if c.base_location else ""
        lines.append(f"    {c.kind:8s} {c.reaction_id:20s} {where}")
        if c.kind in ("changed", "dropped"):
            lines.append(f"      was: {c.before}" + (f"   ({base})" if base else ""))
        if c.kind in ("changed", "added"):
            lines.append(f"      now: {c.after}")
    return "\n".join(lines)
