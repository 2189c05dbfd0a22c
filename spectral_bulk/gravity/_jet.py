"""Truncated Taylor polynomials in several variables ("jets"), as a numpy-compatible number type.

A :class:`Jet` represents ``sum_{|alpha| < order} c_alpha d^alpha + O(|d|^order)`` in the
offsets ``d = (d_1, ..., d_k)`` of ``k`` coordinates from an expansion point, with the batch
of points (and of complex-step perturbations) carried in the coefficients.  It is the
several-coordinate sibling of :class:`~spectral_bulk.gravity.Series`: metric components that depend on the radial coordinate and on a boundary direction (a
periodic lattice) are jets known to order 3 at each collocation point, built from a field's
value and its partial derivatives there; the curvature computed from them by
:class:`~spectral_bulk.gravity.Geometry` is then exact at order 0.  The first variable (the
radial coordinate) may carry a valuation, as in a Laurent series: at a horizon the metric
degenerates and the same formulas give the Laurent expansion of the field equations in the
radial offset (Taylor in the others), whose leading coefficients are the regularity
conditions.

Precision is tracked by total degree, like ``O(|d|^n)`` in a computer-algebra system: a
coefficient not determined by the inputs is never returned.  Each variable is labelled
by the index of its spacetime coordinate (``axes``), so ``Jet.partial(mu)`` is the partial
derivative along coordinate ``mu`` (zero along the others).

Supported: ``+ - * /``, integer and real powers, numpy ufuncs ``exp``, ``log``, ``sqrt``,
``sin``, ``cos``, ``sinh``, ``cosh``, ``tanh``, ``square``, ``negative``, ``reciprocal``
(a function of a jet is its Taylor series at the constant term composed with the rest:
common practice, e.g. "Evaluating Derivatives", 2nd ed., SIAM 2008, chapter 13).
"""

import itertools
import math

import numpy as np

from ._dual import binary_ufunc_call, binary_ufuncs
from ._series import PrecisionError, Series, keeps_zero_pattern

__all__ = ["Jet", "coordinate_jets", "jet_from_derivatives"]

_PLANS = {}


def _indices(k, order):
    """Multi-indices of ``k`` variables with total degree below ``order``, by degree."""
    key = ("idx", k, order)
    if key not in _PLANS:
        idx = [a for a in itertools.product(range(order), repeat=k) if sum(a) < order]
        _PLANS[key] = sorted(idx, key=lambda a: (sum(a), a))
    return _PLANS[key]


def _product_plan(k, order):
    """``(alpha, beta, alpha + beta)`` for every pair of total degree below ``order``."""
    key = ("mul", k, order)
    if key not in _PLANS:
        idx = _indices(k, order)
        _PLANS[key] = [(a, b, tuple(x + y for x, y in zip(a, b)))
                       for a in idx for b in idx if sum(a) + sum(b) < order]
    return _PLANS[key]


