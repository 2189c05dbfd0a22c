"""Coordinate maps from the computational interval [-1, 1] to a physical interval.

A map is a small object holding its shape parameters; the physical end points
``(a, b)`` are passed to every call, so one map instance can serve several grids.

Contract for subclasses
-----------------------
Implement

* ``_forward(xi, a, b) -> x``
* ``_inverse(x, a, b) -> xi``
* ``_derivs(xi, a, b) -> (dx_dxi, xi_x, xi_xx)``: ``dx/dxi`` and the first and second
  derivatives of ``xi`` with respect to ``x``, written as functions of ``xi`` so that
  they stay finite where ``x`` is infinite (``dx_dxi`` may be ``inf`` there).
* ``_check_domain(a, b)``: raise ``ValueError`` naming the domain if unsupported.

The public methods validate and broadcast; they own no other logic.
"""

import math

import numpy as np

__all__ = ["CoordinateMap", "AffineMap", "HalfLineMap", "ClusterMap", "ExponentialMap"]


class CoordinateMap:
    """Base class of coordinate maps ``xi in [-1, 1] -> x in [a, b]``."""

    def check_domain(self, a, b):
        """Raise ``ValueError`` if this map cannot serve the domain ``(a, b)``."""
        if not a < b:
            raise ValueError(f"`domain` must satisfy a < b, got ({a}, {b})")
        self._check_domain(a, b)

    def forward(self, xi, a, b):
        """Physical coordinate of computational points ``xi``."""
        return self._forward(np.asarray(xi, dtype=float), a, b)

    def inverse(self, x, a, b):
        """Computational coordinate of physical points ``x``."""
        return self._inverse(np.asarray(x, dtype=float), a, b)

    def derivs(self, xi, a, b):
        """``(dx/dxi, dxi/dx, d2xi/dx2)`` at computational points ``xi``."""
        return self._derivs(np.asarray(xi, dtype=float), a, b)

    def _check_domain(self, a, b):
        if not (np.isfinite(a) and np.isfinite(b)):
            raise ValueError(
                f"{type(self).__name__} needs a finite `domain`, got ({a}, {b}); "
                "use HalfLineMap for a half line"
            )

    def __eq__(self, other):
        return type(self) is type(other) and self.__dict__ == other.__dict__

    def __hash__(self):
        return hash((type(self).__name__, tuple(sorted(self.__dict__.items()))))

    def __repr__(self):
        args = ", ".join(f"{k}={v!r}" for k, v in self.__dict__.items())
        return f"{type(self).__name__}({args})"


class AffineMap(CoordinateMap):
    """The affine map ``x = a + (b - a)(xi + 1)/2``."""

    def _forward(self, xi, a, b):
        return a + (b - a) * (xi + 1) / 2

    def _inverse(self, x, a, b):
        return 2 * (x - a) / (b - a) - 1

    def _derivs(self, xi, a, b):
        one = np.ones_like(xi)
        return (b - a) / 2 * one, 2 / (b - a) * one, 0 * one


class HalfLineMap(CoordinateMap):
    """Algebraic map of a half line.

    For ``domain=(a, inf)``: ``x = a + L (1 + xi)/(1 - xi)``; for ``(-inf, b)``:
    ``x = b - L (1 - xi)/(1 + xi)``.  Half the points lie within ``L`` of the
    finite end.  Functions that decay algebraically or faster are resolved
    spectrally; the infinite end is a collocation point where all x-derivatives
    vanish.

    Parameters
    ----------
    scale : float
        The length ``L`` (> 0).
    """

    def __init__(self, scale=1.0):
        scale = float(scale)
        if not scale > 0:
            raise ValueError(f"`scale` must be positive, got {scale}")
        self.scale = scale

    def _check_domain(self, a, b):
        if np.isfinite(a) == np.isfinite(b):
            raise ValueError(
                f"HalfLineMap needs exactly one infinite end in `domain`, got ({a}, {b})"
            )

    def _forward(self, xi, a, b):
        L = self.scale
        with np.errstate(divide="ignore"):
            if np.isfinite(a):
                return np.where(xi >= 1, np.inf, a + L * (1 + xi) / np.where(xi >= 1, 1, 1 - xi))
            return np.where(xi <= -1, -np.inf, b - L * (1 - xi) / np.where(xi <= -1, 1, 1 + xi))

    def _inverse(self, x, a, b):
        L = self.scale
        with np.errstate(invalid="ignore"):
            if np.isfinite(a):
                return np.where(np.isinf(x), 1.0, (x - a - L) / (x - a + L))
            return np.where(np.isinf(x), -1.0, (x - b + L) / (b - x + L))

    def _derivs(self, xi, a, b):
        L = self.scale
        if np.isfinite(a):
            s = 1 - xi
            with np.errstate(divide="ignore"):
                dx = np.where(s > 0, 2 * L / np.where(s > 0, s, 1) ** 2, np.inf)
            return dx, s**2 / (2 * L), -(s**3) / (2 * L**2)
        s = 1 + xi
        with np.errstate(divide="ignore"):
            dx = np.where(s > 0, 2 * L / np.where(s > 0, s, 1) ** 2, np.inf)
        return dx, s**2 / (2 * L), s**3 / (2 * L**2)


