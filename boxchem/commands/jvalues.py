"""``boxchem jvalues``: J-values of a mechanism's photolysis reactions, or of a lab spectrum."""
from __future__ import annotations

import argparse
import sys
import warnings

import numpy as np

from ..errors import BoxchemError
from ..units import parse_quantity

EXAMPLES = """\
examples:
  boxchem jvalues stratosphere --sza 30 60 85 92 --altitude 20km --ozone-column 300DU
  boxchem jvalues stratosphere --sza 40 80 --temperature 200 --format csv --fit-lmn
  boxchem jvalues --cross-section my_cl2o2.csv --quantum-yield 1 --sza 60 88 --altitude 18km
"""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "jvalues", help="J-values from cross sections and a modelled actinic flux",
        description="J-values [s-1] of every photolysis reaction of a mechanism (or of a user's "
                    "cross-section file) at given solar zenith angles, altitude and ozone column.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("mechanism", nargs="?", help="shipped mechanism name or .mech path")
    p.add_argument("--sza", type=float, nargs="+", default=[30.0, 60.0, 85.0, 92.0],
                   help="solar zenith angles [deg] (default 30 60 85 92)")
    p.add_argument("--altitude", default="20 km", help="altitude of the box (default 20 km)")
    p.add_argument("--ozone-column", default="300 DU", help="overhead ozone column (default 300 DU)")
    p.add_argument("--albedo", type=float, default=0.3, help="Lambertian albedo below the box (default 0.3)")
    p.add_argument("--temperature", default="220 K", help="temperature for cross sections (default 220 K)")
    p.add_argument("--ozone-profile", default="midlatitude", choices=("midlatitude", "polar"))
    p.add_argument("--format", choices=("text", "csv"), default="text")
    p.add_argument("--fit-lmn", action="store_true",
                   help="also fit l m n of J = l cos^m exp(-n sec) to J on a fine SZA grid")
    p.add_argument("--cross-section", metavar="FILE", help="a cross-section file (our format or a "
                   "two-column lab CSV: wavelength nm, cross section cm2)")
    p.add_argument("--quantum-yield", metavar="FILE|VALUE", default="1",
                   help="quantum yield for --cross-section (file or number, default 1)")
    p.set_defaults(func=run)


def _conditions(args):
    altitude = parse_quantity(args.altitude, "length", default_unit="m", where="--altitude")
    ozone = parse_quantity(args.ozone_column, "column", default_unit="DU", where="--ozone-column")
    temperature = parse_quantity(args.temperature, "temperature", default_unit="K", where="--temperature")
    if not 0.0 <= args.albedo <= 1.0:
        raise BoxchemError(f"--albedo {args.albedo}: expected a value within 0..1")
    return altitude, ozone, temperature


def _j_direct(pairs, sza, altitude, ozone, temperature, albedo, profile):
    """J [s-1] (n_sza, n_pairs) by the spectral integral at each SZA (no table)."""
    from ..photolysis.actinic import flux_grid
    from ..photolysis.jtable import integrate_j, spectral_product
    from ..photolysis.spectrum import model_wavelength_edges

    edges = model_wavelength_edges()
    flux = flux_grid(sza, altitude, [ozone], albedo=albedo, ozone_profile=profile)[:, 0]
    return integrate_j(flux, spectral_product(pairs, edges, [temperature]), edges)[:, 0, :]


def run(args) -> int:
    altitude, ozone, temperature = _conditions(args)
    sza = np.asarray(args.sza, dtype=float)
    rows = []     # (id, equation, sza, j, source)
    fits = []
    if args.cross_section:
        rows, fits = _lab_rows(args, sza, altitude, ozone, temperature)
    else:
        if not args.mechanism:
            raise BoxchemError("jvalues: give a MECHANISM (name or path) or --cross-section FILE")
        rows, fits = _mechanism_rows(args, sza, altitude, ozone, temperature)
    _print(rows, fits, args.format)
    return 0


