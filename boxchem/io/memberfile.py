"""The member file: one netCDF file for the members of a sweep or ensemble, written as they finish.

Layout (DEVELOPERS.md, "Ensemble engine"; the one layout for sweeps and
ensembles): dimension ``member`` with coordinate ``member`` = 0..M-1 and
``member_label``; the member table as ``member_table`` (member, factor) and
``member_table_text`` (member, text_factor); ``member_status`` (0 pending,
1 success, 2 failed), ``member_message``, ``member_failure_time``; the saved
variables of a single run with a leading ``member`` dimension; the
coordinates, matrices and provenance attributes of a single run;
``boxchem_result_kind = "members"``.

Why this on-disk scheme (crash safety without copies):

* The file is a netCDF classic file (64-bit offset, or CDF-5 when a variable
  exceeds 4 GiB) whose dimensions are all fixed when it is created: every
  variable sits at a fixed offset and the header never changes afterwards.
  Storing a finished batch is a plain in-place write of its rows, so a
  process killed mid-write cannot damage the file's structure (an HDF5-based
  netCDF-4 file can be left unreadable by a write cut short).  No
  compression, for the same reason.
* The file is created complete (every member pending, data NaN) under a
  temporary name, fsync'ed and renamed: it exists under its final name only
  when it is valid.  Temporary names carry the creating process id
  (``.NAME.PID.XXXX.tmp``); ones whose process is gone are removed by the next
  writer (:func:`remove_stale_temporaries`).
* A batch's data rows are written and flushed to disk (fsync) *before* its
  ``member_status`` entries are set: a member marked success always has its
  data on disk.  After a crash, members still marked pending may hold partly
  written rows; readers go by ``member_status`` (:func:`open_member_file`
  masks them) and ``--resume`` rewrites them.
* SIGINT arriving during a write is held until the write is complete (a few
  ms), so an interrupt never cuts a batch in half.

Readers may open the file at any time (classic netCDF has no file lock),
also while members are still being written.
"""
from __future__ import annotations

import contextlib
import os
import re
import signal
import tempfile
import threading
from pathlib import Path
from typing import Any, Iterator, Mapping, Sequence

import numpy as np
import xarray as xr

__all__ = ["STATUS_PENDING", "STATUS_SUCCESS", "STATUS_FAILED", "STATUS_MEANINGS",
           "MESSAGE_LENGTH", "create_member_file", "write_members", "open_member_file",
           "read_member_state", "remove_stale_temporaries", "deferred_interrupts", "RESULT_KIND"]

STATUS_PENDING, STATUS_SUCCESS, STATUS_FAILED = 0, 1, 2
STATUS_MEANINGS = "pending success failed"
#: longest member_message kept [characters of UTF-8]; longer messages are cut with "..."
MESSAGE_LENGTH = 400
RESULT_KIND = "members"
#: netCDF classic 64-bit-offset files limit each fixed-size variable to 4 GiB
_CLASSIC_VARIABLE_LIMIT = 4 * 2**30 - 4


# ---------------------------------------------------------------------------
# signals and temporaries
# ---------------------------------------------------------------------------
@contextlib.contextmanager
def deferred_interrupts() -> Iterator[None]:
    """Hold SIGINT and SIGTERM until the block ends, then deliver them (main thread only)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    received: list[int] = []
    previous = {}

    def hold(signum, frame):
        received.append(signum)

    for sig in (signal.SIGINT, signal.SIGTERM):
        try:
            previous[sig] = signal.signal(sig, hold)
        except (ValueError, OSError):
            pass
    try:
        yield
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, handler)
        for sig in received[:1]:
            handler = previous.get(sig)
            if callable(handler):
                handler(sig, None)
            elif sig == signal.SIGINT:
                raise KeyboardInterrupt


_TEMP_RE = r"^\.{name}\.(\d+)\.[^.]+\.tmp$"


def _pid_alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def remove_stale_temporaries(path: str | Path) -> list[Path]:
    """Remove ``.NAME.PID.*.tmp`` files next to ``path`` whose creating process is gone.

    Files of running processes are left alone (another writer may be
    creating them).  Returns the files removed.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    pattern = re.compile(_TEMP_RE.format(name=re.escape(path.name)))
    removed = []
    try:
        entries = list(folder.iterdir())
    except OSError:
        return removed
    for entry in entries:
        m = pattern.match(entry.name)
        if m and not _pid_alive(int(m.group(1))):
            with contextlib.suppress(OSError):
                entry.unlink()
                removed.append(entry)
    return removed


