"""The time loop: Rosenbrock steps between output times and day/night breakpoints.

``integrate_batch`` advances a batch of members (one or many boxes that share
output times, breakpoints and k(t) tables) from ``output_times_s[0]`` through
every output time; ``integrate_box`` is a batch of one.  Python walks the
landing times (output times, breakpoints, knots of the environment's series,
splits of long windows) and builds one k(t) table per window
(``RateCoefficientModel.interval_table``); one compiled call per landing
interval (:func:`boxchem.solver.compiled.advance_batch`) takes every member's
steps to the next landing time.  The numpy loop of :mod:`.reference` keeps the
same rules as a slow reference for tests.

Steps end exactly on output times and on breakpoints (sunrise
and sunset at the box, where photolysis switches on or off), so the values
reported are the solution at those times, not interpolated or taken from the
nearest step, and no step straddles a discontinuity of J.  When a step is cut
short to land on such a time, the step size the controller had proposed is
kept for the following step: stopping does not reset the step-size history.

At a breakpoint t_b the rate coefficients jump (J switches on or off at the
box's horizon).  Breakpoints are located only to a tolerance (the horizon
search's, 1 s by default), so the step that ends at t_b uses k(t_b - w) and
the step that starts there uses k(t_b + w) (any time within w of t_b is
evaluated at the edge of the window on its own side), with w = ``breakpoint_width_s``
set to that tolerance: each side sees the values of its own side of the jump
wherever in t_b +- w the jump really lies (a displacement of the switch by
at most w, i.e. J w ~ 1e-5 of a photolysis lifetime at the horizon).  The
first step after a breakpoint is limited by the same estimate as the very
first step, so the night-time step size is not tried on the sunrise.

Time dependence of the rate coefficients: k and the fixed densities come
from one table per window (``RateCoefficientModel.interval_table``: ln k as
polynomials in time through Chebyshev-Lobatto nodes, ln J linear in SZA),
evaluated with its analytic time derivative at every stage time the method
asks for; the df/dt term of the stages is exact (rates are linear in k and
multilinear in the fixed-species slots).  The reference loop (``reference``)
instead evaluates the exact k at every step end and takes dk/dt from a
parabola through three evaluations.  Output k are exact evaluations.

Air density changes: when the box's air expands or is compressed ([M]
changes through a temperature or pressure series or a trajectory), number
densities follow the air, so that an unreactive species keeps its mixing
ratio: every integrated species' tendency gets the term ``y_i d ln[M]/dt``
(and the Jacobian diagonal ``d ln[M]/dt``).  The rate is piecewise constant:
on each interval between two stops (output times and breakpoints) it is the
secant ``ln([M](t_b) / [M](t_a)) / (t_b - t_a)`` of [M] at the stops' actual
times (``coefficients.air_density``), so the factors telescope over the run
to [M](end)/[M](start).  Any linear invariant w.y of the chemistry (an
inert tracer, the total of an element) then obeys d(w.y)/dt = r w.y, and a
Rosenbrock step multiplies it by exactly R(r h), the method's stability
function (w^T J = r w^T, so every stage is a multiple of w.y).  Each
accepted step is therefore multiplied by exp(r h) / R(r h) = 1 + O((r h)^4),
which changes nothing of the method's order but makes the air-density part
exact: mixing ratios of unreactive species and element totals are kept to
rounding, not merely to rtol (measured: 1.6e-7 drift without it on a
pressure series, 1e-15 with it).  Fixed species are already ``mole_fraction * [M]``.  Knots of a
series inside an interval are averaged over (no breakpoint needed for
conservation; the chemistry sees [M] itself exactly through ``fixed``).

Non-negativity: after a step, components below zero are set to zero when
they are within their error scale (``atol_i + rtol |y_i|``), i.e. when the
negative value is indistinguishable from zero at the requested accuracy.
A step that produces a negative value beyond its error scale is rejected
like a step with too large an error (its negative part counts as error),
so clipping never hides a real loss of accuracy.

Default tolerances: number densities span 1e0-1e18 cm-3 in a stratospheric
box.  rtol = 1e-4 keeps each species to about 0.01 % per step.  atol = 1
cm-3 (5e-18 mol/mol at 60 hPa, 2e-16 at 2 hPa) is the one default for
stratospheric runs, used by the solver and by scenarios alike: it is below
the smallest number density anyone reads from a stratospheric box (O(1D) at
10-100 cm-3 by day, Cl atoms at 1e3-1e5 cm-3), so those are still
controlled to about 1 % or better, while the error control no longer
follows radicals through their last molecules per cm3 at every sunset.
Measured (benchmarks/bench_polar_run.py, shipped stratosphere-box scenario,
60 days, against an rtol 1e-7 reference; DEVELOPERS.md "Solver"): atol 1
takes 1.6x the steps of atol 1e2 and 0.7x those of atol 1e-2, with O3 and
ClO errors of ~1e-5 and ~1e-4 (of its peak) at all three - far inside the
0.5 % (O3) and 2 % (ClO) the benchmark asks for; the choice is set by the
radicals one wants resolved, not by O3.
"""
from __future__ import annotations

import math
import time as _time
from dataclasses import dataclass, field

import numpy as np

from ..errors import IntegrationError
from .rosenbrock import FACTOR_MAX, FACTOR_MIN, RODAS3, SAFETY, RosenbrockMethod

__all__ = ["integrate_batch", "integrate_box", "BatchResult", "TimeLoopResult", "air_dilution_rates",
           "DEFAULT_RTOL", "DEFAULT_ATOL", "BREAKPOINT_WIDTH_S", "MIN_STEP_RELATIVE",
           "MIN_STEP_ABSOLUTE", "FEEDBACK_INTERVAL_S"]

