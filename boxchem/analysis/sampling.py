"""Evaluated uncertainties of rate parameters and the member tables made from them.

Uncertainty factors follow the convention of the evaluated kinetic data
tables (NASA/JPL Evaluation 19-5, Burkholder et al. 2019, section "Uncertainty
estimates"; recalled from memory):

    f(T) = f(298 K) * exp(| g (1/T - 1/298) |)

and k lies within k/f .. k*f at the stated confidence.  JPL describes f as
approximately one standard deviation of ln k (a lognormal reading), which is
the default here: ln k_i ~ Normal(ln k_i, (ln f_i(T) / F_SIGMA)^2) with
``f_sigma`` = 1; give ``f_sigma=2`` to read f as a two-sigma (95 %) bound.

For photolysis lines f298 is the factor on J, for surface lines the factor on
gamma (g = 0 unless given).  A reaction without f298 gets the documented
default of its kind (:data:`DEFAULT_F298`); :func:`uncertainty_table` lists
which reactions took a default.  The shipped mechanism gives f298 on every
thermal and photolysis line; its surface lines take the surface default.

Member tables (DESIGN.md, "Many runs: one engine") are pandas DataFrames with
``scale.<reaction id>`` columns (factor on k, J or gamma) and
``initial.<species>`` columns [mol mol-1].
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import BoxchemError

__all__ = ["uncertainty_factor", "UncertaintyTable", "uncertainty_table", "DEFAULT_F298",
           "REFERENCE_TEMPERATURE_K", "standard_normal_sample", "monte_carlo_table",
           "finite_difference_table", "run_mean_temperature", "SAMPLING_METHODS",
           "parameter_kind", "SamplingError"]

REFERENCE_TEMPERATURE_K = 298.0

#: f298 for reactions whose line gives none (chosen here; common practice, no source:
#: a factor 2 on gamma reflects the spread of laboratory uptake coefficients on PSC
#: surfaces; 1.3 on J and 1.5 on thermal k are mid-range values of the evaluations'
#: f298 for less well studied reactions)
DEFAULT_F298 = {"thermal": 1.5, "photolysis": 1.3, "surface": 2.0}
SAMPLING_METHODS = ("lhs", "random")


class SamplingError(BoxchemError):
    """Bad settings for a sample or a difference stencil."""


def uncertainty_factor(f298, g, temperature_K):
    """Uncertainty factor f(T) [1] = f298 exp(|g (1/T - 1/298)|), g [K], T [K].

    The convention of the NASA/JPL evaluations (Burkholder et al. 2019, JPL
    Publication 19-5, section on uncertainty estimates; recalled from memory).
    Broadcasts over arrays.
    """
    f298 = np.asarray(f298, float)
    g = np.asarray(g, float)
    T = np.asarray(temperature_K, float)
    return f298 * np.exp(np.abs(g * (1.0 / T - 1.0 / REFERENCE_TEMPERATURE_K)))


def parameter_kind(reaction) -> str:
    """'photolysis', 'surface' or 'thermal' for a mechanism reaction."""
    if reaction.law == "photolysis":
        return "photolysis"
    from ..mechanism.model import SURFACE_LAWS
    if reaction.law in SURFACE_LAWS:
        return "surface"
    return "thermal"


@dataclass(frozen=True)
class UncertaintyTable:
    """Per-reaction uncertainty (mechanism order): ``ids``, ``kind``, ``f298``, ``g`` [K],
    ``factor`` f(T) at ``temperature_K``, ``source`` ("mechanism" or "default")."""

    ids: tuple[str, ...]
    kind: tuple[str, ...]
    f298: np.ndarray
    g: np.ndarray
    factor: np.ndarray
    source: tuple[str, ...]
    temperature_K: float

    @property
    def defaulted(self) -> list[str]:
        """Reactions that took the default of their kind (no f298 in the mechanism)."""
        return [r for r, s in zip(self.ids, self.source) if s == "default"]

    def select(self, ids) -> "UncertaintyTable":
        index = {r: i for i, r in enumerate(self.ids)}
        take = [index[r] for r in ids]
        return UncertaintyTable(tuple(self.ids[i] for i in take), tuple(self.kind[i] for i in take),
                                self.f298[take], self.g[take], self.factor[take],
                                tuple(self.source[i] for i in take), self.temperature_K)


def uncertainty_table(mechanism, temperature_K: float, *, defaults=None) -> UncertaintyTable:
    """f298, g and f(T) of every reaction of ``mechanism`` at ``temperature_K`` [K]."""
    defaults = {**DEFAULT_F298, **(defaults or {})}
    ids, kinds, f298, g, source = [], [], [], [], []
    for r in mechanism.reactions:
        kind = parameter_kind(r)
        ids.append(r.id)
        kinds.append(kind)
        if r.f298 is None:
            f298.append(defaults[kind])
            g.append(0.0)
            source.append("default")
        else:
            f298.append(float(r.f298))
            g.append(float(r.g or 0.0))
            source.append("mechanism")
    f298a, ga = np.array(f298), np.array(g)
    return UncertaintyTable(tuple(ids), tuple(kinds), f298a, ga,
                            uncertainty_factor(f298a, ga, temperature_K), tuple(source),
                            float(temperature_K))


def run_mean_temperature(scenario) -> float:
    """Time mean of the scenario's temperature over its output times [K]."""
    from ..runner import build_environment
    times = scenario.output_times_s()
    return float(np.mean(np.asarray(build_environment(scenario).at(times).temperature, float)))


