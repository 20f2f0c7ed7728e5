"""Key numbers of a result, and their wording: one run, one member, or across members.

:func:`summarize` reduces a run (or one member of a member file) to a plain
dict (testable); :func:`format_summary` words it.  Times are given in UTC and
in local mean solar time at the box (:func:`format_time`).
:func:`summarize_across_members` gives the median and 5-95 % range of the
same key numbers over the successful members of a member file, and
:func:`format_member_summary` words that with a table of the members.
Used by ``boxchem demo``, ``boxchem summary`` and the ``ds.boxchem`` accessor.
"""
from __future__ import annotations

import numpy as np
import xarray as xr

from .members import is_members, member_overview, successful_members, summarize_members
from .ozone_loss import accumulated_loss, daily_loss, has_total_loss
from .result import ResultError
from .solartime import box_longitude, format_time, scenario_location

__all__ = ["summarize", "format_summary", "summarize_across_members", "format_member_summary",
           "describe_conditions", "scenario_name", "ACTIVATED_FRACTION", "DEACTIVATED_FRACTION"]

#: active-chlorine fraction (Clx/Cly) that counts as "activated"; a convention
#: of this summary (common practice, no source)
ACTIVATED_FRACTION = 0.5
#: fraction below which chlorine counts as back in its reservoirs
DEACTIVATED_FRACTION = 0.1


def _day(t) -> str:
    return np.datetime_as_string(np.datetime64(t, "D"), unit="D")


def _first(times: np.ndarray, mask: np.ndarray):
    idx = np.flatnonzero(mask)
    return times[idx[0]] if idx.size else None


def _first_value(ds: xr.Dataset, name: str):
    if name in ds.variables:
        v = np.asarray(ds[name].values, dtype=float).ravel()
        v = v[np.isfinite(v)]
        return float(v[0]) if v.size else None
    value = ds.attrs.get(name)
    if value is None and name in ("latitude", "longitude"):
        value = scenario_location(ds).get(name)   # member files may not save the position series
    try:
        return None if value is None else float(value)
    except (TypeError, ValueError):
        return None


def scenario_name(ds: xr.Dataset) -> str:
    """The scenario a result ran (its file stem or shipped name), '' when unknown."""
    src = str(ds.attrs.get("scenario_source", "") or "")
    if not src:
        return ""
    from pathlib import PurePath
    return PurePath(src).stem if src.endswith(".toml") else src


def describe_conditions(ds: xr.Dataset) -> dict:
    """Where and when the box was: scenario, latitude, longitude, altitude [m], pressure [Pa], period."""
    t = ds["time"].values
    return {"scenario": scenario_name(ds),
            "latitude": _first_value(ds, "latitude"), "longitude": _first_value(ds, "longitude"),
            "altitude_m": _first_value(ds, "altitude"), "pressure_Pa": _first_value(ds, "pressure"),
            "temperature_K": _first_value(ds, "temperature"),
            "start": t[0], "end": t[-1]}


def _active_chlorine_fraction(ds) -> np.ndarray | None:
    """Clx/Cly over time [1] from the run's families, or None if it lacks them."""
    if "family" not in ds.coords or "family_number_density" not in ds.variables:
        return None
    families = [str(f) for f in ds["family"].values]
    if "Clx" not in families or "Cly" not in families:
        return None
    fam = ds["family_number_density"]
    cly = fam.sel(family="Cly").values
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(cly > 0, fam.sel(family="Clx").values / cly, np.nan)


