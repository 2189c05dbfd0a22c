"""Pointwise geometry: truncated series, dual numbers, curvature and field equations.

``Series``           truncated Laurent series with precision tracking (numpy-compatible)
``taylor``           a series from a value and its derivatives
``Dual``             dual numbers for automatic derivatives of model functions
``Geometry``         Christoffel symbols, Ricci tensor, DeTurck vector of a radial metric
``ScalarField``      a scalar with its radial profile and constant extra gradients
``MatterContent``    the matter fields entering the equations
``einstein_deturck`` Einstein-DeTurck, scalar and Maxwell equations at once
"""

from ._dual import Dual, derivative, partials
from ._einstein import MatterContent, einstein_deturck
from ._geometry import Geometry, ScalarField, tensor_sum
from ._series import PrecisionError, Series, constant_series, coordinate_series, taylor

__all__ = ["Series", "PrecisionError", "taylor", "constant_series", "coordinate_series", "Dual", "derivative", "partials",
           "Geometry", "ScalarField", "tensor_sum", "MatterContent", "einstein_deturck"]
