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

The steps are those of the one step loop, ``compiled._advance_member``, run
with this module's hooks (``_TangentWork`` chooses them): ``_keep_stage`` keeps
the state's stage points, ``_sensitivity_step`` advances S on each accepted step,
``_sensitivity_output`` writes S at the output times.  y is therefore bitwise a
plain run's (tests/test_tangent.py), and a change to the base step reaches the
tangent by construction.
"""
from __future__ import annotations

from collections import namedtuple
from dataclasses import dataclass

import numpy as np

from .compiled import (_OUTPUT_HOOKS, _STAGE_HOOKS, _STEP_HOOKS, _advance_member, _implements, _kinetics,
                       _njit, _solve_w)

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


# the hooks of the one step loop (``compiled._advance_member``) that carry S along
_TangentWork = namedtuple("_TangentWork", [
    "sens", "sens_out", "out_rows", "param_reaction", "tan_ptr", "tan_species", "tan_dpos",
    "ma", "mc", "mm", "mgsum", "mreuse", "ptr", "col", "diag", "perm", "mass", "sat", "sat_half",
    "st_ptr", "st_idx", "st_val", "jac_cols", "jac_vals", "no_pos", "c", "ystage", "kstage",
    "fxstage", "ks_s", "sens_stage", "g", "rhs", "xs", "xw", "snew"])


@_implements(_STAGE_HOOKS, _TangentWork)
def _keep_stage(extra, st, yi, ks, fxs):
    """``_on_stage``: keep the state's stage point and its k, fixed (S's stages are taken there)."""
    ystage, kstage, fxstage = extra.ystage, extra.kstage, extra.fxstage
    for i in range(yi.shape[0]):
        ystage[st, i] = yi[i]
    for r in range(ks.shape[0]):
        kstage[st, r] = ks[r]
    for q in range(fxs.shape[0]):
        fxstage[st, q] = fxs[q]


@_implements(_STEP_HOOKS, _TangentWork)
def _sensitivity_step(extra, y, ynew, corr, h, r_air, stages, k0, fx0, dk0, dfx0, mode, a, w, piv):
    """``_on_step``: S over the accepted step (same factorisation), times the air-density factor
    ``corr``; the rows of the components clipped to zero are zeroed (d max(y, 0)/dy)."""
    x = extra
    _tangent_step(y, x.sens, x.ystage, x.kstage, x.fxstage, stages, k0, fx0, dk0, dfx0, h, r_air,
                  x.ma, x.mc, x.mm, x.mgsum, x.mreuse, mode, a, x.ptr, x.col, x.diag, x.perm, w, piv,
                  x.param_reaction, x.tan_ptr, x.tan_species, x.tan_dpos, x.mass, x.sat, x.sat_half,
                  x.st_ptr, x.st_idx, x.st_val, x.no_pos, x.jac_cols, x.jac_vals, x.c, x.ks_s,
                  x.sens_stage, x.g, x.rhs, x.xs, x.xw, x.snew)
    sens, snew = x.sens, x.snew
    for i in range(y.shape[0]):
        clipped = ynew[i] < 0.0
        for q in range(sens.shape[1]):
            sens[i, q] = 0.0 if clipped else snew[i, q] * corr


@_implements(_OUTPUT_HOOKS, _TangentWork)
def _sensitivity_output(extra, j):
    """``_on_output``: ``sens_out[j] = sens[out_rows].T``."""
    for p in range(extra.sens.shape[1]):
        for q in range(extra.out_rows.shape[0]):
            extra.sens_out[j, p, q] = extra.sens[extra.out_rows[q], p]


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
    nv, n_p = sens.shape
    ns = ma.shape[0]
    nr = poly.shape[1] - n_fixed
    x = _TangentWork(sens, sens_out, out_rows, param_reaction, tan_ptr, tan_species, tan_dpos, ma, mc,
                     mm, mgsum, mreuse, ptr, col, diag, perm, mass, sat, sat_half, st_ptr, st_idx,
                     st_val, jac_cols, jac_vals, np.empty(0, dtype=np.uint64),
                     np.empty(nv + n_fixed + 1), np.empty((ns, nv)), np.empty((ns, nr)),
                     np.empty((ns, n_fixed)), np.empty((nv, n_p)), np.empty((ns, nv, n_p)),
                     np.empty((nr, n_p)), np.empty((nv, n_p)), np.empty((nv, n_p)), np.empty(nv),
                     np.empty((nv, n_p)))
    _advance_member(0, landings, air_rates, out_index, ys, reached, y, h, restart, status, h_max, t_a,
                    t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, lmult, fmult, rtol,
                    atol, gamma, ma, mc, mm, me, malpha, mgsum, mreuse, err_exp, mass, sat, sat_half,
                    st_ptr, st_idx, st_val, jac_cols, jac_vals, jac_pos, perm, ptr, col, diag, l_pos,
                    l_pivot, op_ptr, op_src, op_dst, n_fixed, counters, info, params, x)


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
