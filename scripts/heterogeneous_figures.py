"""Figures of docs/heterogeneous.md: gammas and STS vs T, and the shipped midlatitude / polar-spring runs.

    python scripts/heterogeneous_figures.py [--out docs/figures] [--polar RUN.nc] [--mid RUN.nc] [--sts RUN.nc]

Without --polar/--mid/--sts the scenarios (polar-spring, midlatitude,
polar-spring-sts) are run first (a few minutes).
"""
from __future__ import annotations

import argparse
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import xarray as xr  # noqa: E402

from boxchem.environment.psc import frost_point, nat_existence_temperature  # noqa: E402
from boxchem.environment.sts import sts_composition  # noqa: E402
from boxchem.mechanism.liquid_aerosol import liquid_gammas, sulfuric_acid_weight_percent  # noqa: E402


def sts_figure(path: Path) -> None:
    """STS composition, gas-phase HNO3 and volume vs T (Carslaw et al. 1995) at the paper's example conditions."""
    p, x_h2o, x_hno3, x_h2so4 = 5000.0, 5e-6, 10e-9, 0.5e-9
    T = np.linspace(186.0, 205.0, 300)
    c = sts_composition(T, p, x_h2o, x_hno3, x_h2so4)
    fig, (ax, ax2, ax3) = plt.subplots(3, 1, figsize=(7, 8), sharex=True)
    ax.plot(T, c.h2so4_wt * 100, label="H2SO4")
    ax.plot(T, c.hno3_wt * 100, label="HNO3")
    ax.plot(T, c.binary_h2so4_wt * 100, ":", color="tab:blue", label="H2SO4, binary (no HNO3)")
    ax.plot(T, sulfuric_acid_weight_percent(T, x_h2o * p), "--", color="grey", lw=0.8,
            label="H2SO4, binary, Tabazadeh et al. 1997")
    ax.set_ylabel("wt %")
    ax.legend(fontsize=7)
    ax2.plot(T, c.hno3_gas_fraction * 100, color="k")
    ax2.set_ylabel("HNO3 in the gas phase [%]")
    ax3.semilogy(T, c.volume * 1e12, color="tab:red")
    ax3.set_ylabel("liquid volume [um3 cm-3]")
    ax3.set_xlabel("temperature [K]")
    t_nat = nat_existence_temperature(x_hno3 * p, x_h2o * p)
    t_ice = frost_point(x_h2o * p)
    for a in (ax, ax2, ax3):
        a.grid(True, which="both", alpha=0.3)
        for t in (t_nat, t_ice):
            a.axvline(t, color="tab:purple", lw=0.8)
    ax.text(t_nat + 0.2, 65, "T_NAT", color="tab:purple", fontsize=7)
    ax.text(t_ice + 0.2, 65, "T_ice", color="tab:purple", fontsize=7)
    ax.set_title("STS (Carslaw, Luo and Peter 1995): 50 hPa, 5 ppmv H2O, 10 ppbv HNO3, 0.5 ppbv H2SO4",
                 fontsize=9)
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)


def gamma_figure(path: Path) -> None:
    p = 5000.0                      # 50 hPa
    x_h2o, x_hcl, x_hno3, x_clono2 = 5e-6, 1.5e-9, 10e-9, 0.5e-9
    T = np.linspace(186.0, 230.0, 300)
    g = liquid_gammas(T, x_h2o * p, x_hcl * p, x_clono2 * p, 1e-5)
    fig, (ax, ax2) = plt.subplots(2, 1, figsize=(7, 7), sharex=True, gridspec_kw={"height_ratios": [3, 1]})
    labels = {"shi2001_clono2_hcl": "ClONO2 + HCl (Shi et al. 2001)",
              "shi2001_clono2_h2o": "ClONO2 + H2O (Shi et al. 2001)",
              "shi2001_hocl_hcl": "HOCl + HCl (Shi et al. 2001)",
              "hanson2003_brono2_h2o": "BrONO2 + H2O (Hanson 2003)"}
    for name, label in labels.items():
        ax.semilogy(T, np.maximum(g[name], 1e-12), label=label)
    ax.axhline(0.1, color="grey", ls=":", label="N2O5 + H2O (0.1, JPL 19-5)")
    ax.axhline(0.2, color="k", ls="--", lw=0.8, label="ClONO2 + HCl on NAT (0.2, JPL 19-5)")
    t_nat = nat_existence_temperature(x_hno3 * p, x_h2o * p)
    t_ice = frost_point(x_h2o * p)
    for t, name in ((t_nat, "T_NAT (10 ppbv HNO3)"), (t_ice, "T_ice")):
        ax.axvline(t, color="tab:purple", lw=0.8)
        ax.text(t + 0.3, 2.0, name, color="tab:purple", fontsize=7)
    ax.axvline(222.0, color="tab:green", lw=0.8)
    ax.text(222.3, 2.0, "midlatitude box", color="tab:green", fontsize=7)
    ax.set_ylim(1e-11, 20)
    ax.set_ylabel("reaction probability gamma")
    ax.set_title("Liquid sulfate aerosol at 50 hPa, 5 ppmv H2O, 1.5 ppbv HCl, 0.5 ppbv ClONO2, r = 0.1 um")
    ax.title.set_fontsize(9)
    ax.legend(fontsize=7, loc="lower left")
    ax.grid(True, which="both", alpha=0.3)
    ax2.plot(T, sulfuric_acid_weight_percent(T, x_h2o * p))
    ax2.set_ylabel("H2SO4 [wt %]\n(Tabazadeh 1997)")
    ax2.set_xlabel("temperature [K]")
    ax2.grid(True, alpha=0.3)
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)


