"""Lock-step batch kernel: M members advanced with one common step size, member index innermost.

``advance_lockstep`` has the contract of :func:`boxchem.solver.compiled.advance_batch`
(one k(t) window, its landing times, outputs, member status) but takes the
running members of the call through the window *together*: one step size for
all of them, accepted when the largest of the members' own weighted RMS error
norms (``rosenbrock``'s norm, with the negative-value term of the per-member
kernel) is <= 1, and the controller of ``rosenbrock`` driven by that largest
norm.  The rules of a step that do not depend on the layout (first-step
estimate, landing on stops, each member's error norm, the controller, the
smallest step, the air-density factor, the output copy) are the per-member
loop's own compiled helpers (``compiled``).  Every work array is laid out (n_species, M), (n_reactions, M) or
(n_nonzeros, M) with the member index innermost and contiguous, so the inner
loops of the RHS, the Jacobian scatter and the fixed-pattern sparse LU
(``sparselu``: the same elimination lists, run for all members at once) are
unit-stride loops the compiler vectorises (benchmarks/bench_lockstep_kernels.py:
5x (RHS) and 3x (LU + solve) cheaper per member than the per-member kernels).

Per member, as in the per-member kernel: k(t) from the window's shared table
with the member's multipliers (k_m = f_m k(t): the table is evaluated once for
the batch), the static-pivot check of the sparse LU with the dense partial-
pivoting LU as the member's fallback, clipping of negatives within the error
scale, and failure.  A member that cannot meet the error test even at the
smallest step (step-size underflow, status 1; non-finite values, status 2) is
taken out of the batch with its time, step and worst species; the others then
retry the step from the step size proposed before that member's rejections,
so a member that fails does not drag the others down to its step size (when it
fails at its first step, the others' results are bit-identical to a batch
without it).

Accuracy: a member in lock-step takes the batch's steps, each accepted only
when the member's own error norm is <= 1: it is integrated at least as
accurately (per step) as alone, but on a different step sequence, so it
agrees with its single run within the solver tolerance, not bit for bit.  The
result does not depend on the order of members within a batch (the common
step depends only on the set of members: a max is order-free, and each lane's
arithmetic is its own); it does depend on which members share a batch.
"""
from __future__ import annotations

import math

import numpy as np

from .compiled import (_air_density_factor, _below_minimum, _coefficients_at, _dense_solve, _dense_w,
                       _error_norm, _first_step, _land, _lu_factor, _next_step, _njit, _rejected_step,
                       _store_output)

__all__ = ["advance_lockstep"]


@_njit
def _coefficients_lock(t, t_a, t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, zero_l,
                       one_f, fT, kb, fx, dkb, dfx, k, dk, want_slope):
    """k(t) (nr, M) and its slope for every member; fixed (nf,) shared.

    The shared table is evaluated once without multipliers and each member's k is
    f_m k(t): every column of ``_coefficients_at`` is proportional to f (ln f is
    added to ln k and ln J, linear columns are multiplied by f).
    """
    _coefficients_at(t, t_a, t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, zero_l, one_f,
                     kb, fx, dkb, dfx, want_slope)
    nr, M = k.shape
    for r in range(nr):
        v = kb[r]
        for m in range(M):
            k[r, m] = v * fT[r, m]
    if want_slope:
        for r in range(nr):
            v = dkb[r]
            for m in range(M):
                dk[r, m] = v * fT[r, m]


