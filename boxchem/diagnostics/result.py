"""Access to a run's output Dataset for the diagnostics: checks and lookups.

The diagnostics read only what the output contract of ``boxchem.run``
promises (see DEVELOPERS.md, "Output").  Production and loss need two more
arrays that the runner writes beside the contract variables:

* ``stoichiometry`` (species, reaction): net coefficient of each species in
  each reaction, products minus reactants, with M and hv left out;
* ``family_weight`` (family, species): the weight of each species in each
  family (e.g. 2 for Cl2O2 in Cly).

When a Dataset lacks them (an older file, a hand-made Dataset), they can be
built from an explicit :class:`~boxchem.mechanism.model.Mechanism`.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import xarray as xr

from ..errors import BoxchemError
from .families import family_weight_matrix
from .stoichiometry import net_stoichiometry_matrix

__all__ = [
    "ResultError", "open_result", "require", "stoichiometry", "family_weights",
    "elapsed_seconds", "is_family", "is_species", "names_or_error",
]

#: variables without which a Dataset is not a boxchem result
CORE_VARIABLES = ("number_density", "mole_fraction", "reaction_rate")
#: a member file (sweep, ensemble) saves a selection; mole fractions are always among it
MEMBER_CORE_VARIABLES = ("mole_fraction",)


class ResultError(BoxchemError):
    """A result file is missing or is not a boxchem result, or lacks what was asked for."""


def open_result(path: str | Path) -> xr.Dataset:
    """Open a netCDF file written by ``boxchem run`` and check it is a boxchem result."""
    path = Path(path)
    if not path.exists():
        raise ResultError(f"{path}: no such file (expected a netCDF file written by 'boxchem run')")
    if path.is_dir() or not _looks_like_netcdf(path):
        raise ResultError(f"{path}: not a netCDF file (boxchem results are written by "
                          f"'boxchem run ... -o OUT.nc')")
    try:
        ds = xr.load_dataset(path)
    except Exception as exc:  # netCDF4/h5 raise many kinds; the message is what matters
        first = (str(exc).splitlines() or [""])[0].split(". ")[0][:160]
        raise ResultError(f"{path}: cannot be read as netCDF ({first}); "
                          f"expected a file written by 'boxchem run'") from None
    if "member_status" in ds.variables and "member" not in ds.dims:
        from .members import from_sweep_layout   # today's sweep layout: a dimension per varied key
        ds.attrs.setdefault("source_file", str(path))
        ds = from_sweep_layout(ds)
    core = MEMBER_CORE_VARIABLES if "member" in ds.dims else CORE_VARIABLES
    missing = [v for v in core if v not in ds.variables]
    if missing or "time" not in ds.dims:
        raise ResultError(
            f"{path}: not a boxchem result: missing {', '.join(missing) or 'the time dimension'} "
            f"(a result has {', '.join(core)} over time; write one with 'boxchem run', "
            f"'boxchem sweep' or boxchem.ensemble)")
    ds.attrs.setdefault("source_file", str(path))
    return ds


#: file signatures: netCDF classic ("CDF" + version byte 1, 2 or 5; Unidata, "The NetCDF
#: Classic Format Specification") and HDF5, the container of netCDF-4 (the HDF Group,
#: "HDF5 File Format Specification", superblock signature at byte 0, 512, 1024, 2048, ...)
_CLASSIC_SIGNATURES = (b"CDF\x01", b"CDF\x02", b"CDF\x05")
_HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"
_HDF5_OFFSETS = (0, 512, 1024, 2048, 4096)


def _looks_like_netcdf(path: Path) -> bool:
    """True if the file starts like netCDF classic or netCDF-4 (HDF5); unreadable files pass."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(_HDF5_OFFSETS[-1] + len(_HDF5_SIGNATURE))
    except OSError:
        return True     # let the reader report why it cannot be opened
    if head[:4] in _CLASSIC_SIGNATURES:
        return True
    return any(head[o:o + len(_HDF5_SIGNATURE)] == _HDF5_SIGNATURE for o in _HDF5_OFFSETS)


