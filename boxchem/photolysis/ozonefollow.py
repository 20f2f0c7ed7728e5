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
column, so it is treated as lagged: the column uses the box's O3 observed at
the start of the solver's current k(t) window (:func:`boxchem.solver.timeloop.integrate_box`
calls ``observe`` through its ``on_accept`` hook at every window edge; windows
then end on every output time and last at most ``FEEDBACK_INTERVAL_S`` = 30 min)
and the Jacobian neglects dJ/d[O3].  J(O3 -> O1D) changes by about 8-10 % per
10 DU (measured with the J table at 220 DU, 18.5 km); a box losing 3 % of its
ozone per day moves the column by about 0.25 DU per hour, so the lag changes J
by about 0.25 % per hour of lag, at most about 0.12 % here.
"""
from __future__ import annotations

import numpy as np

from ..errors import BoxchemError
from ..units import DOBSON_UNIT_CM2

__all__ = ["DEFAULT_LAYER_DEPTH_M", "box_ozone_column", "OzoneFollowingPhotolysis"]

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
