"""Collocation grids: Chebyshev and Fourier bases, coordinate maps, tensor products.

Functional core (plain functions, exact and documented):
``cheb_nodes``, ``cheb_diff_matrices``, ``values_to_coeffs``, ``coeffs_to_values``,
``bary_weights``, ``bary_matrix``, ``clenshaw_curtis_weights``, ``tail_measure``,
``fourier_nodes``, ``fourier_diff_matrices``, ``fourier_derivative``, ``fourier_coeffs``.

Classes:
``Chebyshev``, ``Fourier`` (one-dimensional bases), ``Grid``/``TensorGrid`` (products),
``AffineMap``, ``HalfLineMap``, ``ClusterMap``, ``ExponentialMap`` (coordinate maps).
"""

from ._basis import Basis, Chebyshev, Fourier
from ._chebyshev import (
    bary_matrix,
    bary_weights,
    cheb_diff_matrices,
    cheb_nodes,
    clenshaw_curtis_weights,
    coeffs_to_values,
    tail_measure,
    values_to_coeffs,
)
from ._fourier import fourier_coeffs, fourier_derivative, fourier_diff_matrices, fourier_nodes
from ._grid import Grid, TensorGrid, as_grid
from ._maps import AffineMap, ClusterMap, CoordinateMap, ExponentialMap, HalfLineMap

__all__ = [
    "Basis",
    "Chebyshev",
    "Fourier",
    "Grid",
    "TensorGrid",
    "as_grid",
    "CoordinateMap",
    "AffineMap",
    "HalfLineMap",
    "ClusterMap",
    "ExponentialMap",
    "cheb_nodes",
    "cheb_diff_matrices",
    "values_to_coeffs",
    "coeffs_to_values",
    "bary_weights",
    "bary_matrix",
    "clenshaw_curtis_weights",
    "tail_measure",
    "fourier_nodes",
    "fourier_diff_matrices",
    "fourier_derivative",
    "fourier_coeffs",
]
