"""Input/output of run results (netCDF4 with CF attributes and provenance)."""
from .netcdf import open_result, write_dataset

__all__ = ["write_dataset", "open_result"]
