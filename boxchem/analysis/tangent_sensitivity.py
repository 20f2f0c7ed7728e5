"""Local sensitivities of metrics from one tangent-linear run (``method="tangent"``).

The run differentiates the state feedback too (``solver/tangent_feedback.py``):
state-dependent surfaces (evaluated exactly every feedback window) and the
phase equilibrium; the ozone column following the box is taken as observed
(``runner.undifferentiated_feedback``; ``method="auto"`` then takes the
differences).

One integration of the scenario carries S = dy/dp for every parameter
(:mod:`boxchem.solver.tangent`: p = ln factor on a reaction's k, J or surface
k, or ln of an initial value) on the nominal run's own steps.  The metrics
are then linearised on the output, exactly and without another integration:

* every output variable a metric reads has its tangent along p_q from S:
  number densities S itself (fixed species 0), mole fractions S / [M],
  reaction rates d rate_r = D rate_r . S_q + delta_{r r_q} rate_r (the rate
  law's own slot derivatives, ``tangent.rate_tangents``), cycle rates and
  family densities through the same (linear) matrices as the run's own
  (``runner.derived_outputs``);
* the metric is evaluated by its one implementation
  (``diagnostics.metrics.evaluate_metrics``) on the output moved along each
  tangent, ds +- eps d_ds_q (eps = 1e-3 in ln p), and differentiated by the
  central difference: exact to rounding for the metrics linear in the output
  (values at a time, time means, noon means, accumulated loss) and with an
  error O(eps^2) = 1e-6 relative for shares (a ratio) and, where the extreme
  is attained at a unique output time, max / min.

The members of that difference are cheap (no integration); they are
evaluated in chunks of parameters to bound memory.  S_i = (dm/dp_i) / m.
"""
from __future__ import annotations

import time as _time
from typing import Sequence

import numpy as np
import xarray as xr

from ..errors import BoxchemError

__all__ = ["tangent_sensitivities", "METRIC_EPS"]

#: step along the tangent direction in ln p for the metric's linearisation (module docstring)
METRIC_EPS = 1e-3
#: bytes of perturbed output per chunk of parameters (reaction rates are the largest part)
CHUNK_BYTES = 2e8


class TangentSensitivityError(BoxchemError):
    """A tangent-linear sensitivity run that cannot be done or failed."""


