"""Atomic netCDF writing and reading of datasets."""

import os
import tempfile

import xarray as xr

__all__ = ["write_atomic", "open_family"]


def write_atomic(ds, path):
    """Write ``ds`` to netCDF at ``path`` atomically (temporary file, then rename).

    A reader never sees a half-written file, and an interrupted write leaves
    the previous file intact.  The netCDF4 engine is used.
    """
    path = os.fspath(path)
    directory = os.path.dirname(os.path.abspath(path))
    os.makedirs(directory, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", suffix=".nc", dir=directory)
    os.close(fd)
    try:
        ds.to_netcdf(tmp, engine="netcdf4")
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.remove(tmp)
        raise
    return path


def open_family(path):
    """Open a family (or solution) file fully into memory and close it."""
    with xr.open_dataset(path, engine="netcdf4") as ds:
        return ds.load()
