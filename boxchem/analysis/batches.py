"""One batch of members on one shared setup: the unit of work every back-end runs.

``run_batch(task)`` is what the in-process loop, a local worker process and a
dask worker call.  It builds the setup of the task's group (mechanism,
environment, J tables, k(t) model, breakpoints, output times - via
:func:`boxchem.runner.prepare`) once per process and keeps it for the next
batches of the same group; integrates the members together with the
solver's batch call; and returns only the variables the user saves.  A
member's k multipliers are ln f offsets on the shared tables
(``integrate_batch(log_multiplier=...)``), never a new table.

Nothing here raises for a member's failure: integration failures, setup
errors and time limits come back as member status and message.
"""
from __future__ import annotations

import dataclasses
import time as _time
from collections import OrderedDict
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..errors import BoxchemError

__all__ = ["BatchTask", "BatchOutput", "run_batch", "SAVEABLE", "DEFAULT_SAVE", "TIME_SERIES",
           "transferable_scenario", "MemberTimeLimit"]

#: per-member variables a member file can hold -> dims after ``member`` (as in a single run)
SAVEABLE: dict[str, tuple[str, ...]] = {
    "mole_fraction": ("time", "species"),
    "number_density": ("time", "species"),
    "family_number_density": ("time", "family"),
    "cycle_rate": ("time", "cycle"),
    "rate_coefficient": ("time", "reaction"),
    "reaction_rate": ("time", "reaction"),
    "temperature": ("time",), "pressure": ("time",), "air_number_density": ("time",),
    "solar_zenith_angle": ("time",), "latitude": ("time",), "longitude": ("time",),
    "ozone_column": ("time",), "psc_surface_area": ("time",), "sulfate_surface_area": ("time",),
    "ice_surface_area": ("time",),
}
TIME_SERIES = {"temperature": "temperature", "pressure": "pressure",
               "air_number_density": "air_density", "solar_zenith_angle": "solar_zenith_angle",
               "latitude": "latitude", "longitude": "longitude", "ozone_column": "ozone_column",
               "psc_surface_area": "psc_area", "sulfate_surface_area": "sulfate_area",
               "ice_surface_area": "ice_area"}
DEFAULT_SAVE = ("mole_fraction", "family_number_density", "cycle_rate", "temperature", "pressure",
                "air_number_density", "solar_zenith_angle")
#: setups kept per process (a worker sees the batches of a few groups in turn)
SETUP_CACHE_SIZE = 2


class MemberTimeLimit(BoxchemError):
    """A member (or batch) ran longer than its time limit."""


@dataclass
class BatchTask:
    """A batch of members of one setup group (picklable: sent to workers).

    ``scenario``: the group's base scenario without its mechanism (see
    :func:`transferable_scenario`) or, in-process, the Scenario itself;
    ``overrides``: the group's setup values (section.key -> value), with
    ``origins`` naming where they came from for error messages;
    ``rows``: member indices; ``scale`` (len(rows), n_reactions) factors on k;
    ``initial`` (len(rows), n_variable) or None: initial number densities
    [cm-3] given per member where ``initial_mask`` is True (else the group's).
    """

    batch_id: int
    group: int
    scenario: Any
    overrides: tuple[tuple[str, Any], ...]
    origins: dict
    rows: np.ndarray
    scale: np.ndarray
    initial_columns: tuple[str, ...]
    initial_values: list
    save: tuple[str, ...]
    time_limit_s: float | None = None
    step_policy: str = "auto"           # integrate_batch's step_policy
    #: a member that fails the conservation guard is a failed member (``--strict``)
    strict: bool = False
    attempt: int = 0
    mechanism_sha256: str = ""
    table_source: str = "<table>"
    table_where: list = field(default_factory=list)

    @property
    def key(self) -> tuple:
        return (id(self.scenario) if not isinstance(self.scenario, tuple) else self.scenario[1],
                self.mechanism_sha256, self.overrides)


