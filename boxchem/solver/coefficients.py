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
  so the model keeps k per unit PSC, sulfate and ice area at the first state and
  scales exactly by sqrt(T/T0).
* J from ``photolysis_rates(sza, ozone_column, T, distance_factor)`` (a
  :class:`boxchem.photolysis.PhotolysisRates`; any callable with that
  signature, so the spectral J table plugs in the same way as the ``l m n``
  form), evaluated at every call while the sun is above the box's horizon
  and skipped (J = 0 by the photolysis contract) below it.
* the ``[scale]`` multipliers of the scenario (reaction id -> factor).

State-dependent surfaces (docs/heterogeneous.md): ``uptake`` lines with
``gamma_from=`` read the partial pressures of H2O, HCl and ClONO2, and the
NAT/ice area rules of ``environment/psc.py`` read HNO3 and H2O.  The time
loop calls :meth:`RateCoefficientModel.observe_state` with the start state and
the state at every output time; k(t) then uses the composition last observed
(lagged by at most one output interval, piecewise constant in time), so k(t)
stays a deterministic function of t between observations and the compiled
loop rebuilds its table from the observation time on.  A new composition is
recorded only when a watched mole fraction has moved by more than
SURFACE_REFRESH_TOLERANCE (1 %; ClONO2, which enters only through the
HCl-depletion factor: 20 %) since the last record.  ``uptake`` lines are
evaluated exactly (cached on their conditions), not scaled by sqrt(T).
"""
from __future__ import annotations

import difflib
import functools
import math
from dataclasses import dataclass

import numpy as np

from ..environment.history import PscThresholdRule
from ..environment.psc import CompositionHistory
from ..errors import ScenarioError
from .kinetics import CompiledKinetics

__all__ = ["RateCoefficientModel", "THERMAL_GRID_K", "THERMAL_GRID_LOG_AIR", "IntervalTable",
           "INTERVAL_NODES", "MAX_TABLE_INTERVAL_S", "MAX_DARK_TABLE_INTERVAL_S", "J_GRID_STEP_DEG"]

#: node spacing of the thermal-k interpolation grid in T [K] ...
THERMAL_GRID_K = 0.2
#: ... and in ln([M]) [1]
THERMAL_GRID_LOG_AIR = 0.002
_MAX_NODES = 4096  # cache bound (a long trajectory run visits a few hundred cells)
#: Chebyshev-Lobatto nodes of ``interval_table`` (polynomial degree + 1)
INTERVAL_NODES = 7
#: longest interval [s] one ``interval_table`` covers (the time loop splits longer ones)
MAX_TABLE_INTERVAL_S = 6 * 3600.0
#: ... and while the sun is below the box's horizon (J = 0): only the smooth thermal k
#: and fixed densities are interpolated there, between knots of the environment's series
MAX_DARK_TABLE_INTERVAL_S = 24 * 3600.0
#: SZA spacing [deg] of the per-interval ln J grid for J that is not from a J table
J_GRID_STEP_DEG = 0.02
#: observe_state records a new composition only when a watched mole fraction moved by more
#: than this fraction of its recorded value (or of SURFACE_REFRESH_FLOOR) - gammas and areas
#: depend smoothly on them, and each record costs a table rebuild (docs/heterogeneous.md)
SURFACE_REFRESH_TOLERANCE = 0.01
#: the same for ClONO2, which enters only through the HCl-depletion factor (module docstring)
SURFACE_REFRESH_TOLERANCE_CLONO2 = 0.2
#: mole fraction [mol mol-1] below which changes do not count (0.1 pptv)
SURFACE_REFRESH_FLOOR = 1e-13


@dataclass(frozen=True)
class IntervalTable:
    """k(t) and fixed(t) on one stop interval [t_a, t_b] for the compiled time loop.

    ``poly`` (INTERVAL_NODES, n_reactions + n_fixed): power-series coefficients in
    s = 2 (t - t_a)/(t_b - t_a) - 1 of ln v where ``log_col`` is 1 (v > 0 at every
    node), else of v, for the non-photolysis k (after ``[scale]``) and the fixed
    densities; ``sza_poly`` the same for the solar zenith angle [deg];
    ``lnj`` (n_grid, n_photolysis) ln J [s-1] on the SZA grid ``sgrid`` [deg]
    for the columns ``phot_cols`` (J = exp of the piecewise-linear ln J at the
    SZA of t; exactly 0 at SZA >= ``horizon``).  See ``interval_table``.
    """

    t_a: float
    t_b: float
    poly: np.ndarray
    log_col: np.ndarray
    sza_poly: np.ndarray
    sgrid: np.ndarray
    lnj: np.ndarray
    phot_cols: np.ndarray
    horizon: float
    n_reactions: int

    def __call__(self, t):
        """(k, fixed) at ``t`` [s], from the table (numpy; the compiled loop has its own)."""
        s = 2.0 * (float(t) - self.t_a) / (self.t_b - self.t_a) - 1.0
        v = np.polynomial.polynomial.polyval(s, self.poly)
        out = np.where(self.log_col.astype(bool), np.exp(v), np.maximum(v, 0.0))
        if self.sgrid.size:
            z = float(np.polynomial.polynomial.polyval(s, self.sza_poly))
            if z < self.horizon:
                out[self.phot_cols] += np.exp(_interp_rows(z, self.sgrid, self.lnj))
        return out[:self.n_reactions], out[self.n_reactions:]


def _interp_rows(x: float, grid: np.ndarray, table: np.ndarray) -> np.ndarray:
    """Every column of ``table`` (n_grid, n_columns) linearly interpolated at ``x``.

    The same values as ``np.interp(x, grid, column)`` for each column (end values
    held outside the grid), in one array expression instead of a loop over columns.
    """
    if grid.size == 1 or x <= grid[0]:
        return table[0]
    if x >= grid[-1]:
        return table[-1]
    i = int(np.searchsorted(grid, x, side="right"))
    w = (x - grid[i - 1]) / (grid[i] - grid[i - 1])
    return table[i - 1] + w * (table[i] - table[i - 1])


@functools.lru_cache(maxsize=8)
def _lobatto_inverse_vandermonde(n: int) -> np.ndarray:
    """Inverse Vandermonde matrix of the n Chebyshev-Lobatto nodes -cos(pi j/(n-1)) in [-1, 1]
    (node values -> power-series coefficients; well conditioned for small n)."""
    s = -np.cos(np.pi * np.arange(n) / (n - 1))
    return np.linalg.inv(np.vander(s, n, increasing=True))


def _level_crossings(times_s, values, levels) -> np.ndarray:
    """Times [s] where a piecewise-linear series crosses any of ``levels`` (exact, per segment)."""
    t = np.asarray(times_s, dtype=float)
    v = np.asarray(values, dtype=float)
    out = []
    for level in levels:
        d = v - level
        seg = np.nonzero(d[:-1] * d[1:] < 0.0)[0]          # strict sign change within a segment
        out.append(t[seg] + (t[seg + 1] - t[seg]) * d[seg] / (d[seg] - d[seg + 1]))
    return np.concatenate(out) if out else np.zeros(0)


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
        self._phot_cols = np.nonzero(self._photolysis_mask)[0].astype(np.int64)
        # interval tables take ln J on the J table's own SZA nodes when every J is
        # spectral (ln J is then piecewise linear there), else on a fine fixed grid
        table = getattr(photolysis_rates, "table", None)
        sources = getattr(photolysis_rates, "source", {}) or {}
        self._table_sza_grid = (np.asarray(table.sza_deg, dtype=float)
                                if table is not None and all(sources.get(mechanism.reactions[c].id)
                                                             == "spectral" for c in self._phot_cols)
                                else None)
        # fixed densities are linear in [M]: fixed = [M] * fractions
        self._fixed_per_air = self.kinetics.fixed_number_densities(1.0, self.fixed_mole_fractions)
        self._anchor = None             # (T0, ln M0) of the first state
        self._nodes: dict = {}          # (i, j) -> ln k at T0 + i dT, ln M0 + j dlnM
        self._last_thermal = None       # ((T, [M]), k) of the last call
        self._surface_ref = None        # (T0, k per unit PSC, sulfate and ice area)
        self._surface_cache = (None, None)   # (conditions, k) of the last exact surface evaluation
        self._last_observed = None           # (t, mole fractions) of the last record
        self.thermal_evaluations = 0
        # composition the state-dependent surfaces read (module docstring)
        from ..mechanism.ratelaws import SURFACE_STATE_SPECIES
        self._exact_surface = bool(getattr(evaluator, "temperature_dependent_gamma", False))
        gamma_species = SURFACE_STATE_SPECIES if getattr(evaluator, "state_dependent_surface", False) else ()
        self.surface_composition = CompositionHistory(gamma_species) if gamma_species else None
        env_comp = getattr(environment, "composition", None)
        watched = sorted(set(gamma_species) | set(env_comp.species if env_comp is not None else ()))
        variable = {name: i for i, name in enumerate(self.kinetics.variable_species)}
        fixed_names = list(self.kinetics.fixed_species)
        self._watched = tuple(watched)
        self._watched_index = np.array([variable.get(n, -1) for n in watched], dtype=np.intp)
        # ClONO2 enters the sulfate gammas only through the HCl-depletion factor F_HCl
        # (Shi et al. 2001): a looser tolerance, so its diurnal swing does not force rebuilds
        self._refresh_tolerance = np.array([SURFACE_REFRESH_TOLERANCE_CLONO2 if n == "ClONO2"
                                            else SURFACE_REFRESH_TOLERANCE for n in watched])
        self._watched_fixed = np.array([self._fixed_per_air[fixed_names.index(n)] if n in fixed_names
                                        else 0.0 for n in watched])
        #: per-member state-dependent surfaces for the batch time loop (solver/statesurfaces.py):
        #: the tables then hold those columns at a reference composition (``state_reference``)
        self.state_surfaces = None
        if watched:
            from .statesurfaces import StateSurfaces
            fixed_x = dict(zip(fixed_names, self._fixed_per_air))
            surfaces = StateSurfaces(evaluator, environment, self.kinetics, fixed_x)
            self.state_surfaces = surfaces if len(surfaces) else None

    def set_surface_reference(self, y0) -> None:
        """Reference composition of the state-dependent surface columns of the tables: the
        mole fractions of number densities ``y0`` [cm-3] (variable species) at the start.
        Member independent when ``y0`` is the group's (``runner.prepare``)."""
        if self.state_surfaces is None:
            return
        air = float(self.environment.at(0.0).air_density)
        x = self.state_surfaces.mole_fractions(np.asarray(y0, dtype=float), air)
        self.state_surfaces.set_reference(dict(zip(self.state_surfaces.species, x)))

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

    @property
    def state_dependent(self) -> bool:
        """True when some surface k or area depends on the box's composition."""
        return bool(self._watched)

    def observe_state(self, t_s: float, y) -> bool:
        """Record the box's state ``y`` [cm-3] at ``t_s`` for the state-dependent surfaces.

        Returns True when k(t) from ``t_s`` on may have changed (the caller
        re-evaluates k and rebuilds interval tables), False when nothing here
        depends on the state.  See the module docstring.
        """
        if not self._watched:
            return False
        air = float(self.environment.at(float(t_s)).air_density)
        yv = np.asarray(y, dtype=float)
        x = np.where(self._watched_index >= 0, yv[self._watched_index] / air, self._watched_fixed)
        last = self._last_observed
        if last is not None and float(t_s) > last[0] and np.all(
                np.abs(x - last[1]) <= self._refresh_tolerance * np.maximum(np.abs(last[1]),
                                                                           SURFACE_REFRESH_FLOOR)):
            return False           # composition as recorded: k(t) unchanged, no table rebuild
        self._last_observed = (float(t_s), x)
        values = dict(zip(self._watched, x))
        if self.surface_composition is not None:
            self.surface_composition.record(t_s, [values[s] for s in self.surface_composition.species])
        env_comp = getattr(self.environment, "composition", None)
        if env_comp is not None:
            env_comp.record(t_s, [values[s] for s in env_comp.species])
        self._surface_cache = (None, None)
        return True

    def _surface_k(self, T: float, psc: float, sulfate: float, ice: float, pressure: float = 0.0,
                   t_s: float = 0.0) -> np.ndarray:
        if self._exact_surface:
            pp = {}
            if self.surface_composition is not None:
                pp = {s: x * pressure for s, x in self.surface_composition.at(float(t_s)).items()}
            key = (T, psc, sulfate, ice, *pp.values())
            if self._surface_cache[0] == key:
                return self._surface_cache[1]
            k = np.asarray(self.evaluator.surface(T, psc, sulfate, ice, partial_pressures=pp), dtype=float)
            self._surface_cache = (key, k)
            return k
        if self._surface_ref is None:
            per_psc = np.asarray(self.evaluator.surface(T, 1.0, 0.0, 0.0), dtype=float)
            per_sulfate = np.asarray(self.evaluator.surface(T, 0.0, 1.0, 0.0), dtype=float)
            per_ice = np.asarray(self.evaluator.surface(T, 0.0, 0.0, 1.0), dtype=float)
            self._surface_ref = (T, per_psc, per_sulfate, per_ice)
        T0, per_psc, per_sulfate, per_ice = self._surface_ref
        # k = gamma v S / 4 with v ~ sqrt(T): exact rescaling (mean molecular speed)
        return np.sqrt(T / T0) * (psc * per_psc + sulfate * per_sulfate + ice * per_ice)

    def air_density(self, times_s) -> np.ndarray:
        """Air number density [M] [cm-3] at ``times_s`` [s since the run start] (array).

        The time loop takes d ln[M]/dt from these values at its stop times
        (number densities follow the expanding or compressed air; see
        ``timeloop``).  [M] is continuous in time, so, unlike k, no side of a
        breakpoint needs choosing.
        """
        times = np.asarray(times_s, dtype=float)
        return np.asarray(self.environment.at(times).air_density, dtype=float).reshape(times.shape)

    def smoothness_breaks(self, t0: float, t1: float) -> np.ndarray:
        """Times [s] in (t0, t1) where k(t) has kinks, so ``interval_table`` windows end on them.

        These are the knots of the environment's time series (T, p, position,
        ozone, surface areas) and the times the temperature crosses the two
        kink temperatures of a surface-area threshold rule (where the area
        starts to form and where it is complete): the rule's smoothstep is
        not a polynomial across them.
        """
        env = self.environment
        knots = [np.asarray(q.times_s, dtype=float) for q in vars(env).values()
                 if hasattr(q, "times_s")]
        levels = [level for area in (env.psc_area, env.ice_area) if isinstance(area, PscThresholdRule)
                  for level in (area.threshold_K, area.threshold_K - area.width_K)]
        temperature = env.temperature
        if levels and hasattr(temperature, "times_s"):
            knots.append(_level_crossings(temperature.times_s, temperature.values, levels))
        if not knots:
            return np.zeros(0)
        k = np.unique(np.concatenate(knots))
        return k[(k > t0) & (k < t1)]

    @property
    def photolysis_columns(self) -> np.ndarray:
        """Reaction columns of the photolysis reactions (int64)."""
        return self._phot_cols

    def sunlit(self, times_s) -> np.ndarray:
        """True where the sun is above the box's horizon at ``times_s`` [s] (bool array).

        The time loop asks this at the mid-points of its windows, which end at every
        sunrise and sunset, so a window is lit or dark throughout.
        """
        times = np.asarray(times_s, dtype=float).ravel()
        if self.photolysis_rates is None or not self._phot_cols.size or times.size == 0:
            return np.zeros(times.shape, dtype=bool)
        state = self.environment.at(times)
        sza = np.broadcast_to(np.asarray(state.solar_zenith_angle, dtype=float), times.shape)
        return sza < np.broadcast_to(np.asarray(state.horizon_zenith_angle, dtype=float), times.shape)

    def interval_table(self, t_a: float, t_b: float, tau_a: float | None = None,
                       tau_b: float | None = None, state_reference: bool = False) -> IntervalTable:
        """k(t) and fixed(t) on [t_a, t_b] [s] as an :class:`IntervalTable` for the compiled loop.

        ``tau_a``, ``tau_b``: where to evaluate the interval's ends (one-sided
        at breakpoints, see ``timeloop``); default ``t_a``, ``t_b``.  The
        environment is evaluated at INTERVAL_NODES Chebyshev-Lobatto nodes
        between them (ends included, so k at the ends is exact).  The
        non-photolysis k and the fixed densities are interpolated by a
        polynomial in ln (smooth functions of T and [M]), the solar zenith
        angle by a polynomial in time.  J is not interpolated in time (it is
        not smooth there: the J table is piecewise linear in SZA): it is
        evaluated once per interval on a grid of SZA values covering the
        interval - the J table's own SZA nodes (where all J come from a table,
        on which ln J is linear between them) or a J_GRID_STEP_DEG grid
        otherwise - with the ozone column, T and distance factor of the
        interval's mid-point, and ln J is taken linearly in SZA.  Measured
        error against ``self(t)`` (benchmarks/bench_polar_run.py reports it):
        see DEVELOPERS.md, "Solver".

        ``state_reference``: the state-dependent surface columns (``state_surfaces``) hold
        k per unit area at the reference composition, whatever was observed (the batch
        time loop adds each member's own ln offset; solver/statesurfaces.py).
        """
        tau_a = float(t_a if tau_a is None else tau_a)
        tau_b = float(t_b if tau_b is None else tau_b)
        n = INTERVAL_NODES
        s_nodes = -np.cos(np.pi * np.arange(n) / (n - 1))
        taus = tau_a + 0.5 * (s_nodes + 1.0) * (tau_b - tau_a)
        state = self.environment.at(taus)
        nr = len(self.multiplier)
        values = np.empty((n, nr + len(self._fixed_per_air)))
        conditions = np.stack([state.temperature, state.air_density, state.psc_area,
                               state.sulfate_area, state.ice_area], axis=-1).astype(float)
        T, air, psc, sulfate, ice = conditions.T
        # the composition is constant over a table: it starts at the last observation
        if state_reference and self.state_surfaces is not None:
            surface = self._reference_surface_k(T, psc, sulfate, ice, state.pressure)
        else:
            surface = self._surface_k_many(T, psc, sulfate, ice, state.pressure, np.full(n, tau_a))
        values[:, :nr] = (self._thermal_k_many(T, air) + surface) * self.multiplier
        values[:, nr:] = air[:, None] * self._fixed_per_air
        positive = np.all(values > 0.0, axis=0)
        with np.errstate(divide="ignore"):
            values = np.where(positive, np.log(np.where(positive, values, 1.0)), values)
        vinv = _lobatto_inverse_vandermonde(n)
        poly = vinv @ values
        # exactly constant columns (constant environment) get exactly zero slopes, so
        # the compiled loop can skip the df/dt terms they would add
        poly[1:, np.all(values == values[0], axis=0)] = 0.0
        sza = np.asarray(state.solar_zenith_angle, dtype=float)
        sza_poly = vinv @ sza
        horizon = float(np.asarray(state.horizon_zenith_angle, dtype=float)[n // 2])
        phot_cols = self._phot_cols
        sgrid = np.zeros(0)
        lnj = np.zeros((0, phot_cols.size))
        if self.photolysis_rates is not None and phot_cols.size:
            fine = np.polynomial.polynomial.polyval(np.linspace(-1.0, 1.0, 33), sza_poly)
            lo, hi = float(min(fine.min(), sza.min())), float(max(fine.max(), sza.max()))
            top = horizon - 1e-9
            if lo < top:
                hi = min(hi, top)
                if self._table_sza_grid is not None:
                    inner = self._table_sza_grid
                else:
                    inner = np.arange(math.floor(lo / J_GRID_STEP_DEG), math.ceil(hi / J_GRID_STEP_DEG) + 1) \
                        * J_GRID_STEP_DEG
                inner = inner[(inner > lo) & (inner < hi)]
                sgrid = np.concatenate(([lo], inner, [hi])) if hi > lo else np.array([lo])
                mid = n // 2
                j = np.asarray(self.photolysis_rates(sgrid, float(state.ozone_column[mid]),
                                                     float(state.temperature[mid]),
                                                     float(state.distance_factor[mid])), dtype=float)
                j = j.reshape(sgrid.size, nr)[:, phot_cols] * self.multiplier[phot_cols]
                lnj = np.log(np.maximum(j, 1e-300))
        return IntervalTable(float(t_a), float(t_b), np.ascontiguousarray(poly),
                             positive.astype(np.int64), np.ascontiguousarray(sza_poly),
                             np.ascontiguousarray(sgrid), np.ascontiguousarray(lnj), phot_cols,
                             horizon, nr)

    def _thermal_k_many(self, T: np.ndarray, air: np.ndarray) -> np.ndarray:
        """``_thermal_k`` at many (T, [M]) at once, (n, n_reactions): the same interpolation."""
        lnm = np.log(air)
        if self._anchor is None:
            self._anchor = (float(T[0]), float(lnm[0]))
        x = (T - self._anchor[0]) / THERMAL_GRID_K
        z = (lnm - self._anchor[1]) / THERMAL_GRID_LOG_AIR
        i, j = np.floor(x).astype(np.int64), np.floor(z).astype(np.int64)
        wx, wz = x - i, z - j
        log_k = np.zeros((T.size, len(self.multiplier)))
        for di in (0, 1):
            w1 = wx if di else 1.0 - wx
            for dj in (0, 1):
                w = w1 * (wz if dj else 1.0 - wz)
                use = w != 0.0            # nodes of zero weight are never evaluated
                if not use.any():
                    continue
                cache = self._nodes
                nodes = np.array([cache.get((a, b)) if (a, b) in cache else self._node(a, b)
                                  for a, b in zip((i[use] + di).tolist(), (j[use] + dj).tolist())])
                log_k[use] += w[use, None] * nodes
        return np.exp(log_k)

    def _surface_k_many(self, T, psc, sulfate, ice, pressure, composition_times) -> np.ndarray:
        """Surface k (n, n_reactions) at n conditions, in one vectorised call.

        ``uptake`` lines (``_exact_surface``) are evaluated exactly with the
        composition observed at ``composition_times``; plain surface lines are
        scaled from a reference evaluation by sqrt(T) (mean molecular speed).
        """
        T = np.asarray(T, dtype=float)
        if self._exact_surface:
            pp = {}
            if self.surface_composition is not None:
                p = np.broadcast_to(np.asarray(pressure, dtype=float), T.shape)
                pp = {sp: np.asarray(x) * p
                      for sp, x in self.surface_composition.at(np.asarray(composition_times, float)).items()}
            return np.asarray(self.evaluator.surface(T, psc, sulfate, ice, partial_pressures=pp),
                              dtype=float).reshape(T.size, -1)
        if self._surface_ref is None:
            self._surface_k(float(T.ravel()[0]), 0.0, 0.0, 0.0)
        T0, per_psc, per_sulfate, per_ice = self._surface_ref
        return np.sqrt(T / T0)[:, None] * (np.asarray(psc)[:, None] * per_psc
                                           + np.asarray(sulfate)[:, None] * per_sulfate
                                           + np.asarray(ice)[:, None] * per_ice)

    def _reference_surface_k(self, T, psc, sulfate, ice, pressure) -> np.ndarray:
        """Surface k (n, n_reactions) with the state-dependent columns at the reference
        composition per unit area (``state_surfaces.table_surface_k``); the other columns exact."""
        return self.state_surfaces.table_surface_k(T, pressure, psc, sulfate, ice)

    def at_times(self, times_s, state_reference: bool = False):
        """(k (n, n_reactions), fixed (n, n_fixed)) at many times [s]: ``self(t)`` for each, vectorised.

        Used by the time loop for the exact k at its output times.  Equal to the
        per-time call to rounding (the same formulas in array form).  ``state_reference``
        as in :meth:`interval_table` (the time loop then sets each member's own
        state-dependent columns, ``BatchResult.member_k``).
        """
        times = np.asarray(times_s, dtype=float).ravel()
        nr = len(self.multiplier)
        if times.size == 0:
            return np.zeros((0, nr)), np.zeros((0, len(self._fixed_per_air)))
        state = self.environment.at(times)

        def col(v):
            return np.broadcast_to(np.asarray(v, dtype=float), times.shape).astype(float)
        T, air = col(state.temperature), col(state.air_density)
        if state_reference and self.state_surfaces is not None:
            surface = self._reference_surface_k(T, col(state.psc_area), col(state.sulfate_area),
                                                col(state.ice_area), col(state.pressure))
        else:
            surface = self._surface_k_many(T, col(state.psc_area), col(state.sulfate_area),
                                           col(state.ice_area), col(state.pressure), times)
        k = self._thermal_k_many(T, air) + surface
        if self.photolysis_rates is not None:
            sza = col(state.solar_zenith_angle)
            lit = sza < col(state.horizon_zenith_angle)
            if lit.any():
                j = np.asarray(self.photolysis_rates(sza[lit], col(state.ozone_column)[lit], T[lit],
                                                     col(state.distance_factor)[lit]), dtype=float)
                k[lit] += np.where(self._photolysis_mask, j.reshape(-1, nr), 0.0)
        return k * self.multiplier, air[:, None] * self._fixed_per_air

    def __call__(self, t_seconds):
        """(k [n_reactions], fixed [n_fixed]) at ``t_seconds`` [s since the run start]."""
        state = self.environment.at(float(t_seconds))
        T = float(state.temperature)
        air = float(state.air_density)
        k = self._thermal_k(T, air) + self._surface_k(T, float(state.psc_area),
                                                       float(state.sulfate_area),
                                                       float(state.ice_area), float(state.pressure),
                                                       float(t_seconds))
        if self.photolysis_rates is not None and \
                float(state.solar_zenith_angle) < float(state.horizon_zenith_angle):
            j = np.asarray(self.photolysis_rates(state.solar_zenith_angle, state.ozone_column, T,
                                                 state.distance_factor), dtype=float)
            k = k + np.where(self._photolysis_mask, j, 0.0)
        return k * self.multiplier, air * self._fixed_per_air
