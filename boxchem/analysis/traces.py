"""Rate coefficients from flash-photolysis kinetic traces.

Second-order self-reaction A + A -> products with rate k [A]^2 (the
mechanism's convention: d[A]/dt = -2 k [A]^2), optionally with a first-order
loss k1 (diffusion, pumping): d[A]/dt = -2 k [A]^2 - k1 [A], whose closed form
is 1/[A](t) = (1/[A]0 + 2k/k1) exp(k1 t) - 2k/k1 (and 1/[A] = 1/[A]0 + 2kt
for k1 = 0; common practice, e.g. any kinetics text).  An absorbance trace
is ln(I0/I) = sigma L [A] + baseline (Beer-Lambert law, natural-log
absorbance; decadic files are converted on reading), so k follows from the
cross section sigma [cm2] and path length L [cm], and the cross section's
relative uncertainty adds in quadrature to that of k (k scales as sigma).

Pseudo-first-order decay with B in excess: S(t) = S0 exp(-k' t) + baseline,
k' = k [B] + k_d; a weighted straight line through k' against [B] at one
(T, [M]) gives k (slope) and k_d (intercept).

Fits go through :func:`boxchem.analysis.ratefit.weighted_least_squares`
(scipy.optimize.least_squares).  Without a noise column the point noise is
estimated from the residual scatter (covariance scaled by chi2/dof).  Only
points with t > 0 are fitted (the flash is at t = 0).  Uncertainties 1 sigma.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..io.labdata import Trace
from .ratefit import FitError, LeastSquaresResult, weighted_least_squares

__all__ = ["common_uncertainty", "second_order_concentration", "TraceFit", "fit_second_order", "fit_first_order_decay",
           "PseudoFirstOrderLine", "fit_pseudo_first_order", "fit_traces", "rate_table_text",
           "condition_groups"]


def second_order_concentration(time_s, initial, k, k1=0.0):
    """[A](t) [cm-3] of d[A]/dt = -2 k [A]^2 - k1 [A].

    time_s [s], initial [A]0 [cm-3], k [cm3 molecule-1 s-1], k1 [s-1] (>= 0).
    1/[A] = (1/[A]0 + 2k/k1) e^(k1 t) - 2k/k1; for k1 -> 0, 1/[A]0 + 2kt
    (closed form of the Bernoulli equation; common practice, no source).
    """
    t = np.asarray(time_s, dtype=float)
    if k1 == 0.0:
        return initial / (1.0 + 2.0 * k * initial * t)
    # expm1 keeps the small-k1 limit exact: (e^(k1 t) - 1)/k1 -> t
    growth = np.expm1(k1 * t)
    return 1.0 / (np.exp(k1 * t) / initial + 2.0 * k * growth / k1)


@dataclass(frozen=True)
class TraceFit:
    """Fit of one trace: k (second order, cm3 s-1) or k' (first order, s-1), with 1-sigma."""

    trace: Trace
    label: str                      # "k" or "k'"
    k: float
    k_sigma: float                  # total 1-sigma (incl. the cross section's share)
    k_sigma_fit: float              # from the trace fit alone
    names: tuple[str, ...]
    values: np.ndarray
    result: LeastSquaresResult
    used: np.ndarray                # mask of fitted points (t > 0)
    model_signal: np.ndarray        # fitted signal at the used points

    @property
    def reduced_chi2(self) -> float:
        return self.result.reduced_chi2


def _noise(trace: Trace, used):
    if trace.signal_sigma is not None:
        return trace.signal_sigma[used], "if-larger"
    return np.ones(int(used.sum())), "always"


