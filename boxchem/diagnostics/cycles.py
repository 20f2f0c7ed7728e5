"""Catalytic-cycle rates from a run's reaction rates.

A cycle (``dimer destroys Ox = 2*j_dimer``) destroys its family at
``sum_r c_r R_r`` [cm-3 s-1], with ``R_r`` the rate of reaction ``r``; done
as one matrix product over all output times.
"""
from __future__ import annotations

import numpy as np

__all__ = ["cycle_coefficient_matrix", "cycle_rate", "cycle_description", "KNOWN_CYCLE_LABELS"]


def cycle_coefficient_matrix(mechanism) -> np.ndarray:
    """Coefficients C with shape (n_reactions, n_cycles): reactions in mechanism order."""
    index = {rid: i for i, rid in enumerate(mechanism.reaction_ids)}
    coefficients = np.zeros((len(index), len(mechanism.cycles)))
    for j, cycle in enumerate(mechanism.cycles):
        for rid, c in cycle.terms.items():
            coefficients[index[rid], j] = float(c)
    return coefficients


def cycle_rate(reaction_rate: np.ndarray, coefficients: np.ndarray) -> np.ndarray:
    """Rate at which each cycle destroys its family [cm-3 s-1], shape ``(..., n_cycles)``.

    ``reaction_rate`` [cm-3 s-1] has reactions on its last axis (mechanism order).
    """
    return np.asarray(reaction_rate, float) @ coefficients


#: readable labels of well-known catalytic cycles, by the cycle names the shipped
#: mechanism uses (the mechanism language has no description field yet; a
#: ``description`` attribute on a Cycle, when the parser gives one, wins)
KNOWN_CYCLE_LABELS = {
    "chapman": "O + O3 (Chapman)", "clo_dimer": "ClO + ClO (dimer)", "clo_bro": "ClO + BrO",
    "clo_o": "ClO + O", "clo_ho2": "ClO + HO2", "bro_ho2": "BrO + HO2", "bro_o": "BrO + O",
    "bro_bro": "BrO + BrO", "nox": "NOx (NO2 + O)", "hox": "HOx (HO2 + O3, HO2 + O, H + O3)",
}


def cycle_description(cycle, mechanism=None) -> str:
    """A reader's label of a cycle: its own description, a known label, or its steps' reactants."""
    own = getattr(cycle, "description", "") or ""
    if own:
        return own
    if cycle.name in KNOWN_CYCLE_LABELS:
        return KNOWN_CYCLE_LABELS[cycle.name]
    if mechanism is not None:
        by_id = {r.id: r for r in mechanism.reactions}
        steps = [" + ".join(t.species for t in by_id[r].reactants) + (" + hv" if by_id[r].photolysis else "")
                 for r in cycle.terms if r in by_id]
        if steps:
            return " / ".join(dict.fromkeys(steps))
    return cycle.name
