"""Local sensitivities S_i = d ln(metric) / d ln(p_i): tangent-linear run or batched differences.

Every parameter of a scenario at once: the rate coefficient of each thermal
reaction, each photolysis J and each surface gamma (``scale.<id>``), and
optionally initial mole fractions (``initial.<species>``).  The
finite-difference stencil is one member table run by the ensemble engine
(:func:`boxchem.ensemble`), so all members share one setup and advance in
the batched integrator; no second integrator exists here.

Method (docs/sensitivity-uncertainty.md, "Local sensitivities"):

* central differences by default, S = (ln m(p e^h) - ln m(p e^-h)) / (2h):
  truncation error O(h^2) (about h^2/6 of the third log-derivative) where
  one-sided differences err by O(h) (h/2 of the curvature, about 2.5 % at
  h = 0.05 for curved responses such as ClO + ClO + M, whose rate is
  quadratic in ClO);
* step h = 0.05 in ln p (p x 1.051 and / 1.051) by default: large enough that
  the integrator's error (rtol 1e-4 gives relative noise of order 1e-4 in a
  metric) adds at most ~1e-3 to S, small enough that the truncation error
  stays below ~1e-3 relative for the smooth responses of a box model;
  ``step`` and ``scheme="forward"`` (half the members) are settings;
* ``method="tangent"`` instead integrates S = dy/d ln p for
  every parameter alongside the nominal run's Rosenbrock steps, with the
  step's LU (:mod:`boxchem.solver.tangent`), and linearises the metrics on
  the output (:mod:`boxchem.analysis.tangent_sensitivity`): one run instead
  of 2N + 1 members, no step to choose, and the exact derivative of the
  discrete solution.  The finite differences stay as its check (tests,
  benchmarks/bench_sensitivity.py) and for what the tangent does not
  differentiate: the ozone column following the box.  The state-dependent
  surfaces and the phase equilibrium are differentiated
  (:mod:`boxchem.solver.tangent_feedback`), so ``method="auto"`` (the
  default) takes the tangent unless the ozone column follows the box
  (measured on the polar-spring season: the ten largest coefficients of O3 on
  1 October within 0.02 % of separate runs; docs/sensitivity-uncertainty.md).

Time-resolved sensitivities d ln x_s(t) / d ln p_i of chosen species come
from the same members.
"""
from __future__ import annotations

import time as _time
from typing import Sequence

import numpy as np
import xarray as xr

from ..diagnostics.metrics import (Metric, context_from_scenario, evaluate_metrics,
                                   parse_metrics, required_variables)
from ..errors import BoxchemError
from .sampling import finite_difference_table, parameter_kind

__all__ = ["local_sensitivities", "sensitivities_from_members", "ranking", "parameter_columns",
           "DEFAULT_STEP", "run_ensemble", "METHODS", "DEFAULT_METHOD"]

#: ways of computing the local sensitivities (module docstring); "auto" is the tangent
#: unless the run has a feedback the tangent does not differentiate (runner.undifferentiated_feedback)
METHODS = ("auto", "tangent", "differences")
DEFAULT_METHOD = "auto"

#: default finite-difference step in ln p (see the module docstring)
DEFAULT_STEP = 0.05
#: species with time-resolved sensitivities unless others are asked for
DEFAULT_SERIES = ("O3",)


class SensitivityError(BoxchemError):
    """Settings of a sensitivity analysis that cannot be used."""


def _scenario(scenario):
    from ..scenario import Scenario, load_scenario
    return scenario if isinstance(scenario, Scenario) else load_scenario(scenario)