@_njit
def _kinetics_lock(y, k, fixed, dk, dfixed, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos,
                   jac_cols, jac_vals, c, rate, d, mp, sp, tmp, f_out, jac_out, dfdt_out, want_rhs,
                   want_jac, want_dt):
    """``compiled._kinetics_dt`` for M members: y (nv, M), k (nr, M), fixed (nf,) shared.

    Outputs (nv, M) and the Jacobian values (nnz, M); work arrays c (nv + nf + 1, M),
    rate (nr, M), d (nr * nslot, M), mp/sp/tmp (M,).
    """
    nv, M = y.shape
    nf = fixed.shape[0]
    nr = k.shape[0]
    width = mass.shape[1]
    swidth = sat.shape[1]
    nslot = width + swidth
    first_fixed = np.uint64(nv)
    end_fixed = np.uint64(nv + nf)
    one_slot = np.uint64(nv + nf)
    for i in range(nv):
        for m in range(M):
            c[i, m] = y[i, m]
    for i in range(nf):
        v = fixed[i]
        for m in range(M):
            c[nv + i, m] = v
    for m in range(M):
        c[nv + nf, m] = 1.0
    for r in range(nr):
        n_mass = 0
        for m in range(M):
            mp[m] = 1.0
            sp[m] = 1.0
        for p in range(width):
            s = mass[r, p]
            if s == one_slot:        # padding (always last): a factor exactly 1
                break
            n_mass += 1
            for m in range(M):
                mp[m] *= c[s, m]
        n_sat = 0
        for q in range(swidth):
            half = sat_half[r, q]
            if half == 0.0:
                break
            s = sat[r, q]
            for m in range(M):
                b = c[s, m]
                sp[m] *= b / (b + half)
            n_sat += 1
        for m in range(M):
            rate[r, m] = k[r, m] * mp[m] * sp[m]
        if want_jac:
            for p in range(n_mass):
                for m in range(M):
                    tmp[m] = k[r, m] * sp[m]
                for q in range(n_mass):
                    if q != p:
                        s = mass[r, q]
                        for m in range(M):
                            tmp[m] *= c[s, m]
                row = r * nslot + p
                for m in range(M):
                    d[row, m] = tmp[m]
            for p in range(n_sat):
                s = sat[r, p]
                half = sat_half[r, p]
                for m in range(M):
                    b = c[s, m]
                    tmp[m] = k[r, m] * mp[m] * (half / ((b + half) * (b + half)))
                for q in range(n_sat):
                    if q != p:
                        sq = sat[r, q]
                        hq = sat_half[r, q]
                        for m in range(M):
                            bq = c[sq, m]
                            tmp[m] *= bq / (bq + hq)
                row = r * nslot + width + p
                for m in range(M):
                    d[row, m] = tmp[m]
            if want_dt:
                for m in range(M):
                    tmp[m] = dk[r, m] * mp[m] * sp[m]
                for p in range(n_mass):
                    slot = mass[r, p]
                    if slot >= first_fixed and slot < end_fixed:
                        g = dfixed[slot - first_fixed]
                        row = r * nslot + p
                        for m in range(M):
                            tmp[m] += d[row, m] * g
                for m in range(M):
                    rate[r, m] = tmp[m]
    if want_dt or want_rhs:
        out = dfdt_out if want_dt else f_out
        for i in range(nv):
            for m in range(M):
                out[i, m] = 0.0
        for r in range(nr):
            for q in range(st_ptr[r], st_ptr[r + 1]):
                i = st_idx[q]
                v = st_val[q]
                for m in range(M):
                    out[i, m] += v * rate[r, m]
    if want_jac:
        for p in range(jac_out.shape[0]):
            for m in range(M):
                jac_out[p, m] = 0.0
        for q in range(jac_pos.shape[0]):
            dst = jac_pos[q]
            src = jac_cols[q]
            v = jac_vals[q]
            for m in range(M):
                jac_out[dst, m] += v * d[src, m]


