"""Exception types of boxchem.

Every error caused by user input says where (file, line, column or key path),
what was found, and what would be valid.  The command line prints these
exceptions and exits with status 2; it never shows a traceback for them.
"""
from __future__ import annotations

from dataclasses import dataclass, field


class BoxchemError(Exception):
    """Base class of all errors boxchem raises on purpose."""


@dataclass(frozen=True)
class SourceLocation:
    """A place in a text file: 1-based line and column."""

    file: str
    line: int
    column: int = 1
    text: str = ""

    def __str__(self) -> str:
        return f"{self.file}:{self.line}:{self.column}"


@dataclass(frozen=True)
class Problem:
    """One finding of the mechanism reader or validator."""

    message: str
    location: SourceLocation | None = None
    severity: str = "error"  # "error" or "warning"

    def format(self) -> str:
        """file:line:col: severity: message, then the offending line and a caret."""
        if self.location is None:
            return f"{self.severity}: {self.message}"
        loc = self.location
        head = f"{loc}: {self.severity}: {self.message}"
        if not loc.text:
            return head
        from .textio import shorten_line       # long lines are cut around the column
        text, column = shorten_line(loc.text, loc.column)
        caret = " " * (max(column, 1) - 1) + "^"
        return f"{head}\n    {text}\n    {caret}"


class MechanismError(BoxchemError):
    """All errors found in a mechanism, reported together.

    ``problems`` holds every error (and, when raised under ``strict``, every
    warning) with its location.
    """

    def __init__(self, problems: list[Problem] | Problem | str):
        if isinstance(problems, str):
            problems = [Problem(problems)]
        elif isinstance(problems, Problem):
            problems = [problems]
        self.problems = list(problems)
        super().__init__(self.format())

    def format(self) -> str:
        n = len(self.problems)
        body = "\n".join(p.format() for p in self.problems)
        return body if n == 1 else f"{n} problems in mechanism:\n{body}"


class ScenarioError(BoxchemError):
    """A scenario file or a scenario override is invalid (names the key path)."""


class UnitError(BoxchemError):
    """A quantity has a missing, unknown or wrong-kind unit."""


class DataFileError(BoxchemError):
    """A spectral data file (cross section, quantum yield, spectrum) is malformed."""


@dataclass
class IntegrationError(BoxchemError):
    """The integrator failed; carries what it had computed up to the failure."""

    message: str
    time: object = None          # simulated time of the failure (datetime64 or s)
    step_size: float | None = None
    worst_species: str | None = None
    partial_result: object = field(default=None, repr=False)  # xarray.Dataset up to the failure

    def __str__(self) -> str:
        parts = [self.message]
        if self.time is not None:
            parts.append(f"at t={self.time}")
        if self.step_size is not None:
            parts.append(f"step size {self.step_size:.3g} s")
        if self.worst_species:
            parts.append(f"largest error in {self.worst_species}")
        return ", ".join(parts)
