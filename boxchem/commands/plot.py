"""``boxchem plot OUT.nc``: the standard figures of a run."""
from __future__ import annotations

import argparse

from .compare import DEFAULT_SPECIES   # the same list as boxchem.plotting's (checked by a test)

EXAMPLE = """examples:
  boxchem plot out.nc                          # PNG figures into ./out-plots/
  boxchem plot out.nc -o figs --species O3 ClO BrO --log --format pdf

Writes: mixing ratios, diurnal cycles of ClO and Cl2O2, ozone loss rate by
catalytic cycle (stacked) with the accumulated loss, chlorine partitioning,
and the solar zenith angle with night shaded.  A figure whose species the
run lacks is skipped with a note."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "plot", help="write the standard figures of a run result",
        description="Plot a boxchem result: mixing ratios, diurnal cycles, ozone loss by cycle, "
                    "chlorine partitioning and the solar zenith angle.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("result", metavar="OUT.nc", help="netCDF file written by 'boxchem run'")
    p.add_argument("-o", "--output", default=None, metavar="DIR",
                   help="directory for the figures (default: OUT-plots next to the file)")
    p.add_argument("--species", nargs="+", default=None, metavar="X",
                   help="species of the mixing-ratio figure (default: those of "
                        f"{' '.join(DEFAULT_SPECIES)} in the result)")
    p.add_argument("--log", action="store_true", help="mixing ratios on one logarithmic axis")
    p.add_argument("--format", choices=("png", "pdf"), default="png", help="file format (default png)")
    p.set_defaults(func=run)


def run(args) -> int:
    import sys
    from pathlib import Path

    from ..diagnostics.result import open_result
    from ..plotting import plot_all
    ds = open_result(args.result)
    src = Path(args.result)
    outdir = Path(args.output) if args.output else src.with_name(f"{src.stem}-plots")
    written, skipped = plot_all(ds, outdir, species=args.species, log=args.log, fmt=args.format)
    for path in written:
        print(path)
    for note in skipped:
        print(f"skipped {note}", file=sys.stderr)
    return 0
