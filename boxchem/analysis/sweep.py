"""Parameter sweeps: run every combination of scenario values, one Dataset back.

``run_sweep("polar-spring", {"location.latitude": [-60, -70, -80],
"scale.clo_clo_m": [0.8, 1.2]})`` runs the 6 combinations in a process pool
and returns one Dataset with a dimension per varied key (named with the dots
replaced by underscores, e.g. ``location_latitude``; the key path is kept in
the coordinate's ``sweep_key`` attribute).  A member that fails (an invalid
value, an integration failure) is recorded in ``member_status`` ("ok" or
"failed") and ``member_error`` and its values are NaN; the others complete.

Keys:

* ``section.key`` of the scenario file (``location.latitude``, ``run.start``,
  ``environment.ozone_column``, ...), applied with
  :meth:`boxchem.scenario.Scenario.with_overrides` and validated like the file;
* ``scale.<reaction id>``: a factor multiplied onto the scenario's ``[scale]``;
* ``environment.temperature_offset``: kelvin added to the scenario's
  temperature (constant or time series); a key of the scenario format like
  any other (see docs/scenarios.md), so a varied value replaces an offset the
  file gives rather than adding to it.

When members start at different times (a ``run.start`` sweep), the time
dimension becomes ``elapsed_time`` (since each member's start) and each
member's start is kept in ``start_time``.
"""
from __future__ import annotations

import concurrent.futures as cf
import itertools
import os
import sys
import tomllib
from typing import Any, Callable, Mapping, Sequence

import numpy as np
import xarray as xr

from ..errors import BoxchemError

__all__ = ["SweepError", "parse_vary", "sweep_dim_name", "run_member", "run_sweep",
           "combine_members", "TEMPERATURE_OFFSET_KEY"]

TEMPERATURE_OFFSET_KEY = "environment.temperature_offset"


class SweepError(BoxchemError):
    """A sweep could not be set up, or every member failed."""


def _value(text: str) -> Any:
    """A command-line value read as TOML (number, bool, date), else kept as text."""
    text = text.strip()
    try:
        return tomllib.loads(f"v = {text}")["v"]
    except tomllib.TOMLDecodeError:
        return text


def parse_vary(items: Sequence[str]) -> dict[str, list[Any]]:
    """``["location.latitude=-60,-70"]`` -> ``{"location.latitude": [-60, -70]}``."""
    out: dict[str, list[Any]] = {}
    for item in items:
        key, sep, values = item.partition("=")
        key = key.strip()
        parts = [v for v in (p.strip() for p in values.split(",")) if v]
        if not sep or not key or not parts:
            raise SweepError(f"--vary {item!r}: expected KEY=V1,V2,..., e.g. location.latitude=-60,-70,-80")
        if "." not in key:
            raise SweepError(f"--vary {item!r}: write the key as section.key (e.g. location.latitude, "
                             f"scale.clo_clo_m, {TEMPERATURE_OFFSET_KEY})")
        if key in out:
            raise SweepError(f"--vary: key {key!r} given twice")
        out[key] = [_value(p) for p in parts]
    return out


def sweep_dim_name(key: str) -> str:
    return key.replace(".", "_")


def _check_keys(keys) -> None:
    from ..scenario import SCENARIO_KEYS
    for key in keys:
        section, name = key.split(".", 1)
        if section in ("scale", "initial"):
            continue
        if section not in SCENARIO_KEYS or name not in SCENARIO_KEYS[section]:
            valid = [f"{s}.{k}" for s, ks in SCENARIO_KEYS.items() for k in ks]
            raise SweepError(f"--vary: unknown key {key!r}; valid: {', '.join(valid)}, "
                             f"scale.<reaction id>, initial.<species>")


def vary_label(key: str, value: Any | None = None) -> str:
    """How errors name one varied value: ``--vary location.latitude=-95``."""
    return f"--vary {key}" if value is None else f"--vary {key}={value}"