def standard_normal_sample(n_members: int, n_parameters: int, *, seed: int | None,
                           method: str = "lhs") -> np.ndarray:
    """z (n_members, n_parameters), independent standard normal.

    ``method``: ``"random"`` (plain Monte Carlo, numpy PCG64 seeded by
    ``seed``) or ``"lhs"`` (Latin hypercube: one point in each of n_members
    equal-probability strata per parameter, McKay, Beckman & Conover 1979,
    Technometrics 21, 239; scipy.stats.qmc.LatinHypercube, mapped through the
    normal quantile function).  The same seed gives the same sample.
    """
    if method not in SAMPLING_METHODS:
        raise SamplingError(f"sampling method {method!r} is not one of {', '.join(SAMPLING_METHODS)}")
    if n_members < 2:
        raise SamplingError(f"a Monte Carlo sample needs at least 2 members; got {n_members}")
    from scipy import stats
    if method == "random":
        return np.random.default_rng(seed).standard_normal((n_members, n_parameters))
    u = stats.qmc.LatinHypercube(d=n_parameters, seed=np.random.default_rng(seed)).random(n_members)
    return stats.norm.ppf(u)


def monte_carlo_table(table: UncertaintyTable, z: np.ndarray, *, f_sigma: float = 1.0):
    """Member table: ``scale.<id>`` = f_i(T)^(z_mi / f_sigma) for each member m.

    ``f_sigma``: how many standard deviations of ln k the factor f spans (1:
    f is a one-sigma factor, the JPL reading; 2: f is a 95 % bound).
    """
    import pandas as pd
    if not f_sigma > 0:
        raise SamplingError(f"f_sigma must be > 0 (standard deviations spanned by f); got {f_sigma}")
    log_multiplier = z * (np.log(table.factor) / f_sigma)[None, :]
    return pd.DataFrame(np.exp(log_multiplier), columns=[f"scale.{r}" for r in table.ids])


def finite_difference_table(parameters, *, step: float, scheme: str = "central",
                            initial: dict | None = None):
    """Stencil for d ln(metric)/d ln(p): the nominal member, then +h (and -h) per parameter.

    ``parameters``: column names (``scale.<id>`` or ``initial.<species>``);
    ``step`` h: change of ln p (p * exp(+-h)); ``initial``: nominal initial
    mole fractions [mol mol-1] of the ``initial.*`` parameters.  Returns
    (DataFrame, labels, plan) where plan maps each parameter to its member
    rows ``(plus, minus)`` (minus is the nominal row 0 for ``"forward"``).
    """
    import pandas as pd
    if scheme not in ("central", "forward"):
        raise SamplingError(f"difference scheme {scheme!r} is not 'central' or 'forward'")
    if not (0 < step < 1):
        raise SamplingError(f"finite-difference step must be in (0, 1) (a change of ln k); got {step}")
    initial = initial or {}
    signs = (1.0, -1.0) if scheme == "central" else (1.0,)
    rows, labels, plan = [np.zeros(len(parameters))], ["nominal"], {}
    for j, p in enumerate(parameters):
        members = []
        for s in signs:
            row = np.zeros(len(parameters))
            row[j] = s * step
            rows.append(row)
            labels.append(f"{p}{'+' if s > 0 else '-'}")
            members.append(len(rows) - 1)
        plan[p] = (members[0], members[1] if scheme == "central" else 0)
    log_change = np.array(rows)
    columns = {}
    for j, p in enumerate(parameters):
        if p.startswith("initial."):
            columns[p] = float(initial[p]) * np.exp(log_change[:, j])
        else:
            columns[p] = np.exp(log_change[:, j])
    return pd.DataFrame(columns), labels, plan
