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

from . import exceptions
from ._version import __version__
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
