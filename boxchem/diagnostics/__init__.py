"""Diagnostics computed from a run's arrays: family densities, cycle rates."""
from .cycles import cycle_coefficient_matrix, cycle_rate
from .families import family_number_density, family_weight_matrix

__all__ = ["family_weight_matrix", "family_number_density",
           "cycle_coefficient_matrix", "cycle_rate"]