def _mechanism_rows(args, sza, altitude, ozone, temperature):
    from ..mechanism import load_mechanism
    from ..photolysis.jtable import load_reaction_data
    from ..photolysis.rates import PhotolysisRates

    mech = load_mechanism(args.mechanism)
    photo = [r for r in mech.reactions if r.law == "photolysis"]
    if not photo:
        raise BoxchemError(f"jvalues: mechanism {args.mechanism!r} has no photolysis reactions")
    spectral, pairs = [], []
    for r in photo:
        if "data" in r.parameters:
            try:
                pairs.append(load_reaction_data(r))
                spectral.append(r)
            except BoxchemError as exc:
                print(f"warning: {r.id}: {exc}; using its l m n form", file=sys.stderr)
    j_spec = _j_direct(pairs, sza, altitude, ozone, temperature, args.albedo, args.ozone_profile) \
        if pairs else np.zeros((sza.size, 0))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        param = PhotolysisRates(mech, altitude_m=altitude, albedo=args.albedo, method="parametric") \
            if any("l" in r.parameters for r in photo) else None
    spec_index = {r.id: i for i, r in enumerate(spectral)}
    rows = []
    jp = param(sza) if param is not None else None
    for r in photo:
        col = mech.reaction_ids.index(r.id)
        scale = float(r.parameters.get("scale", 1.0))
        for s_i, s in enumerate(sza):
            if r.id in spec_index:
                rows.append((r.id, r.equation, s, scale * j_spec[s_i, spec_index[r.id]], "spectral"))
            else:
                rows.append((r.id, r.equation, s, jp[s_i, col], "parametric"))
    fits = []
    if args.fit_lmn and pairs:
        from ..photolysis.fitting import fit_lmn
        grid = np.linspace(0.0, 85.0, 35)
        jg = _j_direct(pairs, grid, altitude, ozone, temperature, args.albedo, args.ozone_profile)
        fits = [(r.id, *fit_lmn(grid, jg[:, i])) for i, r in enumerate(spectral)]
    return rows, fits


def _lab_rows(args, sza, altitude, ozone, temperature):
    from ..photolysis.crosssections import cross_section_data, quantum_yield_data, shipped_cross_sections

    xs = cross_section_data(args.cross_section)
    qy = quantum_yield_data(args.quantum_yield)
    pairs = [(xs, qy)]
    label = f"{xs.species or 'user'} (file)"
    reference = None
    if xs.species and xs.species in shipped_cross_sections():
        reference = (cross_section_data(xs.species), qy)
        pairs.append(reference)
    j = _j_direct(pairs, sza, altitude, ozone, temperature, args.albedo, args.ozone_profile)
    rows = []
    for s_i, s in enumerate(sza):
        rows.append((label, args.cross_section, s, j[s_i, 0], "spectral"))
        if reference is not None:
            ratio = j[s_i, 0] / j[s_i, 1] if j[s_i, 1] > 0 else float("nan")
            rows.append((f"{xs.species} (shipped)", f"ratio file/shipped = {ratio:.4g}", s, j[s_i, 1],
                         "spectral"))
    fits = []
    if args.fit_lmn:
        from ..photolysis.fitting import fit_lmn
        grid = np.linspace(0.0, 85.0, 35)
        jg = _j_direct(pairs[:1], grid, altitude, ozone, temperature, args.albedo, args.ozone_profile)
        fits = [(label, *fit_lmn(grid, jg[:, 0]))]
    return rows, fits


def _print(rows, fits, fmt):
    if fmt == "csv":
        print("id,equation,sza,j,method")
        for rid, eq, s, j, src in rows:
            print(f"{rid},\"{eq}\",{s:g},{j:.6e},{src}")
        if fits:
            print()
            print("id,l,m,n,rms_log_residual")
            for rid, l, m, n, rms in fits:
                print(f"{rid},{l:.6e},{m:.5g},{n:.5g},{rms:.3g}")
        return
    print(f"{'id':<18} {'sza':>6} {'J [s-1]':>12}  method      equation")
    for rid, eq, s, j, src in rows:
        print(f"{rid:<18} {s:6.2f} {j:12.4e}  {src:<10}  {eq}")
    if fits:
        print()
        print(f"{'id':<18} {'l [s-1]':>12} {'m':>8} {'n':>8}  rms(log J)")
        for rid, l, m, n, rms in fits:
            print(f"{rid:<18} {l:12.4e} {m:8.4f} {n:8.4f}  {rms:.3g}")
