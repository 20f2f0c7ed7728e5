"""Checks a scenario must pass before anything is integrated (docs/guards.md).

The scenario loader calls :func:`scenario_problems` once its values are
converted; each problem is ``(key path, message)`` and becomes one line of the
scenario's :class:`~boxchem.errors.ScenarioError`.  What is checked, and why:

* **Conditions**: every temperature and pressure the box will see (constants,
  series values, trajectory columns) lies in :data:`TEMPERATURE_RANGE_K` /
  :data:`PRESSURE_RANGE_PA` - far outside any atmosphere or laboratory cell,
  so only nonsense (1e-300 K, 1e300 Pa) is refused.
* **Rate coefficients**: every thermal k (after ``[scale]``) is evaluated on a
  grid spanning the scenario's T and [M] range and must be finite, >= 0 and
  below :data:`RATE_COEFFICIENT_LIMITS` for its order (far above the
  gas-kinetic collision limit); the message names the reaction and its
  file:line.  Photolysis and surface factors in ``[scale]`` must be <=
  :data:`MAX_NON_THERMAL_SCALE`.
* **Work**: the number of output times and a lower bound of the number of
  solver steps (``duration / max_step``, plus one step per output time and
  per sunrise/sunset breakpoint) must stay below :data:`MAX_OUTPUT_TIMES`,
  :data:`MAX_RESULT_BYTES` and :data:`MAX_STEPS_ESTIMATE`;
  ``[run].allow_long_run = true`` lifts these limits.
* **Tolerance vs trace species**: for each element the mechanism conserves
  (see :mod:`boxchem.diagnostics.conservation`) with initial total N_E
  [cm-3], ``atol`` must not exceed :data:`ATOL_RESOLUTION` * N_E: the error
  control must resolve the element's total to 0.1 %, or clipping of values
  within atol creates or destroys that element (measured: polar-spring with
  atol 1e8 cm-3 - 2.4 N_Br - gains 47 % Br).  ``[solver].allow_loose_atol =
  true`` accepts such a tolerance (the conservation guard still reports the
  drift at the end).
"""
from __future__ import annotations

import math
from typing import Any, Iterable, Mapping

import numpy as np

__all__ = ["TEMPERATURE_RANGE_K", "PRESSURE_RANGE_PA", "RATE_COEFFICIENT_LIMITS",
           "MAX_NON_THERMAL_SCALE", "MAX_OUTPUT_TIMES", "MAX_RESULT_BYTES", "MAX_STEPS_ESTIMATE",
           "ATOL_RESOLUTION", "scenario_problems", "rate_coefficient_problems",
           "work_problems", "atol_problems", "output_time_count", "minimum_steps"]

#: temperatures accepted anywhere in a scenario [K]
TEMPERATURE_RANGE_K = (50.0, 1000.0)
#: pressures accepted anywhere in a scenario [Pa] (1e-4 Pa: above 130 km; 2e5 Pa: 2 bar)
PRESSURE_RANGE_PA = (1.0e-4, 2.0e5)
#: largest credible k by the units of k (order): 1e13 s-1 is a vibrational frequency;
#: 1e-8 cm3 s-1 is 30x the gas-kinetic collision rate; 1e-25 cm6 s-1 is 1e3x the fastest
#: termolecular associations (common practice, no source)
RATE_COEFFICIENT_LIMITS = {"s-1": 1.0e13, "cm3 s-1": 1.0e-8, "cm6 s-1": 1.0e-25}
#: largest [scale] factor for photolysis and surface reactions (their k is not known here)
MAX_NON_THERMAL_SCALE = 1.0e6
#: output times of one run (each holds every species and reaction)
MAX_OUTPUT_TIMES = 2_000_000
#: estimated in-memory size of one result [bytes] (boxchem.io.outputcheck.estimated_result_bytes)
MAX_RESULT_BYTES = 4 * 2**30
#: lower bound of solver steps (at ~50 us per step this is ~10 minutes)
MAX_STEPS_ESTIMATE = 10_000_000
#: atol must be <= this fraction of every conserved element's initial total [cm-3]
ATOL_RESOLUTION = 1.0e-3
_BOLTZMANN_CM3 = 1.380649e-23 * 1.0e6      # J K-1, exact (SI 2019); p/(kT) in cm-3 with p in Pa


def output_time_count(duration_s: float, interval_s: float) -> int:
    """Number of output times of a run (every interval, plus the end) without building them."""
    if not (duration_s > 0 and interval_s > 0):
        return 0
    ratio = duration_s / interval_s
    return int(min(math.floor(ratio + 1e-9), 1e18)) + 2


def minimum_steps(duration_s: float, interval_s: float, max_step_s: float | None) -> float:
    """Lower bound of the solver steps: every output time and sunrise/sunset stops a step,
    and no step is longer than ``max_step``."""
    steps = output_time_count(duration_s, interval_s) + 2.0 * duration_s / 86400.0
    if max_step_s:
        steps = max(steps, duration_s / max_step_s)
    return steps


