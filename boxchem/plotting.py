"""Figures of a run: mixing ratios, diurnal cycles, ozone loss by cycle, chlorine, sun.

Design: one message per figure, labelled axes with units, the colour-blind
safe palette of Okabe & Ito (2008, "Color Universal Design", J*Fly,
https://jfly.uni-koeln.de/color/), light grid, no top/right frame.  Figures
are drawn with the Agg backend (files only, no display needed).  Every
``plot_*`` function takes a run's Dataset and returns a matplotlib Figure;
:func:`plot_all` writes the standard set to a directory.
"""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.dates as mdates  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import xarray as xr  # noqa: E402

from .diagnostics.ozone_loss import accumulated_loss, daily_loss, local_solar_time, ox_loss  # noqa: E402
from .diagnostics.partitioning import chlorine_partitioning  # noqa: E402
from .diagnostics.result import ResultError, is_species  # noqa: E402

__all__ = ["OKABE_ITO", "plot_mixing_ratios", "plot_diurnal", "plot_ozone_loss",
           "plot_chlorine_partitioning", "plot_solar_zenith", "plot_all", "plot_comparison",
           "save_comparison", "DEFAULT_SPECIES"]

#: Okabe & Ito (2008) colour-blind-safe palette (black first is kept for totals)
OKABE_ITO = {
    "black": "#000000", "orange": "#E69F00", "sky_blue": "#56B4E9", "bluish_green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish_purple": "#CC79A7",
}
#: order for categories (yellow last: weak on white)
CYCLE_COLOURS = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442")
OTHER_GREY = "#999999"
NIGHT_GREY = "#e6e6e6"

DEFAULT_SPECIES = ("O3", "ClO", "Cl2O2", "HCl", "ClONO2", "HOCl", "BrO", "NO2", "HNO3")
#: runs longer than this are shown with daily means and without night shading
LONG_RUN_DAYS = 4.0
MAX_CYCLES_SHOWN = 6

_MIXING_UNITS = ((1e-6, "ppmv"), (1e-9, "ppbv"), (1e-12, "pptv"))


def _mixing_unit(max_value: float) -> tuple[float, str]:
    """Largest of ppmv/ppbv/pptv in which ``max_value`` [mol mol-1] is >= 1 (pptv below)."""
    for factor, name in _MIXING_UNITS:
        if max_value >= factor:
            return factor, name
    return _MIXING_UNITS[-1]


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


def _shade_night(ax, ds: xr.Dataset) -> None:
    """Grey bands where the sun is below the horizon (SZA > 90 degrees)."""
    if "solar_zenith_angle" not in ds or _run_days(ds) > LONG_RUN_DAYS:
        return
    night = ds["solar_zenith_angle"].values > 90.0
    t = ds["time"].values
    edges = np.flatnonzero(np.diff(np.r_[0, night.astype(int), 0]))
    for a, b in zip(edges[::2], edges[1::2]):
        ax.axvspan(t[a], t[min(b, t.size - 1)], color=NIGHT_GREY, linewidth=0, zorder=0)


def _longitude(ds: xr.Dataset) -> float | None:
    if "longitude" in ds.variables:
        return float(np.asarray(ds["longitude"].values).ravel()[0])
    lon = ds.attrs.get("longitude")
    return None if lon is None else float(lon)


