"""Odd-oxygen loss: total, by catalytic cycle, the unattributed remainder, in time.

Definitions used here (and in docs/diagnostics.md):

* Total loss [cm-3 s-1] comes from the family budget
  (:func:`boxchem.diagnostics.budget.production_loss`, net of reactions
  internal to the family), on one of three bases:

  - ``"recycled"`` (default): gross loss minus the production that merely
    re-forms odd oxygen, i.e. production by reactions that consume a
    variable species (NO2 + hv -> NO + O re-forms the O3 that NO + O3 -> NO2
    + O2 destroyed).  What is left is the loss balanced by primary production
    (reactions of fixed species only, O2 + hv -> O + O): equal to primary
    production minus the net tendency.  Null cycles cancel, so this is the
    total the catalytic cycles should add up to when the family is odd
    oxygen in its narrow sense (O3 + O + O1D).  Common practice, no source.
  - ``"gross"``: every loss term of the family budget (null cycles included).
  - ``"net"``: loss minus all production (the negative net tendency).
* Cycle rates are the run's ``cycle_rate`` (odd oxygen destroyed by each
  cycle of the mechanism).
* The unattributed remainder is ``L - sum(cycle rates)``.  It is reported,
  never folded into a cycle.  It holds the loss of cycles the mechanism does
  not list and, when the family leaves out the carrier radicals (e.g. Ox
  without NO2), the null cycles that destroy and re-form odd oxygen.
  By construction sum(cycles) + remainder = total loss.
* Accumulated loss is the time integral of a rate by the trapezoid rule over
  the output times [cm-3]; in mixing ratio it is the integral of L / n_air
  [mol mol-1], so that compression of the box does not count as loss; in
  percent it is the mixing-ratio loss over the initial O3 mixing ratio.
* Days are UTC days unless a longitude is given; then they are local mean
  solar days (UTC shifted by longitude / 15 h; the equation of time, at most
  about 16 min, is ignored).
"""
from __future__ import annotations

import numpy as np
import xarray as xr

from .budget import production_loss
from .result import ResultError, elapsed_seconds, names_or_error, require, stoichiometry

__all__ = ["has_total_loss", "ox_loss", "accumulate", "accumulated_loss", "daily_loss", "local_solar_time",
           "diurnal_average", "chain_length"]

SECONDS_PER_DAY = 86400.0
#: label of the remainder and of the total along the ``term`` dimension
UNATTRIBUTED, TOTAL = "unattributed", "total"


BASES = ("recycled", "gross", "net")


def consumes_variable_species(ds: xr.Dataset, mechanism=None) -> xr.DataArray:
    """True (reaction,) where a reaction consumes at least one variable (integrated) species.

    Reactions of fixed species only (O2 + hv -> O + O) are primary sources.
    Uses the mechanism when given, else the run's ``species_is_fixed``
    coordinate and ``stoichiometry``.
    """
    if mechanism is not None:
        fixed = {s.name for s in mechanism.species if s.fixed}
        by_id = {r.id: r for r in mechanism.reactions}
        flags = [any(t.species not in fixed for t in by_id[str(r)].reactants)
                 for r in ds["reaction"].values]
        return xr.DataArray(flags, dims="reaction", coords={"reaction": ds["reaction"]})
    if "species_is_fixed" not in ds.coords:
        raise ResultError("the 'recycled' loss basis needs the species_is_fixed coordinate of a run "
                          "or an explicit mechanism=; use basis='gross' or 'net' otherwise")
    nu = stoichiometry(ds)
    variable = ds["species_is_fixed"] == 0
    return ((nu < 0) & variable).any("species")