@dataclass
class BatchOutput:
    """What a batch sends back: the saved arrays and each member's status."""

    batch_id: int
    rows: np.ndarray
    arrays: dict
    status: np.ndarray            # member file codes: 1 success, 2 failed
    message: list
    failure_time_s: np.ndarray
    wall_time_s: float = 0.0
    setup_time_s: float = 0.0
    steps: int = 0
    #: "" for a normal result; "timeout" or "error" when the batch as a whole did not run
    #: (the engine then re-runs its members one by one)
    fault: str = ""
    #: the conservation guard per member (``diagnostics.conservation.member_checks``), kept
    #: for failed members too; ``check_names`` = (elements, fixed species) of its columns
    checks: dict = field(default_factory=dict)
    check_names: tuple = ((), ())


def transferable_scenario(scenario) -> tuple:
    """A picklable form of a Scenario: (scenario without its mechanism, cache key).

    The mechanism is re-read in the worker from ``scenario.mechanism_path`` and
    checked against the parent's ``mechanism_sha256`` (see :func:`_scenario_of`).
    """
    bare = dataclasses.replace(scenario, mechanism=None)
    return (bare, f"{scenario.source}:{scenario.mechanism.text_sha256}:{hash(scenario.text)}")


_MECHANISMS: dict = {}
_SETUPS: "OrderedDict[tuple, Any]" = OrderedDict()


def _scenario_of(task: BatchTask):
    """The group's Scenario in this process (mechanism re-read once per process when sent)."""
    if not isinstance(task.scenario, tuple):
        base = task.scenario
    else:
        from ..mechanism.parser import load_mechanism
        bare = task.scenario[0]
        mech = _MECHANISMS.get(task.mechanism_sha256)
        if mech is None:
            mech = load_mechanism(bare.mechanism_path)
            if mech.text_sha256 != task.mechanism_sha256:
                raise BoxchemError(f"{bare.mechanism_path}: the mechanism changed on disk after the "
                                   f"ensemble started (sha256 {mech.text_sha256[:12]}, expected "
                                   f"{task.mechanism_sha256[:12]}); restart the ensemble")
            _MECHANISMS[task.mechanism_sha256] = mech
        base = dataclasses.replace(bare, mechanism=mech)
    if not task.overrides:
        return base
    from .members import apply_setup_overrides
    return apply_setup_overrides(base, dict(task.overrides), task.origins)


class _Group:
    """A prepared setup and what every batch of it shares: exact k, fixed and the
    environment at the output times."""

    def __init__(self, setup):
        from ..runner import solver_options
        from ..diagnostics import cycle_coefficient_matrix, family_weight_matrix
        self.setup = setup
        self.options = solver_options(setup.scenario)
        self.weights = family_weight_matrix(setup.mechanism)
        self.cycles = cycle_coefficient_matrix(setup.mechanism)
        self.state = setup.environment.at(setup.output_times_s)
        self.air0 = float(np.asarray(setup.environment.at(0.0).air_density))
        self.base_multiplier = setup.coefficients.multiplier.copy()
        from ..diagnostics.conservation import ConservationCheck, expected_fixed_fractions
        self.check = ConservationCheck.for_mechanism(
            setup.mechanism, expected_fixed_fractions(setup.mechanism, setup.scenario))
        fixed = setup.kinetics.fixed_species
        missing = [n for n in self.check.fixed if n not in fixed]
        if missing:       # prescribed but not a fixed density of the kinetics: not checkable
            import dataclasses as _dc
            keep = [i for i, n in enumerate(self.check.fixed) if n in fixed]
            self.check = _dc.replace(self.check, fixed=tuple(self.check.fixed[i] for i in keep),
                                     fixed_expected=self.check.fixed_expected[keep])
        self.check_fixed_index = [fixed.index(n) for n in self.check.fixed]
        self.check_variable_index = [setup.kinetics.variable_species.index(n)
                                     for n in self.check.variable]


def _group(task: BatchTask) -> tuple[_Group, float]:
    from ..runner import prepare
    key = task.key
    group = _SETUPS.get(key)
    if group is not None:
        _SETUPS.move_to_end(key)
        return group, 0.0
    t0 = _time.perf_counter()
    group = _Group(prepare(_scenario_of(task)))
    _SETUPS[key] = group
    while len(_SETUPS) > SETUP_CACHE_SIZE:
        _SETUPS.popitem(last=False)
    return group, _time.perf_counter() - t0


