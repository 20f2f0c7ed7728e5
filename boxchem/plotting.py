"""Figures of a run: mixing ratios, diurnal cycles, ozone loss by cycle, chlorine, conditions.

Design: one message per figure, a title block saying where and when the box
was (scenario, latitude/longitude, altitude and pressure, period), labelled
axes with units, the colour-blind safe palette of Okabe & Ito (2008, "Color
Universal Design", J*Fly, https://jfly.uni-koeln.de/color/), light grid, no
top/right frame.  Night is shaded where the sun is below the box's own
horizon (``environment.solar.horizon_zenith_angle`` of its altitude, 94.4
degrees at 19 km), not at 90 degrees.  Long runs show daily means and local
noon values over the band of the diurnal cycle; days not fully covered by the
run are marked (hatched) or left out (diurnal figure).  A loss below
``LOSS_FLOOR_PERCENT`` of the initial ozone over the whole run is drawn as
zero with a note, so solver noise is never autoscaled into a signal.
Figures are drawn with the Agg backend (files only).  Every ``plot_*``
function takes a run's Dataset and returns a matplotlib Figure;
:func:`plot_all` writes the standard set, :func:`plot_members` the summary
figures of a member file.  The numbers come from boxchem.diagnostics.
"""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.dates as mdates  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import xarray as xr  # noqa: E402

from .diagnostics.comparison import (DEFAULT_SPECIES, changed_reactions, largest_difference_time,  # noqa: E402
                                     rate_changes, touched_species)
from .diagnostics.members import summarize_members, successful_members  # noqa: E402
from .diagnostics.ozone_loss import accumulated_loss, daily_loss, has_total_loss, ox_loss  # noqa: E402
from .diagnostics.partitioning import chlorine_partitioning  # noqa: E402
from .diagnostics.result import ResultError, is_species  # noqa: E402
from .diagnostics.solartime import box_longitude, local_shift  # noqa: E402
from .diagnostics.summary import describe_conditions  # noqa: E402

__all__ = ["OKABE_ITO", "plot_mixing_ratios", "plot_diurnal", "plot_ozone_loss",
           "plot_chlorine_partitioning", "plot_conditions", "plot_all", "plot_members",
           "plot_comparison", "save_comparison", "DEFAULT_SPECIES", "LOSS_FLOOR_PERCENT",
           "title_block", "cycle_labels", "daily_statistics"]

#: Okabe & Ito (2008) colour-blind-safe palette (black first is kept for totals)
OKABE_ITO = {
    "black": "#000000", "orange": "#E69F00", "sky_blue": "#56B4E9", "bluish_green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish_purple": "#CC79A7",
}
#: order for categories (yellow last: weak on white)
CYCLE_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442")
OTHER_GREY = "#999999"
NIGHT_GREY = "#e6e6e6"

#: runs longer than this are shown with daily means and without night shading
LONG_RUN_DAYS = 4.0
MAX_CYCLES_SHOWN = 6
#: accumulated loss over the run below this [% of initial O3] is drawn as zero (with a note):
#: about the size of the solver's error in O3 at the default tolerances (rtol 1e-4)
LOSS_FLOOR_PERCENT = 0.01

_MIXING_UNITS = ((1e-6, "ppmv"), (1e-9, "ppbv"), (1e-12, "pptv"))
_BASIS_TEXT = {
    "recycled": "total = gross Ox loss minus the production that re-forms Ox (null cycles cancel)",
    "gross": "total = every Ox loss term (null cycles included)",
    "net": "total = loss minus all production (negative net tendency)",
    "cycles only": "listed cycles only: the file has no reaction_rate, so no total or remainder",
}


def _mixing_unit(max_value: float) -> tuple[float, str]:
    """Largest of ppmv/ppbv/pptv in which ``max_value`` [mol mol-1] is >= 1 (pptv below)."""
    for factor, name in _MIXING_UNITS:
        if max_value >= factor:
            return factor, name
    return _MIXING_UNITS[-1]


#: a panel's y range is at least this fraction of its largest |value|, so a quantity that
#: hardly changes is drawn flat instead of autoscaled into apparent structure
MIN_RELATIVE_SPAN = 0.01


def _no_noise_ylim(ax, values) -> None:
    """Widen the y range to MIN_RELATIVE_SPAN of the largest |value| and drop offset notation."""
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    ax.ticklabel_format(axis="y", useOffset=False)
    if not v.size:
        return
    top = float(np.max(np.abs(v)))
    lo, hi = float(v.min()), float(v.max())
    if top > 0 and hi - lo < MIN_RELATIVE_SPAN * top:
        mid, half = 0.5 * (lo + hi), 0.5 * MIN_RELATIVE_SPAN * top
        ax.set_ylim(mid - half, mid + half)


def _style(ax) -> None:
    ax.spines["top"].set_visible(False)
    ax.spines["right"].set_visible(False)
    ax.grid(True, color="#dddddd", linewidth=0.6)
    ax.set_axisbelow(True)


def _time_axis(ax) -> None:
    locator = mdates.AutoDateLocator(minticks=3, maxticks=8)
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator))


