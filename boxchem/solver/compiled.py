"""Compiled (numba) kernels and the Rosenbrock step loop of the time loop.

One compiled call (``advance_batch``) takes every running member of a batch
through one k(t) window: per member, ``_advance_member`` - the one step loop -
runs the steps through the window's landing times - RHS, analytic Jacobian
written into the sparse LU pattern (``sparselu``), the LU without pivoting on
that fixed pattern (dense partial pivoting as the fallback where a pivot is too
small), the Rosenbrock stages, the error test and step-size control, and k(t)
from the window's table (``RateCoefficientModel.interval_table``) with the
member's multipliers - all without returning to Python.  The Python side is
``timeloop.integrate_batch``.

Each rule of a step is one small compiled function, called by this loop and by
the lock-step kernel (``lockstep``): the first-step estimate, landing on a stop,
the error norm, the step after a rejection and after an acceptance, the smallest
step, the air-density factor, the output copy.  What a kind of run adds to the
steps comes in through hooks (``_on_stage``, ``_on_step``, ``_on_output``) chosen by
the type of the loop's ``extra`` argument (``_implements``; numba compiles the loop
once per kind): nothing for a plain run (``()``), the sensitivities S for the
tangent-linear run (``tangent.advance_tangent``), so both take the same steps with
the same code.

The formulas are those of the numpy kernels, written as loops:

* rates, RHS and Jacobian: ``kinetics.CompiledKinetics`` (the same slot,
  saturation and scatter tables, so both give the same numbers to rounding;
  tested to 1e-12 relative);
* the step: ``rosenbrock.rosenbrock_step`` (Hairer & Wanner 1996, IV.7,
  eq. (7.25)), error norm and controller of ``rosenbrock``;
* the time-loop rules of ``timeloop`` (landing on stops, keeping the step
  proposal across them, clipping of small negatives, rejection of larger
  ones, the exact air-density factor exp(r h) / R(r h)).

k(t) and its time derivative come from the window table (analytic derivative),
and k is evaluated at every stage time the method asks for; d f/d t is exact
(rates are linear in k and multilinear in the fixed-species slots).

numba compiles each function on first use (tens of seconds for all of them)
and caches the machine code next to this file (``cache=True``), so later
processes load it in a fraction of a second.  ``BOXCHEM_JIT=0`` (or a missing
numba) makes ``integrate_box`` use the numpy reference loop (``reference``).
"""
from __future__ import annotations

import math
import os

import numpy as np

try:  # numba is a dependency, but the numpy path must keep working without it
    import numba as _numba
except ImportError:  # pragma: no cover - exercised only where numba is missing
    _numba = None

__all__ = ["jit_available", "kinetics_arrays", "method_arrays", "compiled_rhs", "compiled_jacobian",
           "compiled_sparse_jacobian", "fill_reducing_order", "advance_batch", "PIVOT_TOLERANCE"]

#: a static pivot below this fraction of the largest entry of its column of W sends the
#: step to the dense LU with partial pivoting (``sparselu``)
PIVOT_TOLERANCE = 1e-4


def jit_available() -> bool:
    """True when numba is importable and ``BOXCHEM_JIT`` is not ``0``."""
    return _numba is not None and os.environ.get("BOXCHEM_JIT", "1").strip() not in ("0", "false", "no")


def _njit(fn=None, *, cache=True, inline="never"):
    if fn is None:
        return lambda f: _njit(f, cache=cache, inline=inline)
    if _numba is None:
        return fn
    # error_model="numpy": x / 0 gives inf or nan (caught as non-finite values) instead of raising;
    # inline="always" (small step rules): inlined into the callers' numba IR, so compiled once
    # with each caller instead of as a function of its own (compile time)
    return _numba.njit(cache=cache, nogil=True, error_model="numpy", inline=inline)(fn)


# ---------------------------------------------------------------------------
# data layout
# ---------------------------------------------------------------------------
def kinetics_arrays(kinetics) -> tuple:
    """The index tables of a :class:`CompiledKinetics` in the layout of the compiled kernels.

    ``(mass, sat, sat_half, st_ptr, st_idx, st_val, jac_cols, jac_vals, jac_rows)``:
    reactant slots (n_reactions, width) and saturation slots (n_reactions,
    swidth) into ``c = [y | fixed | 1]``; the net stoichiometry by reaction
    (CSC: species index and coefficient of reaction r in
    ``st_idx/st_val[st_ptr[r]:st_ptr[r+1]]``); the Jacobian scatter triplets
    (slot column, coefficient, flat index of the dense Jacobian).
    """
    cached = getattr(kinetics, "_compiled_arrays", None)
    if cached is not None:
        return cached
    import scipy.sparse as sp
    net = sp.csc_matrix(kinetics._stoich_dense)
    # unsigned indices: numba then skips the negative-index wrap-around test on every
    # access (measured: the sparse LU 1.7x faster than with int64 indices)
    arrays = (np.ascontiguousarray(kinetics._mass, dtype=np.uint64),
              np.ascontiguousarray(kinetics._sat, dtype=np.uint64),       # already (n_reactions, swidth)
              np.ascontiguousarray(kinetics._sat_half, dtype=np.float64),
              net.indptr.astype(np.uint64), net.indices.astype(np.uint64), net.data.astype(np.float64),
              kinetics._jac_cols.astype(np.uint64), kinetics._jac_vals.astype(np.float64),
              kinetics._jac_rows.astype(np.uint64))
    kinetics._compiled_arrays = arrays
    return arrays