def ox_loss(ds: xr.Dataset, family: str = "Ox", mechanism=None, basis: str = "recycled") -> xr.Dataset:
    """Total odd-oxygen loss, loss by cycle and the unattributed remainder [cm-3 s-1].

    ``basis`` is one of ``"recycled"`` (default), ``"gross"``, ``"net"``; see
    the module docstring.  Returns a Dataset with ``total_loss``,
    ``total_production``, ``recycling_production`` (time), ``cycle_rate``
    (time, cycle; absent when the result has no cycles), ``cycle_sum`` and
    ``unattributed`` (time).
    """
    if basis not in BASES:
        raise ResultError(f"basis must be one of {', '.join(BASES)}; got {basis!r}")
    budget = production_loss(ds, family, mechanism)
    recycling = budget["production"].where(consumes_variable_species(ds, mechanism), 0.0).sum("reaction")
    if basis == "gross":
        total = budget["total_loss"]
    elif basis == "net":
        total = budget["total_loss"] - budget["total_production"]
    else:
        total = budget["total_loss"] - recycling
    unit = {"units": "cm-3 s-1"}
    out = xr.Dataset({
        "total_loss": total.assign_attrs(unit, long_name=f"chemical loss of {family} ({basis} basis)"),
        "total_production": budget["total_production"],
        "recycling_production": recycling.assign_attrs(
            unit, long_name=f"production of {family} by reactions that consume a variable species"),
    }, attrs={"family": family, "basis": basis})
    if "cycle_rate" in ds.variables and ds.sizes.get("cycle", 0) > 0:
        cycles = ds["cycle_rate"].transpose(..., "time", "cycle")
        out["cycle_rate"] = cycles
        out["cycle_sum"] = cycles.sum("cycle").assign_attrs(unit, long_name="sum of the cycle rates")
    else:
        out["cycle_sum"] = xr.zeros_like(total).assign_attrs(unit, long_name="sum of the cycle rates")
    out["unattributed"] = (total - out["cycle_sum"]).assign_attrs(
        unit, long_name=f"{family} loss not attributed to a cycle (total minus sum of cycles)")
    return out


def accumulate(rate: xr.DataArray) -> xr.DataArray:
    """Time integral of a rate from the first output time, trapezoid rule.

    ``rate`` has a ``time`` dimension; the result has the same shape, is 0 at
    the first time, and has the rate's units times seconds.
    """
    t = elapsed_seconds(rate)
    axis = rate.dims.index("time")
    y = np.moveaxis(np.asarray(rate.values, dtype=float), axis, 0)
    steps = 0.5 * (y[1:] + y[:-1]) * np.diff(t).reshape((-1,) + (1,) * (y.ndim - 1))
    acc = np.concatenate([np.zeros_like(y[:1]), np.cumsum(steps, axis=0)], axis=0)
    return rate.copy(data=np.moveaxis(acc, 0, axis)).assign_attrs({})


def has_total_loss(ds: xr.Dataset, mechanism=None) -> bool:
    """True when the total (and so the unattributed) loss can be computed: reaction rates were saved."""
    return "reaction_rate" in ds.variables


def _loss_terms(ds: xr.Dataset, family: str, mechanism, basis: str, cycles_only: bool = False) -> xr.DataArray:
    """Loss rates along a ``term`` dimension: every cycle, the remainder, the total.

    ``cycles_only``: just the cycles (from ``cycle_rate``; for member files saved
    without ``reaction_rate``, whose total loss is unknown).
    """
    if cycles_only:
        require(ds, ["cycle_rate"], "the loss by cycle")
        return ds["cycle_rate"].rename(cycle="term").drop_vars(
            [c for c in ds["cycle_rate"].coords if c not in ("time", "cycle", "member")]).transpose(..., "time", "term")
    ox = ox_loss(ds, family, mechanism, basis)
    parts = []
    if "cycle_rate" in ox:
        parts.append(ox["cycle_rate"].rename(cycle="term"))
    parts.append(ox["unattributed"].expand_dims(term=[UNATTRIBUTED]))
    parts.append(ox["total_loss"].expand_dims(term=[TOTAL]))
    terms = xr.concat([p.drop_vars([c for c in p.coords if c not in ("time", "term")]) for p in parts],
                      dim="term").transpose(..., "time", "term")
    return terms


