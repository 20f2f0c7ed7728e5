"""State-dependent surface k of every member of a batch, vectorised over members.

Some surface reactions depend on the box's own composition: ``uptake`` lines
with ``gamma_from=`` read the H2O, HCl and ClONO2 partial pressures (liquid
sulfate gammas, ``mechanism/liquid_aerosol.py``), and the NAT / ice area
rules of ``environment/psc.py`` read HNO3 and H2O.  Members of a batch differ
in composition, so these k cannot live in the shared k(t) table.  The split
(DEVELOPERS.md, "Solver", "State-dependent surfaces"):

* the shared table holds, in each state-dependent column c, the k per unit
  surface area at a fixed REFERENCE composition (member independent; the
  group's initial composition, floored at REFERENCE_FLOOR):
  k_ref,c(t) = gamma_c(T(t), x_ref) v_c(T(t)) / 4 * 1 cm2 cm-3, with its full
  dependence on T through the table's nodes;
* at the start t_e of every feedback window [t_e, t_e'] each running member m
  gets ln-offsets on those columns (the kernel's per-member ``lm``):
  c_m = ln(gamma_c(T*, x_m) / gamma_c(T*, x_ref)) + ln A_c(T*, x_m),
  with x_m the member's own mole fractions at t_e and T*, p*, the areas of
  the environment at the window's mid-point t* = (t_e + t_e')/2.  The k the
  member integrates is k_ref,c(t) exp(c_m): exact at t*, and inside the
  window the ratio k/k_ref is held at its mid-point value (an error second
  order in the window length; measured in DEVELOPERS.md).  A zero area gives
  c_m = -inf and k = 0 exactly.

So a member's surface k follow its own composition only (lagged by at most
one feedback window, as the per-window table rebuild did), never another
member's, and the numbers do not depend on how members are grouped: every
expression here is elementwise over members.

Output k: :meth:`StateSurfaces.surface_k` gives the exact state-dependent k of
each member from its own state at the output times (what it uses from there on).
"""
from __future__ import annotations

import numpy as np

from ..environment.psc import STATE_RULES

__all__ = ["StateSurfaces", "MemberOffsets", "MemberSurfaceK", "REFERENCE_FLOOR", "GAMMA_FLOOR", "DEFAULT_REFERENCE"]

#: floor [mol mol-1] of the reference mole fractions (a species absent at the start
#: still gives a positive reference gamma, so the table column stays logarithmic)
REFERENCE_FLOOR = 1e-12
#: floor of the reference gamma [1] (same reason; the member's own gamma is not floored)
GAMMA_FLOOR = 1e-30
#: reference composition [mol mol-1] until ``set_reference`` gives the group's own (runner.prepare
#: does): typical lower-stratospheric magnitudes (our choice, not data).  The reference only
#: carries the T dependence of the table columns; the closer it is to the members', the weaker
#: the T dependence of each member's ratio to it (held over a window / a refresh tolerance)
DEFAULT_REFERENCE = {"H2O": 5e-6, "HCl": 1e-9, "ClONO2": 5e-10, "HNO3": 5e-9}