def apply_temperature_offset(scenario, offset_k: float):
    """The scenario with ``offset_k`` [K] as its ``[environment].temperature_offset``.

    The offset is applied where the scenario file's own offset is, in
    :mod:`boxchem.scenario`; errors name ``--vary environment.temperature_offset=...``.
    """
    return scenario.with_overrides(origins={TEMPERATURE_OFFSET_KEY: vary_label(TEMPERATURE_OFFSET_KEY, offset_k)},
                                   **{TEMPERATURE_OFFSET_KEY: offset_k})


def run_member(scenario: str, assignment: Mapping[str, Any]) -> xr.Dataset:
    """Run one member: the scenario with ``assignment`` (key path -> value) applied."""
    from ..runner import run
    from ..scenario import load_scenario
    scale = {k.split(".", 1)[1]: v for k, v in assignment.items() if k.startswith("scale.")}
    initial = {k.split(".", 1)[1]: v for k, v in assignment.items() if k.startswith("initial.")}
    from ..scenario import paths_from_working_folder
    # file paths in --vary values are read from the working folder, not the scenario's
    overrides = paths_from_working_folder(
        {k: v for k, v in assignment.items() if not k.startswith(("scale.", "initial."))})
    if initial:
        overrides["initial"] = initial
    # errors in a member's values name the --vary item, not the scenario file
    origins = {k: vary_label(k, v) for k, v in assignment.items()}
    scn = load_scenario(scenario).with_overrides(scale=scale or None, origins=origins, **overrides)
    return run(scn, progress=False)


def _guarded(fn: Callable, scenario, assignment) -> tuple[bool, Any]:
    """Run a member in a worker; failures come back as their message, never raise."""
    try:
        return True, fn(scenario, dict(assignment))
    except Exception as exc:  # a failed member is data, not a crash of the sweep
        return False, f"{type(exc).__name__}: {exc}"


class _Progress:
    def __init__(self, total: int, quiet: bool):
        self.total, self.done, self.failed = total, 0, 0
        self.enabled = (not quiet) and sys.stderr.isatty()

    def update(self, ok: bool) -> None:
        self.done += 1
        self.failed += 0 if ok else 1
        if self.enabled:
            filled = int(round(30 * self.done / self.total))
            sys.stderr.write(f"\rsweep [{'#' * filled}{'-' * (30 - filled)}] {self.done}/{self.total} members"
                             + (f", {self.failed} failed" if self.failed else ""))
            sys.stderr.flush()

    def close(self) -> None:
        if self.enabled:
            sys.stderr.write("\n")


def run_sweep(scenario: str, vary: Mapping[str, Sequence[Any]], *, workers: int | None = None,
              member_fn: Callable[[str, dict], xr.Dataset] = run_member, quiet: bool = False) -> xr.Dataset:
    """Run every combination of ``vary`` and combine the results (see the module docstring).

    ``member_fn(scenario, assignment) -> Dataset`` runs one member; it must be
    a module-level callable (it is sent to worker processes).  ``workers``
    defaults to ``os.cpu_count()``; 1 runs the members in this process.
    """
    if not vary:
        raise SweepError("nothing to vary: give at least one --vary KEY=V1,V2,...")
    if member_fn is run_member:
        _check_keys(vary)
    keys = list(vary)
    combos = list(itertools.product(*(list(vary[k]) for k in keys)))
    workers = (os.cpu_count() or 1) if workers is None else int(workers)
    if workers < 1:
        raise SweepError(f"--workers must be at least 1, got {workers}")
    results: list[tuple[bool, Any]] = [(False, "not run")] * len(combos)
    bar = _Progress(len(combos), quiet)
    try:
        if workers == 1 or len(combos) == 1:
            for i, combo in enumerate(combos):
                results[i] = _guarded(member_fn, scenario, dict(zip(keys, combo)))
                bar.update(results[i][0])
        else:
            with cf.ProcessPoolExecutor(max_workers=min(workers, len(combos))) as pool:
                futures = {pool.submit(_guarded, member_fn, scenario, dict(zip(keys, c))): i
                           for i, c in enumerate(combos)}
                for fut in cf.as_completed(futures):
                    try:
                        results[futures[fut]] = fut.result()
                    except Exception as exc:  # e.g. a worker process killed
                        results[futures[fut]] = (False, f"{type(exc).__name__}: {exc}")
                    bar.update(results[futures[fut]][0])
    finally:
        bar.close()
    return combine_members(keys, [list(vary[k]) for k in keys], results, scenario)