def _span(values: Iterable[float]) -> tuple[float, float] | None:
    arr = np.asarray([v for v in values if v is not None], dtype=float).ravel()
    arr = arr[np.isfinite(arr)]
    return (float(arr.min()), float(arr.max())) if arr.size else None


def condition_problems(temperatures: Mapping[str, np.ndarray],
                       pressures: Mapping[str, np.ndarray]) -> list[tuple[str, str]]:
    """Temperatures / pressures (key path -> values) outside the accepted ranges."""
    out = []
    for values, (lo, hi), unit, name in ((temperatures, TEMPERATURE_RANGE_K, "K", "temperature"),
                                         (pressures, PRESSURE_RANGE_PA, "Pa", "pressure")):
        for where, v in values.items():
            arr = np.asarray(v, dtype=float).ravel()
            bad = arr[~((arr >= lo) & (arr <= hi))]
            if bad.size:
                out.append((where, f"{name} {bad[0]:g} {unit} is outside the accepted range "
                                   f"{lo:g} to {hi:g} {unit}"))
    return out


def rate_coefficient_problems(mechanism, temperature_range: tuple[float, float],
                              air_density_range: tuple[float, float],
                              scale: Mapping[str, float] | None = None) -> list[tuple[Any, str]]:
    """Thermal k (times ``scale``) that is non-finite, negative or absurd somewhere in the range.

    Returns ``(reaction, message)`` pairs; the message names the reaction, its
    file:line, the value and the conditions.
    """
    from .mechanism.ratelaws import RateEvaluator
    scale = dict(scale or {})
    problems: list[tuple[Any, str]] = []
    reactions = mechanism.reactions
    if not reactions:
        return problems
    t_lo, t_hi = temperature_range
    m_lo, m_hi = air_density_range
    temperatures = np.unique(np.concatenate([np.linspace(t_lo, t_hi, 9), [t_lo, t_hi]]))
    densities = np.unique(np.concatenate([np.geomspace(max(m_lo, 1.0), max(m_hi, 1.0), 7),
                                          [m_lo, m_hi]]))
    T, M = np.meshgrid(temperatures, densities, indexing="ij")
    T, M = T.ravel(), M.ravel()
    try:
        evaluator = RateEvaluator(mechanism)
    except (KeyError, ValueError, TypeError):
        return problems            # the mechanism's own errors are reported by its validator
    with np.errstate(all="ignore"):
        k = evaluator.thermal(T, M)                                      # (points, reactions)
        factors = np.array([scale.get(r.id, 1.0) for r in reactions])
        k = k * factors
    thermal = np.zeros(len(reactions), bool)
    thermal[evaluator.thermal_index] = True
    for j, r in enumerate(reactions):
        where = f"reaction {r.id!r}" + (f" ({r.location.file}:{r.location.line})" if r.location else "")
        if not thermal[j]:
            f = factors[j]
            if f > MAX_NON_THERMAL_SCALE:
                problems.append((r, f"{where}: [scale] factor {f:g} on a {r.law} reaction exceeds "
                                    f"{MAX_NON_THERMAL_SCALE:g}; valid: 0 to {MAX_NON_THERMAL_SCALE:g}"))
            continue
        col = k[:, j]
        bad = ~np.isfinite(col) | (col < 0)
        units = r.rate_coefficient_units
        limit = RATE_COEFFICIENT_LIMITS.get(units)
        if bad.any():
            i = int(np.argmax(bad))
            problems.append((r, f"{where}: k = {col[i]:g} {units} at T = {T[i]:g} K, "
                                f"[M] = {M[i]:.3g} cm-3 is not a finite number >= 0; check its "
                                f"parameters (and [scale]) for this T and [M] range"))
        elif limit is not None and np.max(col) > limit:
            i = int(np.argmax(col))
            problems.append((r, f"{where}: k = {col[i]:.3g} {units} at T = {T[i]:g} K, "
                                f"[M] = {M[i]:.3g} cm-3 exceeds {limit:g} {units}, far above any "
                                f"measured reaction of this order; check its parameters (and [scale])"))
    return problems