def _initial_states(task: BatchTask, group: _Group) -> np.ndarray:
    from ..units import parse_amount
    setup = group.setup
    y0 = np.repeat(setup.y0[None, :], len(task.rows), axis=0)
    species = setup.kinetics.variable_species
    for c, column in enumerate(task.initial_columns):
        j = species.index(column.split(".", 1)[1])
        for i, value in enumerate(task.initial_values[c]):
            if isinstance(value, str):
                try:                      # a number in a text column is still a mole fraction
                    value = float(value)
                except ValueError:
                    pass
            if isinstance(value, str):
                amount, kind = parse_amount(value, where=task.table_where[i] if task.table_where
                                            else column)
                y0[i, j] = amount * group.air0 if kind == "mole_fraction" else amount
            else:
                y0[i, j] = float(value) * group.air0
    return y0


#: position of each surface-area output in ``MemberSurfaceK.areas``
_AREA_POSITION = {"psc_surface_area": 0, "sulfate_surface_area": 1, "ice_surface_area": 2}


def _outputs(group: _Group, y: np.ndarray, k: np.ndarray, save, areas=None,
             ozone_column=None) -> dict[str, np.ndarray]:
    """The saved variables of a batch: y (n, time, n_variable), k (n, time, n_reactions);
    ``areas`` (psc, sulfate, ice) (n, time) from each member's composition, or None;
    ``ozone_column`` (n, time) [DU] each member's own followed column, or None."""
    from ..runner import derived_outputs, species_number_density
    setup = group.setup
    fixed = group.fixed_out
    out: dict[str, np.ndarray] = {}
    n = y.shape[0]
    need_nd = {"number_density", "mole_fraction", "family_number_density"} & set(save)
    need_rates = {"reaction_rate", "cycle_rate"} & set(save)
    air = np.asarray(group.state.air_density, dtype=float)
    nd = species_number_density(setup, y, np.broadcast_to(fixed, (n,) + fixed.shape)) \
        if need_nd else np.zeros((n, y.shape[1], 0))
    rates = setup.kinetics.rates(y, k, np.broadcast_to(fixed, (n,) + fixed.shape)) \
        if need_rates else np.zeros((n, y.shape[1], 0))
    derived = derived_outputs(nd, rates, air, group.weights if need_nd else group.weights[:0],
                              group.cycles if need_rates else group.cycles[:0]) \
        if (need_nd or need_rates) else {}
    for name in save:
        if name == "number_density":
            out[name] = nd
        elif name == "rate_coefficient":
            out[name] = k
        elif name == "reaction_rate":
            out[name] = rates
        elif name in derived:
            out[name] = derived[name]
        elif areas is not None and name in _AREA_POSITION:
            out[name] = areas[_AREA_POSITION[name]]
        elif name == "ozone_column" and ozone_column is not None:
            out[name] = ozone_column
        else:
            series = np.asarray(getattr(group.state, TIME_SERIES[name]), dtype=float)
            out[name] = np.broadcast_to(series, (n,) + series.shape)
    return out


def _time_limit_callback(limit_s: float | None, wall0: float, what: str):
    if not limit_s:
        return None

    def check(t_s):
        if _time.perf_counter() - wall0 > limit_s:
            raise MemberTimeLimit(f"{what} exceeded the time limit of {limit_s:g} s (wall clock) "
                                  f"at {t_s:.6g} s of simulated time")
    return check


