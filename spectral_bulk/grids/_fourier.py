"""Functional core for periodic Fourier collocation.

Three variants share one interface (``nodes``, ``diff_matrices``, ``to_coeffs``,
``interp_matrix``, ``weights``), written for the reference period ``2*pi``
(``theta in [0, 2*pi)``); the basis class rescales to the physical period.

* ``"full"``: ``n`` equispaced points ``theta_j = 2*pi*j/n`` on one period, complex
  exponentials ``exp(i m theta)`` with ``|m| <= n/2`` (the Nyquist mode of an even
  ``n`` is the symmetric cosine, so interpolants of real data are real).
* ``"even"``: functions even about ``theta = 0`` and ``theta = pi``: cosine series
  ``sum_{m=0}^{n-1} a_m cos(m theta)`` sampled at ``theta_j = pi*j/(n-1)``,
  ``j = 0..n-1`` (both symmetry points included; the transform is a DCT-I).
* ``"odd"``: functions odd about both points: sine series
  ``sum_{m=1}^{n} b_m sin(m theta)`` at ``theta_j = pi*j/(n+1)``, ``j = 1..n``
  (DST-I).

Derivatives of even functions are odd and vice versa; the matrices return the
derivative's values at the same nodes, which is what pointwise collocation needs.
"""

import functools

import numpy as np
import scipy.fft

__all__ = [
    "fourier_nodes",
    "fourier_wavenumbers",
    "fourier_diff_matrices",
    "fourier_derivative",
    "fourier_coeffs",
    "fourier_interp_matrix",
    "fourier_weights",
    "fourier_tail",
]

PARITIES = ("full", "even", "odd")


def _check(n, parity):
    if parity not in PARITIES:
        raise ValueError(f"`parity` must be one of {PARITIES}, got {parity!r}")
    n = int(n)
    if n < 2:
        raise ValueError(f"`n` (number of Fourier points) must be >= 2, got {n}")
    return n


def fourier_nodes(n, parity="full"):
    """Nodes ``theta_j`` in [0, 2*pi) (full) or [0, pi] (even, odd); see module notes."""
    n = _check(n, parity)
    if parity == "full":
        return 2 * np.pi * np.arange(n) / n
    if parity == "even":
        return np.pi * np.arange(n) / (n - 1)
    return np.pi * np.arange(1, n + 1) / (n + 1)


def fourier_wavenumbers(n, parity="full"):
    """Integer wavenumbers of the basis functions, in transform order."""
    n = _check(n, parity)
    if parity == "full":
        return np.fft.fftfreq(n, 1.0 / n)
    if parity == "even":
        return np.arange(n, dtype=float)
    return np.arange(1, n + 1, dtype=float)


def _basis_matrix(theta, n, parity, deriv=0):
    """Values of ``d^deriv/dtheta^deriv`` of the real basis functions at ``theta``."""
    theta = np.asarray(theta, dtype=float)[:, None]
    m = fourier_wavenumbers(n, parity)[None, :]
    # derivatives cycle with period four: cos -> -sin -> -cos -> sin, sin -> cos -> -sin -> -cos
    cycle = {"even": ((1, np.cos), (-1, np.sin), (-1, np.cos), (1, np.sin)),
             "odd": ((1, np.sin), (1, np.cos), (-1, np.sin), (-1, np.cos))}
    if parity in cycle:
        sign, fn = cycle[parity][deriv % 4]
        return sign * m**deriv * fn(m * theta)
    raise AssertionError("full parity uses the FFT route")


@functools.lru_cache(maxsize=64)
def _inverse_basis(n, parity):
    b = _basis_matrix(fourier_nodes(n, parity), n, parity)
    inv = np.linalg.inv(b)
    inv.setflags(write=False)
    return inv