def fill_reducing_order(kinetics) -> np.ndarray:
    """Species order of the sparse LU (``sparselu``: minimum degree or degree sort, fewer operations)."""
    from .sparselu import sparse_lu_structure
    return sparse_lu_structure(kinetics).perm


def method_arrays(method) -> tuple:
    """``(gamma, A, C, m, e, alpha, gamma_sum, reuse, error_exponent)`` of a RosenbrockMethod.

    ``reuse[i]`` is 1 when stage i sits at the same point as stage i-1 (its f is reused).
    """
    from .rosenbrock import _trimmed
    s = method.stages
    a = np.zeros((s, s))
    c = np.zeros((s, s))
    reuse = np.zeros(s, dtype=np.int64)
    prev = (0.0, ())
    for i in range(s):
        for j, v in enumerate(method.a[i]):
            a[i, j] = v
        for j, v in enumerate(method.c[i]):
            c[i, j] = v
        point = (method.alpha[i], _trimmed(method.a[i]))
        if i > 0 and point == prev:
            reuse[i] = 1
        prev = point
    return (float(method.gamma), a, c, np.asarray(method.m, float), np.asarray(method.e, float),
            np.asarray(method.alpha, float), np.asarray(method.gamma_sum, float), reuse,
            1.0 / (method.error_order + 1))


# ---------------------------------------------------------------------------
# kernels
# ---------------------------------------------------------------------------
@_njit
def _kinetics(y, k, fixed, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos, jac_cols,
              jac_vals, c, rate, d, f_out, jac_out, want_rhs, want_jac):
    """Rates into ``rate``; RHS into ``f_out`` and/or the Jacobian into the flat ``jac_out``.

    ``jac_pos[q]`` is where Jacobian scatter triplet q lands in ``jac_out``: the
    position in the sparse LU pattern (``sparselu``) or the flat index of a dense
    (n, n) array.  ``c`` (nv + nf + 1), ``rate`` (nr) and ``d`` (nr * (width +
    swidth)) are work arrays.
    """
    _kinetics_dt(y, k, fixed, k, fixed, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos,
                 jac_cols, jac_vals, c, rate, d, f_out, jac_out, f_out, want_rhs, want_jac, False)


@_njit
def _kinetics_dt(y, k, fixed, dk, dfixed, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos,
                 jac_cols, jac_vals, c, rate, d, f_out, jac_out, dfdt_out, want_rhs, want_jac,
                 want_dt):
    """``_kinetics``, and with ``want_dt`` (needs ``want_jac``) the partial time derivative
    d f/d t = S (d rate/d t) at fixed y into ``dfdt_out``, exactly: rates are linear in
    k (the term dk prod c) and multilinear in the fixed-species slots (the term
    d rate/d c_p dfixed_p, from the Jacobian's slot derivatives ``d``).
    """
    nv = y.shape[0]
    nf = fixed.shape[0]
    nr = k.shape[0]
    width = mass.shape[1]
    swidth = sat.shape[1]
    nslot = width + swidth
    first_fixed = np.uint64(nv)          # slot indices of the fixed species (unsigned, as mass)
    end_fixed = np.uint64(nv + nf)
    for i in range(nv):
        c[i] = y[i]
    for i in range(nf):
        c[nv + i] = fixed[i]
    c[nv + nf] = 1.0
    one_slot = np.uint64(nv + nf)         # padding slots point at the constant one
    for r in range(nr):
        mprod = 1.0
        for p in range(width):
            mprod *= c[mass[r, p]]
        # real saturation slots come first; padding has half = 0 (factor exactly 1): skipped
        n_sat = 0
        sprod = 1.0
        for q in range(swidth):
            half = sat_half[r, q]
            if half == 0.0:
                break
            b = c[sat[r, q]]
            sprod *= b / (b + half)
            n_sat += 1
        rate[r] = k[r] * mprod * sprod
        if want_jac:
            for p in range(width):
                if mass[r, p] == one_slot:    # padding: no derivative is ever read
                    break
                v = k[r] * sprod
                for q in range(width):
                    if q != p:
                        v *= c[mass[r, q]]
                d[r * nslot + p] = v
            for p in range(n_sat):
                b = c[sat[r, p]]
                half = sat_half[r, p]
                v = k[r] * mprod * (half / ((b + half) * (b + half)))
                for q in range(n_sat):
                    if q != p:
                        bq = c[sat[r, q]]
                        v *= bq / (bq + sat_half[r, q])
                d[r * nslot + width + p] = v
            if want_dt:
                v = dk[r] * mprod * sprod
                for p in range(width):
                    slot = mass[r, p]
                    if slot >= first_fixed and slot < end_fixed:
                        v += d[r * nslot + p] * dfixed[slot - first_fixed]
                rate[r] = v              # the rates themselves are not needed by this caller
    if want_dt:
        for i in range(nv):
            dfdt_out[i] = 0.0
        for r in range(nr):
            for q in range(st_ptr[r], st_ptr[r + 1]):
                dfdt_out[st_idx[q]] += st_val[q] * rate[r]
    if want_rhs:
        for i in range(nv):
            f_out[i] = 0.0
        for r in range(nr):
            for q in range(st_ptr[r], st_ptr[r + 1]):
                f_out[st_idx[q]] += st_val[q] * rate[r]
    if want_jac:
        for i in range(jac_out.shape[0]):
            jac_out[i] = 0.0
        for q in range(jac_pos.shape[0]):
            jac_out[jac_pos[q]] += jac_vals[q] * d[jac_cols[q]]


