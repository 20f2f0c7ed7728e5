"""Run a scenario: mechanism + environment -> stiff integration -> xarray Dataset.

``run(scenario_or_path)`` wires the parts together in the order of the data
flow (DESIGN.md): load the mechanism, build the environment histories, the
rate-coefficient model (thermal, surface and photolysis rates, scale
factors), the compiled kinetics and the initial state; integrate through the
output times with the box's sunrise and sunset as breakpoints; then evaluate
k, the reaction rates and the diagnostics at the output times and assemble
the Dataset of the output contract (see :func:`assemble_dataset` and
DEVELOPERS.md, "Output").
"""
from __future__ import annotations

import datetime as _dt
import json
import time as _time
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

import numpy as np
import xarray as xr

from . import __version__
from .diagnostics.cycles import cycle_description
from .diagnostics import (cycle_coefficient_matrix, cycle_rate, family_number_density,
                          family_weight_matrix, net_stoichiometry_matrix)
from .errors import IntegrationError, ScenarioError
from .scenario import EquilibriumRuleSpec, Scenario, StsRuleSpec, ThresholdRuleSpec, TimeSeriesSpec, load_scenario

__all__ = ["run", "prepare", "integrate", "RunSetup", "initial_state", "build_environment",
           "assemble_dataset", "derived_outputs", "species_number_density", "solver_options", "reaction_definition",
           "COUNTER_NAMES", "CF_MOLE_FRACTION_NAMES"]

#: work counters the integrator reports (DEVELOPERS.md, "Solver")
COUNTER_NAMES = ("steps", "rejected_steps", "rhs_evaluations", "jacobian_evaluations",
                 "lu_decompositions")

#: CF standard names of ``mole_fraction_of_X_in_air`` for species that have one
#: (CF standard name table; names recalled from memory).
CF_MOLE_FRACTION_NAMES: Mapping[str, str] = {
    "O3": "ozone", "NO": "nitrogen_monoxide", "NO2": "nitrogen_dioxide",
    "NO3": "nitrate_radical", "N2O5": "dinitrogen_pentoxide", "HNO3": "nitric_acid",
    "HO2NO2": "peroxynitric_acid", "N2O": "nitrous_oxide", "ClO": "chlorine_monoxide",
    "OClO": "chlorine_dioxide", "Cl2O2": "dichlorine_peroxide", "HCl": "hydrogen_chloride",
    "HOCl": "hypochlorous_acid", "ClONO2": "chlorine_nitrate", "BrO": "bromine_monoxide",
    "HBr": "hydrogen_bromide", "HOBr": "hypobromous_acid", "BrONO2": "bromine_nitrate",
    "BrCl": "bromine_chloride", "CH4": "methane", "H2O": "water_vapor",
    "CO": "carbon_monoxide", "CO2": "carbon_dioxide", "OH": "hydroxyl_radical",
    "HO2": "hydroperoxyl_radical", "H2O2": "hydrogen_peroxide", "CH2O": "formaldehyde",
    "H2": "molecular_hydrogen", "CH3Cl": "methyl_chloride", "CH3Br": "methyl_bromide",
    "CFCl3": "cfc11", "CF2Cl2": "cfc12", "CH3OOH": "methyl_hydroperoxide",
}


# ---------------------------------------------------------------------------
# initial state and fixed species
# ---------------------------------------------------------------------------
def initial_state(species: tuple[str, ...], initial: Mapping[str, tuple[float, str]],
                  air_density: float) -> np.ndarray:
    """Number densities [cm-3] of ``species`` at the start.

    ``initial`` maps species to ``(value, "mole_fraction")`` or ``(value,
    "number_density")``; mole fractions are multiplied by ``air_density``
    [cm-3]; unlisted species are zero.
    """
    y0 = np.zeros(len(species))
    for i, name in enumerate(species):
        if name in initial:
            value, kind = initial[name]
            y0[i] = value * air_density if kind == "mole_fraction" else value
    return y0


# ---------------------------------------------------------------------------
# building the parts
# ---------------------------------------------------------------------------
def _series(value, *, name: str):
    """Scenario value (float or TimeSeriesSpec) -> what Environment takes."""
    from .environment.history import TimeSeries
    if isinstance(value, TimeSeriesSpec):
        return TimeSeries(value.times_s, value.values, name=name)
    return value


