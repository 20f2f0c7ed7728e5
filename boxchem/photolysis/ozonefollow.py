"""Overhead ozone column that follows the box's own ozone (scenario switch).

With ``[photolysis] ozone_column_follows_box = true`` the box is taken to
stand for a layer of depth ``H`` (``ozone_loss_layer_depth``, default 10 km)
in which ozone changes as it does in the box.  The overhead column used for
J is then the scenario's column minus the ozone the layer has lost:

    column(t) = max(column_scenario(t) - (x0 - x(t)) [M](t) H / (1 DU), 0)      [DU]

with ``x`` the box's O3 mole fraction (``x0`` at the start), ``[M]`` the air
number density [cm-3], ``H`` in cm and 1 DU = 2.6867e16 molecule cm-2.  Mole
fractions (not number densities) are compared so that compression or
expansion of the air along a trajectory is not counted as ozone loss.  A box
that gains ozone thickens the column by the same rule.

Why 10 km: polar spring ozone loss spans roughly 12-22 km (recalled from
memory), and full loss of 2.6 ppmv at 60 hPa and 200 K (5.6e12 cm-3) over
10 km removes about 210 DU, the order of the observed springtime Antarctic
column deficit of 150-200 DU (recalled from memory).  The rule ignores that
loss is not uniform with height; it is meant for "how much does the
self-shielding feedback matter", not as a column model.

Coupling to the integrator: J depends on the box's O3 only through this
column, so it is treated as lagged: the column uses the box's O3 at the start
of the solver's current feedback window (windows end on every output time and
last at most ``FEEDBACK_INTERVAL_S`` = 30 min) and the Jacobian neglects
dJ/d[O3].  The compiled time loop gives every member of a batch its own column
as ln J offsets on the shared table (:class:`MemberOzoneColumns`); the earlier
treatment, ``observe`` through the time loop's ``on_accept`` with a table per
window at the observed column (one member at a time), is kept as the reference
(``integrate_batch(ozone_feedback="observe")``) and is what the numpy reference
loop does after every step.  J(O3 -> O1D) changes by about 8-10 % per
10 DU (measured with the J table at 220 DU, 18.5 km); a box losing 3 % of its
ozone per day moves the column by about 0.25 DU per hour, so the lag changes J
by about 0.25 % per hour of lag, at most about 0.12 % here.
"""
from __future__ import annotations

import numpy as np

from ..errors import BoxchemError
from ..units import DOBSON_UNIT_CM2

__all__ = ["DEFAULT_LAYER_DEPTH_M", "box_ozone_column", "OzoneFollowingPhotolysis",
           "MemberOzoneColumns", "MemberOzoneJ"]

#: default depth of the layer the box stands for [m] (see module docstring)
DEFAULT_LAYER_DEPTH_M = 10_000.0


def box_ozone_column(column_DU, o3_mole_fraction_start, o3_mole_fraction, air_density_cm3,
                     layer_depth_m):
    """Overhead ozone column [DU] after the box's ozone change, floored at 0.

    ``column_DU`` the scenario's column [DU]; mole fractions [1]; air number
    density [cm-3]; ``layer_depth_m`` [m].  Arrays broadcast.
    """
    deficit = (np.asarray(o3_mole_fraction_start, float) - np.asarray(o3_mole_fraction, float)) \
        * np.asarray(air_density_cm3, float) * (float(layer_depth_m) * 100.0) / DOBSON_UNIT_CM2
    return np.maximum(np.asarray(column_DU, float) - deficit, 0.0)