def _work(kin_arrays, nv, nf):
    mass, sat = kin_arrays[0], kin_arrays[1]
    nr = mass.shape[0]
    return (np.empty(nv + nf + 1), np.empty(nr), np.empty(nr * (mass.shape[1] + sat.shape[1])))


def compiled_rhs(kinetics, y, k, fixed) -> np.ndarray:
    """d y/d t [cm-3 s-1] of one box through the compiled kernel (same contract as ``kinetics.rhs``)."""
    arrays = kinetics_arrays(kinetics)
    y, k, fixed = (np.ascontiguousarray(a, dtype=float) for a in (y, k, fixed))
    c, rate, d = _work(arrays, y.size, fixed.size)
    out = np.empty(y.size)
    _kinetics(y, k, fixed, *arrays[:6], arrays[8], *arrays[6:8], c, rate, d, out, np.empty(1),
              True, False)
    return out


def compiled_jacobian(kinetics, y, k, fixed) -> np.ndarray:
    """Dense analytic Jacobian [s-1] of one box through the compiled kernel."""
    arrays = kinetics_arrays(kinetics)
    y, k, fixed = (np.ascontiguousarray(a, dtype=float) for a in (y, k, fixed))
    c, rate, d = _work(arrays, y.size, fixed.size)
    out = np.empty(y.size * y.size)
    _kinetics(y, k, fixed, *arrays[:6], arrays[8], *arrays[6:8], c, rate, d, np.empty(1), out,
              False, True)
    return out.reshape(y.size, y.size)


def compiled_sparse_jacobian(kinetics, y, k, fixed) -> np.ndarray:
    """The Jacobian [s-1] as values in the sparse LU pattern (``sparselu.sparse_lu_structure``)."""
    from .sparselu import sparse_lu_structure
    arrays = kinetics_arrays(kinetics)
    lu = sparse_lu_structure(kinetics)
    y, k, fixed = (np.ascontiguousarray(a, dtype=float) for a in (y, k, fixed))
    c, rate, d = _work(arrays, y.size, fixed.size)
    out = np.empty(lu.nnz)
    _kinetics(y, k, fixed, *arrays[:6], lu.jac_pos_unsigned, *arrays[6:8], c, rate, d, np.empty(1), out,
              False, True)
    return out


@_njit
def _coefficients_at(t, t_a, t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, lmult, fmult,
                     k, fixed, dk, dfixed, want_slope):
    """k(t), fixed(t) (and their time derivatives) from an interval table.

    ``poly`` (n_poly, nr + nf): power-series coefficients in s = 2 (t - t_a)/(t_b - t_a) - 1
    of ln v (``log_col`` 1) or v (0) for the non-photolysis k and the fixed densities;
    ``sza_poly`` the same for the solar zenith angle [deg]; photolysis columns
    ``phot_cols`` get J = exp(piecewise-linear ln J in SZA on ``sgrid``), zero at or
    beyond ``horizon`` (see ``RateCoefficientModel.interval_table``).  A member's rate
    multipliers f (``lmult`` = ln f, ``fmult`` = f, per reaction) enter as ln f added to
    the ln k and ln J columns and as a factor on the columns kept linear.
    """
    nr = k.shape[0]
    nf = fixed.shape[0]
    npoly = poly.shape[0]
    span = t_b - t_a
    s = 2.0 * (t - t_a) / span - 1.0
    ds_dt = 2.0 / span
    for col in range(nr + nf):
        v = 0.0
        dv = 0.0
        for q in range(npoly - 1, -1, -1):
            dv = dv * s + v
            v = v * s + poly[q, col]
        if col < nr:
            if log_col[col]:
                val = math.exp(v + lmult[col])
                slope = val * dv * ds_dt
            else:
                val = (v if v > 0.0 else 0.0) * fmult[col]
                slope = dv * ds_dt * fmult[col]
        elif log_col[col]:
            val = math.exp(v)
            slope = val * dv * ds_dt
        else:
            val = v if v > 0.0 else 0.0
            slope = dv * ds_dt
        if col < nr:
            k[col] = val
            if want_slope:
                dk[col] = slope
        else:
            fixed[col - nr] = val
            if want_slope:
                dfixed[col - nr] = slope
    ng = sgrid.shape[0]
    if ng == 0:
        return
    z = 0.0
    dz = 0.0
    for q in range(sza_poly.shape[0] - 1, -1, -1):
        dz = dz * s + z
        z = z * s + sza_poly[q]
    if z >= horizon:
        return                      # J exactly zero beyond the box's horizon
    if ng == 1:
        i = 0
        w = 0.0
        slope_s = 0.0
    else:
        # segment of sgrid holding z (held at the end values outside the grid)
        lo = 0
        hi = ng - 1
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if sgrid[mid] <= z:
                lo = mid
            else:
                hi = mid
        i = lo
        w = (z - sgrid[i]) / (sgrid[i + 1] - sgrid[i])
        inv = 1.0 / (sgrid[i + 1] - sgrid[i])
        if w < 0.0:
            w = 0.0
            inv = 0.0
        elif w > 1.0:
            w = 1.0
            inv = 0.0
        slope_s = inv
    for c in range(phot_cols.shape[0]):
        col = phot_cols[c]
        if ng == 1:
            lj = lnj[0, c]
            dlj = 0.0
        else:
            lj = (1.0 - w) * lnj[i, c] + w * lnj[i + 1, c]
            dlj = (lnj[i + 1, c] - lnj[i, c]) * slope_s
        j = math.exp(lj + lmult[col])
        k[col] += j
        if want_slope:
            dk[col] += j * dlj * dz * ds_dt


