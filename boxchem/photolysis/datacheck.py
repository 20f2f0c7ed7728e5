"""The data files a mechanism names (``data=``, ``qy=``), checked when it is read.

A missing or unreadable file is an error at the key's column, also on a line
that gives ``l m n`` (those are used only with ``method = "parametric"``);
the data file's own message (file:line: found; expected) is part of it.  A
user spectrum that covers only part of the shipped one gives a warning that
says what was spliced (or left out, under ``outside=zero``) - or an error
under ``outside=error`` (:mod:`boxchem.photolysis.splice`).  Shipped data
sets are only looked up by name here (they are checked by the test suite).
"""
from __future__ import annotations

from dataclasses import replace

from ..errors import DataFileError, Problem

__all__ = ["photolysis_file_problems"]


def _at_key(reaction, key: str):
    """The reaction's location moved to the column of ``key=`` on its line."""
    loc = reaction.location
    if loc is None:
        return None
    col = loc.text.find(f"{key}=")
    return replace(loc, column=col + 1) if col >= 0 else loc


def _is_shipped_name(value: str, kind: str) -> bool:
    from pathlib import Path
    from .crosssections import DATA_DIR
    looks_like_path = Path(value).suffix != "" or "/" in value or "\\" in value
    return not looks_like_path and (DATA_DIR / kind / f"{value}.csv").is_file()


def photolysis_file_problems(mechanism) -> list[Problem]:
    """Errors and warnings (Problems at the data=/qy=/outside= column) for every photolysis line."""
    from .crosssections import quantum_yield_data
    from .splice import OUTSIDE_CHOICES, reaction_cross_section

    problems: list[Problem] = []
    for r in mechanism.reactions:
        if r.law != "photolysis":
            continue
        outside = r.parameters.get("outside")
        if outside is not None and outside not in OUTSIDE_CHOICES:
            problems.append(Problem(f"reaction {r.id!r}: outside={outside!r}; valid: "
                                    f"{', '.join(OUTSIDE_CHOICES)} (what J uses beyond the "
                                    f"wavelength range of a data= file)", _at_key(r, "outside")))
            continue
        data = r.parameters.get("data")
        if data is not None and not _is_shipped_name(str(data), "cross_sections"):
            try:
                _, note = reaction_cross_section(r)
            except DataFileError as exc:
                problems.append(Problem(f"reaction {r.id!r}: data={data}: {exc}", _at_key(r, "data")))
            else:
                if note:
                    problems.append(Problem(f"reaction {r.id!r}: {note}", _at_key(r, "data"),
                                            severity="warning"))
        qy = r.parameters.get("qy")
        if isinstance(qy, str) and not _is_shipped_name(qy, "quantum_yields"):
            try:
                quantum_yield_data(qy)
            except DataFileError as exc:
                problems.append(Problem(f"reaction {r.id!r}: qy={qy}: {exc}", _at_key(r, "qy")))
    return problems