class StateSurfaces:
    """The state-dependent surface columns of a mechanism in an environment.

    Parameters
    ----------
    evaluator : RateEvaluator (its surface-law arrays)
    environment : Environment (its psc/ice area rules)
    kinetics : CompiledKinetics (variable species order)
    fixed_mole_fractions : {fixed species: mole fraction} (H2O may be fixed)
    """

    def __init__(self, evaluator, environment, kinetics, fixed_mole_fractions):
        from ..mechanism.ratelaws import SURFACE_STATE_SPECIES
        ev = evaluator
        self.evaluator = evaluator
        self.environment = environment
        n_surf = ev.surface_index.size
        uptake_state = np.zeros(n_surf, dtype=bool)
        start = ev._uptake_slice.start
        for j, model in enumerate(ev._uptake_model):
            uptake_state[start + j] = model is not None
        self.psc_rule = environment.psc_area if isinstance(environment.psc_area, STATE_RULES) else None
        self.ice_rule = environment.ice_area if isinstance(environment.ice_area, STATE_RULES) else None
        # liquid STS droplets (environment/sts.py) grow with the box's HNO3 and H2O
        sulfate = getattr(environment, "sulfate_area", None)
        self.sulfate_rule = sulfate if isinstance(sulfate, STATE_RULES) else None
        state = uptake_state.copy()
        if self.psc_rule is not None:
            state |= ev._surf_psc > 0
        if self.ice_rule is not None:
            state |= ev._surf_ice > 0
        if self.sulfate_rule is not None:
            state |= ev._surf_sulfate > 0
        #: positions in the evaluator's surface columns, and the reaction columns
        self._surface_pos = np.nonzero(state)[0]
        self.columns = ev.surface_index[self._surface_pos].astype(np.int64)
        self._psc = ev._surf_psc[self._surface_pos]
        self._sulfate = ev._surf_sulfate[self._surface_pos]
        self._ice = ev._surf_ice[self._surface_pos]
        self._mass = ev._surf_mass[self._surface_pos]
        self._needs_gamma_state = bool(uptake_state[self._surface_pos].any())
        species = set()
        if self._needs_gamma_state:
            species |= set(SURFACE_STATE_SPECIES)
        for rule in (self.psc_rule, self.ice_rule, self.sulfate_rule):
            if rule is not None:
                species |= set(rule.needs)
        self.species = tuple(sorted(species))
        variable = {n: i for i, n in enumerate(kinetics.variable_species)}
        self._index = np.array([variable.get(n, -1) for n in self.species], dtype=np.intp)
        self._all_variable = bool(np.all(self._index >= 0))
        self._fixed = np.array([float(fixed_mole_fractions.get(n, 0.0)) for n in self.species])
        self._reference = np.array([max(float(fixed_mole_fractions.get(n, DEFAULT_REFERENCE.get(n, 0.0))),
                                        REFERENCE_FLOOR) for n in self.species])

    def __len__(self) -> int:
        return int(self.columns.size)

    # -- composition ------------------------------------------------------------------
    def set_reference(self, mole_fractions) -> None:
        """The reference composition {species: mole fraction} of the shared table (member
        independent; see the module docstring), floored at REFERENCE_FLOOR."""
        x = np.array([float(mole_fractions.get(n, f)) for n, f in zip(self.species, self._fixed)])
        self._reference = np.maximum(x, REFERENCE_FLOOR)

    def mole_fractions(self, y, air) -> np.ndarray:
        """(..., n_species) mole fractions of ``self.species`` from number densities
        ``y`` (..., n_variable) [cm-3] and the air density ``air`` (broadcast with
        ``y[..., 0]``) [cm-3]; fixed species from their fixed mole fractions."""
        y = np.asarray(y, dtype=float)
        air = np.asarray(air, dtype=float)[..., None]
        if self._all_variable:
            return y[..., self._index] / air
        idx = np.where(self._index >= 0, self._index, 0)
        return np.where(self._index >= 0, y[..., idx] / air, self._fixed)

    # -- gammas and areas ---------------------------------------------------------------
    def _gamma(self, T, p, x) -> np.ndarray:
        """gamma (..., n_columns) at T [K], p [Pa] and mole fractions x (..., n_species)."""
        pp = None
        if self._needs_gamma_state:
            pp = {s: x[..., j] * p for j, s in enumerate(self.species)
                  if s in ("H2O", "HCl", "ClONO2")}
        gamma = self.evaluator.surface_gamma(T, pp, self.droplet_radius(T, p, x))
        return gamma[..., self._surface_pos]

    def droplet_radius(self, T, p, x):
        """Droplet radius [cm] (...) of the sulfate rule at T, p and mole fractions x
        (..., n_species) when it knows one (StsEquilibriumRule), else None (radius_um= holds)."""
        rule = self.sulfate_rule
        if rule is None or not hasattr(rule, "droplet_radius_cm") or not self._needs_gamma_state:
            return None
        return rule.droplet_radius_cm(T, p, {s: x[..., j] for j, s in enumerate(self.species)
                                             if s in rule.needs})

    def _areas(self, T, p, x, psc, sulfate, ice) -> np.ndarray:
        """Surface area (..., n_columns) [cm2 cm-3] each column sees: the rules' areas from
        the composition x, the environment's own (``psc``, ``sulfate``, ``ice``) otherwise."""
        def rule_area(rule, env_area):
            if rule is None:
                return np.asarray(env_area, dtype=float)
            return rule(T, p, {s: x[..., j] for j, s in enumerate(self.species) if s in rule.needs})
        a_psc = rule_area(self.psc_rule, psc)
        a_sulfate = rule_area(self.sulfate_rule, sulfate)
        a_ice = rule_area(self.ice_rule, ice)
        return (np.asarray(a_psc)[..., None] * self._psc + np.asarray(a_sulfate, dtype=float)[..., None]
                * self._sulfate + np.asarray(a_ice)[..., None] * self._ice)

    def reference_partial_pressures(self, p) -> dict:
        """{species: partial pressure [Pa]} of the reference composition at pressure p [Pa]."""
        p = np.asarray(p, dtype=float)
        return {s: self._reference[j] * p for j, s in enumerate(self.species)}

    def table_surface_k(self, T, p, psc, sulfate, ice) -> np.ndarray:
        """Surface k (n, n_reactions) [s-1] of the shared table: the state-dependent columns
        per unit area at the reference composition (floored gamma), the others exact
        (``RateEvaluator.surface`` with the environment's areas), in one gamma evaluation."""
        from ..mechanism.ratelaws import surface_uptake
        ev = self.evaluator
        T = np.asarray(T, dtype=float).ravel()
        p = np.broadcast_to(np.asarray(p, dtype=float), T.shape)
        radius = self.droplet_radius(T, p, np.broadcast_to(self._reference, T.shape + self._reference.shape))
        gamma = ev.surface_gamma(T, self.reference_partial_pressures(p) if self._needs_gamma_state else None,
                                 radius)
        area = (np.broadcast_to(np.asarray(psc, dtype=float), T.shape)[:, None] * ev._surf_psc
                + np.broadcast_to(np.asarray(sulfate, dtype=float), T.shape)[:, None] * ev._surf_sulfate
                + np.broadcast_to(np.asarray(ice, dtype=float), T.shape)[:, None] * ev._surf_ice)
        area[:, self._surface_pos] = 1.0
        gamma[:, self._surface_pos] = np.maximum(gamma[:, self._surface_pos], GAMMA_FLOOR)
        k = np.zeros((T.size, ev.n_reactions))
        if ev.surface_index.size:
            ks = surface_uptake(T[:, None], gamma, ev._surf_mass, area)
            k[:, ev.surface_index] = np.where(area == 0.0, 0.0, ks)
        return k

    def reference_gamma(self, T, p) -> np.ndarray:
        """gamma (n, n_columns) at the reference composition (floored at GAMMA_FLOOR), at T [K]
        and p [Pa] (n,) - e.g. at every feedback window's mid-point at once."""
        T = np.asarray(T, dtype=float)
        p = np.broadcast_to(np.asarray(p, dtype=float), T.shape)
        return np.maximum(self._gamma(T, p, np.broadcast_to(self._reference, T.shape + self._reference.shape)),
                          GAMMA_FLOOR)

    def tracker(self, n_members, T, p, psc, sulfate, ice, tolerances=True) -> "MemberOffsets":
        """The per-member offsets of one integration whose feedback windows have their
        mid-points at T [K], p [Pa] and environment areas psc, sulfate, ice (n_windows,)."""
        return MemberOffsets(self, n_members, T, p, psc, sulfate, ice, tolerances)

    def surface_k(self, T, p, x, psc, sulfate, ice) -> np.ndarray:
        """Exact surface k (..., n_columns) [s-1] of the state-dependent columns: gamma v S / 4
        with the member's own gamma and area (``RateEvaluator.surface``'s formula); 0 where the
        area is 0.  T, p, psc, sulfate, ice broadcast with x[..., 0]."""
        from ..mechanism.ratelaws import surface_uptake
        x = np.asarray(x, dtype=float)
        shape = x.shape[:-1]
        T_b = np.broadcast_to(np.asarray(T, dtype=float), shape)
        p_b = np.broadcast_to(np.asarray(p, dtype=float), shape)
        gamma = self._gamma(T_b, p_b, x)
        area = self._areas(T_b, p_b, x, np.broadcast_to(psc, shape), np.broadcast_to(sulfate, shape),
                           np.broadcast_to(ice, shape))
        return np.where(area == 0.0, 0.0, surface_uptake(T_b[..., None], gamma, self._mass, area))

    def rule_areas(self, T, p, x, psc, sulfate, ice):
        """(psc, sulfate, ice areas) [cm2 cm-3] from the composition x (..., n_species) where
        the environment has a composition rule, else its own values (broadcast)."""
        shape = np.asarray(x).shape[:-1]
        out = []
        for rule, env_area in ((self.psc_rule, psc), (self.sulfate_rule, sulfate), (self.ice_rule, ice)):
            if rule is None:
                out.append(np.broadcast_to(np.asarray(env_area, dtype=float), shape))
            else:
                out.append(np.asarray(rule(T, p, {s: np.asarray(x)[..., j] for j, s in enumerate(self.species)
                                                  if s in rule.needs}), dtype=float))
        return tuple(out)


