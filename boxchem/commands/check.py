"""``boxchem check MECH``: validate a mechanism and print a summary."""
from __future__ import annotations

import argparse
import sys
from collections import Counter

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


def summary(mechanism: Mechanism) -> str:
    """Counts of species (variable/fixed/lumped), reactions by law, families and cycles."""
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
        f"  warnings:  {len(mechanism.warnings)}",
    ])


def run(args) -> int:
    from ..mechanism import load_mechanism
    mechanism = load_mechanism(args.mechanism, strict=args.strict)
    for w in mechanism.warnings:
        print(w.format(), file=sys.stderr)
    print(summary(mechanism))
    return 0
