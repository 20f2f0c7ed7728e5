"""``boxchem fit-traces TRACE...``: kinetic traces -> the k(T, [M]) table ``boxchem fit`` reads."""
from __future__ import annotations

import argparse
import datetime as _dt
import shlex
import sys
from pathlib import Path

from ..errors import BoxchemError

EXAMPLE = """examples:
  boxchem fit-traces examples/lab-fit/traces/clo_*.csv -o clo_k.csv --plot clo_traces.png
  boxchem fit clo_k.csv --law falloff --reaction clo_clo_m -o clo_fit.mech --plot clo_fit.png
  boxchem fit-traces examples/lab-fit/traces/cl_o3_*.txt --baseline -o cl_o3_k.csv --plot pfo.png

A trace file holds its conditions as 'key = value' lines, then a header and
one row per time (docs/lab-data.md):
  kind = second-order          (or pseudo-first-order, with co_reactant = 1.2e14 cm-3)
  T = 250 K
  p = 100 Torr                 (or M = 3.9e18 cm-3)
  bath = N2
  cross_section = 6.5e-18 cm2  (absorbance traces of a second-order decay)
  path_length = 80 cm
  t [ms], absorbance [base e]
Second order: d[A]/dt = -2k[A]^2 (- k1[A] with --first-order-loss); one row
per trace.  Pseudo-first order: S0 exp(-k't) (+ baseline); k from the slope
of k' against [B], one row per (T, [M], bath).  Uncertainties 1 sigma."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "fit-traces", help="fit flash-photolysis traces to k; write the k(T, [M]) table",
        description="Fit second-order (self-reaction) or pseudo-first-order kinetic traces, write "
                    "the resulting k(T, [M]) table (input of 'boxchem fit') and a plot of every trace.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("traces", nargs="+", metavar="TRACE", help="trace files")
    p.add_argument("-o", "--output", metavar="TABLE.csv", help="write the k(T, [M]) table here "
                   "(default: print it)")
    p.add_argument("--plot", metavar="PNG", help="figure of every trace with its fit (pseudo-first "
                   "order also writes PNG's stem + '-kprime' with k' against [B])")
    p.add_argument("--baseline", action="store_true", help="fit a constant baseline offset as well")
    p.add_argument("--first-order-loss", action="store_true",
                   help="second order: fit a first-order loss k1 as well (d[A]/dt = -2k[A]^2 - k1[A])")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..analysis.traces import common_uncertainty, fit_traces, rate_table_text
    from ..io.labdata import read_trace
    from .fit_plots import plot_pseudo_first_order, plot_traces, write_text_atomic

    for option, value in (("-o", args.output), ("--plot", args.plot)):
        if value and not Path(value).resolve().parent.is_dir():
            raise BoxchemError(f"{option} {value}: folder {str(Path(value).parent)!r} does not exist")
    if args.plot and Path(args.plot).suffix.lower() not in (".png", ".pdf", ".svg"):
        raise BoxchemError(f"--plot {args.plot}: give a .png, .pdf or .svg file name")
    traces = [read_trace(path) for path in args.traces]
    fits, lines, rows = fit_traces(traces, baseline=args.baseline, first_order_loss=args.first_order_loss)

    for f in fits:
        tr = f.trace
        extra = "" if f.k_sigma == f.k_sigma_fit else \
            f" (fit {f.k_sigma_fit / f.k * 100:.2g} %, cross section {tr.cross_section_rel_sigma * 100:.2g} %)"
        chi = f"chi2/dof {f.reduced_chi2:.2f}" if tr.signal_sigma is not None else "noise from scatter"
        unit = "cm3 molecule-1 s-1" if f.label == "k" else "s-1"
        print(f"{tr.source}: {tr.temperature:g} K, [M] {tr.air_density:.3g} cm-3: {f.label} = {f.k:.4g} "
              f"+- {f.k_sigma:.2g} {unit}{extra}; {chi}", file=sys.stderr)
    for line in lines:
        print(f"k' against [B] at {line.temperature:g} K, [M] {line.air_density:.3g} cm-3 "
              f"({len(line.sources)} traces): k = {line.k:.4g} +- {line.k_sigma:.2g} cm3 molecule-1 s-1, "
              f"intercept k_d = {line.intercept:.3g} +- {line.intercept_sigma:.2g} s-1", file=sys.stderr)

    kind = traces[0].kind
    options = [o for o, on in (("baseline fitted", args.baseline),
                               ("first-order loss fitted", args.first_order_loss)) if on]
    comments = [f"k(T, [M]) from {len(traces)} {kind} trace(s) by boxchem fit-traces, "
                f"{_dt.datetime.now(_dt.timezone.utc).strftime('%Y-%m-%d %H:%M UTC')}",
                "command: boxchem " + " ".join(shlex.quote(a) for a in sys.argv[1:])
                if sys.argv[1:2] == ["fit-traces"] else "written through the Python API",
                "k_err: 1 sigma, from each trace's fit" + ("; common_uncertainty: the cross section's, "
                                                          "shared by every row" if common_uncertainty(traces) else ""),
                "second order: rate = k [A]^2, d[A]/dt = -2 k [A]^2" if kind == "second-order" else
                "pseudo first order: k = slope of k' against [B] at each condition"]
    if options:
        comments.append("options: " + ", ".join(options))
    text = rate_table_text(rows, comments, common_uncertainty(traces))
    if args.output:
        write_text_atomic(args.output, text)
        print(f"wrote {args.output} ({len(rows)} rows; fit it with 'boxchem fit {args.output} --law ...')",
              file=sys.stderr)
    else:
        sys.stdout.write(text)
    if args.plot:
        plot_traces(fits, args.plot)
        print(f"wrote {args.plot}", file=sys.stderr)
        if lines:
            p = Path(args.plot)
            kp = p.with_name(p.stem + "-kprime" + p.suffix)
            plot_pseudo_first_order(lines, kp)
            print(f"wrote {kp}", file=sys.stderr)
    return 0