class Jet:
    """Truncated Taylor (Laurent in the first variable) polynomial in the offsets of ``axes``.

    ``d_1^val sum_{i + |alpha| < n} c[i, alpha] d_1^i d_rest^alpha``: the first variable
    (the radial coordinate, by convention) may carry a valuation ``val`` (a pole or a zero at
    the expansion point, as at a horizon); ``order = val + n`` is the total degree of the
    first unknown monomials.

    Parameters
    ----------
    coeffs : array_like, shape ``(n,) * len(axes) + batch``
        ``coeffs[i, alpha]`` multiplies ``d_1^(val + i) d_rest^alpha``; entries with
        ``i + |alpha| >= n`` are ignored (and kept zero).
    axes : tuple of int
        Spacetime index of the coordinate of each variable.
    order : int
        Total degree of the first unknown monomials.
    val : int
        Exponent of the first variable in ``coeffs[0]`` (0 at regular points).
    """

    __array_priority__ = 1000
    __slots__ = ("c", "axes", "val")

    def __init__(self, coeffs, axes, order, val=0):
        c = np.array(coeffs)  # a copy: entries beyond the order are zeroed below
        k, n = len(axes), int(order) - int(val)
        if n < 1 or c.shape[:k] != (n,) * k:
            raise ValueError(f"coefficients of shape {c.shape} do not hold order {order} "
                             f"(valuation {val}) in {k} variables")
        for a in itertools.product(range(n), repeat=k):
            if sum(a) >= n:
                c[a] = 0
        self.c, self.axes, self.val = c, tuple(int(m) for m in axes), int(val)

    @classmethod
    def _raw(cls, c, axes, val=0):
        j = object.__new__(cls)
        j.c, j.axes, j.val = c, axes, val
        return j

    @property
    def n(self):
        """Number of known total degrees above the valuation."""
        return self.c.shape[0]

    @property
    def order(self):
        """Total degree of the first unknown monomials (``O(|d|^order)``)."""
        return self.val + self.c.shape[0]

    @property
    def batch_shape(self):
        return self.c.shape[len(self.axes):]

    @property
    def value(self):
        """The coefficient of ``d^0`` (the function's value at regular points)."""
        return self.coefficient((0,) * len(self.axes))

    def coefficient(self, alpha):
        """Coefficient of ``d^alpha`` (zero below the valuation, error at or beyond the order)."""
        alpha = tuple(int(a) for a in alpha)
        if len(alpha) != len(self.axes):
            raise ValueError(f"multi-index {alpha} for {len(self.axes)} variables")
        if sum(alpha) >= self.order:
            raise PrecisionError(f"coefficient {alpha} unknown: jet known to total degree {self.order - 1}")
        i = alpha[0] - self.val
        if i < 0:
            return np.zeros(self.batch_shape, dtype=self.c.dtype)
        return self.c[(i,) + alpha[1:]]

    def normalized(self):
        """Drop leading coefficients of the first variable that vanish everywhere (raise ``val``)."""
        out = self
        while out.n > 1 and not np.count_nonzero(out.c[0]):
            m = out.n - 1
            out = Jet._raw(out.c[(slice(1, None),) + (slice(0, m),) * (len(self.axes) - 1)], self.axes,
                           out.val + 1)
        return out

    def _shifted(self, delta):
        """The same jet written with valuation ``val - delta`` (``delta >= 0``; more coefficients)."""
        if delta == 0:
            return self
        k, n = len(self.axes), self.n
        c = np.zeros((n + delta,) * k + self.batch_shape, dtype=self.c.dtype)
        c[(slice(delta, None),) + (slice(0, n),) * (k - 1)] = self.c
        return Jet._raw(c, self.axes, self.val - delta)

    def _regular(self, what):
        """The jet with valuation 0 (a zero at the point is kept as leading zeros)."""
        if self.n == 0:
            raise PrecisionError(f"{what} of a jet with no known coefficient")
        s = self if self.val >= 0 else self.normalized()
        if s.val < 0:
            raise PrecisionError(f"{what} of a jet with a pole")
        return s._shifted(s.val)

    def _dcoeffs(self, i):
        """Coefficients of the derivative of the regular part along variable ``i`` (``n - 1``)."""
        k, m = len(self.axes), self.n - 1
        sl = [slice(0, m)] * k
        sl[i] = slice(1, m + 1)
        w = np.arange(1, m + 1).reshape((1,) * i + (m,) + (1,) * (k - 1 - i) + (1,) * len(self.batch_shape))
        return self.c[tuple(sl)] * w

    def partial(self, mu):
        """``d/d x^mu`` (order drops by one; zero when ``mu`` is not a variable)."""
        if mu not in self.axes:
            return 0
        i, m = self.axes.index(mu), self.n - 1
        if i == 0 and (self.val != 0 or m < 1):
            # d(d^v u) = d^(v-1) (v u + d du)
            w = self.c * self.val
            if m >= 1:
                w = w + Jet._raw(self._dcoeffs(0), self.axes)._shifted(1).c
            return Jet._raw(w, self.axes, self.val - 1).normalized()
        if m < 1:  # nothing is known beyond the leading terms
            return self._unknown(self.order - 1)
        return Jet._raw(self._dcoeffs(i), self.axes, self.val).normalized()

    def _unknown(self, order):
        """A jet with no known coefficient, ``O(|d|^order)``."""
        return Jet._raw(np.zeros((0,) * len(self.axes) + self.batch_shape, dtype=self.c.dtype), self.axes, order)

    def __repr__(self):
        return f"Jet(axes={self.axes}, val={self.val}, order={self.order}, batch={self.batch_shape})"

    # ------------------------------------------------------------- arithmetic
    def _other(self, o):
        if isinstance(o, Jet):
            if o.axes != self.axes:
                raise TypeError(f"jets in different coordinates: {self.axes} and {o.axes}")
            return o
        if isinstance(o, Series):
            raise TypeError("a Jet and a Series cannot be combined (expand both in the same coordinates)")
        if hasattr(o, "__array_ufunc__") and not isinstance(o, (np.ndarray, np.generic)):
            return NotImplemented  # e.g. a Dual: its reflected operation takes over
        return None

    def _const(self, o, m):
        """A constant as a regular jet of order ``m``."""
        o = np.asarray(o)
        c = np.zeros((m,) * len(self.axes) + np.broadcast_shapes(self.batch_shape, o.shape),
                     dtype=np.result_type(self.c, o))
        c[(0,) * len(self.axes)] = o
        return Jet._raw(c, self.axes)

    def _cut(self, m):
        return self.c[(slice(0, m),) * len(self.axes)]

    def __neg__(self):
        return Jet._raw(-self.c, self.axes, self.val)

    def __pos__(self):
        return self

    def __add__(self, o):
        other = self._other(o)
        if other is NotImplemented:
            return NotImplemented
        if other is None:  # a constant is exact: as many terms as this jet knows
            other = self._const(o, max(self.order, 1))
        v, p = min(self.val, other.val), min(self.order, other.order)
        if p <= v:
            return self._unknown(p)
        a, b = self._shifted(self.val - v), other._shifted(other.val - v)
        # cancelled leading terms (a zero at the point, poles of a sum of field equations) would
        # cost precision in every later product: drop them, as Series does
        return Jet._raw(a._cut(p - v) + b._cut(p - v), self.axes, v).normalized()

    __radd__ = __add__

    def __sub__(self, o):
        return self + (-o)

    def __rsub__(self, o):
        return (-self) + o

    def __mul__(self, o):
        other = self._other(o)
        if other is NotImplemented:
            return NotImplemented
        if other is None:
            out = Jet._raw(self.c * np.asarray(o), self.axes, self.val)
            return out if keeps_zero_pattern(o) else out.normalized()
        m = min(self.n, other.n)
        a, b = self._cut(m), other._cut(m)
        c = np.zeros(a.shape[:len(self.axes)] + np.broadcast_shapes(a.shape[len(self.axes):],
                                                                      b.shape[len(self.axes):]),
                     dtype=np.result_type(a, b))
        for x, y, z in _product_plan(len(self.axes), m):
            c[z] += a[x] * b[y]
        return Jet._raw(c, self.axes, self.val + other.val).normalized()

    __rmul__ = __mul__

    def reciprocal(self):
        """``1/self``; after removing leading zeros the constant term must not vanish."""
        s = self.normalized()
        if s.n == 0:
            raise PrecisionError("reciprocal of a jet with no known coefficient")
        with np.errstate(divide="raise", invalid="raise"):
            try:
                inv = 1.0 / s.c[(0,) * len(self.axes)]
            except FloatingPointError:
                raise ZeroDivisionError("jet division by a leading coefficient that vanishes") from None
        # 1/(c0 + t) = sum_k (-1)^k t^k / c0^(k+1), times d^(-val)
        u = Jet._raw(s.c, s.axes)._compose([(-1) ** k * inv ** (k + 1) for k in range(s.n)])
        return Jet._raw(u.c, s.axes, -s.val)

    def __truediv__(self, o):
        if isinstance(o, Jet):
            return self * o.reciprocal()
        other = self._other(o)
        if other is NotImplemented:
            return NotImplemented
        return Jet._raw(self.c / np.asarray(o), self.axes, self.val)

    def __rtruediv__(self, o):
        return self.reciprocal() * o

    def __pow__(self, r):
        if isinstance(r, Jet):
            return np.exp(r * np.log(self))
        if np.ndim(r) == 0 and float(np.real(r)).is_integer() and np.imag(r) == 0:
            n = int(np.real(r))
            if n == 0:
                return self._const(np.ones(self.batch_shape, dtype=self.c.dtype), max(self.order, 1))
            base = self if n > 0 else self.reciprocal()
            out = base
            for _ in range(abs(n) - 1):
                out = out * base
            return out
        s = self.normalized()
        if s.n == 0:
            raise PrecisionError("power of a jet with no known coefficient")
        vr = s.val * float(r) if np.ndim(r) == 0 else None
        if vr is None or vr != round(vr):
            raise PrecisionError(f"non-integer power {r} of a jet with valuation {s.val}")
        u = Jet._raw(s.c, s.axes)
        u = u._compose(_power_coef(r)(u.c[(0,) * len(self.axes)], u.n))
        return Jet._raw(u.c, s.axes, int(round(vr)))

    def __rpow__(self, base):
        return np.exp(self * np.log(base))

    def _compose(self, coef):
        """``sum_k coef[k] t^k`` with ``t = self - c0`` (a regular jet; ``coef[k] = f^(k)(c0)/k!``)."""
        t = Jet._raw(self.c.copy(), self.axes)
        t.c[(0,) * len(self.axes)] = 0
        out = self._const(coef[0], self.n)
        power = None
        for k in range(1, self.n):
            power = t if power is None else power * t
            out = out + power * coef[k]
        return out

    def __array_ufunc__(self, ufunc, method, *inputs, **kwargs):
        out = binary_ufunc_call(_BINARY, ufunc, method, inputs, kwargs)
        if out is not None:
            return out
        (x,) = inputs
        if ufunc in _DIRECT:
            return _DIRECT[ufunc](x)
        rule = _TAYLOR.get(ufunc)
        if rule is None:
            return NotImplemented
        u = x._regular(ufunc.__name__)
        if ufunc is np.log and u.val == 0 and not np.all(u.c[(0,) * len(u.axes)]):
            raise PrecisionError("log of a jet with a zero at the expansion point")
        return u._compose(rule(u.c[(0,) * len(u.axes)], u.n))


