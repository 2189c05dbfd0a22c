"""Truncated Laurent series with precision tracking, as a numpy-compatible number type.

A :class:`Series` represents ``sum_{k=0}^{m-1} c_k d^(v+k) + O(d^(v+m))`` in one
variable ``d`` (an offset of the radial coordinate from an expansion point).
Coefficients are numpy arrays with a common batch shape (grid points, and the
batch of complex-step perturbations), so one series carries a whole set of
local expansions at once.

Why: geometry evaluated pointwise needs the metric and its first two
derivatives; at a regular point those are exactly the Taylor coefficients of
order 0..2, i.e. a series known to ``O(d^3)``.  At a horizon the metric
degenerates and Christoffel symbols have poles; evaluating the same formulas on
Laurent series gives the Laurent expansion of the field equations there, whose
leading coefficients are the regularity conditions.  Precision is tracked
exactly like ``O(d^n)`` in a computer-algebra system: a coefficient that is not
determined by the input data is never returned.

Supported: ``+ - * /``, integer and real powers, ``numpy`` ufuncs ``exp``, ``log``,
``sqrt``, ``sin``, ``cos``, ``sinh``, ``cosh``, ``tanh``, ``arctan``, ``square``,
``negative``, ``reciprocal`` (user potentials written with numpy work unchanged),
``derivative()`` in ``d``.
"""

import numbers

import numpy as np

__all__ = ["Series", "PrecisionError", "taylor", "constant_series", "coordinate_series"]


class PrecisionError(ArithmeticError):
    """A coefficient was requested beyond the known precision of a series."""


def _as_array(x):
    return np.asarray(x)


def _bshape(a, b):
    # the two batch shapes are almost always equal: skip numpy's general routine then
    return a if a == b else np.broadcast_shapes(a, b)


_CAUCHY = {}
_SHORT = 4  # up to this length a product is cheaper term by term than by reduceat


def _cauchy_plan(ma, mb, m):
    """Rows of the flattened outer product ``a_i b_j`` sorted by ``k = i + j < m``, and the
    start of each ``k`` (for :meth:`Series.__mul__`); cached by the three lengths."""
    key = (ma, mb, m)
    plan = _CAUCHY.get(key)
    if plan is None:
        rows, starts = [], []
        for k in range(m):
            starts.append(len(rows))
            rows += [i * mb + (k - i) for i in range(max(0, k - mb + 1), min(k, ma - 1) + 1)]
        plan = _CAUCHY[key] = (np.array(rows, dtype=np.intp), np.array(starts, dtype=np.intp))
    return plan


def keeps_zero_pattern(x):
    """True for a finite non-zero Python number: multiplying by it leaves every zero where it is
    (nothing to normalise afterwards)."""
    t = type(x)
    return (t is float or t is int) and x != 0 and x - x == 0


def _new(c, val):
    """``Series(c, val)`` for an ndarray ``c`` of ``ndim >= 1`` and an int ``val`` (the hot
    paths; skips the constructor's conversions)."""
    s = object.__new__(Series)
    s.c = c
    s.val = val
    return s


_ORDERS = {}


def _orders(val, prec, ndim):
    """``[val, ..., prec - 1]`` shaped to multiply coefficients of ``ndim`` dimensions (cached)."""
    key = (val, prec, ndim)
    k = _ORDERS.get(key)
    if k is None:
        k = _ORDERS[key] = np.arange(val, prec).reshape((-1,) + (1,) * (ndim - 1))
        k.flags.writeable = False
    return k


