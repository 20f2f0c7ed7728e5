"""Chemical production and loss of species and families, reaction by reaction.

For a reaction j with rate R_j [cm-3 s-1] and net coefficient nu_ij of species
i (products minus reactants), the contribution of j to the tendency of i is
nu_ij R_j.  Reactions with nu_ij > 0 produce i, those with nu_ij < 0 destroy
it; a reaction that has i on both sides counts only with its net coefficient.

For a family F with weights w_Fi (e.g. Ox = O3 + O + O1D, Cly with weight 2 for
Cl2O2) the net coefficient of the family in reaction j is
nu_Fj = sum_i w_Fi nu_ij.  Reactions that only move members within the family
(O + O2 + M -> O3, O3 + hv -> O + O2 for Ox; ClO + ClO + M -> Cl2O2 for Cly)
have nu_Fj = 0 and appear neither as production nor as loss: family budgets
are net of internal exchange.  This is the usual definition of a family
budget (common practice, no source).

All functions are vectorised over time and reactions (one broadcast product,
no loop over reactions).
"""
from __future__ import annotations

import numpy as np
import xarray as xr

from .result import (ResultError, elapsed_seconds, family_weights, is_family, is_species,
                     require, stoichiometry)

__all__ = ["net_coefficients", "production_loss", "largest_terms", "time_mean", "BUDGET_UNITS"]

BUDGET_UNITS = "cm-3 s-1"


def net_coefficients(ds: xr.Dataset, name: str, mechanism=None) -> xr.DataArray:
    """Net coefficient (reaction,) of a species or family in every reaction [1].

    ``name`` is looked up first among the families, then among the species.
    """
    nu = stoichiometry(ds, mechanism)
    if _is_family(ds, name, mechanism):
        w = family_weights(ds, mechanism).sel(family=name)
        return (w * nu).sum("species").rename(None)
    if is_species(ds, name):
        return nu.sel(species=name, drop=True).rename(None)
    fams = [str(f) for f in ds["family"].values] if "family" in ds.coords else []
    raise ResultError(f"unknown family or species {name!r}; families: {', '.join(fams) or '(none)'}; "
                      f"species: {', '.join(str(s) for s in ds['species'].values)}")


def _is_family(ds: xr.Dataset, name: str, mechanism=None) -> bool:
    if mechanism is not None:
        return name in {f.name for f in mechanism.families}
    return is_family(ds, name)


def production_loss(ds: xr.Dataset, name: str, mechanism=None) -> xr.Dataset:
    """Production and loss of a species or family by reaction [cm-3 s-1].

    Returns a Dataset with ``production`` and ``loss`` (time, reaction), both
    >= 0, their sums ``total_production`` and ``total_loss`` (time) and the
    ``net`` chemical tendency (time) = production - loss.  The ``equation``
    coordinate of the reaction dimension is carried along when the result has
    one.
    """
    require(ds, ["reaction_rate"], "production and loss")
    nu = net_coefficients(ds, name, mechanism)
    rate = ds["reaction_rate"]
    prod = (rate * nu.clip(min=0.0)).transpose(..., "time", "reaction")
    loss = (rate * (-nu).clip(min=0.0)).transpose(..., "time", "reaction")
    kind = "family" if _is_family(ds, name, mechanism) else "species"
    unit = {"units": BUDGET_UNITS}
    out = xr.Dataset(
        {
            "production": prod.assign_attrs(unit, long_name=f"chemical production of {name} by reaction"),
            "loss": loss.assign_attrs(unit, long_name=f"chemical loss of {name} by reaction"),
            "total_production": prod.sum("reaction").assign_attrs(unit, long_name=f"total production of {name}"),
            "total_loss": loss.sum("reaction").assign_attrs(unit, long_name=f"total loss of {name}"),
            "net": (prod - loss).sum("reaction").assign_attrs(unit, long_name=f"net chemical tendency of {name}"),
            "coefficient": nu.assign_attrs(units="1", long_name=f"net coefficient of {name} in each reaction"),
        },
        attrs={"budget_of": name, "budget_kind": kind,
               "note": "family budgets are net of reactions internal to the family"},
    )
    return out


def time_mean(da: xr.DataArray) -> xr.DataArray:
    """Time-weighted mean over the run (trapezoid rule) [same units]."""
    t = elapsed_seconds(da)
    if t.size < 2 or t[-1] <= 0:
        return da.mean("time")
    axis = da.dims.index("time")
    return xr.DataArray(np.trapezoid(da.values, t, axis=axis) / t[-1],
                        dims=[d for d in da.dims if d != "time"],
                        coords={k: v for k, v in da.coords.items() if "time" not in v.dims})


def largest_terms(budget: xr.Dataset, top: int = 10, kind: str = "loss") -> list[dict]:
    """The ``top`` largest time-mean production or loss terms of a budget.

    Each entry: ``reaction``, ``equation`` (when known), ``mean`` [cm-3 s-1]
    (time-weighted over the budget's time axis) and ``fraction`` of the
    total.  Terms that are zero throughout are left out.
    """
    if kind not in ("production", "loss"):
        raise ValueError(f"kind must be 'production' or 'loss', got {kind!r}")
    mean = time_mean(budget[kind])
    total = float(mean.sum())
    order = np.argsort(-mean.values, kind="stable")
    eq = budget["equation"].values if "equation" in budget.coords else None
    rows = []
    for j in order[: max(int(top), 0)]:
        value = float(mean.values[j])
        if value <= 0.0:
            break
        rows.append({
            "reaction": str(budget["reaction"].values[j]),
            "equation": str(eq[j]) if eq is not None else "",
            "mean": value,
            "fraction": value / total if total > 0 else np.nan,
        })
    return rows