def _fsync_path(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_folder(folder: Path) -> None:
    with contextlib.suppress(OSError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


# ---------------------------------------------------------------------------
# creating
# ---------------------------------------------------------------------------
def _encoded_bytes(text: str, length: int) -> np.ndarray:
    raw = str(text).encode("utf-8")
    if len(raw) > length:
        raw = raw[:length - 3]
        while raw and (raw[-1] & 0xC0) == 0x80:   # do not cut a UTF-8 sequence in half
            raw = raw[:-1]
        if raw and raw[-1] >= 0xC0:
            raw = raw[:-1]
        raw += b"..."
    return np.frombuffer(raw.ljust(length, b"\0"), dtype="S1")


def create_member_file(path: str | Path, template: xr.Dataset,
                       variables: Mapping[str, tuple[tuple[str, ...], Mapping[str, Any]]],
                       checks: Mapping[str, tuple[tuple[str, ...], Mapping[str, Any], str]] | None = None
                       ) -> Path:
    """Create the member file at ``path`` atomically, every member pending.

    ``template``: coordinates (including ``member``), the member table
    variables, the static matrices and the global attributes.
    ``variables``: name -> (dims, attrs) of the per-member data variables
    (dims start with ``member``), created filled with NaN.
    ``checks``: name -> (dims, attrs, dtype) of per-member check variables (the
    conservation guard), kept for failed members too (NaN / 0 until written).
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    folder.mkdir(parents=True, exist_ok=True)
    remove_stale_temporaries(path)
    # netCDF classic reads a dimension of size 0 as the record dimension: leave out empty
    # dimensions (e.g. a mechanism without families) and what uses them
    empty = [d for d, n in template.sizes.items() if n == 0]
    if empty:
        template = template.drop_vars([n for n, v in template.variables.items()
                                       if set(v.dims) & set(empty)]).drop_dims(empty, errors="ignore")
        variables = {n: v for n, v in variables.items() if not set(v[0]) & set(empty)}
        checks = {n: v for n, v in (checks or {}).items() if not set(v[0]) & set(empty)}
    sizes = dict(template.sizes)
    largest = max((8 * int(np.prod([sizes[d] for d in dims])) for dims, _ in variables.values()),
                  default=0)
    fmt = "NETCDF3_64BIT_OFFSET" if largest < _CLASSIC_VARIABLE_LIMIT else "NETCDF3_64BIT_DATA"
    fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.{os.getpid()}.", suffix=".tmp", dir=folder)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        encoding = {}
        for name, var in template.variables.items():
            if np.issubdtype(var.dtype, np.datetime64) and var.size:
                first = np.datetime_as_string(var.values.ravel()[0], unit="s").replace("T", " ")
                encoding[name] = {"units": f"seconds since {first}", "calendar": "proleptic_gregorian",
                                  "dtype": "float64"}
            elif np.issubdtype(var.dtype, np.timedelta64):
                encoding[name] = {"units": "seconds", "dtype": "float64"}
            elif var.dtype == np.int64:
                encoding[name] = {"dtype": "int32"}
            if name in template.coords and var.dtype.kind in "fcM":
                encoding.setdefault(name, {})["_FillValue"] = None    # CF: coordinates carry no fill value
        template.to_netcdf(tmp, format="NETCDF3_64BIT" if fmt == "NETCDF3_64BIT_OFFSET" else fmt,
                           engine="netcdf4", encoding=encoding)
        _add_member_variables(tmp, template, variables, checks or {})
        os.chmod(tmp, 0o666 & ~_current_umask())
        _fsync_path(tmp)
        os.replace(tmp, path)
        _fsync_folder(folder)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path


def _current_umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _add_member_variables(tmp: Path, template: xr.Dataset, variables, checks) -> None:
    import netCDF4
    aux = {name: set(var.dims) for name, var in template.coords.items() if name not in template.dims}
    n_members = template.sizes["member"]
    with netCDF4.Dataset(tmp, "a") as nc:
        nc.createDimension("message_length", MESSAGE_LENGTH)
        status = nc.createVariable("member_status", "i1", ("member",), fill_value=False)
        status.setncatts({"long_name": "state of each member", "flag_values": np.array([0, 1, 2], "i1"),
                          "flag_meanings": STATUS_MEANINGS})
        status[:] = np.zeros(n_members, dtype="i1")
        message = nc.createVariable("member_message", "S1", ("member", "message_length"))
        message.setncatts({"long_name": "why a member failed (empty for pending and successful "
                                        "members)", "_Encoding": "utf-8"})
        failure = nc.createVariable("member_failure_time", "f8", ("member",), fill_value=np.nan)
        failure.setncatts({"units": "s", "long_name": "time of the failure in seconds since the "
                                                      "member's start (NaN when none)"})
        for name, (dims, attrs) in variables.items():
            var = nc.createVariable(name, "f8", dims, fill_value=np.nan)
            attrs = {k: v for k, v in attrs.items() if k not in ("_FillValue", "coordinates")}
            coords = sorted(c for c, d in aux.items() if d and d <= set(dims))
            if coords:
                attrs["coordinates"] = " ".join(coords)
            var.setncatts(attrs)
        for name, (dims, attrs, dtype) in checks.items():
            fill = np.nan if dtype == "f8" else False
            var = nc.createVariable(name, dtype, dims, fill_value=fill)
            var.setncatts(dict(attrs))
            if dtype != "f8":
                var[:] = np.zeros([nc.dimensions[d].size for d in dims], dtype=dtype)


# ---------------------------------------------------------------------------
# writing finished members
# ---------------------------------------------------------------------------
def _runs(rows: np.ndarray) -> list[tuple[int, int, int]]:
    """Contiguous runs of sorted row indices: (first row, last row + 1, position in ``rows``)."""
    out = []
    start = 0
    for i in range(1, len(rows) + 1):
        if i == len(rows) or rows[i] != rows[i - 1] + 1:
            out.append((int(rows[start]), int(rows[i - 1]) + 1, start))
            start = i
    return out


def write_members(path: str | Path, rows: Sequence[int], arrays: Mapping[str, np.ndarray], *,
                  status: Sequence[int], message: Sequence[str], failure_time_s: Sequence[float],
                  time_index: np.ndarray | None = None,
                  checks: Mapping[str, np.ndarray] | None = None) -> None:
    """Store finished members ``rows`` in place: data first (flushed to disk), then their status.

    ``arrays``: name -> (len(rows), n_time_of_these_members, ...) values; with
    ``time_index`` they go to those positions of the file's time axis.
    Failed members are written as NaN; ``checks`` (name -> (len(rows), ...)) are
    written as given (the conservation guard of failed members is kept).
    """
    import netCDF4
    rows = np.asarray(rows, dtype=np.int64)
    order = np.argsort(rows, kind="stable")
    rows = rows[order]
    status = np.asarray(status, dtype="i1")[order]
    failed = status != STATUS_SUCCESS
    with deferred_interrupts():
        with netCDF4.Dataset(path, "a") as nc:
            nc.set_auto_mask(False)
            for name, values in arrays.items():
                if name not in nc.variables:      # a variable over an empty dimension
                    continue
                values = np.array(values, dtype=float)[order]
                values[failed] = np.nan
                var = nc.variables[name]
                if time_index is None:
                    for a, b, pos in _runs(rows):
                        var[a:b] = values[pos:pos + b - a]
                else:
                    for i, row in enumerate(rows):
                        var[int(row), time_index] = values[i]
            for name, values in (checks or {}).items():
                if name in nc.variables:
                    values = np.asarray(values)[order]
                    var = nc.variables[name]
                    for a, b, pos in _runs(rows):
                        var[a:b] = values[pos:pos + b - a]
            nc.sync()
            _fsync_path(Path(path))
            msg = nc.variables["member_message"]
            for i, row in enumerate(rows):
                msg[int(row)] = _encoded_bytes(np.asarray(message)[order][i], MESSAGE_LENGTH)
            nc.variables["member_failure_time"][rows] = np.asarray(failure_time_s, dtype=float)[order]
            nc.variables["member_status"][rows] = status
            nc.sync()
        _fsync_path(Path(path))


# ---------------------------------------------------------------------------
# reading
# ---------------------------------------------------------------------------
def read_member_state(path: str | Path) -> dict[str, Any]:
    """Status, labels, table and attributes of a member file (small; for resuming and summaries)."""
    with xr.open_dataset(path, engine="netcdf4", decode_times=False) as ds:
        if ds.attrs.get("boxchem_result_kind") != RESULT_KIND:
            raise ValueError(f"{path}: not a boxchem member file (boxchem_result_kind is "
                             f"{ds.attrs.get('boxchem_result_kind')!r}, expected {RESULT_KIND!r})")
        state = {
            "status": ds["member_status"].values.astype(int),
            "message": ds["member_message"].values.astype(str),
            "labels": ds["member_label"].values.astype(str),
            "factors": tuple(str(f) for f in ds["factor"].values) if "factor" in ds.dims else (),
            "numeric": (ds["member_table"].values if "member_table" in ds
                        else np.zeros((ds.sizes["member"], 0))),
            "text_factors": (tuple(str(f) for f in ds["text_factor"].values)
                             if "text_factor" in ds.dims else ()),
            "text": (ds["member_table_text"].values.astype(str) if "member_table_text" in ds
                     else np.zeros((ds.sizes["member"], 0), dtype=object)),
            "variables": tuple(str(ds.attrs.get("ensemble_saved_variables", "")).split()),
            "attrs": dict(ds.attrs),
        }
    return state


def _have_dask() -> bool:
    try:
        import dask.array  # noqa: F401
    except ImportError:
        return False
    return True


def open_member_file(path: str | Path, *, load: bool = False) -> xr.Dataset:
    """Open a member file; rows of members not marked success read as NaN.

    The one reader of member files: it checks the kind and masks rows of
    pending or failed members, whatever a crash may have left in them.
    Lazy (dask arrays chunked by member, so ``ds.isel(member=i)`` reads one
    chunk) unless ``load``; memory then does not grow with the file.  Without
    dask the lazy arrays are not masked (pending rows are NaN unless a kill
    cut a write short; ``load=True`` always masks).
    """
    ds = xr.open_dataset(path, engine="netcdf4")
    if ds.attrs.get("boxchem_result_kind") != RESULT_KIND:
        ds.close()
        raise ValueError(f"{path}: not a boxchem member file (boxchem_result_kind is "
                         f"{ds.attrs.get('boxchem_result_kind')!r}, expected {RESULT_KIND!r})")
    ok = ds["member_status"].load() == STATUS_SUCCESS
    for name in ("member_message", "member_failure_time", "member_label"):
        if name in ds.variables:
            ds[name].load()
    for name, var in list(ds.data_vars.items()):
        # member_* variables describe members (table, checks): kept for every member
        if var.dims[:1] == ("member",) and var.ndim >= 2 and var.dtype.kind == "f" \
                and not name.startswith("member_"):
            if load:
                ds[name] = var.load().where(ok)
            elif _have_dask():
                ds[name] = var.chunk({"member": 8}).where(ok)
    if load:
        loaded = ds.load()
        ds.close()
        return loaded
    return ds
