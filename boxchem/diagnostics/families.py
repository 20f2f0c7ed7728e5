"""Family number densities from a run's species number densities.

A family (``Ox = O3 + O + O1D``, ``Cly = atoms(Cl)``) is a weighted sum of
species; its number density is ``n_family = sum_i w_i n_i`` [cm-3], done as
one matrix product over all output times.
"""
from __future__ import annotations

from typing import Sequence

import numpy as np

__all__ = ["family_weight_matrix", "family_number_density"]


def family_weight_matrix(mechanism, species: Sequence[str] | None = None) -> np.ndarray:
    """Weights W with shape (n_species, n_families) [1], families in mechanism order.

    ``species`` gives the row order (default: the mechanism's); members not
    listed there are left out.
    """
    names = mechanism.species_names if species is None else species
    index = {name: i for i, name in enumerate(names)}
    weights = np.zeros((len(index), len(mechanism.families)))
    for j, family in enumerate(mechanism.families):
        for name, w in family.members.items():
            if name in index:
                weights[index[name], j] = float(w)
    return weights


def family_number_density(number_density: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Family number densities [cm-3], shape ``(..., n_families)``.

    ``number_density`` [cm-3] has species on its last axis (mechanism order).
    """
    return np.asarray(number_density, float) @ weights
