"""Catalytic-cycle rates from a run's reaction rates.

A cycle (``dimer destroys Ox = 2*j_dimer``) destroys its family at
``sum_r c_r R_r`` [cm-3 s-1], with ``R_r`` the rate of reaction ``r``; done
as one matrix product over all output times.
"""
from __future__ import annotations

import numpy as np

__all__ = ["cycle_coefficient_matrix", "cycle_rate"]


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