def tangent_sensitivities(scenario, metrics, parameters: Sequence[str], species: Sequence[str], *,
                          progress=None, setup=None):
    """Sensitivities by the tangent-linear run.

    ``scenario``: a Scenario; ``metrics``: checked :class:`Metric` objects;
    ``parameters``: member-table style columns (``scale.<id>``, ``initial.<species>``);
    ``species``: species of the time-resolved output; ``setup``: the scenario's
    ``runner.prepare`` when already built.  Returns
    ``(S (metric, parameter), values (metric,) DataArray, series (parameter, time, species)
    or None, times, attrs)``.
    """
    from ..diagnostics.metrics import evaluate_metrics
    from ..runner import (_dataset_from_result, phase_state_map, prepare, solver_options, state_feedback,
                          state_observer, undifferentiated_feedback)
    from ..solver.tangent import TangentParameters, rate_tangents
    from ..solver.timeloop import integrate_batch

    wall0 = _time.perf_counter()
    setup = prepare(scenario) if setup is None else setup
    kin = setup.kinetics
    reactions = [p.split(".", 1)[1] for p in parameters if p.startswith("scale.")]
    initial = [p.split(".", 1)[1] for p in parameters if p.startswith("initial.")]
    try:
        tp = TangentParameters.from_names(kin, reactions, initial)
    except ValueError as exc:
        raise TangentSensitivityError(f"{scenario.source}: {exc}") from None
    result = integrate_batch(kin, setup.coefficients, setup.y0[None, :], setup.output_times_s,
                             breakpoints_s=setup.breakpoints_s, on_accept=state_observer(setup),
                             state_map=phase_state_map(setup), progress=progress, tangent=tp, **solver_options(scenario))
    integration_s = _time.perf_counter() - wall0
    if result.status[0] != 0:
        raise TangentSensitivityError(f"{scenario.source}: the tangent-linear run failed: "
                                      f"{result.message[0]}")
    member = result.member(0)
    ds = _dataset_from_result(setup, member, status="success", message=member.message)
    sens = result.sensitivity                     # (n_out, n_p, nv) [cm-3]
    y = result.y[0]
    air = np.asarray(ds["air_number_density"].values, dtype=float)
    values = evaluate_metrics(ds, metrics)
    nominal = values.values
    n_p = tp.n_params
    dm = np.empty((len(metrics), n_p))
    needs = {v for m in metrics for v in m.needs()}
    want_rates = bool({"reaction_rate", "cycle_rate"} & needs)
    n_out = y.shape[0]
    per_param = 2 * n_out * (ds.sizes["species"] + (kin.n_reactions + ds.sizes.get("cycle", 0)
                                                    if want_rates else 0)) * 8
    chunk = int(max(1, min(n_p, CHUNK_BYTES // max(per_param, 1))))
    from ..diagnostics import cycle_coefficient_matrix, family_weight_matrix
    from ..runner import derived_outputs, species_number_density
    weights = family_weight_matrix(setup.mechanism)
    cycles = cycle_coefficient_matrix(setup.mechanism)
    fixed = np.asarray(result.fixed, dtype=float)
    nd0 = np.asarray(ds["number_density"].values, dtype=float)
    rates0 = np.asarray(ds["reaction_rate"].values, dtype=float)
    param_reaction = tp.param_reaction()
    for a in range(0, n_p, chunk):
        b = min(n_p, a + chunk)
        s_chunk = np.moveaxis(sens[:, a:b, :], 1, 0)                  # (c, n_out, nv)
        dnd = species_number_density(setup, s_chunk, np.zeros_like(fixed))
        signs = np.array([1.0, -1.0])[:, None, None, None] * METRIC_EPS
        nd = (nd0[None, None] + signs * dnd[None]).reshape((-1,) + nd0.shape)
        if want_rates:
            drate = np.moveaxis(rate_tangents(kin, y, member.k, fixed, sens[:, a:b, :],
                                              param_reaction[a:b]), 1, 0)   # (c, n_out, nr)
            rates = (rates0[None, None] + signs * drate[None]).reshape((-1,) + rates0.shape)
            derived = derived_outputs(nd, rates, air, weights, cycles)
        else:       # no metric reads rates: the nominal ones, and their cycle rates once
            rates = np.broadcast_to(rates0, (nd.shape[0],) + rates0.shape)
            derived = derived_outputs(nd, rates0[None], air, weights, cycles)
            derived["cycle_rate"] = np.broadcast_to(derived["cycle_rate"],
                                                    (nd.shape[0],) + derived["cycle_rate"].shape[1:])
        moved = ds.drop_vars([v for v in ("mole_fraction", "reaction_rate", "cycle_rate",
                                          "number_density", "family_number_density") if v in ds])
        members = np.arange(nd.shape[0])
        moved = moved.assign({
            "mole_fraction": (("member", "time", "species"), derived["mole_fraction"]),
            "number_density": (("member", "time", "species"), nd),
            "family_number_density": (("member", "time", "family"),
                                      derived["family_number_density"]),
            "reaction_rate": (("member", "time", "reaction"), np.asarray(rates)),
            "cycle_rate": (("member", "time", "cycle"), derived["cycle_rate"])}
        ).assign_coords(member=members)
        v = evaluate_metrics(moved, metrics).transpose("metric", "member").values
        c = b - a
        dm[:, a:b] = (v[:, :c] - v[:, c:]) / (2.0 * METRIC_EPS)
    with np.errstate(divide="ignore", invalid="ignore"):
        S = np.where(nominal[:, None] != 0, dm / nominal[:, None], np.nan)
    series = None
    if species:
        cols = []
        names = list(ds["species"].values)
        for name in species:
            if name in kin.variable_species:
                i = kin.variable_species.index(name)
                with np.errstate(divide="ignore", invalid="ignore"):
                    cols.append(np.where(y[:, i, None] > 0, sens[:, :, i] / y[:, i, None], np.nan))
            else:                     # a fixed species does not depend on any parameter
                assert name in names
                cols.append(np.zeros((n_out, n_p)))
        series = np.stack(cols, axis=-1).transpose(1, 0, 2)             # (parameter, time, species)
    attrs = {"tangent_integration_wall_time_s": integration_s,
             "state_dependent_k": int(state_feedback(setup)),
             "tangent_feedback": result.settings["tangent_feedback"],
             "not_differentiated": "; ".join(undifferentiated_feedback(setup)) or "none",
             "tangent_steps": int(result.steps[0]),
             "tangent_rejected_steps": int(result.rejected_steps[0]),
             "metric_linearisation_step_ln": METRIC_EPS}
    for key in ("scenario", "scenario_source", "mechanism_sha256", "mechanism_source",
                "boxchem_version", "solver_rtol", "solver_atol_cm-3", "start_time"):
        if key in ds.attrs:
            attrs[key] = ds.attrs[key]
    return S, values, series, ds["time"].values, attrs