@_njit
def _lu_factor(a, piv, cols):
    """In-place LU with partial pivoting (Golub & Van Loan 2013, Matrix Computations,
    alg. 3.4.1); returns False when a pivot is zero or not finite.

    Sparsity is exploited on the fly: the update of row i by pivot row j runs
    only over the non-zero columns of row j (``cols``, a work array) and only
    for non-zero multipliers, so a chemistry Jacobian (about 20 % filled,
    species ordered by ``fill_reducing_order``) costs a fraction of the dense
    n^3/3 operations.
    """
    n = a.shape[0]
    for j in range(n):
        p = j
        big = abs(a[j, j])
        for i in range(j + 1, n):
            v = abs(a[i, j])
            if v > big:
                big = v
                p = i
        piv[j] = p
        if not (big > 0.0) or not math.isfinite(big):
            return False
        if p != j:
            for q in range(n):
                tmp = a[j, q]
                a[j, q] = a[p, q]
                a[p, q] = tmp
        inv = 1.0 / a[j, j]
        nc = 0
        for q in range(j + 1, n):
            if a[j, q] != 0.0:
                cols[nc] = q
                nc += 1
        for i in range(j + 1, n):
            if a[i, j] != 0.0:
                lij = a[i, j] * inv
                a[i, j] = lij
                for qq in range(nc):
                    q = cols[qq]
                    a[i, q] -= lij * a[j, q]
    return True


@_njit
def _lu_solve(a, piv, b):
    """Solve in place with the factors of ``_lu_factor``."""
    n = a.shape[0]
    for j in range(n):
        p = piv[j]
        if p != j:
            tmp = b[j]
            b[j] = b[p]
            b[p] = tmp
    for i in range(n):
        s = b[i]
        for q in range(i):
            s -= a[i, q] * b[q]
        b[i] = s
    for i in range(n - 1, -1, -1):
        s = b[i]
        for q in range(i + 1, n):
            s -= a[i, q] * b[q]
        b[i] = s / a[i, i]


@_njit
def _sparse_w(jv, shift, col, diag, a, colmax):
    """W = shift I - J in the sparse pattern (``jv`` the Jacobian values); column maxima of |W|."""
    n = diag.shape[0]
    for p in range(jv.shape[0]):
        a[p] = -jv[p]
    for i in range(n):
        a[diag[i]] += shift
        colmax[i] = 0.0
    for p in range(jv.shape[0]):
        v = abs(a[p])
        if v > colmax[col[p]]:
            colmax[col[p]] = v


@_njit
def _sparse_factor(a, diag, l_pos, l_pivot, op_ptr, op_src, op_dst, colmax, tol):
    """LU without pivoting on the fixed pattern (``sparselu``), in place.

    Returns False when a pivot is not finite or below ``tol`` times the largest
    entry of its column of W (the multipliers below it could then grow beyond
    1/tol; the caller uses the dense pivoting LU instead).
    """
    for e in range(l_pos.shape[0]):
        p = l_pos[e]
        lik = a[p] / a[l_pivot[e]]
        a[p] = lik
        if lik != 0.0:
            for q in range(op_ptr[e], op_ptr[e + 1]):
                a[op_dst[q]] -= lik * a[op_src[q]]
    for i in range(diag.shape[0]):
        u = abs(a[diag[i]])
        if not (u > tol * colmax[i]) or not math.isfinite(u):
            return False
    return True


@_njit
def _sparse_solve(a, ptr, col, diag, perm, b, x):
    """Solve W z = b in place (``b`` in species order) with the factors of ``_sparse_factor``."""
    n = diag.shape[0]
    for i in range(n):
        x[i] = b[perm[i]]
    for i in range(n):
        s = x[i]
        for p in range(ptr[i], diag[i]):
            s -= a[p] * x[col[p]]
        x[i] = s
    one = np.uint64(1)                   # diag is unsigned (uint64 + int64 would be float)
    for i in range(n - 1, -1, -1):
        s = x[i]
        for p in range(diag[i] + one, ptr[i + 1]):
            s -= a[p] * x[col[p]]
        x[i] = s / a[diag[i]]
    for i in range(n):
        b[perm[i]] = x[i]


@_njit
def _dense_w(jv, shift, ptr, col, w):
    """W = shift I - J as a dense array (permuted order) from the sparse Jacobian values."""
    n = w.shape[0]
    for i in range(n):
        for q in range(n):
            w[i, q] = 0.0
        for p in range(ptr[i], ptr[i + 1]):
            w[i, col[p]] = -jv[p]
        w[i, i] += shift


