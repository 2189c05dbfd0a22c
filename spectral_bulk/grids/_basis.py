"""One-dimensional bases: a thin class layer over the functional cores.

Contract for subclasses of :class:`Basis`
-----------------------------------------
A basis provides, for its ``n`` collocation points in physical coordinates,

* ``points`` (ndarray, shape (n,)) and ``name`` (the coordinate's name);
* ``_diff_impl(order) -> tuple of (n, n) ndarrays`` (derivatives of orders 1..order);
* ``_fd_impl(order) -> tuple of sparse (n, n) matrices`` (low-order finite differences
  on the same nodes, used to precondition iterative solves);
* ``_coeffs_impl(values)`` (spectral coefficients along the last axis) and
  ``_tail_impl(values, scale)``;
* ``_interp_impl(points) -> (m, n) ndarray`` (interpolation matrix);
* ``weights`` (quadrature weights, shape (n,));
* ``ends`` (tuple of boundary labels, empty when periodic) and ``end_index(label)``;
* ``resized(n)`` (the same basis with another number of points);
* ``describe()`` (a flat dict of str/float/int for file attributes).

The public methods cache and validate; subclasses own the mathematics.
"""

import functools

import numpy as np
import scipy.sparse as sp

from ._chebyshev import (
    bary_matrix,
    bary_weights,
    cheb_diff_matrices,
    cheb_nodes,
    clenshaw_curtis_weights,
    tail_measure,
    values_to_coeffs,
)
from ._fourier import (
    fourier_coeffs,
    fourier_diff_matrices,
    fourier_interp_matrix,
    fourier_nodes,
    fourier_tail,
    fourier_weights,
)
from ._maps import AffineMap, CoordinateMap, HalfLineMap

__all__ = ["Basis", "Chebyshev", "Fourier"]


class Basis:
    """Base class of one-dimensional collocation bases (see the module contract)."""

    periodic = False

    def diff_matrices(self, order=2):
        """Physical-coordinate differentiation matrices of orders 1..``order``."""
        return self._diff_cached(int(order))

    @functools.lru_cache(maxsize=8)  # noqa: B019 - bases are small immutable objects
    def _diff_cached(self, order):
        mats = tuple(np.ascontiguousarray(m) for m in self._diff_impl(order))
        for m in mats:
            m.setflags(write=False)
        return mats

    def fd_matrices(self, order=2):
        """Sparse low-order finite-difference analogues of :meth:`diff_matrices`."""
        return self._fd_impl(int(order))

    def coeffs(self, values, axis=-1):
        """Spectral coefficients of nodal ``values`` along ``axis``."""
        v = np.moveaxis(np.asarray(values), axis, -1)
        return np.moveaxis(self._coeffs_impl(v), -1, axis)

    def tail(self, values, scale=1.0, axis=-1):
        """Relative size of the highest modes (see :func:`tail_measure`)."""
        v = np.moveaxis(np.asarray(values), axis, -1)
        return self._tail_impl(v, scale)

    def interp_matrix(self, points):
        """Matrix mapping nodal values to values at arbitrary physical ``points``."""
        return self._interp_impl(np.atleast_1d(np.asarray(points, dtype=float)).ravel())

    def interp(self, values, points, axis=-1):
        """Interpolate nodal ``values`` (along ``axis``) to physical ``points``."""
        p = self.interp_matrix(points)
        v = np.moveaxis(np.asarray(values), axis, -1)
        return np.moveaxis(v @ p.T, -1, axis)

    def diff(self, values, order=1, axis=-1):
        """Derivative of nodal ``values`` along ``axis``."""
        d = self.diff_matrices(order)[order - 1]
        v = np.moveaxis(np.asarray(values), axis, -1)
        return np.moveaxis(v @ d.T, -1, axis)

    def integrate(self, values, axis=-1):
        """Integral over the domain by the basis quadrature rule."""
        v = np.moveaxis(np.asarray(values), axis, -1)
        return v @ self.weights

    def __len__(self):
        return self.n

    def __eq__(self, other):
        return type(self) is type(other) and self._key() == other._key()

    def __hash__(self):
        return hash(self._key())


