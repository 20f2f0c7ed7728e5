"""``boxchem summary OUT.nc``: the key numbers of a result (one run, one member, or across members)."""
from __future__ import annotations

import argparse

from ._table import add_member_option

EXAMPLE = """examples:
  boxchem summary out.nc                # ozone loss, cycles, ClO peak, activation dates
  boxchem summary sweep.nc              # member file: members table, median and 5-95 % range
  boxchem summary sweep.nc --member 3   # one member in full

Times are given in UTC and in local mean solar time at the box (UTC +
longitude / 15 h).  The fastest-loss day is a local solar day.  Member files
saved without reaction_rate give the loss by cycle only (no total)."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "summary", help="key numbers of a result: ozone loss, cycles, ClO peak, dates",
        description="Summarise a boxchem result: ozone at start, end and minimum, the accumulated "
                    "loss by catalytic cycle, the fastest-loss day, largest ClO, chlorine activation "
                    "and deactivation; for a member file, the members and the median and 5-95 % range.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("result", metavar="OUT.nc", help="netCDF file written by 'boxchem run' (or a member file)")
    add_member_option(p)
    p.set_defaults(func=run)


def run(args) -> int:
    from ..diagnostics.members import is_members, select_member
    from ..diagnostics.result import ResultError, open_result
    from ..diagnostics.summary import (format_member_summary, format_summary, scenario_name,
                                       summarize, summarize_across_members)
    ds = open_result(args.result)
    if args.member is not None:
        if not is_members(ds):
            raise ResultError(f"--member {args.member}: {args.result} is a single run, not a member file")
        ds = select_member(ds, args.member)
    if is_members(ds):
        print(format_member_summary(summarize_across_members(ds), source=args.result), end="")
        return 0
    heading = "boxchem summary" + (f" of member {ds.attrs['member_index']} ({ds.attrs['member_label']}: "
                                   f"{ds.attrs['member_settings']})" if "member_index" in ds.attrs else "")
    print(format_summary(summarize(ds), scenario=scenario_name(ds) or args.result, heading=heading), end="")
    return 0
