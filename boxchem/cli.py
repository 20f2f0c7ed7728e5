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
COMMANDS = ("check", "rates", "run", "rerun", "jvalues", "budget", "compare", "summary", "sweep", "ensemble",
            "sensitivity", "uncertainty", "fit", "fit_traces", "plot", "demo", "compile")


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
    try:
        # the sub-command modules import numpy & co.: Ctrl-C here is an interrupt, not a traceback
        parser = build_parser()
    except KeyboardInterrupt:
        print("boxchem: interrupted", file=sys.stderr)
        return 130
    args = parser.parse_args(argv)
    from .invocation import record
    record(list(sys.argv[1:] if argv is None else argv))    # provenance of result files
    if not getattr(args, "func", None):
        parser.print_help()
        return 0
    try:
        return int(args.func(args) or 0)
    except BoxchemError as exc:
        # exit statuses: boxchem/exitcodes.py (input errors 2, output errors 3)
        print(f"boxchem {args.command}: {exc}", file=sys.stderr)
        return int(getattr(exc, "exit_code", 2))
    except OSError as exc:
        # a path the file system refuses (name too long, permission, loop of links):
        # an input error, said plainly
        name = str(exc.filename) if exc.filename is not None else ""
        name = name if len(name) <= 120 else f"{name[:60]}...{name[-40:]} ({len(name)} characters)"
        print(f"boxchem {args.command}: cannot use {name!r}: {exc.strerror or exc}", file=sys.stderr)
        return 2
    except RecursionError:
        print(f"boxchem {args.command}: input nested too deeply to read (an include, extends or "
              f"TOML table chain hundreds of levels deep?)", file=sys.stderr)
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