@_njit
def _dense_solve(w, piv, perm, b, x):
    """Solve in place (``b`` in species order) with the factors of ``_lu_factor``."""
    n = w.shape[0]
    for i in range(n):
        x[i] = b[perm[i]]
    _lu_solve(w, piv, x)
    for i in range(n):
        b[perm[i]] = x[i]


@_njit
def _factor_w(jv, shift, ptr, col, diag, l_pos, l_pivot, op_ptr, op_src, op_dst, a, colmax, w, piv,
              lu_cols, tol):
    """Factor W: sparse (returns 1), dense with partial pivoting as the fallback (2), or 0 if singular.

    ``tol`` < 0 skips the sparse LU (every step dense: the benchmark's "before").
    """
    if tol >= 0.0:
        _sparse_w(jv, shift, col, diag, a, colmax)
        if _sparse_factor(a, diag, l_pos, l_pivot, op_ptr, op_src, op_dst, colmax, tol):
            return 1
    _dense_w(jv, shift, ptr, col, w)
    if _lu_factor(w, piv, lu_cols):
        return 2
    return 0


@_njit
def _solve_w(mode, a, ptr, col, diag, perm, w, piv, b, x):
    if mode == 1:
        _sparse_solve(a, ptr, col, diag, perm, b, x)
    else:
        _dense_solve(w, piv, perm, b, x)


# ---------------------------------------------------------------------------
# the rules of a step, each written once (the per-member loop below, the tangent's hooks and
# the lock-step kernel call them; numba compiles them into their callers)
# ---------------------------------------------------------------------------
@_njit(inline="always")
def _first_step(y, f, atol, rtol, first_fraction, fallback):
    """First step-size estimate [s] from y and f = dy/dt at the start (Hairer & Wanner 1996, II.4)."""
    nv = y.shape[0]
    d0 = 0.0
    d1 = 0.0
    for i in range(nv):
        sc = atol[i] + rtol * abs(y[i])
        d0 += (y[i] / sc) ** 2
        d1 += (f[i] / sc) ** 2
    d0 = math.sqrt(d0 / nv) if nv else 0.0
    d1 = math.sqrt(d1 / nv) if nv else 0.0
    return first_fraction * d0 / d1 if (d0 > 1e-5 and d1 > 1e-5) else fallback


@_njit(inline="always")
def _land(t, t_end, h):
    """``(h, clipped)``: the step from t cut to land on t_end (and snapped onto it when it would
    stop within 1e-9 relative of it); ``clipped`` when the proposal was cut."""
    h_proposed = h
    if h > t_end - t:
        h = t_end - t
    clipped = h < h_proposed
    if t_end - (t + h) < 1e-9 * max(abs(t_end), 1.0):
        h = t_end - t
    return h, clipped


@_njit(inline="always")
def _error_norm(y, ynew, err, atol, rtol, worst):
    """``(norm, nonfinite, worst)`` of the step y -> ynew with error estimate ``err``.

    The weighted RMS norm of ``rosenbrock`` (scale atol + rtol max(|y|, |ynew|)), raised to
    the largest scaled negative value of ynew when that exceeds 1 (a larger negative rejects
    the step; a smaller one is clipped after it).  Not finite: norm inf, ``nonfinite`` True,
    ``worst`` the first non-finite species of ynew (or the worst so far when only the norm is
    not finite).  Else ``worst`` is the species with the largest scaled error or negative.
    """
    nv = y.shape[0]
    for i in range(nv):
        if not math.isfinite(ynew[i]):
            return math.inf, True, i
    acc = 0.0
    worst_ratio = -1.0
    neg = 0.0
    neg_i = -1
    for i in range(nv):
        sc = atol[i] + rtol * max(abs(y[i]), abs(ynew[i]))
        ratio = abs(err[i]) / sc
        acc += ratio * ratio
        if ratio > worst_ratio:
            worst_ratio = ratio
            worst = i
        if ynew[i] < 0.0 and -ynew[i] / sc > neg:
            neg = -ynew[i] / sc
            neg_i = i
    norm = math.sqrt(acc / nv) if nv else 0.0
    if not math.isfinite(norm):
        return math.inf, True, worst
    if neg > 1.0:
        worst = neg_i
        if neg > norm:
            norm = neg
    return norm, False, worst


@_njit(inline="always")
def _rejected_step(h, err_norm, err_exp, params):
    """The step to retry after a rejection: the controller's factor of ``rosenbrock``, at most 1
    (``FACTOR_MIN`` when the norm is not finite)."""
    safety, fmin, fmax = params[0], params[1], params[2]
    if math.isfinite(err_norm) and err_norm > 0.0:
        factor = safety * err_norm ** (-err_exp)
    else:
        factor = fmin
    factor = min(fmax, max(fmin, factor))
    factor = min(factor, 1.0)
    return h * factor


@_njit(inline="always")
def _below_minimum(h, t, params):
    """True when h is below the smallest step allowed at t (``MIN_STEP_ABSOLUTE``, ``_RELATIVE``)."""
    return h < max(params[3], params[4] * abs(t))


