"""Write a run's Dataset to netCDF4 atomically, and read it back.

The file is written under a temporary name in the destination folder and
then renamed with :func:`os.replace` (atomic on POSIX and Windows within one
file system), so a crash or a full disk never leaves a half-written file
under the final name.  Floating-point variables are compressed (zlib, level
4, with shuffle); time is stored as float seconds since the first output
time, CF style.
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numpy as np
import xarray as xr

__all__ = ["write_dataset", "open_result", "netcdf_encoding", "with_cf_attributes"]

_COMPRESSION = {"zlib": True, "complevel": 4, "shuffle": True}


#: long names of coordinates that may come without one (CF 1.10 recommends long_name or
#: standard_name on every variable; the compliance checker reports coordinates without)
_COORDINATE_LONG_NAMES = {
    "member": "member index", "member_label": "member label", "factor": "member-table column name",
    "text_factor": "non-numeric member-table column name", "species": "species name as in the mechanism",
    "reaction": "reaction id as in the mechanism", "family": "species family name as in the mechanism",
    "cycle": "catalytic cycle name as in the mechanism", "time": "time (UTC)",
    "elapsed_time": "time since the start of the run",
}


def with_cf_attributes(ds: xr.Dataset) -> xr.Dataset:
    """The CF 1.10 attributes every file needs, added where missing (a shallow copy).

    * ``altitude`` (vertical coordinate): ``positive = "up"``, ``axis = "Z"`` (CF 4.3);
    * every coordinate has a ``long_name``;
    * in member/sweep files, ``latitude``/``longitude`` (varying along members)
      become auxiliary coordinates, so the data are linked to them (CF 5.6);
    * ``Conventions = "CF-1.10"`` and a ``history`` line (CF 2.6.2) when missing.
    Used by :func:`write_dataset` for run and member files alike (docs/output-format.md).
    """
    out = ds.copy(deep=False)
    # In member and sweep files the box position varies along member dimensions too; CF 5.6
    # wants the data linked to latitude/longitude, which xarray does (a `coordinates`
    # attribute on every variable that shares their dimensions) once they are coordinates.
    position = [v for v in ("latitude", "longitude") if v in out.data_vars and out[v].ndim > 1]
    if position:
        out = out.set_coords(position)
    if "altitude" in out.variables:
        out["altitude"].attrs.setdefault("positive", "up")
        out["altitude"].attrs.setdefault("axis", "Z")
    for name in out.coords:
        attrs = out[name].attrs
        if "long_name" not in attrs and "standard_name" not in attrs:
            attrs["long_name"] = _COORDINATE_LONG_NAMES.get(str(name), str(name).replace("_", " "))
    out.attrs.setdefault("Conventions", "CF-1.10")
    if not out.attrs.get("history"):       # CF 2.6.2; combining member runs can drop it
        import datetime as _dt
        now = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
        out.attrs["history"] = f"{now}: written by boxchem"
    return out


def netcdf_encoding(ds: xr.Dataset) -> dict[str, dict]:
    """Per-variable encoding: compression for float data, CF time units for time.

    Coordinates get no ``_FillValue`` (CF 2.5.1 forbids it on coordinate
    variables; xarray adds one to float and time variables by default).
    """
    encoding: dict[str, dict] = {}
    coords = set(ds.coords)
    for name, var in ds.variables.items():
        if np.issubdtype(var.dtype, np.floating) and var.ndim > 0:
            encoding[name] = dict(_COMPRESSION)
        if name in coords:
            encoding.setdefault(name, {})["_FillValue"] = None
        if np.issubdtype(var.dtype, np.datetime64):
            first = np.datetime_as_string(var.values.ravel()[0], unit="s") if var.size else \
                "1970-01-01T00:00:00"
            encoding[name] = {"units": f"seconds since {first.replace('T', ' ')}",
                              "calendar": "proleptic_gregorian", "dtype": "float64",
                              **({"_FillValue": None} if name in coords else {})}
    return encoding


def _current_umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_dataset(ds: xr.Dataset, path: str | Path) -> Path:
    """Write ``ds`` to netCDF4 at ``path`` atomically; returns the path written."""
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    folder.mkdir(parents=True, exist_ok=True)
    from .memberfile import deferred_interrupts, remove_stale_temporaries
    # temporaries carry our pid, so a later writer can tell a crashed run's leftovers
    # (removed) from a running writer's (left alone)
    remove_stale_temporaries(path)
    fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.{os.getpid()}.", suffix=".tmp", dir=folder)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        # Ctrl-C is held until the write is done (an interrupt inside the HDF5 library could
        # leave it waiting on its file lock); the finished file is then kept
        ds = with_cf_attributes(ds)
        with deferred_interrupts():
            ds.to_netcdf(tmp, format="NETCDF4", engine="netcdf4", encoding=netcdf_encoding(ds))
            os.chmod(tmp, 0o666 & ~_current_umask())  # mkstemp creates 0600; use the usual mode
            os.replace(tmp, path)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path


def open_result(path: str | Path) -> xr.Dataset:
    """Read a result file fully into memory (the file is closed on return)."""
    with xr.open_dataset(path, engine="netcdf4") as ds:
        return ds.load()