class Series:
    """Truncated Laurent series ``sum_k c[k] d^(val + k) + O(d^(val + len(c)))``.

    Parameters
    ----------
    coeffs : array_like, shape (m, *batch)
        Coefficients from the valuation upwards.
    val : int
        Exponent of ``coeffs[0]``.
    """

    __array_priority__ = 1000
    __slots__ = ("c", "val")

    def __init__(self, coeffs, val=0):
        c = np.asarray(coeffs)
        if c.ndim == 0:
            c = c[None]
        self.c = c
        self.val = int(val)

    # ------------------------------------------------------------------ basics
    @property
    def prec(self):
        """Exponent of the first unknown term (the ``n`` in ``O(d^n)``)."""
        return self.val + self.c.shape[0]

    @property
    def batch_shape(self):
        return self.c.shape[1:]

    def __len__(self):
        return self.c.shape[0]

    def normalized(self):
        """Drop leading coefficients that are exactly zero everywhere (raise the valuation)."""
        c, v = self.c, self.val
        k = 0
        while k < c.shape[0] - 1 and not np.count_nonzero(c[k]):  # (a C call; .any() wraps Python)
            k += 1
        if k:
            return _new(c[k:], v + k)
        return self

    def coefficient(self, n):
        """Coefficient of ``d^n`` (zero below the valuation; error at or beyond precision)."""
        if n >= self.prec:
            raise PrecisionError(f"coefficient d^{n} unknown: series known to O(d^{self.prec})")
        if n < self.val:
            return np.zeros(self.batch_shape, dtype=self.c.dtype)
        return self.c[n - self.val]

    def truncated(self, prec):
        """The same series known only to ``O(d^prec)``."""
        m = max(0, min(self.c.shape[0], prec - self.val))
        if m == 0:
            return Series(np.zeros((1,) + self.batch_shape, dtype=self.c.dtype), prec - 1)._unknown()
        return _new(self.c[:m], self.val)

    def _unknown(self):
        # a series with no known coefficient: represented with val = prec (zero terms)
        s = object.__new__(Series)
        s.c = np.zeros((0,) + self.batch_shape, dtype=self.c.dtype)
        s.val = self.val + 1
        return s

    def derivative(self):
        """``d/dd`` of the series (precision drops by one)."""
        if self.c.shape[0] == 0:
            return Series(self.c, self.val - 1)
        c = self.c * _orders(self.val, self.prec, self.c.ndim)
        return _new(c, self.val - 1).normalized()

    def __repr__(self):
        return f"Series(val={self.val}, prec={self.prec}, batch={self.batch_shape})"

    # ------------------------------------------------------------- arithmetic
    def __neg__(self):
        return _new(-self.c, self.val)

    def __pos__(self):
        return self

    def __add__(self, other):
        if not isinstance(other, Series):
            other = _as_array(other)
            if self.val > 0:
                return _Exact(other).__radd__(self)
            if self.prec <= 0:
                return self
            c = self.c.copy() if np.result_type(self.c, other) == self.c.dtype else self.c.astype(
                np.result_type(self.c, other))
            c[-self.val] = c[-self.val] + other
            return Series(c, self.val).normalized()
        if self.val == other.val:  # the common case: one numpy call (and exactly the same sum)
            m = min(self.c.shape[0], other.c.shape[0])
            if m > 0:
                return _new(self.c[:m] + other.c[:m], self.val).normalized()
        v = min(self.val, other.val)
        p = min(self.prec, other.prec)
        if p <= v:
            return Series(np.zeros((0,) + _bshape(self.batch_shape, other.batch_shape)), p)
        shape = (p - v,) + _bshape(self.batch_shape, other.batch_shape)
        c = np.zeros(shape, dtype=np.result_type(self.c, other.c))
        for s in (self, other):
            lo, hi = s.val - v, min(s.prec, p) - v
            if hi > lo:
                c[lo:hi] += s.c[: hi - lo]
        return Series(c, v).normalized()

    __radd__ = __add__

    def __sub__(self, other):
        return self + (-other)

    def __rsub__(self, other):
        return (-self) + other

    def __mul__(self, other):
        if keeps_zero_pattern(other):  # half the products of a curvature evaluation
            return _new(self.c * other, self.val)
        if not isinstance(other, Series):
            other = _as_array(other)
            return _new(self.c * other, self.val).normalized()
        v = self.val + other.val
        p = min(self.val + other.prec, other.val + self.prec)
        m = p - v
        a, b = self.c, other.c
        ma, mb = min(m, a.shape[0]), min(m, b.shape[0])
        if m <= 0 or ma <= 0 or mb <= 0:
            shape = (max(m, 0),) + _bshape(self.batch_shape, other.batch_shape)
            return Series(np.zeros(shape, dtype=np.result_type(a, b)), v).normalized()
        if m <= _SHORT:
            # short series (the Taylor series of regular points): c_k = a_0 b_k + (a_1 b_{k-1} +
            # a_2 b_{k-2} + ...) in 2m - 1 numpy calls, summed in the order np.add.reduceat
            # uses below (the same numbers, bit for bit; test_series checks it)
            c = a[0] * b[:m]
            if m > 1:
                rest = a[1] * b[:m - 1]
                for i in range(2, m):
                    rest[i - 1:] += a[i] * b[:m - i]
                c[1:] += rest
            return _new(c, v).normalized()
        # Cauchy product in three numpy calls: all products a_i b_j at once, then the sums
        # over i + j = k (the numpy call count, not the arithmetic, is what costs here)
        gather, starts = _cauchy_plan(ma, mb, m)
        outer = a[:ma, None] * b[None, :mb]
        outer = outer.reshape((ma * mb,) + outer.shape[2:])
        return _new(np.add.reduceat(outer[gather], starts, axis=0), v).normalized()

    __rmul__ = __mul__

    def reciprocal(self):
        """``1/self``; the leading coefficient must be nonzero."""
        s = self.normalized()
        c = s.c
        m = c.shape[0]
        if m == 0:
            raise PrecisionError("reciprocal of a series with no known coefficient")
        out = np.zeros_like(c, dtype=np.result_type(c, float))
        with np.errstate(divide="raise", invalid="raise"):
            try:
                inv0 = 1.0 / c[0]
            except FloatingPointError:
                raise ZeroDivisionError("series division by a leading coefficient that vanishes") from None
        out[0] = inv0
        for n in range(1, m):
            acc = 0
            for k in range(1, n + 1):
                acc = acc + c[k] * out[n - k]
            out[n] = -acc * inv0
        return Series(out, -s.val)

    def __truediv__(self, other):
        if not isinstance(other, Series):
            return Series(self.c / _as_array(other), self.val)
        return self * other.reciprocal()

    def __rtruediv__(self, other):
        return self.reciprocal() * other

    def __pow__(self, r):
        if isinstance(r, Series):
            return np.exp(r * np.log(self))
        if isinstance(r, numbers.Integral) or (np.ndim(r) == 0 and float(r).is_integer()):
            n = int(r)
            if n == 0:
                return _Exact(np.ones(self.batch_shape, dtype=self.c.dtype)).as_series(self.prec - self.val)
            base = self if n > 0 else self.reciprocal()
            out = base
            for _ in range(abs(n) - 1):
                out = out * base
            return out
        return _power(self, float(r))

    def __rpow__(self, base):
        return np.exp(self * np.log(base))

    # --------------------------------------------------------------- ufuncs
    def __array_ufunc__(self, ufunc, method, *inputs, **kwargs):
        if method != "__call__" or kwargs.get("out") is not None:
            return NotImplemented
        fn = _UFUNCS.get(ufunc)
        if fn is None:
            return NotImplemented
        return fn(*inputs)


