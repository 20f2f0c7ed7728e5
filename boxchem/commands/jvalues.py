"""``boxchem jvalues``: J-values of a mechanism's photolysis reactions, through a scenario's day,
or of a lab spectrum."""
from __future__ import annotations

import argparse
import sys
import warnings

import numpy as np

from ..errors import BoxchemError
from ..units import parse_quantity

EXAMPLES = """\
SOURCE is a mechanism or a scenario:
  * a path ending in .toml, or the bare name of a shipped scenario
    (e.g. stratosphere-box), is a SCENARIO: J through one UTC day (--day) at the
    scenario's place, altitude, ozone column, albedo and temperature;
  * anything else (a .mech path or a shipped mechanism name such as
    stratosphere) is a MECHANISM: J at the --sza angles and the conditions given.

examples:
  boxchem jvalues stratosphere --sza 30 60 85 92 --altitude 20km --ozone-column 300DU
  boxchem jvalues stratosphere --sza 40 80 --temperature 200 --format csv --fit-lmn
  boxchem jvalues stratosphere-box --day 2026-09-15 --plot jday.png
  boxchem jvalues my_run.toml --day 2026-09-15 --step 10min --format csv > jday.csv
  boxchem jvalues --cross-section my_cl2o2.csv --quantum-yield 1 --sza 60 88 --altitude 18km
  boxchem jvalues --cross-section Cl2O2_lab.csv --reference Cl2O2 --sza 60 85 90
"""

#: reactions drawn by --plot when present (the ones that drive polar ozone chemistry)
PLOT_REACTIONS = ("j_cl2o2", "j_o3_o1d", "j_o3_o", "j_no2", "j_clono2_a", "j_hocl", "j_bro",
                  "j_cl2")
#: the mechanism-form defaults (the scenario form takes these from the scenario)
_GEOMETRY_DEFAULTS = {"sza": [30.0, 60.0, 85.0, 92.0], "altitude": "20 km",
                      "ozone_column": "300 DU", "albedo": 0.3, "temperature": "220 K"}


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "jvalues", help="J-values from cross sections and a modelled actinic flux",
        description="J-values [s-1] of every photolysis reaction of a mechanism (or of a user's "
                    "cross-section file) at given solar zenith angles, altitude and ozone column.",
        epilog=EXAMPLES, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("mechanism", nargs="?", metavar="SOURCE",
                   help="mechanism (shipped name or .mech path) or scenario (shipped name or .toml "
                        "path); see the rule below")
    p.add_argument("--sza", type=float, nargs="+", default=None,
                   help="solar zenith angles [deg] (mechanism form; default 30 60 85 92)")
    p.add_argument("--altitude", default=None, help="altitude of the box, with a unit: 20km, 18500m (default 20 km)")
    p.add_argument("--ozone-column", default=None, help="overhead ozone column (default 300 DU)")
    p.add_argument("--albedo", type=float, default=None, help="Lambertian albedo below the box (default 0.3)")
    p.add_argument("--temperature", default=None, help="temperature for cross sections (default 220 K)")
    p.add_argument("--day", metavar="YYYY-MM-DD",
                   help="scenario form: the UTC day to tabulate (default: the scenario's start day)")
    p.add_argument("--clock", choices=("utc", "local"), default="utc",
                   help="scenario form: the day runs from UTC midnight (default) or from local mean solar "
                        "midnight at the box (UTC + longitude/15 h), so the sunlit period is not cut in two")
    p.add_argument("--step", default="10 min", help="scenario form: time step through the day (default 10 min)")
    p.add_argument("--plot", metavar="PNG", help="scenario form: draw J(t) of the main reactions to this file")
    p.add_argument("--reactions", nargs="+", metavar="ID",
                   help="scenario form: reactions to plot (default: the main polar ones present)")
    p.add_argument("--reference", metavar="NAME",
                   help="with --cross-section: shipped data set to compare with (default: the file's "
                        "species, or the shipped name its file name starts with, e.g. Cl2O2_lab.csv -> Cl2O2)")
    p.add_argument("--ozone-profile", default="midlatitude", choices=("midlatitude", "polar"),
                   help="shape of the ozone profile for the actinic flux, scaled to --ozone-column "
                        "(mechanism and --cross-section forms; default midlatitude)")
    p.add_argument("--format", choices=("text", "csv"), default="text", help="output format (default text)")
    p.add_argument("--fit-lmn", action="store_true",
                   help="also fit l m n of J = l cos^m exp(-n sec) to J on a fine SZA grid")
    p.add_argument("--cross-section", metavar="FILE", help="a cross-section file (our format or a "
                   "lab file: docs/spectral-data.md, 'Lab files')")
    p.add_argument("--quantum-yield", metavar="FILE|VALUE", default="1",
                   help="quantum yield for --cross-section (file or number, default 1)")
    p.set_defaults(func=run)


