"""Truncated Laurent series (``spectral_bulk.gravity.Series``) against outside references.

Products are checked against ``numpy.polynomial.polynomial.polymul`` (general-purpose
reference library), elementary functions against their Taylor coefficients in closed form
(common practice; e.g. "Handbook of Mathematical Functions", Dover 1965, chapter 4).
"""

import math

import numpy as np
import pytest
from numpy.polynomial import polynomial as P

from spectral_bulk.gravity import Series
from spectral_bulk.gravity import PrecisionError, coordinate_series


def _rand(rng, m, batch=(2, 3), dtype=float):
    c = rng.normal(size=(m,) + batch)
    if dtype is complex:
        c = c + 1j * rng.normal(size=(m,) + batch)
    return c


@pytest.mark.parametrize("va,la,vb,lb", [(0, 3, 0, 3), (0, 4, 1, 3), (-1, 3, 2, 5), (1, 1, 0, 4),
                                         (-2, 5, -1, 2), (0, 4, 2, 4), (0, 6, 1, 7), (-1, 8, 0, 5)])
@pytest.mark.parametrize("dtype", [float, complex])
def test_product_matches_polymul_to_the_known_order(va, la, vb, lb, dtype):
    rng = np.random.default_rng(va * 7 + la * 3 + vb + lb)
    a, b = _rand(rng, la, dtype=dtype), _rand(rng, lb, dtype=dtype)
    a[0] += 3.0  # nonzero leading coefficients: the valuations are exact
    b[0] += 3.0
    s = Series(a, va) * Series(b, vb)
    assert s.val == va + vb
    assert s.prec == va + vb + min(la, lb)  # O(d^prec): the first term either factor leaves unknown
    for idx in np.ndindex(2, 3):
        ref = P.polymul(a[(slice(None),) + idx], b[(slice(None),) + idx])[: min(la, lb)]
        got = np.array([s.coefficient(k)[idx] for k in range(s.val, s.prec)])
        np.testing.assert_allclose(got, ref, rtol=1e-13, atol=1e-13)
    with pytest.raises(PrecisionError):
        s.coefficient(s.prec)


@pytest.mark.parametrize("m", [1, 2, 3, 4])
@pytest.mark.parametrize("dtype", [np.float64, np.complex128, np.longdouble, np.clongdouble])
def test_short_products_are_bitwise_those_of_the_long_route(m, dtype, monkeypatch):
    # short series are multiplied term by term, longer ones through np.add.reduceat; the two
    # routes sum in the same order, so a result does not depend on which one served it
    import spectral_bulk.gravity._series as series_module

    rng = np.random.default_rng(m)
    a = _rand(rng, m + 1, batch=(4, 5), dtype=complex if np.iscomplexobj(dtype(0)) else float)
    b = _rand(rng, m, batch=(1, 5), dtype=complex if np.iscomplexobj(dtype(0)) else float)
    a, b = Series(a.astype(dtype), 0), Series(b.astype(dtype), -1)
    short = a * b
    monkeypatch.setattr(series_module, "_SHORT", 0)
    long = a * b
    assert short.val == long.val and short.c.dtype == long.c.dtype == dtype
    assert np.array_equal(short.c, long.c)


def test_product_with_broadcast_batches_and_scalars():
    rng = np.random.default_rng(1)
    a, b = rng.normal(size=(3, 4, 1)), rng.normal(size=(3, 1, 5))
    s = Series(a, 0) * Series(b, 0)
    assert s.batch_shape == (4, 5)
    ref = np.stack([a[0] * b[0], a[0] * b[1] + a[1] * b[0], a[0] * b[2] + a[1] * b[1] + a[2] * b[0]])
    np.testing.assert_allclose(s.c, ref, rtol=1e-14)
    t = Series(a, 1) * 2.5
    np.testing.assert_allclose(t.c, 2.5 * a)
    assert t.val == 1
    assert (3 * Series(a, 1)).val == 1 and np.array_equal((3 * Series(a, 1)).c, 3 * a)
    z = Series(a, 1) * 0  # an exact zero: no known non-zero coefficient is left
    assert not np.any(z.c) and z.prec == Series(a, 1).prec


