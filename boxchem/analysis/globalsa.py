"""Global sensitivity indices through SALib: Sobol first-order/total and Morris screening.

SALib's three verbs are kept apart (docs: SALib, "Basics"): a ``problem``
(names, bounds, distributions), ``sample`` and ``analyze``.  Here the sample
becomes a member table for the ensemble engine and the metric values go
back to ``analyze``; nothing of Sobol or Morris is written by hand.

* Sobol (Sobol' 2001; estimators of Saltelli et al. 2010, Comput. Phys.
  Commun. 181, 259, as SALib implements them): the parameters are ln k_i,
  normal with mean 0 and standard deviation ln f_i(T) / f_sigma (SALib
  ``dists = "norm"``, bounds = [mean, sd]); N (2D + 2) members (D factors)
  without second-order indices.
* Morris (Morris 1991, Technometrics 33, 161; mu* of Campolongo et al. 2007):
  ln k_i uniform on +-2 sigma (Morris needs a bounded grid); r (D + 1) members;
  SALib takes elementary effects per unit of the scaled range, so mu* is the
  effect of moving ln k_i across its whole 4-sigma range.

:func:`indices` is the wrapper the model and the tests share; it takes any
vectorised ``evaluate(X) -> Y``.
"""
from __future__ import annotations

from typing import Callable, Sequence

import numpy as np
import xarray as xr

from ..errors import BoxchemError

__all__ = ["indices", "model_indices", "METHODS", "top_parameters"]

METHODS = ("sobol", "morris")


class GlobalSensitivityError(BoxchemError):
    """Bad settings for global sensitivity indices."""


def indices(method: str, names: Sequence[str], evaluate: Callable[[np.ndarray], np.ndarray], *,
            bounds: Sequence[Sequence[float]], dists: Sequence[str] | None = None,
            n: int = 256, seed: int | None = 0, levels: int = 4) -> dict:
    """Global indices of ``evaluate`` (X (n_samples, D) -> Y (n_samples,) or (n_samples, K)).

    ``method``: "sobol" (returns S1, S1_conf, ST, ST_conf, arrays (K, D)) or
    "morris" (mu_star, mu_star_conf, sigma); ``bounds``/``dists`` in SALib's
    meaning; ``n``: Sobol base sample (a power of 2) or Morris trajectories.
    Also returns the sample ``X`` and outputs ``Y``.
    """
    from SALib.analyze import morris as morris_analyze
    from SALib.analyze import sobol as sobol_analyze
    from SALib.sample import morris as morris_sample
    from SALib.sample import sobol as sobol_sample
    if method not in METHODS:
        raise GlobalSensitivityError(f"method {method!r} is not one of {', '.join(METHODS)}")
    problem = {"num_vars": len(names), "names": list(names), "bounds": [list(b) for b in bounds]}
    if dists is not None:
        problem["dists"] = list(dists)
    if method == "sobol":
        if n < 2 or n & (n - 1):
            raise GlobalSensitivityError(f"Sobol base sample n must be a power of 2; got {n}")
        X = sobol_sample.sample(problem, n, calc_second_order=False, seed=seed)
    else:
        X = morris_sample.sample(problem, n, num_levels=levels, seed=seed)
    Y = np.asarray(evaluate(X), float)
    Y2 = Y.reshape(Y.shape[0], -1)
    keys = ("S1", "S1_conf", "ST", "ST_conf") if method == "sobol" else ("mu_star", "mu_star_conf", "sigma")
    result = {k: np.empty((Y2.shape[1], len(names))) for k in keys}
    for j in range(Y2.shape[1]):      # one analysis per metric (a handful)
        if method == "sobol":
            r = sobol_analyze.analyze(problem, Y2[:, j], calc_second_order=False, seed=seed)
        else:
            r = morris_analyze.analyze(problem, X, Y2[:, j], num_levels=levels, seed=seed)
        for k in keys:
            result[k][j] = np.asarray(r[k], float)
    result.update(X=X, Y=Y2, problem=problem)
    return result


