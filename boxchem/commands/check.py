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
        + (f" (and {hidden[0]} of the included shipped mechanism, not shown: see '{hidden[1]}')"
           if hidden[0] else ""),
    ])


def _in_shipped_file(problem) -> bool:
    """True for a problem located in a shipped mechanism file (an ``include``d one)."""
    from ..resources import shipped_dir
    if problem.location is None:
        return False
    try:
        Path(problem.location.file).resolve().relative_to(shipped_dir("mechanisms").resolve())
    except ValueError:
        return False
    return True


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
    # Warnings of an included shipped mechanism (e.g. its source gases, never
    # produced) are the shipped file's, not the user's: listed only when the
    # shipped mechanism itself is checked, and never errors under --strict for
    # a user's file that includes it.
    own = [w for w in mechanism.warnings if checking_shipped or not _in_shipped_file(w)]
    inherited = [w for w in mechanism.warnings if w not in own]
    shipped = sorted({Path(w.location.file).stem for w in inherited})
    see = f"boxchem check {' '.join(shipped)}"
    if args.strict and own:
        raise MechanismError([dataclasses.replace(w, severity="error",
                                                  message=f"{w.message} (error under --strict)")
                              for w in own])
    for w in own:
        print(w.format(), file=sys.stderr)
    print(summary(mechanism, (len(inherited), see)))
    return 0