def run_batch(task: BatchTask) -> BatchOutput:
    """Integrate one batch (see the module docstring); never raises for a member's failure."""
    wall0 = _time.perf_counter()
    n = len(task.rows)
    try:
        group, setup_s = _group(task)
    except BoxchemError as exc:
        return _all_failed(task, f"setup: {exc}", wall0)
    except Exception as exc:    # a setup that cannot be built is that group's failure, not a crash
        return _all_failed(task, f"setup: {type(exc).__name__}: {exc}", wall0)
    setup = group.setup
    try:
        y0 = _initial_states(task, group)
    except BoxchemError as exc:
        return _all_failed(task, str(exc), wall0)
    with np.errstate(divide="ignore"):
        log_multiplier = np.log(np.asarray(task.scale, dtype=float))
    limit = task.time_limit_s * n if task.time_limit_s else None
    what = f"member {int(task.rows[0])}" if n == 1 else f"batch of {n} members"
    try:
        result = _integrate(group, y0, log_multiplier,
                            _time_limit_callback(limit, _time.perf_counter(), what),
                            task.step_policy)
    except MemberTimeLimit as exc:
        return _all_failed(task, str(exc), wall0, fault="timeout")
    except (BoxchemError, ValueError, FloatingPointError, ZeroDivisionError,
            OverflowError, ArithmeticError) as exc:
        # the whole batch could not be integrated (e.g. absurd factors): every member failed
        return _all_failed(task, f"{type(exc).__name__}: {exc}", wall0, fault="error")
    status = np.where(np.asarray(result.status) == 0, 1, 2).astype(np.int8)
    messages = ["" if s == 1 else str(m) for s, m in zip(status, result.message)]
    checks = _conservation(group, np.asarray(result.y, dtype=float))
    if task.strict:
        # members that fail the guard are failures (their check values are kept)
        from ..diagnostics.conservation import member_failure_messages
        for i, text in member_failure_messages(group.check, checks).items():
            if status[i] == 1:
                status[i] = 2
                messages[i] = f"{text} (a failure under --strict)"
    # each member's k at the output times: the shared exact k times its factors (only when saved
    # or needed for rates: (members, times, reactions) is the largest array of a batch)
    needs_k = {"rate_coefficient", "reaction_rate", "cycle_rate"} & set(task.save)
    with np.errstate(invalid="ignore", over="ignore"):   # failed members are NaN after failing
        # state-dependent surface columns from each member's own composition (member_k)
        k = result.members_k() if needs_k else np.zeros((n, 0, 0))
        areas = (result.surface_k.areas(np.asarray(result.y, dtype=float))
                 if getattr(result, "surface_k", None) is not None else None)
        columns = (result.ozone_j.column(np.asarray(result.y, dtype=float))
                   if getattr(result, "ozone_j", None) is not None else None)
        arrays = _outputs(group, np.asarray(result.y, dtype=float), k, task.save, areas, columns)
    return BatchOutput(task.batch_id, task.rows, arrays, status, messages,
                       np.asarray(result.failure_time_s, dtype=float),
                       wall_time_s=_time.perf_counter() - wall0, setup_time_s=setup_s,
                       steps=int(np.sum(result.steps)), checks=checks,
                       check_names=(group.check.elements, group.check.fixed))


def _conservation(group: _Group, y: np.ndarray) -> dict[str, np.ndarray]:
    """The single run's conservation guard on every member of a batch at once: y
    (members, time, n_variable) [cm-3] -> ``member_checks`` (mole fractions as a run
    file holds them: number density / [M] at the output times)."""
    from ..diagnostics.conservation import member_checks
    air = np.asarray(group.state.air_density, dtype=float)
    with np.errstate(invalid="ignore", over="ignore"):
        x = y[..., group.check_variable_index] / air[None, :, None]
        xf = group.fixed_out[:, group.check_fixed_index] / air[:, None]
    return member_checks(group.check, x, xf[None])


def _integrate(group: _Group, y0: np.ndarray, log_multiplier: np.ndarray, progress,
               step_policy: str = "auto"):
    """The solver's batch call on the group's shared setup."""
    from ..solver.timeloop import integrate_batch
    setup = group.setup
    from ..runner import phase_state_map, state_observer
    # state-dependent surfaces and the ozone column following the box batch: each member's
    # own surface k and J ride on the shared tables as ln offsets (solver/statesurfaces.py,
    # photolysis/ozonefollow.py), so there is no observer
    observe = state_observer(setup)
    result = integrate_batch(setup.kinetics, setup.coefficients, y0, setup.output_times_s,
                             log_multiplier=log_multiplier, breakpoints_s=setup.breakpoints_s,
                             progress=progress, on_accept=observe, state_map=phase_state_map(setup),
                             step_policy=step_policy,
                             **group.options)
    group.fixed_out = np.asarray(result.fixed, dtype=float)
    return result


def _all_failed(task: BatchTask, message: str, wall0: float, *, fault: str = "") -> BatchOutput:
    n = len(task.rows)
    return BatchOutput(task.batch_id, task.rows, {}, np.full(n, 2, dtype=np.int8), [message] * n,
                       np.full(n, np.nan), wall_time_s=_time.perf_counter() - wall0, fault=fault)
