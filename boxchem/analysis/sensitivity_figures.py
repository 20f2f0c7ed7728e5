"""Figures of the sensitivity and uncertainty analyses (matplotlib, Agg).

tornado (ranked local sensitivities), bands (5-95 % of a species and of the
accumulated loss by cycle over time), histogram (a metric over the Monte
Carlo sample) and contributions (SRRC^2 with R^2).  Each returns a Figure;
:func:`save` writes it atomically (temporary name, then rename).
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numpy as np
import xarray as xr

__all__ = ["tornado", "bands", "histogram", "contributions", "save"]

KIND_COLOURS = {"thermal": "#1f77b4", "photolysis": "#ff7f0e", "surface": "#2ca02c",
                "initial": "#9467bd", "": "#7f7f7f"}


def _plt():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def save(fig, path: str | Path, dpi: int = 120) -> Path:
    """Write a figure to ``path`` under a temporary name, then rename."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}-", suffix=path.suffix, dir=path.parent)
    os.close(fd)
    try:
        fig.savefig(tmp, dpi=dpi, bbox_inches="tight")
        os.chmod(tmp, 0o644)
        os.replace(tmp, path)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
        _plt().close(fig)
    return path


def _scale(values: np.ndarray) -> tuple[float, str]:
    top = np.nanmax(np.abs(values)) if np.size(values) else 0.0
    for factor, unit in ((1e-6, "ppmv"), (1e-9, "ppbv"), (1e-12, "pptv")):
        if top >= factor:
            return factor, unit
    return 1e-12, "pptv"


def tornado(result: xr.Dataset, metric: str | None = None, top: int = 20):
    """Horizontal bars of the ``top`` largest |S| of one metric, coloured by parameter kind."""
    from .sensitivity import ranking
    plt = _plt()
    metric = str(result["metric"].values[0]) if metric is None else metric
    rows = ranking(result, metric, top)[::-1]
    fig, ax = plt.subplots(figsize=(8.5, 0.32 * len(rows) + 1.6))
    y = np.arange(len(rows))
    s = np.array([r["sensitivity"] for r in rows])
    ax.barh(y, s, color=[KIND_COLOURS.get(r["kind"], "#7f7f7f") for r in rows])
    ax.set_yticks(y, [f"{r['parameter'].split('.', 1)[1]}   {r['equation']}" for r in rows],
                  fontsize=8)
    ax.axvline(0.0, color="black", lw=0.8)
    ax.set_xlabel("sensitivity  d ln(metric) / d ln(parameter)")
    if result.attrs.get("sensitivity_method") == "tangent":
        how = "tangent-linear run"
    else:
        how = (f"{result.attrs.get('finite_difference_scheme', '')} differences, "
               f"h = {result.attrs.get('finite_difference_step_ln', float('nan')):g} in ln p")
    ax.set_title(f"{result.attrs.get('scenario_source', '')}: {metric}\nlargest {len(rows)} local sensitivities "
                 f"({how})", fontsize=9)
    handles = [plt.Rectangle((0, 0), 1, 1, color=c) for k, c in KIND_COLOURS.items() if k and
               k in {r["kind"] for r in rows}]
    labels = [k for k in KIND_COLOURS if k and k in {r["kind"] for r in rows}]
    ax.legend(handles, labels, fontsize=8, loc="lower right")
    ax.grid(axis="x", alpha=0.3)
    return fig