#: a member's gamma ratio gamma(x_m) / gamma(x_ref) is re-evaluated when T at the window
#: mid-point moved by more than this [K] since its last evaluation (the ratio's own T
#: dependence is weak: T acts through the reference column of the table, exactly) ...
RATIO_REFRESH_TEMPERATURE_K = 0.1
#: ... or a mole fraction (or p) by more than this fraction (as the per-window rebuild did:
#: coefficients.SURFACE_REFRESH_TOLERANCE) ...
RATIO_REFRESH_TOLERANCE = 0.01
#: ... ClONO2, which enters only through the HCl-depletion factor, by more than this
RATIO_REFRESH_TOLERANCE_CLONO2 = 0.2
#: mole fractions below this [mol mol-1] count as equal (0.1 pptv)
RATIO_REFRESH_FLOOR = 1e-13


class MemberOffsets:
    """Each member's ln k offsets on the state-dependent columns, window by window.

    ``offsets(window, rows, x)`` for the running members ``rows`` with mole fractions x at
    the window's start: ln(area_m) evaluated for every window, plus ln of the member's gamma
    ratio gamma(T*, x_m)/gamma(T*, x_ref), re-evaluated only for members whose own T*, p or
    composition moved by more than the RATIO_REFRESH_* tolerances since that member's last
    evaluation (each member's decision depends on its own history only, so results do not
    depend on the grouping).  ``tolerances=False`` re-evaluates every window (exact; tests).
    """

    def __init__(self, surfaces: StateSurfaces, n_members, T, p, psc, sulfate, ice, tolerances=True):
        self.s = surfaces
        self.T, self.p = np.asarray(T, dtype=float), np.asarray(p, dtype=float)
        self.psc, self.sulfate, self.ice = (np.asarray(v, dtype=float) for v in (psc, sulfate, ice))
        ncol = len(surfaces)
        self.log_ref = np.log(surfaces.reference_gamma(self.T, self.p)) if surfaces._needs_gamma_state \
            else None
        self.tolerances = tolerances
        ns = len(surfaces.species)
        # only the gammas' inputs count (HNO3 enters the NAT area, evaluated every window)
        self._tol = np.array([RATIO_REFRESH_TOLERANCE_CLONO2 if n == "ClONO2" else RATIO_REFRESH_TOLERANCE
                              if n in ("H2O", "HCl") else np.inf for n in surfaces.species])
        # "never evaluated" records: every member is stale at its first window
        self._last = {"ratio": (np.full(n_members, -np.inf), np.full(n_members, -np.inf),
                                np.full((n_members, ns), -1.0))}
        self._log_ratio = np.zeros((n_members, ncol))
        self.ratio_evaluations = 0
        self.area_evaluations = 0

    def _stale(self, what, rows, x, T, p, tol, tol_T):
        """Mask of the members ``rows`` whose own T, p or x moved beyond the tolerances since
        their last evaluation of ``what`` (all of them without tolerances)."""
        if not self.tolerances:
            return np.ones(rows.size, dtype=bool)
        last_T, last_p, last_x = self._last[what]
        lx = last_x[rows]
        stale = (np.abs(x - lx) > tol * np.maximum(lx, RATIO_REFRESH_FLOOR)).any(axis=1)
        stale |= np.abs(T - last_T[rows]) > tol_T
        stale |= np.abs(p - last_p[rows]) > RATIO_REFRESH_TOLERANCE * p
        return stale

    def _record(self, what, todo, x, T, p):
        last_T, last_p, last_x = self._last[what]
        last_T[todo], last_p[todo], last_x[todo] = T, p, x

    def offsets(self, window: int, rows, x) -> np.ndarray:
        s = self.s
        rows = np.asarray(rows, dtype=np.intp)
        x = np.asarray(x, dtype=float)
        T, p = float(self.T[window]), float(self.p[window])
        if self.log_ref is not None and rows.size:
            stale = self._stale("ratio", rows, x, T, p, self._tol, RATIO_REFRESH_TEMPERATURE_K)
            if stale.any():
                todo, xt = rows[stale], x[stale]
                gamma = s._gamma(np.full(todo.size, T), np.full(todo.size, p), xt)
                with np.errstate(divide="ignore"):
                    self._log_ratio[todo] = np.log(gamma) - self.log_ref[window]
                self._record("ratio", todo, xt, T, p)
                self.ratio_evaluations += 1
        # areas every window: NAT / ice areas depend steeply on T and on HNO3 near saturation
        # (the excess over the equilibrium pressure; a tolerance gate on them was measured to
        # move O3 by 1e-3 over the season), and they are cheap next to the gammas
        n = rows.size
        area = s._areas(np.full(n, T), np.full(n, p), x, self.psc[window], self.sulfate[window],
                        self.ice[window])
        self.area_evaluations += 1
        with np.errstate(divide="ignore"):
            return np.log(area) + self._log_ratio[rows]       # area >= 0: ln 0 = -inf, k = 0