class ClusterMap(CoordinateMap):
    """Tangent map that clusters points in a layer of given width.

    With ``y`` the affine image of ``x`` in [-1, 1], ``y = y0 + eps tan(alpha (xi - xi0))``
    where ``y0`` is the layer centre, ``eps`` its half width (both in ``y`` units) and
    ``alpha``, ``xi0`` are fixed by ``y(+-1) = +-1``.  The centre may be an end point
    (clustering at a boundary) or any interior point.  As ``width`` grows the map
    tends to the affine one.

    Parameters
    ----------
    center : float
        Physical position of the layer, within the domain.
    width : float
        Physical width of the layer (> 0).

    Notes
    -----
    A map of this family is analysed in "Mappings and accuracy for Chebyshev
    pseudo-spectral approximations", J. Comput. Phys. 101 (1992) 349-359
    (reference from memory).
    """

    def __init__(self, center, width):
        width = float(width)
        if not width > 0:
            raise ValueError(f"`width` must be positive, got {width}")
        self.center = float(center)
        self.width = width

    def _check_domain(self, a, b):
        super()._check_domain(a, b)
        if not a <= self.center <= b:
            raise ValueError(f"ClusterMap `center`={self.center} lies outside `domain` ({a}, {b})")

    def _params(self, a, b):
        y0 = 2 * (self.center - a) / (b - a) - 1
        eps = 2 * self.width / (b - a)
        big_a = np.arctan((1 - y0) / eps)
        big_b = np.arctan((1 + y0) / eps)
        alpha = (big_a + big_b) / 2
        xi0 = (big_b - big_a) / (big_a + big_b)
        return y0, eps, alpha, xi0

    def _forward(self, xi, a, b):
        y0, eps, alpha, xi0 = self._params(a, b)
        y = y0 + eps * np.tan(alpha * (xi - xi0))
        y = np.clip(y, -1.0, 1.0)
        y = np.where(xi <= -1, -1.0, np.where(xi >= 1, 1.0, y))
        return a + (b - a) * (y + 1) / 2

    def _inverse(self, x, a, b):
        y0, eps, alpha, xi0 = self._params(a, b)
        y = 2 * (x - a) / (b - a) - 1
        return xi0 + np.arctan((y - y0) / eps) / alpha

    def _derivs(self, xi, a, b):
        y0, eps, alpha, xi0 = self._params(a, b)
        tn = np.tan(alpha * (xi - xi0))
        sec2 = 1 + tn**2
        dy = eps * alpha * sec2
        d2y = 2 * eps * alpha**2 * sec2 * tn
        h = 2 / (b - a)
        xi_y = 1 / dy
        xi_yy = -d2y / dy**3
        return dy / h, xi_y * h, xi_yy * h**2


class ExponentialMap(CoordinateMap):
    """Map for structure spread over many scales: uniform in ``log(x - a)`` beyond ``scale``.

    ``x = a + s (exp(c (xi + 1)/2) - 1)`` with ``c = log(1 + (b - a)/s)``: close to
    affine for ``x - a << s`` (so expansions analytic at ``x = a`` stay analytic), and
    points spaced evenly in ``log(x - a)`` for ``x - a >> s``.  Suited to flows whose
    features sit at exponentially separated radii.

    Parameters
    ----------
    scale : float
        The scale ``s`` (> 0) where the spacing turns logarithmic.
    """

    def __init__(self, scale):
        scale = float(scale)
        if not scale > 0:
            raise ValueError(f"`scale` must be positive, got {scale}")
        self.scale = scale

    def _c(self, a, b):
        return math.log1p((b - a) / self.scale)

    def _forward(self, xi, a, b):
        c = self._c(a, b)
        return a + self.scale * np.expm1(c * (xi + 1) / 2)

    def _inverse(self, x, a, b):
        c = self._c(a, b)
        return 2 * np.log1p((x - a) / self.scale) / c - 1

    def _derivs(self, xi, a, b):
        c = self._c(a, b)
        dx = self.scale * (c / 2) * np.exp(c * (xi + 1) / 2)
        return dx, 1 / dx, -(c / 2) / dx**2
