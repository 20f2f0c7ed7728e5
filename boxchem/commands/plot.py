"""``boxchem plot OUT.nc``: the standard figures of a run (or of a member file)."""
from __future__ import annotations

import argparse

from ._table import DEFAULT_SPECIES, add_member_option

EXAMPLE = """examples:
  boxchem plot out.nc                          # PNG figures into ./out-plots/
  boxchem plot out.nc -o figs --species O3 ClO BrO --log --format pdf
  boxchem plot out.nc --clock utc              # diurnal figure and days in UTC (default local solar)
  boxchem plot sweep.nc                        # member file: median and 5-95 % band across members
  boxchem plot sweep.nc --member 2             # one member, as a run

Writes: mixing ratios (daily mean and local-noon curves over the diurnal band
for long runs), diurnal cycles of ClO and Cl2O2 on complete days, ozone loss
rate by catalytic cycle with the accumulated loss, chlorine partitioning, and
the conditions (solar zenith angle with night at the box's own horizon,
temperature, surface area).  Every figure carries a title block with the
scenario, place, altitude/pressure and period.  A figure whose data the file
lacks is skipped with a note saying what is missing."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "plot", help="write the standard figures of a run result (or a member file)",
        description="Plot a boxchem result: mixing ratios, diurnal cycles, ozone loss by cycle, "
                    "chlorine partitioning and the conditions of the box.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("result", metavar="OUT.nc", help="netCDF file written by 'boxchem run' (or a member file)")
    p.add_argument("-o", "--output", default=None, metavar="DIR",
                   help="directory for the figures (default: OUT-plots next to the file)")
    p.add_argument("--species", nargs="+", default=None, metavar="X",
                   help="species of the mixing-ratio figure (default: those of "
                        f"{' '.join(DEFAULT_SPECIES)} in the result)")
    p.add_argument("--log", action="store_true", help="mixing ratios on one logarithmic axis")
    p.add_argument("--clock", choices=("utc", "local"), default="local", dest="clock",
                   help="clock of the diurnal figure and of the days of daily means: local mean solar "
                        "time at the box (default) or UTC")
    add_member_option(p)
    p.add_argument("--format", choices=("png", "pdf"), default="png", help="file format (default png)")
    p.set_defaults(func=run)


def run(args) -> int:
    import sys
    from pathlib import Path

    from ..diagnostics.members import is_members, select_member
    from ..diagnostics.result import ResultError, open_result
    from ..plotting import plot_all, plot_members
    ds = open_result(args.result)
    src = Path(args.result)
    outdir = Path(args.output) if args.output else src.with_name(f"{src.stem}-plots")
    if args.member is not None:
        if not is_members(ds):
            raise ResultError(f"--member {args.member}: {args.result} is a single run, not a member file")
        ds = select_member(ds, args.member)
    if is_members(ds):
        written, skipped = plot_members(ds, outdir, species=args.species, fmt=args.format)
    else:
        written, skipped = plot_all(ds, outdir, species=args.species, log=args.log, fmt=args.format,
                                    clock=args.clock)
    for path in written:
        print(path)
    for note in skipped:
        print(f"skipped {note}", file=sys.stderr)
    return 0