class OzoneFollowingPhotolysis:
    """Wraps a PhotolysisRates so that its ozone column follows the box's O3.

    Same call signature as :class:`boxchem.photolysis.rates.PhotolysisRates`;
    the ``ozone_column_DU`` passed in (the scenario's) is replaced by
    :func:`box_ozone_column` of the last observed O3.  ``observe(t_s, y)`` is
    the integrator's ``on_accept`` hook; the first call sets ``x0``.
    Other attributes (``source``, ``horizon_deg``, ...) pass through.
    """

    def __init__(self, photolysis, environment, o3_index: int, layer_depth_m: float = DEFAULT_LAYER_DEPTH_M):
        if not (np.isfinite(layer_depth_m) and layer_depth_m > 0):
            raise BoxchemError(f"ozone layer depth: got {layer_depth_m!r} m; expected a finite depth > 0 m")
        self.photolysis = photolysis
        self.environment = environment
        self.o3_index = int(o3_index)
        self.layer_depth_m = float(layer_depth_m)
        self.o3_mole_fraction_start = None
        self.o3_mole_fraction = None
        self._last_t = None
        self._air = None

    def __getattr__(self, name):
        if name == "photolysis":     # not yet set (e.g. while unpickling)
            raise AttributeError(name)
        return getattr(self.photolysis, name)

    def observe(self, t_s: float, y) -> None:
        """Record the box's O3 mole fraction at ``t_s`` [s] from ``y`` [cm-3]."""
        if t_s == self._last_t:
            return
        air = float(self.environment.at(float(t_s)).air_density)
        x = float(y[self.o3_index]) / air
        if self.o3_mole_fraction_start is None:
            self.o3_mole_fraction_start = x
        self.o3_mole_fraction = x
        self._air = air
        self._last_t = t_s

    def member_columns(self, edges, y0, phot_cols) -> "MemberOzoneColumns":
        """Each member's own column on the batch time loop's feedback windows ``edges``
        (:class:`MemberOzoneColumns`); nothing is observed here."""
        return MemberOzoneColumns(self, edges, y0, phot_cols)

    def column(self, column_DU, air_density_cm3):
        """Column [DU] used now for the scenario column ``column_DU`` and air density [cm-3]."""
        if self.o3_mole_fraction is None:
            return column_DU
        return box_ozone_column(column_DU, self.o3_mole_fraction_start, self.o3_mole_fraction,
                                air_density_cm3, self.layer_depth_m)

    def __call__(self, sza_deg, ozone_column_DU=300.0, temperature_K=220.0, distance_factor=1.0):
        """J [s-1] as PhotolysisRates, at the followed ozone column."""
        if self.o3_mole_fraction is not None:
            ozone_column_DU = self.column(ozone_column_DU, self._air)
            if np.ndim(ozone_column_DU) == 0:
                ozone_column_DU = float(ozone_column_DU)
        return self.photolysis(sza_deg, ozone_column_DU, temperature_K, distance_factor)