def _run_days(ds: xr.Dataset) -> float:
    t = ds["time"].values
    return float((t[-1] - t[0]) / np.timedelta64(1, "D")) if t.size > 1 else 0.0


# ---------------------------------------------------------------------------
# context: title block, horizon, days
# ---------------------------------------------------------------------------
def title_block(ds: xr.Dataset) -> str:
    """'polar-spring | 70.0 S 166.7 E | 19.0 km, 54 hPa | 2026-08-01 00:00 to 2026-10-15 00:00 UTC'."""
    c = describe_conditions(ds)
    parts = [c["scenario"]] if c["scenario"] else []
    if "member_label" in ds.attrs:
        parts.append(f"member {ds.attrs.get('member_index')} ({ds.attrs['member_label']})")
    if c["latitude"] is not None:
        place = f"{abs(c['latitude']):.1f} {'S' if c['latitude'] < 0 else 'N'}"
        if c["longitude"] is not None:
            place += f" {abs(c['longitude']):.1f} {'W' if c['longitude'] < 0 else 'E'}"
        parts.append(place)
    level = []
    if c["altitude_m"] is not None:
        level.append(f"{c['altitude_m'] / 1e3:.1f} km")
    if c["pressure_Pa"] is not None:
        level.append(f"{c['pressure_Pa'] / 100:.0f} hPa")
    if level:
        parts.append(", ".join(level))
    fmt = (lambda t: np.datetime_as_string(np.datetime64(t, "m"), "m").replace("T", " "))
    parts.append(f"{fmt(c['start'])} to {fmt(c['end'])} UTC")
    return "  |  ".join(parts)


def _finish(fig, ds: xr.Dataset, title: str) -> None:
    fig.suptitle(f"{title}\n{title_block(ds)}", x=0.01, ha="left", fontsize=10.5)


def _horizon(ds: xr.Dataset) -> float:
    """Solar zenith angle of the box's horizon [degree] (90 when the altitude is unknown)."""
    from .environment.solar import horizon_zenith_angle
    alt = describe_conditions(ds)["altitude_m"]
    return float(horizon_zenith_angle(alt)) if alt is not None else 90.0


def _shade_night(ax, ds: xr.Dataset) -> None:
    """Grey bands where the sun is below the box's horizon (short runs only)."""
    if "solar_zenith_angle" not in ds or _run_days(ds) > LONG_RUN_DAYS:
        return
    night = ds["solar_zenith_angle"].values >= _horizon(ds)
    t = ds["time"].values
    edges = np.flatnonzero(np.diff(np.r_[0, night.astype(int), 0]))
    for a, b in zip(edges[::2], edges[1::2]):
        ax.axvspan(t[a], t[min(b, t.size - 1)], color=NIGHT_GREY, linewidth=0, zorder=0)


def _clock_shift(ds: xr.Dataset, clock: str) -> np.timedelta64:
    return local_shift(box_longitude(ds)) if clock == "local" else np.timedelta64(0, "ns")


def daily_statistics(time: np.ndarray, values: np.ndarray, shift: np.timedelta64) -> dict:
    """Per (local) day: mean, value nearest local noon, the day's centre (UTC) and whether it is complete.

    ``values`` has time on axis 0.  A day is complete when the run's output
    covers it from midnight to midnight (one output step of slack).
    """
    local = time.astype("datetime64[ns]") + shift
    day = local.astype("datetime64[D]")
    days, start, counts = np.unique(day, return_index=True, return_counts=True)
    sums = np.add.reduceat(np.nan_to_num(values), start, axis=0)
    mean = sums / counts.reshape((-1,) + (1,) * (values.ndim - 1))
    noon_local = days.astype("datetime64[ns]") + np.timedelta64(12, "h")
    idx = np.searchsorted(local, noon_local).clip(0, time.size - 1)
    prev = (idx - 1).clip(0)
    better = np.abs(local[prev] - noon_local) < np.abs(local[idx] - noon_local)
    idx = np.where(better, prev, idx)
    step = np.median(np.diff(local)) if time.size > 1 else np.timedelta64(1, "D")
    first, last = local[start], local[start + counts - 1]
    complete = (first - days.astype("datetime64[ns]") <= step) & \
               (days.astype("datetime64[ns]") + np.timedelta64(1, "D") - last <= step)
    near_noon = np.abs(local[idx] - noon_local) <= step
    noon = np.where(near_noon.reshape((-1,) + (1,) * (values.ndim - 1)), values[idx], np.nan)
    return {"day": days, "centre": noon_local - shift, "mean": mean, "noon": noon, "complete": complete}


def cycle_labels(ds: xr.Dataset, names) -> dict[str, str]:
    """Readable cycle labels: the run's ``cycle_description`` where present, else the known labels."""
    from .diagnostics.cycles import KNOWN_CYCLE_LABELS
    own = {}
    if "cycle_description" in ds.variables:
        own = {str(c): str(d) for c, d in zip(ds["cycle"].values, ds["cycle_description"].values) if str(d)}
    return {n: own.get(n, KNOWN_CYCLE_LABELS.get(n, n)) for n in names}


