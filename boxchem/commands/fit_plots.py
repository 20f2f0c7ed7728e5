"""Figures and atomic file output of ``boxchem fit`` and ``boxchem fit-traces``.

Arrhenius plot: ln k against 1000/T with the data (1-sigma error bars), the
fit with its 1- and 2-sigma bands, the shipped line and its evaluation
uncertainty band k f(T)^(+-1); a residual panel below.  Falloff: k against
[M] (log-log) at each temperature.  Traces: one panel per trace with its fit
and residuals; pseudo-first-order k' against [B] at each condition.
"""
from __future__ import annotations

import math
import os
import tempfile
from pathlib import Path

import numpy as np

__all__ = ["write_text_atomic", "save_figure_atomic", "plot_rate_fit", "plot_traces",
           "plot_pseudo_first_order", "temperature_groups"]


def write_text_atomic(path: str | Path, text: str) -> Path:
    """Write ``text`` to ``path`` under a temporary name, then rename (never half-written)."""
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent or ".")
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def save_figure_atomic(fig, path: str | Path, dpi: int = 130) -> Path:
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=path.suffix or ".png", dir=path.parent or ".")
    os.close(fd)
    try:
        fig.savefig(tmp, dpi=dpi)
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path


def _pyplot():
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    return plt


def temperature_groups(temperature, tolerance_K: float = 2.0) -> np.ndarray:
    """Group index of each temperature: sorted values closer than ``tolerance_K`` share a group."""
    T = np.asarray(temperature, dtype=float)
    order = np.argsort(T)
    groups = np.zeros(T.size, dtype=int)
    g = 0
    for a, b in zip(order[:-1], order[1:]):
        if T[b] - T[a] > tolerance_K:
            g += 1
        groups[b] = g
    return groups


def _shipped_curve(reaction, mechanism, T, M):
    """(k or K, f(T)) of the shipped line; f None when it carries no f298."""
    from ..mechanism.ratelaws import RateEvaluator, equilibrium_constant

    if reaction is None:
        return None, None
    if reaction.law == "reverse":
        value = equilibrium_constant(T, float(reaction.parameters["K"]), float(reaction.parameters["B"]))
    else:
        ev = RateEvaluator(mechanism)
        i = [r.id for r in mechanism.reactions].index(reaction.id)
        value = ev.thermal(T, M if M is not None else np.full(np.shape(T), 1.0))[..., i]
    if reaction.f298 is None:
        return value, None
    g = reaction.g or 0.0
    f = reaction.f298 * np.exp(np.abs(g * (1.0 / np.asarray(T) - 1.0 / 298.0)))
    return value, f


