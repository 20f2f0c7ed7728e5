"""The ``ds.boxchem`` accessor: diagnostics as methods of a run's Dataset.

Importing this module registers the accessor (xarray's documented extension
mechanism).  It is deliberately thin: every method calls the function of the
same job in budget.py, ozone_loss.py or partitioning.py, which stay the
primary, testable interface.  The diagnostics are computed on demand rather
than stored as Dataset variables, so a result file stays as the run wrote it.

    >>> import boxchem.diagnostics.accessor  # noqa: F401  (registers ds.boxchem)
    >>> ds.boxchem.production_loss("Ox")
    >>> ds.boxchem.accumulated_loss()["loss_percent"].sel(term="total")
"""
from __future__ import annotations

import xarray as xr

from . import budget, ozone_loss, partitioning as _partitioning

__all__ = ["BoxchemAccessor"]


@xr.register_dataset_accessor("boxchem")
class BoxchemAccessor:
    def __init__(self, ds: xr.Dataset):
        self._ds = ds

    def production_loss(self, name: str, mechanism=None) -> xr.Dataset:
        """Production and loss of a species or family by reaction [cm-3 s-1]."""
        return budget.production_loss(self._ds, name, mechanism)

    def ox_loss(self, family: str = "Ox", mechanism=None, basis: str = "recycled") -> xr.Dataset:
        """Total odd-oxygen loss, by cycle, and the unattributed remainder [cm-3 s-1]."""
        return ozone_loss.ox_loss(self._ds, family, mechanism, basis)

    def accumulated_loss(self, family: str = "Ox", ozone: str = "O3", mechanism=None) -> xr.Dataset:
        """Accumulated loss by cycle [cm-3, mol mol-1, %]."""
        return ozone_loss.accumulated_loss(self._ds, family, ozone, mechanism)

    def daily_loss(self, family: str = "Ox", ozone: str = "O3", longitude=None, mechanism=None) -> xr.Dataset:
        """Loss per (UTC or local solar) day by cycle."""
        return ozone_loss.daily_loss(self._ds, family, ozone, longitude, mechanism)

    def partitioning(self, names=None) -> xr.Dataset:
        """Radical partitioning ratios over time [1]."""
        return _partitioning.partitioning(self._ds, names)

    # -- member files (sweeps, ensembles) and summaries --------------------------------
    def member(self, key) -> xr.Dataset:
        """One member of a member file, by index or label, as a single-run-like Dataset."""
        from .members import select_member
        return select_member(self._ds, key)

    def across_members(self, name: str) -> xr.Dataset:
        """Median and 5-95 % range across the successful members of variable ``name``."""
        from .members import successful_members, summarize_members
        ok = xr.DataArray(successful_members(self._ds), dims="member")
        return summarize_members(self._ds[name].where(ok))

    def summary(self) -> dict:
        """Key numbers (boxchem.diagnostics.summary): of the run, or across the members."""
        from . import summary
        from .members import is_members
        return summary.summarize_across_members(self._ds) if is_members(self._ds) else summary.summarize(self._ds)

    def compare(self, other: xr.Dataset, **options) -> list[dict]:
        """Rows of ``boxchem compare`` with this Dataset as BASE (boxchem.diagnostics.comparison)."""
        from .comparison import compare_results
        return compare_results(self._ds, other, **options)