def parameter_columns(scenario, *, reactions="all", initial=()) -> tuple[list[str], dict]:
    """Member-table columns of the parameters and nominal initial mole fractions.

    ``reactions``: "all" or reaction ids; ``initial``: species names (or
    "all": every integrated species with a non-zero initial mole fraction).
    """
    mech = scenario.mechanism
    if reactions == "all":
        ids = list(mech.reaction_ids)
    else:
        ids = list(reactions)
        unknown = [r for r in ids if r not in mech.reaction_ids]
        if unknown:
            import difflib
            hints = [f"{u!r}" + (f" (did you mean {difflib.get_close_matches(u, mech.reaction_ids, 1)[0]!r}?)"
                                 if difflib.get_close_matches(u, mech.reaction_ids, 1) else "")
                     for u in unknown]
            raise SensitivityError(f"unknown reaction(s) {', '.join(hints)} in "
                                   f"{mech.source or 'the mechanism'}")
    nominal: dict[str, float] = {}
    if initial == "all":
        initial = [n for n, (v, kind) in scenario.initial.items()
                   if kind == "mole_fraction" and v > 0 and not mech.species_by_name(n).fixed]
    for name in initial:
        value = scenario.initial.get(name)
        if value is None or value[1] != "mole_fraction" or not value[0] > 0:
            raise SensitivityError(
                f"initial.{name}: the sensitivity to an initial value needs a non-zero initial "
                f"mole fraction in {scenario.source}; found {value[0] if value else 'none'}")
        nominal[f"initial.{name}"] = float(value[0])
    return [f"scale.{r}" for r in ids] + list(nominal), nominal


def run_ensemble(scenario, table, *, variables: Sequence[str] = (), **engine):
    """Run a member table on the ensemble engine, saving ``variables`` beside its defaults.

    ``engine`` holds the engine's own options (output, workers, scheduler,
    client, progress, batch_size, ...), passed through unchanged.
    """
    import boxchem
    from .batches import DEFAULT_SAVE
    kwargs = {k: v for k, v in engine.items() if v is not None}
    save = list(dict.fromkeys([*(kwargs.pop("save", None) or DEFAULT_SAVE), *variables]))
    return boxchem.ensemble(scenario, table, save=save, **kwargs)


def local_sensitivities(scenario, metrics: str | Sequence[str] | Sequence[Metric], *,
                        reactions="all", initial=(), step: float = DEFAULT_STEP,
                        scheme: str = "central", species: Sequence[str] | None = None,
                        method: str = DEFAULT_METHOD, **engine) -> xr.Dataset:
    """Normalised local sensitivities of each metric to every parameter.

    ``scenario``: name, path or Scenario; ``metrics``: metric text(s)
    (:mod:`boxchem.diagnostics.metrics`); ``reactions``, ``initial``: see
    :func:`parameter_columns`; ``step``: h in ln p; ``scheme``: "central" or
    "forward"; ``species``: species whose time-resolved sensitivities are
    kept (default O3 when the mechanism has it).  ``method``: "tangent" (one
    tangent-linear run; ``step`` and ``scheme`` unused), "differences" (the
    ensemble) or "auto" (default: the tangent unless the run has a feedback it does
    not differentiate, ``runner.undifferentiated_feedback``: the ozone column following
    the box).  ``engine``: options of :func:`boxchem.ensemble` (``workers``,
    ``scheduler``, ``client``, ``progress``, ``output`` for the member file, ...);
    the tangent run uses only ``progress``.

    Returns a Dataset: ``sensitivity`` (metric, parameter) [1],
    ``metric_value`` (metric) of the nominal run, ``species_sensitivity``
    (parameter, time, sensitivity_species) [1], the parameter's
    ``parameter_kind`` and ``equation``, and attributes saying what ran.
    """
    scenario = _scenario(scenario)
    parsed = metrics if metrics and isinstance(metrics[0], Metric) else parse_metrics(metrics)
    context = context_from_scenario(scenario)
    parsed = [m.check(context) for m in parsed]
    if species is None:
        species = [s for s in DEFAULT_SERIES if s in context.species]
    from ..diagnostics.metrics import check_name
    species = [check_name(s, context.species, "species", "time-resolved sensitivities",
                              context) for s in species]
    columns, nominal = parameter_columns(scenario, reactions=reactions, initial=initial)
    if method not in METHODS:
        raise SensitivityError(f"method: expected one of {', '.join(METHODS)}, got {method!r}")
    setup, choice = None, f"{method} (asked for)"
    if method != "differences":
        from ..runner import prepare, state_feedback, undifferentiated_feedback
        setup = prepare(scenario)
        if method == "auto":
            missing = undifferentiated_feedback(setup)
            method = "differences" if missing else "tangent"
            choice = (f"auto: differences, because the tangent does not differentiate "
                      f"{' and '.join(missing)}" if missing else
                      "auto: tangent (it differentiates the state feedback: state-dependent surfaces "
                      "and the phase equilibrium)" if state_feedback(setup) else
                      "auto: tangent (no k depends on the box's state)")
    if method == "tangent":
        out = _tangent_result(scenario, parsed, columns, species, engine.get("progress"), setup)
        out.attrs["method_choice"] = choice
        return out
    table, labels, plan = finite_difference_table(columns, step=step, scheme=scheme,
                                                  initial=nominal)
    table["member_label"] = labels
    wall0 = _time.perf_counter()
    members = run_ensemble(scenario, table, variables=required_variables(parsed), **engine)
    wall = _time.perf_counter() - wall0
    result = sensitivities_from_members(members, parsed, plan, step=step, scheme=scheme,
                                        species=species, mechanism=scenario.mechanism)
    from ..diagnostics.conservation import member_summary
    result.attrs.update(ensemble_wall_time_s=wall, ensemble_members=len(table), method_choice=choice,
                        conservation_summary=member_summary(members) or "")
    return result


