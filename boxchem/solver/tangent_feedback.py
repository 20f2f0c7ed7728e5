"""Derivatives of the time loop's state feedbacks, for the tangent-linear run.

Two feedbacks of the box's composition act between the compiled calls of
``timeloop.integrate_batch`` (one call per feedback window [t_a, t_b]):

* state-dependent surfaces (``statesurfaces``): at t_a the surface columns c get
  ln-offsets c(y(t_a)), held over the window, so d ln k_c / dp_q = G[c, q] =
  sum_j (d c_c / d y_j)(y(t_a)) S_jq(t_a), constant over the window.  The
  sensitivity equations are linear in S and in their forcing (at the discrete
  level too: every Rosenbrock stage is linear in them), so by superposition
  S(t_b) = S_0(t_b) + Z(t_b) G, with S_0 the sensitivities integrated without
  the feedback and Z[:, c] the response to a unit ln k_c over this window alone
  (extra tangent columns with ``param_reaction`` = c, zero at t_a).  This is the
  exact derivative of the discrete model, not an approximation of it.
* the phase equilibrium ``state_map`` (``environment/condensation``) at t_0 and
  at every t_b: y' = M(y), so S' = (dM/dy) S.

d c / d y and dM/dy come from central differences of the exact functions
(a relative step FEEDBACK_DIFFERENCE; a forward difference where the backward
point would be negative).  Both functions are vectorised over rows: one call
takes every perturbed state.  Where a surface k is 0 (no area) its offset is
-inf and its derivative is taken as 0; at the kinks of the equilibrium (a
min(total, saturation) switching) the central difference gives the mean of
the one-sided derivatives.  Common practice, no source.
"""
from __future__ import annotations

import numpy as np

__all__ = ["SurfaceOffsetGradient", "state_map_jacobian", "FEEDBACK_DIFFERENCE", "MAP_DIFFERENCE"]

#: relative step of the central differences of the surface offsets in the mole fractions
FEEDBACK_DIFFERENCE = 1e-5
#: relative step of the central differences of the state map
MAP_DIFFERENCE = 1e-7
#: floor [mol mol-1] of the magnitude a step is relative to (a species at zero)
DIFFERENCE_FLOOR = 1e-15


def _steps(values, relative, floor):
    """(steps, lower points) of central differences, forward where value - step < 0."""
    h = relative * np.maximum(np.abs(values), floor)
    lower = np.where(values - h >= 0.0, values - h, values)
    return h, lower


class SurfaceOffsetGradient:
    """d c / d y (n_columns, n_variable) of the state-dependent surface offsets, window by window.

    ``surfaces``: the :class:`~.statesurfaces.StateSurfaces`; ``mid_state``: the environment
    at the feedback windows' mid-points (as the time loop's own tracker); ``n_variable``.
    """

    def __init__(self, surfaces, mid_state, n_variable: int):
        self.s = surfaces
        self.nv = int(n_variable)
        self._variable = np.nonzero(surfaces._index >= 0)[0]        # positions in surfaces.species
        n = 2 * self._variable.size + 1
        self.tracker = surfaces.tracker(n, mid_state.temperature, mid_state.pressure,
                                        mid_state.psc_area, mid_state.sulfate_area, mid_state.ice_area,
                                        tolerances=False)
        self.evaluations = 0

    @property
    def species(self) -> tuple:
        """The integrated species the offsets read (the surfaces' inputs that are variables)."""
        return tuple(self.s.species[i] for i in self._variable)

    def __call__(self, window: int, y, air: float):
        """(offsets (n_columns,), d offsets / d y (n_columns, n_variable) [cm3]) of feedback
        window ``window`` at state ``y`` (n_variable,) [cm-3] and air density ``air`` [cm-3]:
        the exact offsets (re-evaluated, no refresh tolerances) and their central differences,
        in one vectorised evaluation."""
        s = self.s
        grad = np.zeros((len(s), self.nv))
        m = self._variable.size
        x = s.mole_fractions(y[None, :], air)[0]
        xv = x[self._variable]
        h, lower = _steps(xv, FEEDBACK_DIFFERENCE, DIFFERENCE_FLOOR)
        upper = lower + np.where(lower < xv, 2.0 * h, h)
        X = np.broadcast_to(x, (2 * m + 1, x.size)).copy()          # row 2m: the nominal state
        rows = np.arange(m)
        X[rows, self._variable] = upper
        X[m + rows, self._variable] = lower
        c = self.tracker.offsets(window, np.arange(2 * m + 1), X)    # (2m + 1, n_columns)
        self.evaluations += 1
        offsets = c[-1]
        if m == 0:
            return offsets, grad
        finite = np.isfinite(offsets)
        with np.errstate(invalid="ignore", over="ignore"):
            # through the k ratio exp(c - c0): a side where the area vanishes gives k = 0, not -inf
            ratio = np.exp(c[:-1] - np.where(finite, offsets, 0.0)[None, :])
            dc_dx = (ratio[:m] - ratio[m:]) / (upper - lower)[:, None]   # (m, n_columns)
        dc_dx = np.where(finite[None, :] & np.isfinite(dc_dx), dc_dx, 0.0)
        grad[:, s._index[self._variable]] = dc_dx.T / air
        return offsets, grad


def state_map_jacobian(state_map, t_s: float, y, air: float):
    """(dM/dy (n_variable, n_variable), M(y)) of ``state_map(t_s, Y)`` (rows of states
    [cm-3]) at ``y`` (n_variable,), in one call; ``air`` [cm-3] sets the floor of the steps.
    Differences of M(y) - y, so a component the map leaves alone has the identity exactly."""
    y = np.asarray(y, dtype=float)
    nv = y.size
    h, lower = _steps(y, MAP_DIFFERENCE, DIFFERENCE_FLOOR * air)
    upper = lower + np.where(lower < y, 2.0 * h, h)
    Y = np.broadcast_to(y, (2 * nv + 1, nv)).copy()                 # row 2 nv: y itself
    rows = np.arange(nv)
    Y[rows, rows] = upper
    Y[nv + rows, rows] = lower
    new = state_map(t_s, Y)
    change = new[:-1] - Y[:-1]
    jac = ((change[:nv] - change[nv:]) / (upper - lower)[:, None]).T     # [i, j] = d M_i / d y_j
    jac[rows, rows] += 1.0
    return jac, new[-1]