def require(ds: xr.Dataset, names, what: str) -> None:
    """Raise ResultError naming every variable of ``names`` that ``ds`` lacks."""
    missing = [n for n in names if n not in ds.variables]
    if missing:
        raise ResultError(f"{ds.attrs.get('source_file', 'the Dataset')}: {what} needs the variable(s) "
                          f"{', '.join(missing)}, which this result does not have{how_to_save(ds, missing)}")


def how_to_save(ds: xr.Dataset, missing) -> str:
    """The hint that ends a 'not saved' error: how to make a file that has ``missing``."""
    if ds.attrs.get("boxchem_result_kind") == "members" or "member" in ds.dims:
        names = ", ".join(repr(m) for m in missing)
        return (f"; a member file holds only the variables it was asked to save: run the ensemble again "
                f"with them included (boxchem.ensemble(..., save=[..., {names}]), or the ensemble "
                f"command's save option), or re-run this member alone with 'boxchem run' "
                f"(a single run saves everything)")
    return "; 'boxchem run' writes it in every run file (was this file made by another tool or trimmed?)"


def names_or_error(ds: xr.Dataset, dim: str, names, what: str) -> list[str]:
    """Check that every name is a label of ``dim``; the error lists the valid ones."""
    valid = [str(v) for v in ds[dim].values] if dim in ds.coords else []
    names = [names] if isinstance(names, str) else list(names)
    unknown = [n for n in names if n not in valid]
    if unknown:
        raise ResultError(f"unknown {what} {', '.join(repr(u) for u in unknown)}; "
                          f"this result has: {', '.join(valid) or '(none)'}")
    return names


def is_species(ds: xr.Dataset, name: str) -> bool:
    return "species" in ds.coords and name in set(ds["species"].values.tolist())


def is_family(ds: xr.Dataset, name: str) -> bool:
    return "family" in ds.coords and name in set(ds["family"].values.tolist())


def stoichiometry(ds: xr.Dataset, mechanism=None) -> xr.DataArray:
    """Net stoichiometric coefficients (species, reaction) [1].

    From ``ds.stoichiometry`` when present, else from ``mechanism``
    (products minus reactants; M and hv are never terms in the data model).
    """
    if mechanism is None and "stoichiometry" in ds.variables:
        return ds["stoichiometry"]
    if mechanism is None:
        raise ResultError("production and loss need the 'stoichiometry' variable of a run "
                          "or an explicit mechanism= argument; this Dataset has neither")
    species = [str(s) for s in ds["species"].values]
    known = set(mechanism.reaction_ids)
    ids = [str(r) for r in ds["reaction"].values]
    missing = [r for r in ids if r not in known]
    if missing:
        raise ResultError(f"reaction(s) {', '.join(missing)} of the result are not in the "
                          f"mechanism {mechanism.source or '(given)'}: was the run made with another one?")
    nu = net_stoichiometry_matrix(mechanism, species, ids)
    return xr.DataArray(nu, dims=("species", "reaction"),
                        coords={"species": ds["species"], "reaction": ds["reaction"]},
                        name="stoichiometry", attrs={"units": "1"})


def family_weights(ds: xr.Dataset, mechanism=None) -> xr.DataArray:
    """Weight of each species in each family (family, species) [1]."""
    if mechanism is None and "family_weight" in ds.variables:
        return ds["family_weight"]
    if mechanism is None:
        raise ResultError("family budgets need the 'family_weight' variable of a run "
                          "or an explicit mechanism= argument; this Dataset has neither")
    species = [str(s) for s in ds["species"].values]
    fams = list(mechanism.families)
    w = family_weight_matrix(mechanism, species).T
    return xr.DataArray(w, dims=("family", "species"),
                        coords={"family": [f.name for f in fams], "species": ds["species"]},
                        name="family_weight", attrs={"units": "1"})


def elapsed_seconds(ds: xr.Dataset) -> np.ndarray:
    """Seconds since the first output time [s], as float64."""
    t = ds["time"].values
    if np.issubdtype(t.dtype, np.datetime64):
        return (t - t[0]).astype("timedelta64[ns]").astype(np.float64) * 1e-9
    return np.asarray(t, dtype=np.float64) - float(t[0])
