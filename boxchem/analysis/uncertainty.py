"""Monte Carlo uncertainty of metrics from the evaluated rate uncertainties.

Member m multiplies k_i (thermal k, J or surface gamma) by
f_i(T)^(z_mi / f_sigma), z_mi standard normal (plain or Latin-hypercube,
seeded; :mod:`boxchem.analysis.sampling`).  The factor follows the run's
temperature in this sense: f_i is evaluated at ONE temperature per run, the
time mean of the scenario's temperature (or a temperature the caller gives);
a multiplier that changes along T(t) is not offered, because the engine
applies each member's multiplier as one offset ln f on the k(t) table.
Member 0 is the nominal run (z = 0, label "nominal"); the statistics use
members 1..M that succeeded (failed members are counted and left out).

Results (:func:`summarize`): each metric's nominal value, median, 5 % and
95 % quantiles and the spread of ln(metric) (standard deviation, and half
the 16-84 % range); bands (5/50/95 %) of chosen species and of the
accumulated loss by cycle over time; and contributions to the variance as
squared standardised rank regression coefficients (SRRC^2) with the R^2 of
the rank regression (Saltelli et al. 2004, "Sensitivity Analysis in
Practice", Wiley, ch. on regression methods; recalled from memory).
"""
from __future__ import annotations

import time as _time
from typing import Sequence

import numpy as np
import xarray as xr

from ..diagnostics.metrics import (Metric, context_from_scenario, evaluate_metrics,
                                   parse_metrics, required_variables)
from ..errors import BoxchemError
from .sampling import (monte_carlo_table, run_mean_temperature, standard_normal_sample,
                       uncertainty_table)
from .sensitivity import run_ensemble

__all__ = ["monte_carlo", "summarize", "rank_regression", "bands", "change_against_uncertainty",
           "QUANTILES", "UncertaintyError"]

QUANTILES = (0.05, 0.5, 0.95)
#: predictors kept for the rank regression, at most this many and at most members / 5,
#: chosen by |Spearman correlation| (a regression on more predictors than the sample
#: supports over-fits; common practice, no source)
MAX_REGRESSORS = 30
SIGNIFICANT_RHO = 2.0


class UncertaintyError(BoxchemError):
    """Settings or inputs of an uncertainty analysis that cannot be used."""


def monte_carlo(scenario, metrics, *, members: int = 200, seed: int | None = 0,
                sampling: str = "lhs", f_sigma: float = 1.0, temperature_K: float | None = None,
                reactions="all", defaults=None, species: Sequence[str] | None = None,
                **engine) -> xr.Dataset:
    """Run a Monte Carlo sample on the ensemble engine and summarise it.

    Returns the member file (dimension ``member``, member 0 nominal) with the
    analysis added: ``metric_value`` (member, metric), ``z`` (member,
    parameter), the per-parameter ``f298``, ``g``, ``uncertainty_factor``
    (at ``temperature_K``, default the run's mean temperature) and the
    results of :func:`summarize`.
    """
    from ..scenario import Scenario, load_scenario
    scenario = scenario if isinstance(scenario, Scenario) else load_scenario(scenario)
    parsed = metrics if metrics and isinstance(metrics[0], Metric) else parse_metrics(metrics)
    context = context_from_scenario(scenario)
    parsed = [m.check(context) for m in parsed]
    from ..diagnostics.metrics import check_name
    species = ([s for s in ("O3",) if s in context.species] if species is None else
               [check_name(s, context.species, "species", "bands", context) for s in species])
    T = float(temperature_K) if temperature_K is not None else run_mean_temperature(scenario)
    table = uncertainty_table(scenario.mechanism, T, defaults=defaults)
    if reactions != "all":
        table = table.select(list(reactions))
    z = np.vstack([np.zeros((1, len(table.ids))),
                   standard_normal_sample(members, len(table.ids), seed=seed, method=sampling)])
    frame = monte_carlo_table(table, z, f_sigma=f_sigma)
    frame["member_label"] = ["nominal"] + [f"sample {i}" for i in range(1, members + 1)]
    wall0 = _time.perf_counter()
    ds = run_ensemble(scenario, frame, variables=required_variables(parsed), **engine)
    wall = _time.perf_counter() - wall0
    ds = ds.assign_coords(parameter=list(table.ids))
    ds["z"] = (("member", "parameter"), z, {"units": "1", "long_name": "standard normal deviate "
               "of each parameter: ln multiplier = z ln f(T) / f_sigma"})
    ds["f298"] = ("parameter", table.f298, {"units": "1", "long_name": "uncertainty factor at 298 K"})
    ds["g"] = ("parameter", table.g, {"units": "K", "long_name": "temperature coefficient of the "
                                      "uncertainty factor"})
    ds["uncertainty_factor"] = ("parameter", table.factor, {
        "units": "1", "long_name": f"uncertainty factor f(T) at T = {T:.2f} K"})
    ds["uncertainty_source"] = ("parameter", np.array(table.source, dtype=object), {
        "long_name": "where f298 came from: mechanism, or default (see defaulted_reactions)"})
    ds.attrs.update({
        "boxchem_analysis": "monte carlo uncertainty",
        "mc_members": members, "mc_seed": "none" if seed is None else int(seed),
        "mc_sampling": sampling, "mc_f_sigma": float(f_sigma),
        "mc_temperature_K": T,
        "mc_temperature_rule": ("given" if temperature_K is not None else
                                "time mean of the scenario temperature over the output times"),
        "mc_factor_convention": "f(T) = f298 exp(|g (1/T - 1/298)|); ln k ~ N(ln k, (ln f / f_sigma)^2)",
        "mc_defaulted_reactions": ", ".join(table.defaulted) or "(none)",
        "mc_wall_time_s": wall,
    })
    summary = summarize(ds, parsed, species=species)
    out = xr.merge([ds, summary], combine_attrs="override")
    out.attrs.update(summary.attrs)
    for var in out.variables.values():
        var.encoding = {}          # the member file's on-disk layout does not carry over
    return out


