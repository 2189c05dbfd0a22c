"""Pointwise problems and the Newton-Kantorovich engine (physics-free).

``Problem``       a boundary-value problem written pointwise on a grid
``solve``         damped Newton-Kantorovich solve returning a certified ``SolveResult``
``SolveResult``   solution, certificate, interpolation and xarray export
``NewtonOptions`` tolerances and algorithm constants
``MESSAGES``      status code -> message template
``check_jacobian`` compare the exact linearisation with finite differences
``polish``        refine a converged 1-D solution with residuals in extended precision
"""

from ._linalg import BorderedInverse, DenseSolver, KrylovSolver, assemble_dense, jacobian_action, make_solver
from ._newton import MESSAGES, NewtonOptions, check_jacobian, initial_state, residual_norm, scaled_norm, solve
from ._polish import Polished, extended_precision_available, polish
from ._problem import Namespace, Problem
from ._result import SolveResult

__all__ = [
    "Problem",
    "Namespace",
    "solve",
    "SolveResult",
    "NewtonOptions",
    "MESSAGES",
    "check_jacobian",
    "polish",
    "Polished",
    "extended_precision_available",
    "initial_state",
    "scaled_norm",
    "residual_norm",
    "DenseSolver",
    "BorderedInverse",
    "KrylovSolver",
    "make_solver",
    "assemble_dense",
    "jacobian_action",
]
