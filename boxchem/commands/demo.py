"""``boxchem demo [DIR]``: run the polar-spring scenario and explain what happened.

Writes into DIR the result (netCDF), the standard figures of
:func:`boxchem.plotting.plot_all` and ``summary.txt``: how much ozone the box
lost, by which catalytic cycles, and when (peak loss day, minimum ozone,
chlorine activation and deactivation dates).  The summary is computed by
:func:`summarize` (a dict, testable) and worded by :func:`format_summary`.
"""
from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

from ..errors import BoxchemError, IntegrationError

__all__ = ["register", "main", "choose_output_dir", "summarize", "format_summary",
           "DEMO_SCENARIO", "DEFAULT_DIR_NAME"]

DEMO_SCENARIO = "polar-spring"
DEFAULT_DIR_NAME = "boxchem-demo"
#: active-chlorine fraction (Clx/Cly) that counts as "activated"; a convention
#: of this summary (common practice, no source)
ACTIVATED_FRACTION = 0.5
#: fraction below which chlorine counts as back in its reservoirs
DEACTIVATED_FRACTION = 0.1

EXAMPLE = """examples:
  boxchem demo                       # runs polar-spring into ./boxchem-demo/ (about a minute)
  boxchem demo my-demo               # into ./my-demo/ (must be new or empty)
  boxchem demo --set 'initial.HNO3="9 ppbv"'   # the undenitrified variant
  boxchem demo quick --days 10       # a shortened run (first 10 days only; for trying things out)

Writes DIR/polar-spring.nc, the figures (mixing_ratios, diurnal_clo_cl2o2,
ozone_loss, chlorine_partitioning, solar_zenith_angle; PNG) and
DIR/summary.txt, which is also printed.  An existing non-empty DIR is never
overwritten: without DIR the next free name (boxchem-demo-2, ...) is used.
The scenario and its variants are described in docs/polar-scenarios.md."""


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "demo", help="run the polar-spring scenario and write its figures and a summary",
        description="Run the shipped polar-spring scenario (Antarctic vortex, 1 August to "
                    "15 October) and write the result, the standard figures and a short "
                    "text summary of the ozone loss into a new folder.",
        epilog=EXAMPLE, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("directory", nargs="?", metavar="DIR", default=None,
                   help=f"output folder, new or empty (default: ./{DEFAULT_DIR_NAME}, or the "
                        "next free ./boxchem-demo-N)")
    p.add_argument("--days", type=float, default=None, metavar="N",
                   help="run only the first N days (a shortened run for quick trials and tests; "
                        "default: the whole scenario)")
    p.add_argument("--set", metavar="SECTION.KEY=VALUE", action="append", default=[],
                   dest="overrides", help="override a scenario value, as in 'boxchem run' (repeatable)")
    p.add_argument("--format", choices=("png", "pdf"), default="png", help="figure format (default png)")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar and no printed summary")
    p.set_defaults(func=main)


# ---------------------------------------------------------------------------
# output folder
# ---------------------------------------------------------------------------
def _is_empty_dir(path: Path) -> bool:
    return path.is_dir() and not any(path.iterdir())


def choose_output_dir(directory: str | None, cwd: Path | None = None) -> Path:
    """The folder to write into: DIR if new or empty, else an error; default the next free name."""
    cwd = Path.cwd() if cwd is None else cwd
    if directory is not None:
        path = Path(directory)
        if path.exists() and not path.is_dir():
            raise BoxchemError(f"DIR {str(path)!r} exists and is not a folder; give a new folder name")
        if path.exists() and not _is_empty_dir(path):
            raise BoxchemError(f"DIR {str(path)!r} exists and is not empty; give a new or empty "
                               "folder (the demo never overwrites files)")
        return path
    for n in range(1, 1000):
        path = cwd / (DEFAULT_DIR_NAME if n == 1 else f"{DEFAULT_DIR_NAME}-{n}")
        if not path.exists() or _is_empty_dir(path):
            return path
    raise BoxchemError(f"no free folder name {DEFAULT_DIR_NAME}-N in {str(cwd)!r}; give DIR")


# ---------------------------------------------------------------------------
# summary
# ---------------------------------------------------------------------------
def _date(t) -> str:
    return np.datetime_as_string(np.datetime64(t, "m"), unit="m").replace("T", " ") + " UTC"


def _day(t) -> str:
    return np.datetime_as_string(np.datetime64(t, "D"), unit="D")


def _first(times: np.ndarray, mask: np.ndarray):
    idx = np.flatnonzero(mask)
    return times[idx[0]] if idx.size else None


def _active_chlorine_fraction(ds) -> np.ndarray | None:
    """Clx/Cly over time [1] from the run's families, or None if it lacks them."""
    if "family" not in ds.coords:
        return None
    families = [str(f) for f in ds["family"].values]
    if "Clx" not in families or "Cly" not in families:
        return None
    fam = ds["family_number_density"]
    cly = fam.sel(family="Cly").values
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(cly > 0, fam.sel(family="Clx").values / cly, np.nan)