def _exp_coef(a, m):
    e = np.exp(a)
    return [e / math.factorial(k) for k in range(m)]


def _log_coef(a, m):
    # log(a + t) = log a + sum_{k>=1} (-1)^(k+1) t^k / (k a^k)
    return [np.log(a)] + [(-1) ** (k + 1) / (k * a**k) for k in range(1, m)]


def _sin_cos_coef(a, m, phase):
    # d^k/dx^k sin = sin(x + k pi/2); cos is sin shifted by pi/2
    s, c = np.sin(a), np.cos(a)
    cyc = [s, c, -s, -c]
    return [cyc[(k + phase) % 4] / math.factorial(k) for k in range(m)]


def _power_coef(r):
    # (a + t)^r = sum_k binom(r, k) a^(r-k) t^k
    def coef(a, m):
        out, fall = [], 1.0
        for k in range(m):
            out.append(fall / math.factorial(k) * a ** (r - k))
            fall *= r - k
        return out
    return coef


def _sinh_cosh_coef(a, m, phase):
    s, c = np.sinh(a), np.cosh(a)
    cyc = [s, c]
    return [cyc[(k + phase) % 2] / math.factorial(k) for k in range(m)]


_TAYLOR = {
    np.exp: _exp_coef,
    np.log: _log_coef,
    np.sin: lambda a, m: _sin_cos_coef(a, m, 0),
    np.cos: lambda a, m: _sin_cos_coef(a, m, 1),
    np.sinh: lambda a, m: _sinh_cosh_coef(a, m, 0),
    np.cosh: lambda a, m: _sinh_cosh_coef(a, m, 1),
}

