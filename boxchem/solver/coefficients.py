"""Rate coefficients of every reaction at a time of the run, from the box's environment.

``RateCoefficientModel(t)`` returns ``(k, fixed)``: k [s-1, cm3 s-1, cm6 s-1
by order] in mechanism reaction order and the fixed-species number densities
[cm-3] in ``CompiledKinetics.fixed_species`` order.  It combines

* thermal k(T, [M]) from ``RateEvaluator.thermal``.  A constant environment
  evaluates them once.  When T or [M] drift (time series), ln k is
  interpolated bilinearly in (T, ln[M]) between exact evaluations on a grid
  of nodes spaced THERMAL_GRID_K and THERMAL_GRID_LOG_AIR, anchored at the
  first state evaluated (the run start); nodes are evaluated once and cached.
  k(t) is thus a continuous, deterministic function of the environment.  The
  interpolation error is at most (dT^2/8) d2(ln k)/dT2 ~ 2(E/R)/T^3 dT^2/8
  ~ 4e-6 relative for E/R = 3000 K, T = 190 K, dT = 0.2 K (linear
  interpolation error bound; common practice, no source), far below the
  solver's rtol, while a thermal evaluation (as costly as a solver step) is
  made only when the air moves into a new grid cell.
* surface k = gamma v S / 4 (``RateEvaluator.surface``): linear in the
  surface areas and proportional to sqrt(T) through the mean molecular speed,
  so the model keeps k per unit PSC and sulfate area at the first state and
  scales exactly by sqrt(T/T0).
* J from ``photolysis_rates(sza, ozone_column, T, distance_factor)`` (a
  :class:`boxchem.photolysis.PhotolysisRates`; any callable with that
  signature, so the spectral J table plugs in the same way as the ``l m n``
  form), evaluated at every call while the sun is above the box's horizon
  and skipped (J = 0 by the photolysis contract) below it.
* the ``[scale]`` multipliers of the scenario (reaction id -> factor).
"""
from __future__ import annotations

import difflib
import math

import numpy as np

from ..errors import ScenarioError
from .kinetics import CompiledKinetics

__all__ = ["RateCoefficientModel", "THERMAL_GRID_K", "THERMAL_GRID_LOG_AIR"]

#: node spacing of the thermal-k interpolation grid in T [K] ...
THERMAL_GRID_K = 0.2
#: ... and in ln([M]) [1]
THERMAL_GRID_LOG_AIR = 0.002
_MAX_NODES = 4096  # cache bound (a long trajectory run visits a few hundred cells)


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
        self._anchor = None             # (T0, ln M0) of the first state
        self._nodes: dict = {}
        self._last_thermal = None       # ((T, [M]), k) of the last call          # (i, j) -> ln k at T0 + i dT, ln M0 + j dlnM
        self._surface_ref = None        # (T0, k per unit PSC area, k per unit sulfate area)
        self.thermal_evaluations = 0

    def _node(self, i: int, j: int) -> np.ndarray:
        log_k = self._nodes.get((i, j))
        if log_k is None:
            T0, lnm0 = self._anchor
            k = np.asarray(self.evaluator.thermal(T0 + i * THERMAL_GRID_K,
                                                  np.exp(lnm0 + j * THERMAL_GRID_LOG_AIR)), dtype=float)
            self.thermal_evaluations += 1
            with np.errstate(divide="ignore"):
                log_k = np.log(k)      # k = 0 columns (photolysis, surface) give -inf
            if len(self._nodes) >= _MAX_NODES:
                self._nodes.clear()
            self._nodes[(i, j)] = log_k
        return log_k

    def _thermal_k(self, T: float, air: float) -> np.ndarray:
        if self._last_thermal is not None and self._last_thermal[0] == (T, air):
            return self._last_thermal[1]
        k = self._interpolated_thermal_k(T, air)
        self._last_thermal = ((T, air), k)
        return k

    def _interpolated_thermal_k(self, T: float, air: float) -> np.ndarray:
        lnm = math.log(air)
        if self._anchor is None:
            self._anchor = (T, lnm)
        x = (T - self._anchor[0]) / THERMAL_GRID_K
        z = (lnm - self._anchor[1]) / THERMAL_GRID_LOG_AIR
        i, j = math.floor(x), math.floor(z)
        wx, wz = x - i, z - j
        log_k = 0.0
        for di, w1 in ((0, 1.0 - wx), (1, wx)):
            for dj, w2 in ((0, 1.0 - wz), (1, wz)):
                w = w1 * w2
                if w != 0.0:   # nodes of zero weight are never evaluated
                    log_k = log_k + w * self._node(i + di, j + dj)
        return np.exp(log_k)

    def _surface_k(self, T: float, psc: float, sulfate: float) -> np.ndarray:
        if self._surface_ref is None:
            per_psc = np.asarray(self.evaluator.surface(T, 1.0, 0.0), dtype=float)
            per_sulfate = np.asarray(self.evaluator.surface(T, 0.0, 1.0), dtype=float)
            self._surface_ref = (T, per_psc, per_sulfate)
        T0, per_psc, per_sulfate = self._surface_ref
        # k = gamma v S / 4 with v ~ sqrt(T): exact rescaling (mean molecular speed)
        return np.sqrt(T / T0) * (psc * per_psc + sulfate * per_sulfate)

    def air_density(self, times_s) -> np.ndarray:
        """Air number density [M] [cm-3] at ``times_s`` [s since the run start] (array).

        The time loop takes d ln[M]/dt from these values at its stop times
        (number densities follow the expanding or compressed air; see
        ``timeloop``).  [M] is continuous in time, so, unlike k, no side of a
        breakpoint needs choosing.
        """
        times = np.asarray(times_s, dtype=float)
        return np.asarray(self.environment.at(times).air_density, dtype=float).reshape(times.shape)

    def __call__(self, t_seconds):
        """(k [n_reactions], fixed [n_fixed]) at ``t_seconds`` [s since the run start]."""
        state = self.environment.at(float(t_seconds))
        T = float(state.temperature)
        air = float(state.air_density)
        k = self._thermal_k(T, air) + self._surface_k(T, float(state.psc_area),
                                                       float(state.sulfate_area))
        if self.photolysis_rates is not None and \
                float(state.solar_zenith_angle) < float(state.horizon_zenith_angle):
            j = np.asarray(self.photolysis_rates(state.solar_zenith_angle, state.ozone_column, T,
                                                 state.distance_factor), dtype=float)
            k = k + np.where(self._photolysis_mask, j, 0.0)
        return k * self.multiplier, air * self._fixed_per_air