def _fd_first_second(x):
    """Three-point finite differences on nodes ``x`` (non-uniform, one-sided at ends)."""
    n = len(x)
    rows, cols, v1, v2 = [], [], [], []
    for i in range(n):
        if i == 0:
            idx = [0, 1, 2]
        elif i == n - 1:
            idx = [n - 3, n - 2, n - 1]
        else:
            idx = [i - 1, i, i + 1]
        xs = x[idx]
        # Lagrange weights for first and second derivative at x[i]
        for a, ja in enumerate(idx):
            others = [xs[b] for b in range(3) if b != a]
            den = np.prod([xs[a] - o for o in others])
            d1 = ((x[i] - others[0]) + (x[i] - others[1])) / den
            d2 = 2.0 / den
            rows.append(i)
            cols.append(ja)
            v1.append(d1)
            v2.append(d2)
    shape = (n, n)
    return (
        sp.csr_matrix((v1, (rows, cols)), shape=shape),
        sp.csr_matrix((v2, (rows, cols)), shape=shape),
    )


class Chebyshev(Basis):
    """Chebyshev-Gauss-Lobatto collocation on an interval, with an optional map.

    Parameters
    ----------
    n : int
        Number of collocation points (polynomial degree ``n - 1``), >= 3.
    domain : tuple of float
        ``(a, b)``; one end may be infinite (then the default map is
        :class:`HalfLineMap` with scale 1).
    name : str
        Name of the coordinate (used for derivative names such as ``u_x``).
    map : CoordinateMap, optional
        Map from ``xi in [-1, 1]`` (ascending nodes ``-cos(pi j/(n-1))``) to the
        domain; default affine.

    Notes
    -----
    Points are ordered from ``a`` to ``b``.  Boundary labels are ``"left"`` and
    ``"right"``, also addressable as ``"<name>=<a>"`` / ``"<name>=<b>"``.
    """

    def __init__(self, n, domain=(-1.0, 1.0), name="x", map=None):
        from .._utils import as_positive_int

        self.n = as_positive_int(n, "n", minimum=3)
        try:
            a, b = (float(v) for v in domain)
        except (TypeError, ValueError):
            raise ValueError(f"`domain` must be a pair of numbers, got {domain!r}") from None
        if map is None:
            map = HalfLineMap() if not (np.isfinite(a) and np.isfinite(b)) else AffineMap()
        if not isinstance(map, CoordinateMap):
            raise TypeError(f"`map` must be a CoordinateMap, got {type(map).__name__}")
        map.check_domain(a, b)
        _check_name(name)
        self.domain = (a, b)
        self.name = name
        self.map = map
        self.xi = cheb_nodes(self.n)
        self.points = map.forward(self.xi, a, b)
        self.points[0], self.points[-1] = a, b
        self._dx_dxi, self._xi_x, self._xi_xx = map.derivs(self.xi, a, b)

    def _key(self):
        return ("cheb", self.n, self.domain, self.name, repr(self.map))

    ends = ("left", "right")

    def end_index(self, label):
        """Point index of a boundary label (``"left"``/``"right"``)."""
        return 0 if label == "left" else self.n - 1

    def end_value(self, label):
        return self.domain[0] if label == "left" else self.domain[1]

    def extended(self, order=2, dtype=np.longdouble):
        """Points and differentiation matrices in a wider floating type (affine maps only).

        Used to evaluate residuals beyond double precision (see
        :func:`spectral_bulk.newton.polish`).

        Returns
        -------
        points : ndarray, shape (n,)
        mats : tuple of ndarray
            Physical-coordinate differentiation matrices of orders 1..``order``.

        Raises
        ------
        NotImplementedError
            For a non-affine coordinate map.
        """
        if not isinstance(self.map, AffineMap):
            raise NotImplementedError("extended precision needs an affine Chebyshev grid")
        a, b = (np.asarray(v, dtype=dtype) for v in self.domain)
        xi = cheb_nodes(self.n, dtype)
        points = a + (b - a) * (xi + 1) / 2
        points[0], points[-1] = a, b
        s = 2 / (b - a)
        dxi = cheb_diff_matrices(self.n, order, dtype)
        return points, tuple(s ** (k + 1) * dxi[k] for k in range(order))

    def _diff_impl(self, order):
        dxi = cheb_diff_matrices(self.n, order)
        if isinstance(self.map, AffineMap):
            s = self._xi_x[0]
            return tuple(s ** (k + 1) * dxi[k] for k in range(order))
        d1 = self._xi_x[:, None] * dxi[0]
        out = [d1]
        if order >= 2:
            out.append(self._xi_x[:, None] ** 2 * dxi[1] + self._xi_xx[:, None] * dxi[0])
        for _ in range(2, order):
            out.append(d1 @ out[-1])
        return tuple(out)

    def _fd_impl(self, order):
        f1, f2 = _fd_first_second(self.xi)
        j1 = sp.diags(self._xi_x)
        d1 = j1 @ f1
        out = [d1.tocsr()]
        if order >= 2:
            out.append((sp.diags(self._xi_x**2) @ f2 + sp.diags(self._xi_xx) @ f1).tocsr())
        for _ in range(2, order):
            out.append((d1 @ out[-1]).tocsr())
        return tuple(out)

    def _coeffs_impl(self, v):
        return values_to_coeffs(v)

    def _tail_impl(self, v, scale):
        return tail_measure(values_to_coeffs(v), scale)

    def _interp_impl(self, points):
        a, b = self.domain
        xi = self.map.inverse(points, a, b)
        bad = (xi < -1 - 1e-12) | (xi > 1 + 1e-12) | ~np.isfinite(xi)
        if np.any(bad):
            raise ValueError(
                f"interpolation points outside the `{self.name}` domain ({a}, {b}): "
                f"{np.asarray(points)[bad][:3]}"
            )
        return bary_matrix(self.xi, bary_weights(self.n), np.clip(xi, -1, 1))

    @property
    def weights(self):
        """Clenshaw-Curtis weights times ``dx/dxi``; zero at an infinite end.

        On a half line the integrand must decay faster than ``1/x**2``: for
        ``c/x**2`` decay the mapped integrand is finite at infinity and its end
        contribution, which the nodal value ``f(inf) = 0`` cannot supply, is
        dropped (an ``O(n**-2)`` error).
        """
        w = clenshaw_curtis_weights(self.n) * np.where(
            np.isfinite(self._dx_dxi), self._dx_dxi, 0.0
        )
        return w

    def resized(self, n):
        """The same basis (domain, name, map) with ``n`` points."""
        return Chebyshev(n, self.domain, self.name, self.map)

    def with_map(self, map):
        """The same basis with another coordinate map."""
        return Chebyshev(self.n, self.domain, self.name, map)

    def describe(self):
        d = {"kind": "chebyshev", "n": self.n, "a": self.domain[0], "b": self.domain[1]}
        d["map"] = repr(self.map)
        return d

    def __repr__(self):
        m = "" if isinstance(self.map, AffineMap) else f", map={self.map!r}"
        return f"Chebyshev({self.n}, domain={self.domain}, name={self.name!r}{m})"