class _Exact:
    """A constant with infinite precision, used internally for promotions."""

    def __init__(self, value):
        self.value = _as_array(value)

    def as_series(self, m):
        c = np.zeros((max(m, 1),) + self.value.shape, dtype=self.value.dtype)
        c[0] = self.value
        return Series(c, 0)

    def __radd__(self, s):
        # s has val > 0: pad with zeros down to the constant term
        m = s.prec
        c = np.zeros((m,) + np.broadcast_shapes(s.batch_shape, self.value.shape),
                     dtype=np.result_type(s.c, self.value))
        c[0] = self.value
        c[s.val:] += s.c
        return Series(c, 0).normalized()

    __add__ = __radd__


def _split_leading(s):
    s = s.normalized()
    if s.c.shape[0] == 0:
        raise PrecisionError("function of a series with no known coefficient")
    return s


def _unit_series(s):
    """``s = c0 d^v (1 + t)``: return c0, v and the coefficients of t (t has val >= 1)."""
    s = _split_leading(s)
    c0 = s.c[0]
    t = s.c / c0
    t[0] = 0
    return c0, s.val, t


def _power(s, r):
    c0, v, t = _unit_series(s)
    if v * r != int(round(v * r)) or (v != 0 and abs(v * r - round(v * r)) > 1e-12):
        raise PrecisionError(f"non-integer power {r} of a series with valuation {v}")
    m = t.shape[0]
    # (1 + t)^r by the recurrence n a_n = sum_{k=1}^n ((r+1) k - n) t_k a_{n-k}
    a = np.zeros_like(t, dtype=np.result_type(t, float))
    a[0] = 1.0
    for n in range(1, m):
        acc = 0
        for k in range(1, n + 1):
            acc = acc + ((r + 1) * k - n) * t[k] * a[n - k]
        a[n] = acc / n
    return Series(a * c0**r, int(round(v * r))).normalized()


def _exp(s):
    if not isinstance(s, Series):
        return np.exp(s)
    s = s.normalized() if s.c.shape[0] else s
    if s.val < 0:
        raise PrecisionError("exp of a series with a pole")
    m = s.prec
    if m <= 0:
        raise PrecisionError("exp of a series with no constant term known")
    b = np.zeros((m,) + s.batch_shape, dtype=np.result_type(s.c, float))
    b[s.val:] = s.c[: m - s.val]
    a = np.zeros_like(b)
    a[0] = np.exp(b[0])
    # a' = b' a  ->  n a_n = sum_{k=1}^n k b_k a_{n-k}
    for n in range(1, m):
        acc = 0
        for k in range(1, n + 1):
            acc = acc + k * b[k] * a[n - k]
        a[n] = acc / n
    return Series(a, 0).normalized()


def _log(s):
    if not isinstance(s, Series):
        return np.log(s)
    c0, v, t = _unit_series(s)
    if v != 0:
        raise PrecisionError("log of a series with a zero or pole at the expansion point")
    m = t.shape[0]
    # log(1 + t): l' = t' / (1 + t)  ->  n l_n = n t_n - sum_{k=1}^{n-1} k l_k t_{n-k}
    lg = np.zeros_like(t, dtype=np.result_type(t, float))
    for n in range(1, m):
        acc = n * t[n]
        for k in range(1, n):
            acc = acc - k * lg[k] * t[n - k]
        lg[n] = acc / n
    lg[0] = np.log(c0)
    return Series(lg, 0)


