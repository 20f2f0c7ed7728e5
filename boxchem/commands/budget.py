"""``boxchem budget OUT.nc``: largest production and loss terms and the cycles."""
from __future__ import annotations

import argparse

from ._csv import csv_text
from ._table import add_member_option, format_table, value_with_range

EXAMPLE = """examples:
  boxchem budget out.nc                         # Ox budget over the whole run
  boxchem budget out.nc --family Ox --period daily --format csv > daily.csv
  boxchem budget out.nc --species ClO --top 5   # one species
  boxchem budget out.nc --period daily --clock local   # days from local solar midnight
  boxchem budget sweep.nc                       # a member file: median [5 %, 95 %] across members
  boxchem budget sweep.nc --member 2            # one member (index or label)

The loss of the family is split into the mechanism's catalytic cycles and the
unattributed remainder (total loss minus the sum of the cycles), which is
always shown.  Rates are time means over the period [cm-3 s-1]; accumulated
loss is in percent of the initial O3 mixing ratio.  See docs/diagnostics.md."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "budget", help="production/loss terms and catalytic-cycle ozone loss of a run",
        description="Tabulate the largest production and loss terms of a family or species of a "
                    "boxchem result, and the odd-oxygen loss by catalytic cycle.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("result", metavar="OUT.nc", help="netCDF file written by 'boxchem run' (or a member file)")
    who = p.add_mutually_exclusive_group()
    who.add_argument("--family", default=None, help="family to budget (default Ox)")
    who.add_argument("--species", default=None, help="budget one species instead of a family (default: none, the family)")
    p.add_argument("--period", choices=("total", "daily", "all"), default="total",
                   help="whole run, per day, or both (default total)")
    p.add_argument("--clock", choices=("utc", "local"), default="utc", dest="clock",
                   help="daily periods from UTC midnight or from local mean solar midnight at the box "
                        "(default utc)")
    p.add_argument("--top", type=int, default=8, metavar="N", help="terms per table (default 8)")
    p.add_argument("--basis", choices=("recycled", "gross", "net"), default="recycled",
                   help="definition of the total Ox loss (default recycled; docs/diagnostics.md)")
    add_member_option(p)
    p.add_argument("--format", choices=("text", "csv"), default="text", help="output format (default text)")
    p.set_defaults(func=run)


def _pct(r: dict, field: str, fmt: str, scale: float = 1.0) -> str:
    row = {k: v * scale if k.startswith(field) and isinstance(v, float) else v for k, v in r.items()}
    return value_with_range(row, field, fmt)


def render_text(records: list[dict], name: str, source: str, basis: str, heading: str = "") -> str:
    cycles = any(r["section"].startswith("cycle") for r in records)
    out = [f"Budget of {name} in {source}" + (f" (loss basis: {basis})" if cycles else "")]
    if heading:
        out.append(heading)
    out += [f"note: {r['term']}" for r in records if r["section"] == "note"]
    for kind in ("production", "loss"):
        rows = [[str(i + 1), r["term"], r["equation"], _pct(r, "value", ".3e"), _pct(r, "fraction", ".1f", 100)]
                for i, r in enumerate(x for x in records if x["section"] == kind)]
        if rows:
            out.append(format_table(["#", "reaction", "equation", "mean [cm-3 s-1]", "% of total"], rows,
                                    f"\nLargest {kind} terms of {name} (time mean over the run)"))
    cyc = [r for r in records if r["section"] == "cycle"]
    if cyc:
        rows = [[r["term"], _pct(r, "value", ".3e"), _pct(r, "fraction", ".1f", 100),
                 _pct(r, "accumulated_percent", ".2f")] for r in cyc]
        total = any(r["term"] == "total" for r in cyc)
        out.append(format_table(["cycle", "mean [cm-3 s-1]", "% of total" if total else "% of cycle sum",
                                 "accumulated [% O3]"], rows,
                                "\nLoss by catalytic cycle" + (" (unattributed = total - sum of cycles)" if total
                                                               else " (listed cycles only)")))
    daily = [r for r in records if r["section"] == "cycle_daily"]
    if daily:
        terms = list(dict.fromkeys(r["term"] for r in daily))
        days = list(dict.fromkeys(r["period"] for r in daily))
        table = {(r["period"], r["term"]): r for r in daily}
        rows = [[d, f"{table[(d, terms[0])]['covered_hours']:.0f} h"]
                + [_pct(table[(d, t)], "percent_of_initial_o3", ".3f") for t in terms] for d in days]
        definition = daily[0].get("day_definition", "UTC")
        out.append(format_table([f"day ({'UTC' if definition == 'UTC' else 'local solar'})", "covered"] + terms, rows,
                                f"\nDaily loss by cycle [% of initial O3 per day; days: {definition}]"))
        partial = [d for d in days if table[(d, terms[0])]["covered_hours"] < 23.99]
        if partial:
            out.append(f"  (partial days, covered only in part by the run: {', '.join(partial)})")
    return "\n".join(out)


def render_csv(records: list[dict]) -> str:
    fields = ["section", "period", "term", "equation", "value", "units", "fraction",
              "accumulated_percent", "percent_of_initial_o3", "covered_hours", "day_definition"]
    extra = sorted({k for r in records for k in r if k.endswith(("_p05", "_p95")) or k == "n_members"})
    return csv_text(records, fields + extra)


def run(args) -> int:
    from ..diagnostics.budget import net_coefficients
    from ..diagnostics.budget_report import budget_records
    from ..diagnostics.members import is_members, rows_across_members, select_member
    from ..diagnostics.ozone_loss import has_total_loss
    from ..diagnostics.result import ResultError, names_or_error, open_result
    from ..diagnostics.solartime import box_longitude
    ds = open_result(args.result)
    if args.top < 1:
        raise ResultError(f"--top must be at least 1, got {args.top}")
    heading = ""
    if is_members(ds) and args.member is not None:
        ds = select_member(ds, args.member)
        heading = f"member {ds.attrs['member_index']} ({ds.attrs['member_label']}): {ds.attrs['member_settings']}"
    elif args.member is not None:
        raise ResultError(f"--member {args.member}: {args.result} is a single run, not a member file")
    if args.species:
        names_or_error(ds, "species", [args.species], "species (--species)")
        name = args.species
    else:
        name = args.family or "Ox"
        names_or_error(ds, "family", [name], "family (--family)")
    if has_total_loss(ds):
        net_coefficients(ds, name)  # fails early, with the reason, if the run lacks stoichiometry
    longitude = box_longitude(ds) if args.clock == "local" else None
    if args.clock == "local" and longitude is None:
        raise ResultError(f"--clock local: {args.result} has no longitude of the box")

    def make(one):
        return budget_records(one, name, top=args.top, period=args.period, basis=args.basis, longitude=longitude)
    if is_members(ds):
        records = rows_across_members(ds, make)
        n = max((r.get("n_members", 0) for r in records), default=0)
        heading = (f"across {n} successful members: median [5 %, 95 %]; one member with --member INDEX|LABEL")
    else:
        records = make(ds)
    if args.format == "csv":
        print(render_csv(records), end="")
    else:
        print(render_text(records, name, args.result, args.basis, heading))
    return 0
