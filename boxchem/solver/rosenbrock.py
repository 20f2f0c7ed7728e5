"""L-stable Rosenbrock methods with embedded error estimates and step-size control.

Methods
-------
Both from

    A. Sandu, J. G. Verwer, J. G. Blom, E. J. Spee, G. R. Carmichael and
    F. A. Potra (1997), Benchmarking stiff ODE solvers for atmospheric
    chemistry problems II: Rosenbrock solvers, Atmos. Environ. 31, 3459-3472,
    doi:10.1016/S1352-2310(97)83212-8,

with coefficients written here as recalled from memory; the tests check the
orders of the main and embedded solutions on closed-form problems, so a
wrong digit would show.

* RODAS3 (the default): four stages, order 3 (embedded 2), L-stable and
  stiffly accurate, one LU per step, two new RHS evaluations per step
  (stage 2 sits at the stage-1 point).
* ROS3: three stages, order 3 (embedded 2), L-stable, one LU per step, two
  new RHS evaluations (stages 2 and 3 share a point).

Choice measured on this machine (shipped stratosphere-box scenario, 10
days, spectral photolysis, atol 1e2 cm-3): at rtol 1e-4 RODAS3 took 1806
steps + 341 rejected, ROS3 4380 + 1604; at rtol 1e-3 RODAS3 1165 + 175,
ROS3 2883 + 1001.  RODAS3's error estimate, being stiffly accurate, does not
keep flagging the very stiff radicals (O1D, O, Cl) that a non-stiffly-
accurate estimate sees, so it takes longer steps, above all at twilight.

Formulation (Hairer & Wanner 1996, Solving Ordinary Differential Equations
II, 2nd ed., Springer, section IV.7, eq. (7.25), the form without matrix-
vector products)::

    (I / (h gamma) - J) K_i = f(t + alpha_i h, y + sum_j a_ij K_j)
                              + sum_j (c_ij / h) K_j + h gamma_i df/dt
    y_new = y + sum_i m_i K_i,     error = sum_i e_i K_i

Why a Rosenbrock method and not scipy's BDF / Radau / LSODA with the
analytic Jacobian (see benchmarks/bench_polar_run.py and DEVELOPERS.md
"Solver" for the figures): scipy's solvers pay Python overhead per step in
their generic machinery (solve_ivp bookkeeping, Newton iterations with
repeated RHS calls, dense-output objects), and at sunrise and sunset (and at
output times, to report the solution there rather than an interpolant) they
restart and lose their order and step history.  A one-step Rosenbrock method
restarts for free at every discontinuity, needs no Newton iteration (linear
stages only, so no convergence failures), and does one LU per step.
Measured (first 2 days of the shipped polar scenario, rtol 1e-4, atol 1e2
cm-3, same compiled RHS, analytic Jacobian, restarts at sunrise/sunset):
scipy BDF took 2.6-4.5x and Radau 2.3-4.0x the wall time of RODAS3 here
(two runs on a loaded machine); LSODA failed with repeated convergence
failures at the second sunrise.

Step-size control: the scaled error norm is the root mean square of
``error_i / (atol_i + rtol * max(|y_i|, |y_new_i|))`` (Hairer & Wanner 1996,
section IV.8); the new step is ``h * clip(SAFETY * err^(-1/3), FACTOR_MIN,
FACTOR_MAX)`` with the exponent 1/(embedded order + 1).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg as sla
from scipy.linalg.lapack import dgetrf, dgetrs

__all__ = ["RosenbrockMethod", "ROS3", "RODAS3", "rosenbrock_step", "stability_function", "error_norm",
           "next_step_factor",
           "SAFETY", "FACTOR_MIN", "FACTOR_MAX"]

#: fraction of the "optimal" step taken (Hairer & Wanner 1996, IV.8: 0.8-0.9)
SAFETY = 0.9
#: smallest allowed change of the step in one go (after a rejection)
FACTOR_MIN = 0.2
#: largest allowed growth of the step after an accepted step
FACTOR_MAX = 6.0


@dataclass(frozen=True)
class RosenbrockMethod:
    """Coefficients of an s-stage Rosenbrock method in the form of the module docstring."""

    name: str
    gamma: float                 # diagonal gamma_ii
    a: tuple                     # a[i][j], j < i
    c: tuple                     # c[i][j], j < i
    m: tuple                     # weights of the solution
    e: tuple                     # weights of the error estimate
    alpha: tuple                 # stage times / h
    gamma_sum: tuple             # gamma_i: coefficients of h df/dt
    error_order: int             # order of the embedded solution
    reference: str = ""

    @property
    def stages(self) -> int:
        return len(self.m)


_G = 0.43586652150845899941601945119356
ROS3 = RosenbrockMethod(
    name="ROS3",
    gamma=_G,
    a=((), (1.0,), (1.0, 0.0)),
    c=((), (-1.0156171083877702091975600115545,),
       (4.0759956452537699824805835358067, 9.2076794298330791242156818474003)),
    m=(1.0, 6.1697947043828245592553615689730, -0.42772256543218573326238373806514),
    e=(0.5, -2.9079558716805469821718236208017, 0.22354069897811569627360909276199),
    alpha=(0.0, _G, _G),
    gamma_sum=(_G, 0.24291996454816804366592249683314, 2.1851380027664058511513169485832),
    error_order=2,
    reference="Sandu et al. (1997), Atmos. Environ. 31, 3459 (coefficients recalled from memory)",
)


#: RODAS3: four stages, order 3, embedded order 2, stiffly accurate (the error
#: estimate vanishes for infinitely stiff components, unlike ROS3's).  Coefficients
#: from Sandu et al. (1997), Atmos. Environ. 31, 3459 (recalled from memory; the
#: tests check the orders).  Stage 2 is evaluated at the stage-1 point, so a step
#: costs two new RHS evaluations.
RODAS3 = RosenbrockMethod(
    name="RODAS3",
    gamma=0.5,
    a=((), (0.0,), (2.0, 0.0), (2.0, 0.0, 1.0)),
    c=((), (4.0,), (1.0, -1.0), (1.0, -1.0, -8.0 / 3.0)),
    m=(2.0, 0.0, 1.0, 1.0),
    e=(0.0, 0.0, 0.0, 1.0),
    alpha=(0.0, 0.0, 1.0, 1.0),
    gamma_sum=(0.5, 1.5, 0.0, 0.0),
    error_order=2,
    reference="Sandu et al. (1997), Atmos. Environ. 31, 3459 (coefficients recalled from memory)",
)


def rosenbrock_step(fun, jacobian, f0, dfdt, t, y, h, method: RosenbrockMethod = ROS3):
    """One Rosenbrock step.

    Parameters
    ----------
    fun : callable(t, y) -> dy/dt
    jacobian : ndarray (n, n), d f / d y at (t, y); overwritten
    f0 : ndarray (n,), f(t, y) (already known to the caller)
    dfdt : ndarray (n,) or None, partial derivative of f with respect to t
    t, y, h : start time, state, step

    A batch of independent boxes advances with one common h when ``y``, ``f0``
    and ``dfdt`` have leading member axes, ``(..., n)``, and ``jacobian`` is
    ``(..., n, n)`` (the layout of :class:`CompiledKinetics`' batched kernels);
    ``fun`` must then accept and return ``(..., n)`` arrays.

    Returns
    -------
    y_new, error (unscaled local error estimate), n_rhs (new RHS evaluations)
    """
    n = y.shape[-1]
    w = -jacobian
    if w.ndim == 2:
        w.flat[::n + 1] += 1.0 / (h * method.gamma)
        # LAPACK directly: the scipy.linalg wrappers cost more than the 50x50 LU itself
        lu, piv, info = dgetrf(w, overwrite_a=1)
        if info != 0:  # singular iteration matrix: report a failed step (the caller shrinks h)
            nan = np.full_like(y, np.nan)
            return nan, nan, 0

        def solve(rhs):
            return dgetrs(lu, piv, rhs)[0]
    else:
        # a batch of independent boxes (leading member axes, one common step h):
        # scipy.linalg factorises and solves the stacked matrices in one call each
        w[..., np.arange(n), np.arange(n)] += 1.0 / (h * method.gamma)
        with np.errstate(all="ignore"):
            lu_b = sla.lu_factor(w, check_finite=False)

        def solve(rhs):
            return sla.lu_solve(lu_b, rhs[..., None], check_finite=False)[..., 0]
    stages = []
    n_rhs = 0
    f_prev, point_prev = f0, (0.0, ())
    for i in range(method.stages):
        if i > 0:
            point = (method.alpha[i], _trimmed(method.a[i]))
            if point == point_prev:
                f_i = f_prev           # same stage point as the previous stage: reuse
            else:
                y_i = y.copy()
                for j, aij in enumerate(method.a[i]):
                    if aij:
                        y_i += aij * stages[j]
                f_i = fun(t + method.alpha[i] * h, y_i)
                n_rhs += 1
            point_prev = point
        else:
            f_i = f0
        f_prev = f_i
        rhs = f_i.copy()
        for j, cij in enumerate(method.c[i]):
            if cij:
                rhs += (cij / h) * stages[j]
        if dfdt is not None:
            rhs += (h * method.gamma_sum[i]) * dfdt
        stages.append(solve(rhs))
    y_new = y.copy()
    error = None
    for i in range(method.stages):
        if method.m[i]:
            y_new += method.m[i] * stages[i]
        if method.e[i]:
            error = method.e[i] * stages[i] if error is None else error + method.e[i] * stages[i]
    return y_new, error, n_rhs


def stability_function(z: float, method: RosenbrockMethod = RODAS3) -> float:
    """R(z): the method's step on y' = lambda y, y(0) = 1, with z = h lambda.

    Stage i of the module docstring's form reads, for this scalar problem
    (multiplied by h), ``(1/gamma - z) K_i = z (1 + sum_j a_ij K_j) + sum_j c_ij K_j``
    and ``R = 1 + sum_i m_i K_i`` (Hairer & Wanner 1996, IV.7).  The time loop
    uses it to make the air-density term exact for linear invariants.
    """
    stages = []
    for i in range(method.stages):
        rhs = z * (1.0 + sum(a * stages[j] for j, a in enumerate(method.a[i])))
        rhs += sum(c * stages[j] for j, c in enumerate(method.c[i]))
        stages.append(rhs / (1.0 / method.gamma - z))
    return 1.0 + sum(m * k for m, k in zip(method.m, stages))


def _trimmed(row) -> tuple:
    row = tuple(row)
    while row and row[-1] == 0.0:
        row = row[:-1]
    return row


def error_norm(error, y, y_new, rtol, atol):
    """RMS of the scaled error and the index of the largest scaled component."""
    scale = atol + rtol * np.maximum(np.abs(y), np.abs(y_new))
    ratio = np.abs(error) / scale
    worst = int(np.argmax(ratio)) if ratio.size else 0
    return float(np.sqrt(np.mean(ratio ** 2))), worst, scale


def next_step_factor(err: float, method: RosenbrockMethod = ROS3, *, after_reject: bool = False) -> float:
    """Step-size factor from the scaled error norm (elementary controller)."""
    if err == 0.0:
        factor = FACTOR_MAX
    elif not np.isfinite(err):
        factor = FACTOR_MIN
    else:
        factor = SAFETY * err ** (-1.0 / (method.error_order + 1))
    factor = min(FACTOR_MAX, max(FACTOR_MIN, factor))
    if after_reject:
        factor = min(factor, 1.0)
    return factor
