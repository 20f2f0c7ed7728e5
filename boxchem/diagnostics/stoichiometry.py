"""Net stoichiometry matrix of a mechanism (products minus reactants).

Built once per run by the runner (written to the result as
``stoichiometry``) and, for Datasets without it, by
:func:`boxchem.diagnostics.result.stoichiometry`; one builder serves both.
"""
from __future__ import annotations

from typing import Sequence

import numpy as np

__all__ = ["net_stoichiometry_matrix"]


def net_stoichiometry_matrix(mechanism, species: Sequence[str] | None = None,
                             reaction_ids: Sequence[str] | None = None) -> np.ndarray:
    """Net coefficients nu with shape (n_species, n_reactions) [1].

    ``species`` and ``reaction_ids`` give the row and column order (default:
    the mechanism's order).  Species not listed in ``species`` are left out;
    every id in ``reaction_ids`` must be a reaction of ``mechanism``.  M and
    hv are never terms in the data model, so they never appear.
    """
    names = list(mechanism.species_names if species is None else species)
    index = {name: i for i, name in enumerate(names)}
    by_id = {r.id: r for r in mechanism.reactions}
    ids = list(mechanism.reaction_ids if reaction_ids is None else reaction_ids)
    nu = np.zeros((len(names), len(ids)))
    for j, rid in enumerate(ids):  # built once per run or per call, not a hot path
        reaction = by_id[rid]
        for term in reaction.reactants:
            if term.species in index:
                nu[index[term.species], j] -= term.coefficient
        for term in reaction.products:
            if term.species in index:
                nu[index[term.species], j] += term.coefficient
    return nu