def plot_rate_fit(fit, path, *, reaction=None, mechanism=None, title: str = "") -> Path:
    """The fit figure: Arrhenius plot (ln k vs 1000/T) or, for falloff, k vs [M] per temperature."""
    if fit.law == "falloff":
        return _plot_falloff(fit, path, reaction=reaction, mechanism=mechanism, title=title)
    plt = _pyplot()
    tab = fit.table
    T = tab.temperature
    quantity = "K" if fit.law == "equilibrium" else "k"
    unit = "cm3 molecule-1" if quantity == "K" else tab.value_units.replace("cm3", "cm3 molecule-1") \
        .replace("cm6", "cm6 molecule-2")
    lo, hi = T.min(), T.max()
    lo_plot, hi_plot = min(lo, 298.0) * 0.97, max(hi, 298.0) * 1.03
    Tg = np.linspace(lo_plot, hi_plot, 200)
    x, xg = 1000.0 / T, 1000.0 / Tg
    lnk = fit.ln_k(Tg)
    sig = fit.ln_k_sigma(Tg)
    fig, (ax, axr) = plt.subplots(2, 1, figsize=(7.5, 6.8), sharex=True,
                                  gridspec_kw={"height_ratios": [3, 1]})
    ax.fill_between(xg, lnk - 2 * sig, lnk + 2 * sig, color="tab:blue", alpha=0.15, lw=0,
                    label="fit, 2-sigma band")
    ax.fill_between(xg, lnk - sig, lnk + sig, color="tab:blue", alpha=0.3, lw=0, label="fit, 1-sigma band")
    ax.plot(xg, lnk, color="tab:blue", lw=1.8, label=f"fit ({fit.law})")
    shipped, f = _shipped_curve(reaction, mechanism, Tg, None)
    if shipped is not None:
        ls = np.log(shipped)
        ax.plot(xg, ls, color="tab:red", lw=1.4, ls="--", label=f"shipped {reaction.id}")
        if f is not None:
            ax.fill_between(xg, ls - np.log(f), ls + np.log(f), color="tab:red", alpha=0.12, lw=0,
                            label=f"shipped f(T) (f298={reaction.f298:g}, g={reaction.g or 0:g} K)")
    out = fit.outliers
    yerr = fit.rel_sigma
    ax.errorbar(x[~out], np.log(fit.k_effective[~out]), yerr=yerr[~out], fmt="o", color="k", ms=4,
                capsize=2, label=f"{tab.name} (1 sigma)")
    if out.any():
        ax.errorbar(x[out], np.log(fit.k_effective[out]), yerr=yerr[out], fmt="x", color="tab:orange",
                    ms=7, capsize=2, label="flagged outlier")
    ax.axvline(1000.0 / 298.0, color="0.6", lw=0.8, ls=":")
    ax.set_ylabel(f"ln ({quantity} / {unit})")
    p, s = fit.parameters, fit.parameter_sigmas
    text = "\n".join(f"{key} = {p[key]:.4g} ± {s[key]:.2g}" for key in s)
    text += "".join(f"\n{key} = {p[key]:.4g} (fixed)" for key in p
                    if key not in s and key not in ("Fc", "Tref") and not (fit.law == "arrhenius" and key == "n"))
    text += f"\nf298 = {fit.f298:.3f}, g = {fit.g:.0f} K"
    text += f"\nchi2/dof = {fit.result.reduced_chi2:.2f}" if fit.weighted else "\n(unweighted)"
    text += _common_note(tab)
    # the statistics box goes in the empty corner on the left: below a falling line, above a rising one
    rising = lnk[-1] < lnk[0]        # Tg increases, so 1000/T decreases along the grid
    ax.text(0.02, 0.97 if rising else 0.03, text, transform=ax.transAxes, fontsize=8.5,
            va="top" if rising else "bottom", bbox={"facecolor": "white", "alpha": 0.8, "edgecolor": "0.8"})
    ax.legend(fontsize=7.5, loc="lower right" if rising else "upper right")
    ax.set_title(title or f"{quantity}(T) fitted to {tab.name}", fontsize=10)
    top = ax.secondary_xaxis("top", functions=(lambda v: 1000.0 / np.maximum(v, 1e-9),
                                               lambda v: 1000.0 / np.maximum(v, 1e-9)))
    top.set_xlabel("T [K]")
    _residual_panel(axr, x, fit)
    axr.set_xlabel("1000 / T [K-1]")
    fig.tight_layout()
    saved = save_figure_atomic(fig, path)
    plt.close(fig)
    return saved


def _common_note(table) -> str:
    if not table.common_rel_sigma:
        return ""
    return f"\ncommon ±{table.common_rel_sigma * 100:.3g} % (in the band,\nnot in the error bars)"


def _residual_panel(axr, x, fit):
    z = fit.standardised_residuals
    out = fit.outliers
    axr.axhline(0, color="0.5", lw=0.8)
    for v in (-3, 3):
        axr.axhline(v, color="tab:orange", lw=0.8, ls="--")
    axr.plot(x[~out], z[~out], "o", color="k", ms=4)
    if out.any():
        axr.plot(x[out], z[out], "x", color="tab:orange", ms=7)
    axr.set_ylabel("std. residual")
    lim = max(4.0, float(np.nanmax(np.abs(z))) * 1.15)
    axr.set_ylim(-lim, lim)