@_njit(inline="always")
def _next_step(h, err_norm, err_exp, params, rejected_last, clipped, rejected_here, h_proposed,
               h_max):
    """The proposal after an accepted step h: the controller's factor (at most 1 after a
    rejection), kept at least at the proposal a landing cut, at most ``h_max``."""
    safety, fmin, fmax = params[0], params[1], params[2]
    if err_norm == 0.0:
        factor = fmax
    else:
        factor = safety * err_norm ** (-err_exp)
    factor = min(fmax, max(fmin, factor))
    if rejected_last:
        factor = min(factor, 1.0)
    h_next = h * factor
    if clipped and not rejected_here:
        h_next = max(h_next, h_proposed)
    return min(h_next, h_max)


@_njit(inline="always")
def _air_density_factor(r_air, h, gamma, ma, mc, mm, z):
    """exp(r h) / R(r h) for the air-density rate r [s-1] (1 when r = 0): the exact dilution of
    linear invariants over a step (``timeloop``); R is the method's stability function, its
    stages computed in the work array ``z`` (ns,)."""
    if r_air == 0.0:
        return 1.0
    zz = r_air * h
    rsum = 1.0
    for st in range(ma.shape[0]):
        v = zz
        for q in range(st):
            v += zz * ma[st, q] * z[q] + mc[st, q] * z[q]
        z[st] = v / (1.0 / gamma - zz)
        rsum += mm[st] * z[st]
    return math.exp(zz) / rsum


@_njit(inline="always")
def _store_output(ys, m, j, y, reached):
    """Member m's state ``y`` as its output j (``reached[m]`` = outputs written)."""
    for q in range(y.shape[0]):
        ys[m, j, q] = y[q]
    reached[m] = j + 1


# ---------------------------------------------------------------------------
# hooks: what a kind of run adds to the steps of the one loop (the tangent's S)
# ---------------------------------------------------------------------------
_STAGE_HOOKS, _STEP_HOOKS, _OUTPUT_HOOKS = {}, {}, {}     # class of ``extra`` -> implementation


def _implements(hooks, extra_class):
    """Decorator: the function is the hook's implementation (``_STAGE_HOOKS``, ...) for an
    ``extra`` of ``extra_class`` (``tuple``: the plain run's ``()``; else a namedtuple class).
    It takes the hook's parameter names."""
    def register(impl):
        hooks[extra_class] = impl
        return impl
    return register


def _on_stage(extra, st, yi, ks, fxs):
    """At each stage point the method evaluates (not a reused one), with its k and fixed."""
    return _STAGE_HOOKS[type(extra)](extra, st, yi, ks, fxs)


def _on_step(extra, y, ynew, corr, h, r_air, stages, k0, fx0, dk0, dfx0, mode, a, w, piv):
    """On each accepted step before y becomes ``ynew`` (y and k at the step's start, ynew
    multiplied by the air-density factor ``corr``; the stages and W's factors of the step)."""
    return _STEP_HOOKS[type(extra)](extra, y, ynew, corr, h, r_air, stages, k0, fx0, dk0, dfx0, mode,
                                    a, w, piv)


def _on_output(extra, j):
    """After the member's state is written as output j."""
    return _OUTPUT_HOOKS[type(extra)](extra, j)


def _hook_for(hooks, extra_type):
    """The implementation for the numba type of ``extra`` (None: not this hook's kind)."""
    for extra_class, impl in hooks.items():
        if extra_class is tuple:
            if isinstance(extra_type, _numba.types.Tuple) and len(extra_type) == 0:
                return impl
        elif getattr(extra_type, "instance_class", None) is extra_class:
            return impl
    return None


if _numba is not None:
    # compiled: the implementation is chosen by the type of ``extra`` and inlined into the loop
    # (a function passed as an argument instead would make the callers uncacheable)
    from numba.extending import overload

    @overload(_on_stage, inline="always")
    def _on_stage_compiled(extra, st, yi, ks, fxs):
        return _hook_for(_STAGE_HOOKS, extra)

    @overload(_on_step, inline="always")
    def _on_step_compiled(extra, y, ynew, corr, h, r_air, stages, k0, fx0, dk0, dfx0, mode, a, w, piv):
        return _hook_for(_STEP_HOOKS, extra)

    @overload(_on_output, inline="always")
    def _on_output_compiled(extra, j):
        return _hook_for(_OUTPUT_HOOKS, extra)


@_implements(_STAGE_HOOKS, tuple)
def _plain_stage(extra, st, yi, ks, fxs):
    pass


@_implements(_STEP_HOOKS, tuple)
def _plain_step(extra, y, ynew, corr, h, r_air, stages, k0, fx0, dk0, dfx0, mode, a, w, piv):
    pass


@_implements(_OUTPUT_HOOKS, tuple)
def _plain_output(extra, j):
    pass


