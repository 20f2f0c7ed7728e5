"""``boxchem rates MECH --temperature T ... --pressure P``: tabulate rate coefficients."""
from __future__ import annotations

import argparse
import csv
import os
import sys

import numpy as np

from ..errors import BoxchemError
from ..units import parse_quantity

EXAMPLE = """examples:
  boxchem rates stratosphere --temperature 195 220 298 --pressure 50hPa
  boxchem rates my_run.mech --temperature 195K --pressure "50 mbar" --format csv > k.csv

k is evaluated at the air number density of each temperature and the pressure.
Units: temperature K, pressure Pa, air_density molecule cm-3, k in the unit
given per row (s-1, cm3 s-1, cm6 s-1; molecule-based).  Photolysis rates
depend on the sun and surface rates on the particle surface area: those rows
carry no k here."""

CSV_COLUMNS = ("id", "equation", "law", "temperature", "pressure", "air_density", "k", "units", "note")
NOTES = {"photolysis": "J depends on the sun (solar zenith angle, ozone column)",
         "surface": "depends on the particle surface area (psc/sulfate/ice)"}


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "rates", help="tabulate rate coefficients at given temperatures and pressure",
        description="Print k for every reaction of a mechanism at each temperature, at the air "
                    "number density of that temperature and the given pressure.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("mechanism", metavar="MECH", help="shipped mechanism name or path to a .mech file")
    p.add_argument("--temperature", "-T", nargs="+", required=True, metavar="T",
                   help="one or more temperatures (K; e.g. 195 or 195K)")
    p.add_argument("--pressure", "-p", required=True, metavar="P",
                   help="pressure with a unit: 50hPa, 5000Pa, 50mbar, 1atm")
    p.add_argument("--format", choices=("text", "csv"), default="text", help="output format (default text)")
    p.set_defaults(func=run)


def _rows(mechanism, temperatures, pressure):
    from ..environment.atmosphere import air_number_density
    from ..mechanism.ratelaws import RateEvaluator

    T = np.asarray(temperatures, dtype=float)
    M = air_number_density(pressure, T)
    k = RateEvaluator(mechanism).thermal(T, M)
    for r_i, r in enumerate(mechanism.reactions):
        for t_i in range(T.size):
            note = NOTES.get(r.law, "")
            yield {"id": r.id, "equation": r.equation, "law": r.law,
                   "temperature": f"{T[t_i]:g}", "pressure": f"{pressure:g}",
                   "air_density": f"{M[t_i]:.4e}", "k": "" if note else f"{k[t_i, r_i]:.4e}",
                   "units": r.rate_coefficient_units, "note": note}


def run(args) -> int:
    from ..mechanism import load_mechanism

    temperatures = [parse_quantity(t, "temperature", default_unit="K", where="--temperature")
                    for t in args.temperature]
    for t in temperatures:
        if not t > 0:
            raise BoxchemError(f"--temperature: {t:g} K is not a positive absolute temperature")
    pressure = parse_quantity(args.pressure, "pressure", where="--pressure")
    if not pressure > 0:
        raise BoxchemError(f"--pressure: {args.pressure!r} is not a positive pressure")
    mechanism = load_mechanism(args.mechanism)
    for w in mechanism.warnings:
        print(w.format(), file=sys.stderr)
    rows = list(_rows(mechanism, temperatures, pressure))
    try:
        _print(rows, pressure, args.format)
    except BrokenPipeError:
        # the reader (e.g. `| head`) closed the pipe: not an error of ours
        sys.stdout = open(os.devnull, "w")
    return 0


def _print(rows, pressure: float, fmt: str) -> None:
    if fmt == "csv":
        writer = csv.DictWriter(sys.stdout, fieldnames=CSV_COLUMNS, lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)
        return
    wid = max([len(r["id"]) for r in rows] + [2])
    weq = max([len(r["equation"]) for r in rows] + [8])
    print(f"# pressure {pressure:g} Pa; T [K], [M] [molecule cm-3], k [units as given]")
    print(f"{'id':<{wid}}  {'equation':<{weq}}  {'law':<10}  {'T':>7}  {'[M]':>10}  {'k':>10}  units")
    for r in rows:
        k = r["k"] or r["note"]
        units = r["units"] if r["k"] else ""
        print(f"{r['id']:<{wid}}  {r['equation']:<{weq}}  {r['law']:<10}  {r['temperature']:>7}  "
              f"{r['air_density']:>10}  {k:>10}  {units}".rstrip())