class Fourier(Basis):
    """Periodic Fourier collocation, with even/odd (cosine/sine) variants.

    Parameters
    ----------
    n : int
        Number of collocation points (>= 2).
    period : float
        Period ``P`` of the functions.
    name : str
        Coordinate name.
    parity : {"full", "even", "odd"}
        ``"full"``: points ``origin + j P/n`` on one period.  ``"even"``/``"odd"``:
        functions symmetric/antisymmetric about ``origin`` and ``origin + P/2``,
        sampled on the half period (cosine/sine series; see :mod:`._fourier`).
    origin : float
        Left end of the sampled interval.
    """

    periodic = True
    ends = ()

    def __init__(self, n, period, name="x", parity="full", origin=0.0):
        from .._utils import as_positive_int

        self.n = as_positive_int(n, "n", minimum=2)
        period = float(period)
        if not (np.isfinite(period) and period > 0):
            raise ValueError(f"`period` must be positive and finite, got {period}")
        _check_name(name)
        self.period = period
        self.name = name
        self.parity = parity
        self.origin = float(origin)
        self._theta = fourier_nodes(self.n, parity)
        self.points = self.origin + self._theta * period / (2 * np.pi)

    def _key(self):
        return ("fourier", self.n, self.period, self.name, self.parity, self.origin)

    @property
    def _scale(self):
        return 2 * np.pi / self.period

    def _diff_impl(self, order):
        d = fourier_diff_matrices(self.n, order, self.parity)
        return tuple(self._scale ** (k + 1) * d[k] for k in range(order))

    def _fd_impl(self, order):
        n, h = self.n, self._theta[1] - self._theta[0]
        s = self._scale
        if self.parity == "full":
            e = np.ones(n)
            d1 = sp.diags([-e[:-1], e[:-1]], [-1, 1], shape=(n, n)).tolil()
            d1[0, n - 1] = -1
            d1[n - 1, 0] = 1
            d2 = sp.diags([e[:-1], -2 * e, e[:-1]], [-1, 0, 1], shape=(n, n)).tolil()
            d2[0, n - 1] = 1
            d2[n - 1, 0] = 1
            out = [(s / (2 * h)) * d1.tocsr(), (s / h) ** 2 * d2.tocsr()]
        else:
            e = np.ones(n)
            d1 = sp.diags([-e[:-1], e[:-1]], [-1, 1], shape=(n, n)).tolil()
            d2 = sp.diags([e[:-1], -2 * e, e[:-1]], [-1, 0, 1], shape=(n, n)).tolil()
            if self.parity == "even":  # mirror ghosts u(-h) = u(h) at both ends
                d1[0, 1] = 0
                d1[n - 1, n - 2] = 0
                d2[0, 1] = 2
                d2[n - 1, n - 2] = 2
            # odd: the ghosts are the zero values at the symmetry points (plain rows)
            out = [(s / (2 * h)) * d1.tocsr(), (s / h) ** 2 * d2.tocsr()]
        for _ in range(2, order):
            out.append((out[0] @ out[-1]).tocsr())
        return tuple(out[:order])

    def _coeffs_impl(self, v):
        return fourier_coeffs(v, self.parity)

    def _tail_impl(self, v, scale):
        return fourier_tail(v, scale, self.parity)

    def _interp_impl(self, points):
        theta = (points - self.origin) * self._scale
        if self.parity == "full":
            theta = np.mod(theta, 2 * np.pi)
        else:
            # reflect into [0, pi] using the symmetry
            t = np.mod(theta, 2 * np.pi)
            flip = t > np.pi
            theta = np.where(flip, 2 * np.pi - t, t)
            p = fourier_interp_matrix(self.n, theta, self.parity)
            if self.parity == "odd":
                p = np.where(flip[:, None], -p, p)
            return p
        return fourier_interp_matrix(self.n, theta, self.parity)

    @property
    def weights(self):
        """Quadrature weights over the sampled interval (one period or half of it)."""
        return fourier_weights(self.n, self.parity) / self._scale

    def resized(self, n):
        return Fourier(n, self.period, self.name, self.parity, self.origin)

    def describe(self):
        return {
            "kind": "fourier",
            "n": self.n,
            "period": self.period,
            "parity": self.parity,
            "origin": self.origin,
        }

    def __repr__(self):
        extra = "" if self.parity == "full" else f", parity={self.parity!r}"
        return f"Fourier({self.n}, period={self.period}, name={self.name!r}{extra})"


def _check_name(name):
    if not (isinstance(name, str) and name.isidentifier() and "_" not in name):
        raise ValueError(
            f"coordinate `name` must be an identifier without underscores, got {name!r}"
        )