# ---------------------------------------------------------------------------
# figures of one run
# ---------------------------------------------------------------------------
def _species_or_error(ds, species):
    names = [s for s in (species or DEFAULT_SPECIES) if is_species(ds, s)]
    if species:
        missing = [s for s in species if not is_species(ds, s)]
        if missing:
            raise ResultError(f"--species: unknown species {', '.join(missing)}; this result has "
                              f"{', '.join(str(s) for s in ds['species'].values)}")
    if not names:
        raise ResultError("none of the species to plot is in the result")
    return names


def _grid(n: int):
    ncol = 3 if n > 4 else 2 if n > 1 else 1
    nrow = int(np.ceil(n / ncol))
    fig, axes = plt.subplots(nrow, ncol, figsize=(3.8 * ncol, 2.5 * nrow + 1.0), sharex=True,
                             constrained_layout=True, squeeze=False)
    for ax in list(axes.flat)[n:]:
        ax.set_visible(False)
    return fig, axes


def plot_mixing_ratios(ds: xr.Dataset, species=None, log: bool = False, clock: str = "local"):
    """Mole fractions, one panel per species (or one log panel); long runs: daily mean and noon curves."""
    names = _species_or_error(ds, species)
    x = ds["mole_fraction"].sel(species=names).transpose("time", "species").values
    t = ds["time"].values
    long_run = _run_days(ds) > LONG_RUN_DAYS
    stats = daily_statistics(t, x, _clock_shift(ds, clock)) if long_run else None
    when = "local solar" if clock == "local" and box_longitude(ds) is not None else "UTC"
    if log:
        fig, ax = plt.subplots(figsize=(8.5, 5.0), constrained_layout=True)
        _shade_night(ax, ds)
        for i, s in enumerate(names):
            colour = CYCLE_COLOURS[i % len(CYCLE_COLOURS)]
            style = ("-", "--", ":")[i // len(CYCLE_COLOURS) % 3]
            if long_run:
                ax.plot(t, x[:, i], color=colour, linewidth=0.4, alpha=0.35)
                ax.plot(stats["centre"], np.where(stats["complete"], stats["mean"][:, i], np.nan), color=colour,
                        linestyle=style, linewidth=1.8, label=s)
            else:
                ax.plot(t, x[:, i], color=colour, linestyle=style, label=s, linewidth=1.6)
        ax.set_yscale("log")
        ax.set_ylabel("mole fraction [mol mol$^{-1}$]")
        ax.legend(frameon=False, ncol=min(len(names), 5), loc="upper center", bbox_to_anchor=(0.5, -0.12))
        _style(ax)
        _time_axis(ax)
        _finish(fig, ds, "Mixing ratios" + (f" (thick: daily means, {when} days; thin: every output)"
                                            if long_run else ""))
        return fig
    fig, axes = _grid(len(names))
    for k, (ax, s) in enumerate(zip(axes.flat, names)):
        v = x[:, k]
        factor, unit = _mixing_unit(np.nanmax(np.abs(v)) if np.isfinite(v).any() else 0.0)
        _shade_night(ax, ds)
        if long_run:
            ax.plot(t, v / factor, color=OKABE_ITO["sky_blue"], linewidth=0.4, alpha=0.6,
                    label="every output (diurnal band)")
            full = stats["complete"]
            mean = np.where(full, stats["mean"][:, k], np.nan) / factor
            ax.plot(stats["centre"], mean, color=OKABE_ITO["blue"], linewidth=1.8, label="daily mean")
            ax.plot(stats["centre"][~full], stats["mean"][~full, k] / factor, linestyle="none", marker="o",
                    markerfacecolor="white", markeredgecolor=OKABE_ITO["blue"], markersize=4,
                    label="mean of a partial day")
            ax.plot(stats["centre"], stats["noon"][:, k] / factor, color=OKABE_ITO["vermillion"],
                    linewidth=1.2, linestyle="--", label="local noon" if when == "local solar" else "12 UTC")
        else:
            ax.plot(t, v / factor, color=OKABE_ITO["blue"], linewidth=1.6)
        _no_noise_ylim(ax, v / factor)
        ax.set_title(s, loc="left", fontsize=11, fontweight="bold")
        ax.set_ylabel(f"[{unit}]")
        _style(ax)
        _time_axis(ax)
    if long_run:
        axes.flat[0].legend(frameon=False, fontsize=7.5, loc="best")
    _finish(fig, ds, "Mixing ratios" + (f" (daily means and noon values over the diurnal band; {when} days)"
                                        if long_run else " (grey: sun below the box's horizon)"))
    return fig


def _pick_days(days: np.ndarray, n: int = 4) -> np.ndarray:
    if days.size <= n:
        return days
    return days[np.unique(np.linspace(0, days.size - 1, n).round().astype(int))]


def plot_diurnal(ds: xr.Dataset, species=("ClO", "Cl2O2"), clock: str = "local"):
    """Diurnal cycles on a few complete days (local mean solar time or UTC); partial days left out."""
    names = [s for s in species if is_species(ds, s)]
    if not names:
        raise ResultError(f"diurnal plot needs {' or '.join(species)}, which this result lacks")
    lon = box_longitude(ds)
    local_clock = clock == "local" and lon is not None
    shift = local_shift(lon) if local_clock else np.timedelta64(0, "ns")
    t = ds["time"].values
    x = ds["mole_fraction"].sel(species=names).transpose("time", "species").values
    stats = daily_statistics(t, x, shift)
    complete = stats["day"][stats["complete"]]
    local = t + shift
    day = local.astype("datetime64[D]")
    hours = (local - day).astype("timedelta64[s]").astype(float) / 3600.0
    if complete.size:
        chosen, note = _pick_days(complete), ""
        if not stats["complete"].all():
            note = "partial first/last days left out"
    else:
        chosen, note = stats["day"][:1], "no complete day in the run: the first (partial) day is shown"
    colours = ("#56B4E9", "#009E73", "#E69F00", "#D55E00")
    fig, axes = plt.subplots(1, len(names), figsize=(4.8 * len(names), 4.2), constrained_layout=True,
                             squeeze=False)
    horizon = _horizon(ds)
    for k, (ax, s) in enumerate(zip(axes.flat, names)):
        v = x[:, k]
        factor, unit = _mixing_unit(np.nanmax(np.abs(v)) if np.isfinite(v).any() else 0.0)
        for i, d in enumerate(chosen):
            m = day == d
            ax.plot(hours[m], v[m] / factor, color=colours[i % len(colours)], linewidth=1.8, label=str(d))
            if "solar_zenith_angle" in ds and i == len(chosen) // 2:
                dark = ds["solar_zenith_angle"].values[m] >= horizon
                ax.fill_between(hours[m], 0, 1, where=dark, transform=ax.get_xaxis_transform(),
                                color=NIGHT_GREY, linewidth=0, zorder=0, step="mid")
        ax.set_xlim(0, 24)
        ax.set_xticks(range(0, 25, 6))
        ax.set_xlabel("local mean solar time [h]" if local_clock else "UTC [h]")
        ax.set_ylabel(f"{s} [{unit}]")
        ax.set_title(s, loc="left", fontweight="bold")
        _style(ax)
    handles, labels = axes.flat[0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="outside lower center", ncol=len(labels), frameon=False, fontsize=9,
               title="day" + (" (local solar)" if local_clock else " (UTC)"), title_fontsize=9)
    title = f"Diurnal cycles (grey: sun below the box's horizon, {horizon:.1f} deg, on {chosen[len(chosen) // 2]})"
    _finish(fig, ds, title + (f"; {note}" if note else ""))
    return fig


def _ranked_cycles(acc: xr.Dataset) -> list[str]:
    cycles = [str(c) for c in acc["term"].values if c not in ("unattributed", "total")]
    final = acc["loss_percent"].isel(time=-1)
    return sorted(cycles, key=lambda c: -float(final.sel(term=c)))


def plot_ozone_loss(ds: xr.Dataset, family: str = "Ox", clock: str = "local"):
    """Ozone loss rate by cycle (stacked; daily means for long runs) and accumulated loss."""
    with_total = has_total_loss(ds)
    acc = accumulated_loss(ds, family, cycles_only=not with_total)
    cycles = _ranked_cycles(acc)
    labels_of = cycle_labels(ds, cycles)
    shown, rest = cycles[:MAX_CYCLES_SHOWN], cycles[MAX_CYCLES_SHOWN:]
    ppbv_per_day = 86400.0 * 1e9
    final = acc["loss_percent"].isel(time=-1)
    run_loss = float(final.sel(term="total")) if with_total else float(final.sum("term"))
    below_floor = abs(run_loss) < LOSS_FLOOR_PERCENT
    fig, (ax1, ax2) = plt.subplots(2, 1, figsize=(11, 7.8), sharex=True, constrained_layout=True)
    long_run = _run_days(ds) > LONG_RUN_DAYS
    air = ds["air_number_density"]
    if long_run:
        lon = box_longitude(ds) if clock == "local" else None
        daily = daily_loss(ds, family, longitude=lon, cycles_only=not with_total)
        shift = local_shift(lon)
        x = daily["day"].values + np.timedelta64(12, "h") - shift
        air_stats = daily_statistics(ds["time"].values, air.values, shift)
        rate = daily["mean_rate"] / xr.DataArray(air_stats["mean"][: x.size], dims="day",
                                                 coords={"day": daily["day"]}) * ppbv_per_day
        partial = daily["covered_hours"].values < 23.99
        rate_label = "daily-mean loss rate [ppbv day$^{-1}$]"
    else:
        x = ds["time"].values
        rate = (accumulated_loss_rates(ds, family, with_total) / air * ppbv_per_day).transpose("time", "term")
        partial = np.zeros(x.size, dtype=bool)
        rate_label = "loss rate [ppbv day$^{-1}$]"
        _shade_night(ax1, ds)
        _shade_night(ax2, ds)
    zero = (lambda a: np.zeros_like(a)) if below_floor else (lambda a: a)
    stack = [zero(rate.sel(term=c).values) for c in shown]
    labels, colours = [labels_of[c] for c in shown], list(CYCLE_COLOURS[: len(shown)])
    if rest:
        stack.append(zero(rate.sel(term=rest).sum("term").values))
        labels.append(f"{len(rest)} other cycles")
        colours.append(OTHER_GREY)
    if stack:
        ax1.stackplot(x, np.clip(np.nan_to_num(np.array(stack)), 0, None), labels=labels, colors=colours,
                      alpha=0.9, step="mid" if long_run else None)
    drawstyle = "steps-mid" if long_run else "default"
    if with_total:
        ax1.plot(x, zero(rate.sel(term="total").values), color="black", linewidth=1.4, label="total loss",
                 drawstyle=drawstyle)
        ax1.plot(x, zero(rate.sel(term="unattributed").values), color="black", linewidth=1.0, linestyle="--",
                 label="unattributed (total - cycles)", drawstyle=drawstyle)
    if long_run and partial.any():
        for xi in x[partial]:
            ax1.axvspan(xi - np.timedelta64(12, "h"), xi + np.timedelta64(12, "h"), facecolor="#f2f2f2",
                        edgecolor=OTHER_GREY, hatch="////", linewidth=0, zorder=0)
        ax1.plot([], [], color=OTHER_GREY, linewidth=6, alpha=0.4, label="partial day (hatched)")
    ax1.set_ylabel(rate_label)
    _clip_start_transient(ax1, rate, with_total, below_floor)
    basis = acc.attrs["basis"]
    ax1.set_title(f"Ozone loss rate by catalytic cycle\n{_BASIS_TEXT.get(basis, basis)} ({basis} basis)",
                  loc="left", fontsize=9.5)
    ax1.legend(frameon=False, fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0))
    _style(ax1)

    t = ds["time"].values
    pct = acc["loss_percent"]
    stack2 = [zero(pct.sel(term=c).values) for c in shown]
    if rest:
        stack2.append(zero(pct.sel(term=rest).sum("term").values))
    if stack2:
        ax2.stackplot(t, np.clip(np.nan_to_num(np.array(stack2)), 0, None), colors=colours, alpha=0.9)
    if with_total:
        ax2.plot(t, zero(pct.sel(term="total").values), color="black", linewidth=1.6, label="total")
        ax2.plot(t, zero(pct.sel(term="unattributed").values), color="black", linewidth=1.0, linestyle="--",
                 label="unattributed")
        ax2.legend(frameon=False, fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0))
    ax2.set_ylabel("accumulated loss [% of initial O$_3$]")
    ax2.set_title("Accumulated ozone loss by cycle", loc="left", fontsize=9.5)
    if below_floor:
        for ax in (ax1, ax2):
            ax.set_ylim(-1, 1)
            ax.text(0.5, 0.72, f"loss over the run {run_loss:.1e} % of the initial O$_3$, below the floor of "
                    f"{LOSS_FLOOR_PERCENT} %: drawn as zero", transform=ax.transAxes, ha="center",
                    va="center", fontsize=9, color="#444444",
                    bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.9})
    _style(ax2)
    _time_axis(ax2)
    _finish(fig, ds, "Ozone loss by catalytic cycle")
    return fig