DEFAULT_RTOL = 1e-4
DEFAULT_ATOL = 1.0         # cm-3 (see the module docstring)
#: a step below max(MIN_STEP_ABSOLUTE, MIN_STEP_RELATIVE * |t|) is a failure
MIN_STEP_RELATIVE = 1e-12
MIN_STEP_ABSOLUTE = 1e-10  # s
#: default half-width of the uncertainty of a breakpoint [s] (the horizon search tolerance)
BREAKPOINT_WIDTH_S = 1.0
#: relative change of the fixed densities used to differentiate f along d(fixed)/dt
FIXED_DIFFERENCE = 1e-7
#: first step when none is given and the RHS-based estimate is not usable [s]
FALLBACK_FIRST_STEP = 1e-3
#: fraction of y/f used for the automatic first step (Hairer & Wanner 1996, II.4)
FIRST_STEP_FRACTION = 0.01
#: with ``on_accept`` (k depending on the box's state) the k(t) windows are at most this
#: long [s] and end on every output time: the state is observed at each window's start
FEEDBACK_INTERVAL_S = 1800.0

#: step-size policies of ``integrate_batch`` (DEVELOPERS.md, "Solver")
STEP_POLICIES = ("auto", "per-member", "lock-step")
#: members per lock-step group, and the smallest batch "auto" runs in lock step (measured:
#: DEVELOPERS.md, "Solver", lock-step policy)
LOCKSTEP_GROUP = 32
LOCKSTEP_MIN_MEMBERS = 8

#: work counters of every member (the compiled loop's ``counters`` columns)
COUNTERS = ("steps", "rejected_steps", "rhs_evaluations", "jacobian_evaluations", "lu_decompositions",
            "lu_fallbacks")


@dataclass
class TimeLoopResult:
    """Solution of one box at its output times, with work counters."""

    times: np.ndarray                    # s since the start, (n_out,)
    y: np.ndarray                        # number densities [cm-3], (n_out, n_variable)
    k: np.ndarray                        # rate coefficients at output times, (n_out, n_reactions)
    fixed: np.ndarray                    # fixed-species densities, (n_out, n_fixed)
    species: tuple
    status: int = 0                      # 0 success, -1 failure
    message: str = "integration reached the last output time"
    steps: int = 0
    rejected_steps: int = 0
    rhs_evaluations: int = 0
    jacobian_evaluations: int = 0
    lu_decompositions: int = 0
    coefficient_evaluations: int = 0
    wall_time_s: float = 0.0
    settings: dict = field(default_factory=dict)
    #: (psc, ice) areas [cm2 cm-3] at the output times from this box's own composition where
    #: the environment has composition rules (state-dependent surfaces), else None
    surface_areas: tuple | None = None

    @property
    def success(self) -> bool:
        return self.status == 0

    def counters(self) -> dict:
        return {name: getattr(self, name) for name in (
            "steps", "rejected_steps", "rhs_evaluations", "jacobian_evaluations",
            "lu_decompositions", "coefficient_evaluations")}


@dataclass
class BatchResult:
    """Solution of a batch of members at shared output times (``integrate_batch``).

    ``y`` (members, n_out, n_variable) [cm-3], NaN after a member's failure;
    ``k`` (n_out, n_reactions) and ``fixed`` (n_out, n_fixed) are the shared exact
    values without member multipliers (``member_k(i)`` applies them);
    ``status`` (members,) 0 ok, 1 step size underflow in the error test, 2 step size
    underflow with non-finite values; ``message``, ``failure_time_s`` [s, NaN when
    none], ``failure_step_s``, ``failure_species`` and ``outputs_reached`` (number of
    output times with values) per member; work counters per member (int64 arrays:
    ``steps``, ``rejected_steps``, ``rhs_evaluations``, ``jacobian_evaluations``,
    ``lu_decompositions``, ``lu_fallbacks`` = factorisations that fell back to the
    dense pivoting LU); ``coefficient_evaluations`` (shared tables and exact k at
    output times), ``wall_time_s``, ``settings``.
    """

    times: np.ndarray
    y: np.ndarray
    k: np.ndarray
    fixed: np.ndarray
    species: tuple
    log_multiplier: np.ndarray
    status: np.ndarray
    message: np.ndarray
    failure_time_s: np.ndarray
    failure_step_s: np.ndarray
    failure_species: np.ndarray
    outputs_reached: np.ndarray
    steps: np.ndarray
    rejected_steps: np.ndarray
    rhs_evaluations: np.ndarray
    jacobian_evaluations: np.ndarray
    lu_decompositions: np.ndarray
    lu_fallbacks: np.ndarray
    coefficient_evaluations: int = 0
    wall_time_s: float = 0.0
    settings: dict = field(default_factory=dict)
    #: the members' own state-dependent surface k at the output times, computed on demand
    #: from ``y`` (a :class:`~boxchem.solver.statesurfaces.MemberSurfaceK`), or None
    surface_k: object = None
    #: each member's J from its own followed ozone column at the output times, on demand
    #: (a :class:`~boxchem.photolysis.ozonefollow.MemberOzoneJ`), or None
    ozone_j: object = None
    #: with ``tangent``: dy/dp at the output times, (n_out, n_params, n_output_species) [cm-3]
    #: (rows: the TangentParameters' reactions then initial values; columns its output_species)
    sensitivity: np.ndarray | None = None

    @property
    def n_members(self) -> int:
        return int(self.y.shape[0])

    @property
    def success(self) -> np.ndarray:
        return self.status == 0

    def member_k(self, i: int) -> np.ndarray:
        """Rate coefficients of member ``i`` at the output times (n_out, n_reactions).

        The shared k times the member's factors; state-dependent surface columns from the
        member's own composition at each output time (``surface_k``)."""
        return self.members_k(slice(i, i + 1))[0]

    def members_k(self, rows=slice(None)) -> np.ndarray:
        """``member_k`` of several members at once, (members, n_out, n_reactions)."""
        lm = self.log_multiplier[rows]
        # k is shared (n_out, n_reactions), or per member (members, ...) when stacked from
        # single runs with state-dependent J (analysis/batches.py)
        k = (self.k[None, :, :] if self.k.ndim == 2 else self.k[rows]) * np.exp(lm)[:, None, :]
        if self.surface_k is not None:
            cols = self.surface_k.columns
            with np.errstate(invalid="ignore", over="ignore"):   # NaN states after a failure
                k[:, :, cols] = self.surface_k(self.y[rows]) * np.exp(lm[:, cols])[:, None, :]
        if self.ozone_j is not None:
            cols = self.ozone_j.columns
            with np.errstate(invalid="ignore", over="ignore"):
                k[:, :, cols] = self.ozone_j(self.y[rows], rows) * np.exp(lm[:, cols])[:, None, :]
        return k

    def member(self, i: int) -> TimeLoopResult:
        """Member ``i`` as a single-run :class:`TimeLoopResult` (cut at its last output if it failed)."""
        n = int(self.outputs_reached[i])
        ok = int(self.status[i]) == 0
        res = TimeLoopResult(self.times[:n], self.y[i, :n], self.member_k(i)[:n], self.fixed[:n],
                             self.species, 0 if ok else -1, str(self.message[i]),
                             int(self.steps[i]), int(self.rejected_steps[i]),
                             int(self.rhs_evaluations[i]), int(self.jacobian_evaluations[i]),
                             int(self.lu_decompositions[i]), int(self.coefficient_evaluations),
                             float(self.wall_time_s), dict(self.settings))
        res.settings["lu_fallbacks"] = int(self.lu_fallbacks[i])
        if self.surface_k is not None:
            res.surface_areas = self.surface_k.areas(self.y[i, :n])
        return res