def _conditions(args):
    # no default unit: a bare "20" read as metres gave J at the ground for a user meaning 20 km
    altitude = parse_quantity(args.altitude, "length", where="--altitude")
    # no default unit either (as in scenarios and --altitude): write 300DU
    ozone = parse_quantity(args.ozone_column, "column", where="--ozone-column")
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


def is_scenario(source: str) -> bool:
    """True when SOURCE names a scenario: a .toml path or a shipped scenario's bare name."""
    from pathlib import Path

    from ..resources import shipped_names
    text = str(source)
    if Path(text).suffix:
        return Path(text).suffix.lower() == ".toml"
    if "/" in text or "\\" in text:
        return False
    return text in shipped_names("scenarios") and text not in shipped_names("mechanisms")


def check_source_name(source: str) -> None:
    """Refuse a bare SOURCE that names no file and no shipped mechanism or scenario.

    The command takes either kind, so the suggestion is the closest shipped
    name of either kind (``polar-sprin`` -> the scenario ``polar-spring``).
    """
    import difflib
    from pathlib import Path

    from ..resources import shipped_names
    text = str(source)
    if Path(text).suffix or "/" in text or "\\" in text or Path(text).expanduser().exists():
        return
    kinds = {name: "mechanism" for name in shipped_names("mechanisms")}
    kinds.update({name: "scenario" for name in shipped_names("scenarios") if name not in kinds})
    if text in kinds:
        return
    close = difflib.get_close_matches(text, list(kinds), n=1)
    hint = (f" - did you mean {close[0]!r} (a shipped {kinds[close[0]]})?" if close else
            f"; shipped mechanisms: {', '.join(shipped_names('mechanisms'))}; shipped scenarios: "
            f"{', '.join(shipped_names('scenarios'))}")
    raise BoxchemError(f"no file {text!r} and no shipped mechanism or scenario named "
                       f"{text!r}{hint}")


def run(args) -> int:
    if args.mechanism and not args.cross_section:
        check_source_name(args.mechanism)
    if args.mechanism and not args.cross_section and is_scenario(args.mechanism):
        return _run_scenario_day(args)
    for key, value in _GEOMETRY_DEFAULTS.items():
        if getattr(args, key) is None:
            setattr(args, key, value)
    for flag, value in (("--day", args.day), ("--plot", args.plot), ("--reactions", args.reactions)):
        if value is not None:
            raise BoxchemError(f"{flag} belongs to the scenario form; give a scenario "
                               f"(.toml path or shipped scenario name), not {args.mechanism!r}")
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
    ref_name = args.reference or _reference_name(xs.species, shipped_cross_sections())
    if args.reference and args.reference not in shipped_cross_sections():
        raise BoxchemError(f"--reference {args.reference!r}: no shipped cross-section data set of that "
                           f"name; valid: {', '.join(shipped_cross_sections())}")
    spliced = None
    if ref_name:
        reference = (cross_section_data(ref_name), qy)
        pairs.append(reference)
        from ..photolysis.splice import SplicedSpectrum, uncovered_ranges
        missing = uncovered_ranges(xs, reference[0])
        if missing and xs.outside_range == "zero":
            # what a run uses by default (outside=splice): the file there, the shipped set elsewhere
            spliced = (SplicedSpectrum(xs, reference[0]), qy)
            pairs.append(spliced)
            gaps = " and ".join(f"{a:g}-{b:g} nm" for a, b in missing)
            print(f"{args.cross_section}: warning: the file covers {xs.wavelength_nm[0]:g}-"
                  f"{xs.wavelength_nm[-1]:g} nm, but shipped {ref_name} also absorbs at {gaps}: "
                  f"the file's J alone leaves that out; a run splices the shipped values in "
                  f"(row 'spliced'; docs/spectral-data.md, \"Partial spectra\")", file=sys.stderr)
    j = _j_direct(pairs, sza, altitude, ozone, temperature, args.albedo, args.ozone_profile)
    rows = []
    for s_i, s in enumerate(sza):
        rows.append((label, args.cross_section, s, j[s_i, 0], "spectral"))
        if reference is not None:
            ratio = j[s_i, 0] / j[s_i, 1] if j[s_i, 1] > 0 else float("nan")
            rows.append((f"{ref_name} (shipped)", f"ratio file/shipped = {ratio:.6g}", s, j[s_i, 1],
                         "spectral"))
        if spliced is not None:
            ratio = j[s_i, 2] / j[s_i, 1] if j[s_i, 1] > 0 else float("nan")
            rows.append((f"{label} spliced", f"ratio spliced/shipped = {ratio:.6g}", s, j[s_i, 2],
                         "spectral"))
    fits = []
    if args.fit_lmn:
        from ..photolysis.fitting import fit_lmn
        grid = np.linspace(0.0, 85.0, 35)
        jg = _j_direct(pairs[:1], grid, altitude, ozone, temperature, args.albedo, args.ozone_profile)
        fits = [(label, *fit_lmn(grid, jg[:, 0]))]
    return rows, fits


