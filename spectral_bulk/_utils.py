"""Small shared helpers: machine constants, user-level warnings, input checks."""

import inspect
import os
import warnings

import numpy as np

EPS = np.finfo(float).eps
_PKG_DIR = os.path.dirname(os.path.abspath(__file__))


def _first_user_frame_level():
    """Return the ``stacklevel`` of the first frame outside this package.

    Level 0 is this helper's own frame, so level 1 is the caller of ``warnings.warn``.
    """
    level = 0
    frame = inspect.currentframe()
    try:
        while frame is not None:
            filename = os.path.abspath(frame.f_code.co_filename)
            if not filename.startswith(_PKG_DIR):
                return level
            frame = frame.f_back
            level += 1
    finally:
        del frame
    return level


def emit_user_level_warning(message, category=UserWarning):
    """Emit a warning that points at the user's code, not at the package.

    The stack level is found by walking up to the first frame whose file lies
    outside the package, so nobody counts ``stacklevel`` by hand.
    """
    warnings.warn(message, category, stacklevel=_first_user_frame_level())


def validate_tol(tol, name="tol"):
    """Check a relative tolerance and raise absurdly small values to ``100*EPS``."""
    from .exceptions import AccuracyWarning

    try:
        tol = float(tol)
    except (TypeError, ValueError):
        raise TypeError(f"`{name}` must be a real number, got {type(tol).__name__}") from None
    if not np.isfinite(tol) or tol <= 0:
        raise ValueError(f"`{name}` must be positive and finite, got {tol!r}")
    if tol < 100 * EPS:
        emit_user_level_warning(
            f"`{name}`={tol:.1e} is below 100*EPS; raised to {100 * EPS:.1e}", AccuracyWarning
        )
        tol = 100 * EPS
    return tol


def as_positive_int(value, name, minimum=1):
    """Return ``value`` as an int >= ``minimum`` or raise a ValueError naming it."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, np.integer)):
        if isinstance(value, (float, np.floating)) and float(value).is_integer():
            value = int(value)
        else:
            raise TypeError(f"`{name}` must be an integer, got {value!r}")
    value = int(value)
    if value < minimum:
        raise ValueError(f"`{name}` must be >= {minimum}, got {value}")
    return value