def air_dilution_rates(kinetics, coefficients, times_s) -> np.ndarray:
    """d ln[M]/dt [s-1] on each interval between consecutive ``times_s`` [s].

    The secant of ln [M] over the interval (see the module docstring), with
    [M] from ``coefficients.air_density(times)`` when the coefficient model
    has it, else from the M column of ``coefficients(t)[1]``.
    """
    times = np.asarray(times_s, dtype=float)
    if hasattr(coefficients, "air_density"):
        air = np.asarray(coefficients.air_density(times), dtype=float)
    else:
        air = np.array([coefficients(t)[1][kinetics.air_fixed_index] for t in times], dtype=float)
    if times.size < 2:
        return np.zeros(0)
    if not np.all(np.isfinite(air)) or np.any(air <= 0):
        raise ValueError(f"air density: expected finite values > 0 cm-3, got {air.min()!r}")
    return np.diff(np.log(air)) / np.diff(times)


def _validated_times(output_times_s, breakpoints_s):
    out = np.asarray(output_times_s, dtype=float).ravel()
    if out.size < 1 or not np.all(np.isfinite(out)):
        raise ValueError(f"output_times_s: expected one or more finite times [s], got {out!r}")
    if np.any(np.diff(out) <= 0):
        i = int(np.argmax(np.diff(out) <= 0))
        raise ValueError(f"output_times_s: times must increase strictly; got {float(out[i])!r} s at "
                         f"index {i} followed by {float(out[i + 1])!r} s")
    bp = np.asarray(breakpoints_s, dtype=float).ravel()
    bp = np.unique(bp[(bp > out[0]) & (bp < out[-1])])
    return out, bp


def _validated_tolerances(kinetics, rtol, atol):
    if not (0 < rtol < 1):
        raise ValueError(f"rtol: expected 0 < rtol < 1, got {rtol!r}")
    atol = np.broadcast_to(np.asarray(atol, dtype=float), (kinetics.n_variable,)).copy()
    if np.any(~(atol > 0)):
        raise ValueError(f"atol: expected positive values [cm-3], got {atol.min()!r}")
    return float(rtol), atol


def _validated_states(kinetics, y0) -> np.ndarray:
    nv = kinetics.n_variable
    y = np.array(y0, dtype=float, ndmin=2)
    if y.ndim != 2 or y.shape[1] != nv:
        raise ValueError(f"y0: expected shape (n_members, {nv}) in the order of kinetics.variable_species, "
                         f"got {np.shape(y0)}")
    bad = ~np.isfinite(y) | (y < 0)
    if np.any(bad):
        m, i = (int(v) for v in np.argwhere(bad)[0])
        member = f"member {m}, " if y.shape[0] > 1 else ""
        raise ValueError(f"y0: number densities must be finite and >= 0 cm-3; got {float(y[m, i])!r} for "
                         f"{kinetics.variable_species[i]!r} ({member}index {i})")
    return np.ascontiguousarray(y)


def _validated_multipliers(kinetics, log_multiplier, n_members) -> np.ndarray:
    nr = kinetics.n_reactions
    if log_multiplier is None:
        return np.zeros((n_members, nr))
    lm = np.array(log_multiplier, dtype=float, ndmin=2)
    if lm.shape != (n_members, nr):
        raise ValueError(f"log_multiplier: expected shape ({n_members}, {nr}) = (members of y0, reactions "
                         f"in kinetics.reaction_ids order), got {np.shape(log_multiplier)}")
    bad = np.isnan(lm) | (lm == np.inf)
    if np.any(bad):
        m, r = (int(v) for v in np.argwhere(bad)[0])
        raise ValueError(f"log_multiplier: member {m}, reaction {kinetics.reaction_ids[r]!r}: got "
                         f"{float(lm[m, r])!r}; expected ln f with f a finite factor >= 0 (-inf for f = 0)")
    return np.ascontiguousarray(lm)


def _window_edges(coefficients, out, breaks, feedback: bool) -> np.ndarray:
    """Edges of the k(t) table windows: breakpoints, series knots, splits to MAX_TABLE_INTERVAL_S."""
    from .coefficients import MAX_DARK_TABLE_INTERVAL_S, MAX_TABLE_INTERVAL_S
    t0, t_end = float(out[0]), float(out[-1])
    edges = np.union1d(np.union1d(breaks, coefficients.smoothness_breaks(t0, t_end)), [t0, t_end])
    longest = np.full(max(edges.size - 1, 0), MAX_TABLE_INTERVAL_S)
    if feedback:
        edges = np.union1d(edges, out)
        longest = np.full(max(edges.size - 1, 0), min(MAX_TABLE_INTERVAL_S, FEEDBACK_INTERVAL_S))
    elif hasattr(coefficients, "sunlit") and edges.size > 1:
        # windows end at every sunrise and sunset: one dark at its mid-point is dark throughout
        dark = ~coefficients.sunlit(0.5 * (edges[:-1] + edges[1:]))
        longest[dark] = MAX_DARK_TABLE_INTERVAL_S
    window_edges = [t0]
    for a, b, cap in zip(edges[:-1], edges[1:], longest):
        n_split = max(1, int(math.ceil((b - a) / cap)))
        window_edges.extend(a + (b - a) * np.arange(1, n_split + 1) / n_split)
    window_edges = np.array(window_edges)
    window_edges[-1] = t_end
    return window_edges