# ---------------------------------------------------------------------------
# the one step loop
# ---------------------------------------------------------------------------
@_njit(cache=False)   # compiled into each (cached) caller with its kind of hooks (too many
#                       arguments for numba to inline it)
def _advance_member(m, landings, air_rates, out_index, ys, reached, y, h, restart, status, h_max, t_a,
                    t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, lmult, fmult, rtol,
                    atol, gamma, ma, mc, mm, me, malpha, mgsum, mreuse, err_exp, mass, sat, sat_half,
                    st_ptr, st_idx, st_val, jac_cols, jac_vals, jac_pos, perm, ptr, col, diag, l_pos,
                    l_pivot, op_ptr, op_src, op_dst, n_fixed, counters, info, params, extra):
    """Advance member m (``y[m]`` in place) through the window's landing times with Rosenbrock steps.

    Arguments as ``advance_batch``.  ``params`` = (SAFETY, FACTOR_MIN, FACTOR_MAX,
    MIN_STEP_ABSOLUTE, MIN_STEP_RELATIVE, FIRST_STEP_FRACTION, FALLBACK_FIRST_STEP,
    FIXED_DIFFERENCE, PIVOT_TOLERANCE).  ``counters[m]`` (int64): steps, rejected,
    RHS, Jacobian, LU evaluations, dense-LU fallbacks (added to).  After each
    landing interval ``info[m]`` = (t reached, step proposal, index of the worst
    species) and ``h[m]`` the proposal.  ``status[m]``: stays 0 when the window's
    end is reached; 1 step size below the minimum (error test); 2 step size below
    the minimum (non-finite values).

    ``extra`` chooses the hooks ``_on_stage``, ``_on_step``, ``_on_output`` (what a kind
    of run adds to the steps): ``()`` for a plain run (nothing), the tangent's work
    (``tangent``: S on the same steps).
    """
    first_frac, fallback, piv_tol = params[5], params[6], params[8]
    ym = y[m]
    lm = lmult[m]
    fm = fmult[m]
    cnt = counters[m]
    nv = ym.shape[0]
    nr = poly.shape[1] - n_fixed
    ns = ma.shape[0]
    nnz = col.shape[0]
    c = np.empty(nv + n_fixed + 1)
    rate = np.empty(nr)
    d = np.empty(nr * (mass.shape[1] + sat.shape[1]))
    k0 = np.empty(nr)
    fx0 = np.empty(n_fixed)
    dk0 = np.empty(nr)
    dfx0 = np.empty(n_fixed)
    ks = np.empty(nr)
    fxs = np.empty(n_fixed)
    dks = np.empty(nr)
    dfxs = np.empty(n_fixed)
    f0c = np.empty(nv)
    f0 = np.empty(nv)
    fi = np.empty(nv)
    fprev = np.empty(nv)
    dfdt = np.empty(nv)
    tmp = np.empty(nv)
    yi = np.empty(nv)
    ynew = np.empty(nv)
    err = np.empty(nv)
    xw = np.empty(nv)
    jv = np.empty(nnz)
    a = np.empty(nnz)
    rowmax = np.empty(nv)
    w = np.empty((nv, nv))
    piv = np.empty(nv, dtype=np.int64)
    lu_cols = np.empty(nv, dtype=np.int64)
    stages = np.empty((ns, nv))
    zs = np.empty(ns)
    dummy = np.empty(1)

    for interval in range(air_rates.shape[0]):
        t = landings[interval]
        t_end = landings[interval + 1]
        r_air = air_rates[interval]
        hh = h[m]
        _coefficients_at(t, t_a, t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, lm, fm,
                         k0, fx0, dk0, dfx0, True)
        _kinetics(ym, k0, fx0, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos, jac_cols, jac_vals,
                  c, rate, d, f0c, dummy, True, False)
        cnt[2] += 1
        if restart[m] != 0:
            est = _first_step(ym, f0c, atol, rtol, first_frac, fallback)
            if est < hh:
                hh = est
            restart[m] = 0
        if hh > h_max:
            hh = h_max
        worst = -1
        rejected_last = False
        while t < t_end:
            h_proposed = hh
            hh, clipped = _land(t, t_end, hh)
            # Jacobian (in the sparse LU pattern) and d f/d t in one pass; f at the start with
            # the air-density term
            _kinetics_dt(ym, k0, fx0, dk0, dfx0, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos,
                         jac_cols, jac_vals, c, rate, d, tmp, jv, dfdt, False, True, True)
            cnt[3] += 1
            for i in range(nv):
                f0[i] = f0c[i] + r_air * ym[i]
            rejected_here = False
            while True:
                t_new = t_end if hh == t_end - t else t + hh
                # W = I/(h gamma) - (J + r_air I)
                mode = _factor_w(jv, 1.0 / (hh * gamma) - r_air, ptr, col, diag, l_pos, l_pivot,
                                 op_ptr, op_src, op_dst, a, rowmax, w, piv, lu_cols, piv_tol)
                cnt[4] += 1
                if mode == 2 and piv_tol >= 0.0:
                    cnt[5] += 1
                err_norm = math.inf
                nonfinite = True
                last_alpha = -1.0
                if mode != 0:
                    for st in range(ns):
                        if st == 0:
                            for i in range(nv):
                                fi[i] = f0[i]
                        elif mreuse[st]:
                            for i in range(nv):
                                fi[i] = fprev[i]
                        else:
                            for i in range(nv):
                                v = ym[i]
                                for q in range(st):
                                    if ma[st, q] != 0.0:
                                        v += ma[st, q] * stages[q, i]
                                yi[i] = v
                            if malpha[st] != last_alpha:
                                # at the step's end (alpha = 1) with slopes: the next step starts there
                                t_stage = t_new if malpha[st] == 1.0 else t + malpha[st] * hh
                                _coefficients_at(t_stage, t_a, t_b, poly, log_col, sza_poly, sgrid,
                                                 lnj, phot_cols, horizon, lm, fm, ks, fxs, dks, dfxs,
                                                 malpha[st] == 1.0)
                                last_alpha = malpha[st]
                            _on_stage(extra, st, yi, ks, fxs)
                            _kinetics(yi, ks, fxs, mass, sat, sat_half, st_ptr, st_idx, st_val,
                                      jac_pos, jac_cols, jac_vals, c, rate, d, fi, dummy, True, False)
                            cnt[2] += 1
                            for i in range(nv):
                                fi[i] += r_air * yi[i]
                        for i in range(nv):
                            fprev[i] = fi[i]
                            v = fi[i] + hh * mgsum[st] * dfdt[i]
                            for q in range(st):
                                if mc[st, q] != 0.0:
                                    v += (mc[st, q] / hh) * stages[q, i]
                            tmp[i] = v
                        _solve_w(mode, a, ptr, col, diag, perm, w, piv, tmp, xw)
                        for i in range(nv):
                            stages[st, i] = tmp[i]
                    for i in range(nv):
                        v = ym[i]
                        e = 0.0
                        for st in range(ns):
                            if mm[st] != 0.0:
                                v += mm[st] * stages[st, i]
                            if me[st] != 0.0:
                                e += me[st] * stages[st, i]
                        ynew[i] = v
                        err[i] = e
                    err_norm, nonfinite, worst = _error_norm(ym, ynew, err, atol, rtol, worst)
                if err_norm <= 1.0:
                    break
                cnt[1] += 1
                hh = _rejected_step(hh, err_norm, err_exp, params)
                rejected_last = True
                rejected_here = True
                clipped = False
                if _below_minimum(hh, t, params):
                    info[m, 0] = t
                    info[m, 1] = hh
                    info[m, 2] = worst
                    h[m] = hh
                    status[m] = 2 if nonfinite else 1
                    return
            # accepted
            cnt[0] += 1
            corr = _air_density_factor(r_air, hh, gamma, ma, mc, mm, zs)
            if r_air != 0.0:
                for i in range(nv):
                    ynew[i] *= corr
            _on_step(extra, ym, ynew, corr, hh, r_air, stages, k0, fx0, dk0, dfx0, mode, a, w, piv)
            for i in range(nv):
                ym[i] = ynew[i] if ynew[i] > 0.0 else 0.0
            hh = _next_step(hh, err_norm, err_exp, params, rejected_last, clipped, rejected_here,
                            h_proposed, h_max)
            rejected_last = False
            t = t_new
            if last_alpha == 1.0:       # k(t_new) and its slope from the last stage
                for r in range(nr):
                    k0[r] = ks[r]
                    dk0[r] = dks[r]
                for q in range(n_fixed):
                    fx0[q] = fxs[q]
                    dfx0[q] = dfxs[q]
            else:
                _coefficients_at(t, t_a, t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon,
                                 lm, fm, k0, fx0, dk0, dfx0, True)
            _kinetics(ym, k0, fx0, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos, jac_cols,
                      jac_vals, c, rate, d, f0c, dummy, True, False)
            cnt[2] += 1
        info[m, 0] = t
        info[m, 1] = hh
        info[m, 2] = worst
        h[m] = hh
        j = out_index[interval]
        if j >= 0:
            _store_output(ys, m, j, ym, reached)
            _on_output(extra, j)