def _plot_falloff(fit, path, *, reaction=None, mechanism=None, title=""):
    plt = _pyplot()
    tab = fit.table
    T, M = tab.temperature, tab.air_density
    groups = temperature_groups(T)
    colors = plt.cm.viridis(np.linspace(0.0, 0.9, groups.max() + 1))
    Mg = np.geomspace(M.min() / 3, M.max() * 3, 150)
    fig, (ax, axr) = plt.subplots(2, 1, figsize=(7.5, 7.0), sharex=True,
                                  gridspec_kw={"height_ratios": [3, 1]})
    z = fit.standardised_residuals
    out = fit.outliers
    for gi in range(groups.max() + 1):
        sel = groups == gi
        Tm = float(np.mean(T[sel]))
        c = colors[gi]
        lnk = fit.ln_k(Tm, Mg)
        sig = fit.ln_k_sigma(Tm, Mg)
        ax.fill_between(Mg, np.exp(lnk - sig), np.exp(lnk + sig), color=c, alpha=0.35, lw=0)
        ax.plot(Mg, np.exp(lnk), color=c, lw=1.6, label=f"{Tm:.0f} K fit")
        shipped, f = _shipped_curve(reaction, mechanism, np.full(Mg.shape, Tm), Mg)
        if shipped is not None:
            ax.plot(Mg, shipped, color=c, lw=1.0, ls="--")
            if f is not None:
                ax.fill_between(Mg, shipped / f, shipped * f, color=c, alpha=0.07, lw=0)
        ok = sel & ~out
        ax.errorbar(M[ok], fit.k_effective[ok], yerr=fit.rel_sigma[ok] * fit.k_effective[ok], fmt="o",
                    color=c, ms=4, capsize=2)
        bad = sel & out
        if bad.any():
            ax.plot(M[bad], fit.k_effective[bad], "x", color="tab:orange", ms=8)
        axr.plot(M[ok], z[ok], "o", color=c, ms=4)
        if bad.any():
            axr.plot(M[bad], z[bad], "x", color="tab:orange", ms=8)
    if reaction is not None:
        ax.plot([], [], color="0.3", ls="--", lw=1.0, label=f"shipped {reaction.id}")
        if reaction.f298 is not None:
            ax.fill_between([], [], [], color="0.3", alpha=0.15, lw=0,
                            label=f"shipped ×/÷ f(T) (f298={reaction.f298:g}, g={reaction.g or 0:g} K)")
    ax.plot([], [], "o", color="0.3", ms=4, label=f"{tab.name} (1 sigma)")
    ax.fill_between([], [], [], color="0.3", alpha=0.35, lw=0, label="fit, 1-sigma band")
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_ylabel("k [cm3 molecule-1 s-1] (effective second order)")
    p, s = fit.parameters, fit.parameter_sigmas
    text = "\n".join(f"{key} = {p[key]:.4g} ± {s[key]:.2g}" for key in s)
    text += "".join(f"\n{key} = {p[key]:.4g} (fixed)" for key in p
                    if key not in s and key not in ("Fc", "Tref") and not (fit.law == "arrhenius" and key == "n"))
    text += f"\nFc = {p['Fc']:.3g}" + (" (fixed)" if "Fc" not in s else "") + f", Tref = {p['Tref']:g} K"
    text += f"\nf298 = {fit.f298:.3f}, g = {fit.g:.0f} K"
    text += f"\nchi2/dof = {fit.result.reduced_chi2:.2f}" if fit.weighted else "\n(unweighted)"
    text += _common_note(tab)
    ax.text(0.98, 0.03, text, transform=ax.transAxes, fontsize=8.5, va="bottom", ha="right",
            bbox={"facecolor": "white", "alpha": 0.8, "edgecolor": "0.8"})
    ax.legend(fontsize=7.5, loc="upper left")
    ax.set_title(title or f"falloff fit to {tab.name}: k against [M] at each temperature", fontsize=10)
    axr.axhline(0, color="0.5", lw=0.8)
    for v in (-3, 3):
        axr.axhline(v, color="tab:orange", lw=0.8, ls="--")
    lim = max(4.0, float(np.nanmax(np.abs(z))) * 1.15)
    axr.set_ylim(-lim, lim)
    axr.set_ylabel("std. residual")
    axr.set_xlabel("[M] [molecule cm-3]")
    fig.tight_layout()
    saved = save_figure_atomic(fig, path)
    plt.close(fig)
    return saved


