"""Functional core for Chebyshev-Gauss-Lobatto collocation on [-1, 1].

Conventions used throughout the package
---------------------------------------
* ``n`` is the number of collocation points; the polynomial degree is ``n - 1``.
* Nodes are in ASCENDING order: ``xi_j = -cos(pi j / (n-1))``, ``j = 0..n-1``, so
  ``xi_0 = -1`` and ``xi_{n-1} = +1``.  Values arrays follow the same order.
* Chebyshev coefficients ``c_k`` are ordered by degree, ``f(xi) = sum_k c_k T_k(xi)``.

All functions are plain, small and exact; the :class:`~spectral_bulk.grids.Chebyshev`
basis class binds them to a physical domain and a coordinate map.
"""

import functools

import numpy as np
import scipy.fft

__all__ = [
    "cheb_nodes",
    "cheb_diff_matrices",
    "values_to_coeffs",
    "coeffs_to_values",
    "bary_weights",
    "bary_matrix",
    "bary_interp",
    "clenshaw_curtis_weights",
    "tail_measure",
]


def _check_n(n):
    n = int(n)
    if n < 2:
        raise ValueError(f"`n` (number of Chebyshev points) must be >= 2, got {n}")
    return n


def _pi(dtype):
    """pi in the floating type ``dtype`` (``np.pi`` itself for float64)."""
    dtype = np.dtype(dtype)
    return np.pi if dtype == np.float64 else np.arccos(np.asarray(-1, dtype=dtype))


def cheb_nodes(n, dtype=np.float64):
    """Chebyshev-Gauss-Lobatto nodes on [-1, 1] in ascending order.

    Parameters
    ----------
    n : int
        Number of nodes (>= 2).
    dtype : numpy floating type
        Precision of the result (``np.longdouble`` for extended precision).

    Returns
    -------
    xi : ndarray, shape (n,)
        ``-cos(pi j/(n-1))``, computed as ``sin`` of a symmetric angle so that the
        nodes are exactly antisymmetric about 0 in floating point.
    """
    n = _check_n(n)
    m = n - 1
    j = np.arange(n)
    return np.sin(_pi(dtype) * (2 * j - m) / (2 * m))


@functools.lru_cache(maxsize=64)
def _diff_matrices_cached(n, order, dtype=np.dtype(np.float64)):
    m = n - 1
    k = np.arange(n)
    th = k * _pi(dtype) / m
    t = th / 2
    # x_i - x_j by the trigonometric identity, free of cancellation
    dx = 2 * np.sin(t[None, :] + t[:, None]) * np.sin(t[None, :] - t[:, None])
    n1 = n // 2
    n2 = n - n1
    dx = np.vstack([dx[:n1], -np.flipud(np.fliplr(dx[:n2]))])  # flipping trick
    dx[np.diag_indices(n)] = 1.0
    c = (-1.0) ** np.add.outer(k, k)
    c[0, :] *= 2
    c[-1, :] *= 2
    c[:, 0] /= 2
    c[:, -1] /= 2
    z = 1.0 / dx
    z[np.diag_indices(n)] = 0.0
    d = np.eye(n, dtype=dtype)
    out = []
    for ell in range(1, order + 1):
        d = ell * z * (c * np.diag(d)[:, None] - d)
        d[np.diag_indices(n)] = -d.sum(axis=1)  # negative-sum trick
        # ascending order: reverse rows and columns (same variable, reversed labels)
        out.append(d[::-1, ::-1].copy())
    for a in out:
        a.setflags(write=False)
    return tuple(out)


def cheb_diff_matrices(n, order=2, dtype=np.float64):
    """Differentiation matrices of orders 1..``order`` at the ascending nodes.

    Uses the trigonometric form of the node differences, the flipping trick for
    antisymmetry, a recursion for higher orders and the negative-sum rule for the
    diagonal; it stays accurate to n = 200 and beyond [1]_.

    Parameters
    ----------
    n : int
        Number of nodes.
    order : int
        Highest derivative order.
    dtype : numpy floating type
        Precision (``np.longdouble`` for the extended-precision residuals of
        :func:`spectral_bulk.newton.polish`).

    Returns
    -------
    mats : tuple of ndarray, each shape (n, n)
        ``mats[k-1] @ f`` approximates the k-th derivative in ``xi`` at the nodes.
        The arrays are read-only (they are cached).

    References
    ----------
    .. [1] "A MATLAB differentiation matrix suite", ACM Trans. Math. Softw. 26 (2000)
       465-519, :doi:`10.1145/365723.365727`.
    """
    n = _check_n(n)
    order = int(order)
    if order < 1:
        raise ValueError(f"`order` must be >= 1, got {order}")
    return _diff_matrices_cached(n, order, np.dtype(dtype))


def values_to_coeffs(values, axis=-1):
    """Chebyshev coefficients from values at the ascending nodes (DCT-I).

    Parameters
    ----------
    values : array_like, shape (..., n, ...)
        Values at the ``n`` ascending Gauss-Lobatto nodes along ``axis``.
    axis : int

    Returns
    -------
    coeffs : ndarray
        Coefficients ``c_0..c_{n-1}`` along ``axis`` (same shape).
    """
    v = np.asarray(values)
    v = np.moveaxis(v, axis, -1)
    n = v.shape[-1]
    _check_n(n)
    w = v[..., ::-1]  # descending nodes cos(pi j/m)
    c = scipy.fft.dct(w, type=1, axis=-1) / (n - 1)
    c[..., 0] /= 2
    c[..., -1] /= 2
    return np.moveaxis(c, -1, axis)


