"""``boxchem sensitivity SCENARIO --metric ...``: rank every rate by its local sensitivity."""
from __future__ import annotations

import argparse
import sys

EXAMPLE = """examples:
  boxchem sensitivity polar-spring --metric "O3 at 2026-10-01" -o sens.nc
  boxchem sensitivity polar-spring --metric "loss Ox over 2026-08-01..2026-10-01" \\
        --metric "share clo_dimer over 2026-09-01..2026-10-01" --species O3,ClO --top 15
  boxchem sensitivity polar-spring --metric "O3 at end" --set 'run.start="2026-09-20T00:00:00Z"' \\
        --set 'run.duration="5 d"' --initial all --workers 2
  boxchem sensitivity polar-spring --metric "O3 at 2026-10-01" --global sobol --global-top 6

Metrics (several with ';' or repeated --metric):
  SPECIES at TIME                      e.g. O3 at 2026-10-01, ClO at start+10d
  mean|noon|max|min SPECIES on DATE    or ... over TIME..TIME
  loss [FAMILY] [by CYCLE] over PERIOD accumulated loss [mol mol-1], total or by cycle
  share CYCLE over PERIOD              a cycle's fraction of the total loss
--method tangent: one tangent-linear run carries d y/d ln k of every reaction (thermal
k, J, surface gamma) on the nominal run's own steps; --method differences varies each
by exp(+-h) in one batched ensemble (central differences, h = 0.05; the check); the
default auto takes the tangent, which also differentiates the state feedback (surfaces
following the composition, the NAT/STS/ice phase equilibrium), unless the ozone column
follows the box (not differentiated; then the differences): docs/sensitivity-uncertainty.md.
Writes OUT.nc (sensitivities, time-resolved species sensitivities), OUT-tornado.png and
prints the ranking."""


def add_engine_options(p) -> None:
    """--workers, --scheduler, --batch-size, --member-file, --set, -q (shared with uncertainty)."""
    p.add_argument("--set", metavar="SECTION.KEY=VALUE", action="append", default=[],
                   dest="overrides", help='override a scenario value, e.g. run.duration="5 d" (repeatable)')
    p.add_argument("--workers", type=int, default=None, metavar="N",
                   help="worker processes on this machine (default: the engine's choice)")
    p.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="run the members on a dask.distributed cluster (tcp://host:8786)")
    p.add_argument("--batch-size", type=int, default=None, metavar="N",
                   help="members integrated together in one batch (default: the engine's choice)")
    p.add_argument("--member-file", default=None, metavar="MEMBERS.nc",
                   help="also keep the engine's member file (streamed while members finish)")
    from .ensemble import add_strict_option
    add_strict_option(p)
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar")


def engine_options(args) -> dict:
    return {"workers": args.workers, "scheduler": args.scheduler, "batch_size": args.batch_size,
            "output": args.member_file, "progress": not args.quiet, "strict": args.strict}


def load_with_overrides(name: str, overrides: list[str]):
    """The scenario with its ``--set`` values; file paths typed there are read from the
    working folder (as ``boxchem run`` does) and errors name the option."""
    from ..scenario import load_scenario, paths_from_working_folder
    from .run import _toml_value, parse_assignments
    settings = parse_assignments(overrides, "--set")
    scenario = load_scenario(name)
    if settings:
        values = paths_from_working_folder({k: _toml_value(v) for k, v in settings.items()})
        scenario = scenario.with_overrides(origins={k: f"--set {k}={v}" for k, v in settings.items()},
                                           **values)
    return scenario