def _statistics_members(ds: xr.Dataset) -> np.ndarray:
    status = ds["member_status"].values if "member_status" in ds else np.ones(ds.sizes["member"])
    labels = ds["member_label"].values if "member_label" in ds.coords else None
    use = status == 1
    if labels is not None:
        use &= np.array([str(s) != "nominal" for s in labels])
    else:
        use[0] = False
    return use


def rank_regression(x: np.ndarray, y: np.ndarray, names: Sequence[str]):
    """Squared standardised rank regression coefficients and R^2 of the rank regression.

    ``x`` (n, p) inputs, ``y`` (n,) output.  Predictors are pre-selected by
    |Spearman correlation| (at most MAX_REGRESSORS and n/5, and only where
    |rho| > 2/sqrt(n)); the others get NaN.
    Returns (srrc2 (p,), r2).
    """
    from scipy import stats
    n, p = x.shape
    srrc2 = np.full(p, np.nan)
    if n < 10 or not np.isfinite(y).all() or np.ptp(y) == 0:
        return srrc2, np.nan
    ry = stats.rankdata(y)
    rx = np.apply_along_axis(stats.rankdata, 0, x)       # one call over all columns
    ry = (ry - ry.mean()) / ry.std()
    sx = rx.std(axis=0)
    varying = sx > 0
    rxs = np.zeros_like(rx)
    rxs[:, varying] = (rx[:, varying] - rx[:, varying].mean(axis=0)) / sx[varying]
    spearman = np.abs(rxs.T @ ry) / n
    keep = min(MAX_REGRESSORS, max(1, n // 5), int(varying.sum()))
    chosen = np.argsort(-spearman)[:keep]
    # only correlations distinguishable from sampling noise (|rho| > 2/sqrt(n), about the
    # 5 % two-sided level for independent ranks; common practice, no source)
    chosen = chosen[spearman[chosen] > SIGNIFICANT_RHO / np.sqrt(n)]
    if chosen.size == 0:
        return srrc2, 0.0
    beta, *_ = np.linalg.lstsq(rxs[:, chosen], ry, rcond=None)
    fitted = rxs[:, chosen] @ beta
    r2 = 1.0 - np.sum((ry - fitted) ** 2) / np.sum(ry ** 2)
    srrc2[chosen] = beta ** 2
    return srrc2, float(r2)


def bands(ds: xr.Dataset, series: xr.DataArray, use: np.ndarray) -> np.ndarray:
    """Quantiles QUANTILES over the members ``use`` of a (member, ..., time) series."""
    values = series.values[use]
    return np.nanquantile(values, QUANTILES, axis=0)


def summarize(ds: xr.Dataset, metrics: Sequence[Metric], *, species: Sequence[str] = ("O3",)) -> xr.Dataset:
    """Statistics of a Monte Carlo member file (see the module docstring)."""
    use = _statistics_members(ds)
    n_used = int(use.sum())
    if n_used < 2:
        raise UncertaintyError(f"only {n_used} successful sample member(s) in the Monte Carlo "
                               f"file: no statistics (member_message says why members failed)")
    values = evaluate_metrics(ds, metrics).transpose("member", "metric")
    v = values.values
    sample = v[use]
    with np.errstate(divide="ignore", invalid="ignore"):
        logs = np.log(np.where(sample > 0, sample, np.nan))
    q = np.nanquantile(sample, QUANTILES, axis=0)
    q16, q84 = np.nanquantile(logs, [0.158655, 0.841345], axis=0)
    out = xr.Dataset(coords={"metric": values["metric"].values,
                             "metric_definition": ("metric", values["metric_definition"].values),
                             "metric_units": ("metric", values["metric_units"].values),
                             "quantile": list(QUANTILES)})
    out["metric_value"] = (("member", "metric"), v, {"long_name": "value of each metric in each member"})
    out["metric_nominal"] = ("metric", v[0], {"long_name": "metric in the nominal run (member 0)"})
    out["metric_quantile"] = (("quantile", "metric"), q, {"long_name": "quantiles of each metric "
                                                          "over the successful sample members"})
    out["metric_log_std"] = ("metric", np.nanstd(logs, axis=0, ddof=1), {
        "units": "1", "long_name": "standard deviation of ln(metric) over the sample"})
    out["metric_log_halfwidth"] = ("metric", 0.5 * (q84 - q16), {
        "units": "1", "long_name": "half the 15.9-84.1 % range of ln(metric) (a robust 1-sigma)"})
    if "z" in ds:
        x = ds["z"].values[use]
        names = [str(p) for p in ds["parameter"].values]
        s2, r2 = zip(*(rank_regression(x, sample[:, j], names) for j in range(len(metrics))))
        out["contribution"] = (("metric", "parameter"), np.array(s2), {
            "units": "1", "long_name": "squared standardised rank regression coefficient (SRRC^2) "
            "of each parameter; NaN where not among the regressors"})
        out["contribution_r2"] = ("metric", np.array(r2), {
            "units": "1", "long_name": "R^2 of the rank regression (share of the rank variance "
            "the regression explains)"})
    for s in species:
        if s in [str(x) for x in ds["species"].values]:
            x = ds["mole_fraction"].sel(species=s).transpose("member", "time")
            out[f"band_{s}"] = (("quantile", "time"), bands(ds, x, use), {
                "units": "1", "long_name": f"quantiles of the {s} mole fraction over the sample"})
    if "cycle_rate" in ds and "air_number_density" in ds and ds.sizes.get("cycle", 0):
        rate = (ds["cycle_rate"] / ds["air_number_density"]).transpose("member", "cycle", "time")
        t = ds["time"].values.astype("datetime64[ns]")
        sec = (t - t[0]).astype(np.float64) * 1e-9
        steps = 0.5 * (rate.values[..., 1:] + rate.values[..., :-1]) * np.diff(sec)
        acc = np.concatenate([np.zeros_like(rate.values[..., :1]), np.cumsum(steps, axis=-1)], axis=-1)
        out["band_cycle_loss"] = (("quantile", "cycle", "time"), np.nanquantile(acc[use], QUANTILES, axis=0), {
            "units": "mol mol-1", "long_name": "quantiles of the accumulated loss by cycle over the sample"})
    out.attrs.update(mc_members_used=n_used,
                     mc_members_failed=int((ds["member_status"].values == 2).sum())
                     if "member_status" in ds else 0)
    return out


def change_against_uncertainty(baseline: xr.Dataset, changed: xr.Dataset,
                               metrics: Sequence[Metric] | None = None) -> list[dict]:
    """Each metric's change (changed run vs the baseline's nominal member) beside the
    baseline's Monte Carlo 1-sigma spread.

    ``baseline``: a Monte Carlo file of :func:`monte_carlo`; ``changed``: a
    run or one-member file of the changed mechanism or scenario.  Returns one
    row per metric: ``metric``, ``baseline``, ``changed``, ``change_percent``
    (100 (changed/baseline - 1)), ``spread_percent`` (100 (exp(sigma) - 1),
    sigma = std of ln metric), ``ratio`` (|ln change| / sigma) and ``verdict``.
    """
    if "metric_nominal" not in baseline:
        raise UncertaintyError("the baseline is not a Monte Carlo result (no metric_nominal); "
                               "make one with 'boxchem uncertainty SCENARIO -o mc.nc'")
    if metrics is None:
        metrics = parse_metrics([str(d) for d in baseline["metric_definition"].values])
        metrics = [m.__class__(**{**m.__dict__, "label": str(lab)})
                   for m, lab in zip(metrics, baseline["metric"].values)]
    new = evaluate_metrics(changed, metrics)
    if "member" in new.dims:
        new = new.isel(member=0)
    rows = []
    for m in metrics:
        base = float(baseline["metric_nominal"].sel(metric=m.label))
        sigma = float(baseline["metric_log_std"].sel(metric=m.label))
        value = float(new.sel(metric=m.label))
        ln_change = np.log(value / base) if value > 0 and base > 0 else np.nan
        ratio = abs(ln_change) / sigma if sigma > 0 else np.inf
        verdict = ("larger than the 1-sigma spread" if ratio > 1 else
                   "within the 1-sigma spread")
        rows.append({"metric": m.label, "baseline": base, "changed": value,
                     "change_percent": 100.0 * (value / base - 1.0),
                     "spread_percent": 100.0 * (np.exp(sigma) - 1.0), "ratio": ratio,
                     "verdict": verdict})
    return rows
