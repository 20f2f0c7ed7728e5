"""The rows of ``boxchem budget``: largest production/loss terms, loss by cycle, daily loss.

One run (or one member) gives rows with a ``section`` key; a member file is
reduced with :func:`boxchem.diagnostics.members.rows_across_members` (median
and 5-95 % range).  A result saved without ``reaction_rate`` (the default of a
member file) still gives the loss by cycle (from ``cycle_rate``); the rows
then carry a note that the total and the reaction terms need reaction_rate.
"""
from __future__ import annotations

import numpy as np
import xarray as xr

from .budget import largest_terms, production_loss, time_mean
from .ozone_loss import accumulated_loss, daily_loss, has_total_loss, ox_loss
from .result import how_to_save, is_family

__all__ = ["budget_records", "has_cycles_of"]


def has_cycles_of(ds: xr.Dataset, name: str) -> bool:
    """True when ``name`` is a family the result's cycles destroy."""
    return is_family(ds, name) and "cycle_rate" in ds.variables and \
        (("cycle_family" not in ds.coords) or name in set(ds["cycle_family"].values.tolist()))


def budget_records(ds: xr.Dataset, name: str, *, top: int, period: str, basis: str,
                   longitude: float | None = None) -> list[dict]:
    """Rows of the budget: section, period, term, equation, value, units (and fractions, percents).

    ``period``: "total", "daily" or "all"; daily periods are UTC days, or
    local mean solar days when ``longitude`` [degrees east] is given.
    """
    records: list[dict] = []
    with_rates = has_total_loss(ds)
    if not with_rates:
        records.append({"section": "note", "period": "", "term": "no reaction_rate in this result: only the loss "
                        "by cycle is shown (no production/loss terms, no total or unattributed loss)"
                        + how_to_save(ds, ["reaction_rate"])})
    if with_rates and period in ("total", "all"):
        budget = production_loss(ds, name)
        for kind in ("production", "loss"):
            for row in largest_terms(budget, top=top, kind=kind):
                records.append({"section": kind, "period": "run", "term": row["reaction"],
                                "equation": row["equation"], "value": row["mean"], "units": "cm-3 s-1",
                                "fraction": row["fraction"]})
    if not has_cycles_of(ds, name):
        return records
    if period in ("total", "all"):
        acc = accumulated_loss(ds, name, basis=basis, cycles_only=not with_rates)
        if with_rates:
            ox = ox_loss(ds, name, basis=basis)
            means = {"total": float(time_mean(ox["total_loss"])),
                     "unattributed": float(time_mean(ox["unattributed"]))}
        else:
            means = {}
        for c, v in zip(ds["cycle"].values, time_mean(ds["cycle_rate"]).values):
            means[str(c)] = float(v)
        total = means.get("total", sum(v for k, v in means.items()))
        final = acc["loss_percent"].isel(time=-1)
        order = sorted((t for t in means if t not in ("total", "unattributed")), key=lambda t: -means[t])
        for term in order[:top] + (["unattributed", "total"] if with_rates else []):
            records.append({"section": "cycle", "period": "run", "term": term, "equation": "",
                            "value": means[term], "units": "cm-3 s-1",
                            "fraction": means[term] / total if total else np.nan,
                            "accumulated_percent": float(final.sel(term=term))})
    if period in ("daily", "all"):
        daily = daily_loss(ds, name, basis=basis, longitude=longitude, cycles_only=not with_rates)
        covered = daily["covered_hours"].values
        for i, d in enumerate(daily["day"].values):
            day = str(np.datetime_as_string(d, unit="D"))
            for term in daily["term"].values:
                sel = daily.sel(day=d, term=term)
                records.append({"section": "cycle_daily", "period": day, "term": str(term), "equation": "",
                                "value": float(sel["mean_rate"]), "units": "cm-3 s-1",
                                "percent_of_initial_o3": float(sel["loss_percent"]),
                                "covered_hours": float(covered[i]),
                                "day_definition": daily.attrs.get("day_definition", "UTC")})
    return records