def _names(text: str | None):
    if not text:
        return ()
    if text == "all":
        return "all"
    return [t.strip() for t in text.split(",") if t.strip()]


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "sensitivity", help="local sensitivity of metrics to every rate coefficient, J and gamma",
        description="Normalised local sensitivities d ln(metric)/d ln(k) of every reaction by "
                    "one tangent-linear run (default) or batched finite differences on the "
                    "ensemble engine: a ranking table, a tornado plot and a netCDF file.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("scenario", metavar="SCENARIO", help="shipped scenario name or path to a .toml file")
    p.add_argument("--metric", action="append", required=True, metavar="METRIC",
                   help="what to differentiate (repeatable; see below)")
    p.add_argument("--reactions", default="all", metavar="ID,ID,...|all",
                   help="reactions to vary (default all)")
    p.add_argument("--initial", default=None, metavar="SPECIES,...|all",
                   help="also differentiate with respect to these initial mole fractions")
    p.add_argument("--method", choices=("auto", "tangent", "differences"), default="auto",
                   help="tangent (one run with forward sensitivities), differences (central "
                        "differences on the ensemble engine; the check) or auto (default: the "
                        "tangent, which differentiates the surfaces' and the phase equilibrium's "
                        "feedback, unless the ozone column follows the box: then differences)")
    p.add_argument("--step", type=float, default=None, metavar="H",
                   help="finite-difference step in ln k (--method differences; default 0.05)")
    p.add_argument("--scheme", choices=("central", "forward"), default="central",
                   help="central (default, 2N+1 members) or forward differences (N+1 members)")
    p.add_argument("--species", default=None, metavar="SPECIES,...",
                   help="species whose time-resolved sensitivities are written (default O3, if any)")
    p.add_argument("--top", type=int, default=20, metavar="N", help="rows printed and plotted (default 20)")
    p.add_argument("-o", "--output", default=None, metavar="OUT.nc",
                   help="output file (default SCENARIO-STEM-sensitivity.nc)")
    p.add_argument("--no-plot", action="store_true", help="do not write the tornado plot")
    p.add_argument("--csv", default=None, metavar="RANKING.csv", help="also write the ranking as CSV")
    p.add_argument("--global", dest="global_method", choices=("sobol", "morris"), default=None,
                   help="then global indices (SALib) over the top reactions of the local ranking")
    p.add_argument("--global-top", type=int, default=6, metavar="N",
                   help="reactions in the global analysis (default 6)")
    p.add_argument("--global-samples", type=int, default=32, metavar="N",
                   help="Sobol base sample (power of 2) or Morris trajectories (default 32)")
    p.add_argument("--seed", type=int, default=0, help="seed of the global sample (default 0)")
    add_engine_options(p)
    p.set_defaults(func=main)


def ranking_text(result, metric: str, top: int) -> str:
    from ..analysis.sensitivity import ranking
    rows = ranking(result, metric, top)
    value = float(result["metric_value"].sel(metric=metric))
    lines = [f"{metric}  (nominal {value:.4g} {result['metric_units'].sel(metric=metric).item()})",
             f"  {'rank':>4s}  {'S':>9s}  {'kind':10s}  {'parameter':24s} equation"]
    for r in rows:
        name = r["parameter"].split(".", 1)[1]
        lines.append(f"  {r['rank']:4d}  {r['sensitivity']:+9.4f}  {r['kind']:10s}  {name:24s} {r['equation']}")
    return "\n".join(lines)


