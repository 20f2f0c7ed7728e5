"""Mechanism language: text -> Mechanism, validation and rate laws.

Public API: :func:`parse_mechanism`, :func:`load_mechanism`, the data model
(:class:`Mechanism`, :class:`Species`, :class:`Reaction`, :class:`Term`,
:class:`Family`, :class:`Cycle`) and :class:`RateEvaluator`.
"""
from __future__ import annotations

from .model import Cycle, Family, Mechanism, Reaction, Species, Term
from .parser import load_mechanism, parse_mechanism

__all__ = ["parse_mechanism", "load_mechanism", "Mechanism", "Species", "Reaction", "Term",
           "Family", "Cycle", "RateEvaluator"]


def __getattr__(name: str):
    if name == "RateEvaluator":
        from .ratelaws import RateEvaluator
        return RateEvaluator
    raise AttributeError(f"module 'boxchem.mechanism' has no attribute {name!r}")