def work_problems(duration_s: float, interval_s: float, max_step_s: float | None,
                  n_species: int, n_reactions: int, n_families: int = 0,
                  n_cycles: int = 0) -> list[tuple[str, str]]:
    """Runs that cannot end in reasonable work or memory (limits in the module docstring)."""
    from .io.outputcheck import estimated_result_bytes
    out = []
    n_times = output_time_count(duration_s, interval_s)
    size = estimated_result_bytes(n_times, n_species, n_reactions, n_families, n_cycles)
    lift = "; set [run].allow_long_run = true to run it anyway"
    if n_times > MAX_OUTPUT_TIMES or size > MAX_RESULT_BYTES:
        out.append(("[run].output_interval",
                    f"{duration_s:g} s every {interval_s:g} s makes {n_times:.3g} output times, "
                    f"a result of about {size / 2**30:.3g} GiB (limits: {MAX_OUTPUT_TIMES:g} times, "
                    f"{MAX_RESULT_BYTES / 2**30:g} GiB); use a longer output_interval{lift}"))
    steps = minimum_steps(duration_s, interval_s, max_step_s)
    if steps > MAX_STEPS_ESTIMATE:
        if max_step_s and duration_s / max_step_s >= steps * 0.5:
            key = "[solver].max_step"
        elif n_times >= steps * 0.5:
            key = "[run].output_interval"
        else:
            key = "[run].duration"
        out.append((key, f"the run needs at least {steps:.3g} solver steps (duration "
                         f"{duration_s:g} s, output every {interval_s:g} s"
                         + (f", max_step {max_step_s:g} s" if max_step_s else "")
                         + f"), over the limit of {MAX_STEPS_ESTIMATE:g}; use a larger max_step "
                           f"or a shorter run{lift}"))
    return out


def atol_problems(mechanism, atol_cm3: float, initial_cm3: Mapping[str, float]) -> list[tuple[str, str]]:
    """``atol`` too loose to resolve the initial total of an element the mechanism conserves."""
    from .diagnostics.conservation import conserved_elements
    elements, variable, a = conserved_elements(mechanism)
    n0 = np.array([initial_cm3.get(name, 0.0) for name in variable], dtype=float)
    out = []
    for j, e in enumerate(elements):
        total = float(n0 @ a[:, j])
        if total > 0 and atol_cm3 > ATOL_RESOLUTION * total:
            out.append(("[solver].atol",
                        f"atol = {atol_cm3:g} cm-3 cannot resolve the scenario's {e}: its initial "
                        f"total is {total:.3g} cm-3, and atol must be <= {ATOL_RESOLUTION:g} of it "
                        f"(<= {ATOL_RESOLUTION * total:.3g} cm-3) or clipping of small values "
                        f"creates or destroys {e}; tighten atol, or set "
                        f"[solver].allow_loose_atol = true"))
    return out


def scenario_problems(*, mechanism, temperatures: Mapping[str, np.ndarray],
                      pressures: Mapping[str, np.ndarray], duration_s: float | None,
                      interval_s: float | None, max_step_s: float | None, atol_cm3: float | None,
                      initial: Mapping[str, tuple[float, str]], scale: Mapping[str, float],
                      allow_long_run: bool = False,
                      allow_loose_atol: bool = False) -> list[tuple[str, str]]:
    """Every preflight problem of a converted scenario as ``(key path, message)``.

    ``temperatures`` / ``pressures`` map the key path that gives them to their
    values [K] / [Pa]; values None are skipped (already reported).
    """
    out = condition_problems(temperatures, pressures)
    t_span = _span(np.concatenate([np.ravel(v) for v in temperatures.values()])
                   if temperatures else [])
    p_span = _span(np.concatenate([np.ravel(v) for v in pressures.values()]) if pressures else [])
    if out:
        return out          # the rate and tolerance checks need sane conditions
    if mechanism is not None and t_span and p_span:
        m_span = (p_span[0] / (_BOLTZMANN_CM3 * t_span[1]), p_span[1] / (_BOLTZMANN_CM3 * t_span[0]))
        for reaction, message in rate_coefficient_problems(mechanism, t_span, m_span, scale):
            out.append((f"[scale].{reaction.id}" if scale.get(reaction.id, 1.0) != 1.0 else "[run].mechanism",
                        message))
    if duration_s and interval_s and not allow_long_run and mechanism is not None:
        out += work_problems(duration_s, interval_s, max_step_s, len(mechanism.species),
                             len(mechanism.reactions), len(mechanism.families), len(mechanism.cycles))
    if mechanism is not None and t_span and p_span:
        # number densities at the start: mole fractions times [M] at the first condition
        first_t = float(np.ravel(next(iter(temperatures.values())))[0])
        first_p = float(np.ravel(next(iter(pressures.values())))[0])
        air0 = first_p / (_BOLTZMANN_CM3 * first_t)
        n0 = {name: value * air0 if kind == "mole_fraction" else value
              for name, (value, kind) in initial.items()}
        for name, (value, kind) in initial.items():
            if kind == "number_density" and value > air0:
                out.append((f"[initial].{name}", f"{value:g} cm-3 is more than the air itself "
                                                 f"({air0:.3g} cm-3 at the start); give at most that"))
        if atol_cm3 and not allow_loose_atol:
            out += atol_problems(mechanism, atol_cm3, n0)
    return out
