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

__all__ = ["write_dataset", "open_result", "netcdf_encoding"]

_COMPRESSION = {"zlib": True, "complevel": 4, "shuffle": True}


def netcdf_encoding(ds: xr.Dataset) -> dict[str, dict]:
    """Per-variable encoding: compression for float data, CF time units for time."""
    encoding: dict[str, dict] = {}
    for name, var in ds.variables.items():
        if np.issubdtype(var.dtype, np.floating) and var.ndim > 0:
            encoding[name] = dict(_COMPRESSION)
        if np.issubdtype(var.dtype, np.datetime64):
            first = np.datetime_as_string(var.values.ravel()[0], unit="s") if var.size else \
                "1970-01-01T00:00:00"
            encoding[name] = {"units": f"seconds since {first.replace('T', ' ')}",
                              "calendar": "proleptic_gregorian", "dtype": "float64"}
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