def top_parameters(local: xr.Dataset, top: int, metric: str | None = None) -> list[str]:
    """The ``top`` reaction ids of a local ranking (largest |S| of one metric)."""
    from .sensitivity import ranking
    rows = [r for r in ranking(local, metric) if r["parameter"].startswith("scale.")]
    return [r["parameter"].split(".", 1)[1] for r in rows[:top]]


def model_indices(scenario, metrics, reactions: Sequence[str], *, method: str = "sobol",
                  n: int = 64, seed: int | None = 0, f_sigma: float = 1.0,
                  temperature_K: float | None = None, **engine) -> xr.Dataset:
    """Global indices of metrics of a scenario over the given reactions, on the ensemble engine.

    The parameters are ln k of ``reactions`` (see the module docstring for
    their distributions); every other rate keeps its nominal value.
    """
    from ..diagnostics.metrics import (Metric, context_from_scenario, evaluate_metrics,
                                       parse_metrics, required_variables)
    from ..scenario import Scenario, load_scenario
    from .sampling import run_mean_temperature, uncertainty_table
    from .sensitivity import run_ensemble
    scenario = scenario if isinstance(scenario, Scenario) else load_scenario(scenario)
    parsed = metrics if metrics and isinstance(metrics[0], Metric) else parse_metrics(metrics)
    parsed = [m.check(context_from_scenario(scenario)) for m in parsed]
    T = float(temperature_K) if temperature_K is not None else run_mean_temperature(scenario)
    table = uncertainty_table(scenario.mechanism, T).select(list(reactions))
    sd = np.log(table.factor) / f_sigma
    if method == "sobol":
        bounds, dists = [[0.0, s] for s in sd], ["norm"] * len(sd)
    else:
        bounds, dists = [[-2.0 * s, 2.0 * s] for s in sd], None
    members: dict = {}

    def evaluate(X):
        import pandas as pd
        frame = pd.DataFrame(np.exp(X), columns=[f"scale.{r}" for r in table.ids])
        ds = run_ensemble(scenario, frame, variables=required_variables(parsed), **engine)
        members["file"] = ds
        y = evaluate_metrics(ds, parsed).transpose("member", "metric").values
        # SALib's estimators need every member: a failed one (NaN) takes the sample
        # median of its metric, and the count is recorded (failed_members)
        return np.where(np.isfinite(y), y, np.nanmedian(y, axis=0))

    r = indices(method, list(table.ids), evaluate, bounds=bounds, dists=dists, n=n, seed=seed)
    coords = {"metric": [m.label for m in parsed], "parameter": list(table.ids)}
    keys = ("S1", "S1_conf", "ST", "ST_conf") if method == "sobol" else ("mu_star", "mu_star_conf", "sigma")
    long = {"S1": "Sobol first-order index", "S1_conf": "95 % confidence half-width of S1",
            "ST": "Sobol total index", "ST_conf": "95 % confidence half-width of ST",
            "mu_star": "Morris mu* (mean absolute elementary effect over the whole +-2 sd range of ln k, SALib's unit-hypercube step)",
            "mu_star_conf": "95 % confidence half-width of mu*",
            "sigma": "Morris sigma (spread of the elementary effects)"}
    out = xr.Dataset({k: (("metric", "parameter"), r[k], {"units": "1", "long_name": long[k]})
                      for k in keys}, coords=coords)
    failed = int((members["file"]["member_status"].values == 2).sum()) if "file" in members else 0
    out.attrs.update(boxchem_result_kind="global sensitivity", method=method,
                     samples=int(r["X"].shape[0]), seed="none" if seed is None else int(seed),
                     temperature_K=T, f_sigma=float(f_sigma), failed_members=failed,
                     parameters_space="ln k (normal, sd ln f(T)/f_sigma)" if method == "sobol"
                     else "ln k uniform on +-2 sd")
    return out