def accumulated_loss(ds: xr.Dataset, family: str = "Ox", ozone: str = "O3",
                     mechanism=None, basis: str = "recycled", cycles_only: bool = False) -> xr.Dataset:
    """Accumulated odd-oxygen loss by cycle, unattributed and total.

    Returns a Dataset over (time, term), ``term`` = the cycles, then
    ``"unattributed"`` and ``"total"``, with
    ``loss_number_density`` [cm-3], ``loss_mole_fraction`` [mol mol-1] and
    ``loss_percent`` [% of the initial ``ozone`` mixing ratio].  With
    ``cycles_only`` the terms are the cycles alone (no total, no remainder).
    """
    require(ds, ["air_number_density", "mole_fraction"], "accumulated ozone loss")
    names_or_error(ds, "species", [ozone], "ozone species")
    rates = _loss_terms(ds, family, mechanism, basis, cycles_only)
    n_air = ds["air_number_density"]
    acc = accumulate(rates)
    acc_x = accumulate(rates / n_air)
    x0 = ds["mole_fraction"].sel(species=ozone, drop=True).isel(time=0, drop=True)
    bad = ~(x0 > 0) & x0.notnull()   # NaN: a failed member of a member file
    if bool(bad.any()):
        raise ResultError(f"initial {ozone} mole fraction is {float(x0.where(bad, drop=True).values.ravel()[0])}: "
                          f"percent loss is undefined")
    x0_attr = float(x0) if x0.ndim == 0 else float(x0.median())
    return xr.Dataset({
        "loss_number_density": acc.assign_attrs(units="cm-3", long_name=f"accumulated {family} loss"),
        "loss_mole_fraction": acc_x.assign_attrs(units="1", long_name=f"accumulated {family} loss as mole fraction of air"),
        "loss_percent": (100.0 * acc_x / x0).assign_attrs(units="%", long_name=f"accumulated {family} loss in percent of initial {ozone}"),
    }, attrs={"family": family, "basis": "cycles only" if cycles_only else basis,
              "initial_ozone_mole_fraction": x0_attr})


def local_solar_time(time: xr.DataArray, longitude: float | None) -> xr.DataArray:
    """UTC times shifted to local mean solar time (longitude / 15 h); UTC if None."""
    if longitude is None:
        return time
    shift = np.timedelta64(int(round(float(longitude) / 15.0 * 3600e9)), "ns")
    return time + shift


def _day_spans(time: xr.DataArray, longitude: float | None):
    """Days touched by the run and each day's span in seconds since the run start.

    A day runs from its midnight to the next (UTC, or local mean solar time),
    clipped to the run (days the run only touches at an instant are
    dropped); accumulated quantities are interpolated linearly in
    time at the boundaries (exact when midnight is an output time).
    """
    t64 = time.values.astype("datetime64[ns]")
    shift = local_solar_time(time, longitude).values.astype("datetime64[ns]") - t64
    shift = shift[0] if shift.size else np.timedelta64(0, "ns")
    local = t64 + shift
    days = np.unique(local.astype("datetime64[D]"))
    start = (days.astype("datetime64[ns]") - shift - t64[0]).astype(np.float64) * 1e-9
    t_end = float((t64[-1] - t64[0]).astype(np.float64) * 1e-9)
    lo = np.clip(start, 0.0, t_end)
    hi = np.clip(start + SECONDS_PER_DAY, 0.0, t_end)
    keep = hi > lo  # a run ending at midnight does not touch the next day
    return days[keep], lo[keep], hi[keep]


def _difference_over(values: np.ndarray, t: np.ndarray, lo: np.ndarray, hi: np.ndarray,
                     axis: int = 0) -> np.ndarray:
    """values(hi) - values(lo) along ``axis`` (time), interpolating linearly in t."""
    values = np.moveaxis(values, axis, 0)
    flat = values.reshape(values.shape[0], -1)
    out = np.empty((lo.size, flat.shape[1]))
    for k in range(flat.shape[1]):  # loop over terms (and members): a handful, not over time
        out[:, k] = np.interp(hi, t, flat[:, k]) - np.interp(lo, t, flat[:, k])
    return np.moveaxis(out.reshape((lo.size,) + values.shape[1:]), 0, axis)