def bands(mc: xr.Dataset, species: str = "O3", cycles: int = 4):
    """Median and 5-95 % band of a species and of the accumulated loss by cycle over time."""
    plt = _plt()
    has_loss = "band_cycle_loss" in mc
    fig, axes = plt.subplots(2 if has_loss else 1, 1, figsize=(8.5, 7 if has_loss else 3.8),
                             sharex=True, squeeze=False)
    time = mc["time"].values
    band = mc[f"band_{species}"].values
    factor, unit = _scale(band)
    ax = axes[0, 0]
    ax.fill_between(time, band[0] / factor, band[2] / factor, color="#1f77b4", alpha=0.3,
                    label="5-95 %")
    ax.plot(time, band[1] / factor, color="#1f77b4", label="median")
    nominal = mc["mole_fraction"].sel(species=species).isel(member=0).values
    ax.plot(time, nominal / factor, color="black", lw=0.8, ls="--", label="nominal")
    ax.set_ylabel(f"{species} [{unit}]")
    ax.set_title(f"{species}: Monte Carlo band ({mc.attrs.get('mc_members_used', '?')} members, "
                 f"{mc.attrs.get('mc_sampling', '')}, f read as {mc.attrs.get('mc_f_sigma', 1):g} sigma)",
                 fontsize=9)
    ax.legend(fontsize=8)
    ax.grid(alpha=0.3)
    if has_loss:
        ax = axes[1, 0]
        loss = mc["band_cycle_loss"]
        order = np.argsort(-loss.isel(quantile=1, time=-1).values)[:cycles]
        lf, lunit = _scale(loss.values[:, order])
        for j, c in zip(order, plt.rcParams["axes.prop_cycle"].by_key()["color"]):
            name = str(loss["cycle"].values[j])
            ax.fill_between(time, loss.values[0, j] / lf, loss.values[2, j] / lf, color=c, alpha=0.25)
            ax.plot(time, loss.values[1, j] / lf, color=c, label=name)
        ax.set_ylabel(f"accumulated loss [{lunit}]")
        ax.set_title("Ox loss by cycle: median and 5-95 % band", fontsize=9)
        ax.legend(fontsize=8, loc="upper left")
        ax.grid(alpha=0.3)
    fig.autofmt_xdate()
    return fig


def histogram(mc: xr.Dataset, metric: str | None = None):
    """Histogram of one metric over the sample, with nominal, median and 5/95 % marked."""
    from .uncertainty import _statistics_members
    plt = _plt()
    metric = str(mc["metric"].values[0]) if metric is None else metric
    use = _statistics_members(mc)
    v = mc["metric_value"].sel(metric=metric).values[use]
    units = str(mc["metric_units"].sel(metric=metric).values)
    factor, unit = _scale(v) if units in ("1", "mol mol-1") and np.nanmax(np.abs(v)) < 1e-3 else (1.0, units)
    fig, ax = plt.subplots(figsize=(7, 4))
    ax.hist(v[np.isfinite(v)] / factor, bins=max(10, min(40, v.size // 5)), color="#1f77b4", alpha=0.7)
    q = mc["metric_quantile"].sel(metric=metric).values / factor
    for value, style, label in ((q[0], ":", "5 %"), (q[1], "-", "median"), (q[2], ":", "95 %"),
                                (float(mc["metric_nominal"].sel(metric=metric)) / factor, "--", "nominal")):
        ax.axvline(value, color="black", ls=style, lw=1, label=f"{label} {value:.4g}")
    ax.set_xlabel(f"{metric} [{unit}]")
    ax.set_ylabel("members")
    sigma = float(mc["metric_log_std"].sel(metric=metric))
    ax.set_title(f"{metric}: {v.size} members, 1-sigma spread {100 * (np.exp(sigma) - 1):.1f} %",
                 fontsize=9)
    ax.legend(fontsize=8)
    return fig


def contributions(mc: xr.Dataset, metric: str | None = None, top: int = 15):
    """Squared standardised rank regression coefficients of one metric, with R^2."""
    plt = _plt()
    metric = str(mc["metric"].values[0]) if metric is None else metric
    c = mc["contribution"].sel(metric=metric).values
    order = np.argsort(-np.nan_to_num(c, nan=-1.0))[:top]
    order = order[np.isfinite(c[order])][::-1]
    fig, ax = plt.subplots(figsize=(7.5, 0.32 * len(order) + 1.6))
    names = [str(p) for p in mc["parameter"].values[order]]
    ax.barh(np.arange(order.size), c[order], color="#d62728")
    ax.set_yticks(np.arange(order.size), names, fontsize=8)
    ax.set_xlabel("SRRC$^2$ (share of the rank variance)")
    r2 = float(mc["contribution_r2"].sel(metric=metric))
    ax.set_title(f"{metric}\ncontributions to the variance (rank regression R$^2$ = {r2:.2f})",
                 fontsize=9)
    ax.grid(axis="x", alpha=0.3)
    return fig