def _clip_start_transient(ax, rate: xr.DataArray, with_total: bool, below_floor: bool) -> None:
    """Keep the first output times' adjustment of the initial state from setting the y scale.

    The lower limit is the 2nd percentile of the total/remainder (not their
    minimum, which is often the first instant); a clipped value is said so.
    """
    if below_floor or not with_total:
        return
    lines = np.concatenate([rate.sel(term=t).values for t in ("total", "unattributed")])
    lines = lines[np.isfinite(lines)]
    if lines.size < 10:
        return
    bottom, lowest = min(0.0, float(np.percentile(lines, 2))), float(lines.min())
    top = ax.get_ylim()[1]
    if lowest < bottom - 0.2 * (top - bottom):
        ax.set_ylim(bottom - 0.05 * (top - bottom), top)
        ax.text(1.0, 1.01, f"off scale below: minimum {lowest:.3g}\n(at the start, as the initial state adjusts)",
                transform=ax.transAxes, ha="right", va="bottom", fontsize=7.5, color="#555555")


def accumulated_loss_rates(ds: xr.Dataset, family: str, with_total: bool) -> xr.DataArray:
    """Loss rates (time, term) [cm-3 s-1]: cycles, then unattributed and total when known."""
    if not with_total:
        return ds["cycle_rate"].rename(cycle="term")
    ox = ox_loss(ds, family)
    parts = [ox["cycle_rate"].rename(cycle="term")] if "cycle_rate" in ox else []
    parts += [ox["unattributed"].expand_dims(term=["unattributed"]), ox["total_loss"].expand_dims(term=["total"])]
    return xr.concat([p.drop_vars([c for c in p.coords if c not in ("time", "term")]) for p in parts], dim="term")