@_njit
def _factor_lock(jv, shift, col, diag, l_pos, l_pivot, op_ptr, op_src, op_dst, a, colmax, lik, tol, ok):
    """W = shift I - J for M members in the sparse pattern, factored without pivoting in place.

    ``ok[m]`` = 1 where every pivot of member m is finite and above ``tol`` times the
    largest entry of its column of W (``compiled._sparse_factor``'s test), else 0.
    """
    nnz, M = a.shape
    n = diag.shape[0]
    for p in range(nnz):
        for m in range(M):
            a[p, m] = -jv[p, m]
    for i in range(n):
        dp = diag[i]
        for m in range(M):
            a[dp, m] += shift
            colmax[i, m] = 0.0
    for p in range(nnz):
        cp = col[p]
        for m in range(M):
            v = abs(a[p, m])
            if v > colmax[cp, m]:
                colmax[cp, m] = v
    for e in range(l_pos.shape[0]):
        p = l_pos[e]
        pv = l_pivot[e]
        for m in range(M):
            v = a[p, m] / a[pv, m]
            lik[m] = v
            a[p, m] = v
        for q in range(op_ptr[e], op_ptr[e + 1]):
            dst = op_dst[q]
            src = op_src[q]
            for m in range(M):
                a[dst, m] -= lik[m] * a[src, m]
    for m in range(M):
        ok[m] = 1
    for i in range(n):
        dp = diag[i]
        for m in range(M):
            u = abs(a[dp, m])
            if not (u > tol * colmax[i, m]) or not math.isfinite(u):
                ok[m] = 0


@_njit
def _solve_lock(a, ptr, col, diag, perm, b, x):
    """Solve W z = b in place for M members (b (nv, M) in species order) with ``_factor_lock``'s factors."""
    n, M = x.shape
    for i in range(n):
        pi = perm[i]
        for m in range(M):
            x[i, m] = b[pi, m]
    for i in range(n):
        for p in range(ptr[i], diag[i]):
            cp = col[p]
            for m in range(M):
                x[i, m] -= a[p, m] * x[cp, m]
    one = np.uint64(1)
    for i in range(n - 1, -1, -1):
        for p in range(diag[i] + one, ptr[i + 1]):
            cp = col[p]
            for m in range(M):
                x[i, m] -= a[p, m] * x[cp, m]
        dp = diag[i]
        for m in range(M):
            x[i, m] /= a[dp, m]
    for i in range(n):
        pi = perm[i]
        for m in range(M):
            b[pi, m] = x[i, m]


@_njit
def _solve_members(mode, fallback, n_fb, a, ptr, col, diag, perm, w, piv, b, x, colb, colx):
    """Solve for all members: the vectorised sparse solve, then the dense one of each fallback member."""
    nv = b.shape[0]
    saved = np.empty((n_fb, nv))
    for q in range(n_fb):
        j = fallback[q]
        for i in range(nv):
            saved[q, i] = b[i, j]
    _solve_lock(a, ptr, col, diag, perm, b, x)
    for q in range(n_fb):
        j = fallback[q]
        if mode[j] == 2:
            for i in range(nv):
                colb[i] = saved[q, i]
            _dense_solve(w[q], piv[q], perm, colb, colx)
            for i in range(nv):
                b[i, j] = colb[i]