def _tangent_result(scenario, metrics, columns, species, progress, setup=None) -> xr.Dataset:
    """``local_sensitivities`` by the tangent-linear run, in the same layout as the differences'."""
    from .tangent_sensitivity import tangent_sensitivities
    bar = None
    if progress is True:
        from ..progress import ProgressBar
        bar = progress = ProgressBar(scenario.duration_s)
    wall0 = _time.perf_counter()
    try:
        S, values, series, times, attrs = tangent_sensitivities(scenario, metrics, columns, species,
                                                                progress=progress or None,
                                                                setup=setup)
    finally:
        if bar is not None:
            bar.close()
    kinds, equations = _kinds_and_equations(columns, scenario.mechanism)
    out = xr.Dataset(
        {"sensitivity": (("metric", "parameter"), S,
                         {"units": "1", "long_name": "normalised local sensitivity "
                          "d ln(metric) / d ln(parameter)"}),
         "metric_value": ("metric", values.values,
                          {"long_name": "value of each metric in the nominal run",
                           "comment": "units in metric_units"}),
         "parameter_failed": ("parameter", np.zeros(len(columns), dtype=np.int8),
                              {"long_name": "1 where a member of this parameter's stencil failed "
                               "(sensitivity NaN)"})},
        coords={"metric": values["metric"].values,
                "metric_definition": ("metric", values["metric_definition"].values),
                "metric_units": ("metric", values["metric_units"].values),
                "parameter": list(columns),
                "parameter_kind": ("parameter", kinds),
                "equation": ("parameter", equations)})
    if series is not None:
        out["species_sensitivity"] = (("parameter", "time", "sensitivity_species"), series,
                                      {"units": "1", "long_name": "time-resolved sensitivity "
                                       "d ln(mole fraction) / d ln(parameter)",
                                       "comment": "tangent-linear: S / y at the output times"})
        out = out.assign_coords(time=times, sensitivity_species=list(species))
    out.attrs.update({
        "boxchem_result_kind": "sensitivity",
        "method": "tangent-linear (forward sensitivities on the Rosenbrock steps with the "
                  "step's LU; metrics linearised on the output)",
        "sensitivity_method": "tangent",
        "failed_members": 0,
        "members": 1,
        "ensemble_members": 1,
        "ensemble_wall_time_s": _time.perf_counter() - wall0,
        **attrs})
    return out


def _kinds_and_equations(parameters, mechanism):
    by_id = {r.id: r for r in mechanism.reactions} if mechanism is not None else {}
    kinds, equations = [], []
    for p in parameters:
        section, name = p.split(".", 1)
        if section == "initial":
            kinds.append("initial")
            equations.append(f"initial {name}")
        else:
            r = by_id.get(name)
            kinds.append(parameter_kind(r) if r is not None else "")
            equations.append(r.equation if r is not None else "")
    return kinds, equations