def build_environment(scenario: Scenario):
    """The :class:`boxchem.environment.history.Environment` of a scenario.

    A trajectory file gives the quantities it holds; scenario keys give the
    rest (the scenario loader rejects a quantity given both ways).  Without a
    temperature the U.S. Standard Atmosphere 1976 temperature at the box
    altitude is used.
    """
    from .environment.atmosphere import standard_atmosphere
    from .environment.history import Environment, PscThresholdRule, load_trajectory

    kwargs: dict[str, Any] = {}
    if scenario.trajectory is not None:
        kwargs.update(load_trajectory(scenario.trajectory))
    pressure = scenario.pressure if scenario.pressure is not None else scenario.location_pressure_pa
    given = {
        "latitude": (scenario.latitude, "[location].latitude"),
        "longitude": (scenario.longitude, "[location].longitude"),
        "altitude": (scenario.altitude_m, "[location].altitude"),
        "temperature": (scenario.temperature, "[environment].temperature"),
        "pressure": (pressure, "[environment].pressure"),
    }
    for key, (value, name) in given.items():
        if value is not None and key not in kwargs:
            kwargs[key] = _series(value, name=name)
    if "temperature" not in kwargs:
        if "altitude" in kwargs and not hasattr(kwargs["altitude"], "times_s"):
            altitude = float(kwargs["altitude"])
        else:
            from .environment.atmosphere import altitude_from_pressure
            p = kwargs["pressure"]
            altitude = float(altitude_from_pressure(p.values[0] if hasattr(p, "values") else p))
        kwargs["temperature"] = float(standard_atmosphere(altitude)[1])
    def area(value, name):
        if isinstance(value, ThresholdRuleSpec):
            return PscThresholdRule(area_cm2_cm3=value.area, threshold_K=value.below, width_K=value.width)
        if isinstance(value, EquilibriumRuleSpec):   # thermodynamic PSC area (environment/psc.py)
            from .environment.psc import IceEquilibriumRule, NatEquilibriumRule
            rule = NatEquilibriumRule if value.kind == "nat" else IceEquilibriumRule
            return rule(number_density_cm3=value.number_density, geometric_std=value.geometric_std)
        return _series(value, name=name)

    def sulfate(value):
        if isinstance(value, StsRuleSpec):     # liquid STS droplets (environment/sts.py)
            from .environment.sts import StsEquilibriumRule
            return StsEquilibriumRule(value.h2so4, number_density_cm3=value.number_density,
                                      geometric_std=value.geometric_std)
        return _series(value, name="[environment].sulfate_surface_area")

    return Environment(
        scenario.start,
        ozone_column=_series(scenario.ozone_column_du, name="[environment].ozone_column"),
        psc_area=area(scenario.psc_surface_area, "[environment].psc_surface_area"),
        sulfate_area=sulfate(scenario.sulfate_surface_area),
        ice_area=area(scenario.ice_surface_area, "[environment].ice_surface_area"),
        **kwargs)


# ---------------------------------------------------------------------------
# the Dataset of the output contract
# ---------------------------------------------------------------------------
def reaction_definition(reaction) -> str:
    """'arrhenius A=8e-12 E/R=2060.0 Tref=300.0 n=0.0': the law and its parameters as run.

    Keys sorted, floats in their shortest exact form (repr), so two runs differ
    in this text exactly when a parameter differs (read by ``boxchem compare``).
    """
    params = " ".join(f"{k}={v!r}" if isinstance(v, float) else f"{k}={v}"
                      for k, v in sorted(reaction.parameters.items()))
    return f"{reaction.law} {params}".strip()


def _species_attrs(mechanism) -> dict[str, np.ndarray]:
    names = mechanism.species_names
    return {
        "species_is_fixed": np.array([int(s.fixed) for s in mechanism.species], dtype=np.int8),
        "species_standard_name": np.array(
            [f"mole_fraction_of_{CF_MOLE_FRACTION_NAMES[n]}_in_air" if n in CF_MOLE_FRACTION_NAMES
             else "" for n in names], dtype=object),
    }


