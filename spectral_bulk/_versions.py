"""Versions of the package and its dependencies, for bug reports."""

import importlib
import platform
import sys

__all__ = ["show_versions", "versions"]

_DEPS = ("numpy", "scipy", "numba", "xarray", "netCDF4", "matplotlib", "dask", "distributed")


def versions():
    """Dict of component -> version string (``"not installed"`` where missing)."""
    from ._version import __version__

    out = {"spectral_bulk": __version__, "python": sys.version.split()[0],
           "platform": platform.platform()}
    for name in _DEPS:
        try:
            mod = importlib.import_module(name)
            out[name] = getattr(mod, "__version__", "unknown")
        except ImportError:
            out[name] = "not installed"
    return out


def show_versions(file=None):
    """Print the versions of spectral_bulk, Python and the dependencies."""
    for k, v in versions().items():
        print(f"{k:>14}: {v}", file=file or sys.stdout)
