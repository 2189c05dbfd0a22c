"""First-order dual numbers over any algebra (floats, arrays, series, duals).

``Dual(a, b)`` stands for ``a + b eps`` with ``eps**2 = 0``.  Evaluating a model
function ``V`` at ``Dual(phi, 1)`` gives ``V(phi)`` and ``V'(phi)`` at once, whatever
``phi`` is (a number, an array of collocation values, a truncated series); nesting
duals gives higher derivatives.  This is how models are differentiated
automatically: users write ``V``, ``G_IJ`` and ``Z`` with numpy functions only.
"""

import numpy as np

__all__ = ["Dual", "derivative", "partials"]


class Dual:
    """``a + b eps`` with ``eps^2 = 0``; supports arithmetic and common numpy ufuncs."""

    __array_priority__ = 2000
    __slots__ = ("a", "b")

    def __init__(self, a, b):
        self.a, self.b = a, b

    def __neg__(self):
        return Dual(-self.a, -self.b)

    def __pos__(self):
        return self

    def __add__(self, o):
        if isinstance(o, Dual):
            return Dual(self.a + o.a, self.b + o.b)
        return Dual(self.a + o, self.b)

    __radd__ = __add__

    def __sub__(self, o):
        if isinstance(o, Dual):
            return Dual(self.a - o.a, self.b - o.b)
        return Dual(self.a - o, self.b)

    def __rsub__(self, o):
        return Dual(o - self.a, -self.b)

    def __mul__(self, o):
        if isinstance(o, Dual):
            return Dual(self.a * o.a, self.a * o.b + self.b * o.a)
        return Dual(self.a * o, self.b * o)

    __rmul__ = __mul__

    def __truediv__(self, o):
        if isinstance(o, Dual):
            inv = 1 / o.a
            return Dual(self.a * inv, (self.b * o.a - self.a * o.b) * inv * inv)
        return Dual(self.a / o, self.b / o)

    def __rtruediv__(self, o):
        inv = 1 / self.a
        return Dual(o * inv, -o * self.b * inv * inv)

    def __pow__(self, r):
        if isinstance(r, Dual):
            return np.exp(r * np.log(self))
        if np.ndim(r) == 0 and float(r) == 0:
            return Dual(self.a ** 0, 0 * self.b)
        return Dual(self.a**r, r * self.a ** (r - 1) * self.b)

    def __rpow__(self, base):
        return np.exp(self * np.log(base))

    def __array_ufunc__(self, ufunc, method, *inputs, **kwargs):
        out = binary_ufunc_call(_BINARY, ufunc, method, inputs, kwargs)
        if out is not None:
            return out
        rule = _UNARY.get(ufunc)
        if rule is None:
            return NotImplemented
        (x,) = inputs
        val, der = rule(x.a)
        return Dual(val, der * x.b)


def _sec2(a):
    t = np.tanh(a)
    return 1 - t * t


_UNARY = {
    np.negative: lambda a: (-a, -1.0),
    np.positive: lambda a: (a, 1.0),
    np.exp: lambda a: (np.exp(a), np.exp(a)),
    np.log: lambda a: (np.log(a), 1 / a),
    np.sqrt: lambda a: (np.sqrt(a), 0.5 / np.sqrt(a)),
    np.sin: lambda a: (np.sin(a), np.cos(a)),
    np.cos: lambda a: (np.cos(a), -np.sin(a)),
    np.sinh: lambda a: (np.sinh(a), np.cosh(a)),
    np.cosh: lambda a: (np.cosh(a), np.sinh(a)),
    np.tanh: lambda a: (np.tanh(a), _sec2(a)),
    np.arctan: lambda a: (np.arctan(a), 1 / (1 + a * a)),
    np.square: lambda a: (a * a, 2 * a),
    np.reciprocal: lambda a: (1 / a, -1 / (a * a)),
}

def binary_ufunc_call(table, ufunc, method, inputs, kwargs):
    """The start of ``__array_ufunc__`` shared by :class:`Dual` and ``Jet``: ``NotImplemented``
    for anything but a plain call (no ``out=``), the rule of ``table`` (:func:`binary_ufuncs`)
    for a binary ufunc, else ``None`` (the caller handles unary ufuncs)."""
    if method != "__call__" or kwargs.get("out") is not None:
        return NotImplemented
    rule = table.get(ufunc)
    return None if rule is None else rule(*inputs)


def binary_ufuncs(cls):
    """The binary numpy ufuncs of a number type ``cls`` as its operators, whichever operand
    is of type ``cls`` (for ``__array_ufunc__``)."""
    return {
        np.add: lambda x, y: x + y if isinstance(x, cls) else y + x,
        np.subtract: lambda x, y: x - y if isinstance(x, cls) else (-y) + x,
        np.multiply: lambda x, y: x * y if isinstance(x, cls) else y * x,
        np.true_divide: lambda x, y: x / y if isinstance(x, cls) else y.__rtruediv__(x),
        np.power: lambda x, y: x**y if isinstance(x, cls) else y.__rpow__(x),
    }


_BINARY = binary_ufuncs(Dual)


def derivative(fn, x):
    """``(fn(x), fn'(x))`` for a scalar function of one variable on any algebra."""
    out = fn(Dual(x, 1.0 + 0 * x))
    if not isinstance(out, Dual):  # a constant function
        return out, 0 * x
    return out.a, out.b


def partials(fn, xs):
    """Value and gradient of ``fn(*xs)`` (one dual evaluation per argument)."""
    grads = []
    val = None
    for i in range(len(xs)):
        args = [Dual(x, (1.0 if j == i else 0.0) + 0 * x) for j, x in enumerate(xs)]
        out = fn(*args)
        if isinstance(out, Dual):
            val, g = out.a, out.b
        else:
            val, g = out, 0 * xs[0]
        grads.append(g)
    if not xs:
        val = fn()
    return val, grads