def _reference_name(species: str | None, shipped: list[str]) -> str | None:
    """The shipped data set a lab file compares with: its species, or the longest shipped
    name its species (file name) starts with, followed by '_', '-' or '.'."""
    if not species:
        return None
    if species in shipped:
        return species
    starts = [n for n in shipped if species.startswith(n) and species[len(n):len(n) + 1] in ("_", "-", ".")]
    return max(starts, key=len) if starts else None


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


# ---------------------------------------------------------------------------
# scenario form: J through one UTC day
# ---------------------------------------------------------------------------
def _run_scenario_day(args) -> int:
    from ..scenario import load_scenario
    from ..units import parse_quantity

    given = [f"--{k.replace('_', '-')}" for k in _GEOMETRY_DEFAULTS if getattr(args, k) is not None]
    if given:
        raise BoxchemError(f"{', '.join(given)} {'belongs' if len(given) == 1 else 'belong'} to the mechanism form; with a scenario "
                           f"the place, altitude, ozone column, albedo and temperature come from "
                           f"the scenario ({args.mechanism!r})")
    if args.fit_lmn:
        raise BoxchemError("--fit-lmn belongs to the mechanism form")
    if args.reactions and not args.plot:
        raise BoxchemError("--reactions chooses the reactions drawn by --plot; give --plot FILE.png too "
                           "(the table always lists every photolysis reaction)")
    scenario = load_scenario(args.mechanism)
    if args.reactions:
        _check_plot_reactions(args.reactions, scenario.mechanism)
    step = parse_quantity(args.step, "time", default_unit="s", where="--step")
    if not 1.0 <= step <= 86400.0:
        raise BoxchemError(f"--step {args.step!r}: expected a step between 1 s and 1 d, e.g. 10min")
    day = _parse_day(args.day, scenario.start)
    table = scenario_day_jvalues(scenario, day, step, clock=args.clock)
    if args.format == "csv":
        _print_day_csv(table)
    else:
        _print_day_text(table)
    if args.plot:
        plot_day(table, args.plot, reactions=args.reactions)
        print(f"wrote {args.plot}", file=sys.stderr)
    return 0


def _check_plot_reactions(wanted, mechanism) -> None:
    """Refuse unknown --reactions ids before the day is computed, with a suggestion."""
    import difflib
    ids = [r.id for r in mechanism.reactions if r.law == "photolysis"]
    for rid in wanted:
        if rid not in ids:
            close = difflib.get_close_matches(rid, ids, n=1)
            hint = f" - did you mean {close[0]!r}?" if close else ""
            raise BoxchemError(f"--reactions: no photolysis reaction {rid!r}{hint}; valid: {', '.join(ids)}")


def _parse_day(text, start) -> np.datetime64:
    if text is None:
        return start.astype("datetime64[D]")
    try:
        day = np.datetime64(str(text).strip(), "D")
    except ValueError:
        raise BoxchemError(f"--day {text!r}: expected a UTC date YYYY-MM-DD, e.g. 2026-09-15") from None
    from ..timerange import check_utc_range
    check_utc_range(day + np.timedelta64(1, "D") - np.timedelta64(1, "s"), f"--day {text}")
    try:
        check_utc_range(day, f"--day {text}")
        return day
    except ValueError:
        raise BoxchemError(f"--day {text!r}: expected a UTC date YYYY-MM-DD, e.g. 2026-09-15") from None


