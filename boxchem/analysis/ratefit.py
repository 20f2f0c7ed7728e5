"""Fit rate-law parameters to measured rate coefficients, with uncertainties.

Weighted least squares in ln k through :func:`scipy.optimize.least_squares`
(trust-region reflective): the residual of point i is
(ln k_i - ln k_model(T_i, [M]_i)) / s_i with s_i = sigma_i / k_i, the
relative 1-sigma uncertainty (first order in sigma/k; a multiplicative error
model, as the evaluated data tables use).  The model functions are those the
mechanism evaluates (:mod:`boxchem.mechanism.ratelaws`), so a fitted line
means exactly what was fitted.

Parameters are fitted as ln A, ln k0, ln kinf, ln K (positive by
construction) and n, m, E/R, B, Fc.  Covariance C = (J^T J)^-1 from the
Jacobian at the optimum (the Gauss-Newton estimate; computed by SVD with
the tolerance :func:`scipy.optimize.curve_fit` uses).  When the file gives
uncertainties, C is taken as stated and multiplied by chi2/dof only when
that exceeds 1 (scatter beyond the stated errors widens the band; it never
narrows it).  Without uncertainties every point gets the same relative
uncertainty, estimated from the scatter (C scaled by chi2/dof).

Confidence band (delta method): var ln k(T) = g^T C g with g = d ln k/d p.
Evaluation-convention uncertainty (CONTRACTS.md, f298/g keys), at 1 sigma:
ln f298 = sigma_lnk(298 K), and g [K] the smallest value for which
f(T) = f298 exp(|g (1/T - 1/298)|) covers the 1-sigma band at every
measured temperature (for falloff: at every measured [M] as well, and
f298 is the largest sigma_lnk(298 K, [M]) over the measured [M]).  So f298 is a
lognormal geometric standard deviation (Pr(k/f <= k_true <= k f) ~ 68 %), as
the KIDA kinetic database defines its F0 = exp(dk/k0) (kida.obs.u-bordeaux1.fr,
"Uncertainty representations in KIDA").
Outliers: |standardised residual| > 3, the externally studentised residual
r_i / sqrt(s2_(i) (1 - h_ii)) with h the leverage (hat-matrix diagonal) of
the weighted fit and s2_(i) the reduced chi2 without point i (at least 1
when uncertainties are given).  See docs/lab-data.md.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import optimize

from ..errors import BoxchemError
from ..io.labdata import RateTable
from ..mechanism import ratelaws

__all__ = ["FitError", "RateFit", "LAWS", "fit_rate_table", "weighted_least_squares",
           "LeastSquaresResult", "OUTLIER_THRESHOLD", "T_REFERENCE_UNCERTAINTY"]

#: |standardised residual| above which a point is flagged as an outlier
OUTLIER_THRESHOLD = 3.0
#: smallest singular value, relative to the largest, of the column-scaled Jacobian for which the
#: parameters count as determined (a correlation closer to +-1 than about 1 - 1e-14 is not)
RANK_TOLERANCE = 1e-7
#: cap on the optimiser's function evaluations per fitted parameter (a good fit needs a few dozen;
#: the cap keeps a hopeless start on mangled data from running for minutes)
MAX_EVALUATIONS_PER_PARAMETER = 100
#: largest f298 a written mechanism line may carry (beyond it the fit does not determine k(298 K))
MAX_WRITTEN_F298 = 100.0
#: the evaluations' reference temperature of f298 [K]
T_REFERENCE_UNCERTAINTY = 298.0
#: fit laws and their parameters in fit space
LAWS = {
    "arrhenius": ("ln_A", "E/R"),
    "modified-arrhenius": ("ln_A", "n", "E/R"),
    "falloff": ("ln_k0", "n", "ln_kinf", "m"),        # + "Fc" when fitted
    "equilibrium": ("ln_K", "B"),
}


class FitError(BoxchemError):
    """A fit could not be done or its parameters are not determined by the data."""


@dataclass(frozen=True)
class LeastSquaresResult:
    """Outcome of :func:`weighted_least_squares` (parameters in fit space)."""

    values: np.ndarray
    covariance: np.ndarray
    chi2: float
    dof: int
    covariance_scale: float        # factor applied to (J^T J)^-1
    weighted_residuals: np.ndarray
    leverage: np.ndarray
    jacobian: np.ndarray
    message: str

    @property
    def reduced_chi2(self) -> float:
        return self.chi2 / self.dof if self.dof > 0 else math.nan

    @property
    def standard_errors(self) -> np.ndarray:
        return np.sqrt(np.diag(self.covariance))


def weighted_least_squares(model, p0, y, sigma, *, names, bounds=None, scaling="if-larger",
                           starts=None) -> LeastSquaresResult:
    """Minimise sum(((y - model(p)) / sigma)^2) with scipy.optimize.least_squares.

    ``model(p)`` returns the model values at the data points; ``sigma`` the
    1-sigma uncertainty of each ``y`` (same unit).  ``scaling``: how the
    covariance is scaled by chi2/dof: "if-larger" (stated uncertainties,
    widened only when chi2/dof > 1), "always" (uncertainties known only up
    to a factor, as curve_fit's absolute_sigma=False), "never".  ``starts``
    are further starting points; the lowest cost wins.
    """
    y = np.asarray(y, dtype=float)
    sigma = np.asarray(sigma, dtype=float)
    n_par = len(p0)
    if y.size < n_par:
        raise FitError(f"{y.size} points cannot determine {n_par} parameters ({', '.join(names)})")

    def residual(p):
        try:
            return (y - model(p)) / sigma
        except (OverflowError, ZeroDivisionError):
            # a trial step far outside the model's range (exp of a huge log-parameter): an infinite
            # residual makes the optimiser step back
            return np.full(y.shape, np.inf)

    lo, hi = bounds if bounds is not None else (-np.inf, np.inf)
    best = None
    dof_guess = max(y.size - n_par, 1)
    for start in [p0] + list(starts or ()):
        # further starting points only while the best fit so far is poor (chi2/dof > 2) or failed:
        # a good first fit is the minimum the others would find, at a fraction of the cost
        if best is not None and best.status > 0 and 2 * best.cost / dof_guess <= 2.0:
            break
        start = np.clip(np.asarray(start, dtype=float), lo, hi)
        try:
            with np.errstate(all="ignore"):
                res = optimize.least_squares(residual, start, jac="3-point", bounds=(lo, hi),
                                             method="trf", x_scale="jac", xtol=1e-12, ftol=1e-12,
                                             gtol=1e-12, max_nfev=MAX_EVALUATIONS_PER_PARAMETER * n_par)
        except (ValueError, OverflowError):
            continue
        if not np.all(np.isfinite(res.fun)):
            continue
        if best is None or res.cost < best.cost:  # status 0 (evaluation cap) is an error below
            best = res
    if best is None:
        raise FitError("the fit failed at every starting point (the model is not finite there); "
                       "check the data's units and the chosen law")
    if best.status == 0:
        raise FitError(f"the fit did not converge within {best.nfev} evaluations of the model; check the "
                       "data (units, outliers) and the law, or give starting values")
    J = best.jac
    # covariance as curve_fit computes it (Moore-Penrose inverse of J^T J via SVD, singular values
    # below eps * max(shape) * s_max count as zero), on the column-scaled Jacobian so that the
    # rank test does not depend on the parameters' units (a slope in cm3 s-1 beside an intercept in s-1)
    norms = np.linalg.norm(J, axis=0)
    if np.any(norms == 0):
        missing = ", ".join(n for n, v in zip(names, norms) if v == 0)
        raise FitError(f"the data do not depend on {missing}: fix it or use a simpler law")
    Js = J / norms
    _, s, VT = np.linalg.svd(Js, full_matrices=False)
    # the Jacobian comes from finite differences (relative error ~1e-10), so exactly collinear
    # parameters (k0 and n at one temperature) show up as s_min/s_max ~ 1e-9, not 1e-16
    threshold = max(RANK_TOLERANCE, np.finfo(float).eps * max(J.shape)) * s[0]
    if np.any(s <= threshold):
        raise FitError("the data do not determine every parameter (" + ", ".join(names) + "): the "
                       "Jacobian is rank deficient; fix a parameter, use a simpler law, or add "
                       "measurements over a wider range of T (and [M])")
    cov = ((VT.T / s**2) @ VT) / np.outer(norms, norms)
    dof = y.size - n_par
    chi2 = float(np.sum(best.fun**2))
    red = chi2 / dof if dof > 0 else math.nan
    if scaling == "always":
        if dof <= 0:
            raise FitError(f"{y.size} points and {n_par} parameters leave no degree of freedom to "
                           "estimate the scatter; give uncertainties or more points")
        scale = red
    elif scaling == "if-larger":
        scale = max(1.0, red) if dof > 0 else 1.0
    else:
        scale = 1.0
    # leverage h_ii = diag(J (J^T J)^-1 J^T): the share of point i in its own fitted value
    U = Js @ VT.T / s
    leverage = np.sum(U**2, axis=1)
    return LeastSquaresResult(values=best.x, covariance=cov * scale, chi2=chi2, dof=dof,
                              covariance_scale=scale, weighted_residuals=best.fun,
                              leverage=leverage, jacobian=J, message=str(best.message))


@dataclass
class RateFit:
    """A fitted rate law: parameters, covariance, statistics and the data it came from."""

    law: str
    table: RateTable
    names: tuple[str, ...]
    values: np.ndarray
    covariance: np.ndarray
    tref: float
    fc: float | None                 # fixed Fc (falloff), None when fitted or not a falloff
    result: LeastSquaresResult
    weighted: bool                   # False: no uncertainty column, scatter-estimated weights
    k_effective: np.ndarray          # the fitted quantity: k (cm3 s-1 for falloff), or K
    rel_sigma: np.ndarray            # relative 1-sigma used for each point
    notes: list[str] = field(default_factory=list)
    fixed: dict[str, float] = field(default_factory=dict)   # fixed parameters, in fit space

    # ---- model
    def _params(self, p) -> dict[str, float]:
        return _param_dict(self.law, self.names, p, self.tref, self.fc, self.fixed)

    def ln_model(self, p, temperature, air_density=None) -> np.ndarray:
        """ln of the law at T [K] (and [M] [cm-3]) for fit-space parameters ``p``."""
        return _ln_law(self.law, self._params(p), temperature, air_density)

    def ln_k(self, temperature, air_density=None) -> np.ndarray:
        """ln of the fitted k (or K) at T [K] and [M] [cm-3]."""
        return self.ln_model(self.values, temperature, air_density)

    def ln_k_sigma(self, temperature, air_density=None) -> np.ndarray:
        """1-sigma of ln k at T, [M] by the delta method, sqrt(g^T C g)."""
        T = np.asarray(temperature, dtype=float)
        M = None if air_density is None else np.asarray(air_density, dtype=float)
        grads = []
        for i in range(self.values.size):
            step = 1e-6 * max(1.0, abs(self.values[i]))
            up, down = self.values.copy(), self.values.copy()
            up[i] += step
            down[i] -= step
            grads.append((self.ln_model(up, T, M) - self.ln_model(down, T, M)) / (2 * step))
        G = np.stack(np.broadcast_arrays(*grads), axis=-1)
        return np.sqrt(np.einsum("...i,ij,...j->...", G, self.covariance, G))

    # ---- reported quantities
    @property
    def parameters(self) -> dict[str, float]:
        """The mechanism's keys and their fitted values (A, E/R, n, Tref / k0 ... / K, B)."""
        return self._params(self.values)

    @property
    def parameter_sigmas(self) -> dict[str, float]:
        """1-sigma of each mechanism key (for exp-fitted keys: value * sigma of the log)."""
        se = np.sqrt(np.diag(self.covariance))
        out = {}
        params = self.parameters
        for name, s in zip(self.names, se):
            key = name[3:] if name.startswith("ln_") else name
            out[key] = params[key] * s if name.startswith("ln_") else float(s)
        return out

    @property
    def correlation(self) -> np.ndarray:
        se = np.sqrt(np.diag(self.covariance))
        return self.covariance / np.outer(se, se)

    @property
    def standardised_residuals(self) -> np.ndarray:
        """Externally studentised residuals r_i / sqrt(s2_(i) (1 - h_ii)).

        r_i: the weighted residual; s2_(i) the reduced chi2 of the fit without
        point i (one-step deletion formula), never below 1 when the file gives
        uncertainties (the "if-larger" rule of the covariance), so that one
        wild point neither hides itself nor drags its neighbours over the
        threshold.
        """
        r = self.result.weighted_residuals
        h = np.clip(self.result.leverage, 0.0, 1.0 - 1e-12)
        dof = self.result.dof
        if dof < 2:
            return r / np.sqrt(1.0 - h)
        s2 = (self.result.chi2 - r**2 / (1.0 - h)) / (dof - 1)
        s2 = np.maximum(s2, 1.0) if self.weighted else np.maximum(s2, 1e-300)
        return r / np.sqrt(s2 * (1.0 - h))

    @property
    def outliers(self) -> np.ndarray:
        """Boolean mask of points with |standardised residual| > OUTLIER_THRESHOLD."""
        return np.abs(self.standardised_residuals) > OUTLIER_THRESHOLD

    @property
    def residuals_ln(self) -> np.ndarray:
        """ln k_measured - ln k_fit at each point."""
        return np.log(self.k_effective) - self.ln_k(self.table.temperature, self.table.air_density)

    def _band_points(self):
        T = self.table.temperature
        if self.law == "falloff":
            M = np.unique(self.table.air_density)
            return T[:, None], M[None, :]
        return T, None

    @property
    def f298(self) -> float:
        """Uncertainty factor at 298 K: exp(1-sigma of ln k at 298 K) (max over measured [M] for falloff)."""
        M = np.unique(self.table.air_density) if self.law == "falloff" else None
        ln_f = float(np.max(self.ln_k_sigma(T_REFERENCE_UNCERTAINTY, M)))
        return math.exp(ln_f) if ln_f < 700.0 else math.inf

    @property
    def g(self) -> float:
        """Smallest g [K] with f(T) = f298 exp(|g (1/T - 1/298)|) >= exp(sigma_lnk(T)) at measured T."""
        T, M = self._band_points()
        sigma = self.ln_k_sigma(T, M)
        if M is not None:
            sigma = sigma.max(axis=1)
        distance = np.abs(1.0 / self.table.temperature - 1.0 / T_REFERENCE_UNCERTAINTY)
        if not math.isfinite(self.f298):
            return math.inf
        excess = sigma - math.log(self.f298)
        ok = distance > 1e-9
        if not np.any(ok):
            return 0.0
        return float(max(0.0, np.max(np.where(ok, excess, 0.0) / np.where(ok, distance, 1.0))))

    def uncertainty_factor(self, temperature) -> np.ndarray:
        """f(T) = f298 exp(|g (1/T - 1/298)|) of this fit."""
        T = np.asarray(temperature, dtype=float)
        return self.f298 * np.exp(np.abs(self.g * (1.0 / T - 1.0 / T_REFERENCE_UNCERTAINTY)))

    @property
    def temperature_range(self) -> tuple[float, float]:
        return float(self.table.temperature.min()), float(self.table.temperature.max())

    def summary(self) -> str:
        """Short statistics for a ref= text or a report line."""
        lo, hi = self.temperature_range
        r = self.result
        parts = [f"{len(self.table)} points", f"{lo:g}-{hi:g} K"]
        if self.law == "falloff":
            M = self.table.air_density
            parts.append(f"[M] {M.min():.2g}-{M.max():.2g} cm-3")
        parts.append(f"chi2/dof={r.reduced_chi2:.2f}" if self.weighted else "unweighted")
        if self.fixed:
            fixed = [n[3:] if n.startswith("ln_") else n for n in self.fixed]
            parts.append(f"{', '.join(fixed)} fixed")
        if self.outliers.any():
            parts.append(f"{int(self.outliers.sum())} outlier(s) flagged")
        return ", ".join(parts)


def _ln_law(law, params, temperature, air_density=None):
    T = np.asarray(temperature, dtype=float)
    with np.errstate(all="ignore"):
        if law in ("arrhenius", "modified-arrhenius"):
            return np.log(ratelaws.arrhenius(T, params["A"], params["E/R"], params["n"], params["Tref"]))
        if law == "falloff":
            return np.log(ratelaws.termolecular_falloff(T, air_density, params["k0"], params["n"],
                                                        params["kinf"], params["m"], params["Fc"],
                                                        params["Tref"]))
        return np.log(ratelaws.equilibrium_constant(T, params["K"], params["B"]))


def _start_arrhenius(T, lnk, w):
    # straight line ln k = ln A - (E/R)/T, weighted; only a starting point for the fit
    slope, intercept = np.polyfit(1.0 / T, lnk, 1, w=w)
    return intercept, -slope


def fit_rate_table(table: RateTable, law: str, *, tref: float = 300.0, fc: float | None = 0.6,
                   start: dict[str, float] | None = None, scale_covariance: str | None = None,
                   fixed: dict[str, float] | None = None) -> RateFit:
    """Fit ``law`` (a key of :data:`LAWS`) to a rate table.

    arrhenius: k = A exp(-(E/R)/T); modified-arrhenius: k = A (T/tref)^n
    exp(-(E/R)/T); falloff: the termolecular form of
    :func:`~boxchem.mechanism.ratelaws.termolecular_falloff` with Fc fixed at
    ``fc`` (``fc=None`` fits it in [0.05, 1]) and k0, kinf referred to
    ``tref``; equilibrium: K = A exp(B/T) (a table of K or of
    k_forward/k_reverse).  ``start`` overrides starting values (mechanism keys).
    ``scale_covariance`` overrides the chi2/dof scaling of the covariance
    (default "if-larger" with uncertainties, "always" without; see
    :func:`weighted_least_squares`).  ``fixed`` holds parameters (mechanism
    keys, e.g. ``{"n": 3.6, "m": 1.6}``) kept at the given values, for data
    that cannot determine them (one temperature, one pressure regime).
    """
    if law not in LAWS:
        raise FitError(f"unknown law {law!r}; valid: {', '.join(LAWS)}")
    fixed_fit = _fixed_in_fit_space(law, fixed or {}, fc)
    if law == "equilibrium" and table.kind != "K":
        raise FitError(f"{table.source}: an equilibrium fit needs k_forward and k_reverse columns "
                       "(or a K column); this file gives k")
    if law != "equilibrium" and table.kind == "K":
        raise FitError(f"{table.source}: the file gives equilibrium constants; use --law equilibrium")
    T = table.temperature
    value = table.value.copy()
    notes: list[str] = []
    if law == "falloff":
        if not table.has_air_density():
            raise FitError(f"{table.source}: a falloff fit needs p or [M] on every row; add a 'p [hPa]' "
                           "or 'M [cm-3]' column")
        if table.value_units == "cm6 s-1":
            value = value * table.air_density
            notes.append("k given as the termolecular k/[M] (cm6 s-1); fitted as the effective "
                         "second-order k = k_ter [M] (cm3 s-1)")
        elif table.value_units != "cm3 s-1":
            raise FitError(f"{table.source}: a falloff fit needs k in cm3 molecule-1 s-1 (effective "
                           f"second order) or cm6 molecule-2 s-1 (k/[M]), not {table.value_units}")
        baths = sorted(set(table.bath_gas) - {""})
        if len(baths) > 1:
            raise FitError(f"{table.source}: rows use the bath gases {', '.join(baths)}; third-body "
                           "efficiencies differ, so fit one at a time (boxchem fit --bath NAME)")
    n_T = np.unique(np.round(T, 1)).size
    if law == "falloff" and n_T < 2 and not {"n", "m"} <= set(fixed_fit):
        raise FitError(f"{table.source}: all rows are at {T[0]:g} K; the temperature exponents n and m "
                       "of a falloff fit need measurements at two or more temperatures, or fix them "
                       "(boxchem fit --fix n=3.6 --fix m=1.6)")
    n_free = len(LAWS[law]) - len(fixed_fit)
    if law != "falloff" and n_T < n_free:
        raise FitError(f"{table.source}: {n_T} distinct temperature(s) cannot determine the "
                       f"{n_free} free parameters of {law}")

    weighted = table.sigma is not None
    rel = table.sigma / table.value if weighted else np.ones_like(value)
    lnk = np.log(value)
    M = table.air_density if law == "falloff" else None
    names = list(LAWS[law])
    if law == "falloff" and fc is None:
        names.append("Fc")
    s = dict(start or {})

    if law in ("arrhenius", "modified-arrhenius", "equilibrium"):
        ln_a, e_r = _start_arrhenius(T, lnk, 1.0 / rel)
        if law == "equilibrium":
            p0 = [math.log(s["K"]) if "K" in s else ln_a, s.get("B", -e_r)]
        elif law == "arrhenius":
            p0 = [math.log(s["A"]) if "A" in s else ln_a, s.get("E/R", e_r)]
        else:
            p0 = [math.log(s["A"]) if "A" in s else ln_a, s.get("n", 0.0), s.get("E/R", e_r)]
        lo, hi = -np.inf, np.inf
        starts = []
    else:
        # starting values from the low- and high-pressure ends of the data
        low = np.argsort(M)[: max(1, M.size // 4)]
        k0_guess = float(np.exp(np.mean(lnk[low] - np.log(M[low])))) * 1.5
        kinf_guess = float(np.exp(lnk.max())) * 2.0
        p0 = [math.log(s.get("k0", k0_guess)), s.get("n", 3.0), math.log(s.get("kinf", kinf_guess)),
              s.get("m", 1.0)]
        lo = [-np.inf, -20.0, -np.inf, -20.0]
        hi = [np.inf, 20.0, np.inf, 20.0]
        if fc is None:
            p0.append(s.get("Fc", 0.6))
            lo.append(0.05)
            hi.append(1.0)
        starts = []
        for n0, m0, f_inf in ((1.0, 0.0, 1.0), (5.0, 2.0, 1.0), (3.0, 1.0, 10.0), (3.0, 1.0, 0.3)):
            alt = list(p0)
            alt[1], alt[3], alt[2] = n0, m0, math.log(kinf_guess * f_inf)
            starts.append(alt)
    # keep only the free parameters
    free = [i for i, n in enumerate(names) if n not in fixed_fit]
    if not free:
        raise FitError("every parameter is fixed: nothing to fit")
    lo = np.broadcast_to(np.asarray(lo, dtype=float), (len(names),))[free]
    hi = np.broadcast_to(np.asarray(hi, dtype=float), (len(names),))[free]
    p0 = [p0[i] for i in free]
    starts = [[st[i] for i in free] for st in starts]
    names = [names[i] for i in free]
    fit_fc = fc

    def model(p):
        return _ln_law(law, _param_dict(law, names, p, tref, fit_fc, fixed_fit), T, M)

    scaling = scale_covariance or ("if-larger" if weighted else "always")
    res = weighted_least_squares(model, p0, lnk, rel, names=names, bounds=(lo, hi), scaling=scaling,
                                 starts=starts)
    if not weighted:
        notes.append("no uncertainty column: every point given the same relative uncertainty, "
                     f"estimated from the scatter ({math.sqrt(res.reduced_chi2) * 100:.3g} % per point)")
        rel = rel * math.sqrt(res.reduced_chi2)
    elif res.covariance_scale > 1.0:
        notes.append(f"chi2/dof = {res.reduced_chi2:.2f} > 1: the scatter exceeds the stated "
                     f"uncertainties; the covariance was multiplied by {res.covariance_scale:.2f}")
    covariance = res.covariance.copy()
    if table.common_rel_sigma > 0:
        # a scale factor c shared by every k moves only the log-amplitudes: ln A (ln K), or ln k0
        # and ln kinf together (x = k0[M]/kinf is unchanged), so var(ln c) enters fully correlated
        amp = [names.index(n) for n in ("ln_A", "ln_k0", "ln_kinf", "ln_K") if n in names]
        covariance[np.ix_(amp, amp)] += table.common_rel_sigma ** 2
        notes.append(f"a common (correlated) relative uncertainty of {table.common_rel_sigma * 100:.3g} % "
                     "from the file is added to the amplitude parameters and the band")
    if law == "falloff" and fc is None:
        i = names.index("Fc")
        fcv, fcs = res.values[i], math.sqrt(covariance[i, i])
        if fcv <= 0.06 or fcv >= 0.99 or fcs > 0.5 * fcv:
            notes.append(f"Fc = {fcv:.3g} +- {fcs:.2g} (bounds 0.05-1): the data do not determine Fc; "
                         "fix it (--fc 0.6)")
    if fixed_fit:
        notes.append("fixed (not fitted): " + ", ".join(f"{k}={v:g}" for k, v in (fixed or {}).items()))
    return RateFit(law=law, table=table, names=tuple(names), values=res.values, covariance=covariance,
                   tref=tref, fc=fc, result=res, weighted=weighted, k_effective=value,
                   rel_sigma=rel, notes=notes, fixed=fixed_fit)


#: mechanism keys fitted through their logarithm
_LOG_KEYS = {"A": "ln_A", "k0": "ln_k0", "kinf": "ln_kinf", "K": "ln_K"}


def _fixed_in_fit_space(law, fixed: dict[str, float], fc) -> dict[str, float]:
    """{'n': 3.6, 'k0': 2e-32} -> {'n': 3.6, 'ln_k0': ln 2e-32}, checked against the law's keys."""
    names = LAWS[law] + (("Fc",) if law == "falloff" and fc is None else ())
    valid = [n[3:] if n.startswith("ln_") else n for n in names]
    out = {}
    for key, value in fixed.items():
        if key not in valid:
            raise FitError(f"--fix {key}: not a fitted parameter of {law}; valid: {', '.join(valid)}"
                           + (" (Fc: use --fc)" if key == "Fc" else ""))
        value = float(value)
        if not math.isfinite(value) or (key in _LOG_KEYS and value <= 0):
            raise FitError(f"--fix {key}={value:g}: " + ("must be positive" if key in _LOG_KEYS
                                                         else "must be a finite number"))
        out[_LOG_KEYS.get(key, key)] = math.log(value) if key in _LOG_KEYS else value
    return out


def _param_dict(law, names, p, tref, fc, fixed=None):
    d = dict(fixed or {})
    d.update(zip(names, p))
    if law in ("arrhenius", "modified-arrhenius"):
        return {"A": math.exp(d["ln_A"]), "E/R": float(d["E/R"]), "n": float(d.get("n", 0.0)),
                "Tref": float(tref)}
    if law == "falloff":
        return {"k0": math.exp(d["ln_k0"]), "n": float(d["n"]), "kinf": math.exp(d["ln_kinf"]),
                "m": float(d["m"]), "Fc": float(d.get("Fc", fc)), "Tref": float(tref)}
    return {"K": math.exp(d["ln_K"]), "B": float(d["B"])}


# ----------------------------------------------------------------------------- mechanism text

def mechanism_override_text(base: str, lines: list[str]) -> str:
    """A mechanism that builds on ``base`` and replaces the reactions given as ``lines``.

    The ONE place that spells the language's "build on a file, replace
    reactions by id" syntax (``extends`` + ``[changed reactions]``,
    docs/mechanism-language.md); change the spelling here if the language changes it.
    """
    return f'extends "{base}"\n\n[changed reactions]\n' + "\n".join(lines) + "\n"


def _g4(x: float) -> str:
    return f"{float(x):.4g}"


def reaction_line(fit: RateFit, reaction, source_name: str) -> str:
    """The mechanism line for ``reaction`` (a parsed Reaction) with the fitted parameters.

    arrhenius fits write ``arrhenius A= E/R= n= Tref=``; falloff ``falloff k0=
    n= kinf= m= Fc= Tref=``; equilibrium fits keep the reverse line's ``of=``
    and write ``K= B=``.  f298 and g are the fit's (1 sigma), ref= names the
    data file and the fit statistics.
    """
    p = fit.parameters
    if fit.law in ("arrhenius", "modified-arrhenius"):
        law = "arrhenius"
        keys = f"A={_g4(p['A'])} E/R={_g4(p['E/R'])}"
        if fit.law == "modified-arrhenius":
            keys += f" n={_g4(p['n'])} Tref={_g4(p['Tref'])}"
    elif fit.law == "falloff":
        law = "falloff"
        keys = (f"k0={_g4(p['k0'])} n={_g4(p['n'])} kinf={_g4(p['kinf'])} m={_g4(p['m'])} "
                f"Fc={_g4(p['Fc'])} Tref={_g4(p['Tref'])}")
    else:
        law = "reverse"
        keys = f"of={reaction.parameters['of']} K={_g4(p['K'])} B={_g4(p['B'])}"
    f298 = max(1.0, math.ceil(fit.f298 * 1000) / 1000)   # rounded up: never narrower than fitted
    g = math.ceil(fit.g)
    name = source_name.replace('"', "'")
    ref = f"boxchem fit of {name} ({fit.law}; {fit.summary()}; f298 and g at 1 sigma)"
    return f'{reaction.id}  {reaction.equation}  {law}  {keys}  f298={f298:g} g={g:d}  ref="{ref}"'


def mechanism_snippet(fit: RateFit, mechanism, reaction_id: str, *, base: str,
                      base_dir=None, command: str = "") -> str:
    """Mechanism text (a comment block with the fit, then the override) replacing ``reaction_id``.

    ``mechanism`` is the parsed base; ``base`` the name or path the snippet
    extends.  The text is parsed back (relative to ``base_dir``) before it is
    returned, and the unit of the new line's k is checked against the data's.
    """
    import difflib

    from ..mechanism import parse_mechanism

    ids = [r.id for r in mechanism.reactions]
    if reaction_id not in ids:
        hint = difflib.get_close_matches(reaction_id, ids, n=1)
        raise FitError(f"--reaction: no reaction {reaction_id!r} in {mechanism_label(mechanism)}"
                       + (f" - did you mean {hint[0]!r}?" if hint else ""))
    reaction = mechanism.reactions[ids.index(reaction_id)]
    if fit.law == "equilibrium" and reaction.law != "reverse":
        reverse = [r.id for r in mechanism.reactions if r.law == "reverse"]
        raise FitError(f"--reaction {reaction_id}: an equilibrium fit sets K= B= of a 'reverse' line, but "
                       f"{reaction_id} is {reaction.law}; reverse lines: {', '.join(reverse) or 'none'}")
    if fit.law != "equilibrium" and reaction.law == "reverse":
        raise FitError(f"--reaction {reaction_id} is a 'reverse' line (k from K); fit its equilibrium "
                       "constant with --law equilibrium, or fit the forward reaction "
                       f"{reaction.parameters['of']}")
    if fit.law == "falloff" and not reaction.third_body:
        raise FitError(f"--reaction {reaction_id}: a falloff line needs M on the left of its equation "
                       f"({reaction.equation})")
    if not fit.f298 < MAX_WRITTEN_F298:
        raise FitError(f"the fit leaves k at 298 K undetermined (f298 = {fit.f298:.3g}); no line written - "
                       "fix parameters (--fc, a simpler law) or add measurements nearer 298 K")
    source_name = fit.table.name
    line = reaction_line(fit, reaction, source_name)
    text = _snippet_comments(fit, reaction, command) + mechanism_override_text(base, [line])
    parsed = parse_mechanism(text, source="<fitted snippet>", base_dir=base_dir)
    new = next(r for r in parsed.reactions if r.id == reaction_id)
    if fit.law != "equilibrium":
        data_units = "cm3 s-1" if fit.law == "falloff" else fit.table.value_units
        if new.rate_coefficient_units != data_units:
            raise FitError(f"{fit.table.source}: k is in {data_units}, but {reaction_id} "
                           f"({reaction.equation}) as an {new.law} line has k in {new.rate_coefficient_units}; "
                           "check the k column's unit or choose another law/reaction")
    return text


def mechanism_label(mechanism) -> str:
    loc = getattr(mechanism.reactions[0], "location", None) if mechanism.reactions else None
    return f"mechanism {loc.file!r}" if loc is not None else "the mechanism"


def _snippet_comments(fit: RateFit, reaction, command: str) -> str:
    p, s = fit.parameters, fit.parameter_sigmas
    out = [f"# {reaction.id} fitted by boxchem fit to {fit.table.source}",
           f"# law {fit.law}: {fit.summary()}"]
    if command:
        out.append(f"# command: {command}")
    out.append("# parameters (1 sigma):")
    for key in s:
        out.append(f"#   {key:<5} = {p[key]:.5g} +- {s[key]:.3g}")
    fixed = [f"{k}={p[k]:g}" for k in p if k not in s and not (fit.law == "arrhenius" and k in ("n", "Tref"))]
    if fixed:
        out.append(f"#   fixed: {', '.join(fixed)}")
    corr = fit.correlation
    if len(fit.names) > 1:
        out.append("# correlation of (" + ", ".join(fit.names) + "):")
        out += ["#   " + " ".join(f"{v:+.3f}" for v in row) for row in corr]
    out.append(f"# f298 = exp(1-sigma of ln k at 298 K) = {fit.f298:.4g}; g = {fit.g:.4g} K "
               "(smallest g whose f(T) covers the 1-sigma band over the measured T)")
    if fit.outliers.any():
        lines = ", ".join(str(x) for x in fit.table.line[fit.outliers])
        out.append(f"# outliers (|standardised residual| > {OUTLIER_THRESHOLD:g}), kept in the fit: "
                   f"file lines {lines}")
    out += [f"# note: {n}" for n in fit.notes]
    if reaction.ref or reaction.f298:
        old = " ".join(f"{k}={v:g}" if isinstance(v, float) else f"{k}={v}"
                       for k, v in reaction.parameters.items() if not k.startswith("_"))
        out.append(f"# replaces: {reaction.law} {old} f298={reaction.f298} g={reaction.g} ref=\"{reaction.ref}\"")
    return "\n".join(out) + "\n\n"
