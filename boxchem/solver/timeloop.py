"""The time loop: Rosenbrock steps between output times and day/night breakpoints.

``integrate_box`` advances one box from ``output_times_s[0]`` through every
output time.  Steps end exactly on output times and on breakpoints (sunrise
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

Time dependence of the rate coefficients: k and the fixed densities are
evaluated once per attempted step, at its end (the end value is reused as
the start of the next step).  RODAS3 evaluates f only at the step's ends
(alpha = 0, 1), where k is exact; other methods see k interpolated linearly
between the ends.  The df/dt term of the stages needs dk/dt at the step
start: it comes from the parabola through k at the previous step start, the
current start and the current end (second order, no extra evaluation); at
the run start and after a breakpoint, where there is no history on the same
side, one extra evaluation a small fraction of the step ahead gives a
forward difference.  (A secant over the step alone is only first order: a
test with k(t) = k0 (1 + sin(omega t)) and its closed form showed errors of
0.6 % at rtol 1e-4 that way.)  Since rates are linear in k, the k part of
df/dt is rhs(y, dk/dt, fixed) exactly.

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

import bisect
import math
import time as _time
from dataclasses import dataclass, field

import numpy as np

from ..errors import IntegrationError
from .rosenbrock import (RODAS3, RosenbrockMethod, error_norm, next_step_factor, rosenbrock_step,
                         stability_function)

__all__ = ["integrate_box", "air_dilution_rates", "TimeLoopResult", "DEFAULT_RTOL", "DEFAULT_ATOL", "BREAKPOINT_WIDTH_S",
           "MIN_STEP_RELATIVE", "MIN_STEP_ABSOLUTE"]

DEFAULT_RTOL = 1e-4
DEFAULT_ATOL = 1.0         # cm-3 (see the module docstring)
#: a step below max(MIN_STEP_ABSOLUTE, MIN_STEP_RELATIVE * |t|) is a failure
MIN_STEP_RELATIVE = 1e-12
MIN_STEP_ABSOLUTE = 1e-10  # s
#: default half-width of the uncertainty of a breakpoint [s] (the horizon search tolerance)
BREAKPOINT_WIDTH_S = 1.0
#: forward-difference step for dk/dt at a start without history, as a fraction of the step
START_SLOPE_FRACTION = 1e-3
#: relative change of the fixed densities used to differentiate f along d(fixed)/dt
FIXED_DIFFERENCE = 1e-7
#: first step when none is given and the RHS-based estimate is not usable [s]
FALLBACK_FIRST_STEP = 1e-3
#: fraction of y/f used for the automatic first step (Hairer & Wanner 1996, II.4)
FIRST_STEP_FRACTION = 0.01


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

    @property
    def success(self) -> bool:
        return self.status == 0

    def counters(self) -> dict:
        return {name: getattr(self, name) for name in (
            "steps", "rejected_steps", "rhs_evaluations", "jacobian_evaluations",
            "lu_decompositions", "coefficient_evaluations")}


def _derivative_at(t_prev, t0, t1, v_prev, v0, v1):
    """d v/d t at t0 from the parabola through (t_prev, v_prev), (t0, v0), (t1, v1).

    Three-point formula for unequal spacings a = t0 - t_prev and b = t1 - t0
    (differentiated Lagrange interpolation; error of order a*b times the third
    derivative; common practice, no source).
    """
    a, b = t0 - t_prev, t1 - t0
    return (-b / (a * (a + b))) * v_prev + ((b - a) / (a * b)) * v0 + (a / (b * (a + b))) * v1


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


def integrate_box(kinetics, coefficients, y0, output_times_s, *, breakpoints_s=(),
                  rtol: float = DEFAULT_RTOL, atol=DEFAULT_ATOL, first_step: float | None = None,
                  max_step: float = np.inf, progress=None, raise_on_failure: bool = True,
                  breakpoint_width_s: float = BREAKPOINT_WIDTH_S,
                  method: RosenbrockMethod = RODAS3, on_accept=None,
                  compiled: bool | None = None) -> TimeLoopResult:
    """Integrate one box through ``output_times_s``.

    Parameters
    ----------
    kinetics : CompiledKinetics
    coefficients : callable(t_s) -> (k [n_reactions], fixed [n_fixed]); e.g.
        :class:`boxchem.solver.coefficients.RateCoefficientModel`
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
    on_accept : callable(t_s, y), optional; called with the start state and after
        every accepted step, before the next coefficient evaluation (so a
        ``coefficients`` that depends on the box's state sees it lagged by one
        step, e.g. the overhead ozone column following the box's ozone)
    compiled : use the compiled loop (:mod:`boxchem.solver.compiled`); None (default)
        means: when numba is available, ``BOXCHEM_JIT`` is not 0, ``coefficients``
        offers ``interval_table`` and there is no ``on_accept`` (state-dependent
        k needs the per-step Python loop).  False forces the numpy path.

    Returns
    -------
    TimeLoopResult; ``y[0]`` is ``y0`` clipped to non-negative values.
    """
    wall0 = _time.perf_counter()
    out, breaks = _validated_times(output_times_s, breakpoints_s)
    if not (0 < rtol < 1):
        raise ValueError(f"rtol: expected 0 < rtol < 1, got {rtol!r}")
    atol = np.broadcast_to(np.asarray(atol, dtype=float), (kinetics.n_variable,)).copy()
    if np.any(atol <= 0):
        raise ValueError(f"atol: expected positive values [cm-3], got {atol.min()!r}")
    y = np.asarray(y0, dtype=float).copy()
    if y.shape != (kinetics.n_variable,):
        raise ValueError(f"y0: expected shape ({kinetics.n_variable},) in the order of "
                         f"kinetics.variable_species, got {y.shape}")
    bad = ~np.isfinite(y) | (y < 0)
    if np.any(bad):
        i = int(np.argmax(bad))
        raise ValueError(f"y0: number densities must be finite and >= 0 cm-3; got {float(y[i])!r} for "
                         f"{kinetics.variable_species[i]!r} (index {i})")

    # state-dependent surfaces (coefficients.observe_state): the state at the start and at
    # every output time is recorded; k(t) uses the last record (het branch, docs/heterogeneous.md)
    observe = getattr(coefficients, "observe_state", None)
    if observe is not None:
        observe(float(out[0]), y)
    if compiled is None:
        from .compiled import jit_available
        compiled = (jit_available() and on_accept is None
                    and hasattr(coefficients, "interval_table"))
    if compiled:
        if on_accept is not None or not hasattr(coefficients, "interval_table"):
            raise ValueError("compiled=True: needs coefficients with interval_table and no on_accept")
        return _integrate_compiled(kinetics, coefficients, y, out, breaks, rtol=rtol, atol=atol,
                                   first_step=first_step, max_step=max_step, progress=progress,
                                   raise_on_failure=raise_on_failure,
                                   breakpoint_width_s=float(breakpoint_width_s), method=method,
                                   wall0=wall0)

    stops = np.union1d(out[1:], breaks)  # every time a step must end on
    air_rate = air_dilution_rates(kinetics, coefficients, np.concatenate((out[:1], stops)))
    n_out = out.size
    ys = np.full((n_out, kinetics.n_variable), np.nan)
    ks = np.full((n_out, kinetics.n_reactions), np.nan)
    fxs = np.full((n_out, kinetics.n_fixed), np.nan)
    res = TimeLoopResult(out, ys, ks, fxs, kinetics.variable_species,
                         settings={"method": method.name, "rtol": rtol, "compiled": False,
                                   "atol": float(atol.max()) if np.all(atol == atol[0]) else atol.tolist()})

    t = tau0 = out[0]
    prev = None                  # (time, k, fixed) of the previous step start
    if on_accept is not None:
        on_accept(t, y)
    k0, fx0 = coefficients(t)
    res.coefficient_evaluations += 1
    ys[0], ks[0], fxs[0] = y, k0, fx0
    next_out = 1
    f0c = kinetics.rhs(y, k0, fx0)   # chemistry only (the air-density term is added per step)
    res.rhs_evaluations += 1

    def step_estimate():
        scale = atol + rtol * np.abs(y)
        d0 = np.sqrt(np.mean((y / scale) ** 2))
        d1 = np.sqrt(np.mean((f0c / scale) ** 2))
        return FIRST_STEP_FRACTION * d0 / d1 if d0 > 1e-5 and d1 > 1e-5 else FALLBACK_FIRST_STEP

    h = step_estimate() if first_step is None else float(first_step)

    def side_time(tt, end_of_step):
        """Where to evaluate k for time tt: outside every breakpoint's window t_b +- w,
        on the side the step is on (before t_b for a step ending at t_b)."""
        if not break_list or half == 0.0:
            return tt
        i = bisect.bisect_left(break_list, tt)
        for b in break_list[max(i - 1, 0):i + 1]:
            if abs(tt - b) < half:
                return b - half if (tt < b or (tt == b and end_of_step)) else b + half
        return tt
    break_list = breaks.tolist()
    break_set = set(break_list)
    half = float(breakpoint_width_s)
    if not half >= 0:
        raise ValueError(f"breakpoint_width_s: expected >= 0 s, got {breakpoint_width_s!r}")
    h = min(h, max_step)

    stop_index = 0
    rejected_last = False
    t_end = out[-1]

    def fail(message, h_now, worst):
        res.status = -1
        res.message = message
        res.y, res.k, res.fixed, res.times = ys[:next_out], ks[:next_out], fxs[:next_out], out[:next_out]
        res.wall_time_s = _time.perf_counter() - wall0
        if raise_on_failure:
            raise IntegrationError(message, time=t, step_size=h_now,
                                   worst_species=kinetics.variable_species[worst]
                                   if worst is not None else None, partial_result=res)
        return res

    while t < t_end:
        while stops[stop_index] <= t:
            stop_index += 1
        t_stop = stops[stop_index]
        h_proposed = h
        h = min(h, t_stop - t)
        clipped = h < h_proposed
        # land exactly on the stop instead of leaving a sliver step behind
        if t_stop - (t + h) < 1e-9 * max(abs(t_stop), 1.0):
            h = t_stop - t
        t_new = t_stop if h == t_stop - t else t + h

        r_air = air_rate[stop_index]     # d ln[M]/dt on this stop interval [s-1]
        jac = kinetics.jacobian(y, k0, fx0)
        res.jacobian_evaluations += 1
        if r_air != 0.0:
            jac.flat[::kinetics.n_variable + 1] += r_air
        f0 = f0c + r_air * y
        start_slope = None
        worst = None
        rejected_here = False
        while True:
            at_break = t_new in break_set
            tau1 = side_time(t_new, end_of_step=True)
            k1, fx1 = coefficients(tau1)
            res.coefficient_evaluations += 1
            dk, dfx = (k1 - k0) / h, (fx1 - fx0) / h

            def fun(tt, yy, _t0=t, _k0=k0, _fx0=fx0, _dk=dk, _dfx=dfx, _r=r_air):
                s = tt - _t0
                return kinetics.rhs(yy, _k0 + s * _dk, _fx0 + s * _dfx) + _r * yy

            # d k / d t at the step start, second-order accurate (see _derivative_at)
            if prev is not None and tau0 - prev[0] > 0 and tau1 - tau0 > 0:
                dk_dt = _derivative_at(prev[0], tau0, tau1, prev[1], k0, k1)
                dfx_dt = _derivative_at(prev[0], tau0, tau1, prev[2], fx0, fx1)
            else:
                if start_slope is None:
                    delta = START_SLOPE_FRACTION * max(tau1 - tau0, h)
                    k_d, fx_d = coefficients(tau0 + delta)
                    res.coefficient_evaluations += 1
                    start_slope = ((k_d - k0) / delta, (fx_d - fx0) / delta)
                dk_dt, dfx_dt = start_slope
            # rates are linear in k: d f/d t = S (d rates/d k) dk/dt + d f/d fixed dfixed/dt
            dfdt = kinetics.rhs(y, dk_dt, fx0)
            res.rhs_evaluations += 1
            if np.any(dfx_dt):
                eps = FIXED_DIFFERENCE / np.max(np.abs(dfx_dt) / np.maximum(np.abs(fx0), 1e-300))
                dfdt = dfdt + (kinetics.rhs(y, k0, fx0 + eps * dfx_dt) - f0c) / eps
                res.rhs_evaluations += 1
            y_new, err_vec, n_rhs = rosenbrock_step(fun, jac.copy(), f0, dfdt, t, y, h, method)
            res.rhs_evaluations += n_rhs
            res.lu_decompositions += 1
            if np.isfinite(y_new.sum()):  # inf/NaN anywhere makes the sum non-finite
                err, worst, scale = error_norm(err_vec, y, y_new, rtol, atol)
                if y_new.min() < 0.0:
                    negative = np.maximum(-y_new, 0.0) / scale
                    if negative.max() > 1.0:
                        err = max(err, float(negative.max()))
                        worst = int(np.argmax(negative))
            else:
                err, worst = np.inf, int(np.argmax(~np.isfinite(y_new)))
            if err <= 1.0:
                break
            res.rejected_steps += 1
            h = h * next_step_factor(err, method, after_reject=True)
            rejected_last = rejected_here = True
            clipped = False
            if h < max(MIN_STEP_ABSOLUTE, MIN_STEP_RELATIVE * abs(t)):
                what = "non-finite values" if not np.isfinite(err) else "error test failed"
                return fail(f"step size fell below the minimum ({what})", h, worst)
            t_new = t + h

        # accepted
        res.steps += 1
        if r_air != 0.0:   # exact air-density factor for linear invariants (module docstring)
            y_new *= np.exp(r_air * h) / stability_function(r_air * h, method)
        np.maximum(y_new, 0.0, out=y_new)
        factor = next_step_factor(err, method, after_reject=rejected_last)
        rejected_last = False
        h_next = h * factor
        if clipped and not rejected_here:
            # the step was shortened only to land on a stop: resume the proposal
            h_next = max(h_next, h_proposed)
        h = min(h_next, max_step)
        prev = (tau0, k0, fx0)
        t, y, k0, fx0, tau0 = t_new, y_new, k1, fx1, tau1
        if at_break:  # the other side of the jump: no usable history there
            tau0 = side_time(t, end_of_step=False)
            k0, fx0 = coefficients(tau0)
            res.coefficient_evaluations += 1
            prev = None
        if on_accept is not None:
            on_accept(t, y)
        f0c = kinetics.rhs(y, k0, fx0)
        res.rhs_evaluations += 1
        if at_break:
            h = min(h, step_estimate())
        if observe is not None and next_out < n_out and out[next_out] <= t and observe(t, y):
            k0, fx0 = coefficients(tau0)      # the new composition applies from t on
            res.coefficient_evaluations += 1
            prev = None
            f0c = kinetics.rhs(y, k0, fx0)
            res.rhs_evaluations += 1
        while next_out < n_out and out[next_out] <= t:
            ys[next_out], ks[next_out], fxs[next_out] = y, k0, fx0
            next_out += 1
            if progress is not None:
                progress(t)

    res.wall_time_s = _time.perf_counter() - wall0
    return res


def _integrate_compiled(kinetics, coefficients, y, out, breaks, *, rtol, atol, first_step, max_step,
                        progress, raise_on_failure, breakpoint_width_s, method, wall0):
    """The time loop of ``integrate_box`` with the stepping in compiled code.

    Python walks the landing times (output times, breakpoints, knots of the
    environment's series and table-window splits) and, per window between
    breakpoints/knots/splits, builds ``coefficients.interval_table``; one
    compiled call (:func:`boxchem.solver.compiled.advance`) takes all steps
    to the next landing time.  The rules are those of the numpy loop above.
    """
    from . import compiled as cm
    from .coefficients import MAX_TABLE_INTERVAL_S
    from .rosenbrock import FACTOR_MAX, FACTOR_MIN, SAFETY

    half = breakpoint_width_s
    if not half >= 0:
        raise ValueError(f"breakpoint_width_s: expected >= 0 s, got {breakpoint_width_s!r}")
    t0, t_end = float(out[0]), float(out[-1])
    # windows of one interval table: between breakpoints and series knots, split to
    # at most MAX_TABLE_INTERVAL_S
    edges = np.union1d(np.union1d(breaks, coefficients.smoothness_breaks(t0, t_end)), [t0, t_end])
    window_edges = [t0]
    for a, b in zip(edges[:-1], edges[1:]):
        n_split = max(1, int(math.ceil((b - a) / MAX_TABLE_INTERVAL_S)))
        window_edges.extend(a + (b - a) * np.arange(1, n_split + 1) / n_split)
    window_edges = np.array(window_edges)
    window_edges[-1] = t_end
    landing = np.union1d(out, window_edges)
    air_rate = air_dilution_rates(kinetics, coefficients, landing)
    break_set = set(breaks.tolist())

    n_out = out.size
    ys = np.full((n_out, kinetics.n_variable), np.nan)
    ks = np.full((n_out, kinetics.n_reactions), np.nan)
    fxs = np.full((n_out, kinetics.n_fixed), np.nan)
    res = TimeLoopResult(out, ys, ks, fxs, kinetics.variable_species,
                         settings={"method": method.name, "rtol": rtol, "compiled": True,
                                   "atol": float(atol.max()) if np.all(atol == atol[0]) else atol.tolist()})
    k_out, fx_out = coefficients(t0)
    res.coefficient_evaluations += 1
    ys[0], ks[0], fxs[0] = y, k_out, fx_out
    next_out = 1

    kin_arrays = cm.kinetics_arrays(kinetics)
    m_arrays = cm.method_arrays(method)
    params = np.array([SAFETY, FACTOR_MIN, FACTOR_MAX, MIN_STEP_ABSOLUTE, MIN_STEP_RELATIVE,
                       FIRST_STEP_FRACTION, FALLBACK_FIRST_STEP, FIXED_DIFFERENCE])
    counters = np.zeros(5, dtype=np.int64)
    info = np.zeros(3)
    atol_c = np.ascontiguousarray(atol, dtype=float)
    y = np.ascontiguousarray(y, dtype=float)
    h = np.inf if first_step is None else float(first_step)
    restart = first_step is None
    h_max = float(max_step)
    window = 0
    table = None
    t = t0

    def side(tt, end_of_interval):
        if half > 0.0 and tt in break_set:
            return tt - half if end_of_interval else tt + half
        return tt

    for i_land in range(1, landing.size):
        t_next = float(landing[i_land])
        if table is None or t >= window_edges[window + 1]:
            while t >= window_edges[window + 1]:
                window += 1
            # from t, not the window start: a table rebuilt after observe_state starts mid-window
            wa, wb = max(t, float(window_edges[window])), float(window_edges[window + 1])
            table = coefficients.interval_table(wa, wb, side(wa, False), side(wb, True))
            res.coefficient_evaluations += 1
        status = cm.advance(t, t_next, y, h, h_max, restart, table.t_a, table.t_b, table.poly,
                            table.log_col, table.sza_poly, table.sgrid, table.lnj, table.phot_cols,
                            table.horizon, float(air_rate[i_land - 1]), rtol, atol_c, *m_arrays,
                            *kin_arrays, kinetics.n_fixed, counters, info, params)
        restart = False
        if status != 0:
            res.steps, res.rejected_steps, res.rhs_evaluations, res.jacobian_evaluations, \
                res.lu_decompositions = (int(v) for v in counters)
            res.status = -1
            res.message = ("step size fell below the minimum (non-finite values)" if status == 2
                           else "step size fell below the minimum (error test failed)")
            res.y, res.k, res.fixed, res.times = ys[:next_out], ks[:next_out], fxs[:next_out], out[:next_out]
            res.wall_time_s = _time.perf_counter() - wall0
            if raise_on_failure:
                worst = int(info[2])
                raise IntegrationError(res.message, time=float(info[0]), step_size=float(info[1]),
                                       worst_species=kinetics.variable_species[worst]
                                       if worst >= 0 else None, partial_result=res)
            return res
        t, h = t_next, float(info[1])
        if t in break_set:
            restart = True          # first step after a jump of J: as at the start
            table = None            # the next window starts here (one-sided k)
        observe = getattr(coefficients, "observe_state", None)
        if observe is not None and next_out < n_out and out[next_out] <= t and observe(t, y):
            table = None            # k from t on uses the new composition
        while next_out < n_out and out[next_out] <= t:
            k_out, fx_out = coefficients(side(t, False))
            res.coefficient_evaluations += 1
            ys[next_out], ks[next_out], fxs[next_out] = y, k_out, fx_out
            next_out += 1
            if progress is not None:
                progress(t)
    res.steps, res.rejected_steps, res.rhs_evaluations, res.jacobian_evaluations, \
        res.lu_decompositions = (int(v) for v in counters)
    res.wall_time_s = _time.perf_counter() - wall0
    return res