def summarize(ds) -> dict:
    """Key numbers of a run's ozone loss, as a plain dict (mole fractions [1], percent, dates).

    Keys: ``start``, ``end``, ``latitude``, ``o3_initial``, ``o3_final``,
    ``o3_min``, ``o3_min_time``, ``loss_percent_total``, ``cycles`` (list of
    (name, accumulated loss [mol mol-1], share of total [1]) sorted by size,
    then the unattributed remainder), ``peak_day``, ``peak_day_loss_percent``,
    ``peak_day_loss_x``, ``clo_max``, ``clo_max_time``, ``activation_time``,
    ``deactivation_time``, ``psc_last_time``, ``final_partition`` (fractions
    of Cly in HCl and ClONO2).  Dates are None when the run does not reach them.
    """
    import boxchem.diagnostics  # noqa: F401  (the package registers ds.boxchem)

    times = ds["time"].values
    species = [str(s) for s in ds["species"].values]
    o3 = ds["mole_fraction"].sel(species="O3").values
    acc = ds.boxchem.accumulated_loss()
    last = acc.isel(time=-1)
    total = float(last["loss_mole_fraction"].sel(term="total"))
    terms = [str(t) for t in acc["term"].values if str(t) not in ("total", "unattributed")]
    cycles = sorted(((t, float(last["loss_mole_fraction"].sel(term=t))) for t in terms),
                    key=lambda item: item[1], reverse=True)
    share = (lambda v: v / total) if total > 0 else (lambda v: float("nan"))
    cycle_rows = [(name, value, share(value)) for name, value in cycles]
    remainder = float(last["loss_mole_fraction"].sel(term="unattributed"))
    cycle_rows.append(("unattributed", remainder, share(remainder)))

    daily = ds.boxchem.daily_loss()
    full_days = daily["covered_hours"].values >= 23.99
    day_loss = daily["loss_percent"].sel(term="total").values
    day_loss_x = daily["loss_mole_fraction"].sel(term="total").values
    peak = None
    if full_days.any():
        candidates = np.where(full_days, day_loss, -np.inf)
        peak = int(np.argmax(candidates))

    out = {
        "start": times[0], "end": times[-1],
        "latitude": float(np.asarray(ds["latitude"].values).ravel()[0]) if "latitude" in ds else None,
        "o3_initial": float(o3[0]), "o3_final": float(o3[-1]),
        "o3_min": float(o3.min()), "o3_min_time": times[int(np.argmin(o3))],
        "loss_percent_total": float(last["loss_percent"].sel(term="total")),
        "cycles": cycle_rows,
        "peak_day": daily["day"].values[peak] if peak is not None else None,
        "peak_day_loss_percent": float(day_loss[peak]) if peak is not None else None,
        "peak_day_loss_x": float(day_loss_x[peak]) if peak is not None else None,
        "clo_max": None, "clo_max_time": None,
        "activation_time": None, "deactivation_time": None, "psc_last_time": None,
        "final_partition": {},
    }
    if "ClO" in species:
        clo = ds["mole_fraction"].sel(species="ClO").values
        out["clo_max"], out["clo_max_time"] = float(clo.max()), times[int(np.argmax(clo))]
    active = _active_chlorine_fraction(ds)
    if active is not None and np.isfinite(active).any():
        out["active_fraction_max"] = float(np.nanmax(active))
        activated = active >= ACTIVATED_FRACTION
        out["activation_time"] = _first(times, activated)
        if activated.any():
            after = np.arange(times.size) > np.flatnonzero(activated)[-1]
            out["deactivation_time"] = _first(times, after & (active < DEACTIVATED_FRACTION))
        cly = ds["family_number_density"].sel(family="Cly").values[-1]
        for name in ("HCl", "ClONO2"):
            if name in species and cly > 0:
                out["final_partition"][name] = float(ds["number_density"].sel(species=name).values[-1] / cly)
    if "psc_surface_area" in ds:
        psc = ds["psc_surface_area"].values
        if (psc > 0).any():
            out["psc_last_time"] = times[np.flatnonzero(psc > 0)[-1]]
    return out


def _ppb(x: float) -> str:
    return f"{x * 1e9:.0f} ppbv" if abs(x) >= 1e-8 else f"{x * 1e9:.2f} ppbv"


