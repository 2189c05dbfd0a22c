"""Pointwise geometry: truncated series, dual numbers, curvature and field equations.

``Series``           truncated Laurent series with precision tracking (numpy-compatible)
``taylor``           a series from a value and its derivatives
``Jet``              truncated Taylor polynomial in several coordinates (Laurent in the radial one)
``coordinate_jets``, ``jet_from_derivatives``  jets of coordinates and of fields
``Dual``             dual numbers for automatic derivatives of model functions
``Geometry``         Christoffel symbols, Ricci tensor, DeTurck vector (radial or several coordinates)
``ScalarField``      a scalar with its profile and constant extra gradients
``MatterContent``    the matter fields entering the equations
``einstein_deturck`` Einstein-DeTurck, scalar and Maxwell equations at once
"""

from ._dual import Dual, derivative, partials
from ._einstein import MatterContent, einstein_deturck
from ._geometry import Geometry, ScalarField, tensor_sum
from ._jet import Jet, coordinate_jets, jet_from_derivatives
from ._series import PrecisionError, Series, constant_series, coordinate_series, taylor

__all__ = ["Series", "PrecisionError", "taylor", "constant_series", "coordinate_series", "Dual", "derivative", "partials",
           "Geometry", "ScalarField", "tensor_sum", "MatterContent", "einstein_deturck",
           "Jet", "coordinate_jets", "jet_from_derivatives"]
