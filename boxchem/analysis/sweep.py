"""Parameter sweeps: every combination of listed values, as a member table for the one engine.

``run_sweep("polar-spring", {"location.latitude": [-60, -70, -80],
"scale.clo_clo_m": [0.8, 1.2]})`` builds the 6-row member table of the
grid (``itertools.product`` order: the last key varies fastest) and runs it
with :func:`boxchem.ensemble`; the result is the member file (dimension
``member``, the grid values in ``member_table``/``member_table_text``, labels
such as ``location.latitude=-60 scale.clo_clo_m=0.8``).  The attributes
``sweep_keys`` and ``sweep_shape`` say how the members form the grid, so
``grid(ds)`` gives back one dimension per key.  A member that fails (an
invalid value, an integration failure) is recorded in ``member_status`` /
``member_message``; the others complete.

Keys are those of a member table (:mod:`.members`): ``section.key`` of the
scenario (``location.latitude``, ``run.start``, ...), ``scale.<reaction id>``,
``initial.<species>`` and ``environment.temperature_offset`` (the scenario
key: kelvin added to the scenario's temperature, replacing an offset the
file sets).  Errors in a value name the ``--vary`` item.
"""
from __future__ import annotations

import itertools
import tomllib
from typing import Any, Mapping, Sequence

import numpy as np
import xarray as xr

from ..errors import BoxchemError

__all__ = ["SweepError", "parse_vary", "sweep_table", "run_sweep", "grid", "run_member",
           "vary_label", "apply_temperature_offset", "TEMPERATURE_OFFSET_KEY"]

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


def vary_label(key: str, value: Any | None = None) -> str:
    """How errors name one varied value: ``--vary location.latitude=-95``."""
    return f"--vary {key}" if value is None else f"--vary {key}={value}"


def _cell(value: Any) -> Any:
    """A grid value as a member-table cell: numbers stay numbers, the rest is text."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return float(value)
    return str(value)


def sweep_table(vary: Mapping[str, Sequence[Any]]):
    """The member table of every combination of ``vary`` (last key fastest)."""
    from .members import LABEL_COLUMN, member_table
    if not vary:
        raise SweepError("nothing to vary: give at least one --vary KEY=V1,V2,...")
    keys = list(vary)
    combos = list(itertools.product(*(list(vary[k]) for k in keys)))
    columns: dict[str, list] = {k: [_cell(c[i]) for c in combos] for i, k in enumerate(keys)}
    columns[LABEL_COLUMN] = [" ".join(f"{k}={v}" for k, v in zip(keys, c)) for c in combos]
    raw = {k: [c[i] for c in combos] for i, k in enumerate(keys)}
    table = member_table(columns, source="--vary")
    table.origin = lambda row, column: vary_label(column, raw[column][row])
    table.attrs = {"sweep_keys": " ".join(keys),
                   "sweep_shape": " ".join(str(len(list(vary[k]))) for k in keys)}
    return table


def run_sweep(scenario, vary: Mapping[str, Sequence[Any]], *, workers: int | None = None,
              output=None, quiet: bool = False, **engine) -> xr.Dataset:
    """Run every combination of ``vary`` on the ensemble engine; returns the member file.

    ``workers`` defaults to 1 (this process); ``output`` streams to a file;
    other keywords go to :func:`boxchem.ensemble`.  Raises SweepError when
    every member failed.
    """
    from .ensemble import EnsembleError, ensemble
    from .members import MemberTableError
    table = sweep_table(vary)
    try:
        ds = ensemble(scenario, table, output=output, workers=workers,
                      progress=None if quiet else True, **engine)
    except MemberTableError as exc:
        raise SweepError(str(exc).replace("--vary: column ", "--vary ")) from None
    except EnsembleError as exc:
        raise SweepError(f"every member of the sweep failed: {exc}") from None
    status = ds["member_status"].values
    if not np.any(status == 1):
        messages = "\n".join(f"  member {i} ({label}): {msg}" for i, (label, msg)
                             in enumerate(zip(ds["member_label"].values, ds["member_message"].values)))
        raise SweepError(f"every member of the sweep failed:\n{messages}")
    return ds


def grid(ds: xr.Dataset) -> xr.Dataset:
    """A sweep's member file with one dimension per varied key instead of ``member``.

    Dimension names are the keys with dots replaced by underscores
    (``location_latitude``); the key path is in each coordinate's ``sweep_key``.
    """
    keys = ds.attrs["sweep_keys"].split()
    shape = [int(n) for n in ds.attrs["sweep_shape"].split()]
    coords = {}
    for key in keys:
        if "factor" in ds.dims and key in ds["factor"].values:
            values = ds["member_table"].sel(factor=key).values
        else:
            values = ds["member_table_text"].sel(text_factor=key).values
        coords[key.replace(".", "_")] = values
    index = xr.Coordinates.from_pandas_multiindex(
        __import__("pandas").MultiIndex.from_arrays([coords[k] for k in coords], names=list(coords)),
        "member")
    dims = [k.replace(".", "_") for k in keys]
    out = ds.drop_vars(["member"]).assign_coords(index).unstack("member").transpose(*dims, ...)
    for key in keys:
        out[key.replace(".", "_")].attrs["sweep_key"] = key
    if [out.sizes[d] for d in dims] != shape:
        raise SweepError(f"grid: the members do not form the {' x '.join(map(str, shape))} grid "
                         f"of {', '.join(keys)} (repeated values in a --vary list?)")
    return out


def apply_temperature_offset(scenario, offset_k: float):
    """The scenario with ``offset_k`` [K] as its ``[environment].temperature_offset``.

    The offset is applied where the scenario file's own offset is, in
    :mod:`boxchem.scenario`; errors name ``--vary environment.temperature_offset=...``.
    """
    return scenario.with_overrides(origins={TEMPERATURE_OFFSET_KEY: vary_label(TEMPERATURE_OFFSET_KEY, offset_k)},
                                   **{TEMPERATURE_OFFSET_KEY: offset_k})


def run_member(scenario, assignment: Mapping[str, Any]) -> xr.Dataset:
    """One member as a single run (``boxchem.run``): the scenario with ``assignment`` applied.

    The reference a member of the engine is compared with; errors name the
    ``--vary`` item.
    """
    from ..runner import run
    from ..scenario import Scenario, load_scenario
    from .members import apply_setup_overrides
    scale = {k.split(".", 1)[1]: v for k, v in assignment.items() if k.startswith("scale.")}
    from ..scenario import paths_from_working_folder
    # file paths in --vary values are read from the working folder, not the scenario's
    setup = paths_from_working_folder(
        {k: _cell(v) for k, v in assignment.items() if not k.startswith("scale.")})
    origins = {k: vary_label(k, v) for k, v in assignment.items()}
    scn = scenario if isinstance(scenario, Scenario) else load_scenario(scenario)
    if setup:
        scn = apply_setup_overrides(scn, setup, origins)
    return run(scn, scale=scale or None, progress=False)