def format_summary(s: dict, *, scenario: str = DEMO_SCENARIO, wall_s: float | None = None) -> str:
    """The summary of :func:`summarize` as a few lines of text."""
    lines = [f"boxchem demo: scenario {scenario}, {_day(s['start'])} to {_day(s['end'])}"
             + (f" at {abs(s['latitude']):.0f} {'S' if s['latitude'] < 0 else 'N'}"
                if s.get("latitude") is not None else ""),
             "(invented but plausible inputs: see docs/polar-scenarios.md)", ""]
    lost = 100.0 * (1.0 - s["o3_final"] / s["o3_initial"])
    lines.append(f"Ozone: {s['o3_initial'] * 1e6:.2f} ppmv at the start, {s['o3_final'] * 1e6:.2f} ppmv "
                 f"at the end ({lost:.0f} % lost); minimum {s['o3_min'] * 1e6:.2f} ppmv on "
                 f"{_date(s['o3_min_time'])}.")
    lines.append(f"Chemical odd-oxygen loss over the run: {s['loss_percent_total']:.0f} % of the initial O3.")
    if s["peak_day"] is not None:
        lines.append(f"Fastest loss on {_day(s['peak_day'])} (UTC day): {s['peak_day_loss_percent']:.2f} % "
                     f"of the initial O3 ({_ppb(s['peak_day_loss_x'])}) in one day.")
    lines += ["", "Accumulated loss by catalytic cycle:",
              f"  {'cycle':14s} {'loss':>12s} {'share':>7s}"]
    for name, value, share in s["cycles"]:
        if name != "unattributed" and abs(share) < 0.001:
            continue
        lines.append(f"  {name:14s} {value * 1e9:8.1f} ppbv {100 * share:6.1f} %")
    lines.append("  (cycles below 0.1 % not shown; 'unattributed' is the loss no listed cycle covers)")
    lines.append("")
    if s["clo_max"] is not None:
        lines.append(f"Largest ClO: {s['clo_max'] * 1e9:.2f} ppbv on {_date(s['clo_max_time'])}.")
    if "active_fraction_max" in s:
        act = s["activation_time"]
        at_start = act is not None and act == s["start"]
        lines.append(f"Chlorine activation (Clx/Cly >= {ACTIVATED_FRACTION:.0%}): "
                     + ("already at the start" if at_start else _date(act) if act is not None else
                        f"not reached (largest Clx/Cly {s['active_fraction_max']:.0%})") + ".")
        if act is not None:
            deact = s["deactivation_time"]
            lines.append(f"Deactivation (Clx/Cly back below {DEACTIVATED_FRACTION:.0%}): "
                         + (_date(deact) if deact is not None else "not reached by the end of the run") + ".")
    if s["psc_last_time"] is not None:
        lines.append(f"Last PSC surface area: {_date(s['psc_last_time'])}.")
    if s["final_partition"]:
        parts = ", ".join(f"{name} {100 * v:.0f} %" for name, v in s["final_partition"].items())
        lines.append(f"Chlorine at the end: {parts} of Cly.")
    if wall_s is not None:
        lines += ["", f"Run time: {wall_s:.1f} s."]
    return "\n".join(lines) + "\n"


# ---------------------------------------------------------------------------
# command
# ---------------------------------------------------------------------------
def main(args) -> int:
    from ..io.netcdf import write_dataset
    from ..plotting import plot_all
    from ..runner import run
    from ..scenario import load_scenario
    from .run import _toml_value, parse_assignments

    if args.days is not None and not args.days > 0:
        raise BoxchemError(f"--days {args.days:g}: give a positive number of days, e.g. --days 10")
    outdir = choose_output_dir(args.directory)
    overrides = {k: _toml_value(v) for k, v in parse_assignments(args.overrides, "--set").items()}
    scenario = load_scenario(DEMO_SCENARIO)
    if args.days is not None:
        overrides["run.duration"] = f"{args.days:g} d"
    if not args.quiet:
        days = args.days if args.days is not None else scenario.duration_s / 86400.0
        print(f"boxchem demo: running {DEMO_SCENARIO} ({days:g} days) into {outdir}/", file=sys.stderr)
    wall0 = time.perf_counter()
    outdir.mkdir(parents=True, exist_ok=True)
    nc = outdir / f"{DEMO_SCENARIO}.nc"
    try:
        ds = run(scenario, progress=not args.quiet, **overrides)
    except IntegrationError as exc:
        if exc.partial_result is not None:
            path = write_dataset(exc.partial_result, outdir / f"{DEMO_SCENARIO}.partial.nc")
            print(f"boxchem demo: integration failed: {exc}\n  result up to the failure written to "
                  f"{path}", file=sys.stderr)
        else:
            print(f"boxchem demo: integration failed: {exc}", file=sys.stderr)
        return 1
    wall = time.perf_counter() - wall0
    write_dataset(ds, nc)
    figures, skipped = plot_all(ds, outdir, fmt=args.format)
    text = format_summary(summarize(ds), wall_s=wall)
    (outdir / "summary.txt").write_text(text, encoding="utf-8")
    if not args.quiet:
        print(text)
        print(f"wrote {nc}, {len(figures)} figures and {outdir / 'summary.txt'}")
        for note in skipped:
            print(f"skipped figure {note}", file=sys.stderr)
    return 0