_DIRECT = {
    np.negative: lambda x: -x,
    np.positive: lambda x: x,
    np.square: lambda x: x * x,
    np.sqrt: lambda x: x**0.5,  # through the valuation: sqrt(d^2 u) = d sqrt(u)
    np.reciprocal: lambda x: x.reciprocal(),
    np.tanh: lambda x: (np.exp(2 * x) - 1) / (np.exp(2 * x) + 1),
}

_BINARY = binary_ufuncs(Jet)


def coordinate_jets(points, axes, order=3):
    """The exact jets ``x_i + d_i`` of the coordinates ``axes`` around ``points``.

    Parameters
    ----------
    points : sequence of array_like
        Coordinate values of the expansion points, one array per axis (broadcast together).
    axes : sequence of int
        Spacetime indices of the coordinates.
    order : int

    Returns
    -------
    list of Jet
    """
    axes = tuple(int(m) for m in axes)
    pts = np.broadcast_arrays(*[np.asarray(p) for p in points])
    out = []
    for i, p in enumerate(pts):
        dt = p.dtype if np.issubdtype(p.dtype, np.inexact) else float
        c = np.zeros((order,) * len(axes) + p.shape, dtype=dt)
        c[(0,) * len(axes)] = p
        if order > 1:
            e = [0] * len(axes)
            e[i] = 1
            c[tuple(e)] = 1.0
        out.append(Jet._raw(c, axes))
    return out


def jet_from_derivatives(derivs, axes, order=3):
    """A jet from a function's value and partial derivatives at the expansion points.

    Parameters
    ----------
    derivs : dict of tuple -> array_like
        ``{alpha: d^alpha u}`` for every multi-index of total degree below ``order``
        (e.g. ``(0, 0)``, ``(1, 0)``, ``(0, 1)``, ``(2, 0)``, ``(1, 1)``, ``(0, 2)``).
    axes : sequence of int
    order : int

    Returns
    -------
    Jet
        ``sum_alpha d^alpha u / alpha! d^alpha``.
    """
    axes = tuple(int(m) for m in axes)
    idx = _indices(len(axes), order)
    missing = [a for a in idx if a not in derivs]
    if missing:
        raise ValueError(f"derivatives {missing} are needed for a jet of order {order} in {len(axes)} variables")
    arrs = np.broadcast_arrays(*[np.asarray(derivs[a]) for a in idx])
    dt = np.result_type(float, *arrs)
    c = np.zeros((order,) * len(axes) + arrs[0].shape, dtype=dt)
    for a, v in zip(idx, arrs):
        c[a] = v / math.prod(math.factorial(x) for x in a)
    return Jet._raw(c, axes)

