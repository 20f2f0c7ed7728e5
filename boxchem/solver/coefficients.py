"""Rate coefficients of every reaction at a time of the run, from the box's environment.

``RateCoefficientModel(t)`` returns ``(k, fixed)``: k [s-1, cm3 s-1, cm6 s-1
by order] in mechanism reaction order and the fixed-species number densities
[cm-3] in ``CompiledKinetics.fixed_species`` order.  It combines

* thermal k(T, [M]) from ``RateEvaluator.thermal``.  A constant environment
  evaluates them once.  When T or [M] drift (time series), k is carried from
  the last full evaluation at (T0, [M]0) by the first-order expansion of
  ln k,  k = k0 exp(a (T - T0) + b ln([M]/[M]0)),  a = d ln k/dT and
  b = d ln k/d ln[M] from one-sided differences; a full evaluation is made
  again when |T - T0| > THERMAL_REFRESH_K or |ln([M]/[M]0)| >
  THERMAL_REFRESH_LOG_AIR.  The neglected second-order term is at most
  ~(E/R) (T - T0)^2 / T^3 ~ 3e-5 relative for E/R = 3000 K, T = 190 K and
  0.2 K (Taylor expansion; common practice, no source), below the solver's
  rtol; a thermal evaluation costs as much as a solver step, so this removes
  most of the rate-law work from runs with slowly drifting temperature.
* surface k = gamma v S / 4 (``RateEvaluator.surface``): linear in the
  surface areas and proportional to sqrt(T), so the model keeps k per unit
  PSC and sulfate area at T0 and scales exactly by sqrt(T/T0).
* J from ``photolysis_rates(sza, ozone_column, T, distance_factor)`` (a
  :class:`boxchem.photolysis.PhotolysisRates`; any callable with that
  signature, so the spectral J table plugs in the same way as the ``l m n``
  form), evaluated at every call while the sun is above the box's horizon
  and skipped (J = 0 by the photolysis contract) below it.
* the ``[scale]`` multipliers of the scenario (reaction id -> factor).
"""
from __future__ import annotations

import difflib

import numpy as np

from ..errors import ScenarioError
from .kinetics import CompiledKinetics

__all__ = ["RateCoefficientModel", "THERMAL_REFRESH_K", "THERMAL_REFRESH_LOG_AIR"]

#: full re-evaluation of thermal/surface k when T moved by more than this [K]
THERMAL_REFRESH_K = 0.2
#: ... or ln([M]) by more than this [1]
THERMAL_REFRESH_LOG_AIR = 0.002
_DT_K = 0.01      # difference step for d ln k / dT [K]
_DLNM = 1e-4      # relative difference step for d ln k / d ln[M]


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
        self._thermal_ref = None        # (T0, M0, k0, dlnk/dT or None, dlnk/dlnM or None)
        self._surface_ref = None        # (T0, k per unit PSC area, k per unit sulfate area)
        self.thermal_evaluations = 0

    def _thermal_k(self, T: float, air: float) -> np.ndarray:
        ref = self._thermal_ref
        if ref is not None:
            T0, M0, k0, a, b = ref
            if T == T0 and air == M0:
                return k0
            dlnm = np.log(air / M0)
            if abs(T - T0) <= THERMAL_REFRESH_K and abs(dlnm) <= THERMAL_REFRESH_LOG_AIR:
                if a is None:
                    a, b = self._log_derivatives(T0, M0, k0)
                    self._thermal_ref = (T0, M0, k0, a, b)
                return k0 * np.exp(a * (T - T0) + b * dlnm)
        k0 = np.asarray(self.evaluator.thermal(T, air), dtype=float)
        self.thermal_evaluations += 1
        self._thermal_ref = (T, air, k0, None, None)
        return k0

    def _log_derivatives(self, T0, M0, k0):
        """d ln k / dT [K-1] and d ln k / d ln[M] [1] by one-sided differences."""
        kT = np.asarray(self.evaluator.thermal(T0 + _DT_K, M0), dtype=float)
        kM = np.asarray(self.evaluator.thermal(T0, M0 * (1.0 + _DLNM)), dtype=float)
        self.thermal_evaluations += 2
        positive = k0 > 0
        safe = np.where(positive, k0, 1.0)
        a = np.where(positive, np.log(np.where(kT > 0, kT, safe) / safe) / _DT_K, 0.0)
        b = np.where(positive, np.log(np.where(kM > 0, kM, safe) / safe) / np.log1p(_DLNM), 0.0)
        return a, b

    def _surface_k(self, T: float, psc: float, sulfate: float) -> np.ndarray:
        ref = self._surface_ref
        if ref is None or abs(T - ref[0]) > THERMAL_REFRESH_K:
            per_psc = np.asarray(self.evaluator.surface(T, 1.0, 0.0), dtype=float)
            per_sulfate = np.asarray(self.evaluator.surface(T, 0.0, 1.0), dtype=float)
            ref = self._surface_ref = (T, per_psc, per_sulfate)
        T0, per_psc, per_sulfate = ref
        # k = gamma v S / 4 with v ~ sqrt(T): exact rescaling (mean molecular speed)
        return np.sqrt(T / T0) * (psc * per_psc + sulfate * per_sulfate)

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