def fit_second_order(trace: Trace, *, baseline: bool = False, first_order_loss: bool = False) -> TraceFit:
    """k [cm3 molecule-1 s-1] of a self-reaction (d[A]/dt = -2k[A]^2 [- k1 [A]]) from one trace."""
    used = trace.time > 0
    t, y = trace.time[used], trace.signal[used]
    if t.size < 5:
        raise FitError(f"{trace.source}: {t.size} points after t = 0; a fit needs at least 5")
    if trace.signal_kind == "absorbance":
        to_signal = trace.cross_section * trace.path_length   # absorbance per molecule cm-3
    else:
        to_signal = 1.0
    sigma, scaling = _noise(trace, used)
    # fit the signal in units of its largest value, so that every parameter is of order one
    # (a concentration trace of 1e13 cm-3 would otherwise make the Jacobian look rank deficient)
    unit = float(np.max(np.abs(y))) or 1.0
    y = y / unit
    to_signal = to_signal / unit
    if trace.signal_sigma is not None:
        sigma = sigma / unit
    # starting values: [A]0 from the first points, k from the slope of 1/[A] over the first half
    n0 = max(3, t.size // 20)
    a0 = max(float(np.mean(y[:n0])) / to_signal, 1e-30)
    half = slice(0, max(n0 + 2, t.size // 2))
    inv = 1.0 / np.clip(y[half] / to_signal, a0 * 1e-3, None)
    slope = np.polyfit(t[half], inv, 1)[0]
    k_guess = max(slope / 2.0, 1e-3 / (a0 * t[-1]))
    names = ["ln_k", "ln_A0"]
    p0 = [math.log(k_guess), math.log(a0)]
    if baseline:
        names.append("baseline")
        p0.append(0.0)
    if first_order_loss:
        names.append("k1")
        p0.append(1e-3 / t[-1])

    def model(p):
        d = dict(zip(names, p))
        conc = second_order_concentration(t, math.exp(d["ln_A0"]), math.exp(d["ln_k"]), d.get("k1", 0.0))
        return conc * to_signal + d.get("baseline", 0.0)

    lo = [-np.inf] * len(names)
    hi = [np.inf] * len(names)
    if first_order_loss:
        lo[names.index("k1")] = 0.0
    res = weighted_least_squares(model, p0, y, sigma, names=names, bounds=(lo, hi), scaling=scaling,
                                 starts=[[p0[0] + 1.0] + p0[1:], [p0[0] - 1.0] + p0[1:]])
    k = math.exp(res.values[0])
    rel_fit = float(res.standard_errors[0])                  # sigma of ln k
    model_signal = model(res.values) * unit
    values = res.values.copy()
    if baseline:
        values[names.index("baseline")] *= unit
    rel_xs = trace.cross_section_rel_sigma if trace.signal_kind == "absorbance" else 0.0
    rel = math.hypot(rel_fit, rel_xs)
    return TraceFit(trace=trace, label="k", k=k, k_sigma=k * rel, k_sigma_fit=k * rel_fit,
                    names=tuple(names), values=values, result=res, used=used, model_signal=model_signal)


def fit_first_order_decay(trace: Trace, *, baseline: bool = False) -> TraceFit:
    """k' [s-1] of S(t) = S0 exp(-k' t) [+ baseline] from one trace."""
    used = trace.time > 0
    t, y = trace.time[used], trace.signal[used]
    if t.size < 5:
        raise FitError(f"{trace.source}: {t.size} points after t = 0; a fit needs at least 5")
    sigma, scaling = _noise(trace, used)
    unit = float(np.max(np.abs(y))) or 1.0     # parameters of order one (see fit_second_order)
    y = y / unit
    if trace.signal_sigma is not None:
        sigma = sigma / unit
    positive = y > 0
    early = positive & (t <= np.quantile(t, 0.5))
    if early.sum() >= 3:
        slope, intercept = np.polyfit(t[early], np.log(y[early]), 1)
    else:
        slope, intercept = -1.0 / t[-1], math.log(max(float(np.max(y)), 1e-30))
    names = ["ln_kprime", "S0"]
    p0 = [math.log(max(-slope, 0.1 / t[-1])), math.exp(intercept)]
    if baseline:
        names.append("baseline")
        p0.append(0.0)

    def model(p):
        d = dict(zip(names, p))
        return d["S0"] * np.exp(-math.exp(d["ln_kprime"]) * t) + d.get("baseline", 0.0)

    res = weighted_least_squares(model, p0, y, sigma, names=names, scaling=scaling)
    kp = math.exp(res.values[0])
    rel = float(res.standard_errors[0])
    values = res.values.copy()
    values[1:] *= unit                          # S0 and baseline in the signal's unit
    return TraceFit(trace=trace, label="k'", k=kp, k_sigma=kp * rel, k_sigma_fit=kp * rel,
                    names=tuple(names), values=values, result=res, used=used,
                    model_signal=model(res.values) * unit)


@dataclass(frozen=True)
class PseudoFirstOrderLine:
    """k' = k [B] + k_d at one condition: k [cm3 s-1], intercept k_d [s-1], both 1-sigma."""

    temperature: float
    air_density: float
    bath_gas: str
    co_reactant: np.ndarray
    k_first: np.ndarray
    k_first_sigma: np.ndarray
    k: float
    k_sigma: float
    intercept: float
    intercept_sigma: float
    result: LeastSquaresResult
    sources: tuple[str, ...]


def fit_pseudo_first_order(fits: list[TraceFit]) -> PseudoFirstOrderLine:
    """Weighted straight line through k' against [B] of traces taken at one condition."""
    B = np.array([f.trace.co_reactant for f in fits], dtype=float)
    kp = np.array([f.k for f in fits])
    sk = np.array([f.k_sigma for f in fits])
    first = fits[0].trace
    if np.unique(B).size < 2:
        raise FitError(f"traces at {first.temperature:g} K, [M] {first.air_density:.3g} cm-3 "
                       f"({', '.join(f.trace.name for f in fits)}): k' against [B] needs at least two "
                       "different co_reactant values")
    slope0, icpt0 = np.polyfit(B, kp, 1, w=1.0 / sk)
    res = weighted_least_squares(lambda p: p[0] * B + p[1], [slope0, icpt0], kp, sk,
                                 names=("k", "k_d"), scaling="if-larger")
    se = res.standard_errors
    return PseudoFirstOrderLine(temperature=float(np.mean([f.trace.temperature for f in fits])),
                                air_density=float(np.mean([f.trace.air_density for f in fits])),
                                bath_gas=first.bath_gas, co_reactant=B, k_first=kp, k_first_sigma=sk,
                                k=float(res.values[0]), k_sigma=float(se[0]), intercept=float(res.values[1]),
                                intercept_sigma=float(se[1]), result=res,
                                sources=tuple(f.trace.name for f in fits))


def condition_groups(traces: list[Trace], *, temperature_tol_K: float = 0.5,
                     density_rel_tol: float = 0.01) -> list[list[int]]:
    """Indices of traces that share T (within 0.5 K), [M] (within 1 %) and bath gas."""
    groups: list[list[int]] = []
    for i, tr in enumerate(traces):
        for g in groups:
            ref = traces[g[0]]
            if (abs(tr.temperature - ref.temperature) <= temperature_tol_K
                    and abs(tr.air_density / ref.air_density - 1.0) <= density_rel_tol
                    and tr.bath_gas == ref.bath_gas):
                g.append(i)
                break
        else:
            groups.append([i])
    return groups


def fit_traces(traces: list[Trace], *, baseline: bool = False, first_order_loss: bool = False):
    """Fit every trace; returns (trace fits, pseudo-first-order lines, rows of the k table).

    A row is a dict with temperature [K], air_density [cm-3], bath_gas, k and
    k_sigma [cm3 molecule-1 s-1], and the trace names it came from: one row per
    second-order trace, one per condition for pseudo-first-order traces.
    """
    kinds = {tr.kind for tr in traces}
    if len(kinds) > 1:
        raise FitError("the traces mix kinds (" + ", ".join(sorted(kinds)) + "); fit second-order and "
                       "pseudo-first-order traces in separate runs")
    if first_order_loss and "pseudo-first-order" in kinds:
        raise FitError("--first-order-loss applies to second-order traces (a pseudo-first-order k' "
                       "already contains every first-order loss: it is the intercept k_d)")
    fits, lines, rows = [], [], []
    if kinds == {"second-order"}:
        for tr in traces:
            f = fit_second_order(tr, baseline=baseline, first_order_loss=first_order_loss)
            fits.append(f)
            # k_sigma of a row is the trace fit's own; the cross section's share is common to all
            # rows with that cross section and goes into the table's common_uncertainty
            rows.append({"temperature": tr.temperature, "air_density": tr.air_density, "bath_gas": tr.bath_gas,
                         "k": f.k, "k_sigma": f.k_sigma_fit, "traces": tr.name})
        return fits, lines, rows
    fits = [fit_first_order_decay(tr, baseline=baseline) for tr in traces]
    for group in condition_groups(traces):
        line = fit_pseudo_first_order([fits[i] for i in group])
        lines.append(line)
        rows.append({"temperature": line.temperature, "air_density": line.air_density,
                     "bath_gas": line.bath_gas, "k": line.k, "k_sigma": line.k_sigma,
                     "traces": " ".join(line.sources)})
    return fits, lines, rows


def common_uncertainty(traces: list[Trace]) -> float:
    """Relative 1-sigma shared by every k of a table from these traces (the cross section's).

    Second-order absorbance traces share the cross section: its uncertainty
    scales every k alike, so it is a correlated (common) uncertainty of the
    table, not an independent one of each row.  Different stated values: the
    largest is used.
    """
    values = [t.cross_section_rel_sigma for t in traces
              if t.kind == "second-order" and t.signal_kind == "absorbance"]
    return max(values, default=0.0)


def rate_table_text(rows: list[dict], header_comments: list[str], common_rel_sigma: float = 0.0) -> str:
    """The k(T, [M]) rows as a rate table that :func:`boxchem.io.labdata.read_rate_table` reads."""
    out = [f"# {c}" for c in header_comments]
    if common_rel_sigma > 0:
        out.append(f"common_uncertainty = {common_rel_sigma * 100:.4g} %")
    out.append("T [K], M [cm-3], bath, k [cm3 molecule-1 s-1], k_err [cm3 molecule-1 s-1], traces")
    for r in rows:
        names = r["traces"].replace(",", " ")
        out.append(f"{r['temperature']:.6g}, {r['air_density']:.6e}, {r['bath_gas'] or '-'}, "
                   f"{r['k']:.6e}, {r['k_sigma']:.3e}, {names}")
    return "\n".join(out) + "\n"
