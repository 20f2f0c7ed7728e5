"""Rate coefficients of every reaction at a time of the run, from the box's environment.

``RateCoefficientModel(t)`` returns ``(k, fixed)``: k [s-1, cm3 s-1, cm6 s-1
by order] in mechanism reaction order and the fixed-species number densities
[cm-3] in ``CompiledKinetics.fixed_species`` order.  It combines

* thermal k(T, [M]) from ``RateEvaluator.thermal``, recomputed only when T or
  [M] change (a constant-environment run evaluates them once);
* surface k(T, PSC area, sulfate area) from ``RateEvaluator.surface``, also
  cached on its inputs;
* J from ``photolysis_rates(sza, ozone_column, T, distance_factor)`` (a
  :class:`boxchem.photolysis.PhotolysisRates`; any callable with that
  signature, so the spectral J table plugs in the same way as the ``l m n``
  form), evaluated at every call because the sun moves;
* the ``[scale]`` multipliers of the scenario (reaction id -> factor).
"""
from __future__ import annotations

import difflib

import numpy as np

from ..errors import ScenarioError
from .kinetics import CompiledKinetics

__all__ = ["RateCoefficientModel"]


class RateCoefficientModel:
    """k(t) and fixed densities(t) for the integrator.

    Parameters
    ----------
    mechanism : Mechanism
    evaluator : RateEvaluator or None (built from ``mechanism`` when None)
    photolysis_rates : callable(sza_deg, ozone_column_DU, temperature_K, distance_factor)
        -> J [s-1] of shape ``(n_reactions,)``, or None when the mechanism has
        no photolysis reaction
    environment : object with ``at(t_s)`` -> EnvironmentState
    scale : mapping reaction id -> multiplier [1], optional
    fixed_mole_fractions : mapping fixed species -> mole fraction [1], for fixed
        species whose mechanism declaration gives none (e.g. H2O from a scenario)
    kinetics : CompiledKinetics, optional (sets the order of the fixed species)
    """

    def __init__(self, mechanism, evaluator, photolysis_rates, environment, scale=None,
                 fixed_mole_fractions=None, kinetics: CompiledKinetics | None = None):
        if evaluator is None:
            from ..mechanism.ratelaws import RateEvaluator
            evaluator = RateEvaluator(mechanism)
        self.mechanism = mechanism
        self.evaluator = evaluator
        self.photolysis_rates = photolysis_rates
        self.environment = environment
        self.kinetics = kinetics if kinetics is not None else CompiledKinetics(mechanism)
        self.fixed_mole_fractions = dict(fixed_mole_fractions or {})
        ids = tuple(r.id for r in mechanism.reactions)
        self.multiplier = np.ones(len(ids))
        position = {rid: i for i, rid in enumerate(ids)}
        for rid, factor in dict(scale or {}).items():
            if rid not in position:
                close = difflib.get_close_matches(str(rid), ids, n=3)
                hint = f" - did you mean {', '.join(repr(c) for c in close)}?" if close else ""
                raise ScenarioError(f"scale.{rid}: no reaction '{rid}' in the mechanism{hint} "
                                    f"(valid: a reaction id of the mechanism, e.g. '{ids[0]}')")
            factor = float(factor)
            if not np.isfinite(factor) or factor < 0:
                raise ScenarioError(f"scale.{rid}: got {factor!r}; valid: a finite factor >= 0")
            self.multiplier[position[rid]] = factor
        self._photolysis_mask = np.array([r.law == "photolysis" for r in mechanism.reactions])
        if self._photolysis_mask.any() and photolysis_rates is None:
            raise ValueError("photolysis_rates: the mechanism has photolysis reactions; "
                             "give a PhotolysisRates (or a callable with its signature)")
        # fixed densities are linear in [M]: fixed = [M] * fractions
        self._fixed_per_air = self.kinetics.fixed_number_densities(1.0, self.fixed_mole_fractions)
        self._thermal_key = None
        self._thermal = None
        self._surface_key = None
        self._surface = None
        self.thermal_evaluations = 0

    def __call__(self, t_seconds):
        """(k [n_reactions], fixed [n_fixed]) at ``t_seconds`` [s since the run start]."""
        state = self.environment.at(float(t_seconds))
        T = float(state.temperature)
        air = float(state.air_density)
        key = (T, air)
        if key != self._thermal_key:
            self._thermal = np.asarray(self.evaluator.thermal(T, air), dtype=float)
            self._thermal_key = key
            self.thermal_evaluations += 1
        skey = (T, float(state.psc_area), float(state.sulfate_area))
        if skey != self._surface_key:
            self._surface = np.asarray(self.evaluator.surface(*skey), dtype=float)
            self._surface_key = skey
        k = self._thermal + self._surface
        if self.photolysis_rates is not None:
            j = np.asarray(self.photolysis_rates(state.solar_zenith_angle, state.ozone_column, T,
                                                 state.distance_factor), dtype=float)
            k = k + np.where(self._photolysis_mask, j, 0.0)
        return k * self.multiplier, air * self._fixed_per_air
