"""Solution families as xarray datasets, with atomic netCDF storage."""

from ._io import open_family, write_atomic

__all__ = ["write_atomic", "open_family"]