def summarize(ds: xr.Dataset) -> dict:
    """Key numbers of a run's ozone loss, as a plain dict (mole fractions [1], percent, dates).

    Keys: ``start``, ``end``, ``latitude``, ``longitude``, ``conditions``,
    ``o3_initial``, ``o3_final``, ``o3_min``, ``o3_min_time``,
    ``loss_percent_total`` (None when the result did not save reaction
    rates), ``cycles`` (list of (name, accumulated loss [mol mol-1], share of
    total [1]) sorted by size, then the unattributed remainder when known),
    ``peak_day``, ``peak_day_loss_percent``, ``peak_day_loss_x``, ``clo_max``,
    ``clo_max_time``, ``activation_time``, ``deactivation_time``,
    ``psc_last_time``, ``final_partition`` (fractions of Cly in HCl and
    ClONO2).  Dates are None when the run does not reach them.
    """
    if is_members(ds):
        raise ResultError("summarize() takes one run; select a member (--member, "
                          "boxchem.diagnostics.members.select_member) or use summarize_across_members")
    from .result import names_or_error
    names_or_error(ds, "species", ["O3"], "species for the ozone summary")
    times = ds["time"].values
    species = [str(s) for s in ds["species"].values]
    o3 = ds["mole_fraction"].sel(species="O3").values
    with_total = has_total_loss(ds)
    acc = accumulated_loss(ds, cycles_only=not with_total)
    last = acc.isel(time=-1)
    terms = [str(t) for t in acc["term"].values if str(t) not in ("total", "unattributed")]
    total = float(last["loss_mole_fraction"].sel(term="total")) if with_total else \
        float(sum(last["loss_mole_fraction"].sel(term=t) for t in terms))
    cycles = sorted(((t, float(last["loss_mole_fraction"].sel(term=t))) for t in terms),
                    key=lambda item: item[1], reverse=True)
    share = (lambda v: v / total) if total > 0 else (lambda v: float("nan"))
    cycle_rows = [(name, value, share(value)) for name, value in cycles]
    if with_total:
        remainder = float(last["loss_mole_fraction"].sel(term="unattributed"))
        cycle_rows.append(("unattributed", remainder, share(remainder)))

    lon = box_longitude(ds)
    daily = daily_loss(ds, longitude=lon, cycles_only=not with_total)
    full_days = daily["covered_hours"].values >= 23.99
    day_total = (daily["loss_percent"].sel(term="total") if with_total else daily["loss_percent"].sum("term"))
    day_total_x = (daily["loss_mole_fraction"].sel(term="total") if with_total
                   else daily["loss_mole_fraction"].sum("term"))
    peak = None
    if full_days.any():
        peak = int(np.argmax(np.where(full_days, day_total.values, -np.inf)))

    cond = describe_conditions(ds)
    out = {
        "start": times[0], "end": times[-1], "conditions": cond,
        "latitude": cond["latitude"], "longitude": lon,
        "o3_initial": float(o3[0]), "o3_final": float(o3[-1]),
        "o3_min": float(o3.min()), "o3_min_time": times[int(np.argmin(o3))],
        "loss_percent_total": float(last["loss_percent"].sel(term="total")) if with_total else None,
        "cycle_loss_percent": float(sum(last["loss_percent"].sel(term=t) for t in terms)),
        "cycles": cycle_rows,
        "peak_day": daily["day"].values[peak] if peak is not None else None,
        "peak_day_loss_percent": float(day_total.values[peak]) if peak is not None else None,
        "peak_day_loss_x": float(day_total_x.values[peak]) if peak is not None else None,
        "day_definition": daily.attrs.get("day_definition", "UTC"),
        "clo_max": None, "clo_max_time": None,
        "activation_time": None, "deactivation_time": None, "psc_last_time": None,
        "final_partition": {},
    }
    if "ClO" in species:
        clo = ds["mole_fraction"].sel(species="ClO").values
        out["clo_max"], out["clo_max_time"] = float(clo.max()), times[int(np.argmax(clo))]
    active = _active_chlorine_fraction(ds)
    if active is not None and np.isfinite(active).any():
        out["active_fraction_max"] = float(np.nanmax(active))
        activated = active >= ACTIVATED_FRACTION
        out["activation_time"] = _first(times, activated)
        if activated.any():
            after = np.arange(times.size) > np.flatnonzero(activated)[-1]
            out["deactivation_time"] = _first(times, after & (active < DEACTIVATED_FRACTION))
        cly = ds["family_number_density"].sel(family="Cly").values[-1]
        for name in ("HCl", "ClONO2"):
            if name in species and cly > 0:
                out["final_partition"][name] = float(ds["mole_fraction"].sel(species=name).values[-1]
                                                     * ds["air_number_density"].values[-1] / cly)
    if "psc_surface_area" in ds:
        psc = ds["psc_surface_area"].values
        if (psc > 0).any():
            out["psc_last_time"] = times[np.flatnonzero(psc > 0)[-1]]
    return out