class MemberSurfaceK:
    """Each member's state-dependent surface k at the output times, computed on demand from
    its own states there (bounded memory: nothing per member is stored beyond ``y``)."""

    def __init__(self, surfaces: StateSurfaces, state, multiplier):
        self.surfaces = surfaces
        self.columns = surfaces.columns
        self._T = np.asarray(state.temperature, dtype=float)
        self._p = np.asarray(state.pressure, dtype=float)
        self._air = np.asarray(state.air_density, dtype=float)
        self._psc = np.asarray(state.psc_area, dtype=float)
        self._sulfate = np.asarray(state.sulfate_area, dtype=float)
        self._ice = np.asarray(state.ice_area, dtype=float)
        self._multiplier = np.asarray(multiplier, dtype=float)[self.columns]

    def __call__(self, y) -> np.ndarray:
        """k (..., n_out, n_columns) [s-1] (with the scenario's [scale], without member factors)
        from states ``y`` (..., n_out, n_variable) [cm-3]."""
        s = self.surfaces
        n = np.asarray(y).shape[-2]
        x = s.mole_fractions(y, self._air[:n])
        k = s.surface_k(self._T[:n], self._p[:n], x, self._psc[:n], self._sulfate[:n], self._ice[:n])
        return k * self._multiplier

    def areas(self, y):
        """(psc, sulfate, ice) areas (..., n_out) [cm2 cm-3] the members' states give."""
        s = self.surfaces
        n = np.asarray(y).shape[-2]
        x = s.mole_fractions(y, self._air[:n])
        return s.rule_areas(self._T[:n], self._p[:n], x, self._psc[:n], self._sulfate[:n], self._ice[:n])