def _feedback_edges(window_edges, out) -> np.ndarray:
    """Edges of the feedback windows of per-member state-dependent surfaces: every table
    window edge and output time, with splits so none is longer than FEEDBACK_INTERVAL_S."""
    edges = np.union1d(window_edges, out)
    pieces = [edges[:1]]
    for a, b in zip(edges[:-1], edges[1:]):
        n_split = max(1, int(math.ceil((b - a) / FEEDBACK_INTERVAL_S)))
        pieces.append(a + (b - a) * np.arange(1, n_split + 1) / n_split)
    feedback = np.concatenate(pieces)
    feedback[-1] = edges[-1]
    return feedback


def _failure_message(status: int, time_s: float, step_s: float, species) -> str:
    what = "non-finite values" if status == 2 else "error test failed"
    where = f"; worst species {species}" if species else ""
    return (f"step size fell below the minimum ({what}) at t = {time_s:.9g} s "
            f"(step {step_s:.3g} s){where}")


def _apply_state_map(state_map, t_s: float, y: np.ndarray, status: np.ndarray, ys: np.ndarray,
                     out_q: int) -> None:
    """Apply ``state_map`` at ``t_s`` to the running members of ``y`` (in place); the output
    row ``out_q`` (when >= 0, the time ``t_s``) gets the changed state."""
    run = np.nonzero(status == 0)[0]
    if run.size == 0:
        return
    y[run] = state_map(t_s, y[run])
    if out_q >= 0:
        ys[run, out_q] = y[run]


def _ozone_follows(coefficients, ozone_feedback: str) -> bool:
    """True when the members' own ozone columns ride on the J table as ln offsets."""
    if ozone_feedback not in ("member", "observe"):
        raise ValueError(f"ozone_feedback: expected 'member' or 'observe', got {ozone_feedback!r}")
    return ozone_feedback == "member" and hasattr(getattr(coefficients, "photolysis_rates", None),
                                                  "member_columns")


def _ozone_offsets(ozone, window: int, lm_window, running, y):
    """(lm, exp(lm)) of a feedback window with each running member's ln J offsets added."""
    run = np.nonzero(running)[0]
    lm_out = np.array(lm_window, dtype=float, copy=True)
    lm_out[run[:, None], ozone.cols] += ozone.offsets(window, run, y[run])
    return lm_out, np.ascontiguousarray(np.exp(lm_out))


def _tangent_feedback_text(surfaces, state_map, on_accept, ozone) -> str:
    """Which state feedbacks a tangent run differentiated (``BatchResult.settings``)."""
    done = []
    if surfaces is not None:
        done.append(f"state-dependent surfaces ({len(surfaces)} columns, exact offsets every window)")
    if state_map is not None:
        done.append("phase equilibrium state map")
    text = "differentiated: " + (", ".join(done) if done else "none (no state feedback)")
    missed = (["on_accept (taken as observed in the nominal run)"] if on_accept is not None else []) + \
        (["the members' own ozone columns (J offsets taken as in the nominal run)"] if ozone is not None else [])
    if missed:
        text += "; NOT differentiated: " + ", ".join(missed)
    return text


def _chosen_policy(step_policy: str, n_members: int) -> str:
    if step_policy not in STEP_POLICIES:
        raise ValueError(f"step_policy: expected one of {', '.join(STEP_POLICIES)}, got {step_policy!r}")
    if step_policy == "auto":
        return "lock-step" if n_members >= LOCKSTEP_MIN_MEMBERS else "per-member"
    return step_policy


