"""``boxchem budget OUT.nc``: largest production and loss terms and the cycles."""
from __future__ import annotations

import argparse

import numpy as np

from ._csv import csv_text

EXAMPLE = """examples:
  boxchem budget out.nc                         # Ox budget over the whole run
  boxchem budget out.nc --family Ox --period daily --format csv > daily.csv
  boxchem budget out.nc --species ClO --top 5   # one species

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
    p.add_argument("result", metavar="OUT.nc", help="netCDF file written by 'boxchem run'")
    who = p.add_mutually_exclusive_group()
    who.add_argument("--family", default=None, help="family to budget (default Ox)")
    who.add_argument("--species", default=None, help="budget one species instead of a family (default: none, the family)")
    p.add_argument("--period", choices=("total", "daily", "all"), default="total",
                   help="whole run, per UTC day, or both (default total)")
    p.add_argument("--top", type=int, default=8, metavar="N", help="terms per table (default 8)")
    p.add_argument("--basis", choices=("recycled", "gross", "net"), default="recycled",
                   help="definition of the total Ox loss (default recycled; docs/diagnostics.md)")
    p.add_argument("--format", choices=("text", "csv"), default="text", help="output format (default text)")
    p.set_defaults(func=run)


def _numeric(cell: str) -> bool:
    try:
        float(cell.replace(" h", ""))
    except ValueError:
        return False
    return True


def format_table(headers: list[str], rows: list[list], title: str = "") -> str:
    """Plain aligned text table; numbers as given (already formatted strings)."""
    cells = [headers] + [[str(c) for c in r] for r in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]
    lines = [title] if title else []
    for k, r in enumerate(cells):
        lines.append("  " + "  ".join(c.rjust(w) if _numeric(c) else c.ljust(w)
                                      for c, w in zip(r, widths)))
        if k == 0:
            lines.append("  " + "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def budget_records(ds, name: str, *, top: int, period: str, basis: str) -> list[dict]:
    """Rows of the budget: section, period, term, equation, value, units."""
    from ..diagnostics.budget import largest_terms, production_loss, time_mean
    from ..diagnostics.ozone_loss import accumulated_loss, daily_loss, ox_loss
    from ..diagnostics.result import is_family

    records: list[dict] = []
    budget = production_loss(ds, name)
    if period in ("total", "all"):
        for kind in ("production", "loss"):
            for row in largest_terms(budget, top=top, kind=kind):
                records.append({"section": kind, "period": "run", "term": row["reaction"],
                                "equation": row["equation"], "value": row["mean"], "units": "cm-3 s-1",
                                "fraction": row["fraction"]})
    with_cycles = is_family(ds, name) and "cycle_rate" in ds.variables and \
        (("cycle_family" not in ds.coords) or name in set(ds["cycle_family"].values.tolist()))
    if not with_cycles:
        return records
    if period in ("total", "all"):
        ox = ox_loss(ds, name, basis=basis)
        acc = accumulated_loss(ds, name, basis=basis)
        means = {"total": float(time_mean(ox["total_loss"])),
                 "unattributed": float(time_mean(ox["unattributed"]))}
        if "cycle_rate" in ox:
            for c, v in zip(ox["cycle"].values, time_mean(ox["cycle_rate"]).values):
                means[str(c)] = float(v)
        final = acc["loss_percent"].isel(time=-1)
        order = sorted((t for t in means if t not in ("total", "unattributed")), key=lambda t: -means[t])
        for term in order[:top] + ["unattributed", "total"]:
            records.append({"section": "cycle", "period": "run", "term": term, "equation": "",
                            "value": means[term], "units": "cm-3 s-1",
                            "fraction": means[term] / means["total"] if means["total"] else np.nan,
                            "accumulated_percent": float(final.sel(term=term))})
    if period in ("daily", "all"):
        daily = daily_loss(ds, name, basis=basis)
        for d in daily["day"].values:
            day = str(np.datetime_as_string(d, unit="D"))
            for term in daily["term"].values:
                sel = daily.sel(day=d, term=term)
                records.append({"section": "cycle_daily", "period": day, "term": str(term), "equation": "",
                                "value": float(sel["mean_rate"]), "units": "cm-3 s-1",
                                "percent_of_initial_o3": float(sel["loss_percent"]),
                                "covered_hours": float(daily["covered_hours"].sel(day=d))})
    return records


def render_text(records: list[dict], name: str, source: str, basis: str) -> str:
    cycles = any(r["section"].startswith("cycle") for r in records)
    out = [f"Budget of {name} in {source}" + (f" (loss basis: {basis})" if cycles else "")]
    for kind in ("production", "loss"):
        rows = [[str(i + 1), r["term"], r["equation"], f"{r['value']:.3e}", f"{100 * r['fraction']:.1f}"]
                for i, r in enumerate(x for x in records if x["section"] == kind)]
        if rows:
            out.append(format_table(["#", "reaction", "equation", "mean [cm-3 s-1]", "% of total"], rows,
                                    f"\nLargest {kind} terms of {name} (time mean over the run)"))
    cyc = [r for r in records if r["section"] == "cycle"]
    if cyc:
        rows = [[r["term"], f"{r['value']:.3e}", f"{100 * r['fraction']:.1f}", f"{r['accumulated_percent']:.2f}"]
                for r in cyc]
        out.append(format_table(["cycle", "mean [cm-3 s-1]", "% of total", "accumulated [% O3]"], rows,
                                "\nLoss by catalytic cycle (unattributed = total - sum of cycles)"))
    daily = [r for r in records if r["section"] == "cycle_daily"]
    if daily:
        terms = list(dict.fromkeys(r["term"] for r in daily))
        days = list(dict.fromkeys(r["period"] for r in daily))
        table = {(r["period"], r["term"]): r for r in daily}
        rows = [[d, f"{table[(d, terms[0])]['covered_hours']:.0f} h"]
                + [f"{table[(d, t)]['percent_of_initial_o3']:.3f}" for t in terms] for d in days]
        out.append(format_table(["day (UTC)", "covered"] + terms, rows,
                                "\nDaily loss by cycle [% of initial O3 per day]"))
    return "\n".join(out)


def render_csv(records: list[dict]) -> str:
    return csv_text(records, ["section", "period", "term", "equation", "value", "units", "fraction",
                              "accumulated_percent", "percent_of_initial_o3", "covered_hours"])


def run(args) -> int:
    from ..diagnostics.budget import net_coefficients
    from ..diagnostics.result import ResultError, names_or_error, open_result
    ds = open_result(args.result)
    if args.top < 1:
        raise ResultError(f"--top must be at least 1, got {args.top}")
    if args.species:
        names_or_error(ds, "species", [args.species], "species (--species)")
        name = args.species
    else:
        name = args.family or "Ox"
        names_or_error(ds, "family", [name], "family (--family)")
    net_coefficients(ds, name)  # fails early, with the reason, if the run lacks stoichiometry
    records = budget_records(ds, name, top=args.top, period=args.period, basis=args.basis)
    if args.format == "csv":
        print(render_csv(records), end="")
    else:
        print(render_text(records, name, args.result, args.basis))
    return 0