def _daily_max(ds, species):
    x = ds["mole_fraction"].sel(species=species)
    daily = x.resample(time="1D")
    full = daily.count() >= 0.9 * daily.count().max()      # drop a partial last day
    return daily.max().where(full, drop=True)


def run_figure(ds: xr.Dataset, path: Path, title: str) -> None:
    fig, axes = plt.subplots(5, 1, figsize=(8, 11), sharex=True)
    t = ds["time"].values
    ax = axes[0]
    ax.plot(t, ds["temperature"], color="tab:red", lw=2)
    ax.set_ylabel("T [K] (red)")
    span = float(ds["temperature"].max() - ds["temperature"].min())
    ax.set_ylim(float(ds["temperature"].min()) - max(1.0, 0.1 * span),
                float(ds["temperature"].max()) + max(1.0, 0.1 * span))
    ax_b = ax.twinx()
    ax_b.plot(t, ds["psc_surface_area"] * 1e8, color="tab:blue", label="NAT area")
    ax_b.plot(t, ds["ice_surface_area"] * 1e8, color="tab:cyan", label="ice area")
    ax_b.plot(t, ds["sulfate_surface_area"] * 1e8, color="tab:gray", ls="--", label="liquid sulfate / STS area")
    ax_b.set_ylabel("area [um2 cm-3]")
    top = float(max(ds["psc_surface_area"].max(), ds["ice_surface_area"].max(),
                    ds["sulfate_surface_area"].max())) * 1e8
    ax_b.set_ylim(-0.05 * top, 1.15 * top)
    ax_b.legend(fontsize=7, loc="upper right")
    ax = axes[1]
    for s in ("HCl", "ClONO2", "HOCl"):
        ax.plot(t, ds["mole_fraction"].sel(species=s) * 1e9, label=s)
    ax.set_ylabel("ppbv")
    ax.legend(fontsize=7)
    ax = axes[2]
    clo = _daily_max(ds, "ClO")
    ax.plot(clo["time"].values, clo * 1e12, "o-", ms=3, label="ClO, daily maximum")
    ax.set_ylabel("pptv")
    ax.legend(fontsize=7)
    ax = axes[3]
    species = list(ds["species"].values)
    ax.plot(t, ds["mole_fraction"].sel(species="HNO3") * 1e9, label="HNO3, gas phase")
    if "HNO3_PSC" in species:
        ax.plot(t, ds["mole_fraction"].sel(species="HNO3_PSC") * 1e9, label="HNO3 in NAT/STS (HNO3_PSC)")
    ax.set_ylabel("ppbv")
    ax.legend(fontsize=7)
    ax = axes[4]
    ax.plot(t, ds["mole_fraction"].sel(species="O3") * 1e6, color="k")
    ax.set_ylabel("O3 [ppmv]")
    for a in axes:
        a.grid(True, alpha=0.3)
    axes[0].set_title(title, fontsize=9)
    fig.autofmt_xdate()
    fig.tight_layout()
    fig.savefig(path, dpi=110)
    plt.close(fig)


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--out", default="docs/figures")
    p.add_argument("--polar", default=None, help="result of `boxchem run polar-spring`")
    p.add_argument("--mid", default=None, help="result of `boxchem run midlatitude`")
    p.add_argument("--sts", default=None, help="result of `boxchem run polar-spring-sts`")
    args = p.parse_args(argv)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    gamma_figure(out / "het_gamma_vs_temperature.png")
    sts_figure(out / "het_sts_vs_temperature.png")
    import boxchem
    polar = xr.open_dataset(args.polar) if args.polar else boxchem.run("polar-spring")
    mid = xr.open_dataset(args.mid) if args.mid else boxchem.run("midlatitude")
    sts = xr.open_dataset(args.sts) if args.sts else boxchem.run("polar-spring-sts")
    run_figure(sts, out / "het_polar_spring_sts.png",
               "polar-spring-sts: liquid droplets take up HNO3 and H2O (Carslaw et al. 1995), no NAT")
    run_figure(polar, out / "het_polar_spring.png",
               "polar-spring: NAT/ice from thermodynamics, sulfate gammas from T and H2O (issue 11)")
    run_figure(mid, out / "het_midlatitude.png",
               "midlatitude (222 K): sulfate gammas from T and H2O - HCl stays the main reservoir")
    print(f"figures in {out}/")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
