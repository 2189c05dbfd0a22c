"""Every exception and warning class of :mod:`spectral_bulk`, in one place.

Each subclasses a built-in so that callers can catch it generically.
"""

__all__ = [
    "SpectralBulkError",
    "ConfigError",
    "ProblemDefinitionError",
    "ConvergenceError",
    "SingularJacobianError",
    "SchemaError",
    "ConvergenceWarning",
    "ResolutionWarning",
    "AccuracyWarning",
]


class SpectralBulkError(Exception):
    """Base class of the package's own errors."""


class ConfigError(SpectralBulkError, ValueError):
    """A configuration file or its content is invalid (names the offending key)."""


class ProblemDefinitionError(SpectralBulkError, ValueError):
    """A :class:`~spectral_bulk.Problem` or one of its callbacks is malformed."""


class ConvergenceError(SpectralBulkError, RuntimeError):
    """Raised on request (``raise_on_failure=True``) when a solve fails its certificate.

    The failed result is attached as ``.result``.
    """

    def __init__(self, message, result=None):
        super().__init__(message)
        self.result = result


class SingularJacobianError(SpectralBulkError, ArithmeticError):
    """The linearised operator is singular to working precision."""


class SchemaError(SpectralBulkError, ValueError):
    """A family dataset does not follow the documented layout."""


class ConvergenceWarning(UserWarning):
    """A computation finished but did not meet its tolerance."""


class ResolutionWarning(UserWarning):
    """A grid is too coarse, or an expansion is non-analytic so convergence is algebraic."""


class AccuracyWarning(UserWarning):
    """A requested accuracy cannot be reached (for example a tolerance below rounding)."""
