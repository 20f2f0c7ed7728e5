"""Chemical formulas: ``"ClONO2"`` -> ``{"Cl": 1, "O": 3, "N": 1}``, and molar masses.

A formula is a run of element symbols (an upper-case letter, optionally one
lower-case letter) each followed by an optional atom count, e.g. ``CF2Cl2``,
``HO2NO2``, ``CH3O2``.  Parentheses and charges are not part of the mechanism
language.  Only symbols that are chemical elements count, so names such as
``O1D`` or ``NOx`` are not formulas (a species so named needs ``formula=`` or
``lumped``).
"""
from __future__ import annotations

import re
from typing import Mapping

#: Standard atomic weights [g mol-1], abridged to five significant figures,
#: from the IUPAC Commission on Isotopic Abundances and Atomic Weights
#: (Prohaska et al., 2022, "Standard atomic weights of the elements 2021",
#: Pure Appl. Chem. 94, 573-600, doi:10.1515/pac-2019-0603); values recalled
#: from memory.  Elements with no standard atomic weight are left out.
ATOMIC_WEIGHTS: Mapping[str, float] = {
    "H": 1.008, "He": 4.0026, "Li": 6.94, "Be": 9.0122, "B": 10.81,
    "C": 12.011, "N": 14.007, "O": 15.999, "F": 18.998, "Ne": 20.180,
    "Na": 22.990, "Mg": 24.305, "Al": 26.982, "Si": 28.085, "P": 30.974,
    "S": 32.06, "Cl": 35.45, "Ar": 39.95, "K": 39.098, "Ca": 40.078,
    "Sc": 44.956, "Ti": 47.867, "V": 50.942, "Cr": 51.996, "Mn": 54.938,
    "Fe": 55.845, "Co": 58.933, "Ni": 58.693, "Cu": 63.546, "Zn": 65.38,
    "Ga": 69.723, "Ge": 72.630, "As": 74.922, "Se": 78.971, "Br": 79.904,
    "Kr": 83.798, "Rb": 85.468, "Sr": 87.62, "Y": 88.906, "Zr": 91.224,
    "Nb": 92.906, "Mo": 95.95, "Ru": 101.07, "Rh": 102.91, "Pd": 106.42,
    "Ag": 107.87, "Cd": 112.41, "In": 114.82, "Sn": 118.71, "Sb": 121.76,
    "Te": 127.60, "I": 126.90, "Xe": 131.29, "Cs": 132.91, "Ba": 137.33,
    "Hg": 200.59, "Pb": 207.2,
}

_ATOM = re.compile(r"([A-Z][a-z]?)(\d*)")


class FormulaError(ValueError):
    """Text that is not a chemical formula; the message says why."""


def parse_formula(text: str) -> dict[str, int]:
    """Element counts of a formula such as ``"ClONO2"`` (raises FormulaError).

    Repeated elements add up (``"CH3O2"`` -> C 1, H 3, O 2).  Counts must be
    whole numbers of at least 1.
    """
    if not text:
        raise FormulaError("empty formula")
    counts: dict[str, int] = {}
    pos = 0
    while pos < len(text):
        m = _ATOM.match(text, pos)
        if m is None:
            raise FormulaError(f"{text!r} is not a chemical formula: unexpected {text[pos]!r} "
                               f"at position {pos + 1} (expected an element symbol such as Cl or O)")
        symbol, digits = m.group(1), m.group(2)
        if symbol not in ATOMIC_WEIGHTS:
            raise FormulaError(f"{text!r} is not a chemical formula: {symbol!r} is not an element symbol")
        count = int(digits) if digits else 1
        if count < 1 or (digits and digits[0] == "0"):
            raise FormulaError(f"{text!r} is not a chemical formula: bad atom count {digits!r} after {symbol}")
        counts[symbol] = counts.get(symbol, 0) + count
        pos = m.end()
    return counts


def molar_mass(formula: Mapping[str, int]) -> float:
    """Molar mass [g mol-1] of element counts, from IUPAC standard atomic weights."""
    try:
        return float(sum(ATOMIC_WEIGHTS[el] * n for el, n in formula.items()))
    except KeyError as exc:
        raise FormulaError(f"unknown element {exc.args[0]!r}") from None


def is_element(symbol: str) -> bool:
    """True for a chemical element symbol with a standard atomic weight."""
    return symbol in ATOMIC_WEIGHTS