def _coord_values(values: list[Any]) -> np.ndarray:
    if all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in values):
        return np.asarray(values, dtype=float)
    return np.asarray([str(v) for v in values], dtype=object)


def _nan_like(template: xr.Dataset) -> xr.Dataset:
    out = template.copy(deep=True)
    for name, var in out.data_vars.items():
        if var.dtype.kind in "fciu":
            out[name] = var.astype(float) * np.nan
        elif var.dtype.kind in "mM":
            out[name] = var.copy(data=np.full(var.shape, np.datetime64("NaT", "ns") if var.dtype.kind == "M"
                                              else np.timedelta64("NaT", "ns"), dtype=var.dtype))
    return out


def _to_elapsed(ds: xr.Dataset) -> xr.Dataset:
    t = ds["time"].values
    out = ds.assign_coords(time=(t - t[0]).astype("timedelta64[ns]")).rename(time="elapsed_time")
    return out.assign(start_time=((), t[0]))


def combine_members(keys: list[str], values: list[list[Any]], results: list[tuple[bool, Any]],
                    scenario: str = "") -> xr.Dataset:
    """Combine member results (in ``itertools.product`` order) into one Dataset."""
    ok = [r for flag, r in results if flag]
    if not ok:
        errors = "\n".join(f"  member {i}: {msg}" for i, (_, msg) in enumerate(results))
        raise SweepError(f"every member of the sweep failed:\n{errors}")
    times = [r["time"].values for r in ok]
    same_times = all(t.shape == times[0].shape and np.array_equal(t, times[0]) for t in times)
    members = [r if same_times else _to_elapsed(r) for r in ok]
    if not same_times:
        # members may have different lengths: put all on the union of elapsed times
        union = np.unique(np.concatenate([m["elapsed_time"].values for m in members]))
        members = [m.reindex(elapsed_time=union) for m in members]
    template = _nan_like(members[0])
    it = iter(members)
    filled = [next(it) if flag else template for flag, _ in results]
    dims = [sweep_dim_name(k) for k in keys]
    shape = [len(v) for v in values]
    nested: Any = np.empty(shape, dtype=object)
    for idx, ds in zip(np.ndindex(*shape), filled):
        nested[idx] = ds
    combined = xr.combine_nested(nested.tolist(), concat_dim=dims, combine_attrs="drop_conflicts",
                                 data_vars="all", coords="minimal", compat="override", join="outer")
    combined = combined.transpose(*dims, ...)
    for key, dim, vals in zip(keys, dims, values):
        combined = combined.assign_coords({dim: (dim, _coord_values(vals), {"sweep_key": key})})
    status = np.array(["ok" if flag else "failed" for flag, _ in results], dtype=object).reshape(shape)
    error = np.array(["" if flag else str(msg) for flag, msg in results], dtype=object).reshape(shape)
    combined["member_status"] = (dims, status, {"long_name": "ok, or failed (see member_error)"})
    combined["member_error"] = (dims, error, {"long_name": "error message of a failed member"})
    combined.attrs.update(sweep_scenario=str(scenario), sweep_keys=" ".join(keys),
                          sweep_members=int(np.prod(shape)),
                          sweep_failed=int(sum(not flag for flag, _ in results)))
    return combined