def scenario_day_jvalues(scenario, day, step_s: float = 600.0, clock: str = "utc") -> dict:
    """J [s-1] of every photolysis reaction through ``day`` at the scenario's box.

    Times every ``step_s`` [s] from 00:00 to 24:00 UTC, or with
    ``clock="local"`` from 00:00 to 24:00 local mean solar time at the box's
    longitude at the start (``local_shift`` in the result, UTC + shift = local).  Conditions come from
    the scenario's Environment (solar zenith angle from
    :mod:`boxchem.environment.solar`, temperature, ozone column, distance
    factor; time series are held at their end values outside their range),
    J from a PhotolysisRates built as a run builds it (same altitude, albedo,
    method and ``[photolysis].cross_sections``).  The scenario column is used
    as given (``ozone_column_follows_box`` needs a run's box ozone).
    Returns a dict of arrays: ``time`` (datetime64), ``sza`` [deg],
    ``horizon`` [deg], ``temperature`` [K], ``ozone_column`` [DU],
    ``j`` (time, reaction) [s-1], and ``ids``, ``equations``, ``methods``.
    """
    from ..photolysis.rates import PhotolysisRates
    from ..runner import build_environment

    mech = scenario.mechanism
    photo = [i for i, r in enumerate(mech.reactions) if r.law == "photolysis"]
    if not photo:
        raise BoxchemError(f"jvalues: the scenario's mechanism {str(scenario.mechanism_path)!r} "
                           f"has no photolysis reactions")
    from ..diagnostics.solartime import local_shift
    env = build_environment(scenario)
    shift = np.timedelta64(0, "ns")
    if clock == "local":
        shift = local_shift(float(np.asarray(env.at(np.array([0.0])).longitude).ravel()[0]))
    day = np.datetime64(day, "D").astype("datetime64[ns]") - shift
    n = int(round(86400.0 / step_s))
    offsets = np.arange(n + 1) * step_s
    times = day + np.round(offsets * 1e9).astype("timedelta64[ns]")
    t_run = (times - scenario.start) / np.timedelta64(1, "s")
    state = env.at(np.asarray(t_run, dtype=float))
    altitude = float(np.asarray(state.altitude).ravel()[0])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        rates = PhotolysisRates(mech, altitude_m=altitude, albedo=scenario.albedo,
                                method=scenario.photolysis_method,
                                cross_sections={rid: str(p) for rid, p in
                                                scenario.photolysis_cross_sections.items()})
    for w in caught:
        print(f"warning: {w.message}", file=sys.stderr)
    for rid, note in rates.notices:
        print(f"{scenario.source}: warning: [photolysis].cross_sections.{rid}: {note}", file=sys.stderr)
    j = rates(state.solar_zenith_angle, state.ozone_column, state.temperature, state.distance_factor)
    return {"time": times, "sza": np.asarray(state.solar_zenith_angle, float),
            "horizon": np.asarray(state.horizon_zenith_angle, float),
            "temperature": np.asarray(state.temperature, float),
            "ozone_column": np.asarray(state.ozone_column, float),
            "j": j[:, photo], "ids": [mech.reactions[i].id for i in photo],
            "equations": [mech.reactions[i].equation for i in photo],
            "methods": [rates.source.get(mech.reactions[i].id, "") for i in photo],
            "local_shift": shift, "clock": clock}


def _iso(t) -> str:
    return f"{np.datetime_as_string(t, unit='s')}Z"


def _local(t, table) -> str:
    return np.datetime_as_string(t + table.get("local_shift", np.timedelta64(0, "ns")), unit="s")


def _print_day_csv(table) -> None:
    print("id,time,local_solar_time,sza,horizon_sza,temperature_K,ozone_column_DU,j,method")
    for r, rid in enumerate(table["ids"]):
        for i, t in enumerate(table["time"]):
            print(f"{rid},{_iso(t)},{_local(t, table)},{table['sza'][i]:.4f},{table['horizon'][i]:.3f},"
                  f"{table['temperature'][i]:.2f},{table['ozone_column'][i]:.2f},"
                  f"{table['j'][i, r]:.6e},{table['methods'][r]}")