def main(args) -> int:
    import time
    from pathlib import Path

    from ..analysis.sensitivity import DEFAULT_STEP, local_sensitivities, ranking
    from ..io.netcdf import write_dataset
    scenario = load_with_overrides(args.scenario, args.overrides)
    reactions = _names(args.reactions) or "all"
    if args.step is not None or args.scheme != "central":
        if args.method == "tangent":
            from ..errors import BoxchemError
            raise BoxchemError("--step and --scheme set the finite differences; add --method "
                               "differences to use them (the tangent-linear run needs no step)")
        args.method = "differences"
    wall0 = time.perf_counter()
    result = local_sensitivities(scenario, args.metric, reactions=reactions,
                                 initial=_names(args.initial) or (),
                                 step=args.step or DEFAULT_STEP, scheme=args.scheme,
                                 species=None if args.species is None else list(_names(args.species)),
                                 method=args.method, **engine_options(args))
    out = Path(args.output) if args.output else Path(f"{Path(str(args.scenario)).stem}-sensitivity.nc")
    result.attrs["command"] = " ".join(["boxchem", *sys.argv[1:]]) if sys.argv else ""
    metrics = [str(m) for m in result["metric"].values]
    if args.global_method:
        # global indices for the first metric, over the top reactions of its local ranking
        from ..analysis.globalsa import model_indices, top_parameters
        chosen = top_parameters(result, args.global_top, metrics[0])
        g = model_indices(scenario, [metric_text(result, metrics[0])], chosen,
                          method=args.global_method, n=args.global_samples, seed=args.seed,
                          **engine_options(args))
        for name, var in g.data_vars.items():
            result[f"global_{name}"] = var.isel(metric=0, drop=True).rename(parameter="global_parameter")
        result.attrs.update(global_metric=metrics[0], global_method=args.global_method,
                            global_members=g.attrs["samples"],
                            global_failed_members=g.attrs["failed_members"],
                            global_parameter_space=g.attrs["parameters_space"])
    write_dataset(result, out)
    written = [str(out)]
    if not args.no_plot:
        from ..analysis.sensitivity_figures import save, tornado
        for i, metric in enumerate(metrics):
            png = out.with_name(f"{out.stem}-tornado{'' if len(metrics) == 1 else f'-{i + 1}'}.png")
            written.append(str(save(tornado(result, metric, args.top), png)))
    if args.csv:
        from ._csv import csv_text
        rows = [{"metric": m, **r} for m in metrics for r in ranking(result, m)]
        Path(args.csv).write_text(csv_text(rows, ["metric", "rank", "parameter", "kind", "sensitivity",
                                                  "equation"]))
        written.append(args.csv)
    for metric in metrics:
        print(ranking_text(result, metric, args.top))
        if metric == result.attrs.get("global_metric"):
            print(global_text(result))
    failed = int(result.attrs.get("failed_members", 0))
    print(f"method: {result.attrs.get('method_choice', result.attrs.get('sensitivity_method'))}")
    if result.attrs.get("sensitivity_method") == "tangent" and result.attrs.get("state_dependent_k"):
        missing = result.attrs.get("not_differentiated", "none")
        print(f"tangent feedback: {result.attrs.get('tangent_feedback')}" + (
            "" if missing == "none" else f"; not differentiated: {missing} (taken as observed; check "
            "with --method differences)"))
    if result.attrs.get("sensitivity_method") == "tangent":
        print(f"one tangent-linear run ({result.sizes['parameter']} parameters, "
              f"{result.attrs['tangent_steps']} steps) in {time.perf_counter() - wall0:.1f} s; "
              f"wrote {', '.join(written)}")
    else:
        from .ensemble import print_conservation
        print_conservation(result.attrs.get("conservation_summary"))
        print(f"{result.attrs['ensemble_members']} members ({failed} failed) in "
              f"{time.perf_counter() - wall0:.1f} s; wrote {', '.join(written)}")
    return 1 if failed else 0


def metric_text(result, label: str) -> str:
    definition = str(result["metric_definition"].sel(metric=label).item())
    return definition if definition == label else f"{label} = {definition}"


def global_text(result) -> str:
    a = result.attrs
    lines = [f"  global indices ({a['global_method']}, {a['global_members']} members, "
             f"{a['global_failed_members']} failed; {a['global_parameter_space']}):"]
    names = [str(p) for p in result["global_parameter"].values]
    keys = [k for k in ("S1", "ST", "mu_star", "sigma") if f"global_{k}" in result]
    lines.append(f"    {'reaction':24s} " + " ".join(f"{k:>8s}" for k in keys))
    for i, n in enumerate(names):
        lines.append(f"    {n:24s} " + " ".join(f"{float(result[f'global_{k}'].values[i]):8.3f}"
                                              for k in keys))
    return "\n".join(lines)