def test_leading_zeros_raise_the_valuation():
    # (d + d^2)(d^-1 + 0 d^0 + ...) : the product starts at d^0
    s = Series(np.array([0.0, 1.0, 1.0]), 0) * Series(np.array([1.0, 0.0, 2.0]), -1)
    assert s.val == 0
    np.testing.assert_allclose([s.coefficient(0), s.coefficient(1)], [1.0, 1.0])


@pytest.mark.parametrize("x0", [0.3, 1.7])
def test_elementary_functions_of_a_coordinate(x0):
    m = 6
    u = coordinate_series(np.array([x0]), prec=m)  # x0 + d
    k = np.arange(m)
    fact = np.array([math.factorial(i) for i in k], dtype=float)
    cases = {
        "exp": (np.exp(u), np.exp(x0) / fact),
        "log": (np.log(u), np.r_[math.log(x0), [(-1) ** (i + 1) / (i * x0**i) for i in k[1:]]]),
        "reciprocal": (1 / u, np.array([(-1) ** i / x0 ** (i + 1) for i in k])),
        "sqrt": (np.sqrt(u), np.array([_binom(0.5, i) * x0 ** (0.5 - i) for i in k])),
        "sin": (np.sin(u), np.array([math.sin(x0 + i * math.pi / 2) for i in k]) / fact),
        "cos": (np.cos(u), np.array([math.cos(x0 + i * math.pi / 2) for i in k]) / fact),
        "square": (u * u, np.r_[x0 * x0, 2 * x0, 1.0, np.zeros(m - 3)]),
        "cube": (u**3, np.r_[x0**3, 3 * x0**2, 3 * x0, 1.0, np.zeros(m - 4)]),
    }
    for name, (s, ref) in cases.items():
        got = np.array([s.coefficient(i)[0] for i in range(m)])
        np.testing.assert_allclose(got, ref, rtol=1e-13, atol=1e-14, err_msg=name)


def _binom(r, k):
    out = 1.0
    for j in range(k):
        out *= (r - j) / (j + 1)
    return out


def test_laurent_reciprocal_and_pole_order():
    # 1/(d (1 - d)) = d^-1 + 1 + d + d^2 + ... ; known to O(d^{prec - 2 val})
    s = Series(np.array([1.0, -1.0, 0.0, 0.0]), 1)  # d - d^2, known to O(d^5)
    r = 1 / s
    assert r.val == -1 and r.prec == 3
    np.testing.assert_allclose([r.coefficient(i) for i in range(-1, 3)], [1.0, 1.0, 1.0, 1.0])
    with pytest.raises(ZeroDivisionError):
        Series(np.array([[0.0, 1.0], [1.0, 1.0]]), 0).reciprocal()  # leading zero at one point


@pytest.mark.parametrize("va,la,vb,lb", [(0, 3, 0, 3), (0, 2, 0, 4), (-1, 3, 0, 2), (1, 3, 0, 4)])
def test_sum_is_known_to_the_lower_precision(va, la, vb, lb):
    # coefficientwise sum (numpy.polynomial.polynomial.polyadd on the shifted coefficients)
    rng = np.random.default_rng(10 + va + la + vb + lb)
    a, b = _rand(rng, la), _rand(rng, lb)
    a[0] += 3.0
    b[0] += 3.0
    s = Series(a, va) + Series(b, vb)
    v = min(va, vb)
    assert s.prec == min(va + la, vb + lb)
    for idx in np.ndindex(2, 3):
        pa = np.r_[np.zeros(va - v), a[(slice(None),) + idx]]
        pb = np.r_[np.zeros(vb - v), b[(slice(None),) + idx]]
        ref = P.polyadd(pa, pb)[: s.prec - v]
        got = np.array([s.coefficient(k)[idx] for k in range(v, s.prec)])
        np.testing.assert_allclose(got, ref, rtol=1e-14, atol=1e-14)
