"""``boxchem fit DATA --law LAW``: fit measured k(T, [M]) and write a ready-to-run mechanism."""
from __future__ import annotations

import argparse
import shlex
import sys
from pathlib import Path

import numpy as np

from ..errors import BoxchemError

EXAMPLE = """examples:
  boxchem fit examples/lab-fit/cl_o3_lab.csv --law arrhenius --reaction cl_o3 -o cl_o3_fit.mech --plot cl_o3.png
  boxchem fit examples/lab-fit/clo_clo_m_lab.tsv --law falloff --reaction clo_clo_m \\
      --mechanism stratosphere -o snippet.mech --plot fit.png
  boxchem fit examples/lab-fit/cl2o2_equilibrium_lab.txt --law equilibrium --reaction cl2o2_m
  boxchem fit one_temperature.csv --law falloff --fix n=3.6 --fix m=1.6

The data file: one measurement per line, columns separated by commas, tabs or
spaces, units in the header, '#' comments (docs/lab-data.md), e.g.
  T [K], p [Torr], k [cm3 molecule-1 s-1], k_err [%], bath
Laws: arrhenius (A, E/R), modified-arrhenius (A, n, E/R; k = A (T/Tref)^n
exp(-(E/R)/T)), falloff (k0, n, kinf, m; Fc fixed with --fc or fitted with
--fit-fc), equilibrium (K = A exp(B/T) from k_forward/k_reverse or K columns).
Uncertainties: parameters at 1 sigma; f298 = exp(1-sigma of ln k at 298 K)
and g the smallest value whose f(T) covers the 1-sigma band over the data.
-o writes a mechanism that extends --mechanism and changes --reaction;
point a scenario's [run] mechanism at it."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "fit", help="fit rate parameters (with uncertainties) to measured k; write a mechanism",
        description="Weighted least-squares fit of measured rate coefficients to a rate law of the "
                    "mechanism language, with covariance, confidence band, f298/g, residuals and "
                    "outliers; writes a mechanism replacing the shipped reaction and a plot.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("data", metavar="DATA", help="table of measured k (CSV, tab or space separated)")
    p.add_argument("--law", required=True,
                   choices=("arrhenius", "modified-arrhenius", "falloff", "equilibrium"),
                   help="rate law to fit")
    p.add_argument("--reaction", metavar="ID", help="reaction id the fit replaces (needed for -o and "
                   "to show the shipped value in the plot)")
    p.add_argument("--mechanism", default="stratosphere", metavar="MECH",
                   help="mechanism holding --reaction (shipped name or path; default stratosphere)")
    p.add_argument("-o", "--output", metavar="OUT.mech", help="write a mechanism that extends MECH and "
                   "replaces ID with the fitted line")
    p.add_argument("--plot", metavar="PNG", help="write the figure (Arrhenius plot; k against [M] for falloff)")
    p.add_argument("--tref", type=float, metavar="K", help="reference temperature of (T/Tref)^n "
                   "(default: that of the replaced line, else 300)")
    fc = p.add_mutually_exclusive_group()
    fc.add_argument("--fc", type=float, metavar="FC", help="fixed broadening factor for falloff "
                    "(default: that of the replaced line, else 0.6)")
    fc.add_argument("--fit-fc", action="store_true", help="fit Fc as well (falloff)")
    p.add_argument("--fix", action="append", default=[], metavar="KEY=VALUE",
                   help="keep a parameter at a value instead of fitting it (repeatable), e.g. "
                        "--fix n=3.6 --fix m=1.6 for falloff data at one temperature")
    p.add_argument("--bath", metavar="GAS", help="use only the rows with this bath gas")
    p.add_argument("--residuals", metavar="CSV", help="write every point with its fitted value, residual, "
                   "standardised residual and outlier flag")
    p.add_argument("--drop-outliers", action="store_true",
                   help="fit once, then fit again without the flagged outliers (listed in the output)")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..analysis.ratefit import fit_rate_table, mechanism_snippet
    from ..io.labdata import read_rate_table
    from .fit_plots import plot_rate_fit, write_text_atomic

    for option, value in (("-o", args.output), ("--plot", args.plot), ("--residuals", args.residuals)):
        if value and not Path(value).resolve().parent.is_dir():
            raise BoxchemError(f"{option} {value}: folder {str(Path(value).parent)!r} does not exist")
    if args.plot and Path(args.plot).suffix.lower() not in (".png", ".pdf", ".svg"):
        raise BoxchemError(f"--plot {args.plot}: give a .png, .pdf or .svg file name")
    if args.output and not args.reaction:
        raise BoxchemError("-o needs --reaction ID: the reaction the fitted line replaces")
    if args.tref is not None and not args.tref > 0:
        raise BoxchemError(f"--tref {args.tref:g}: must be a positive temperature in K")
    if args.fc is not None and not 0 < args.fc <= 1:
        raise BoxchemError(f"--fc {args.fc:g}: must be in (0, 1]")

    table = read_rate_table(args.data)
    if args.bath:
        keep = np.array([b == args.bath for b in table.bath_gas])
        if not keep.any():
            found = sorted(set(table.bath_gas) - {""}) or ["none given"]
            raise BoxchemError(f"--bath {args.bath}: no rows with that bath gas in {args.data}; "
                               f"bath gases there: {', '.join(found)}")
        table = table.select(keep)

    mechanism = reaction = None
    if args.reaction:
        from ..mechanism import load_mechanism
        mechanism = load_mechanism(args.mechanism)
        ids = [r.id for r in mechanism.reactions]
        if args.reaction not in ids:
            import difflib
            hint = difflib.get_close_matches(args.reaction, ids, n=1)
            raise BoxchemError(f"--reaction: no reaction {args.reaction!r} in {args.mechanism}"
                               + (f" - did you mean {hint[0]!r}?" if hint else ""))
        reaction = mechanism.reactions[ids.index(args.reaction)]
    tref = args.tref
    if tref is None:
        tref = float(reaction.parameters.get("Tref", 300.0)) if reaction is not None else 300.0
    fc = None if args.fit_fc else args.fc
    if fc is None and not args.fit_fc:
        fc = float(reaction.parameters.get("Fc", 0.6)) if reaction is not None else 0.6

    fixed = {}
    for item in args.fix:
        key, sep, value = item.partition("=")
        try:
            fixed[key.strip()] = float(value)
        except ValueError:
            raise BoxchemError(f"--fix {item}: write KEY=NUMBER, e.g. --fix n=3.6") from None
        if not sep or not key.strip():
            raise BoxchemError(f"--fix {item}: write KEY=NUMBER, e.g. --fix n=3.6")
    fit = fit_rate_table(table, args.law, tref=tref, fc=fc, fixed=fixed)
    if args.drop_outliers and fit.outliers.any():
        dropped = fit.table.line[fit.outliers]
        print(report(fit))
        print(f"refitting without the {dropped.size} flagged outlier(s): {args.data} line(s) "
              + ", ".join(str(x) for x in dropped))
        fit = fit_rate_table(table.select(~fit.outliers), args.law, tref=tref, fc=fc, fixed=fixed)
        fit.notes.append("outliers of a first fit dropped: file line(s) " + ", ".join(str(x) for x in dropped))
    text = None
    if args.output:
        # built (and parsed back) before anything is printed or written: a unit or law mismatch
        # with the replaced reaction is an input error
        out = Path(args.output)
        command = "boxchem " + " ".join(shlex.quote(a) for a in sys.argv[1:]) if sys.argv[1:2] == ["fit"] \
            else ""
        text = mechanism_snippet(fit, mechanism, args.reaction, base=_include_name(args.mechanism, out),
                                 base_dir=out.resolve().parent, command=command)
    print(report(fit))
    if text is not None:
        write_text_atomic(args.output, text)
        print(f"wrote {args.output} (extend it, or point a scenario's [run] mechanism at it)")
    if args.residuals:
        write_text_atomic(args.residuals, residual_table(fit))
        print(f"wrote {args.residuals}")
    if args.plot:
        plot_rate_fit(fit, args.plot, reaction=reaction, mechanism=mechanism)
        print(f"wrote {args.plot}")
    return 0


def _include_name(mechanism_arg: str, out: Path) -> str:
    """How the written mechanism names its base: a shipped name as is, a file relative to OUT."""
    import os

    from ..resources import resolve, shipped_dir
    path = resolve(mechanism_arg, "mechanisms")
    if path.parent.resolve() == shipped_dir("mechanisms").resolve() and mechanism_arg == path.stem:
        return mechanism_arg
    return os.path.relpath(path.resolve(), out.resolve().parent)


def report(fit) -> str:
    """The text the command prints: parameters +- 1 sigma, statistics, f298/g, outliers, notes."""
    tab = fit.table
    p, s = fit.parameters, fit.parameter_sigmas
    lines = [f"{tab.source}: {fit.law} fit, {fit.summary()}"]
    for key in s:
        lines.append(f"  {key:<5} = {p[key]:.5g} +- {s[key]:.3g} (1 sigma, {abs(s[key] / p[key]) * 100:.3g} %)"
                     if p[key] else f"  {key:<5} = {p[key]:.5g} +- {s[key]:.3g} (1 sigma)")
    fixed = [f"{k}={p[k]:g}" for k in p if k not in s and not (fit.law == "arrhenius" and k in ("n", "Tref"))]
    if fixed:
        lines.append(f"  fixed: {', '.join(fixed)}")
    r = fit.result
    if fit.weighted:
        lines.append(f"  chi2 = {r.chi2:.3g} for {r.dof} degrees of freedom (chi2/dof = {r.reduced_chi2:.3g})")
    if len(fit.names) > 1:
        corr = fit.correlation
        pairs = [f"{fit.names[i]}/{fit.names[j]} {corr[i, j]:+.3f}"
                 for i in range(len(fit.names)) for j in range(i + 1, len(fit.names))]
        lines.append("  correlation: " + ", ".join(pairs))
    q = "K" if fit.law == "equilibrium" else "k"
    unit = "cm3 molecule-1" if q == "K" else ("cm3 molecule-1 s-1" if fit.law == "falloff"
                                               else _long_units(tab.value_units))
    where = ""
    if fit.law == "falloff":
        where = f" at [M] = {_mean_density(fit):.3g} cm-3 (geometric mean of the data)"
    lines.append(f"  f298 = {fit.f298:.4g}, g = {fit.g:.4g} K (1 sigma); {q}(298 K){where} = "
                 f"{_value_at_298(fit):.4g} {unit}")
    z = fit.standardised_residuals
    for i in np.flatnonzero(fit.outliers):
        lines.append(f"  outlier: {tab.source}:{tab.line[i]}: T = {tab.temperature[i]:g} K, "
                     f"{q} = {fit.k_effective[i]:.4g}, standardised residual {z[i]:+.2f} (kept in the fit)")
    lines += [f"  note: {n}" for n in fit.notes]
    return "\n".join(lines)


RESIDUAL_COLUMNS = ["line", "temperature_K", "air_density_cm-3", "bath", "measured", "fitted", "units",
                    "rel_sigma", "residual_ln", "standardised_residual", "outlier"]


def residual_table(fit) -> str:
    """CSV of every point: file line, conditions, measured and fitted value, residuals, outlier flag."""
    from ._csv import csv_text

    tab = fit.table
    fitted = np.exp(fit.ln_k(tab.temperature, tab.air_density if fit.law == "falloff" else None))
    units = "cm3 molecule-1" if fit.law == "equilibrium" else \
        ("cm3 molecule-1 s-1" if fit.law == "falloff" else _long_units(tab.value_units))
    rows = [{"line": int(tab.line[i]), "temperature_K": float(tab.temperature[i]),
             "air_density_cm-3": float(tab.air_density[i]), "bath": tab.bath_gas[i],
             "measured": float(fit.k_effective[i]), "fitted": float(fitted[i]), "units": units,
             "rel_sigma": float(fit.rel_sigma[i]), "residual_ln": float(fit.residuals_ln[i]),
             "standardised_residual": float(fit.standardised_residuals[i]),
             "outlier": int(fit.outliers[i])} for i in range(len(tab))]
    head = (f"# residuals of the {fit.law} fit to {tab.source}: residual_ln = ln(measured) - ln(fitted); "
            "standardised = externally studentised; outlier = |standardised| > 3\n")
    return head + csv_text(rows, RESIDUAL_COLUMNS)


def _long_units(units: str) -> str:
    return {"cm3 s-1": "cm3 molecule-1 s-1", "cm6 s-1": "cm6 molecule-2 s-1"}.get(units, units)


def _mean_density(fit) -> float:
    return float(np.exp(np.mean(np.log(fit.table.air_density))))


def _value_at_298(fit) -> float:
    if fit.law == "falloff":
        return float(np.exp(fit.ln_k(298.0, _mean_density(fit))))
    return float(np.exp(fit.ln_k(298.0)))
