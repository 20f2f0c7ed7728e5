"""``boxchem compare BASE.nc OTHER.nc``: what changed between two runs (and what caused it)."""
from __future__ import annotations

import argparse

from ._csv import csv_text
from ._table import add_member_option, format_table, value_with_range

EXAMPLE = """examples:
  boxchem run polar-spring -o base.nc
  boxchem run polar-spring --scale clo_clo_m=1.2 -o faster_dimer.nc
  boxchem compare base.nc faster_dimer.nc --plot compare.png
  boxchem compare base.nc faster_dimer.nc --at 2026-10-01 2026-09-15T12:00
  boxchem compare base.nc sweep.nc                  # every member of a sweep against BASE (median, range)
  boxchem compare base.nc sweep.nc --other-member 3 --format csv
  boxchem compare base.nc mine.nc --at 2026-10-01 --spread base-uncertainty.nc

First the reactions whose law, parameters or [scale] factor differ (read from
the two files), and warnings when the runs differ in scenario, place or
period.  Then species and the accumulated ozone loss by cycle at the time of
the largest O3 difference, at the end and at the --at dates (nearest output
time), and the reactions whose net effect on the Ox budget (and on the
budgets of the species the changed reactions touch) changed most, with
reverse pairs netted (docs/diagnostics.md).  Changes are OTHER relative to BASE."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "compare", help="compare two results: what changed, when, by which cycle and reaction",
        description="Compare two boxchem results: changed reactions, species and accumulated ozone "
                    "loss by catalytic cycle at chosen times, and the reactions whose net effect "
                    "changed most; as a table and optionally a plot.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("base", metavar="BASE.nc", help="reference result")
    p.add_argument("other", metavar="OTHER.nc", help="result to compare with the reference")
    p.add_argument("--at", nargs="+", default=[], metavar="TIME",
                   help="further UTC dates/times (ISO, e.g. 2026-10-01 or 2026-09-15T12:00)")
    p.add_argument("--times", nargs="+", default=None, metavar="TIME",
                   help="replace the default times (largest O3 difference, end) by these "
                        "(ISO, 'start' or 'end')")
    p.add_argument("--species", nargs="+", default=None, metavar="X",
                   help="species to list (default those of O3 ClO Cl2O2 HCl ClONO2 HOCl BrO NO2 HNO3 present)")
    p.add_argument("--family", default="Ox", help="family whose loss is split by cycle (default Ox)")
    p.add_argument("--top", type=int, default=10, metavar="N", help="reaction-rate changes to list (default 10)")
    add_member_option(p, "--base-member", "base_member", "member of BASE when it is a member file")
    add_member_option(p, "--other-member", "other_member",
                      "member of OTHER when it is a member file; without it every successful member is "
                      "compared with BASE and the table gives the median [5 %%, 95 %%]")
    p.add_argument("--spread", default=None, metavar="MEMBERS.nc",
                   help="a member file of BASE's uncertainty (e.g. an ensemble of perturbed rates): each "
                        "change is set beside half the members' 5-95 %% range at the same time")
    p.add_argument("--plot", default=None, metavar="FILE", help="also write a figure (.png or .pdf)")
    p.add_argument("--format", choices=("text", "csv"), default="text", help="output format (default text)")
    p.set_defaults(func=run)


def _f(row, field, fmt):
    return value_with_range(row, field, fmt) if field in row else ""


def render_text(rows: list[dict], base_name: str, other_name: str, heading: str = "") -> str:
    out = [f"Comparison: OTHER = {other_name} against BASE = {base_name}"]
    if heading:
        out.append(heading)
    notes = [r for r in rows if r["section"] == "note"]
    for r in notes:
        out.append(f"WARNING: {r['term']}" if not r["term"].startswith(("BASE has no", "OTHER has no"))
                   else f"note: {r['term']}")
    ch = [r for r in rows if r["section"] == "changed_reaction"]
    if ch:
        out.append(format_table(["reaction", "equation", "what", "BASE", "OTHER"],
                                [[r["term"], r["equation"], r["how"], r["base"], r["other"]] for r in ch],
                                "\nReactions that differ between the runs (read from the files)"))
    else:
        out.append("\nNo reaction differs in law, parameters or [scale] between the two files.")
    sp = [r for r in rows if r["section"] == "species"]
    spread = any("spread_percent" in r or "spread_points" in r for r in rows)
    if sp:
        out.append(format_table(["time (UTC)", "why", "species", "BASE [mol mol-1]", "OTHER [mol mol-1]", "change [%]"]
                                + (["spread [+-%]"] if spread else []),
                                [[r["time"], r["note"], r["term"], _f(r, "base", ".4e"), _f(r, "other", ".4e"),
                                  _f(r, "change_percent", "+.2f")] + ([_f(r, "spread_percent", ".2f")] if spread else [])
                                 for r in sp], "\nSpecies"))
    lo = [r for r in rows if r["section"] == "accumulated_loss"]
    if lo:
        out.append(format_table(["time (UTC)", "why", "cycle", "BASE [% O3]", "OTHER [% O3]", "change [points]"]
                                + (["spread [+-points]"] if spread else []),
                                [[r["time"], r["note"], r["term"], _f(r, "base", ".3f"), _f(r, "other", ".3f"),
                                  _f(r, "change_points", "+.3f")] + ([_f(r, "spread_points", ".3f")] if spread else [])
                                 for r in lo],
                                "\nAccumulated ozone loss by cycle (unattributed = total - cycles)"))
    if spread:
        out.append("  (spread: half the 5-95 % range of the --spread members at the same time; a change smaller "
                   "than it is within that uncertainty)")
    rr = [r for r in rows if r["section"] == "reaction_rate"]
    if rr:
        out.append(format_table(["reaction", "equation", "BASE [cm-3 s-1]", "OTHER [cm-3 s-1]", "rate change [%]",
                                 "effect [% of budget]", "budget"],
                                [[r["term"], r["equation"], _f(r, "base", ".3e"), _f(r, "other", ".3e"),
                                  _f(r, "change_percent", "+.2f"), _f(r, "effect_percent", "+.3f"), r["budget"]]
                                 for r in rr],
                                "\nReactions whose net effect changed most (time means; reverse pairs netted;\n"
                                " effect = change of the reaction's contribution to the budget, in % of its turnover)"))
    elif not any(r["term"].startswith(("BASE has no", "OTHER has no")) for r in notes):
        out.append("\nNo reaction rate changed.")
    return "\n".join(out)


def render_csv(rows: list[dict]) -> str:
    fields = ["section", "time", "note", "term", "equation", "how", "base", "other", "change_percent",
              "change_points", "effect_percent", "budget", "spread_percent", "spread_points", "units"]
    extra = sorted({k for r in rows for k in r if k.endswith(("_p05", "_p95")) or k == "n_members"})
    return csv_text(rows, fields + extra)


def run(args) -> int:
    from ..diagnostics.comparison import compare_results
    from ..diagnostics.members import is_members, rows_across_members, select_member
    from ..diagnostics.result import ResultError, open_result
    base, other = open_result(args.base), open_result(args.other)
    for ds, key, flag, name in ((base, args.base_member, "--base-member", args.base),
                                (other, args.other_member, "--other-member", args.other)):
        if key is not None and not is_members(ds):
            raise ResultError(f"{flag} {key}: {name} is a single run, not a member file")
    if is_members(base):
        if args.base_member is None:
            raise ResultError(f"{args.base} is a member file: choose the reference member with --base-member "
                              f"INDEX|LABEL (OTHER may be a member file compared member by member)")
        base = select_member(base, args.base_member)
    heading = ""

    times, notes = args.times, None

    def make(one):
        return compare_results(base, one, times=times, at=args.at, species=args.species,
                               family=args.family, top=args.top, time_notes=notes)
    if is_members(other) and args.other_member is None:
        if times is None:   # one set of times for every member: where the members' median change peaks
            from ..diagnostics.comparison import largest_difference_time_members
            when = largest_difference_time_members(base, other)
            times, notes = (["end"], ["end"]) if when is None else ([when, "end"], ["largest median |dO3|", "end"])
        rows = rows_across_members(other, make, key_fields=("section", "time", "note", "term", "how"))
        n = max((r.get("n_members", 0) for r in rows), default=0)
        heading = f"OTHER: {n} successful members, each against BASE: median [5 %, 95 %]"
        plot_other = None
    else:
        if is_members(other):
            other = select_member(other, args.other_member)
            heading = f"OTHER member {other.attrs['member_index']} ({other.attrs['member_label']})"
        rows = make(other)
        plot_other = other
    if args.spread:
        from ..diagnostics.comparison import spread_beside
        spread_file = open_result(args.spread)
        if not is_members(spread_file):
            raise ResultError(f"--spread {args.spread}: not a member file (it needs a member dimension)")
        rows = spread_beside(rows, spread_file, args.family)
    print(render_csv(rows) if args.format == "csv" else render_text(rows, args.base, args.other, heading),
          end="\n" if args.format == "text" else "")
    if args.plot:
        if plot_other is None:
            raise ResultError("--plot with a member file as OTHER needs --other-member INDEX|LABEL")
        from ..plotting import save_comparison
        path = save_comparison(base, plot_other, args.plot, family=args.family,
                               labels=(args.base, args.other), at=args.at)
        if args.format == "text":
            print(f"\nplot written to {path}")
    return 0