def fourier_derivative(values, order=1, parity="full", axis=-1):
    """Derivative in ``theta`` (period 2*pi) of nodal values, by FFT (full) or transform.

    For even ``n`` in the full variant the Nyquist mode is dropped from odd
    derivatives (its derivative is not representable at the nodes) and kept in
    even ones, the standard choice.
    """
    v = np.moveaxis(np.asarray(values), axis, -1)
    n = _check(v.shape[-1], parity)
    if parity == "full":
        m = fourier_wavenumbers(n)
        mult = (1j * m) ** order
        if n % 2 == 0 and order % 2 == 1:
            mult[n // 2] = 0
        out = scipy.fft.ifft(mult * scipy.fft.fft(v, axis=-1), axis=-1)
        if np.isrealobj(v):
            out = out.real
    else:
        d = fourier_diff_matrices(n, order, parity)[order - 1]
        out = v @ d.T
    return np.moveaxis(out, -1, axis)


@functools.lru_cache(maxsize=64)
def _diff_cached(n, order, parity):
    out = []
    for k in range(1, order + 1):
        if parity == "full":
            d = fourier_derivative(np.eye(n), k, "full", axis=0)
        else:
            d = _basis_matrix(fourier_nodes(n, parity), n, parity, k) @ _inverse_basis(n, parity)
            if parity == "even":
                # constants are in the cosine space and every derivative kills them: the
                # negative-sum diagonal makes that exact (the standard trick)
                np.fill_diagonal(d, 0.0)
                np.fill_diagonal(d, -d.sum(axis=1))
        d = np.ascontiguousarray(d)
        d.setflags(write=False)
        out.append(d)
    return tuple(out)


def fourier_diff_matrices(n, order=2, parity="full"):
    """Differentiation matrices in ``theta`` (period 2*pi) of orders 1..``order``.

    Returns a tuple of read-only ``(n, n)`` arrays; ``D[k-1] @ f`` gives the k-th
    derivative at the nodes, identical to :func:`fourier_derivative`.
    """
    n = _check(n, parity)
    order = int(order)
    if order < 1:
        raise ValueError(f"`order` must be >= 1, got {order}")
    return _diff_cached(n, order, parity)


def fourier_coeffs(values, parity="full", axis=-1):
    """Basis coefficients of nodal values (FFT/n for full, cosine/sine amplitudes otherwise)."""
    v = np.moveaxis(np.asarray(values), axis, -1)
    n = _check(v.shape[-1], parity)
    if parity == "full":
        c = scipy.fft.fft(v, axis=-1) / n
    else:
        c = v @ _inverse_basis(n, parity).T
    return np.moveaxis(c, -1, axis)


def fourier_interp_matrix(n, theta, parity="full"):
    """Matrix ``P`` (shape (m, n)) with ``P @ f`` = trigonometric interpolant at ``theta``."""
    n = _check(n, parity)
    theta = np.atleast_1d(np.asarray(theta, dtype=float)).ravel()
    if parity != "full":
        return _basis_matrix(theta, n, parity) @ _inverse_basis(n, parity)
    m = fourier_wavenumbers(n)
    e = np.exp(1j * np.outer(theta, m))
    if n % 2 == 0:
        e[:, n // 2] = np.cos(theta * (n // 2))  # symmetric Nyquist mode
    f = np.exp(-1j * np.outer(m, fourier_nodes(n))) / n
    return (e @ f).real


def fourier_weights(n, parity="full"):
    """Quadrature weights over the nodes' interval ([0, 2*pi) full, [0, pi] otherwise)."""
    n = _check(n, parity)
    if parity == "full":
        return np.full(n, 2 * np.pi / n)
    m = fourier_wavenumbers(n, parity)
    if parity == "even":
        integrals = np.where(m == 0, np.pi, 0.0)
    else:
        integrals = np.where(m % 2 == 1, 2.0 / m, 0.0)
    return integrals @ _inverse_basis(n, parity)


def fourier_tail(values, scale=1.0, parity="full", axis=-1):
    """Relative size of the highest-wavenumber coefficients (see ``tail_measure``)."""
    from ._chebyshev import tail_measure

    c = np.abs(np.moveaxis(fourier_coeffs(values, parity, axis), axis, -1))
    n = c.shape[-1]
    if parity == "full":
        m = np.abs(fourier_wavenumbers(n)).astype(int)
        mags = np.zeros(c.shape[:-1] + (m.max() + 1,))
        for k in range(m.max() + 1):
            mags[..., k] = c[..., m == k].max(axis=-1)
        c = mags
    if c.shape[-1] < 2:
        return np.zeros(c.shape[:-1])
    return tail_measure(c, scale)
