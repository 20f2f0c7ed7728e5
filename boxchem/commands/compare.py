"""``boxchem compare BASE.nc OTHER.nc``: what changed between two runs."""
from __future__ import annotations

import argparse

import numpy as np
import xarray as xr

from ._csv import csv_text
from .budget import format_table

EXAMPLE = """examples:
  boxchem run polar-spring -o base.nc
  boxchem run polar-spring --scale clo_clo_m=1.2 -o faster_dimer.nc
  boxchem compare base.nc faster_dimer.nc --plot compare.png
  boxchem compare base.nc other.nc --times 2026-09-15 end --species O3 ClO --format csv

Shows species at the chosen times (nearest output time), the accumulated
ozone loss by cycle at those times, and the reactions whose time-mean rates
changed most.  Changes are OTHER relative to BASE."""

DEFAULT_SPECIES = ("O3", "ClO", "Cl2O2", "HCl", "ClONO2", "HOCl", "BrO", "NO2", "HNO3")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "compare", help="compare two run results (species, ozone loss by cycle, reaction rates)",
        description="Compare two boxchem results: species at chosen times, accumulated ozone loss "
                    "by catalytic cycle, and the largest changes in reaction rates; as a table "
                    "and optionally a plot.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("base", metavar="BASE.nc", help="reference result")
    p.add_argument("other", metavar="OTHER.nc", help="result to compare with the reference")
    p.add_argument("--times", nargs="+", default=["end"], metavar="TIME",
                   help="UTC times (ISO, e.g. 2026-09-15T12:00), 'start' or 'end' (default end)")
    p.add_argument("--species", nargs="+", default=None, metavar="X",
                   help=f"species to list (default those of {' '.join(DEFAULT_SPECIES)} present)")
    p.add_argument("--family", default="Ox", help="family whose loss is split by cycle (default Ox)")
    p.add_argument("--top", type=int, default=10, metavar="N", help="reaction-rate changes to list (default 10)")
    p.add_argument("--plot", default=None, metavar="FILE", help="also write a figure (.png or .pdf)")
    p.add_argument("--format", choices=("text", "csv"), default="text", help="output format (default text)")
    p.set_defaults(func=run)


def _pick_time(ds: xr.Dataset, when: str, where: str) -> np.datetime64:
    from ..diagnostics.result import ResultError
    t = ds["time"].values
    if when == "start":
        return t[0]
    if when == "end":
        return t[-1]
    try:
        from ..timerange import check_utc_range
        check_utc_range(np.datetime64(when.rstrip("Z"), "s"), where)   # never a wrapped time
        value = np.datetime64(when.rstrip("Z"), "ns")
    except ValueError:
        raise ResultError(f"{where}: cannot read time {when!r}; write e.g. 2026-09-15T12:00, start or end") from None
    if value < t[0] or value > t[-1]:
        raise ResultError(f"{where}: time {when} is outside the run ({np.datetime_as_string(t[0], 's')} "
                          f"to {np.datetime_as_string(t[-1], 's')})")
    return t[int(np.argmin(np.abs(t - value)))]


def species_changes(base, other, times, species) -> list[dict]:
    rows = []
    for when in times:
        tb, to = _pick_time(base, when, "--times (BASE)"), _pick_time(other, when, "--times (OTHER)")
        for s in species:
            xb = float(base["mole_fraction"].sel(species=s, time=tb))
            xo = float(other["mole_fraction"].sel(species=s, time=to))
            rows.append({"section": "species", "time": str(np.datetime_as_string(tb, "m")), "term": s,
                         "base": xb, "other": xo, "change_percent": _percent(xo, xb), "units": "mol mol-1"})
    return rows


def _percent(new: float, old: float) -> float:
    return 100.0 * (new - old) / old if old != 0 else (0.0 if new == 0 else np.inf)


def loss_changes(base, other, times, family: str) -> list[dict]:
    from ..diagnostics.ozone_loss import accumulated_loss
    ab, ao = accumulated_loss(base, family), accumulated_loss(other, family)
    terms = [str(t) for t in ab["term"].values if t in set(ao["term"].values.tolist())]
    rows = []
    for when in times:
        tb, to = _pick_time(base, when, "--times (BASE)"), _pick_time(other, when, "--times (OTHER)")
        for term in terms:
            vb = float(ab["loss_percent"].sel(term=term, time=tb))
            vo = float(ao["loss_percent"].sel(term=term, time=to))
            rows.append({"section": "accumulated_loss", "time": str(np.datetime_as_string(tb, "m")),
                         "term": term, "base": vb, "other": vo, "change_points": vo - vb,
                         "units": "% of initial O3"})
    return rows