def _ppb(x: float) -> str:
    return f"{x * 1e9:.0f} ppbv" if abs(x) >= 1e-8 else f"{x * 1e9:.2f} ppbv"


def _place(cond: dict) -> str:
    parts = []
    if cond.get("latitude") is not None:
        lat = cond["latitude"]
        parts.append(f"{abs(lat):.1f} {'S' if lat < 0 else 'N'}")
    if cond.get("longitude") is not None:
        lon = cond["longitude"]
        parts.append(f"{abs(lon):.1f} {'W' if lon < 0 else 'E'}")
    if cond.get("altitude_m") is not None:
        parts.append(f"{cond['altitude_m'] / 1e3:.1f} km")
    if cond.get("pressure_Pa") is not None:
        parts.append(f"{cond['pressure_Pa'] / 100:.0f} hPa")
    return ", ".join(parts)


def format_summary(s: dict, *, scenario: str = "", wall_s: float | None = None, heading: str = "boxchem") -> str:
    """The summary of :func:`summarize` as a few lines of text (times UTC and local solar)."""
    lon = s.get("longitude")
    place = _place(s.get("conditions", {"latitude": s.get("latitude")}))
    lines = [f"{heading}: scenario {scenario}, {_day(s['start'])} to {_day(s['end'])}"
             + (f" at {place}" if place else ""),
             "Times are UTC, with local mean solar time at the box in brackets.", ""]
    lost = 100.0 * (1.0 - s["o3_final"] / s["o3_initial"])
    lines.append(f"Ozone: {s['o3_initial'] * 1e6:.2f} ppmv at the start, {s['o3_final'] * 1e6:.2f} ppmv "
                 f"at the end ({lost:.0f} % lost); minimum {s['o3_min'] * 1e6:.2f} ppmv on "
                 f"{format_time(s['o3_min_time'], lon)}.")
    if s["loss_percent_total"] is not None:
        lines.append(f"Chemical odd-oxygen loss over the run: {s['loss_percent_total']:.0f} % of the initial O3.")
    else:
        lines.append(f"Odd-oxygen loss by the listed cycles: {s['cycle_loss_percent']:.0f} % of the initial O3 "
                     "(the total and the unattributed remainder need reaction_rate, not saved in this file).")
    if s["peak_day"] is not None:
        kind = "UTC" if s.get("day_definition", "UTC") == "UTC" else "local solar"
        lines.append(f"Fastest loss on {_day(s['peak_day'])} ({kind} day): "
                     f"{s['peak_day_loss_percent']:.2f} % of the initial O3 ({_ppb(s['peak_day_loss_x'])}) in one day.")
    lines += ["", "Accumulated loss by catalytic cycle:",
              f"  {'cycle':14s} {'loss':>12s} {'share':>7s}"]
    for name, value, share in s["cycles"]:
        if name != "unattributed" and abs(share) < 0.001:
            continue
        lines.append(f"  {name:14s} {value * 1e9:8.1f} ppbv {100 * share:6.1f} %")
    lines.append("  (cycles below 0.1 % not shown; 'unattributed' is the loss no listed cycle covers)")
    lines.append("")
    if s["clo_max"] is not None:
        lines.append(f"Largest ClO: {s['clo_max'] * 1e9:.2f} ppbv on {format_time(s['clo_max_time'], lon)}.")
    if "active_fraction_max" in s:
        act = s["activation_time"]
        at_start = act is not None and act == s["start"]
        lines.append(f"Chlorine activation (Clx/Cly >= {ACTIVATED_FRACTION:.0%}): "
                     + ("already at the start" if at_start else format_time(act, lon) if act is not None else
                        f"not reached (largest Clx/Cly {s['active_fraction_max']:.0%})") + ".")
        if act is not None:
            deact = s["deactivation_time"]
            lines.append(f"Deactivation (Clx/Cly back below {DEACTIVATED_FRACTION:.0%}): "
                         + (format_time(deact, lon) if deact is not None else "not reached by the end of the run")
                         + ".")
    if s["psc_last_time"] is not None:
        lines.append(f"Last PSC surface area: {format_time(s['psc_last_time'], lon)}.")
    if s["final_partition"]:
        parts = ", ".join(f"{name} {100 * v:.0f} %" for name, v in s["final_partition"].items())
        lines.append(f"Chlorine at the end: {parts} of Cly.")
    if wall_s is not None:
        lines += ["", f"Run time: {wall_s:.1f} s."]
    return "\n".join(lines) + "\n"