def derived_outputs(number_density: np.ndarray, reaction_rate: np.ndarray, air_density: np.ndarray,
                    family_weights: np.ndarray, cycle_coefficients: np.ndarray) -> dict[str, np.ndarray]:
    """Mole fractions, family densities and cycle rates from the state at the output times.

    ``number_density`` (..., time, species) [cm-3], ``reaction_rate`` (..., time,
    reaction) [cm-3 s-1], ``air_density`` (time,) [cm-3]; leading member
    dimensions are allowed (the ensemble engine passes a batch).  One
    implementation for single runs and member files.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        mole_fraction = number_density / np.asarray(air_density, dtype=float)[:, None]

    def flat(fn, values, matrix):   # one 2-D product (a stacked 3-D matmul is ~3x slower)
        values = np.asarray(values, dtype=float)
        if values.size == 0:
            return np.zeros(values.shape[:-1] + (np.shape(matrix)[1],))
        return fn(values.reshape(-1, values.shape[-1]), matrix).reshape(values.shape[:-1] + (-1,))
    return {"mole_fraction": mole_fraction,
            "family_number_density": flat(family_number_density, number_density, family_weights),
            "cycle_rate": flat(cycle_rate, reaction_rate, cycle_coefficients)}


def assemble_dataset(*, mechanism, scenario: Scenario, times_s: np.ndarray,
                     number_density: np.ndarray, rate_coefficient: np.ndarray,
                     reaction_rate: np.ndarray, environment_state, counters: Mapping[str, Any],
                     status: str, message: str, wall_time_s: float,
                     photolysis_sources: Mapping[str, str] | None = None,
                     photolysis_data: Mapping[str, str] | None = None) -> xr.Dataset:
    """Build the output Dataset (DEVELOPERS.md "Output") from arrays at the output times.

    ``number_density`` [cm-3] has shape (time, species) in mechanism species
    order (variable and fixed species), ``rate_coefficient`` and
    ``reaction_rate`` (time, reaction) in mechanism reaction order.
    ``environment_state`` is ``Environment.at(times_s)``.
    """
    times = scenario.start + np.round(np.asarray(times_s) * 1e9).astype("timedelta64[ns]")
    air = np.asarray(environment_state.air_density, dtype=float)
    weights = family_weight_matrix(mechanism)
    cycle_coefficients = cycle_coefficient_matrix(mechanism)
    derived = derived_outputs(number_density, reaction_rate, air, weights, cycle_coefficients)
    mole_fraction = derived["mole_fraction"]
    families = derived["family_number_density"]
    cycles = derived["cycle_rate"]

    species = list(mechanism.species_names)
    reactions = list(mechanism.reaction_ids)
    coords: dict[str, Any] = {
        "time": ("time", times, {"long_name": "time (UTC)", "standard_name": "time",
                                 "axis": "T"}),
        "species": ("species", np.array(species, dtype=object),
                    {"long_name": "species name as in the mechanism"}),
        "reaction": ("reaction", np.array(reactions, dtype=object),
                     {"long_name": "reaction id as in the mechanism"}),
        "family": ("family", np.array([f.name for f in mechanism.families], dtype=object),
                   {"long_name": "species family name as in the mechanism"}),
        "cycle": ("cycle", np.array([c.name for c in mechanism.cycles], dtype=object),
                  {"long_name": "catalytic cycle name as in the mechanism"}),
        "equation": ("reaction", np.array([r.equation for r in mechanism.reactions], dtype=object),
                     {"long_name": "reaction equation as written in the mechanism"}),
        "rate_law": ("reaction", np.array([r.law for r in mechanism.reactions], dtype=object),
                     {"long_name": "rate-law form of the reaction"}),
        "rate_coefficient_units": ("reaction", np.array(
            [r.rate_coefficient_units for r in mechanism.reactions], dtype=object),
            {"long_name": "units of rate_coefficient for this reaction (molecule-based)"}),
        "reaction_definition": ("reaction", np.array([reaction_definition(r) for r in mechanism.reactions],
                                                      dtype=object),
                                {"long_name": "rate law and its parameters as run (before [scale])"}),
        "rate_scale_factor": ("reaction", np.array([float(scenario.scale.get(r, 1.0)) for r in reactions]),
                              {"units": "1", "long_name": "factor of the scenario's [scale] on the "
                               "rate coefficient"}),
        "cycle_description": ("cycle", np.array([cycle_description(c, mechanism) for c in mechanism.cycles],
                                                dtype=object), {"long_name": "readable label of the cycle"}),
        "cycle_family": ("cycle", np.array([c.family for c in mechanism.cycles], dtype=object),
                         {"long_name": "family destroyed by the cycle"}),
        "altitude": ((), float(np.asarray(environment_state.altitude).ravel()[0]),
                     {"units": "m", "standard_name": "altitude", "positive": "up", "axis": "Z",
                      "long_name": "geometric altitude of the box at the start"}),
    }
    for name, values in _species_attrs(mechanism).items():
        attrs = ({"long_name": "1 for fixed species (following the air), 0 for integrated ones"}
                 if name == "species_is_fixed" else
                 {"long_name": "CF standard name of the mole fraction of this species "
                               "(empty where CF has none)"})
        coords[name] = ("species", values, attrs)
    if photolysis_sources is not None:
        coords["photolysis_source"] = ("reaction", np.array(
            [photolysis_sources.get(r, "") for r in reactions], dtype=object),
            {"long_name": "how J was computed: spectral, parametric, or empty (not photolysis)"})

    def tvar(values, units, long_name, standard_name=None):
        attrs = {"units": units, "long_name": long_name}
        if standard_name:
            attrs["standard_name"] = standard_name
        return ("time", np.asarray(values, dtype=float), attrs)

    st = environment_state
    data_vars = {
        "stoichiometry": (("species", "reaction"), net_stoichiometry_matrix(mechanism),
                          {"units": "1", "long_name": "net stoichiometric coefficient of each "
                           "species in each reaction (products minus reactants; M, hv left out)"}),
        "family_weight": (("family", "species"), weights.T,
                          {"units": "1", "long_name": "weight of each species in each family"}),
        "cycle_coefficient": (("cycle", "reaction"), cycle_coefficients.T,
                              {"units": "1", "long_name": "coefficient of each reaction rate in "
                               "the rate of each catalytic cycle"}),
        "number_density": (("time", "species"), number_density,
                           {"units": "cm-3", "long_name": "number density of each species"}),
        "mole_fraction": (("time", "species"), mole_fraction,
                          {"units": "1", "long_name": "mole fraction of each species in air",
                           "comment": "per-species CF standard names are in the auxiliary "
                                      "coordinate species_standard_name (CF allows one "
                                      "standard_name per variable)"}),
        "rate_coefficient": (("time", "reaction"), rate_coefficient,
                             {"long_name": "rate coefficient of each reaction (after [scale])",
                              "comment": "units differ by reaction order: s-1, cm3 s-1 or cm6 "
                                         "s-1 (molecule-based); see the auxiliary coordinate "
                                         "rate_coefficient_units"}),
        "reaction_rate": (("time", "reaction"), reaction_rate,
                          {"units": "cm-3 s-1", "long_name": "rate of each reaction"}),
        "family_number_density": (("time", "family"), families,
                                  {"units": "cm-3", "long_name": "number density of each family "
                                   "(weighted sum of its members)"}),
        "cycle_rate": (("time", "cycle"), cycles,
                       {"units": "cm-3 s-1", "long_name": "rate at which each catalytic cycle "
                        "destroys its family (see cycle_family)"}),
        "solar_zenith_angle": tvar(st.solar_zenith_angle, "degree", "solar zenith angle at the box",
                                   "solar_zenith_angle"),
        "temperature": tvar(st.temperature, "K", "air temperature", "air_temperature"),
        "pressure": tvar(st.pressure, "Pa", "air pressure", "air_pressure"),
        "air_number_density": tvar(air, "cm-3", "number density of air molecules"),
        "latitude": tvar(st.latitude, "degrees_north", "latitude of the box", "latitude"),
        "longitude": tvar(st.longitude, "degrees_east", "longitude of the box", "longitude"),
        "ozone_column": tvar(st.ozone_column, "DU", "overhead ozone column used for photolysis"),
        "psc_surface_area": tvar(st.psc_area, "cm2 cm-3",
                                 "surface area density of polar stratospheric cloud particles"),
        "sulfate_surface_area": tvar(st.sulfate_area, "cm2 cm-3",
                                     "surface area density of sulfate aerosol"),
        "ice_surface_area": tvar(st.ice_area, "cm2 cm-3",
                                 "surface area density of ice polar stratospheric cloud particles "
                                 "(surface reactions on=ice)"),
    }
    attrs: dict[str, Any] = {
        "Conventions": "CF-1.10",
        "title": f"boxchem run of {scenario.source}",
        "boxchem_result_kind": "run",
        "source": f"boxchem {__version__} box model",
        "boxchem_version": __version__,
        "mechanism_source": str(mechanism.source or scenario.mechanism_path),
        "mechanism_sha256": mechanism.text_sha256,
        "scenario_source": scenario.source,
        "scenario": scenario.text,
        "scenario_overrides": json.dumps({k: str(v) for k, v in scenario.overrides.items()}),
        "start_time": str(np.datetime_as_string(scenario.start, unit="s")) + "Z",
        "solver_rtol": scenario.rtol,
        "solver_atol": scenario.atol,
        "solver_atol_units": "cm-3",
        "solver_method": scenario.solver_method,
        "photolysis_method": scenario.photolysis_method,
        "albedo": scenario.albedo,
        "integration_status": status,
        "integration_message": message,
        "wall_time_s": float(wall_time_s),
        "date_created": _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
    }
    for name, value in counters.items():
        attrs[f"solver_{name}"] = int(value)
    attrs["history"] = f"{attrs['date_created']}: created by boxchem {__version__} run"
    # what ran, so that the file alone reproduces it (docs/provenance.md)
    from .io.provenance import provenance_attrs, reaction_coordinates
    coords.update(reaction_coordinates(mechanism, photolysis_data))
    attrs.update(provenance_attrs(mechanism, scenario))
    return xr.Dataset(data_vars=data_vars, coords=coords, attrs=attrs)


def _conservation_guard(ds: xr.Dataset, setup: "RunSetup") -> None:
    """Element totals and fixed mixing ratios at the end of the run -> ds.attrs (docs/guards.md)."""
    from .diagnostics.conservation import guard_run
    guard_run(ds, setup.mechanism, setup.scenario)


# ---------------------------------------------------------------------------
# the run
# ---------------------------------------------------------------------------
@dataclass
class RunSetup:
    """Everything a run needs, built once from a scenario (see :func:`prepare`)."""

    scenario: Scenario
    mechanism: Any
    environment: Any
    kinetics: Any
    photolysis: Any
    coefficients: Any
    y0: np.ndarray
    output_times_s: np.ndarray
    breakpoints_s: np.ndarray


def prepare(scenario: Scenario) -> RunSetup:
    """Build environment, rate model, compiled kinetics, initial state and times of a scenario."""
    from .mechanism.ratelaws import RateEvaluator
    from .solver.coefficients import RateCoefficientModel
    from .solver.kinetics import CompiledKinetics

    mechanism = scenario.mechanism
    environment = build_environment(scenario)
    kinetics = CompiledKinetics(mechanism)
    photolysis = None
    if any(r.law == "photolysis" for r in mechanism.reactions):
        from .photolysis.rates import PhotolysisRates
        altitude = float(np.asarray(environment.at(0.0).altitude))
        photolysis = PhotolysisRates(mechanism, altitude_m=altitude, albedo=scenario.albedo,
                                     method=scenario.photolysis_method,
                                     cross_sections={rid: str(path) for rid, path
                                                     in scenario.photolysis_cross_sections.items()})
        if scenario.ozone_column_follows_box:
            from .photolysis.ozonefollow import OzoneFollowingPhotolysis
            if "O3" not in kinetics.variable_species:
                raise ScenarioError(
                    f"{scenario.source}: [photolysis].ozone_column_follows_box: O3 is a fixed "
                    f"species in {mechanism.source or 'the mechanism'}; the column can follow only "
                    f"an integrated O3 (declare O3 without 'fixed', or set the key to false)")
            photolysis = OzoneFollowingPhotolysis(
                photolysis, environment, kinetics.variable_species.index("O3"),
                scenario.ozone_loss_layer_depth_m)
    fixed_fractions = {name: value for name, (value, kind) in scenario.initial.items()
                       if kind == "mole_fraction" and mechanism.species_by_name(name).fixed}
    coefficients = RateCoefficientModel(mechanism, RateEvaluator(mechanism), photolysis,
                                        environment, scale=scenario.scale,
                                        fixed_mole_fractions=fixed_fractions, kinetics=kinetics)
    air0 = float(environment.at(0.0).air_density)
    y0 = initial_state(kinetics.variable_species, scenario.initial, air0)
    # state-dependent surface columns of the shared tables at the group's start composition
    coefficients.set_surface_reference(y0)
    times = scenario.output_times_s()
    breaks = np.asarray(environment.horizon_crossings(times[0], times[-1]), dtype=float)
    return RunSetup(scenario, mechanism, environment, kinetics, photolysis, coefficients, y0,
                    times, breaks)


def species_number_density(setup: RunSetup, y: np.ndarray, fixed: np.ndarray) -> np.ndarray:
    """Number densities [cm-3] of every mechanism species in mechanism order, (..., time, species).

    ``y`` (..., time, n_variable) in ``kinetics.variable_species`` order; ``fixed``
    (time, n_fixed) in ``kinetics.fixed_species`` order (shared by a batch).
    """
    kinetics, mechanism = setup.kinetics, setup.mechanism
    index = {n: ("y", i) for i, n in enumerate(kinetics.variable_species)}
    index.update({n: ("fixed", i) for i, n in enumerate(kinetics.fixed_species)})
    number_density = np.empty(y.shape[:-1] + (len(mechanism.species),))
    for j, name in enumerate(mechanism.species_names):
        source, i = index[name]
        number_density[..., j] = y[..., i] if source == "y" else fixed[..., i]
    return number_density


def _dataset_from_result(setup: RunSetup, result, *, status: str, message: str) -> xr.Dataset:
    """Output Dataset from a :class:`~boxchem.solver.timeloop.TimeLoopResult`."""
    mechanism, kinetics = setup.mechanism, setup.kinetics
    times = np.asarray(result.times, dtype=float)
    y, k, fixed = (np.asarray(result.y, float), np.asarray(result.k, float),
                   np.asarray(result.fixed, float))
    number_density = species_number_density(setup, y, fixed)
    rates = kinetics.rates(y, k, fixed) if times.size else np.zeros((0, len(mechanism.reactions)))
    state = setup.environment.at(times)
    if getattr(result, "surface_areas", None) is not None and times.size:
        # NAT / STS / ice areas from this box's own composition at the output times
        import dataclasses
        psc, sulfate, ice = (np.asarray(a, dtype=float)[:times.size] for a in result.surface_areas)
        state = dataclasses.replace(state, psc_area=psc, sulfate_area=sulfate, ice_area=ice)
    if hasattr(setup.photolysis, "observe") and times.size:
        # [photolysis].ozone_column_follows_box: write the column J used (without its
        # one-step lag), from the box's O3 at the output times
        import dataclasses
        from .photolysis.ozonefollow import box_ozone_column
        air = np.asarray(state.air_density, dtype=float)
        x_o3 = number_density[:, mechanism.species_names.index("O3")] / air
        column = box_ozone_column(state.ozone_column, x_o3[0], x_o3, air,
                                  setup.photolysis.layer_depth_m)
        state = dataclasses.replace(state, ozone_column=column)
    counters = {name: getattr(result, name) for name in COUNTER_NAMES}
    counters["coefficient_evaluations"] = getattr(result, "coefficient_evaluations", 0)
    sources = getattr(setup.photolysis, "source", None)
    data_used = getattr(setup.photolysis, "data_used", None)
    return assemble_dataset(mechanism=mechanism, scenario=setup.scenario, times_s=times,
                            number_density=number_density, rate_coefficient=k,
                            reaction_rate=rates, environment_state=state, counters=counters,
                            status=status, message=message,
                            wall_time_s=getattr(result, "wall_time_s", 0.0),
                            photolysis_sources=sources, photolysis_data=data_used)


def solver_options(scenario: Scenario) -> dict[str, Any]:
    """The solver keyword arguments a scenario asks for (rtol, atol, max_step, method)."""
    from .solver import rosenbrock
    return {"rtol": scenario.rtol, "atol": scenario.atol,
            "max_step": scenario.max_step_s if scenario.max_step_s else np.inf,
            "method": getattr(rosenbrock, scenario.solver_method.upper())}


def state_observer(setup: RunSetup, surface_feedback: str = "member", ozone_feedback: str = "member"):
    """The time loop's ``on_accept``: what must see the box's state as it runs, or None.

    With ``ozone_feedback="observe"`` (the earlier one-member treatment, also what the
    numpy reference loop needs) the ozone column following the box
    (``photolysis.observe``; with "member", the default, the batch time loop gives each
    member its own column itself, ``photolysis.ozonefollow.MemberOzoneColumns``) and, with ``surface_feedback="rebuild"`` (the earlier per-window table rebuild, also
    what the numpy reference loop needs), state-dependent surfaces
    (``coefficients.observe_state``, docs/heterogeneous.md).  With "member" (default) the
    batch time loop gives each member its own surface k itself (solver/statesurfaces.py).
    The gas/condensed phase equilibrium is not an observer: it changes the state, and
    goes to the time loop as ``state_map`` (:func:`phase_state_map`).
    """
    observers = [getattr(setup.photolysis, "observe", None) if ozone_feedback == "observe" else None]
    if getattr(setup.coefficients, "state_dependent", False) and (
            surface_feedback == "rebuild" or getattr(setup.coefficients, "state_surfaces", None) is None):
        observers.append(setup.coefficients.observe_state)
    observers = [f for f in observers if f is not None]
    if len(observers) <= 1:
        return observers[0] if observers else None

    def observe(t_s, y):
        for f in observers:
            f(t_s, y)
    return observe


def state_feedback(setup: RunSetup) -> bool:
    """True when some k or the state itself follows the box's composition as it runs:
    state-dependent surfaces, the ozone column following the box, or the phase
    equilibrium (``undifferentiated_feedback`` says which of them a tangent run does not
    differentiate)."""
    return bool(getattr(setup.coefficients, "state_dependent", False)
                or getattr(setup.photolysis, "observe", None) is not None
                or phase_state_map(setup) is not None)


def undifferentiated_feedback(setup: RunSetup) -> list[str]:
    """The state feedbacks of a run that a tangent-linear run does not differentiate (empty
    when it differentiates all): the ozone column following the box (``photolysis.observe``)
    and state-dependent k observed through ``observe_state`` (no per-member surfaces).  The
    state-dependent surfaces and the phase equilibrium are differentiated
    (``solver/tangent_feedback.py``)."""
    out = []
    if getattr(setup.photolysis, "observe", None) is not None:
        out.append("the ozone column following the box")
    if getattr(setup.coefficients, "state_dependent", False) and \
            getattr(setup.coefficients, "state_surfaces", None) is None:
        out.append("state-dependent k observed per window (no per-member surfaces)")
    return out


def phase_state_map(setup: RunSetup):
    """The time loop's ``state_map``: the gas/condensed partition of HNO3 and H2O over NAT,
    STS and ice (``environment/condensation.py``), or None when the run has none."""
    from .environment.condensation import phase_equilibrium_for
    phase = phase_equilibrium_for(setup.environment, setup.kinetics.variable_species)
    return None if phase is None else phase.map_state


def integrate(setup: RunSetup, *, progress=None, surface_feedback: str = "member",
              compiled: bool | None = None, ozone_feedback: str = "member"):
    """Integrate one box of a prepared setup -> :class:`~boxchem.solver.timeloop.TimeLoopResult`.

    ``surface_feedback``: "member" (default) or "rebuild" (the earlier per-window table
    rebuild; see ``integrate_batch``); ``ozone_feedback``: "member" (default) or "observe"
    (the earlier one-member treatment of the ozone column following the box; see
    ``integrate_batch``); ``compiled``: False for the numpy reference loop.
    Raises :class:`~boxchem.errors.IntegrationError` (time in s since the start,
    ``partial_result`` a TimeLoopResult) when the integrator fails.
    """
    from .solver.compiled import jit_available
    from .solver.timeloop import integrate_box
    if compiled is False or not jit_available():
        surface_feedback = "member"      # the reference loop observes the state itself
        ozone_feedback = "observe"
    return integrate_box(setup.kinetics, setup.coefficients, setup.y0, setup.output_times_s,
                         breakpoints_s=setup.breakpoints_s, progress=progress,
                         on_accept=state_observer(setup, surface_feedback, ozone_feedback),
                         surface_feedback=surface_feedback, compiled=compiled,
                         state_map=phase_state_map(setup), ozone_feedback=ozone_feedback,
                         **solver_options(setup.scenario))


def run(scenario_or_path: Scenario | str | Path, *, scale: Mapping[str, float] | None = None,
        progress: bool | Any = False, **overrides: Any) -> xr.Dataset:
    """Run a scenario and return the output Dataset (DEVELOPERS.md, "Output").

    ``scenario_or_path``: a :class:`Scenario`, a path, or a shipped name.
    ``scale``: reaction id -> factor, multiplied onto the scenario's ``[scale]``.
    ``overrides``: scenario values to replace (see :meth:`Scenario.with_overrides`).
    ``progress``: True for a progress bar on stderr (shown only on a terminal),
    or a callable ``progress(t_seconds)``.

    Raises :class:`~boxchem.errors.IntegrationError` when the integrator fails;
    its ``partial_result`` is the Dataset up to the last output time reached.
    """
    from .progress import ProgressBar

    scenario = (scenario_or_path if isinstance(scenario_or_path, Scenario)
                else load_scenario(scenario_or_path))
    if scale or overrides:
        scenario = scenario.with_overrides(scale=scale, **overrides)
    wall0 = _time.perf_counter()
    setup = prepare(scenario)
    bar = None
    if progress is True:
        from .warmup import cold_start_note
        note = cold_start_note()
        if note:
            import sys
            print(note, file=sys.stderr)
        bar = ProgressBar(scenario.duration_s)
        callback = bar
    else:
        callback = progress or None
    try:
        result = integrate(setup, progress=callback)
    except (ZeroDivisionError, FloatingPointError, OverflowError) as exc:
        # arithmetic faults inside the compiled loop (e.g. k overflowing to inf) are failures of
        # this integration, reported like the integrator's own, never as a traceback
        if bar is not None:
            bar.close()
            bar = None
        raise IntegrationError(f"numerical failure in the integrator ({type(exc).__name__}: {exc}); "
                               f"check rate coefficients, [scale] factors and tolerances") from None
    except IntegrationError as exc:
        if isinstance(exc.time, (int, float, np.floating)):
            seconds = float(exc.time)
            exc.time = (f"{np.datetime_as_string(scenario.start + np.timedelta64(int(round(seconds * 1e9)), 'ns'), unit='s')}Z"
                        f" ({seconds:.6g} s after the start)")
        partial = exc.partial_result
        if partial is not None and not isinstance(partial, xr.Dataset):
            exc.partial_result = _dataset_from_result(setup, partial, status="failed",
                                                      message=str(exc))
            _conservation_guard(exc.partial_result, setup)
            exc.partial_result.attrs["wall_time_s"] = _time.perf_counter() - wall0
        raise
    finally:
        if bar is not None:
            bar.close()
    ds = _dataset_from_result(setup, result, status="success", message=result.message)
    _conservation_guard(ds, setup)
    ds.attrs["wall_time_s"] = _time.perf_counter() - wall0
    # partial user spectra given in the scenario (the mechanism's own are its warnings)
    ds.attrs["photolysis_notes"] = "\n".join(
        f"[photolysis].cross_sections.{rid}: {note}"
        for rid, note in getattr(setup.photolysis, "notices", ()))
    ds.attrs["solver_breakpoints"] = int(setup.breakpoints_s.size)
    from .environment.condensation import phase_equilibrium_for
    phases = phase_equilibrium_for(setup.environment, setup.kinetics.variable_species)
    ds.attrs["phase_equilibrium"] = (phases.describe() if phases is not None else
                                     "none: gas-phase HNO3 and H2O are not taken up into particles")
    return ds
