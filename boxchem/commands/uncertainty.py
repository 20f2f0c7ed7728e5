"""``boxchem uncertainty SCENARIO --members N --metric ...``: Monte Carlo over the evaluated
uncertainties, and "is my change bigger than the uncertainty?"."""
from __future__ import annotations

import argparse
import sys

from .sensitivity import add_engine_options, engine_options, load_with_overrides

EXAMPLE = """examples:
  boxchem uncertainty polar-spring --members 200 --metric "O3 at 2026-10-01" -o mc.nc
  boxchem uncertainty polar-spring --members 100 --sampling random --seed 3 \\
        --metric "loss Ox over 2026-08-01..2026-10-01; share clo_dimer over 2026-09-01..2026-10-01"
  # is my new lab rate's effect bigger than the evaluated uncertainty?
  boxchem uncertainty polar-spring --metric "O3 at 2026-10-01" --members 200 --changed mine.mech
  boxchem uncertainty --baseline mc.nc --changed-scale clo_clo_m=1.3     # reuse a baseline

Member m multiplies every k (thermal k, J, surface gamma) by f(T)^(z/F), z standard
normal (--sampling lhs|random, --seed), f(T) = f298 exp|g (1/T - 1/298)| from the
mechanism's f298/g at the run's mean temperature (or --temperature), F = --f-sigma
(1: f is a one-sigma factor, the evaluations' reading).  Member 0 is the nominal run.
Writes OUT.nc (member dimension, summary), OUT-bands.png, OUT-histogram*.png,
OUT-contributions*.png and prints the summary table.  --changed takes a scenario (.toml)
or mechanism (.mech) file; the change of each metric is printed beside the baseline's
1-sigma spread."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "uncertainty", help="Monte Carlo uncertainty of metrics from the evaluated rate uncertainties",
        description="Monte Carlo analysis on the ensemble engine: each member scales every rate "
                    "by its evaluated uncertainty factor to a random power; summary table, "
                    "bands, histograms, contributions to the variance and a netCDF file with a "
                    "member dimension.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("scenario", metavar="SCENARIO", nargs="?", default=None,
                   help="shipped scenario name or path (not needed with --baseline)")
    p.add_argument("--metric", action="append", default=None, metavar="METRIC",
                   help="metric(s) (repeatable; syntax in 'boxchem sensitivity --help')")
    p.add_argument("--members", type=int, default=200, metavar="N", help="sample members (default 200)")
    p.add_argument("--seed", type=int, default=0, help="seed of the sample (default 0)")
    p.add_argument("--sampling", choices=("lhs", "random"), default="lhs",
                   help="Latin hypercube (default) or plain random sampling")
    p.add_argument("--f-sigma", type=float, default=1.0, metavar="F",
                   help="standard deviations of ln k that f spans (default 1; 2 = f is a 95 %% bound)")
    p.add_argument("--temperature", default=None, metavar="T",
                   help='temperature at which f(T) is evaluated, e.g. "195 K" (default: run mean)')
    p.add_argument("--species", default=None, metavar="SPECIES,...",
                   help="species with bands (default O3, if any)")
    p.add_argument("-o", "--output", default=None, metavar="OUT.nc",
                   help="output file (default SCENARIO-STEM-uncertainty.nc)")
    p.add_argument("--no-plot", action="store_true", help="do not write the figures")
    p.add_argument("--baseline", default=None, metavar="MC.nc",
                   help="reuse the Monte Carlo file of an earlier run as the baseline")
    p.add_argument("--changed", default=None, metavar="FILE",
                   help="a changed scenario (.toml) or mechanism (.mech): its change in each metric "
                        "is printed beside the baseline's spread")
    p.add_argument("--changed-scale", action="append", default=[], metavar="ID=FACTOR",
                   help="the change as rate factors on the baseline scenario (repeatable)")
    add_engine_options(p)
    p.set_defaults(func=main)


def summary_text(mc) -> str:
    a = mc.attrs
    lines = [f"{a.get('mc_members_used')} members used ({a.get('mc_members_failed', 0)} failed), "
             f"{a.get('mc_sampling')} sampling, seed {a.get('mc_seed')}, f at "
             f"{float(a.get('mc_temperature_K', float('nan'))):.1f} K read as "
             f"{float(a.get('mc_f_sigma', 1)):g} sigma",
             f"  f298 defaulted (no f298 in the mechanism): "
             f"{_shorten(str(a.get('mc_defaulted_reactions', '(none)')))}",
             f"  {'metric':44s} {'nominal':>11s} {'median':>11s} {'5 %':>11s} {'95 %':>11s} {'1-sigma':>8s}"]
    for m in mc["metric"].values:
        q = mc["metric_quantile"].sel(metric=m).values
        nominal = float(mc["metric_nominal"].sel(metric=m))
        spread = 100 * (float(__import__("numpy").exp(mc["metric_log_std"].sel(metric=m))) - 1)
        lines.append(f"  {str(m):44s} {nominal:11.4g} {q[1]:11.4g} {q[0]:11.4g} {q[2]:11.4g} {spread:7.1f}%")
        if "contribution" in mc:
            c = mc["contribution"].sel(metric=m).values
            import numpy as np
            order = np.argsort(-np.nan_to_num(c, nan=-1.0))[:5]
            top = ", ".join(f"{mc['parameter'].values[j]} {c[j]:.2f}" for j in order if np.isfinite(c[j]))
            r2 = float(mc["contribution_r2"].sel(metric=m))
            lines.append(f"      variance from (SRRC^2, R^2 = {r2:.2f}): {top}")
    return "\n".join(lines)


def _shorten(names: str, limit: int = 8) -> str:
    items = [n.strip() for n in names.split(",") if n.strip()]
    return names if len(items) <= limit else ", ".join(items[:limit]) + f", ... ({len(items)} in all)"


def change_text(rows) -> str:
    lines = ["change against the evaluated uncertainty:"]
    for r in rows:
        lines.append(f"  {r['metric']}: {r['change_percent']:+.1f} %; evaluation 1-sigma spread: "
                     f"{r['spread_percent']:.1f} %  ({r['ratio']:.2f} sigma, {r['verdict']})")
    return "\n".join(lines)


def _changed_scenario(base, args):
    from pathlib import Path

    from ..errors import ScenarioError
    from .run import parse_scale
    scenario = base
    if args.changed:
        path = Path(args.changed)
        if not path.exists():
            raise ScenarioError(f"--changed {args.changed}: no such file (give a scenario .toml or "
                                f"a mechanism .mech file)")
        if path.suffix == ".toml":
            scenario = load_with_overrides(str(path), args.overrides)
        elif path.suffix == ".mech":
            scenario = base.with_overrides(origins={"run.mechanism": f"--changed {args.changed}"},
                                           **{"run.mechanism": str(path.resolve())})
        else:
            raise ScenarioError(f"--changed {args.changed}: expected a scenario (.toml) or a "
                                f"mechanism (.mech) file, got {path.suffix or 'no suffix'!r}")
    if args.changed_scale:
        scenario = scenario.with_overrides(scale=parse_scale(args.changed_scale),
                                           origins={f"scale.{i.split('=')[0]}": f"--changed-scale {i}"
                                                    for i in args.changed_scale})
    return scenario


def main(args) -> int:
    import time
    from pathlib import Path

    import pandas as pd

    from ..analysis.sensitivity import run_ensemble
    from ..analysis.uncertainty import change_against_uncertainty, monte_carlo
    from ..diagnostics.metrics import parse_metrics, required_variables
    from ..errors import BoxchemError
    from ..io.netcdf import write_dataset
    from ..units import parse_quantity
    wall0 = time.perf_counter()
    if args.baseline:
        import xarray as xr
        if not Path(args.baseline).exists():
            raise BoxchemError(f"--baseline {args.baseline}: no such file (a file written by "
                               f"'boxchem uncertainty ... -o MC.nc')")
        mc = xr.load_dataset(args.baseline)
        if "metric_nominal" not in mc:
            raise BoxchemError(f"--baseline {args.baseline}: not a Monte Carlo result of "
                               f"'boxchem uncertainty' (no metric_nominal variable)")
        if not (args.changed or args.changed_scale):
            print(summary_text(mc))
            return 0
        # the baseline file records the scenario argument and --set items it was made with
        import json
        scenario_name = args.scenario or mc.attrs.get("mc_scenario_argument")
        if not scenario_name:
            raise BoxchemError(f"--baseline {args.baseline}: the file does not say which scenario "
                               f"it ran; give SCENARIO as well")
        settings = args.overrides or json.loads(mc.attrs.get("mc_scenario_settings", "[]"))
        base = load_with_overrides(scenario_name, settings)
    else:
        if not args.scenario or not args.metric:
            raise BoxchemError("uncertainty: give SCENARIO and --metric (or --baseline MC.nc); "
                               "e.g. boxchem uncertainty polar-spring --metric \"O3 at end\"")
        base = load_with_overrides(args.scenario, args.overrides)
        if args.changed or args.changed_scale:
            _changed_scenario(base, args)       # a bad --changed fails before the Monte Carlo
        temperature = None
        if args.temperature:
            temperature = parse_quantity(args.temperature, "temperature", default_unit="K", where="--temperature")
        mc = monte_carlo(base, args.metric, members=args.members, seed=args.seed,
                         sampling=args.sampling, f_sigma=args.f_sigma, temperature_K=temperature,
                         species=None if args.species is None else
                         [s for s in args.species.split(",") if s], **engine_options(args))
        import json
        mc.attrs["command"] = " ".join(["boxchem", *sys.argv[1:]])
        mc.attrs["mc_scenario_argument"] = str(args.scenario)
        mc.attrs["mc_scenario_settings"] = json.dumps(list(args.overrides))
        out = Path(args.output) if args.output else Path(f"{Path(str(args.scenario)).stem}-uncertainty.nc")
        write_dataset(mc, out)
        written = [str(out)]
        if not args.no_plot:
            written += _figures(mc, out, [str(v).removeprefix("band_") for v in mc.data_vars
                                          if str(v).startswith("band_") and v != "band_cycle_loss"])
        print(summary_text(mc))
        from .ensemble import print_conservation
        print_conservation(mc)
        print(f"{mc.sizes['member']} members in {time.perf_counter() - wall0:.1f} s; wrote "
              f"{', '.join(written)}")
    if args.changed or args.changed_scale:
        changed = _changed_scenario(base, args)
        labels = [str(m) for m in mc["metric"].values]
        defs = [str(d) for d in mc["metric_definition"].values]
        metrics = parse_metrics([d if d == lab else f"{lab} = {d}" for lab, d in zip(labels, defs)])
        one = run_ensemble(changed, pd.DataFrame({"member_label": ["changed"]}),
                           variables=required_variables(metrics), **engine_options(args))
        if int(one["member_status"].values[0]) != 1:
            raise BoxchemError(f"the changed run failed: {one['member_message'].values[0]}")
        print(change_text(change_against_uncertainty(mc, one, metrics)))
    failed = int(mc.attrs.get("mc_members_failed", 0))
    return 1 if failed else 0


def _figures(mc, out, species) -> list[str]:
    from ..analysis.sensitivity_figures import bands, contributions, histogram, save
    written = []
    for s in species:
        if f"band_{s}" in mc:
            written.append(str(save(bands(mc, s), out.with_name(f"{out.stem}-bands-{s}.png"))))
    for i, m in enumerate(mc["metric"].values):
        suffix = "" if mc.sizes["metric"] == 1 else f"-{i + 1}"
        written.append(str(save(histogram(mc, str(m)), out.with_name(f"{out.stem}-histogram{suffix}.png"))))
        if "contribution" in mc and (mc["contribution"].sel(metric=m).notnull()).any():
            written.append(str(save(contributions(mc, str(m)),
                                    out.with_name(f"{out.stem}-contributions{suffix}.png"))))
    return written
