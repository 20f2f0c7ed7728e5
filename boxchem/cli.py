"""The ``boxchem`` command: one entry point, sub-commands in boxchem/commands/.

Each module listed in ``COMMANDS`` defines ``register(subparsers)``, which adds
its sub-parser and sets ``func`` to a callable taking the parsed arguments and
returning an exit status.  Errors boxchem raises on purpose (BoxchemError) are
printed without a traceback and give exit status 2.
"""
from __future__ import annotations

import argparse
import importlib
import sys

from . import __version__
from .errors import BoxchemError

#: sub-command modules, in the order ``boxchem --help`` lists them
COMMANDS = ("check", "rates", "run", "jvalues", "budget", "compare", "sweep", "plot", "demo",
            "fit", "fit_traces")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="boxchem",
        description="Atmospheric photochemistry box model: mechanisms, runs, J-values, budgets.",
        epilog="example: boxchem check stratosphere",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"boxchem {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        try:
            module = importlib.import_module(f"boxchem.commands.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"boxchem.commands.{name}":
                continue  # command not built yet
            raise
        module.register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 0
    try:
        return int(args.func(args) or 0)
    except BoxchemError as exc:
        print(f"boxchem {args.command}: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("boxchem: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # The reader went away (e.g. `boxchem rates ... | head`): not an error
        # of ours.  Point stdout at devnull so the interpreter's final flush
        # does not raise again.
        import os
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