def _print_day_text(table) -> None:
    times, j, sza = table["time"], table["j"], table["sza"]
    sunlit = sza < table["horizon"]
    step_h = float((times[1] - times[0]) / np.timedelta64(1, "s")) / 3600.0 if times.size > 1 else 0.0
    # daily mean over the day's 24 h (trapezoid over the samples; endpoints 00:00 and 24:00)
    hours = (times - times[0]) / np.timedelta64(1, "s") / 3600.0
    mean = np.trapezoid(j, hours, axis=0) / max(hours[-1], 1e-12) if hours[-1] > 0 else j[0]
    # the last sample is 24:00, i.e. 00:00 of the next day: leave it out of the
    # minimum and maximum, which would otherwise be shown as "00:00" of this day
    day = slice(0, max(times.size - 1, 1))
    local = table.get("clock") == "local"
    first = _local(times[0], table)[:10] if local else np.datetime_as_string(times[0], unit="D")
    k_min = int(np.argmin(sza[day]))
    print(f"J through {first} ({'local mean solar day, from ' + _iso(times[0]) if local else 'UTC'}); "
          f"minimum SZA {sza[day].min():.2f} deg at {_iso(times[k_min])[11:16]} UTC "
          f"({_local(times[k_min], table)[11:16]} local solar); "
          f"sun above the box's horizon for {sunlit[:-1].sum() * step_h:.1f} h")
    print(f"{'id':<14} {'max J [s-1]':>12} {'at (UTC)':>9} {'(local)':>8} {'24-h mean [s-1]':>16}  method      equation")
    for r, rid in enumerate(table["ids"]):
        k = int(np.argmax(j[day, r]))
        print(f"{rid:<14} {j[k, r]:12.4e} {_iso(times[k])[11:16]:>9} {_local(times[k], table)[11:16]:>8} "
              f"{mean[r]:16.4e}  {table['methods'][r]:<10}  {table['equations'][r]}")


def plot_day(table, path, reactions=None) -> None:
    """J(t) [s-1] (log scale) of the main reactions through the day, nights shaded."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..plotting import CYCLE_COLOURS, NIGHT_GREY, OKABE_ITO

    ids = table["ids"]
    wanted = list(reactions) if reactions else [r for r in PLOT_REACTIONS if r in ids]
    if not wanted:   # a mechanism without the usual ids: the six largest J
        wanted = [ids[i] for i in np.argsort(table["j"].max(axis=0))[::-1][:6]]
    unknown = [r for r in wanted if r not in ids]
    if unknown:
        raise BoxchemError(f"--reactions: no photolysis reaction {', '.join(map(repr, unknown))}; "
                           f"valid: {', '.join(ids)}")
    hours = (table["time"] - table["time"][0]) / np.timedelta64(1, "s") / 3600.0
    night = table["sza"] >= table["horizon"]
    fig, ax = plt.subplots(figsize=(8, 4.5), layout="constrained")
    edges = np.flatnonzero(np.diff(np.r_[0, night.astype(int), 0]))
    for a, b in zip(edges[::2], edges[1::2]):
        ax.axvspan(hours[a], hours[min(b, hours.size - 1)], color=NIGHT_GREY, linewidth=0, zorder=0)
    colours = list(CYCLE_COLOURS) + [OKABE_ITO["black"], "#999999"]
    for n, rid in enumerate(wanted):
        jr = table["j"][:, ids.index(rid)]
        ax.plot(hours, np.where(jr > 0, jr, np.nan), color=colours[n % len(colours)],
                linewidth=2.4 if n == 0 else 1.4, zorder=3 if n == 0 else 2, label=rid)
    ax.set_yscale("log")
    ax.set_xlim(0, hours[-1])
    ax.set_xticks(np.arange(0, 25, 3))
    if table.get("clock") == "local":
        ax.set_xlabel(f"local mean solar time on {_local(table['time'][0], table)[:10]} [h]")
    else:
        ax.set_xlabel(f"time on {np.datetime_as_string(table['time'][0], unit='D')} [h UTC]")
    ax.set_ylabel("photolysis frequency J [s$^{-1}$]")
    ax.set_title("J through the day at the box (grey: sun below the box's horizon)", loc="left")
    ax.legend(loc="lower center", ncol=min(len(wanted), 5), fontsize=8, frameon=False)
    fig.savefig(path, dpi=120)
    plt.close(fig)