def sensitivities_from_members(members: xr.Dataset, metrics: Sequence[Metric], plan: dict, *,
                               step: float, scheme: str, species: Sequence[str] = (),
                               mechanism=None) -> xr.Dataset:
    """Reduce a finite-difference member file to sensitivities (no loop over members).

    ``plan`` maps each parameter column to its (plus, minus) member rows
    (minus = nominal row 0 for the forward scheme); see
    :func:`~boxchem.analysis.sampling.finite_difference_table`.  A failed
    member makes only its parameter's sensitivity NaN (and is counted).
    """
    parameters = list(plan)
    plus = np.array([plan[p][0] for p in parameters], dtype=int)
    minus = np.array([plan[p][1] for p in parameters], dtype=int)
    denominator = 2.0 * step if scheme == "central" else step
    values = evaluate_metrics(members, metrics).transpose("member", "metric")
    with np.errstate(divide="ignore", invalid="ignore"):
        log_v = np.log(np.where(values.values > 0, values.values, np.nan))
    S = (log_v[plus] - log_v[minus]).T / denominator           # (metric, parameter)
    status = members["member_status"].values if "member_status" in members else \
        np.ones(members.sizes["member"], dtype=int)
    ok = status == 1
    failed_parameter = ~(ok[plus] & ok[minus])
    kinds, equations = _kinds_and_equations(parameters, mechanism)
    out = xr.Dataset(
        {"sensitivity": (("metric", "parameter"), S,
                         {"units": "1", "long_name": "normalised local sensitivity "
                          "d ln(metric) / d ln(parameter)"}),
         "metric_value": ("metric", values.values[0],
                          {"long_name": "value of each metric in the nominal run",
                           "comment": "units in metric_units"}),
         "parameter_failed": ("parameter", failed_parameter.astype(np.int8),
                              {"long_name": "1 where a member of this parameter's stencil failed "
                               "(sensitivity NaN)"})},
        coords={"metric": values["metric"].values,
                "metric_definition": ("metric", values["metric_definition"].values),
                "metric_units": ("metric", values["metric_units"].values),
                "parameter": parameters,
                "parameter_kind": ("parameter", kinds),
                "equation": ("parameter", equations)})
    if species:
        x = members["mole_fraction"].sel(species=list(species)).transpose("member", "time", "species")
        with np.errstate(divide="ignore", invalid="ignore"):
            lx = np.log(np.where(x.values > 0, x.values, np.nan))
        series = (lx[plus] - lx[minus]) / denominator          # (parameter, time, species)
        out["species_sensitivity"] = (("parameter", "time", "sensitivity_species"), series,
                                      {"units": "1", "long_name": "time-resolved sensitivity "
                                       "d ln(mole fraction) / d ln(parameter)"})
        out = out.assign_coords(time=members["time"].values, sensitivity_species=list(species))
    if not ok[0]:
        out.attrs["warning"] = "the nominal member failed: every sensitivity is NaN"
    out.attrs.update({
        "boxchem_result_kind": "sensitivity",
        "finite_difference_scheme": scheme,
        "finite_difference_step_ln": float(step),
        "method": "batched finite differences on the ensemble engine",
        "sensitivity_method": "differences",
        "failed_members": int((~ok).sum()),
        "members": int(members.sizes["member"]),
    })
    for key in ("scenario", "scenario_source", "mechanism_sha256", "mechanism_source",
                "boxchem_version", "solver_rtol", "solver_atol_cm-3", "start_time"):
        if key in members.attrs:
            out.attrs[key] = members.attrs[key]
    return out


def ranking(result: xr.Dataset, metric: str | None = None, top: int | None = None) -> list[dict]:
    """Parameters ordered by |S| for one metric (default the first): rank, parameter,
    kind, equation, sensitivity."""
    metric = str(result["metric"].values[0]) if metric is None else metric
    s = result["sensitivity"].sel(metric=metric).values
    order = np.argsort(-np.nan_to_num(np.abs(s), nan=-1.0), kind="stable")
    rows = []
    for rank, j in enumerate(order[:top] if top else order, start=1):
        rows.append({"rank": rank, "parameter": str(result["parameter"].values[j]),
                     "kind": str(result["parameter_kind"].values[j]),
                     "equation": str(result["equation"].values[j]),
                     "sensitivity": float(s[j])})
    return rows
