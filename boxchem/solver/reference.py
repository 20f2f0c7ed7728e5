"""Slow reference: the time loop in numpy, one Python iteration per step (tests and benchmarks only).

Runs use the one compiled time loop of :mod:`boxchem.solver.timeloop`.  This
module keeps the same rules (landing on output times and breakpoints, one-sided
k at breakpoints, clipping of small negatives, the exact air-density factor;
see the ``timeloop`` docstring) written with the numpy kernels of
``kinetics.py`` and the numpy step ``rosenbrock.rosenbrock_step``, with exact
k(t) from the coefficient model at every step instead of the compiled loop's
per-window tables.  Tests compare the compiled loop against it and benchmarks
use it as the "exact k(t)" reference; ``integrate_box(..., compiled=False)``
runs it, as does ``BOXCHEM_JIT=0`` (or a missing numba).  It calls ``on_accept``
after every accepted step.
"""
from __future__ import annotations

import bisect
import math
import time as _time

import numpy as np

from ..errors import IntegrationError
from .rosenbrock import (RODAS3, RosenbrockMethod, error_norm, next_step_factor, rosenbrock_step,
                         stability_function)

from .timeloop import (BREAKPOINT_WIDTH_S, DEFAULT_ATOL, DEFAULT_RTOL, FALLBACK_FIRST_STEP,
                       FIRST_STEP_FRACTION, FIXED_DIFFERENCE, MIN_STEP_ABSOLUTE, MIN_STEP_RELATIVE,
                       TimeLoopResult, _validated_times, air_dilution_rates)

__all__ = ["integrate_box_reference"]

#: forward-difference step for dk/dt at a start without history, as a fraction of the step
START_SLOPE_FRACTION = 1e-3


def _derivative_at(t_prev, t0, t1, v_prev, v0, v1):
    """d v/d t at t0 from the parabola through (t_prev, v_prev), (t0, v0), (t1, v1).

    Three-point formula for unequal spacings a = t0 - t_prev and b = t1 - t0
    (differentiated Lagrange interpolation; error of order a*b times the third
    derivative; common practice, no source).
    """
    a, b = t0 - t_prev, t1 - t0
    return (-b / (a * (a + b))) * v_prev + ((b - a) / (a * b)) * v0 + (a / (b * (a + b))) * v1


def integrate_box_reference(kinetics, coefficients, y0, output_times_s, *, breakpoints_s=(),
                            rtol: float = DEFAULT_RTOL, atol=DEFAULT_ATOL,
                            first_step: float | None = None, max_step: float = np.inf,
                            progress=None, raise_on_failure: bool = True,
                            breakpoint_width_s: float = BREAKPOINT_WIDTH_S,
                            method: RosenbrockMethod = RODAS3, on_accept=None) -> TimeLoopResult:
    """Integrate one box through ``output_times_s`` (numpy reference; same contract as ``integrate_box``).

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
        while next_out < n_out and out[next_out] <= t:
            ys[next_out], ks[next_out], fxs[next_out] = y, k0, fx0
            next_out += 1
            if progress is not None:
                progress(t)

    res.wall_time_s = _time.perf_counter() - wall0
    return res