class MemberOzoneColumns:
    """Each member's own followed column in a batch: ln J offsets on the shared J table.

    The batched form of :meth:`OzoneFollowingPhotolysis.observe` (as
    ``solver/statesurfaces.py`` is for surfaces): the shared table holds J at
    the scenario's column (nothing observed); at the start t_e of every feedback
    window [t_e, t_e'] each running member m gets, on every photolysis column c,

        lm_c += ln J_c(chi*, column_m, T*, d*) - ln J_c(chi*, column_scenario(t*), T*, d*)

    with column_m = :func:`box_ozone_column` of the member's own O3 mole fraction at
    t_e (its own x0 at the start; air density at t_e, as ``observe`` records it)
    and chi*, T*, d* the solar zenith angle, temperature and distance factor at the
    window's mid-point t*.  So J is exact at t* and the ratio is held over the window
    (the table keeps J's SZA dependence; an error second order in the window), the
    column lagged by at most one window as before.  Dark mid-points get no offset
    (J is 0 there).  Every expression is elementwise over members.

    ``edges`` (n_windows + 1,) [s]: the feedback windows; ``y0`` (members,
    n_variable) [cm-3] the state at edges[0]; ``phot_cols`` the photolysis
    columns of the rate coefficient model.
    """

    def __init__(self, follower: OzoneFollowingPhotolysis, edges, y0, phot_cols):
        env = follower.environment
        edges = np.asarray(edges, dtype=float)
        mids = 0.5 * (edges[:-1] + edges[1:])
        state = env.at(mids)
        n = mids.size

        def series(v):
            return np.broadcast_to(np.asarray(v, dtype=float), (n,)).copy()
        self.follower = follower
        self.base = follower.photolysis
        self.o3 = follower.o3_index
        self.cols = np.asarray(phot_cols, dtype=np.int64)
        self.sza, self.T = series(state.solar_zenith_angle), series(state.temperature)
        self.distance, self.column = series(state.distance_factor), series(state.ozone_column)
        self.lit = self.sza < series(state.horizon_zenith_angle)
        self.air_start = series(env.at(edges[:-1]).air_density)
        self.x0 = np.asarray(y0, dtype=float)[:, self.o3] / self.air_start[0]
        self.evaluations = 0

    def offsets(self, window: int, rows, y) -> np.ndarray:
        """(len(rows), n_photolysis) ln J offsets of the running members ``rows`` with
        states ``y`` (len(rows), n_variable) [cm-3] at the window's start."""
        rows = np.asarray(rows, dtype=np.intp)
        out = np.zeros((rows.size, self.cols.size))
        if not self.lit[window] or not rows.size:
            return out
        air = self.air_start[window]
        x = np.asarray(y, dtype=float)[:, self.o3] / air
        column = box_ozone_column(self.column[window], self.x0[rows], x, air,
                                  self.follower.layer_depth_m)
        args = (self.T[window], self.distance[window])
        j = self.base(np.full(rows.size, self.sza[window]), column, *args)[:, self.cols]
        j_ref = self.base(self.sza[window], self.column[window], *args)[self.cols]
        self.evaluations += 1
        return np.log(np.maximum(j, 1e-300)) - np.log(np.maximum(j_ref, 1e-300))

    def output_j(self, state, multiplier) -> "MemberOzoneJ":
        """The members' exact J at the output times (``state``: the environment there)."""
        return MemberOzoneJ(self, state, multiplier)


class MemberOzoneJ:
    """Each member's J at the output times from its own column there (computed on demand
    from the states ``y``, as :class:`~boxchem.solver.statesurfaces.MemberSurfaceK`)."""

    def __init__(self, columns: MemberOzoneColumns, state, multiplier):
        self.c = columns
        self.columns = columns.cols
        n = np.asarray(state.air_density).size

        def series(v):
            return np.broadcast_to(np.asarray(v, dtype=float), (n,))
        self._sza, self._T = series(state.solar_zenith_angle), series(state.temperature)
        self._d, self._col = series(state.distance_factor), series(state.ozone_column)
        self._air = series(state.air_density)
        self._lit = self._sza < series(state.horizon_zenith_angle)
        self._multiplier = np.asarray(multiplier, dtype=float)[self.columns]

    def column(self, y, rows=slice(None)) -> np.ndarray:
        """The followed column [DU] (members, n_out) of the members ``rows`` with states
        ``y`` (members, n_out, n_variable) [cm-3] (what J uses from there on)."""
        y = np.asarray(y, dtype=float)
        n = y.shape[-2]
        return box_ozone_column(self._col[:n], self.c.x0[rows][:, None], y[..., self.c.o3] / self._air[:n],
                                self._air[:n], self.c.follower.layer_depth_m)

    def __call__(self, y, rows=slice(None)) -> np.ndarray:
        """J (members, n_out, n_photolysis) [s-1] with the scenario's [scale], without member
        factors, of the members ``rows`` with states ``y`` (members, n_out, n_variable)."""
        n = np.asarray(y).shape[-2]
        column = self.column(y, rows)
        shape = column.shape
        sza = np.broadcast_to(self._sza[:n], shape)
        lit = np.broadcast_to(self._lit[:n], shape) & np.isfinite(column)
        j = np.zeros(shape + (self.columns.size,))
        if lit.any():
            j[lit] = self.c.base(sza[lit], column[lit], np.broadcast_to(self._T[:n], shape)[lit],
                                 np.broadcast_to(self._d[:n], shape)[lit])[:, self.columns]
        return j * self._multiplier
