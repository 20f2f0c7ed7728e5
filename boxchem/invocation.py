"""The command line that is running, for the provenance of result files (no heavy imports)."""
from __future__ import annotations

import shlex
import sys
from pathlib import Path

_ARGV: list[str] | None = None


def record(argv: list[str]) -> None:
    """Called by the ``boxchem`` entry point with its arguments (without the program name)."""
    global _ARGV
    _ARGV = ["boxchem", *argv]


def command_line() -> str:
    """``boxchem run ...`` when the CLI runs, else the Python command (``python script.py ...``)."""
    if _ARGV is not None:
        return shlex.join(_ARGV)
    return shlex.join([Path(sys.executable).name, *sys.argv])