def _sin_cos(s):
    s = s.normalized()
    if s.val < 0:
        raise PrecisionError("trigonometric function of a series with a pole")
    m = s.prec
    b = np.zeros((m,) + s.batch_shape, dtype=np.result_type(s.c, float))
    b[s.val:] = s.c[: m - s.val]
    sn = np.zeros_like(b)
    cs = np.zeros_like(b)
    sn[0], cs[0] = np.sin(b[0]), np.cos(b[0])
    for n in range(1, m):
        a1 = 0
        a2 = 0
        for k in range(1, n + 1):
            a1 = a1 + k * b[k] * cs[n - k]
            a2 = a2 + k * b[k] * sn[n - k]
        sn[n] = a1 / n
        cs[n] = -a2 / n
    return Series(sn, 0).normalized(), Series(cs, 0).normalized()


def _wrap(numpy_fn, series_fn):
    def f(x):
        return series_fn(x) if isinstance(x, Series) else numpy_fn(x)
    return f


def _binary(op):
    def f(a, b):
        return op(a, b)
    return f


_UFUNCS = {
    np.add: _binary(lambda a, b: a + b if isinstance(a, Series) else b + a),
    np.subtract: _binary(lambda a, b: a - b if isinstance(a, Series) else -(b - a)),
    np.multiply: _binary(lambda a, b: a * b if isinstance(a, Series) else b * a),
    np.true_divide: _binary(lambda a, b: a / b if isinstance(a, Series) else b.__rtruediv__(a)),
    np.power: _binary(lambda a, b: a ** b if isinstance(a, Series) else b.__rpow__(a)),
    np.negative: lambda a: -a,
    np.positive: lambda a: a,
    np.square: lambda a: a * a,
    np.reciprocal: lambda a: a.reciprocal(),
    np.exp: _wrap(np.exp, _exp),
    np.log: _wrap(np.log, _log),
    np.sqrt: _wrap(np.sqrt, lambda s: _power(s, 0.5)),
    np.sin: _wrap(np.sin, lambda s: _sin_cos(s)[0]),
    np.cos: _wrap(np.cos, lambda s: _sin_cos(s)[1]),
    np.sinh: _wrap(np.sinh, lambda s: (_exp(s) - _exp(-s)) * 0.5),
    np.cosh: _wrap(np.cosh, lambda s: (_exp(s) + _exp(-s)) * 0.5),
    np.tanh: _wrap(np.tanh, lambda s: (_exp(2 * s) - 1) / (_exp(2 * s) + 1)),
    np.arctan: _wrap(np.arctan, lambda s: _arctan(s)),
}


def _arctan(s):
    # arctan' = s' / (1 + s^2): integrate the series term by term
    s = s.normalized()
    if s.val < 0:
        raise PrecisionError("arctan of a series with a pole")
    ds = s.derivative() / (1 + s * s)
    m = s.prec
    a = np.zeros((m,) + s.batch_shape, dtype=np.result_type(s.c, float))
    full = np.zeros((m,) + s.batch_shape, dtype=a.dtype)
    full[s.val:] = s.c[: m - s.val]
    a[0] = np.arctan(full[0])
    for n in range(1, m):
        a[n] = ds.coefficient(n - 1) / n
    return Series(a, 0).normalized()


def taylor(derivs, order=None):
    """Series from a value and its derivatives at the expansion point.

    Parameters
    ----------
    derivs : sequence of array_like
        ``[u, u', u'', ...]`` (each with the batch shape).
    order : int, optional
        Known precision (default ``len(derivs)``).

    Returns
    -------
    Series
        ``sum_k derivs[k] d^k / k! + O(d^order)``.
    """
    arrs = np.broadcast_arrays(*[np.asarray(d) for d in derivs])
    fact = 1.0
    c = []
    for k, a in enumerate(arrs):
        if k:
            fact *= k
        c.append(a / fact)
    s = Series(np.stack(c), 0)
    if order is not None:
        s = s.truncated(order)
    return s


def constant_series(value, prec):
    """A constant known to ``O(d^prec)``."""
    return _Exact(np.asarray(value)).as_series(prec)


def coordinate_series(u, prec=6):
    """The exact series ``u + d`` of a coordinate around each of the points ``u``."""
    u = np.asarray(u)
    # complex (complex step) and wider real types (extended precision) are kept
    c = np.zeros((prec,) + u.shape, dtype=u.dtype if np.issubdtype(u.dtype, np.inexact) else float)
    c[0] = u
    c[1] = 1.0
    return Series(c, 0)
