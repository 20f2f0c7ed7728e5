"""Output location checks before a run, and a fallback when writing fails after it.

``check_output_location(path, estimated_bytes)`` runs before the integration
starts: the folder (or its nearest existing ancestor, since the writer
creates missing folders) must be a writable folder, the path must not be a
folder, and the file system must have room for the estimated size (an upper
bound: the uncompressed size of the variables; compression usually halves
it).  ``write_with_fallback(ds, path)`` writes atomically and, when that fails
(disk full, permissions changed, the folder vanished), writes the same Dataset
to a fallback path in the system's temporary folder, then raises
:class:`OutputError` naming both paths - the result of a long run is never
lost to a write error.
"""
from __future__ import annotations

import os
import shutil
import tempfile
import time
from pathlib import Path

from ..errors import BoxchemError
from ..exitcodes import OUTPUT_ERROR

__all__ = ["OutputError", "check_output_location", "write_with_fallback", "fallback_path",
           "estimated_result_bytes", "SPACE_MARGIN_BYTES"]

#: free space kept beyond the estimate (metadata, the temporary file's neighbours)
SPACE_MARGIN_BYTES = 16 * 1024 * 1024


class OutputError(BoxchemError):
    """The result cannot be, or could not be, written where asked (exit status 3)."""

    exit_code = OUTPUT_ERROR


def estimated_result_bytes(n_times: int, n_species: int, n_reactions: int,
                           n_families: int = 0, n_cycles: int = 0) -> int:
    """Upper bound of a run's result size [bytes]: every variable as float64, uncompressed.

    Per output time: number density and mole fraction (species), rate
    coefficient and reaction rate (reaction), families, cycles and 14 time
    series; plus the stoichiometry and weight matrices.
    """
    per_time = 2 * n_species + 2 * n_reactions + n_families + n_cycles + 14
    static = n_species * n_reactions + n_families * n_species + n_cycles * n_reactions
    return int(8 * (n_times * per_time + static) + 64 * 1024)


def _existing_ancestor(folder: Path) -> Path:
    folder = folder.absolute()
    while not folder.exists() and folder != folder.parent:
        folder = folder.parent
    return folder


def check_output_location(path: str | Path, estimated_bytes: int = 0, *, what: str = "-o") -> None:
    """Raise :class:`OutputError` when ``path`` cannot take a result of ``estimated_bytes``."""
    path = Path(path)
    if path.is_dir():
        raise OutputError(f"{what} {path}: is a folder; give a file name, e.g. {path / 'run.nc'}")
    folder = path.parent if str(path.parent) else Path(".")
    existing = _existing_ancestor(folder)
    if not existing.is_dir():
        raise OutputError(f"{what} {path}: {existing} is not a folder, so {folder} cannot be created")
    if not os.access(existing, os.W_OK | os.X_OK):
        raise OutputError(f"{what} {path}: the folder {existing} is not writable; choose another "
                          f"output path with -o")
    if existing.is_dir():
        # access() can say yes where the file system says no (read-only mounts, ACLs, /proc):
        # try it, in the folder or in the nearest existing parent the writer would create it in
        try:
            fd, probe = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".probe", dir=existing)
            os.close(fd)
            os.unlink(probe)
        except OSError as exc:
            raise OutputError(f"{what} {path}: cannot create a file in {existing} "
                              f"({exc.strerror or exc}); choose another output path with -o") from None
    if path.exists() and not os.access(path, os.W_OK):
        # os.replace() over a read-only file works on POSIX, but the user marked it read-only
        raise OutputError(f"{what} {path}: the existing file is read-only; remove it or choose "
                          f"another output path")
    try:
        free = shutil.disk_usage(existing).free
    except OSError:
        return
    need = int(estimated_bytes) + SPACE_MARGIN_BYTES
    if estimated_bytes and free < need:
        raise OutputError(f"{what} {path}: {free / 2**20:.1f} MiB free in {existing}, but the result "
                          f"needs up to {need / 2**20:.1f} MiB (estimated before the run); free some "
                          f"space or choose another output path")


def fallback_path(path: Path) -> Path:
    """A fresh path for the result in the system's temporary folder."""
    stamp = time.strftime("%Y%m%dT%H%M%S", time.gmtime())
    return Path(tempfile.gettempdir()) / f"{path.stem}-{stamp}-{os.getpid()}.nc"


def write_with_fallback(ds, path: str | Path) -> Path:
    """Write ``ds`` to ``path``; on failure write it to :func:`fallback_path` and raise OutputError.

    The error message names the failure and where the result went (or, if the
    fallback failed too, says so plainly).
    """
    from .netcdf import write_dataset
    path = Path(path)
    try:
        return write_dataset(ds, path)
    except (OSError, RuntimeError, ValueError) as exc:
        reason = getattr(exc, "strerror", None) or str(exc) or type(exc).__name__
        fallback = fallback_path(path)
        try:
            write_dataset(ds, fallback)
        except (OSError, RuntimeError, ValueError) as exc2:
            reason2 = getattr(exc2, "strerror", None) or str(exc2) or type(exc2).__name__
            raise OutputError(f"could not write {path} ({reason}), nor the fallback {fallback} "
                              f"({reason2}); the result is lost") from None
        raise OutputError(f"could not write {path} ({reason}); the result was written to "
                          f"{fallback} instead (move it with: mv {fallback} {path})") from None