def plot_traces(fits, path, *, max_columns: int = 4) -> Path:
    """One panel per trace: data, fitted curve, residuals underneath (same time axis)."""
    plt = _pyplot()
    n = len(fits)
    ncol = min(max_columns, n)
    nrow = math.ceil(n / ncol)
    fig = plt.figure(figsize=(3.8 * ncol, 3.6 * nrow))
    outer = fig.add_gridspec(nrow, ncol, hspace=0.45, wspace=0.35)
    for i, tf in enumerate(fits):
        inner = outer[i // ncol, i % ncol].subgridspec(2, 1, height_ratios=[3, 1], hspace=0.05)
        ax = fig.add_subplot(inner[0])
        axr = fig.add_subplot(inner[1], sharex=ax)
        tr = tf.trace
        scale, unit = _time_scale(tr.time)
        used = tf.used
        ax.plot(tr.time[~used] * scale, tr.signal[~used], ".", color="0.7", ms=2)
        ax.plot(tr.time[used] * scale, tr.signal[used], ".", color="k", ms=2)
        ax.plot(tr.time[used] * scale, tf.model_signal, color="tab:red", lw=1.3)
        axr.plot(tr.time[used] * scale, tr.signal[used] - tf.model_signal, ".", color="k", ms=1.5)
        axr.axhline(0, color="tab:red", lw=0.8)
        rel = tf.k_sigma_fit / tf.k
        shared = f", cross section ±{tr.cross_section_rel_sigma * 100:.2g} %" \
            if tf.k_sigma != tf.k_sigma_fit else ""
        ax.set_title(f"{tr.name}\n{tr.temperature:.0f} K, [M] {tr.air_density:.2g} cm-3\n"
                     f"{tf.label} = {tf.k:.3g} {'cm3 s-1' if tf.label == 'k' else 's-1'} "
                     f"± {rel * 100:.2g} % (fit){shared}", fontsize=7)
        ax.set_ylabel({"absorbance": "absorbance (ln)", "concentration": "[A] [cm-3]"}
                      .get(tr.signal_kind, "signal [arb]"), fontsize=7.5)
        ax.tick_params(labelsize=7, labelbottom=False)
        axr.tick_params(labelsize=7)
        axr.set_xlabel(f"t [{unit}]", fontsize=7.5)
    fig.suptitle("trace fits (red) with residuals; grey: points before t = 0, not fitted", fontsize=9)
    saved = save_figure_atomic(fig, path)
    plt.close(fig)
    return saved


def _time_scale(t):
    span = float(np.max(t))
    if span < 1e-3:
        return 1e6, "us"
    if span < 1.0:
        return 1e3, "ms"
    return 1.0, "s"


def plot_pseudo_first_order(lines, path) -> Path:
    """k' against [B] at each condition with the weighted straight line (slope = k)."""
    plt = _pyplot()
    fig, ax = plt.subplots(figsize=(7, 5))
    colors = plt.cm.viridis(np.linspace(0.0, 0.9, max(len(lines), 1)))
    for c, line in zip(colors, lines):
        B = line.co_reactant
        ax.errorbar(B, line.k_first, yerr=line.k_first_sigma, fmt="o", color=c, ms=4, capsize=2)
        Bg = np.linspace(0, B.max() * 1.05, 50)
        ax.plot(Bg, line.k * Bg + line.intercept, color=c, lw=1.3,
                label=f"{line.temperature:.0f} K, [M] {line.air_density:.2g}: k = {line.k:.3g} "
                      f"± {line.k_sigma / line.k * 100:.2g} %")
    ax.set_xlabel("[B] [molecule cm-3]")
    ax.set_ylabel("k' [s-1]")
    ax.set_xlim(left=0)
    ax.set_ylim(bottom=0)
    ax.legend(fontsize=7.5)
    ax.set_title("pseudo-first-order decay rates against the co-reactant (slope = k)", fontsize=10)
    fig.tight_layout()
    saved = save_figure_atomic(fig, path)
    plt.close(fig)
    return saved
