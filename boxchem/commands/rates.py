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

  boxchem rates stratosphere -T 195 200 222 -p 50hPa --h2o 5ppmv --hcl 1.8ppbv \
      --clono2 0.9ppbv --sulfate-area "0.5 um2 cm-3" --psc-area "2 um2 cm-3"

k is evaluated at the air number density of each temperature and the pressure.
Units: temperature K, pressure Pa, air_density molecule cm-3, k in the unit
given per row (s-1, cm3 s-1, cm6 s-1; molecule-based).  Photolysis rates
depend on the sun: those rows carry no k here.  Surface rows show the
reaction probability gamma and, where the area of their surface is given
(--sulfate-area, --psc-area, --ice-area), k = gamma v S / 4 [s-1].  gamma of
liquid-sulfate lines (uptake gamma_from=...) depends on the H2O, HCl and
ClONO2 mole fractions (--h2o, --hcl, --clono2; docs/heterogeneous.md) and on
the droplet radius: radius_um= of the line, or --droplet-radius (what an STS
rule's droplets give in a run) for the lines with radius_from=droplets."""

CSV_COLUMNS = ("id", "equation", "law", "temperature", "pressure", "air_density", "gamma", "k", "units",
               "note")
NOTES = {"photolysis": "J depends on the sun (solar zenith angle, ozone column)",
         "surface": "give --{on}-area for k",
         "uptake": "give --{on}-area for k"}


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
    for name, what in (("h2o", "H2O"), ("hcl", "HCl"), ("clono2", "ClONO2")):
        p.add_argument(f"--{name}", metavar="X", default=None,
                       help=f"{what} mole fraction for surface gammas (e.g. 5ppmv, 1.8ppbv)")
    for name in ("sulfate", "psc", "ice"):
        p.add_argument(f"--{name}-area", metavar="S", default=None,
                       help=f"{name} surface area density with a unit (e.g. \"0.5 um2 cm-3\")")
    p.add_argument("--droplet-radius", metavar="R", default=None,
                   help="liquid droplet radius in um (e.g. 0.3 or 0.3um) for uptake lines with "
                        "radius_from=droplets, as an STS rule sets it in a run (default: each line's radius_um=)")
    p.add_argument("--format", choices=("text", "csv"), default="text", help="output format (default text)")
    p.set_defaults(func=run)


def _rows(mechanism, temperatures, pressure, mole_fractions=None, areas=None, droplet_radius_cm=None):
    from ..environment.atmosphere import air_number_density
    from ..mechanism.model import SURFACE_LAWS
    from ..mechanism.ratelaws import SURFACE_STATE_SPECIES, RateEvaluator

    T = np.asarray(temperatures, dtype=float)
    M = air_number_density(pressure, T)
    evaluator = RateEvaluator(mechanism)
    k = evaluator.thermal(T, M)
    x = dict(mole_fractions or {})
    areas = dict(areas or {})
    missing = [s for s in SURFACE_STATE_SPECIES if s not in x and s != "ClONO2"]
    gamma = ks = None
    have_state = not (evaluator.state_dependent_surface and missing)
    if have_state:
        pp = {s: np.full(T.shape, x.get(s, 0.0) * pressure) for s in SURFACE_STATE_SPECIES}
        gamma = evaluator.surface_gamma(T, pp, droplet_radius_cm)
        ks = evaluator.surface(T, areas.get("psc", 0.0), areas.get("sulfate", 0.0), areas.get("ice", 0.0),
                               partial_pressures=pp, droplet_radius_cm=droplet_radius_cm)
    column = {int(i): j for j, i in enumerate(evaluator.surface_index)}
    for r_i, r in enumerate(mechanism.reactions):
        for t_i in range(T.size):
            note = NOTES.get(r.law, "")
            g_text = k_text = ""
            if r.law in SURFACE_LAWS:
                on = str(r.parameters["on"])
                needs = ("psc", "sulfate", "ice") if on == "all" else (on,)
                if not have_state and r.parameters.get("gamma_from"):
                    note = f"gamma needs {' and '.join('--' + s.lower() for s in missing)}"
                else:
                    if gamma is None:   # lines that do not read the composition: any pressures do
                        zero = {s: np.zeros(T.shape) for s in SURFACE_STATE_SPECIES}
                        gamma = evaluator.surface_gamma(T, zero)
                        ks = evaluator.surface(T, areas.get("psc", 0.0), areas.get("sulfate", 0.0),
                                               areas.get("ice", 0.0), partial_pressures=zero)
                    g_text = f"{gamma[t_i, column[r_i]]:.4e}"
                    if all(n in areas for n in needs) and ks is not None:
                        k_text, note = f"{ks[t_i, r_i]:.4e}", ""
                    else:
                        note = note.format(on=needs[0])
            elif not note:
                k_text = f"{k[t_i, r_i]:.4e}"
            yield {"id": r.id, "equation": r.equation, "law": r.law,
                   "temperature": f"{T[t_i]:g}", "pressure": f"{pressure:g}",
                   "air_density": f"{M[t_i]:.4e}", "gamma": g_text, "k": k_text,
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
    from ..units import parse_amount
    mole_fractions = {}
    for option, species in (("h2o", "H2O"), ("hcl", "HCl"), ("clono2", "ClONO2")):
        text = getattr(args, option, None)
        if text is None:
            continue
        value, kind = parse_amount(text, where=f"--{option}")
        if kind != "mole_fraction" or not 0.0 <= value < 1.0:
            raise BoxchemError(f"--{option}: {text!r} is not a mole fraction; valid: e.g. 5ppmv, 1.8ppbv")
        mole_fractions[species] = value
    areas = {}
    for name in ("sulfate", "psc", "ice"):
        text = getattr(args, f"{name}_area", None)
        if text is None:
            continue
        value = parse_quantity(text, "surface_area", where=f"--{name}-area")
        if not value >= 0:
            raise BoxchemError(f"--{name}-area: {text!r} is not a surface area density >= 0")
        areas[name] = value
    radius_cm = None
    if getattr(args, "droplet_radius", None) is not None:
        text = args.droplet_radius.strip()
        number = text[:-2].strip() if text.lower().endswith("um") else text
        try:
            radius_cm = float(number) * 1e-4
        except ValueError:
            radius_cm = float("nan")
        if not (np.isfinite(radius_cm) and radius_cm > 0):
            raise BoxchemError(f"--droplet-radius: {text!r} is not a droplet radius > 0 in um; valid: e.g. 0.3 or 0.3um")
    mechanism = load_mechanism(args.mechanism)
    for w in mechanism.warnings:
        print(w.format(), file=sys.stderr)
    rows = list(_rows(mechanism, temperatures, pressure, mole_fractions, areas, radius_cm))
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
    print(f"{'id':<{wid}}  {'equation':<{weq}}  {'law':<10}  {'T':>7}  {'[M]':>10}  {'gamma':>10}  "
          f"{'k':>10}  units")
    for r in rows:
        k = r["k"] or r["note"]
        units = r["units"] if r["k"] else ""
        print(f"{r['id']:<{wid}}  {r['equation']:<{weq}}  {r['law']:<10}  {r['temperature']:>7}  "
              f"{r['air_density']:>10}  {r['gamma']:>10}  {k:>10}  {units}".rstrip())