def coeffs_to_values(coeffs, axis=-1):
    """Values at the ascending nodes from Chebyshev coefficients (inverse DCT-I)."""
    c = np.array(np.moveaxis(np.asarray(coeffs), axis, -1), copy=True)
    _check_n(c.shape[-1])
    c[..., 0] *= 2
    c[..., -1] *= 2
    w = scipy.fft.dct(c, type=1, axis=-1) / 2
    return np.moveaxis(w[..., ::-1], -1, axis)


def bary_weights(n):
    """Barycentric weights of the ascending Chebyshev-Gauss-Lobatto nodes.

    ``w_j = (-1)^j`` with the two end weights halved (an overall sign is
    irrelevant for the second barycentric formula).
    """
    n = _check_n(n)
    w = (-1.0) ** np.arange(n)
    w[0] *= 0.5
    w[-1] *= 0.5
    return w


def bary_matrix(nodes, weights, points):
    """Interpolation matrix ``P`` with ``P @ f`` = barycentric interpolant at ``points``.

    Parameters
    ----------
    nodes : ndarray, shape (n,)
    weights : ndarray, shape (n,)
        Barycentric weights for ``nodes``.
    points : array_like, shape (m,)
        Target points in the same (computational) coordinate.

    Returns
    -------
    P : ndarray, shape (m, n)
        Rows at points that coincide with a node are unit vectors (exact).

    Notes
    -----
    Second (true) barycentric formula, which is forward stable for Chebyshev
    points; see "Barycentric Lagrange interpolation", SIAM Review 46 (2004) 501-517,
    :doi:`10.1137/S0036144502417715`.
    """
    y = np.atleast_1d(np.asarray(points, dtype=float)).ravel()
    diff = y[:, None] - nodes[None, :]
    exact = np.abs(diff) < 1e-300  # also subnormal distances, where weight/diff overflows
    with np.errstate(divide="ignore", invalid="ignore"):
        t = weights[None, :] / diff
        p = t / t.sum(axis=1, keepdims=True)
    rows = exact.any(axis=1)
    if rows.any():
        p[rows] = exact[rows].astype(float)
    return p


def bary_interp(nodes, weights, values, points, axis=-1):
    """Evaluate the interpolant of ``values`` (along ``axis``) at ``points``."""
    p = bary_matrix(nodes, weights, points)
    v = np.moveaxis(np.asarray(values), axis, -1)
    out = v @ p.T
    return np.moveaxis(out, -1, axis)


@functools.lru_cache(maxsize=64)
def _cc_cached(n):
    m = n - 1
    theta = np.pi * np.arange(n) / m
    w = np.zeros(n)
    v = np.ones(m - 1)
    ti = theta[1:-1]
    if m % 2 == 0:
        w[0] = w[-1] = 1.0 / (m * m - 1)
        for k in range(1, m // 2):
            v -= 2 * np.cos(2 * k * ti) / (4 * k * k - 1)
        v -= np.cos(m * ti) / (m * m - 1)
    else:
        w[0] = w[-1] = 1.0 / (m * m)
        for k in range(1, (m - 1) // 2 + 1):
            v -= 2 * np.cos(2 * k * ti) / (4 * k * k - 1)
    w[1:-1] = 2 * v / m
    w = w[::-1].copy()  # ascending order (weights are symmetric anyway)
    w.setflags(write=False)
    return w


def clenshaw_curtis_weights(n):
    """Clenshaw-Curtis quadrature weights on [-1, 1] for the ascending nodes.

    Exact for polynomials of degree ``n - 1``; common practice, see "Spectral
    Methods in MATLAB", SIAM (2000), chapter 12.
    """
    return _cc_cached(_check_n(n))


def tail_measure(coeffs, scale=1.0, axis=-1):
    """Size of the trailing Chebyshev coefficients relative to the function.

    Parameters
    ----------
    coeffs : array_like, shape (..., n)
        Chebyshev (or Fourier magnitude) coefficients along ``axis``.
    scale : float or array_like
        Floor for the function's size: the measure is
        ``max_{k >= n - m} |c_k| / max(max_k |c_k|, scale)`` with
        ``m = max(2, n // 8)`` trailing coefficients.

    Returns
    -------
    tail : ndarray
        One number per leading index.  Small values (near ``1e-15``) mean the
        function is resolved to rounding; the truncation error of the
        interpolant is of the same order as this measure.
    """
    c = np.abs(np.moveaxis(np.asarray(coeffs), axis, -1))
    n = c.shape[-1]
    m = max(2, n // 8)
    top = c.max(axis=-1)
    tail = c[..., n - m:].max(axis=-1)
    denom = np.maximum(top, scale)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(denom > 0, tail / np.where(denom > 0, denom, 1.0), 0.0)
    return out