def plot_mixing_ratios(ds: xr.Dataset, species=None, log: bool = False):
    """Mole fraction time series, one panel per species (or one log panel)."""
    names = [s for s in (species or DEFAULT_SPECIES) if is_species(ds, s)]
    if species:
        missing = [s for s in species if not is_species(ds, s)]
        if missing:
            raise ResultError(f"--species: unknown species {', '.join(missing)}; this result has "
                              f"{', '.join(str(s) for s in ds['species'].values)}")
    if not names:
        raise ResultError("none of the species to plot is in the result")
    x = ds["mole_fraction"].sel(species=names)
    t = ds["time"].values
    if log:
        fig, ax = plt.subplots(figsize=(8, 4.5), constrained_layout=True)
        _shade_night(ax, ds)
        for i, s in enumerate(names):
            ax.plot(t, x.sel(species=s).values, color=CYCLE_COLOURS[i % len(CYCLE_COLOURS)],
                    linestyle=("-", "--", ":")[i // len(CYCLE_COLOURS) % 3], label=s, linewidth=1.6)
        ax.set_yscale("log")
        ax.set_ylabel("mole fraction [mol mol$^{-1}$]")
        ax.legend(frameon=False, ncol=min(len(names), 5), loc="upper center", bbox_to_anchor=(0.5, -0.12))
        _style(ax)
        _time_axis(ax)
        ax.set_title("Mixing ratios")
        return fig
    ncol = 3 if len(names) > 4 else 2 if len(names) > 1 else 1
    nrow = int(np.ceil(len(names) / ncol))
    fig, axes = plt.subplots(nrow, ncol, figsize=(3.6 * ncol, 2.4 * nrow + 0.6), sharex=True,
                             constrained_layout=True, squeeze=False)
    for ax, s in zip(axes.flat, names):
        v = x.sel(species=s).values
        factor, unit = _mixing_unit(np.nanmax(np.abs(v)) if np.isfinite(v).any() else 0.0)
        _shade_night(ax, ds)
        ax.plot(t, v / factor, color=OKABE_ITO["blue"], linewidth=1.6)
        ax.set_title(s, loc="left", fontsize=11, fontweight="bold")
        ax.set_ylabel(f"[{unit}]")
        _style(ax)
        _time_axis(ax)
    for ax in list(axes.flat)[len(names):]:
        ax.set_visible(False)
    fig.suptitle("Mixing ratios (grey: sun below the horizon)" if _run_days(ds) <= LONG_RUN_DAYS
                 else "Mixing ratios")
    return fig


def _pick_days(days: np.ndarray, n: int = 4) -> np.ndarray:
    if days.size <= n:
        return days
    return days[np.unique(np.linspace(0, days.size - 1, n).round().astype(int))]


def plot_diurnal(ds: xr.Dataset, species=("ClO", "Cl2O2")):
    """Diurnal cycles: each species against local mean solar time on a few days of the run."""
    names = [s for s in species if is_species(ds, s)]
    if not names:
        raise ResultError(f"diurnal plot needs {' or '.join(species)}, which this result lacks")
    lon = _longitude(ds)
    local = local_solar_time(ds["time"], lon).values
    day = local.astype("datetime64[D]")
    hours = (local - day).astype("timedelta64[s]").astype(float) / 3600.0
    complete = [d for d in np.unique(day) if np.count_nonzero(day == d) >= 4]
    chosen = _pick_days(np.array(complete, dtype="datetime64[D]")) if complete else np.unique(day)[:1]
    colours = ("#56B4E9", "#009E73", "#E69F00", "#D55E00")
    fig, axes = plt.subplots(1, len(names), figsize=(4.6 * len(names), 3.8), constrained_layout=True,
                             squeeze=False)
    for ax, s in zip(axes.flat, names):
        v = ds["mole_fraction"].sel(species=s).values
        factor, unit = _mixing_unit(np.nanmax(np.abs(v)) if np.isfinite(v).any() else 0.0)
        for i, d in enumerate(chosen):
            m = day == d
            ax.plot(hours[m], v[m] / factor, color=colours[i % len(colours)], linewidth=1.8,
                    label=str(d))
        ax.set_xlim(0, 24)
        ax.set_xticks(range(0, 25, 6))
        ax.set_xlabel("local mean solar time [h]" if lon is not None else "UTC [h]")
        ax.set_ylabel(f"{s} [{unit}]")
        ax.set_title(s, loc="left", fontweight="bold")
        _style(ax)
    axes.flat[0].legend(frameon=False, title="day", fontsize=9)
    fig.suptitle("Diurnal cycles")
    return fig


def _ranked_cycles(acc: xr.Dataset) -> list[str]:
    cycles = [str(c) for c in acc["term"].values if c not in ("unattributed", "total")]
    final = acc["loss_percent"].isel(time=-1)
    return sorted(cycles, key=lambda c: -float(final.sel(term=c)))


def plot_ozone_loss(ds: xr.Dataset, family: str = "Ox"):
    """Ozone loss rate by cycle (stacked; daily means for long runs) and accumulated loss."""
    acc = accumulated_loss(ds, family)
    ox = ox_loss(ds, family)
    cycles = _ranked_cycles(acc)
    shown, rest = cycles[:MAX_CYCLES_SHOWN], cycles[MAX_CYCLES_SHOWN:]
    ppbv_per_day = 86400.0 * 1e9
    fig, (ax1, ax2) = plt.subplots(2, 1, figsize=(8.5, 7.5), sharex=True, constrained_layout=True)
    long_run = _run_days(ds) > LONG_RUN_DAYS
    if long_run:
        daily = daily_loss(ds, family)
        x = daily["day"].values + np.timedelta64(12, "h")
        air_mean = ds["air_number_density"].resample(time="1D").mean().values[: x.size]
        rate = daily["mean_rate"] / xr.DataArray(air_mean, dims="day", coords={"day": daily["day"]}) * ppbv_per_day
        rate_label = "daily-mean loss rate [ppbv day$^{-1}$]"
    else:
        x = ds["time"].values
        rates = ox["cycle_rate"].rename(cycle="term") if "cycle_rate" in ox else None
        parts = [] if rates is None else [rates]
        parts += [ox["unattributed"].expand_dims(term=["unattributed"]),
                  ox["total_loss"].expand_dims(term=["total"])]
        rate = xr.concat([p.drop_vars([c for c in p.coords if c not in ("time", "term")]) for p in parts],
                         dim="term") / ds["air_number_density"] * ppbv_per_day
        rate = rate.transpose("time", "term")
        rate_label = "loss rate [ppbv day$^{-1}$]"
        _shade_night(ax1, ds)
        _shade_night(ax2, ds)
    stack = [rate.sel(term=c).values for c in shown]
    labels, colours = list(shown), list(CYCLE_COLOURS[: len(shown)])
    if rest:
        stack.append(rate.sel(term=rest).sum("term").values)
        labels.append(f"{len(rest)} other cycles")
        colours.append(OTHER_GREY)
    if stack:
        ax1.stackplot(x, np.clip(np.array(stack), 0, None), labels=labels, colors=colours, alpha=0.9,
                      step="mid" if long_run else None)
    # daily means are drawn as steps, so the lines sit on the stacked bars
    drawstyle = "steps-mid" if long_run else "default"
    ax1.plot(x, rate.sel(term="total").values, color="black", linewidth=1.4, label="total loss",
             drawstyle=drawstyle)
    ax1.plot(x, rate.sel(term="unattributed").values, color="black", linewidth=1.0, linestyle="--",
             label="unattributed (total - cycles)", drawstyle=drawstyle)
    ax1.set_ylabel(rate_label)
    ax1.set_title(f"Ozone loss rate by catalytic cycle ({acc.attrs['basis']} basis)", loc="left")
    ax1.legend(frameon=False, fontsize=8, ncol=2, loc="upper left")
    _style(ax1)

    t = ds["time"].values
    pct = acc["loss_percent"]
    stack2 = [pct.sel(term=c).values for c in shown]
    if rest:
        stack2.append(pct.sel(term=rest).sum("term").values)
    if stack2:
        ax2.stackplot(t, np.clip(np.array(stack2), 0, None), colors=colours, alpha=0.9)
    ax2.plot(t, pct.sel(term="total").values, color="black", linewidth=1.6, label="total")
    ax2.plot(t, pct.sel(term="unattributed").values, color="black", linewidth=1.0, linestyle="--",
             label="unattributed")
    ax2.set_ylabel("accumulated loss [% of initial O$_3$]")
    ax2.set_title("Accumulated ozone loss by cycle", loc="left")
    ax2.legend(frameon=False, fontsize=8, loc="upper left")
    _style(ax2)
    _time_axis(ax2)
    return fig


def plot_chlorine_partitioning(ds: xr.Dataset):
    """Fractions of Cly over time, stacked to 1."""
    part = chlorine_partitioning(ds)
    names = [v for v in ("HCl", "ClONO2", "HOCl", "ClOx", "Cl2", "other") if v in part]
    colours = {"HCl": "#0072B2", "ClONO2": "#56B4E9", "HOCl": "#009E73", "ClOx": "#D55E00",
               "Cl2": "#E69F00", "other": OTHER_GREY}
    labels = {"ClOx": "ClOx (Cl + ClO + 2 Cl$_2$O$_2$)", "Cl2": "2 Cl$_2$",
              "other": "other (" + (part["other"].attrs.get("members") or "none") + ")"}
    fig, ax = plt.subplots(figsize=(8.5, 4.2), constrained_layout=True)
    t = ds["time"].values
    ax.stackplot(t, np.nan_to_num(np.array([part[n].values for n in names])),
                 labels=[labels.get(n, n) for n in names], colors=[colours[n] for n in names], alpha=0.95)
    ax.set_ylim(0, 1)
    ax.set_ylabel("fraction of Cly [1]")
    ax.set_title("Chlorine partitioning", loc="left")
    ax.legend(frameon=False, fontsize=8, loc="upper left", bbox_to_anchor=(1.0, 1.0))
    _style(ax)
    _time_axis(ax)
    return fig


def plot_solar_zenith(ds: xr.Dataset):
    """Solar zenith angle with the times of night (SZA > 90 degrees) shaded."""
    fig, ax = plt.subplots(figsize=(8.5, 3.2), constrained_layout=True)
    t = ds["time"].values
    sza = ds["solar_zenith_angle"].values
    ax.fill_between(t, 0, 1, where=sza > 90.0, transform=ax.get_xaxis_transform(), color=NIGHT_GREY,
                    linewidth=0, label="sun below horizon", step="mid")
    ax.plot(t, sza, color=OKABE_ITO["blue"], linewidth=1.2)
    ax.axhline(90.0, color="black", linewidth=0.8, linestyle=":")
    ax.set_ylabel("solar zenith angle [degree]")
    ax.invert_yaxis()
    ax.set_title("Sun at the box (grey: night)", loc="left")
    _style(ax)
    _time_axis(ax)
    return fig


_FIGURES = (
    ("mixing_ratios", lambda ds, o: plot_mixing_ratios(ds, o["species"], o["log"])),
    ("diurnal_clo_cl2o2", lambda ds, o: plot_diurnal(ds)),
    ("ozone_loss", lambda ds, o: plot_ozone_loss(ds)),
    ("chlorine_partitioning", lambda ds, o: plot_chlorine_partitioning(ds)),
    ("solar_zenith_angle", lambda ds, o: plot_solar_zenith(ds)),
)


def plot_all(ds: xr.Dataset, outdir: str | Path, species=None, log: bool = False,
             fmt: str = "png", dpi: int = 130) -> tuple[list[Path], list[str]]:
    """Write the standard figures into ``outdir``; returns (paths written, skipped with reasons).

    A figure whose data the result lacks (e.g. no ClO in the mechanism) is
    skipped with its reason; an unknown ``species`` is an error.
    """
    if fmt not in ("png", "pdf"):
        raise ResultError(f"--format must be png or pdf, got {fmt!r}")
    outdir = Path(outdir)
    outdir.mkdir(parents=True, exist_ok=True)
    written, skipped = [], []
    options = {"species": species, "log": log}
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


def plot_comparison(base: xr.Dataset, other: xr.Dataset, family: str = "Ox",
                    labels: tuple[str, str] = ("BASE", "OTHER"), top: int = 10):
    """Two runs side by side: O3, accumulated loss by cycle, largest reaction-rate changes."""
    from .commands.compare import rate_changes
    fig = plt.figure(figsize=(11, 8), constrained_layout=True)
    grid = fig.add_gridspec(2, 2, width_ratios=(1.3, 1))
    ax1, ax2, ax3 = fig.add_subplot(grid[0, 0]), fig.add_subplot(grid[1, 0]), fig.add_subplot(grid[:, 1])
    styles = ({"linestyle": "-", "linewidth": 1.8}, {"linestyle": "--", "linewidth": 1.8})
    for ds, style, label in zip((base, other), styles, labels):
        if is_species(ds, "O3"):
            x = ds["mole_fraction"].sel(species="O3").values
            ax1.plot(ds["time"].values, x / 1e-6, color=OKABE_ITO["blue"], label=label, **style)
    ax1.set_ylabel("O$_3$ [ppmv]")
    ax1.set_title("Ozone", loc="left")
    ax1.legend(frameon=False, fontsize=8)
    _style(ax1)
    _time_axis(ax1)

    if "cycle_rate" in base and "cycle_rate" in other:
        ab, ao = accumulated_loss(base, family), accumulated_loss(other, family)
        shown = _ranked_cycles(ab)[:4] + ["total"]
        for k, term in enumerate(shown):
            colour = "black" if term == "total" else CYCLE_COLOURS[k]
            for acc, ds, style in zip((ab, ao), (base, other), styles):
                if term in set(acc["term"].values.tolist()):
                    ax2.plot(ds["time"].values, acc["loss_percent"].sel(term=term).values, color=colour,
                             label=term if style is styles[0] else None, **style)
        ax2.set_ylabel("accumulated loss [% of initial O$_3$]")
        ax2.set_title(f"Accumulated loss by cycle (solid {labels[0]}, dashed {labels[1]})", loc="left",
                      fontsize=9)
        ax2.legend(frameon=False, fontsize=8)
    _style(ax2)
    _time_axis(ax2)

    rows = rate_changes(base, other, top)
    names = [r["term"] for r in rows][::-1]
    change = np.clip([r["change_percent"] for r in rows][::-1], -1e3, 1e3) if rows else []
    colours = [OKABE_ITO["vermillion"] if c > 0 else OKABE_ITO["blue"] for c in change]
    ax3.barh(names, change, color=colours, height=0.6)
    ax3.set_ylim(-0.5, max(len(names), 8) - 0.5)
    ax3.axvline(0, color="black", linewidth=0.8)
    ax3.set_xlabel("change of time-mean rate [%]")
    ax3.set_title("Largest reaction-rate changes", loc="left")
    _style(ax3)
    if not rows:
        ax3.text(0.5, 0.5, "no reaction rate changed", transform=ax3.transAxes, ha="center")
    return fig


def save_comparison(base: xr.Dataset, other: xr.Dataset, path: str | Path, family: str = "Ox",
                    labels: tuple[str, str] = ("BASE", "OTHER"), dpi: int = 130) -> Path:
    """Write :func:`plot_comparison` to ``path`` (.png or .pdf)."""
    path = Path(path)
    if path.suffix.lower() not in (".png", ".pdf"):
        raise ResultError(f"--plot {path}: the file name must end in .png or .pdf")
    path.parent.mkdir(parents=True, exist_ok=True)
    fig = plot_comparison(base, other, family, labels)
    fig.savefig(path, dpi=dpi)
    plt.close(fig)
    return path
