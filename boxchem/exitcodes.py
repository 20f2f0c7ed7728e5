"""Exit statuses of the ``boxchem`` command (documented in docs/guards.md and the README).

Scripts can tell apart a bad input (fix the file or option), a failed
integration (the numerics; a partial result was kept), and an output problem
(the result could not be written where asked; it was kept elsewhere if at all
possible).
"""
from __future__ import annotations

__all__ = ["OK", "INTEGRATION_FAILED", "INPUT_ERROR", "OUTPUT_ERROR", "INTERRUPTED", "EXIT_CODES"]

OK = 0
#: the integrator failed, or (under ``--strict``) the conservation guard failed
INTEGRATION_FAILED = 1
#: a mechanism, scenario, data file or command-line option is invalid (nothing was run)
INPUT_ERROR = 2
#: the output location is unusable (checked before the run) or writing the result failed
OUTPUT_ERROR = 3
#: interrupted with Ctrl-C (128 + SIGINT, the shell convention)
INTERRUPTED = 130

EXIT_CODES = {OK: "success", INTEGRATION_FAILED: "integration failed",
              INPUT_ERROR: "input error", OUTPUT_ERROR: "output error", INTERRUPTED: "interrupted"}