def rate_changes(base, other, top: int) -> list[dict]:
    """Reactions whose time-mean rate changed most (absolute change), with the ratio."""
    from ..diagnostics.budget import time_mean
    common = [r for r in base["reaction"].values.tolist() if r in set(other["reaction"].values.tolist())]
    mb = time_mean(base["reaction_rate"].sel(reaction=common))
    mo = time_mean(other["reaction_rate"].sel(reaction=common))
    diff = mo.values - mb.values
    eq = base["equation"].sel(reaction=common).values if "equation" in base.coords else [""] * len(common)
    rows = []
    for j in np.argsort(-np.abs(diff), kind="stable")[:top]:
        if diff[j] == 0:
            break
        rows.append({"section": "reaction_rate", "time": "run mean", "term": str(common[j]),
                     "equation": str(eq[j]), "base": float(mb.values[j]), "other": float(mo.values[j]),
                     "change_percent": _percent(float(mo.values[j]), float(mb.values[j])), "units": "cm-3 s-1"})
    return rows


def compare_results(base, other, *, times=("end",), species=None, family="Ox", top=10) -> list[dict]:
    """All comparison rows: species, accumulated loss by cycle, reaction-rate changes."""
    from ..diagnostics.result import ResultError, names_or_error
    if species is None:
        species = [s for s in DEFAULT_SPECIES
                   if s in set(base["species"].values.tolist()) and s in set(other["species"].values.tolist())]
    else:
        names_or_error(base, "species", species, "species (--species, BASE)")
        names_or_error(other, "species", species, "species (--species, OTHER)")
    if top < 1:
        raise ResultError(f"--top must be at least 1, got {top}")
    rows = species_changes(base, other, times, species)
    if "cycle_rate" in base and "cycle_rate" in other:
        rows += loss_changes(base, other, times, family)
    rows += rate_changes(base, other, top)
    return rows


def render_text(rows: list[dict], base_name: str, other_name: str) -> str:
    out = [f"Comparison: OTHER = {other_name} against BASE = {base_name}"]
    sp = [r for r in rows if r["section"] == "species"]
    if sp:
        out.append(format_table(["time (UTC)", "species", "BASE [mol mol-1]", "OTHER [mol mol-1]", "change [%]"],
                                [[r["time"], r["term"], f"{r['base']:.4e}", f"{r['other']:.4e}",
                                  f"{r['change_percent']:+.2f}"] for r in sp], "\nSpecies"))
    lo = [r for r in rows if r["section"] == "accumulated_loss"]
    if lo:
        out.append(format_table(["time (UTC)", "cycle", "BASE [% O3]", "OTHER [% O3]", "change [points]"],
                                [[r["time"], r["term"], f"{r['base']:.3f}", f"{r['other']:.3f}",
                                  f"{r['change_points']:+.3f}"] for r in lo],
                                "\nAccumulated ozone loss by cycle (unattributed = total - cycles)"))
    rr = [r for r in rows if r["section"] == "reaction_rate"]
    if rr:
        out.append(format_table(["reaction", "equation", "BASE [cm-3 s-1]", "OTHER [cm-3 s-1]", "change [%]"],
                                [[r["term"], r["equation"], f"{r['base']:.3e}", f"{r['other']:.3e}",
                                  f"{r['change_percent']:+.2f}"] for r in rr],
                                "\nLargest changes in time-mean reaction rates"))
    else:
        out.append("\nNo reaction rate changed.")
    return "\n".join(out)


def render_csv(rows: list[dict]) -> str:
    return csv_text(rows, ["section", "time", "term", "equation", "base", "other", "change_percent",
                           "change_points", "units"])


def run(args) -> int:
    from ..diagnostics.result import open_result
    base, other = open_result(args.base), open_result(args.other)
    rows = compare_results(base, other, times=args.times, species=args.species, family=args.family,
                           top=args.top)
    print(render_csv(rows) if args.format == "csv" else render_text(rows, args.base, args.other), end="\n"
          if args.format == "text" else "")
    if args.plot:
        from ..plotting import save_comparison
        path = save_comparison(base, other, args.plot, family=args.family,
                               labels=(args.base, args.other))
        if args.format == "text":
            print(f"\nplot written to {path}")
    return 0
