"""Solution families as xarray datasets (one schema), with atomic netCDF storage.

``build_family_dataset``  point records -> Dataset (layout in DEVELOPERS.md)
``read_family_dataset``   Dataset -> point records (for resuming)
``validate_family``       check the layout, naming what is missing
``PointRecord``           plain per-point data
``write_atomic``          temp file + rename
``open_family``           read a file fully into memory
"""

from ._io import open_family, write_atomic
from ._schema import SCHEMA_VERSION, PointRecord, build_family_dataset, read_family_dataset, validate_family

__all__ = ["write_atomic", "open_family", "build_family_dataset", "read_family_dataset",
           "validate_family", "PointRecord", "SCHEMA_VERSION"]