@_njit
def advance_batch(landings, air_rates, out_index, ys, reached, y, h, restart, status, h_max, t_a, t_b,
                  poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, lmult, fmult, rtol, atol,
                  gamma, ma, mc, mm, me, malpha, mgsum, mreuse, err_exp, mass, sat, sat_half, st_ptr,
                  st_idx, st_val, jac_cols, jac_vals, jac_pos, perm, ptr, col, diag, l_pos, l_pivot,
                  op_ptr, op_src, op_dst, n_fixed, counters, info, params):
    """Advance every running member of a batch through one k(t) window (one shared table).

    The window's landing times ``landings`` (n + 1,) (output times, breakpoints,
    splits) with the air-density rate ``air_rates`` (n,) of each interval; where
    ``out_index[i]`` >= 0, landing i + 1 is that output time and the member's state
    goes to ``ys[m, out_index[i]]`` (``reached[m]`` = outputs written).  ``y``
    (members, nv), ``h`` (members,) step proposals, ``restart`` (members,) 1 where
    the first step is to be estimated, ``status`` (members,) 0 while a member runs
    (others are skipped; a member that fails gets 1 or 2, see ``_advance_member``),
    ``lmult``/``fmult`` (members, nr) ln f and f of each member's rate multipliers,
    ``counters`` (members, 6), ``info`` (members, 3).  Each member keeps its own
    step-size control, so its result does not depend on the other members.
    """
    for m in range(y.shape[0]):
        if status[m] == 0:
            _advance_member(m, landings, air_rates, out_index, ys, reached, y, h, restart, status, h_max,
                            t_a, t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, lmult,
                            fmult, rtol, atol, gamma, ma, mc, mm, me, malpha, mgsum, mreuse, err_exp,
                            mass, sat, sat_half, st_ptr, st_idx, st_val, jac_cols, jac_vals, jac_pos,
                            perm, ptr, col, diag, l_pos, l_pivot, op_ptr, op_src, op_dst, n_fixed,
                            counters, info, params, ())