def integrate_batch(kinetics, coefficients, y0, output_times_s, *, log_multiplier=None,
                    breakpoints_s=(), rtol: float = DEFAULT_RTOL, atol=DEFAULT_ATOL,
                    first_step: float | None = None, max_step: float = np.inf,
                    method: RosenbrockMethod = RODAS3, progress=None,
                    breakpoint_width_s: float = BREAKPOINT_WIDTH_S, on_accept=None,
                    lu: str = "sparse", surface_feedback: str = "member",
                    state_map=None, step_policy: str = "auto",
                    lockstep_group: int | None = None,
                    tangent=None, ozone_feedback: str = "member") -> BatchResult:
    """Integrate a batch of members through shared output times with one compiled loop.

    Members share the kinetics, the k(t) tables of ``coefficients`` (a
    :class:`~boxchem.solver.coefficients.RateCoefficientModel`, or anything
    with its ``interval_table``, ``smoothness_breaks``, ``air_density`` and
    ``__call__``), the output times and the breakpoints; they differ in
    ``y0`` and in their rate multipliers.  One compiled call per stop interval
    advances every running member, each with its own step-size control (see
    DEVELOPERS.md, "Solver", for why not one common step).

    Parameters
    ----------
    y0 : (n_members, n_variable) initial number densities [cm-3] (a 1-D array is one member)
    output_times_s : increasing times [s since the run start]; the first is the start
    log_multiplier : (n_members, n_reactions) ln f of each member's factor f on every
        k (thermal, photolysis J, surface), applied on top of the coefficient model's own
        ``[scale]``; None means f = 1.  -inf gives f = 0.
    breakpoints_s, breakpoint_width_s, rtol, atol, first_step, max_step, method :
        as :func:`integrate_box`
    progress : callable(t_s) called after each output time
    on_accept : callable(t_s, y), single-member batches only: called with the start
        state and at every landing time (before the k(t) table of the next window and
        the output k); it may change y in place (the output at that time then holds
        the changed state); windows then end on every output time and last at most
        FEEDBACK_INTERVAL_S, so state-dependent k (``photolysis.ozonefollow``) sees
        the state lagged by at most one window (instead of one step in the numpy
        reference loop)
    lu : "sparse" (default): the fixed-pattern sparse LU (``sparselu``) with the dense
        pivoting LU where a pivot is too small; "dense": the dense pivoting LU at every
        step (the earlier kernel; for benchmarks)
    state_map : callable(t_s, y (n, n_variable)) -> new y [cm-3], optional: a change of
        state applied to the running members at the start and at the end of every
        feedback window (before the next window's surface offsets; the output at that
        time holds the changed state) - the gas/condensed phase equilibrium of
        ``environment/condensation.py`` (elementwise over members, so grouping does not
        matter)
    surface_feedback : how state-dependent surfaces (``coefficients.state_surfaces``) follow
        the members' composition.  "member" (default): tables on the normal schedule with
        those columns at a reference composition, and every running member's own ln k
        offsets on them at the start of each feedback window (at most FEEDBACK_INTERVAL_S,
        ending on every output time), evaluated at the window's mid-point for all members
        at once (solver/statesurfaces.py); output k from each member's own state
        (``BatchResult.member_k``).  A member's gamma ratio to the reference is
        re-evaluated only when its own T, p or composition moved beyond the tolerances of
        ``statesurfaces.MemberOffsets``; "member_exact" re-evaluates it every window (for
        tests and benchmarks).  "rebuild": the earlier treatment for a batch of one -
        the caller's ``on_accept`` records the state (``observe_state``) and a table is
        rebuilt per feedback window (slow; kept as the reference for tests and benchmarks).
    step_policy : "per-member": each member its own step-size control (its result does
        not depend on the other members); "lock-step": members in consecutive groups of
        ``lockstep_group`` share one step size (``lockstep``: the largest of the members'
        error norms decides; member index innermost, vectorised kernels); "auto"
        (default): lock-step for batches of at least LOCKSTEP_MIN_MEMBERS members, else
        per-member (DEVELOPERS.md, "Solver": measured choice and accuracy bound)
    lockstep_group : members per lock-step group (default LOCKSTEP_GROUP)
    ozone_feedback : how an ozone column following the box (``photolysis.ozonefollow``)
        follows the members.  "member" (default): the shared J table at the scenario's
        column and every running member's own ln J offsets at the start of each feedback
        window (``MemberOzoneColumns``; output J from each member's own column); "observe":
        the earlier one-member treatment - the caller's ``on_accept`` gives the state to
        ``photolysis.observe`` and each table is built at the observed column.
    tangent : a :class:`~boxchem.solver.tangent.TangentParameters`, single-member batches
        only: also integrate the forward sensitivities S = dy/dp (p = ln factor on k, ln y0)
        on the same steps with the same LU (``solver/tangent.py``); returned as
        ``BatchResult.sensitivity``.  The state feedback is differentiated
        (``solver/tangent_feedback.py``): state-dependent surfaces (their offsets then
        re-evaluated every window, as "member_exact") and ``state_map``; what
        ``on_accept`` observes is not (``settings["tangent_feedback"]`` says which)

    Returns
    -------
    BatchResult.  A member that fails (step size below the minimum, non-finite
    values) is taken out of the batch with its status, message and time; the
    others go on.
    """
    from . import compiled as cm
    from .sparselu import sparse_lu_structure

    wall0 = _time.perf_counter()
    out, breaks = _validated_times(output_times_s, breakpoints_s)
    rtol, atol = _validated_tolerances(kinetics, rtol, atol)
    y = _validated_states(kinetics, y0)
    n_members = y.shape[0]
    lm = _validated_multipliers(kinetics, log_multiplier, n_members)
    fm = np.ascontiguousarray(np.exp(lm))
    half = float(breakpoint_width_s)
    if not half >= 0:
        raise ValueError(f"breakpoint_width_s: expected >= 0 s, got {breakpoint_width_s!r}")
    if on_accept is not None and n_members != 1:
        raise ValueError(f"on_accept: only for a batch of one member (state-dependent k), got "
                         f"{n_members} members")
    policy = _chosen_policy(step_policy, n_members)
    group = LOCKSTEP_GROUP if lockstep_group is None else int(lockstep_group)
    if group < 1:
        raise ValueError(f"lockstep_group: expected at least 1 member, got {lockstep_group!r}")
    if n_members == 1 or group == 1:
        policy = "per-member"    # a group of one steps on its own error norm: the per-member kernel
    if tangent is not None:
        if n_members != 1:
            raise ValueError(f"tangent: forward sensitivities are for a batch of one member, got "
                             f"{n_members} members")
        tangent = tangent.validated(kinetics)
    if lu not in ("sparse", "dense"):
        raise ValueError(f"lu: expected 'sparse' or 'dense', got {lu!r}")
    if surface_feedback not in ("member", "member_exact", "rebuild"):
        raise ValueError(f"surface_feedback: expected 'member', 'member_exact' or 'rebuild', got "
                         f"{surface_feedback!r}")
    surfaces = getattr(coefficients, "state_surfaces", None) if surface_feedback != "rebuild" else None
    if surface_feedback == "rebuild" and getattr(coefficients, "state_dependent", False) and on_accept is None:
        # without an observer the tables would use no composition at all: never silently wrong
        raise ValueError("surface_feedback='rebuild': the state-dependent surfaces need the state; "
                         "give on_accept=coefficients.observe_state (a batch of one), or use 'member'")
    if not hasattr(coefficients, "interval_table"):
        raise ValueError("coefficients: integrate_batch needs interval_table (a RateCoefficientModel); "
                         "plain callables run on the numpy reference loop (integrate_box)")

    t0, t_end = float(out[0]), float(out[-1])
    follows = _ozone_follows(coefficients, ozone_feedback)
    window_edges = _window_edges(coefficients, out, breaks, on_accept is not None or follows)
    # the compiled calls: one per table window, or per feedback window with state surfaces
    segment_edges = window_edges if surfaces is None and state_map is None and not follows else \
        _feedback_edges(window_edges, out)
    landing = np.union1d(out, segment_edges)
    air_rate = air_dilution_rates(kinetics, coefficients, landing)
    break_set = set(breaks.tolist())
    n_out = out.size
    nv = kinetics.n_variable
    ys = np.full((n_members, n_out, nv), np.nan)   # filled by the compiled loop
    ks = np.full((n_out, kinetics.n_reactions), np.nan)
    fxs = np.full((n_out, kinetics.n_fixed), np.nan)
    y_given = y.copy()
    if state_map is not None:
        y[:] = state_map(t0, y)
    if on_accept is not None:
        on_accept(t0, y[0])
    ozone = coefficients.photolysis_rates.member_columns(segment_edges, y, coefficients.photolysis_columns) \
        if follows else None
    if surfaces is not None:
        # the state-dependent columns at the reference composition, as at every later output
        # time: each member's own are set from its state (BatchResult.member_k)
        k0, fx0 = coefficients.at_times(np.array([t0]), state_reference=True)
        ks[0], fxs[0] = k0[0], fx0[0]
    else:
        ks[0], fxs[0] = coefficients(t0)
    coefficient_evaluations = 1
    # state-dependent k must be evaluated right after the state is observed
    exact_per_output = on_accept is not None or not hasattr(coefficients, "at_times")
    table_options = {}
    if surfaces is not None:
        table_options = {"state_reference": True}
        columns = surfaces.columns
        mids = 0.5 * (segment_edges[:-1] + segment_edges[1:])
        mid_state = coefficients.environment.at(mids)       # every window's mid-point at once
        offsets = surfaces.tracker(n_members, mid_state.temperature, mid_state.pressure,
                                   mid_state.psc_area, mid_state.sulfate_area, mid_state.ice_area,
                                   tolerances=surface_feedback == "member" and tangent is None)
        start_air = np.asarray(coefficients.air_density(segment_edges[:-1]), dtype=float)
    ys[:, 0] = y
    outputs_reached = np.ones(n_members, dtype=np.int64)
    output_position = {float(v): q for q, v in enumerate(out)}
    out_index = np.array([output_position.get(float(v), -1) for v in landing[1:]], dtype=np.int64)

    kin_arrays = cm.kinetics_arrays(kinetics)
    structure = sparse_lu_structure(kinetics)
    lu_arrays = (structure.jac_pos_unsigned,) + structure.arrays()   # computed once per call
    m_arrays = cm.method_arrays(method)
    params = np.array([SAFETY, FACTOR_MIN, FACTOR_MAX, MIN_STEP_ABSOLUTE, MIN_STEP_RELATIVE,
                       FIRST_STEP_FRACTION, FALLBACK_FIRST_STEP, FIXED_DIFFERENCE,
                       cm.PIVOT_TOLERANCE if lu == "sparse" else -1.0])
    counters = np.zeros((n_members, len(COUNTERS)), dtype=np.int64)
    if tangent is not None:
        from . import tangent as tl
        from . import tangent_feedback as tfb
        n_p = tangent.n_params
        # the surface feedback's response columns Z (solver/tangent_feedback.py) after the parameters'
        n_z = 0 if surfaces is None else len(surfaces)
        param_reaction = tangent.param_reaction()
        slots = tl.tangent_slots(kinetics, kin_arrays)
        tan_arrays = (param_reaction,) + slots
        if n_z:
            offset_gradient = tfb.SurfaceOffsetGradient(surfaces, mid_state, nv)
        if state_map is not None:
            edge_air = np.asarray(coefficients.air_density(segment_edges), dtype=float)
        out_rows = np.arange(nv, dtype=np.int64) if tangent.output_species is None else \
            np.asarray(tangent.output_species, dtype=np.int64)
        sens = np.zeros((nv, n_p))     # species-major: the kernel's layout
        for q, j in enumerate(tangent.initial):
            sens[j, len(tangent.reactions) + q] = y_given[0, j]     # d y0_j / d ln y0_j
        if state_map is not None:            # the map at t0: S0 = dM/dy S0
            sens = tfb.state_map_jacobian(state_map, t0, y_given[0], float(edge_air[0]))[0] @ sens
        sens_out = np.full((n_out, n_p + n_z, out_rows.size), np.nan)
        sens_out[0, :n_p] = sens[out_rows].T
        sens_run = sens                      # what the kernel integrates (with the Z columns)
    info = np.zeros((n_members, 3))
    status = np.zeros(n_members, dtype=np.int64)
    failure = np.full((n_members, 3), np.nan)      # time, step, worst species index
    h = np.full(n_members, np.inf if first_step is None else float(first_step))
    restart = np.full(n_members, 1 if first_step is None else 0, dtype=np.int64)
    h_max = float(max_step)

    def side(tt, end_of_interval):
        if half > 0.0 and tt in break_set:
            return tt - half if end_of_interval else tt + half
        return tt

    if policy == "lock-step":
        from .lockstep import advance_lockstep as kernel
        # balanced consecutive groups of at most ``group`` members (40 members: 20 + 20, not 32 + 8)
        edges = np.linspace(0, n_members, -(-n_members // group) + 1).round().astype(int)
        groups = list(zip(edges[:-1].tolist(), edges[1:].tolist()))
    else:
        kernel = cm.advance_batch
        groups = [(0, n_members)]
    start = 0                    # index in landing of the current window's start
    table_window = -1
    lm_window, fm_window = lm, fm
    stops = np.searchsorted(landing, segment_edges[1:]).tolist()       # landing[stop] == wb
    tables = (np.searchsorted(window_edges, segment_edges[:-1], side="right") - 1).tolist()
    report_outputs = exact_per_output or progress is not None
    for window in range(segment_edges.size - 1):
        wa, wb = float(segment_edges[window]), float(segment_edges[window + 1])
        stop = stops[window]
        if wa in break_set:
            restart[:] = 1       # first step after a jump of J: as at the start
        w = tables[window]
        if w != table_window:
            ta, tb = float(window_edges[w]), float(window_edges[w + 1])
            table = coefficients.interval_table(ta, tb, side(ta, False), side(tb, True), **table_options)
            coefficient_evaluations += 1
            table_window = w
        running_before = status == 0
        if surfaces is not None:
            # each running member's own surface k: ln offsets on the reference columns
            lm_window = lm.copy()
            run = np.nonzero(running_before)[0]
            if tangent is not None:
                if run.size:
                    # the offsets and their gradient in one evaluation; G = d ln k_c / dp over
                    # this window, and the response columns Z of the columns it moves, from zero
                    nominal, gradient = offset_gradient(window, y[0], float(start_air[window]))
                    lm_window[0, columns] += nominal
                    active = np.nonzero(gradient.any(axis=1))[0]
                    feedback_gain = gradient[active] @ sens
                    sens_run = np.zeros((nv, n_p + active.size))
                    sens_run[:, :n_p] = sens
                    tan_arrays = (np.concatenate([param_reaction, columns[active]]),) + slots
            else:
                x = surfaces.mole_fractions(y[run], start_air[window])
                if run.size == n_members:
                    lm_window[:, columns] += offsets.offsets(window, run, x)
                else:
                    lm_window[run[:, None], columns] += offsets.offsets(window, run, x)
            fm_window = fm.copy()
            fm_window[:, columns] = np.exp(lm_window[:, columns])
        if ozone is not None:      # each running member's own ozone column: ln J offsets
            lm_window, fm_window = _ozone_offsets(ozone, window, lm if surfaces is None else lm_window,
                                                  status == 0, y)
        if tangent is None:
            for a, b in groups:     # one call per lock-step group (the whole batch when per member)
                kernel(landing[start:stop + 1], air_rate[start:stop], out_index[start:stop], ys[a:b],
                       outputs_reached[a:b], y[a:b], h[a:b], restart[a:b], status[a:b], h_max, table.t_a,
                       table.t_b, table.poly, table.log_col, table.sza_poly, table.sgrid, table.lnj,
                       table.phot_cols, table.horizon, lm_window[a:b], fm_window[a:b], rtol, atol,
                       *m_arrays, *kin_arrays[:8], lu_arrays[0], *lu_arrays[1:], kinetics.n_fixed,
                       counters[a:b], info[a:b], params)
        else:
            tl.advance_tangent(landing[start:stop + 1], air_rate[start:stop], out_index[start:stop], ys,
                               sens_out, out_rows, outputs_reached, y, sens_run, *tan_arrays, h, restart,
                               status, h_max, table.t_a, table.t_b, table.poly, table.log_col,
                               table.sza_poly, table.sgrid, table.lnj, table.phot_cols, table.horizon,
                               lm_window, fm_window, rtol, atol, *m_arrays, *kin_arrays[:8], lu_arrays[0],
                               *lu_arrays[1:], kinetics.n_fixed, counters, info, params)
        newly_failed = running_before & (status != 0)
        if newly_failed.any():
            failure[newly_failed] = info[newly_failed]
            y[newly_failed] = np.nan
        mapped = False
        if tangent is not None and status[0] == 0 and (n_z or state_map is not None):
            if n_z:          # superposition of the feedback: S = S_0 + Z G
                sens = sens_run[:, :n_p] + sens_run[:, n_p:] @ feedback_gain
                sens_run = sens
            if state_map is not None:      # the map and its Jacobian in one evaluation
                jacobian, y[0] = tfb.state_map_jacobian(state_map, wb, y[0], float(edge_air[window + 1]))
                sens = sens_run = jacobian @ sens
                mapped = True
                if out_index[stop - 1] >= 0:
                    ys[0, out_index[stop - 1]] = y[0]
            if out_index[stop - 1] >= 0:
                sens_out[out_index[stop - 1], :n_p] = sens[out_rows].T
        if state_map is not None and not mapped:     # first: what the observers and the next window see
            _apply_state_map(state_map, wb, y, status, ys, int(out_index[stop - 1]))
        if on_accept is not None and status[0] == 0:
            on_accept(wb, y[0])      # before the output k and the next window's table
            if out_index[stop - 1] >= 0:
                # on_accept may change the state in place: the output holds the state it left
                ys[0, out_index[stop - 1]] = y[0]
        for q in (out_index[start:stop] if report_outputs else ()):
            if q < 0:
                continue
            if exact_per_output:
                ks[q], fxs[q] = coefficients(side(float(out[q]), False))
                coefficient_evaluations += 1
            if progress is not None:
                progress(float(out[q]))
        start = stop
        if not np.any(status == 0):
            break
    next_out = int(outputs_reached.max())
    if not exact_per_output and next_out > 1:
        # exact k at the output times reached, in one vectorised evaluation
        sides = np.array([side(float(tt), False) for tt in out[1:next_out]])
        ks[1:next_out], fxs[1:next_out] = coefficients.at_times(sides, **table_options)
        coefficient_evaluations += 1
    surface_k = ozone_j = None
    if surfaces is not None or ozone is not None:     # the members' own k at the output times
        out_state = coefficients.environment.at(np.array([side(float(tt), False) for tt in out]))
    if surfaces is not None:
        from .statesurfaces import MemberSurfaceK
        surface_k = MemberSurfaceK(surfaces, out_state, coefficients.multiplier)
    if ozone is not None:
        ozone_j = ozone.output_j(out_state, coefficients.multiplier)

    message = np.empty(n_members, dtype=object)
    species = np.empty(n_members, dtype=object)
    for m in range(n_members):
        if status[m] == 0:
            message[m] = "integration reached the last output time"
            species[m] = ""
        else:
            worst = int(failure[m, 2])
            species[m] = kinetics.variable_species[worst] if worst >= 0 else ""
            message[m] = _failure_message(int(status[m]), failure[m, 0], failure[m, 1], species[m])
    atol_setting = float(atol.max()) if np.all(atol == atol[0]) else atol.tolist()
    return BatchResult(out, ys, ks, fxs, kinetics.variable_species, lm, status, message,
                       failure[:, 0].copy(), failure[:, 1].copy(), species, outputs_reached,
                       *(counters[:, q].copy() for q in range(len(COUNTERS))),
                       coefficient_evaluations=coefficient_evaluations,
                       wall_time_s=_time.perf_counter() - wall0, surface_k=surface_k, ozone_j=ozone_j,
                       settings={"method": method.name, "rtol": rtol, "atol": atol_setting,
                                 "compiled": True,
                                 "step_control": ("per member" if policy == "per-member" else
                                                  f"lock-step in groups of at most {group} members"),
                                 "state_surfaces": ("none" if getattr(coefficients, "state_surfaces", None)
                                                    is None else "member_exact" if tangent is not None
                                                    and surface_feedback == "member" else surface_feedback),
                                 "lu": (f"sparse, fixed pattern ({structure.order_name} order, "
                                        f"{structure.nnz} non-zeros, {structure.operations} "
                                        f"multiply-adds), dense pivoting fallback")
                                 if lu == "sparse" else "dense, partial pivoting",
                                 **({"tangent": "forward sensitivities on the same steps (the "
                                     "augmented Rosenbrock system, S not in the error norm)",
                                     "tangent_feedback": _tangent_feedback_text(surfaces, state_map,
                                                                                on_accept, ozone)}
                                    if tangent is not None else {})},
                       sensitivity=None if tangent is None else sens_out[:, :n_p])


def integrate_box(kinetics, coefficients, y0, output_times_s, *, breakpoints_s=(),
                  rtol: float = DEFAULT_RTOL, atol=DEFAULT_ATOL, first_step: float | None = None,
                  max_step: float = np.inf, progress=None, raise_on_failure: bool = True,
                  breakpoint_width_s: float = BREAKPOINT_WIDTH_S,
                  method: RosenbrockMethod = RODAS3, on_accept=None,
                  compiled: bool | None = None, surface_feedback: str = "member",
                  state_map=None, ozone_feedback: str = "member") -> TimeLoopResult:
    """Integrate one box through ``output_times_s``: a batch of one (:func:`integrate_batch`).

    Parameters
    ----------
    kinetics : CompiledKinetics
    coefficients : a :class:`boxchem.solver.coefficients.RateCoefficientModel` (or any
        callable(t_s) -> (k [n_reactions], fixed [n_fixed]); one without
        ``interval_table`` runs on the numpy reference loop, :mod:`.reference`)
    y0 : initial variable-species number densities [cm-3] at ``output_times_s[0]``
    output_times_s : increasing times [s since the run start]; the first is the start
    breakpoints_s : times [s] where k may jump (sunrise/sunset): steps end there
    breakpoint_width_s : how far [s] either side of a breakpoint the jump may really
        lie; k is taken from t_b - w for the step ending at t_b and from t_b + w for
        the step starting there
    rtol : relative tolerance [1]; atol : absolute tolerance [cm-3], scalar or per species
    first_step : first step [s]; estimated from y0 and f(y0) when None
    max_step : longest step [s]
    progress : callable(t_s) called after each output time (e.g. a progress bar)
    raise_on_failure : raise IntegrationError (with the partial result attached
        as ``partial_result``) when True, else return the partial result with status -1
    on_accept : callable(t_s, y), optional; state-dependent k (see ``integrate_batch``)
    compiled : None (default): the compiled loop when numba is available, ``BOXCHEM_JIT``
        is not 0 and ``coefficients`` has ``interval_table``; False: the numpy
        reference loop (slow; for tests and benchmarks).
    surface_feedback : as :func:`integrate_batch` (the reference loop always observes
        the state through ``on_accept``: give it ``observe_state`` there).
    state_map : as :func:`integrate_batch` (the reference loop applies it after every
        accepted step, before ``on_accept``).
    ozone_feedback : as :func:`integrate_batch` (the reference loop observes the state:
        give it ``photolysis.observe`` through ``on_accept``).

    Returns
    -------
    TimeLoopResult; ``y[0]`` is ``y0``.
    """
    y = np.asarray(y0, dtype=float)
    if y.shape != (kinetics.n_variable,):
        raise ValueError(f"y0: expected shape ({kinetics.n_variable},) in the order of "
                         f"kinetics.variable_species, got {y.shape}")
    if compiled is None:
        from .compiled import jit_available
        compiled = jit_available() and hasattr(coefficients, "interval_table")
    if not compiled:
        from .reference import integrate_box_reference
        if state_map is not None:
            mapped, after = state_map, on_accept

            def on_accept(t_s, y_state):
                y_state[...] = mapped(t_s, y_state[None, :])[0]
                if after is not None:
                    after(t_s, y_state)
        if getattr(coefficients, "state_dependent", False):
            # the reference loop's state-dependent surfaces follow the state it observes
            # (after every accepted step), as the compiled loop's follow each member's state
            observe, user = coefficients.observe_state, on_accept

            def on_accept(t_s, y_state):
                observe(t_s, y_state)
                if user is not None:
                    user(t_s, y_state)
        return integrate_box_reference(kinetics, coefficients, y, output_times_s,
                                       breakpoints_s=breakpoints_s, rtol=rtol, atol=atol,
                                       first_step=first_step, max_step=max_step, progress=progress,
                                       raise_on_failure=raise_on_failure,
                                       breakpoint_width_s=breakpoint_width_s, method=method,
                                       on_accept=on_accept)
    batch = integrate_batch(kinetics, coefficients, y[None, :], output_times_s,
                            breakpoints_s=breakpoints_s, rtol=rtol, atol=atol, first_step=first_step,
                            max_step=max_step, method=method, progress=progress,
                            breakpoint_width_s=breakpoint_width_s, on_accept=on_accept,
                            surface_feedback=surface_feedback, state_map=state_map,
                            ozone_feedback=ozone_feedback)
    res = batch.member(0)
    if res.status != 0 and raise_on_failure:
        species = str(batch.failure_species[0]) or None
        raise IntegrationError(res.message, time=float(batch.failure_time_s[0]),
                               step_size=float(batch.failure_step_s[0]), worst_species=species,
                               partial_result=res)
    return res