def daily_loss(ds: xr.Dataset, family: str = "Ox", ozone: str = "O3", longitude: float | None = None,
               mechanism=None, basis: str = "recycled", cycles_only: bool = False) -> xr.Dataset:
    """Ozone loss per day by cycle: amount lost in each day and the day's mean rate.

    Days are UTC days, or local mean solar days when ``longitude`` [degrees
    east] is given.  The day's loss is the difference of the accumulated loss
    (trapezoid) at the day's two midnights, clipped to the run;
    ``covered_hours`` says how much of the day the run covers and the mean
    rate divides by that span.  Returns (day, term) variables
    ``loss_number_density`` [cm-3], ``loss_mole_fraction`` [1],
    ``loss_percent`` [%] and ``mean_rate`` [cm-3 s-1].
    """
    acc = accumulated_loss(ds, family, ozone, mechanism, basis, cycles_only)
    t = elapsed_seconds(ds)
    days, lo, hi = _day_spans(ds["time"], longitude)
    out = {}
    dims = tuple("day" if d == "time" else d for d in acc["loss_percent"].dims)
    axis = acc["loss_percent"].dims.index("time")
    for var in ("loss_number_density", "loss_mole_fraction", "loss_percent"):
        out[var] = (dims, _difference_over(acc[var].values, t, lo, hi, axis), acc[var].attrs)
    span = hi - lo
    nd = out["loss_number_density"][1]
    span_b = span.reshape([-1 if d == "day" else 1 for d in dims])
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_rate = np.where(span_b > 0, nd / span_b, np.nan)
    res = xr.Dataset(out, coords={"day": days.astype("datetime64[ns]"), "term": acc["term"]})
    res["mean_rate"] = (dims, mean_rate, {"units": "cm-3 s-1", "long_name": "mean loss rate over the day"})
    res["covered_hours"] = ("day", span / 3600.0, {"units": "h"})
    res.attrs.update(acc.attrs, day_definition="UTC" if longitude is None else f"local mean solar, longitude {longitude}")
    return res


def diurnal_average(da: xr.DataArray, longitude: float | None = None, bins: int = 24) -> xr.DataArray:
    """Average over all days by time of day (local mean solar time when longitude given).

    Returns ``da`` with ``time`` replaced by ``local_hour`` (bin centres [h],
    ``bins`` equal bins over 24 h); empty bins are NaN.
    """
    local = local_solar_time(da["time"], longitude).values
    hours = (local - local.astype("datetime64[D]")).astype("timedelta64[ns]").astype(np.float64) / 3.6e12
    width = 24.0 / bins
    idx = np.minimum((hours // width).astype(int), bins - 1)
    labelled = da.assign_coords(_bin=("time", idx))
    mean = labelled.groupby("_bin").mean("time")
    mean = mean.reindex(_bin=np.arange(bins))
    mean = mean.rename(_bin="local_hour").assign_coords(local_hour=(np.arange(bins) + 0.5) * width)
    mean["local_hour"].attrs.update(units="h", long_name="local mean solar time" if longitude is not None else "UTC hour")
    return mean.assign_attrs(da.attrs)


def chain_length(ds: xr.Dataset, cycle: str, carrier: str, ox_per_pass: float = 2.0,
                 mechanism=None, daily: bool = False) -> xr.DataArray:
    """Chain length of a catalytic cycle [1]: passes of the cycle per carrier lost.

    Chain length = (cycle rate / odd oxygen destroyed per pass) / (gross
    chemical loss rate of the carrier family or species), the number of
    times the cycle runs before a carrier radical leaves the active family
    (following the definition in Lary, 1997, J. Geophys. Res. 102(D17),
    21515-21526, recalled from memory).  ``ox_per_pass`` is 2 for the usual
    halogen, NOx and HOx cycles (net O3 + O -> 2 O2 or 2 O3 -> 3 O2).
    Undefined (NaN) where the carrier is not lost; with ``daily=True`` the
    ratio of UTC-day integrals is returned over a ``day`` dimension, which
    avoids the night-time 0/0.
    """
    require(ds, ["cycle_rate"], "the chain length")
    names_or_error(ds, "cycle", [cycle], "cycle")
    passes = ds["cycle_rate"].sel(cycle=cycle, drop=True) / ox_per_pass
    carrier_loss = production_loss(ds, carrier, mechanism)["total_loss"]
    if daily:
        t = elapsed_seconds(ds)
        days, lo, hi = _day_spans(ds["time"], None)
        num = _difference_over(accumulate(passes).values, t, lo, hi)
        den = _difference_over(accumulate(carrier_loss).values, t, lo, hi)
        with np.errstate(invalid="ignore", divide="ignore"):
            value = np.where(den > 0, num / den, np.nan)
        return xr.DataArray(value, dims="day", coords={"day": days.astype("datetime64[ns]")},
                            name="chain_length", attrs={"units": "1", "cycle": cycle, "carrier": carrier})
    with np.errstate(invalid="ignore", divide="ignore"):
        value = xr.where(carrier_loss > 0, passes / carrier_loss.where(carrier_loss > 0), np.nan)
    return value.rename("chain_length").assign_attrs(units="1", cycle=cycle, carrier=carrier)