# ---------------------------------------------------------------------------
# across members
# ---------------------------------------------------------------------------
def summarize_across_members(ds: xr.Dataset) -> dict:
    """Median and 5-95 % range over the successful members of the key numbers.

    Returns ``members`` (rows of :func:`member_overview`), ``n_success``,
    ``quantities``: list of (name, units, p05, median, p95) for final O3, the
    accumulated loss (total when reaction rates were saved) and each cycle.
    """
    if not is_members(ds):
        raise ResultError("summarize_across_members() needs a member file (a member dimension)")
    ok = successful_members(ds)
    rows = member_overview(ds)
    out = {"members": rows, "n_success": int(ok.sum()), "n_members": int(ok.size), "quantities": [],
           "conditions": describe_conditions(ds)}
    if not ok.any():
        return out
    from .result import names_or_error
    names_or_error(ds, "species", ["O3"], "species for the ozone summary")
    o3 = ds["mole_fraction"].sel(species="O3")
    quantities = [("O3 at the end", "ppmv", o3.isel(time=-1) * 1e6),
                  ("O3 minimum", "ppmv", o3.min("time", skipna=False) * 1e6)]
    with_total = has_total_loss(ds)
    if "cycle_rate" in ds.variables or with_total:
        acc = accumulated_loss(ds, cycles_only=not with_total)["loss_percent"].isel(time=-1)
        terms = [str(t) for t in acc["term"].values]
        if with_total:
            quantities.append(("total Ox loss", "% of initial O3", acc.sel(term="total")))
        else:
            quantities.append(("Ox loss by the listed cycles", "% of initial O3", acc.sum("term", skipna=False)))
        quantities += [(f"loss by {t}" if t != "unattributed" else "unattributed loss", "% of initial O3",
                        acc.sel(term=t)) for t in terms if t != "total"]
    for name, units, da in quantities:
        s = summarize_members(da.where(xr.DataArray(ok, dims="member")))
        out["quantities"].append((name, units, float(s["p05"]), float(s["median"]), float(s["p95"])))
    out["with_total"] = with_total
    return out


def format_member_summary(s: dict, *, source: str = "") -> str:
    """Text of :func:`summarize_across_members`: members table, then median and range."""
    cond = s["conditions"]
    place = _place(cond)
    lines = [f"Member file {source}: {s['n_members']} members, {s['n_success']} succeeded, "
             f"{_day(cond['start'])} to {_day(cond['end'])}" + (f" at {place} (first member)" if place else ""),
             "", "  member  label                      status   settings"]
    for r in s["members"]:
        lines.append(f"  {r['member']:6d}  {r['label'][:26]:26s} {r['status']:8s} {r['settings']}"
                     + (f"  ({r['message'][:60]})" if r["status"] != "success" and r["message"] else ""))
    if s["quantities"]:
        lines += ["", f"Across the {s['n_success']} successful members (median and 5-95 % range):",
                  f"  {'quantity':32s} {'median':>10s} {'5 %':>10s} {'95 %':>10s}  units"]
        for name, units, p05, med, p95 in s["quantities"]:
            lines.append(f"  {name:32s} {med:10.4g} {p05:10.4g} {p95:10.4g}  {units}")
        if not s.get("with_total", True):
            lines.append("  (total and unattributed loss need reaction_rate, which this file did not save)")
    lines.append("\nOne member in full: boxchem summary FILE --member INDEX|LABEL")
    return "\n".join(lines) + "\n"
