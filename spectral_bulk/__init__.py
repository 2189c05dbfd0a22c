"""spectral_bulk: certified spectral solutions of holographic bulk problems.

Grids
    Chebyshev, Fourier        one-dimensional collocation bases
    TensorGrid, Grid          tensor products of bases
    AffineMap, HalfLineMap, ClusterMap, ExponentialMap   coordinate maps
Newton-Kantorovich engine
    Problem                   a boundary-value problem written pointwise
    solve                     damped Newton solve returning a certified SolveResult
    SolveResult               solution + certificate, callable for interpolation
    NewtonOptions             tolerances and algorithm constants
    check_jacobian            exact linearisation vs finite differences
Utilities
    show_versions             versions of the package and its dependencies
"""

import os as _os
import sys as _sys

# Small dense factorisations dominate this package's linear algebra, and multithreaded BLAS
# makes them several times slower on shared machines: default to one BLAS thread unless the
# user chose otherwise (effective only when numpy is not imported yet, e.g. from the CLI).
if "numpy" not in _sys.modules:
    for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        _os.environ.setdefault(_var, "1")

from . import exceptions  # noqa: E402
from ._version import __version__  # noqa: E402
from .grids import AffineMap, Chebyshev, ClusterMap, ExponentialMap, Fourier, Grid, HalfLineMap, TensorGrid
from .newton import NewtonOptions, Problem, SolveResult, check_jacobian, solve
from ._versions import show_versions

__all__ = [
    "__version__",
    "exceptions",
    "Chebyshev",
    "Fourier",
    "Grid",
    "TensorGrid",
    "AffineMap",
    "HalfLineMap",
    "ClusterMap",
    "ExponentialMap",
    "Problem",
    "solve",
    "SolveResult",
    "NewtonOptions",
    "check_jacobian",
    "show_versions",
]