@_njit
def advance_lockstep(landings, air_rates, out_index, ys, reached, y, h, restart, status, h_max, t_a, t_b,
                     poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, lmult, fmult, rtol, atol,
                     gamma, ma, mc, mm, me, malpha, mgsum, mreuse, err_exp, mass, sat, sat_half, st_ptr,
                     st_idx, st_val, jac_cols, jac_vals, jac_pos, perm, ptr, col, diag, l_pos, l_pivot,
                     op_ptr, op_src, op_dst, n_fixed, counters, info, params):
    """Advance the running members of the call through one k(t) window in lock step.

    Arguments and outputs as :func:`boxchem.solver.compiled.advance_batch` (``y``
    (members, nv), ``h`` (members,): on return every running member holds the
    batch's step proposal).  See the module docstring for the step policy.
    """
    first_frac, fallback_h, piv_tol = params[5], params[6], params[8]
    n_all, nv = y.shape
    nr = poly.shape[1] - n_fixed
    ns = ma.shape[0]
    nnz = col.shape[0]
    nslot = mass.shape[1] + sat.shape[1]
    M = 0
    for m in range(n_all):
        if status[m] == 0:
            M += 1
    if M == 0:
        return
    act = np.empty(M, dtype=np.int64)
    q = 0
    hc = math.inf
    rst = False
    for m in range(n_all):
        if status[m] == 0:
            act[q] = m
            q += 1
            if h[m] < hc:
                hc = h[m]
            if restart[m] != 0:
                rst = True
    Y = np.empty((nv, M))
    fT = np.empty((nr, M))
    for j in range(M):
        for i in range(nv):
            Y[i, j] = y[act[j], i]
        for r in range(nr):
            fT[r, j] = fmult[act[j], r]
    alive = np.ones(M, dtype=np.int64)
    n_alive = M
    # work arrays
    zero_l = np.zeros(nr)
    one_f = np.ones(nr)
    kb = np.empty(nr)
    dkb = np.empty(nr)
    fx0 = np.empty(n_fixed)
    dfx0 = np.empty(n_fixed)
    fxs = np.empty(n_fixed)
    dfxs = np.empty(n_fixed)
    K0 = np.empty((nr, M))
    DK0 = np.empty((nr, M))
    KS = np.empty((nr, M))
    DKS = np.empty((nr, M))
    C = np.empty((nv + n_fixed + 1, M))
    R = np.empty((nr, M))
    D = np.empty((nr * nslot, M))
    mp = np.empty(M)
    sp = np.empty(M)
    tw = np.empty(M)
    F0C = np.empty((nv, M))
    F0 = np.empty((nv, M))
    FI = np.empty((nv, M))
    FP = np.empty((nv, M))
    DFDT = np.empty((nv, M))
    TMP = np.empty((nv, M))
    YI = np.empty((nv, M))
    YN = np.empty((nv, M))
    ER = np.empty((nv, M))
    XW = np.empty((nv, M))
    JV = np.empty((nnz, M))
    A = np.empty((nnz, M))
    CMAX = np.empty((nv, M))
    lik = np.empty(M)
    ok = np.empty(M, dtype=np.int64)
    mode = np.empty(M, dtype=np.int64)
    fb = np.empty(M, dtype=np.int64)
    W = np.empty((0, nv, nv))
    PIV = np.empty((0, nv), dtype=np.int64)
    jvcol = np.empty(nnz)
    colb = np.empty(nv)
    colx = np.empty(nv)
    lu_cols = np.empty(nv, dtype=np.int64)
    ST = np.empty((ns, nv, M))
    norm = np.empty(M)
    nonfin = np.empty(M, dtype=np.int64)
    worst = np.full(M, -1, dtype=np.int64)
    zs = np.empty(ns)
    dummy2 = np.empty((1, 1))

    t = landings[0]
    _coefficients_lock(t, t_a, t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon, zero_l, one_f,
                       fT, kb, fx0, dkb, dfx0, K0, DK0, True)
    _kinetics_lock(Y, K0, fx0, DK0, dfx0, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos, jac_cols,
                   jac_vals, C, R, D, mp, sp, tw, F0C, dummy2, dummy2, True, False, False)
    for j in range(M):
        counters[act[j], 2] += 1
    if rst:   # first step estimate (Hairer & Wanner 1996, II.4): the smallest over the members
        best = math.inf
        for j in range(M):
            est = _first_step(Y[:, j], F0C[:, j], atol, rtol, first_frac, fallback_h)
            # a member whose f is not finite gives no estimate (it fails on its own below)
            if est > 0.0 and math.isfinite(est) and est < best:
                best = est
        if not math.isfinite(best):
            best = fallback_h
        if best < hc:
            hc = best
    rejected_last = False
    for it in range(air_rates.shape[0]):
        t_end = landings[it + 1]
        r_air = air_rates[it]
        if hc > h_max:
            hc = h_max
        while t < t_end and n_alive > 0:
            h_proposed = hc
            hc, clipped = _land(t, t_end, hc)
            _kinetics_lock(Y, K0, fx0, DK0, dfx0, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos,
                           jac_cols, jac_vals, C, R, D, mp, sp, tw, TMP, JV, DFDT, False, True, True)
            for j in range(M):
                if alive[j]:
                    counters[act[j], 3] += 1
            for i in range(nv):
                for m in range(M):
                    F0[i, m] = F0C[i, m] + r_air * Y[i, m]
            rejected_here = False
            rejected_before = rejected_last
            retry = False
            err_norm = math.inf
            last_alpha = -1.0
            while True:
                t_new = t_end if hc == t_end - t else t + hc
                shift = 1.0 / (hc * gamma) - r_air
                if piv_tol >= 0.0:
                    _factor_lock(JV, shift, col, diag, l_pos, l_pivot, op_ptr, op_src, op_dst, A, CMAX,
                                 lik, piv_tol, ok)
                else:
                    for m in range(M):
                        ok[m] = 0
                n_fb = 0
                for j in range(M):
                    mode[j] = 1
                    if ok[j] == 0:
                        fb[n_fb] = j
                        n_fb += 1
                if n_fb > W.shape[0]:
                    W = np.empty((n_fb, nv, nv))
                    PIV = np.empty((n_fb, nv), dtype=np.int64)
                for qq in range(n_fb):
                    j = fb[qq]
                    for p in range(nnz):
                        jvcol[p] = JV[p, j]
                    _dense_w(jvcol, shift, ptr, col, W[qq])
                    mode[j] = 2 if _lu_factor(W[qq], PIV[qq], lu_cols) else 0
                for j in range(M):
                    if alive[j]:
                        counters[act[j], 4] += 1
                        if ok[j] == 0 and piv_tol >= 0.0:
                            counters[act[j], 5] += 1
                last_alpha = -1.0
                for st in range(ns):
                    if st == 0:
                        for i in range(nv):
                            for m in range(M):
                                FI[i, m] = F0[i, m]
                    elif mreuse[st]:
                        for i in range(nv):
                            for m in range(M):
                                FI[i, m] = FP[i, m]
                    else:
                        for i in range(nv):
                            for m in range(M):
                                YI[i, m] = Y[i, m]
                        for qs in range(st):
                            a_ = ma[st, qs]
                            if a_ != 0.0:
                                for i in range(nv):
                                    for m in range(M):
                                        YI[i, m] += a_ * ST[qs, i, m]
                        if malpha[st] != last_alpha:
                            t_stage = t_new if malpha[st] == 1.0 else t + malpha[st] * hc
                            _coefficients_lock(t_stage, t_a, t_b, poly, log_col, sza_poly, sgrid, lnj,
                                               phot_cols, horizon, zero_l, one_f, fT, kb, fxs, dkb, dfxs,
                                               KS, DKS, malpha[st] == 1.0)
                            last_alpha = malpha[st]
                        _kinetics_lock(YI, KS, fxs, DKS, dfxs, mass, sat, sat_half, st_ptr, st_idx, st_val,
                                       jac_pos, jac_cols, jac_vals, C, R, D, mp, sp, tw, FI, dummy2, dummy2,
                                       True, False, False)
                        for j in range(M):
                            if alive[j]:
                                counters[act[j], 2] += 1
                        for i in range(nv):
                            for m in range(M):
                                FI[i, m] += r_air * YI[i, m]
                    g_ = hc * mgsum[st]
                    for i in range(nv):
                        for m in range(M):
                            FP[i, m] = FI[i, m]
                            TMP[i, m] = FI[i, m] + g_ * DFDT[i, m]
                    for qs in range(st):
                        c_ = mc[st, qs]
                        if c_ != 0.0:
                            c_h = c_ / hc
                            for i in range(nv):
                                for m in range(M):
                                    TMP[i, m] += c_h * ST[qs, i, m]
                    _solve_members(mode, fb, n_fb, A, ptr, col, diag, perm, W, PIV, TMP, XW, colb, colx)
                    for i in range(nv):
                        for m in range(M):
                            ST[st, i, m] = TMP[i, m]
                for i in range(nv):
                    for m in range(M):
                        YN[i, m] = Y[i, m]
                        ER[i, m] = 0.0
                for st in range(ns):
                    if mm[st] != 0.0:
                        v = mm[st]
                        for i in range(nv):
                            for m in range(M):
                                YN[i, m] += v * ST[st, i, m]
                    if me[st] != 0.0:
                        v = me[st]
                        for i in range(nv):
                            for m in range(M):
                                ER[i, m] += v * ST[st, i, m]
                # each member's own norm (compiled._advance_member's), then the largest of the running ones
                err_norm = 0.0
                for j in range(M):
                    nonfin[j] = 1
                    norm[j] = math.inf
                    if mode[j] == 0:
                        continue
                    e, nonfinite, worst[j] = _error_norm(Y[:, j], YN[:, j], ER[:, j], atol, rtol, worst[j])
                    nonfin[j] = 1 if nonfinite else 0
                    norm[j] = e
                for j in range(M):
                    if alive[j] and not (norm[j] <= err_norm):
                        err_norm = norm[j]
                if err_norm <= 1.0:
                    break
                for j in range(M):
                    if alive[j]:
                        counters[act[j], 1] += 1
                hc = _rejected_step(hc, err_norm, err_exp, params)
                rejected_last = True
                rejected_here = True
                clipped = False
                if _below_minimum(hc, t, params):
                    # the members that still fail the test at the smallest step leave the batch ...
                    for j in range(M):
                        if alive[j] and not (norm[j] <= 1.0):
                            alive[j] = 0
                            n_alive -= 1
                            m_ = act[j]
                            status[m_] = 2 if nonfin[j] else 1
                            info[m_, 0] = t
                            info[m_, 1] = hc
                            info[m_, 2] = worst[j]
                    # ... and the others retry this step from the proposal before the rejections
                    hc = h_proposed
                    rejected_last = rejected_before
                    retry = True
                    break
            if retry:
                continue
            # accepted
            for j in range(M):
                if alive[j]:
                    counters[act[j], 0] += 1
            corr = _air_density_factor(r_air, hc, gamma, ma, mc, mm, zs)
            for i in range(nv):
                for m in range(M):
                    v = YN[i, m] * corr if r_air != 0.0 else YN[i, m]
                    Y[i, m] = v if v > 0.0 else 0.0
            hc = _next_step(hc, err_norm, err_exp, params, rejected_last, clipped, rejected_here, h_proposed,
                            h_max)
            rejected_last = False
            t = t_new
            if last_alpha == 1.0:       # k(t_new) and its slope from the last stage
                for r in range(nr):
                    for m in range(M):
                        K0[r, m] = KS[r, m]
                        DK0[r, m] = DKS[r, m]
                for qf in range(n_fixed):
                    fx0[qf] = fxs[qf]
                    dfx0[qf] = dfxs[qf]
            else:
                _coefficients_lock(t, t_a, t_b, poly, log_col, sza_poly, sgrid, lnj, phot_cols, horizon,
                                   zero_l, one_f, fT, kb, fx0, dkb, dfx0, K0, DK0, True)
            _kinetics_lock(Y, K0, fx0, DK0, dfx0, mass, sat, sat_half, st_ptr, st_idx, st_val, jac_pos,
                           jac_cols, jac_vals, C, R, D, mp, sp, tw, F0C, dummy2, dummy2, True, False, False)
            for j in range(M):
                if alive[j]:
                    counters[act[j], 2] += 1
        if n_alive == 0:
            break
        jo = out_index[it]
        if jo >= 0:
            for j in range(M):
                if alive[j]:
                    _store_output(ys, act[j], jo, Y[:, j], reached)
    for j in range(M):
        m_ = act[j]
        restart[m_] = 0
        if alive[j]:
            for i in range(nv):
                y[m_, i] = Y[i, j]
            h[m_] = hc
            info[m_, 0] = t
            info[m_, 1] = hc
            info[m_, 2] = worst[j]