def plot_chlorine_partitioning(ds: xr.Dataset):
    """Fractions of Cly over time, stacked to 1."""
    part = chlorine_partitioning(ds)
    names = [v for v in ("HCl", "ClONO2", "HOCl", "ClOx", "Cl2", "other") if v in part]
    colours = {"HCl": "#0072B2", "ClONO2": "#56B4E9", "HOCl": "#009E73", "ClOx": "#D55E00",
               "Cl2": "#E69F00", "other": OTHER_GREY}
    labels = {"ClOx": "ClOx (Cl + ClO + 2 Cl$_2$O$_2$)", "Cl2": "2 Cl$_2$",
              "other": "other (" + (part["other"].attrs.get("members") or "none") + ")"}
    fig, ax = plt.subplots(figsize=(9, 4.6), constrained_layout=True)
    t = ds["time"].values
    ax.stackplot(t, np.nan_to_num(np.array([part[n].values for n in names])),
                 labels=[labels.get(n, n) for n in names], colors=[colours[n] for n in names], alpha=0.95)
    ax.set_ylim(0, 1)
    ax.set_ylabel("fraction of Cly [1]")
    ax.legend(frameon=False, fontsize=8, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    _style(ax)
    _time_axis(ax)
    _finish(fig, ds, "Chlorine partitioning")
    return fig


def plot_conditions(ds: xr.Dataset):
    """The box's conditions: solar zenith angle with night at its own horizon, temperature, surface area."""
    if "solar_zenith_angle" not in ds and "temperature" not in ds:
        raise ResultError("the conditions figure needs solar_zenith_angle or temperature, which this result lacks")
    areas = [(n, lab, c) for n, lab, c in (("psc_surface_area", "PSC (NAT)", OKABE_ITO["blue"]),
                                           ("ice_surface_area", "ice PSC", OKABE_ITO["sky_blue"]),
                                           ("sulfate_surface_area", "sulfate aerosol", OKABE_ITO["orange"]))
             if n in ds]
    panels = [p for p, ok in (("sza", "solar_zenith_angle" in ds), ("t", "temperature" in ds),
                              ("sad", bool(areas))) if ok]
    fig, axes = plt.subplots(len(panels), 1, figsize=(9, 2.3 * len(panels) + 1.0), sharex=True,
                             constrained_layout=True, squeeze=False)
    t = ds["time"].values
    for ax, panel in zip(axes[:, 0], panels):
        if panel == "sza":
            horizon = _horizon(ds)
            sza = ds["solar_zenith_angle"].values
            ax.fill_between(t, 0, 1, where=sza >= horizon, transform=ax.get_xaxis_transform(), color=NIGHT_GREY,
                            linewidth=0, step="mid", label="sun below the box's horizon")
            ax.plot(t, sza, color=OKABE_ITO["blue"], linewidth=0.8 if _run_days(ds) > LONG_RUN_DAYS else 1.2)
            ax.axhline(horizon, color="black", linewidth=0.8, linestyle=":")
            ax.axhline(90.0, color=OTHER_GREY, linewidth=0.6, linestyle="-.")
            ax.set_ylabel("solar zenith\nangle [degree]")
            ax.invert_yaxis()
            ax.set_title(f"grey: sun below the box's own horizon ({horizon:.1f} deg, dotted line); "
                         "dash-dot: 90 deg", loc="left", fontsize=8.5)
        elif panel == "t":
            ax.plot(t, ds["temperature"].values, color=OKABE_ITO["vermillion"], linewidth=1.4)
            _no_noise_ylim(ax, ds["temperature"].values)
            ax.set_ylabel("temperature [K]")
        else:
            for name, label, colour in areas:
                ax.plot(t, ds[name].values * 1e8, color=colour, linewidth=1.4, label=label)
            ax.set_ylabel("surface area\n[$\\mu$m$^2$ cm$^{-3}$]")
            ax.legend(frameon=False, fontsize=7.5, loc="upper left", bbox_to_anchor=(1.0, 1.0))
        _style(ax)
        _time_axis(ax)
    _finish(fig, ds, "Conditions of the box")
    return fig


_FIGURES = (
    ("mixing_ratios", lambda ds, o: plot_mixing_ratios(ds, o["species"], o["log"], o["clock"])),
    ("diurnal_clo_cl2o2", lambda ds, o: plot_diurnal(ds, clock=o["clock"])),
    ("ozone_loss", lambda ds, o: plot_ozone_loss(ds, clock=o["clock"])),
    ("chlorine_partitioning", lambda ds, o: plot_chlorine_partitioning(ds)),
    ("conditions", lambda ds, o: plot_conditions(ds)),
)


def _check_format(fmt: str) -> None:
    if fmt not in ("png", "pdf"):
        raise ResultError(f"--format must be png or pdf, got {fmt!r}")


def plot_all(ds: xr.Dataset, outdir: str | Path, species=None, log: bool = False,
             fmt: str = "png", dpi: int = 130, clock: str = "local") -> tuple[list[Path], list[str]]:
    """Write the standard figures into ``outdir``; returns (paths written, skipped with reasons).

    A figure whose data the result lacks (e.g. no ClO in the mechanism) is
    skipped with its reason; an unknown ``species`` is an error.
    """
    _check_format(fmt)
    outdir = Path(outdir)
    outdir.mkdir(parents=True, exist_ok=True)
    written, skipped = [], []
    options = {"species": species, "log": log, "clock": clock}
    for name, make in _FIGURES:
        try:
            fig = make(ds, options)
        except ResultError as exc:
            if name == "mixing_ratios" and species:
                raise
            skipped.append(f"{name}: {exc}")
            continue
        path = outdir / f"{name}.{fmt}"
        fig.savefig(path, dpi=dpi)
        plt.close(fig)
        written.append(path)
    return written, skipped


# ---------------------------------------------------------------------------
# member files
# ---------------------------------------------------------------------------
def _band(ax, t, da, colour, label):
    s = summarize_members(da)
    ax.fill_between(t, s["p05"].values, s["p95"].values, color=colour, alpha=0.25, linewidth=0)
    ax.plot(t, s["median"].values, color=colour, linewidth=1.6, label=label)


def plot_members(ds: xr.Dataset, outdir: str | Path, species=None, fmt: str = "png",
                 dpi: int = 130) -> tuple[list[Path], list[str]]:
    """Summary figures of a member file: median (line) and 5-95 % range (band) across members."""
    _check_format(fmt)
    outdir = Path(outdir)
    outdir.mkdir(parents=True, exist_ok=True)
    ok = xr.DataArray(successful_members(ds), dims="member")
    n_ok = int(ok.sum())
    if n_ok == 0:
        raise ResultError(f"{ds.attrs.get('source_file', 'the member file')}: no member succeeded; nothing to plot")
    written, skipped = [], []
    t = ds["time"].values
    names = _species_or_error(ds, species)
    fig, axes = _grid(len(names))
    for ax, s in zip(axes.flat, names):
        x = ds["mole_fraction"].sel(species=s).where(ok)
        factor, unit = _mixing_unit(float(np.nanmax(np.abs(x.values))) if np.isfinite(x.values).any() else 0.0)
        _band(ax, t, x / factor, OKABE_ITO["blue"], "median")
        ax.set_title(s, loc="left", fontsize=11, fontweight="bold")
        ax.set_ylabel(f"[{unit}]")
        _style(ax)
        _time_axis(ax)
    _finish(fig, ds, f"Mixing ratios across {n_ok} members (line: median; band: 5-95 %)")
    path = outdir / f"members_mixing_ratios.{fmt}"
    fig.savefig(path, dpi=dpi)
    plt.close(fig)
    written.append(path)
    try:
        with_total = has_total_loss(ds)
        acc = accumulated_loss(ds, cycles_only=not with_total)["loss_percent"].where(ok)
        med_final = acc.isel(time=-1).median("member")
        cycles = [str(c) for c in acc["term"].values if str(c) not in ("total", "unattributed")]
        cycles = sorted(cycles, key=lambda c: -float(med_final.sel(term=c)))[:MAX_CYCLES_SHOWN]
        labels_of = cycle_labels(ds, cycles)
        fig, ax = plt.subplots(figsize=(9, 5), constrained_layout=True)
        if with_total:
            _band(ax, t, acc.sel(term="total"), "black", "total")
        for c, colour in zip(cycles, CYCLE_COLOURS):
            _band(ax, t, acc.sel(term=c), colour, labels_of[c])
        ax.set_ylabel("accumulated loss [% of initial O$_3$]")
        ax.legend(frameon=False, fontsize=8, loc="upper left")
        basis = "recycled" if with_total else "cycles only"
        ax.set_title(_BASIS_TEXT[basis], loc="left", fontsize=9)
        _style(ax)
        _time_axis(ax)
        _finish(fig, ds, f"Accumulated ozone loss by cycle across {n_ok} members (median, 5-95 %)")
        path = outdir / f"members_ozone_loss.{fmt}"
        fig.savefig(path, dpi=dpi)
        plt.close(fig)
        written.append(path)
    except ResultError as exc:
        skipped.append(f"members_ozone_loss: {exc}")
    return written, skipped


# ---------------------------------------------------------------------------
# two runs
# ---------------------------------------------------------------------------
def plot_comparison(base: xr.Dataset, other: xr.Dataset, family: str = "Ox",
                    labels: tuple[str, str] = ("BASE", "OTHER"), top: int = 10, at=()):
    """Two runs: O3, accumulated loss by cycle, OTHER - BASE, and the reactions whose effect changed most."""
    fig = plt.figure(figsize=(12, 9.5), constrained_layout=True)
    grid = fig.add_gridspec(3, 2, width_ratios=(1.35, 1))
    ax1 = fig.add_subplot(grid[0, 0])
    ax2 = fig.add_subplot(grid[1, 0], sharex=ax1)
    ax4 = fig.add_subplot(grid[2, 0], sharex=ax1)
    ax3 = fig.add_subplot(grid[:, 1])
    styles = ({"linestyle": "-", "linewidth": 1.8}, {"linestyle": "--", "linewidth": 1.8})
    names = tuple(Path(str(x)).name for x in labels)
    for ds, style, label in zip((base, other), styles, names):
        if is_species(ds, "O3"):
            x = ds["mole_fraction"].sel(species="O3").values
            ax1.plot(ds["time"].values, x / 1e-6, color=OKABE_ITO["blue"], label=label, **style)
    ax1.set_ylabel("O$_3$ [ppmv]")
    ax1.set_title("Ozone", loc="left")
    ax1.legend(frameon=False, fontsize=8)
    _style(ax1)

    shared = np.intersect1d(base["time"].values, other["time"].values)
    cycles_only = not (has_total_loss(base) and has_total_loss(other))
    if "cycle_rate" in base and "cycle_rate" in other:
        ab = accumulated_loss(base, family, cycles_only=cycles_only)
        ao = accumulated_loss(other, family, cycles_only=cycles_only)
        shown = _ranked_cycles(ab)[:4] + ([] if cycles_only else ["total"])
        labels_of = cycle_labels(base, shown)
        for k, term in enumerate(shown):
            colour = "black" if term == "total" else CYCLE_COLOURS[k]
            for acc, ds, style in zip((ab, ao), (base, other), styles):
                if term in set(acc["term"].values.tolist()):
                    ax2.plot(ds["time"].values, acc["loss_percent"].sel(term=term).values, color=colour,
                             label=labels_of.get(term, term) if style is styles[0] else None, **style)
            if term in set(ao["term"].values.tolist()) and shared.size:
                diff = ao["loss_percent"].sel(term=term, time=shared).values - \
                    ab["loss_percent"].sel(term=term, time=shared).values
                ax4.plot(shared, diff, color=colour, linewidth=1.4,
                         label=f"{labels_of.get(term, term)} [points]")
        ax2.set_ylabel("accumulated loss\n[% of initial O$_3$]")
        ax2.set_title(f"Accumulated loss by cycle (solid {names[0]}, dashed {names[1]})", loc="left", fontsize=9)
        ax2.legend(frameon=False, fontsize=7.5)
    _style(ax2)
    if shared.size and is_species(base, "O3") and is_species(other, "O3"):
        xb = base["mole_fraction"].sel(species="O3", time=shared).values
        xo = other["mole_fraction"].sel(species="O3", time=shared).values
        with np.errstate(divide="ignore", invalid="ignore"):
            ax4.plot(shared, 100.0 * (xo - xb) / xb, color=OKABE_ITO["blue"], linewidth=2.0, linestyle=":",
                     label="O$_3$ [%]")
        when = largest_difference_time(base, other, "O3")
        marks = ([(when, "largest |$\\Delta$O$_3$|")] if when is not None else []) + \
            [(np.datetime64(a.rstrip("Z"), "ns"), a) for a in at]
        for m, text in marks:
            for ax in (ax1, ax2, ax4):
                ax.axvline(m, color=OTHER_GREY, linewidth=0.8, linestyle="--")
            ax4.annotate(text, (m, 1.0), xycoords=("data", "axes fraction"), fontsize=7, rotation=90,
                         va="top", ha="right", color="#555555")
    ax4.axhline(0, color="black", linewidth=0.6)
    ax4.set_ylabel(f"{names[1]} - {names[0]}")
    ax4.set_title("OTHER - BASE: O$_3$ in % of BASE, accumulated loss in % points", loc="left", fontsize=9)
    ax4.legend(frameon=False, fontsize=7.5, ncol=2)
    _style(ax4)
    _time_axis(ax4)
    for ax in (ax1, ax2):
        ax.tick_params(labelbottom=False)
        ax.xaxis.get_offset_text().set_visible(False)

    changed = changed_reactions(base, other)
    all_rows = rate_changes(base, other, top, family, touched_species(base, changed))
    rows = [r for r in all_rows if r["section"] == "reaction_rate"]
    missing = [r["term"].split(":")[0] for r in all_rows if r["section"] == "note"]
    bar_names = [f"{r['term']} ({r['budget']})" for r in rows][::-1]
    effect = np.array([r["effect_percent"] for r in rows][::-1]) if rows else np.array([])
    colours = [OKABE_ITO["vermillion"] if c > 0 else OKABE_ITO["blue"] for c in effect]
    ax3.barh(bar_names, effect, color=colours, height=0.6)
    ax3.set_ylim(-0.5, max(len(bar_names), 8) - 0.5)
    ax3.axvline(0, color="black", linewidth=0.8)
    ax3.set_xlabel("change of the net contribution to the budget ()\n[% of its turnover in BASE]")
    ax3.set_title("Largest changes of net effect (reverse pairs netted)\nchanged in the files: "
                  + (", ".join(dict.fromkeys(c["term"] for c in changed)) or "none"), loc="left", fontsize=9)
    ax3.tick_params(axis="y", labelsize=8)
    _style(ax3)
    if not rows:
        ax3.text(0.5, 0.5, (f"{missing[0]}:\nno rate table" if missing else "no reaction's effect changed"),
                 transform=ax3.transAxes, ha="center", va="center", fontsize=9)
        ax3.set_xticks([])
        ax3.set_yticks([])
    _finish(fig, base, f"{names[1]} against {names[0]}")
    return fig


def save_comparison(base: xr.Dataset, other: xr.Dataset, path: str | Path, family: str = "Ox",
                    labels: tuple[str, str] = ("BASE", "OTHER"), dpi: int = 130, at=()) -> Path:
    """Write :func:`plot_comparison` to ``path`` (.png or .pdf)."""
    path = Path(path)
    if path.suffix.lower() not in (".png", ".pdf"):
        raise ResultError(f"--plot {path}: the file name must end in .png or .pdf")
    path.parent.mkdir(parents=True, exist_ok=True)
    fig = plot_comparison(base, other, family, labels, at=at)
    fig.savefig(path, dpi=dpi)
    plt.close(fig)
    return path
