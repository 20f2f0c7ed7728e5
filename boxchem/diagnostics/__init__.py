"""Diagnostics computed from a run's arrays: family densities, cycle rates,
budgets, ozone loss by cycle and radical partitioning.

Importing this package registers the ``ds.boxchem`` Dataset accessor.
"""
from . import accessor as _accessor  # noqa: F401  (registers ds.boxchem)
from .cycles import cycle_coefficient_matrix, cycle_rate
from .families import family_number_density, family_weight_matrix
from .stoichiometry import net_stoichiometry_matrix

__all__ = ["family_weight_matrix", "family_number_density",
           "cycle_coefficient_matrix", "cycle_rate", "net_stoichiometry_matrix"]
