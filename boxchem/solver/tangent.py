"""Forward (tangent-linear, direct-decoupled) sensitivities on the Rosenbrock steps.

Parameters p_q are ln of a factor on one reaction's k (thermal k, photolysis J
or surface k; ``reactions``) or ln of one species' initial value
(``initial``).  Alongside the state y the kernel integrates S = dy/dp
(n_params x n_variable, one row per parameter)::

    S' = J(t, y) S + F(t, y),   F[:, q] = nu_{r_q} rate_{r_q}(t, y)   (= d f / d ln k_{r_q})
    S(t0)[:, q] = 0 for a reaction, y0_j e_j for ln y0_j

The method is the base Rosenbrock method applied to the augmented system
z = (y, S) (the "direct decoupled" Rosenbrock of Sandu, Daescu and
Carmichael 2003, Atmos. Environ. 37, 5083-5096, section 3), so S has the
same order as y.  The augmented Jacobian is block lower triangular::

    J_aug = [[J, 0], [H, J]],   H v = d/dy (J S + F) [v]   (second derivatives)

so W_aug = I/(h gamma) - J_aug needs only W = I/(h gamma) - J: the step's one
factorisation serves every sensitivity column (n_params solves, no new LU),
and the S part of each stage is

    W K^S_i = J(y_i) S_i + F(y_i) + sum_j (c_ij/h) K^S_j + h gamma_i d/dt (J S + F) + H K^y_i

with y_i, S_i the stage points and K^y_i the state's stage.  H K^y_i is the
directional derivative, at the step's start, of the rate tangents along
K^y_i: it is taken as the central difference (d(y0 + v) - d(y0 - v)) / 2 of
the slot derivatives d of the rates, which is exact for mass-action rates of
up to third order in the integrated species (d is then at most quadratic in
y) and only approximate (error O(|v|^2)) for the saturation factors of
surface co-reactants.  Dropping H would leave a W-method of lower order for S
(tests/test_tangent.py measures the loss on a closed-form problem); it is
kept.  d/dt (J S + F) at fixed y and S is the central difference in the
window table's k(t) and fixed(t) along their exact slopes (exact: rates are
linear in k and at most quadratic in the fixed densities).

Rules shared with the state:

* the steps are the state's: error control and step-size selection see y
  only (S does not enter the error norm), and the S stages are computed only
  for accepted steps (rejections cost nothing extra);
* the air-density factor exp(r h) / R(r h) of the state multiplies S too
  (it does not depend on the parameters);
* clipping: a component of y set to zero after a step (a small negative
  value, see ``timeloop``) has the derivative of max(y, 0) there: its row of
  S is zeroed;
* the k(t) window tables (and their multipliers) are given functions of
  time inside the kernel.  The state feedback between kernel calls is
  differentiated by the time loop (``tangent_feedback``): the state-dependent
  surface offsets set at each feedback window's start (by superposition of
  extra response columns, ``param_reaction`` = the surface column) and the
  phase equilibrium map at t0 and each window end (its Jacobian).  Only what
  ``on_accept`` observes (the ozone column following the box) is taken as
  observed and not differentiated.

The step loop is that of ``compiled._advance_member`` (same order of
operations, so y is bitwise the same as a plain run's); it is repeated here
rather than parametrised there to keep the base kernel lean.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .compiled import _coefficients_at, _factor_w, _kinetics, _kinetics_dt, _njit, _solve_w

__all__ = ["TangentParameters", "tangent_slots", "advance_tangent", "rate_tangents"]


@dataclass(frozen=True)
class TangentParameters:
    """Which sensitivities a tangent run integrates.

    ``reactions``: indices into ``kinetics.reaction_ids`` (p = ln factor on k);
    ``initial``: indices into ``kinetics.variable_species`` (p = ln y0).
    ``output_species``: indices of the species whose S rows are kept at the
    output times (None: all).  Row order of S: reactions, then initial.
    """

    reactions: tuple = ()
    initial: tuple = ()
    output_species: tuple | None = None

    @property
    def n_params(self) -> int:
        return len(self.reactions) + len(self.initial)

    def param_reaction(self) -> np.ndarray:
        return np.array(list(self.reactions) + [-1] * len(self.initial), dtype=np.int64)

    @classmethod
    def from_names(cls, kinetics, reactions=(), initial=(), output_species=None) -> "TangentParameters":
        """From reaction ids and species names; ValueError naming an unknown one and what is valid."""
        rid = list(kinetics.reaction_ids)
        species = list(kinetics.variable_species)

        def index(name, valid, what):
            if name not in valid:
                import difflib
                close = difflib.get_close_matches(name, valid, 1)
                hint = f" (did you mean {close[0]!r}?)" if close else ""
                raise ValueError(f"tangent parameters: unknown {what} {name!r}{hint}; valid: "
                                 f"{', '.join(valid[:40])}{', ...' if len(valid) > 40 else ''}")
            return valid.index(name)
        out = None if output_species is None else tuple(index(s, species, "integrated species")
                                                        for s in output_species)
        return cls(tuple(index(r, rid, "reaction") for r in reactions),
                   tuple(index(s, species, "integrated species") for s in initial), out)

    def validated(self, kinetics) -> "TangentParameters":
        nr, nv = kinetics.n_reactions, kinetics.n_variable
        for what, values, n in (("reactions", self.reactions, nr), ("initial", self.initial, nv),
                                ("output_species", self.output_species or (), nv)):
            bad = [v for v in values if not (0 <= int(v) < n)]
            if bad:
                raise ValueError(f"tangent parameters: {what} index {bad[0]!r} out of range 0..{n - 1}")
        if self.n_params == 0:
            raise ValueError("tangent parameters: no parameter given (reactions or initial)")
        return self


def tangent_slots(kinetics, kin_arrays) -> tuple:
    """``(tan_ptr, tan_species, tan_dpos)``: per reaction r, the integrated species of its
    slots and the position of the slot's derivative in the kernels' ``d`` array
    (``tan_*[tan_ptr[r]:tan_ptr[r+1]]``), so d rate_r / dy . s = sum d[dpos] s[species]."""
    mass, sat, sat_half = kin_arrays[0].astype(np.int64), kin_arrays[1].astype(np.int64), kin_arrays[2]
    nv = kinetics.n_variable
    nr, width = mass.shape
    swidth = sat.shape[1]
    nslot = width + swidth
    ptr, species, dpos = [0], [], []
    for r in range(nr):
        for p in range(width):
            s = int(mass[r, p])
            if s >= nv + kinetics.n_fixed:       # padding: the constant one (always last)
                break
            if s < nv:
                species.append(s)
                dpos.append(r * nslot + p)
        for p in range(swidth):
            if sat_half[r, p] == 0.0:
                break
            s = int(sat[r, p])
            if s < nv:
                species.append(s)
                dpos.append(r * nslot + width + p)
        ptr.append(len(species))
    return (np.array(ptr, dtype=np.int64), np.array(species, dtype=np.int64),
            np.array(dpos, dtype=np.int64))


# ---------------------------------------------------------------------------
# compiled helpers
# ---------------------------------------------------------------------------
@_njit
def _slot_derivatives(y, k, fixed, mass, sat, sat_half, st_ptr, st_idx, st_val, no_pos, jac_cols,
                      jac_vals, c, rate, d, dummy):
    """Rates into ``rate`` and their slot derivatives into ``d`` (no Jacobian scatter)."""
    _kinetics(y, k, fixed, mass, sat, sat_half, st_ptr, st_idx, st_val, no_pos, jac_cols, jac_vals,
              c, rate, d, dummy, dummy, False, True)


@_njit
def _rate_tangent_add(coef, s, prate, param_reaction, tan_ptr, tan_species, tan_dpos, g):
    """g[r, q] += sum_e coef[dpos_e] s[species_e, q] (+ prate[r] where parameter q is reaction r).

    Layout (species or reactions, parameters): the inner loops run over the parameters,
    contiguous, so they vectorise.
    """
    n_p = g.shape[1]
    nr = g.shape[0]
    for r in range(nr):
        for e in range(tan_ptr[r], tan_ptr[r + 1]):
            v = coef[tan_dpos[e]]
            if v != 0.0:
                src = s[tan_species[e]]
                dst = g[r]
                for q in range(n_p):
                    dst[q] += v * src[q]
    for q in range(n_p):
        rq = param_reaction[q]
        if rq >= 0:
            g[rq, q] += prate[rq]


@_njit
def _scatter(g, st_ptr, st_idx, st_val, out):
    """out[i, q] = sum_r nu_ir g[r, q] (stoichiometry of each rate tangent)."""
    n_p = g.shape[1]
    nr = g.shape[0]
    nv = out.shape[0]
    for i in range(nv):
        for q in range(n_p):
            out[i, q] = 0.0
    for r in range(nr):
        src = g[r]
        for p in range(st_ptr[r], st_ptr[r + 1]):
            v = st_val[p]
            dst = out[st_idx[p]]
            for q in range(n_p):
                dst[q] += v * src[q]


@_njit
def _solve_many(mode, a, ptr, col, diag, perm, w, piv, b, x, xw, tmp):
    """Solve W Z = B in place for every column of ``b`` (nv, n_p) with the step's factors:
    the sparse triangular solves of ``compiled._sparse_solve`` on all columns at once."""
    n = diag.shape[0]
    n_p = b.shape[1]
    if mode == 1:
        for i in range(n):
            src = b[perm[i]]
            dst = x[i]
            for q in range(n_p):
                dst[q] = src[q]
        for i in range(n):
            dst = x[i]
            for p in range(ptr[i], diag[i]):
                v = a[p]
                src = x[col[p]]
                for q in range(n_p):
                    dst[q] -= v * src[q]
        one = np.uint64(1)
        for i in range(n - 1, -1, -1):
            dst = x[i]
            for p in range(diag[i] + one, ptr[i + 1]):
                v = a[p]
                src = x[col[p]]
                for q in range(n_p):
                    dst[q] -= v * src[q]
            inv = 1.0 / a[diag[i]]
            for q in range(n_p):
                dst[q] *= inv
        for i in range(n):
            src = x[i]
            dst = b[perm[i]]
            for q in range(n_p):
                dst[q] = src[q]
    else:
        for q in range(n_p):
            for i in range(n):
                tmp[i] = b[i, q]
            _solve_w(mode, a, ptr, col, diag, perm, w, piv, tmp, xw)
            for i in range(n):
                b[i, q] = tmp[i]


@_njit
def _tangent_step(y, sens, ystage, kstage, fxstage, stages, k0, fx0, dk0, dfx0, h, r_air, ma, mc, mm,
                  mgsum, mreuse, mode, a, ptr, col, diag, perm, w, piv, param_reaction, tan_ptr,
                  tan_species, tan_dpos, mass, sat, sat_half, st_ptr, st_idx, st_val, no_pos, jac_cols,
                  jac_vals, c, ks_s, sens_stage, g, rhs, xs, xw, snew):
    """S at the end of an accepted step into ``snew`` (module docstring: the S part of the stages).

    ``sens`` (nv, n_p); ``ystage``/``kstage``/``fxstage`` the state's stage points and
    their k, fixed; ``stages`` the state's stages K^y; ``sens_stage`` (ns, nv, n_p),
    ``ks_s``, ``rhs``, ``xs`` (nv, n_p) and ``g`` (nr, n_p) work.
    """
    ns = ma.shape[0]
    n_p = sens.shape[1]
    nv = y.shape[0]
    nr = k0.shape[0]
    nslot_total = mass.shape[0] * (mass.shape[1] + sat.shape[1])
    d0 = np.empty(nslot_total)
    rate0 = np.empty(nr)
    dp = np.empty(nslot_total)
    dm = np.empty(nslot_total)
    rp = np.empty(nr)
    rm = np.empty(nr)
    dtd = np.empty(nslot_total)
    dtr = np.empty(nr)
    dst = np.empty(nslot_total)
    rst = np.empty(nr)
    coef = np.empty(nslot_total)
    prate = np.empty(nr)
    ypv = np.empty(nv)
    kpv = np.empty(nr)
    fpv = np.empty(fx0.shape[0])
    tmp = np.empty(nv)
    dummy = np.empty(1)
    # rates and slot derivatives at the step's start
    _slot_derivatives(y, k0, fx0, mass, sat, sat_half, st_ptr, st_idx, st_val, no_pos, jac_cols,
                      jac_vals, c, rate0, d0, dummy)
    # d/dt of the slot derivatives and rates at fixed y (central difference along the slopes;
    # exact: linear in k, at most quadratic in the fixed densities)
    delta = h
    for r in range(nr):
        kpv[r] = k0[r] + delta * dk0[r]
    for q in range(fx0.shape[0]):
        fpv[q] = fx0[q] + delta * dfx0[q]
    _slot_derivatives(y, kpv, fpv, mass, sat, sat_half, st_ptr, st_idx, st_val, no_pos, jac_cols,
                      jac_vals, c, rp, dp, dummy)
    for r in range(nr):
        kpv[r] = k0[r] - delta * dk0[r]
    for q in range(fx0.shape[0]):
        fpv[q] = fx0[q] - delta * dfx0[q]
    _slot_derivatives(y, kpv, fpv, mass, sat, sat_half, st_ptr, st_idx, st_val, no_pos, jac_cols,
                      jac_vals, c, rm, dm, dummy)
    for e in range(nslot_total):
        dtd[e] = (dp[e] - dm[e]) / (2.0 * delta)
    for r in range(nr):
        dtr[r] = (rp[r] - rm[r]) / (2.0 * delta)
    for st in range(ns):
        # the stage's point S_i = S0 + sum_j a_ij K^S_j
        for i in range(nv):
            dsti = ks_s[i]
            srci = sens[i]
            for q in range(n_p):
                dsti[q] = srci[q]
            for j in range(st):
                aj = ma[st, j]
                if aj != 0.0:
                    kj = sens_stage[j, i]
                    for q in range(n_p):
                        dsti[q] += aj * kj[q]
        for r in range(nr):
            for q in range(n_p):
                g[r, q] = 0.0
        # J(y_i) S_i + F(y_i): rate tangents at the stage point
        if st == 0:
            for e in range(nslot_total):
                dst[e] = d0[e]
            for r in range(nr):
                rst[r] = rate0[r]
        elif not mreuse[st]:
            for i in range(nv):
                ypv[i] = ystage[st, i]
            _slot_derivatives(ypv, kstage[st], fxstage[st], mass, sat, sat_half, st_ptr, st_idx,
                              st_val, no_pos, jac_cols, jac_vals, c, rst, dst, dummy)
        # (a reused stage sits at the previous point: same y_i and, since a_i = a_{i-1}, same S_i)
        _rate_tangent_add(dst, ks_s, rst, param_reaction, tan_ptr, tan_species, tan_dpos, g)
        # H K^y_i + h gamma_i d/dt(J S + F), both contracted with S0
        for i in range(nv):
            ypv[i] = y[i] + stages[st, i]
        _slot_derivatives(ypv, k0, fx0, mass, sat, sat_half, st_ptr, st_idx, st_val, no_pos,
                          jac_cols, jac_vals, c, rp, dp, dummy)
        for i in range(nv):
            ypv[i] = y[i] - stages[st, i]
        _slot_derivatives(ypv, k0, fx0, mass, sat, sat_half, st_ptr, st_idx, st_val, no_pos,
                          jac_cols, jac_vals, c, rm, dm, dummy)
        hg = h * mgsum[st]
        for e in range(nslot_total):
            coef[e] = 0.5 * (dp[e] - dm[e]) + hg * dtd[e]
        # exact d rate / dy . K^y_i (from d0) for the parameter's own rate
        for r in range(nr):
            v = 0.0
            for e in range(tan_ptr[r], tan_ptr[r + 1]):
                v += d0[tan_dpos[e]] * stages[st, tan_species[e]]
            prate[r] = v + hg * dtr[r]
        _rate_tangent_add(coef, sens, prate, param_reaction, tan_ptr, tan_species, tan_dpos, g)
        _scatter(g, st_ptr, st_idx, st_val, rhs)
        for i in range(nv):
            dsti = rhs[i]
            srci = ks_s[i]
            for q in range(n_p):
                dsti[q] += r_air * srci[q]
            for j in range(st):
                cj = mc[st, j]
                if cj != 0.0:
                    cj = cj / h
                    kj = sens_stage[j, i]
                    for q in range(n_p):
                        dsti[q] += cj * kj[q]
        _solve_many(mode, a, ptr, col, diag, perm, w, piv, rhs, xs, xw, tmp)
        for i in range(nv):
            dsti = sens_stage[st, i]
            srci = rhs[i]
            for q in range(n_p):
                dsti[q] = srci[q]
    for i in range(nv):
        dsti = snew[i]
        srci = sens[i]
        for q in range(n_p):
            dsti[q] = srci[q]
        for st in range(ns):
            m = mm[st]
            if m != 0.0:
                kj = sens_stage[st, i]
                for q in range(n_p):
                    dsti[q] += m * kj[q]


@_njit
def _advance_member_tangent(t, t_end, y, sens, param_reaction, tan_ptr, tan_species, tan_dpos, h,
                            h_max, restart, t_a, t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols,
                            horizon, lmult, fmult, r_air, rtol, atol, gamma, ma, mc, mm, me, malpha,
                            mgsum, mreuse, err_exp, mass, sat, sat_half, st_ptr, st_idx, st_val,
                            jac_cols, jac_vals, jac_pos, perm, ptr, col, diag, l_pos, l_pivot, op_ptr,
                            op_src, op_dst, n_fixed, counters, info, params):
    """``compiled._advance_member`` with S = dy/dp (``sens``, (nv, n_p), in place) on the same steps."""
    safety, fmin, fmax, hmin_abs, hmin_rel, first_frac, fallback, fixed_diff, piv_tol = (
        params[0], params[1], params[2], params[3], params[4], params[5], params[6], params[7],
        params[8])
    nv = y.shape[0]
    nr = poly.shape[1] - n_fixed
    ns = ma.shape[0]
    nnz = col.shape[0]
    n_p = sens.shape[1]
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
    dummy = np.empty(1)
    # tangent work
    no_pos = np.empty(0, dtype=np.uint64)
    ystage = np.empty((ns, nv))
    kstage = np.empty((ns, nr))
    fxstage = np.empty((ns, n_fixed))
    ks_s = np.empty((nv, n_p))
    sens_stage = np.empty((ns, nv, n_p))
    g = np.empty((nr, n_p))
    rhs = np.empty((nv, n_p))
    xs = np.empty((nv, n_p))
    snew = np.empty((nv, n_p))

    _coefficients_at(t, t_a, t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, lmult,
                     fmult, k0, fx0, dk0, dfx0, True)
    _kinetics(y, k0, fx0, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos, jac_cols, jac_vals,
              c, rate, d, f0c, dummy, True, False)
    counters[2] += 1
    if restart:   # first step estimate (Hairer & Wanner 1996, II.4)
        d0 = 0.0
        d1 = 0.0
        for i in range(nv):
            sc = atol[i] + rtol * abs(y[i])
            d0 += (y[i] / sc) ** 2
            d1 += (f0c[i] / sc) ** 2
        d0 = math.sqrt(d0 / nv) if nv else 0.0
        d1 = math.sqrt(d1 / nv) if nv else 0.0
        est = first_frac * d0 / d1 if (d0 > 1e-5 and d1 > 1e-5) else fallback
        if est < h:
            h = est
    if h > h_max:
        h = h_max
    worst = -1
    rejected_last = False
    mode = 0
    while t < t_end:
        h_proposed = h
        if h > t_end - t:
            h = t_end - t
        clipped = h < h_proposed
        if t_end - (t + h) < 1e-9 * max(abs(t_end), 1.0):
            h = t_end - t
        _kinetics_dt(y, k0, fx0, dk0, dfx0, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos,
                     jac_cols, jac_vals, c, rate, d, tmp, jv, dfdt, False, True, True)
        counters[3] += 1
        for i in range(nv):
            f0[i] = f0c[i] + r_air * y[i]
        rejected_here = False
        while True:
            t_new = t_end if h == t_end - t else t + h
            mode = _factor_w(jv, 1.0 / (h * gamma) - r_air, ptr, col, diag, l_pos, l_pivot, op_ptr,
                             op_src, op_dst, a, rowmax, w, piv, lu_cols, piv_tol)
            counters[4] += 1
            if mode == 2 and piv_tol >= 0.0:
                counters[5] += 1
            err_norm = math.inf
            nonfinite = True
            last_alpha = -1.0
            if mode != 0:
                for st in range(ns):
                    if st == 0:
                        for i in range(nv):
                            fi[i] = f0[i]
                            ystage[0, i] = y[i]
                        for r in range(nr):
                            kstage[0, r] = k0[r]
                        for q in range(n_fixed):
                            fxstage[0, q] = fx0[q]
                    elif mreuse[st]:
                        for i in range(nv):
                            fi[i] = fprev[i]
                            ystage[st, i] = ystage[st - 1, i]
                        for r in range(nr):
                            kstage[st, r] = kstage[st - 1, r]
                        for q in range(n_fixed):
                            fxstage[st, q] = fxstage[st - 1, q]
                    else:
                        for i in range(nv):
                            v = y[i]
                            for q in range(st):
                                if ma[st, q] != 0.0:
                                    v += ma[st, q] * stages[q, i]
                            yi[i] = v
                            ystage[st, i] = v
                        if malpha[st] != last_alpha:
                            t_stage = t_new if malpha[st] == 1.0 else t + malpha[st] * h
                            _coefficients_at(t_stage, t_a, t_b, poly, log_col, sza_poly,
                                             sgrid, lnj, phot_cols, horizon, lmult, fmult, ks, fxs,
                                             dks, dfxs, malpha[st] == 1.0)
                            last_alpha = malpha[st]
                        for r in range(nr):
                            kstage[st, r] = ks[r]
                        for q in range(n_fixed):
                            fxstage[st, q] = fxs[q]
                        _kinetics(yi, ks, fxs, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos,
                                  jac_cols, jac_vals, c, rate, d, fi, dummy, True, False)
                        counters[2] += 1
                        for i in range(nv):
                            fi[i] += r_air * yi[i]
                    for i in range(nv):
                        fprev[i] = fi[i]
                        v = fi[i] + h * mgsum[st] * dfdt[i]
                        for q in range(st):
                            if mc[st, q] != 0.0:
                                v += (mc[st, q] / h) * stages[q, i]
                        tmp[i] = v
                    _solve_w(mode, a, ptr, col, diag, perm, w, piv, tmp, xw)
                    for i in range(nv):
                        stages[st, i] = tmp[i]
                finite = True
                for i in range(nv):
                    v = y[i]
                    e = 0.0
                    for st in range(ns):
                        if mm[st] != 0.0:
                            v += mm[st] * stages[st, i]
                        if me[st] != 0.0:
                            e += me[st] * stages[st, i]
                    ynew[i] = v
                    err[i] = e
                    if not math.isfinite(v):
                        finite = False
                if finite:
                    nonfinite = False
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
                    err_norm = math.sqrt(acc / nv) if nv else 0.0
                    if not math.isfinite(err_norm):
                        nonfinite = True
                        err_norm = math.inf
                    elif neg > 1.0 and neg > err_norm:
                        err_norm = neg
                        worst = neg_i
                    elif neg > 1.0:
                        worst = neg_i
                else:
                    for i in range(nv):
                        if not math.isfinite(ynew[i]):
                            worst = i
                            break
            if err_norm <= 1.0:
                break
            counters[1] += 1
            if math.isfinite(err_norm) and err_norm > 0.0:
                factor = safety * err_norm ** (-err_exp)
            else:
                factor = fmin
            factor = min(fmax, max(fmin, factor))
            factor = min(factor, 1.0)
            h = h * factor
            rejected_last = True
            rejected_here = True
            clipped = False
            if h < max(hmin_abs, hmin_rel * abs(t)):
                info[0] = t
                info[1] = h
                info[2] = worst
                return 2 if nonfinite else 1
        # accepted: the sensitivities on the same step, with the same factorisation
        _tangent_step(y, sens, ystage, kstage, fxstage, stages, k0, fx0, dk0, dfx0, h, r_air, ma, mc,
                      mm, mgsum, mreuse, mode, a, ptr, col, diag, perm, w, piv, param_reaction,
                      tan_ptr, tan_species, tan_dpos, mass, sat, sat_half, st_ptr, st_idx, st_val,
                      no_pos, jac_cols, jac_vals, c, ks_s, sens_stage, g, rhs, xs, xw, snew)
        counters[0] += 1
        corr = 1.0
        if r_air != 0.0:
            zz = r_air * h
            rsum = 1.0
            for st in range(ns):
                v = zz
                for q in range(st):
                    v += zz * ma[st, q] * stages[q, 0] + mc[st, q] * stages[q, 0]
                stages[st, 0] = v / (1.0 / gamma - zz)
                rsum += mm[st] * stages[st, 0]
            corr = math.exp(zz) / rsum
            for i in range(nv):
                ynew[i] *= corr
        for i in range(nv):
            if ynew[i] > 0.0:
                y[i] = ynew[i]
                for q in range(n_p):
                    sens[i, q] = snew[i, q] * corr
            else:
                y[i] = 0.0
                # d max(y, 0)/dy: a clipped component carries no sensitivity
                for q in range(n_p):
                    sens[i, q] = 0.0 if ynew[i] < 0.0 else snew[i, q] * corr
        if err_norm == 0.0:
            factor = fmax
        else:
            factor = safety * err_norm ** (-err_exp)
        factor = min(fmax, max(fmin, factor))
        if rejected_last:
            factor = min(factor, 1.0)
        rejected_last = False
        h_next = h * factor
        if clipped and not rejected_here:
            h_next = max(h_next, h_proposed)
        h = min(h_next, h_max)
        t = t_new
        if last_alpha == 1.0:
            for r in range(nr):
                k0[r] = ks[r]
                dk0[r] = dks[r]
            for q in range(n_fixed):
                fx0[q] = fxs[q]
                dfx0[q] = dfxs[q]
        else:
            _coefficients_at(t, t_a, t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon,
                             lmult, fmult, k0, fx0, dk0, dfx0, True)
        _kinetics(y, k0, fx0, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos, jac_cols,
                  jac_vals, c, rate, d, f0c, dummy, True, False)
        counters[2] += 1
    info[0] = t
    info[1] = h
    info[2] = worst
    return 0


@_njit
def advance_tangent(landings, air_rates, out_index, ys, sens_out, out_rows, reached, y, sens,
                    param_reaction, tan_ptr, tan_species, tan_dpos, h, restart, status, h_max, t_a,
                    t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, lmult, fmult, rtol,
                    atol, gamma, ma, mc, mm, me, malpha, mgsum, mreuse, err_exp, mass, sat, sat_half,
                    st_ptr, st_idx, st_val, jac_cols, jac_vals, jac_pos, perm, ptr, col, diag, l_pos,
                    l_pivot, op_ptr, op_src, op_dst, n_fixed, counters, info, params):
    """``compiled.advance_batch`` for a batch of one member with its sensitivities ``sens``
    (nv, n_p); at output j, ``sens_out[j] = sens[out_rows].T`` (n_p, len(out_rows))."""
    if status[0] != 0:
        return
    for i in range(air_rates.shape[0]):
        st = _advance_member_tangent(landings[i], landings[i + 1], y[0], sens, param_reaction, tan_ptr,
                                     tan_species, tan_dpos, h[0], h_max, restart[0] != 0, t_a, t_b,
                                     poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, lmult[0],
                                     fmult[0], air_rates[i], rtol, atol, gamma, ma, mc, mm, me, malpha,
                                     mgsum, mreuse, err_exp, mass, sat, sat_half, st_ptr, st_idx,
                                     st_val, jac_cols, jac_vals, jac_pos, perm, ptr, col, diag, l_pos,
                                     l_pivot, op_ptr, op_src, op_dst, n_fixed, counters[0], info[0],
                                     params)
        h[0] = info[0, 1]
        restart[0] = 0
        if st != 0:
            status[0] = st
            return
        j = out_index[i]
        if j >= 0:
            for q in range(y.shape[1]):
                ys[0, j, q] = y[0, q]
            for p in range(sens.shape[1]):
                for q in range(out_rows.shape[0]):
                    sens_out[j, p, q] = sens[out_rows[q], p]
            reached[0] = j + 1


@_njit
def _rate_tangents_kernel(y, k, fixed, sens, param_reaction, tan_ptr, tan_species, tan_dpos, mass, sat,
                          sat_half, st_ptr, st_idx, st_val, jac_cols, jac_vals, out):
    n_out = y.shape[0]
    nv = y.shape[1]
    nr = k.shape[1]
    no_pos = np.empty(0, dtype=np.uint64)
    c = np.empty(nv + fixed.shape[1] + 1)
    rate = np.empty(nr)
    d = np.empty(nr * (mass.shape[1] + sat.shape[1]))
    dummy = np.empty(1)
    n_p = sens.shape[1]
    s = np.empty((nv, n_p))
    g = np.empty((nr, n_p))
    for t in range(n_out):
        _slot_derivatives(y[t], k[t], fixed[t], mass, sat, sat_half, st_ptr, st_idx, st_val, no_pos,
                          jac_cols, jac_vals, c, rate, d, dummy)
        for i in range(nv):
            for q in range(n_p):
                s[i, q] = sens[t, q, i]
        for r in range(nr):
            for q in range(n_p):
                g[r, q] = 0.0
        _rate_tangent_add(d, s, rate, param_reaction, tan_ptr, tan_species, tan_dpos, g)
        for q in range(n_p):
            for r in range(nr):
                out[t, q, r] = g[r, q]


def rate_tangents(kinetics, y, k, fixed, sens, param_reaction) -> np.ndarray:
    """d rate_r / d p_q [cm-3 s-1] at each output time: (n_out, n_p, n_reactions).

    ``y`` (n_out, nv), ``k`` (n_out, nr) with the run's multipliers, ``fixed``
    (n_out, nf), ``sens`` (n_out, n_p, nv) = dy/dp, ``param_reaction`` (n_p,)
    (reaction index, -1 for an initial value): d rate_r = D rate_r . S_q + delta_{r r_q} rate_r.
    """
    from .compiled import kinetics_arrays
    arrays = kinetics_arrays(kinetics)
    tan = tangent_slots(kinetics, arrays)
    y, k, fixed, sens = (np.ascontiguousarray(v, dtype=float) for v in (y, k, fixed, sens))
    out = np.empty((y.shape[0], sens.shape[1], k.shape[1]))
    _rate_tangents_kernel(y, k, fixed, sens, np.ascontiguousarray(param_reaction, dtype=np.int64),
                          *tan, *arrays[:6], *arrays[6:8], out)
    return out
