"""Spectral operators of ``spectral_bulk.grids`` checked through identities.

Every check names its source beside it.  Abbreviations used below:

* [SMM]  "Spectral Methods in MATLAB", SIAM (2000), :doi:`10.1137/1.9780898719598`.
* [ATAP] "Approximation Theory and Approximation Practice", SIAM (2013),
  :doi:`10.1137/1.9781611975949` (theorem numbers quoted from memory).
* [DMS]  "A MATLAB differentiation matrix suite", ACM Trans. Math. Softw. 26 (2000)
  465-519, :doi:`10.1145/365723.365727`.
* [TWIST] "Spectral differencing with a twist", SIAM J. Sci. Comput. 24 (2003)
  1465-1487, :doi:`10.1137/S1064827501388182` (reference from memory).
* [BARY] "Barycentric Lagrange interpolation", SIAM Review 46 (2004) 501-517,
  :doi:`10.1137/S0036144502417715`.
* [CFSM] "Chebyshev and Fourier Spectral Methods", 2nd ed., Dover (2001),
  chapters 16-17 (coordinate maps, algebraic map of a half line).
* [FDM]  "Finite Difference Methods for Ordinary and Partial Differential
  Equations", SIAM (2007), :doi:`10.1137/1.9780898717839`, chapter 1.
* numpy.polynomial.chebyshev, scipy.fft, scipy.integrate.quad: independent
  reference implementations.
"""

import re

import numpy as np
import pytest
import scipy.fft
import scipy.integrate
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.polynomial import chebyshev as npcheb

from spectral_bulk.grids import (
    AffineMap,
    Chebyshev,
    ClusterMap,
    Fourier,
    Grid,
    HalfLineMap,
    TensorGrid,
    bary_matrix,
    bary_weights,
    cheb_diff_matrices,
    cheb_nodes,
    clenshaw_curtis_weights,
    coeffs_to_values,
    fourier_coeffs,
    fourier_derivative,
    fourier_diff_matrices,
    fourier_nodes,
    tail_measure,
    values_to_coeffs,
)

EPS = np.finfo(float).eps
HYP = settings(max_examples=40, deadline=None, database=None)  # no .hypothesis dir in the tree


# ----------------------------------------------------------------------------
# helpers
# ----------------------------------------------------------------------------
def chebT_and_derivs(n, k):
    """T_k and its first two derivatives at the ascending nodes, in extended precision.

    Closed forms with x = cos(theta) [SMM ch. 6; ATAP ch. 3]:
    T_k = cos(k theta), T_k' = k sin(k theta)/sin(theta),
    T_k'' = (k sin(k theta) cos(theta)/sin(theta) - k^2 cos(k theta))/sin(theta)^2,
    end values T_k'(+-1) = (+-1)^(k+1) k^2, T_k''(+-1) = (+-1)^k k^2 (k^2 - 1)/3.
    ``longdouble`` keeps the reference error well below the float64 error under
    test (the T_k'' formula cancels by a factor ~n^2 near the ends).
    """
    L = np.longdouble
    pi = L("3.14159265358979323846264338327950288")
    j = np.arange(n, dtype=L)
    th = pi * (n - 1 - j) / (n - 1)  # ascending x = cos(theta)
    s = np.sin(th)
    f = np.cos(k * th)
    with np.errstate(divide="ignore", invalid="ignore"):
        f1 = k * np.sin(k * th) / s
        f2 = (k * np.sin(k * th) * np.cos(th) / s - L(k * k) * np.cos(k * th)) / s**2
    f1[-1], f1[0] = L(k * k), L((-1) ** (k + 1) * k * k)
    f2[-1] = L(k * k * (k * k - 1)) / 3
    f2[0] = L((-1) ** k * k * k * (k * k - 1)) / 3
    return f, f1, f2


def fourier_test_function(parity, k, period, origin=0.0):
    """(f, f', f'') of one basis function of the given parity as callables."""
    w = 2 * np.pi * k / period
    if parity == "odd":
        return (lambda x: np.sin(w * (x - origin)),
                lambda x: w * np.cos(w * (x - origin)),
                lambda x: -(w**2) * np.sin(w * (x - origin)))
    if parity == "even":
        return (lambda x: np.cos(w * (x - origin)),
                lambda x: -w * np.sin(w * (x - origin)),
                lambda x: -(w**2) * np.cos(w * (x - origin)))
    return (lambda x: np.sin(w * (x - origin)),
            lambda x: w * np.cos(w * (x - origin)),
            lambda x: -(w**2) * np.sin(w * (x - origin)))


# ----------------------------------------------------------------------------
# Chebyshev differentiation
# ----------------------------------------------------------------------------
@pytest.mark.parametrize("n", [3, 4, 5, 8, 17, 32, 64, 200])
def test_cheb_diff_exact_on_polynomials(n):
    # Collocation differentiation is exact on polynomials of degree <= n-1, the
    # span of T_0..T_{n-1} [SMM ch. 6].  In floating point the entries of D1 are
    # O(n^2) (corner entry (2(n-1)^2+1)/6) and those of D2 are O(n^4); with the
    # trigonometric differences, the flipping trick and the negative-sum diagonal
    # each entry carries a relative rounding error of a few eps, so the error on
    # data of unit size is O(n^2 eps) for D1 and O(n^4 eps) for D2 [DMS, TWIST].
    # The constant 10 leaves a factor ~5 over the worst measured case (n = 200)
    # while a degradation to O(n^3 eps) / O(n^5 eps) would exceed it.
    D1, D2 = cheb_diff_matrices(n, 2)
    worst1 = worst2 = 0.0
    for k in range(n):
        f, f1, f2 = chebT_and_derivs(n, k)
        fv = f.astype(float)
        worst1 = max(worst1, float(np.abs(D1 @ fv - f1).max()))
        worst2 = max(worst2, float(np.abs(D2 @ fv - f2).max()))
    assert worst1 <= 10 * n**2 * EPS, worst1 / (n**2 * EPS)
    assert worst2 <= 10 * n**4 * EPS, worst2 / (n**4 * EPS)


@pytest.mark.parametrize("domain", [(-1.0, 1.0), (2.0, 5.0), (-0.3, 0.1)])
def test_cheb_basis_diff_exact_on_polynomial_in_physical_domain(domain):
    # Affine map x = a + (b-a)(xi+1)/2 scales the k-th derivative by (2/(b-a))^k
    # (chain rule, common practice); a degree-(n-1) polynomial stays exact.
    n = 12
    b = Chebyshev(n, domain, "x")
    rng = np.random.default_rng(3)
    p = np.polynomial.Polynomial(rng.standard_normal(n), domain=list(domain), window=[-1, 1])
    x = b.points
    mats = b.diff_matrices(3)
    size = np.abs(p.coef).sum()  # bound on max |p| over the domain (|T_k| <= 1)
    for k, D in enumerate(mats, start=1):
        expected = p.deriv(k)(x)
        actual = D @ p(x)
        # O(n^(2k) eps) rounding of the k-th matrix, times the map factor (2/(b-a))^k
        tol = 10 * n ** (2 * k) * EPS * size * (2 / (domain[1] - domain[0])) ** k
        np.testing.assert_allclose(actual, expected, rtol=0, atol=tol)
    # the class equals the functional core times the affine factor
    s = 2 / (domain[1] - domain[0])
    np.testing.assert_allclose(mats[1], s**2 * cheb_diff_matrices(n, 2)[1], rtol=1e-15, atol=0)


@pytest.mark.parametrize("n", [3, 8, 33, 64, 200])
def test_cheb_diff_rows_sum_to_zero(n):
    # D applied to a constant is zero: every row sums to zero [DMS, "negative sum
    # trick"].  Recomputing the row sum in floating point costs at most a few eps
    # times the sum of absolute values of the row (common practice: summation
    # error bound); the bound is relative to the row, not absolute.
    for D in cheb_diff_matrices(n, 2):
        row_abs = np.abs(D).sum(axis=1)
        assert np.all(np.abs(D.sum(axis=1)) <= 4 * EPS * row_abs)


def test_cheb_nodes_ascending_and_symmetric():
    # Gauss-Lobatto nodes -cos(pi j/(n-1)) ascending, antisymmetric about 0 [SMM ch. 6]
    for n in (2, 3, 10, 11):
        x = cheb_nodes(n)
        assert x[0] == -1.0 and x[-1] == 1.0
        assert np.all(np.diff(x) > 0)
        np.testing.assert_array_equal(x, -x[::-1])
        np.testing.assert_allclose(x, -np.cos(np.pi * np.arange(n) / (n - 1)), atol=2 * EPS)


@pytest.mark.parametrize("n", [6, 21, 40])
def test_diff_of_antiderivative_is_identity(n):
    # d/dx of an antiderivative returns the function (fundamental theorem of
    # calculus).  Exact case: chebint of a degree-(n-2) series is degree n-1
    # (numpy.polynomial.chebyshev.chebint is the reference).
    x = cheb_nodes(n)
    D1 = cheb_diff_matrices(n, 1)[0]
    rng = np.random.default_rng(n)
    c = rng.standard_normal(n - 1)
    F = npcheb.chebval(x, npcheb.chebint(c, lbnd=-1))
    f = npcheb.chebval(x, c)
    np.testing.assert_allclose(D1 @ F, f, rtol=0, atol=20 * n**2 * EPS * np.abs(c).sum())


def test_diff_of_antiderivative_smooth_function():
    # Spectral convergence for an entire function on [0, 2] [ATAP ch. 8]:
    # F = sin(3x)/3 + x^3/3 has F' = cos(3x) + x^2; at n = 40 the interpolation
    # error is far below 1e-11, leaving rounding O(n^2 eps |F|).
    b = Chebyshev(40, (0.0, 2.0), "x")
    x = b.points
    F = np.sin(3 * x) / 3 + x**3 / 3
    f = np.cos(3 * x) + x**2
    np.testing.assert_allclose(b.diff(F), f, rtol=0, atol=1e-11)


# ----------------------------------------------------------------------------
# Chebyshev transforms, interpolation, quadrature, tails
# ----------------------------------------------------------------------------
@pytest.mark.parametrize("n", [2, 3, 9, 64, 257])
def test_values_coeffs_values_roundtrip(n):
    # DCT-I is its own inverse up to scaling [scipy.fft docs; SMM ch. 8]
    rng = np.random.default_rng(n)
    v = rng.standard_normal((3, n))
    back = coeffs_to_values(values_to_coeffs(v))
    np.testing.assert_allclose(back, v, rtol=0, atol=10 * np.log2(n + 1) * EPS * np.abs(v).max())


@pytest.mark.parametrize("n", [2, 5, 16, 33])
def test_coeffs_of_Tk_are_unit_vectors(n):
    # T_k(cos theta) = cos(k theta): its coefficient vector is e_k (definition).
    for k in range(n):
        t = np.cos(k * np.pi * (n - 1 - np.arange(n)) / (n - 1))  # T_k at x_j, exact angles
        expected = np.zeros(n)
        expected[k] = 1.0
        np.testing.assert_allclose(values_to_coeffs(t), expected, rtol=0, atol=10 * EPS * np.log2(n + 1))


def test_values_to_coeffs_matches_numpy_and_axis():
    # Interpolation through n points by degree n-1 equals the least-squares fit
    # of numpy.polynomial.chebyshev.chebfit (unique interpolant); the axis
    # argument acts along the requested axis.
    n = 17
    x = cheb_nodes(n)
    f = np.exp(x) * np.sin(2 * x)
    expected = npcheb.chebfit(x, f, n - 1)
    np.testing.assert_allclose(values_to_coeffs(f), expected, rtol=0, atol=1e-13)
    stacked = np.stack([f, 2 * f], axis=1)  # (n, 2)
    c = values_to_coeffs(stacked, axis=0)
    np.testing.assert_allclose(c[:, 1], 2 * expected, rtol=0, atol=1e-13)
    np.testing.assert_allclose(coeffs_to_values(c, axis=0), stacked, rtol=0, atol=1e-14)


@pytest.mark.parametrize("n", [3, 20, 100])
def test_barycentric_exact_on_polynomials_and_matches_chebval(n):
    # The second barycentric formula reproduces the degree-(n-1) interpolant,
    # forward stably on Chebyshev points [BARY]; reference numpy chebval.
    rng = np.random.default_rng(n)
    c = rng.standard_normal(n)
    x = cheb_nodes(n)
    y = np.concatenate([rng.uniform(-1, 1, 60), [-1.0, 1.0, x[n // 2], np.nextafter(x[1], 0)]])
    P = bary_matrix(x, bary_weights(n), y)
    actual = P @ npcheb.chebval(x, c)
    expected = npcheb.chebval(y, c)
    np.testing.assert_allclose(actual, expected, rtol=0, atol=50 * n * EPS * np.abs(c).sum())
    # rows at nodes are unit vectors (exact)
    assert np.array_equal(P[-2], (np.arange(n) == n // 2).astype(float))


def test_basis_interp_physical_domain_and_out_of_domain():
    # interpolation in physical coordinates through the affine map [BARY]
    b = Chebyshev(15, (1.0, 4.0), "z")
    p = np.polynomial.Polynomial([1.0, -2.0, 0.5, 0.25, -0.125])
    y = np.linspace(1.0, 4.0, 37)
    np.testing.assert_allclose(b.interp(p(b.points), y), p(y), rtol=0, atol=1e-12)
    with pytest.raises(ValueError, match="`z` domain"):
        b.interp(p(b.points), [4.5])


@pytest.mark.parametrize("n", [2, 3, 8, 9, 40, 41])
def test_clenshaw_curtis_exact_on_polynomials(n):
    # CC with n points integrates polynomials of degree <= n-1 exactly
    # ("Is Gauss quadrature better than Clenshaw-Curtis?", SIAM Review 50 (2008)
    # 67-87, :doi:`10.1137/060659831`); int_{-1}^1 x^k = 2/(k+1) for even k.
    x = cheb_nodes(n)
    w = clenshaw_curtis_weights(n)
    for k in range(n):
        expected = 2.0 / (k + 1) if k % 2 == 0 else 0.0
        assert abs(w @ x**k - expected) <= 10 * n * EPS


def test_clenshaw_curtis_gram_matrix():
    # int T_j T_k = (I(j+k) + I(|j-k|))/2 with I(m) = 2/(1-m^2) for even m, 0 for
    # odd m [ATAP ch. 19]; exact when j + k <= n - 1.
    n = 21
    x = cheb_nodes(n)
    w = clenshaw_curtis_weights(n)
    V = npcheb.chebvander(x, n - 1)

    def I(m):
        return 2.0 / (1 - m * m) if m % 2 == 0 else 0.0

    G = V.T @ (w[:, None] * V)
    for j in range(n):
        for k in range(n - j):
            assert abs(G[j, k] - 0.5 * (I(j + k) + I(abs(j - k)))) <= 100 * EPS


@pytest.mark.parametrize(
    "fun, domain",
    [(lambda x: np.exp(np.sin(3 * x)), (0.0, 2.0)),
     (lambda x: 1.0 / (1.0 + x**2), (-3.0, 1.0)),
     (lambda x: np.cos(20 * x) * np.exp(-x), (0.0, 1.0))],
)
def test_quadrature_matches_scipy_quad(fun, domain):
    # Spectral convergence of CC for analytic integrands [ATAP ch. 19]; reference
    # scipy.integrate.quad with its own error estimate.
    b = Chebyshev(64, domain, "x")
    expected, quad_err = scipy.integrate.quad(fun, *domain, epsabs=1e-13, epsrel=1e-13, limit=200)
    actual = b.integrate(fun(b.points))
    assert abs(actual - expected) <= 1e-13 * max(1.0, abs(expected)) + quad_err


def test_tail_measure_analytic_decays_geometrically():
    # Chebyshev coefficients of a function analytic in the Bernstein ellipse of
    # parameter rho decay like rho^-k [ATAP Theorem 8.1].  exp: entire -> rounding
    # level; 1/(1+25x^2): rho = (1+sqrt(26))/5 ~ 1.22, so doubling n from 32 to 64
    # shrinks the tail by about rho^-32 ~ 2e-3.
    tails = {}
    for n in (32, 64, 128):
        x = Chebyshev(n).points
        assert Chebyshev(n).tail(np.exp(x)) < 1e-14
        tails[n] = float(Chebyshev(n).tail(1 / (1 + 25 * x**2)))
    rho = (1 + np.sqrt(26)) / 5
    for n in (32, 64):
        ratio = tails[2 * n] / tails[n]
        assert ratio < 10 * rho ** (-n), (n, ratio, rho ** (-n))
    assert tails[128] < 1e-10


@pytest.mark.parametrize("n", [16, 32, 64, 128])
def test_tail_measure_stays_large_for_kink_and_jump(n):
    # Non-smooth functions: coefficients decay only algebraically [ATAP Theorem
    # 7.1]: O(k^-2) for a kink |x - 0.3|, O(k^-1) for a jump sign(x - 0.3).  The
    # tail stays far above rounding (and above any Newton tolerance) at every n,
    # which is what lets the engine refuse an unresolved field.
    x = Chebyshev(n).points
    kink = float(Chebyshev(n).tail(np.abs(x - 0.3)))
    jump = float(Chebyshev(n).tail(np.sign(x - 0.3)))
    assert kink > 1e-5
    assert jump > 1e-3
    assert jump > 0.5 / n  # O(1/n) lower envelope, with a margin


def test_tail_measure_definition_and_scale_floor():
    # the documented definition: max trailing |c_k| over max(max |c_k|, scale)
    c = np.array([[4.0, 1.0, 0.5, 0.25, 0.01, 0.02, 0.03, 0.04]])
    m = max(2, c.shape[-1] // 8)
    np.testing.assert_allclose(tail_measure(c), [c[0, -m:].max() / 4.0])
    np.testing.assert_allclose(tail_measure(c, scale=8.0), [c[0, -m:].max() / 8.0])
    assert tail_measure(np.zeros((1, 8)))[0] == 0.0


# ----------------------------------------------------------------------------
# Fourier
# ----------------------------------------------------------------------------
def _dct_dst_derivative(values, parity, order):
    """Independent FFT route for the even/odd variants via scipy.fft DCT-I / DST-I.

    even: v_j = sum_m a_m cos(m pi j/(n-1)), j=0..n-1 -> a by DCT-I.
    odd:  v_j = sum_m b_m sin(m pi j/(n+1)), j=1..n   -> b by DST-I.
    The derivative series is summed back with the matching DCT-I/DST-I
    (scipy.fft documentation of dct/dst type 1; common practice).
    """
    n = values.size
    if parity == "even":
        a = scipy.fft.dct(values, type=1) / (n - 1)
        a[0] /= 2
        a[-1] /= 2
        m = np.arange(n)
        if order % 2 == 1:  # -m a_m sin(m theta) (sign alternates with order)
            coef = (-1) ** ((order + 1) // 2) * m**order * a
            # sin(m pi j/(n-1)) at j = 1..n-2 is a DST-I of length n-2 in m = 1..n-2
            # plus the Nyquist-like m = n-1 term, which vanishes at all nodes.
            out = np.zeros(n)
            out[1:-1] = scipy.fft.dst(coef[1:-1], type=1) / 2
            return out
        coef = (-1) ** (order // 2) * m**order * a
        c2 = coef.copy()
        c2[0] *= 2
        c2[-1] *= 2
        return scipy.fft.dct(c2, type=1) / 2
    b = scipy.fft.dst(values, type=1) / (n + 1)
    m = np.arange(1, n + 1)
    if order % 2 == 0:
        return scipy.fft.dst((-1) ** (order // 2) * m**order * b, type=1) / 2
    coef = (-1) ** (order // 2) * m**order * b
    ext = np.zeros(n + 2)  # cos series on j = 0..n+1 with zero end coefficients
    ext[1:-1] = coef
    return (scipy.fft.dct(ext, type=1) / 2)[1:-1]


@pytest.mark.parametrize("parity", ["full", "even", "odd"])
@pytest.mark.parametrize("n", [8, 9, 16])
def test_fourier_derivative_of_basis_functions(parity, n):
    # d/dx sin(kx) = k cos(kx), d/dx cos(kx) = -k sin(kx) for every resolved
    # wavenumber [SMM ch. 3]; period P = 3 and an origin shift test the scaling.
    P, origin = 3.0, 0.4
    b = Fourier(n, P, "x", parity, origin=origin)
    D1, D2 = b.diff_matrices(2)
    kmax = {"full": (n - 1) // 2, "even": n - 1, "odd": n}[parity]
    kmin = 1 if parity == "odd" else 0
    for k in range(kmin, kmax + 1):
        f, f1, f2 = fourier_test_function(parity, k, P, origin)
        x = b.points
        w = 2 * np.pi * k / P
        np.testing.assert_allclose(D1 @ f(x), f1(x), rtol=0, atol=50 * EPS * n * max(w, 1))
        np.testing.assert_allclose(D2 @ f(x), f2(x), rtol=0, atol=50 * EPS * n * max(w, 1) ** 2)


def test_fourier_nyquist_convention():
    # even n, full variant: cos(n x/2) is the symmetric Nyquist mode, its first
    # derivative is set to zero and its second is -(n/2)^2 cos(n x/2) [SMM ch. 3].
    n = 8
    th = fourier_nodes(n)
    D1, D2 = fourier_diff_matrices(n, 2)
    f = np.cos(n // 2 * th)
    np.testing.assert_allclose(D1 @ f, 0.0, atol=1e-14)
    np.testing.assert_allclose(D2 @ f, -(n // 2) ** 2 * f, atol=1e-13)


@pytest.mark.parametrize("parity", ["full", "even", "odd"])
@pytest.mark.parametrize("n", [7, 12, 32])
def test_fourier_matrices_equal_fft_route(parity, n):
    # The matrix D^(k) equals the transform route; for "full" the reference is
    # numpy.fft (ifft(i m fft)), for "even"/"odd" scipy.fft DCT-I/DST-I.
    rng = np.random.default_rng(n)
    v = rng.standard_normal(n)
    mats = fourier_diff_matrices(n, 2, parity)
    for order in (1, 2):
        actual = mats[order - 1] @ v
        if parity == "full":
            m = np.fft.fftfreq(n, 1.0 / n)
            mult = (1j * m) ** order
            if n % 2 == 0 and order % 2 == 1:
                mult[n // 2] = 0
            expected = np.fft.ifft(mult * np.fft.fft(v)).real
        else:
            expected = _dct_dst_derivative(v, parity, order)
        tol = 100 * EPS * n ** (order + 1) * np.abs(v).max()
        np.testing.assert_allclose(actual, expected, rtol=0, atol=tol)
        np.testing.assert_allclose(fourier_derivative(v, order, parity), expected, rtol=0, atol=tol)


@pytest.mark.parametrize("parity", ["full", "even", "odd"])
def test_fourier_quadrature(parity):
    # full: the trapezoidal rule integrates e^{imx} exactly for |m| < n and
    # converges geometrically for analytic periodic integrands ("The exponentially
    # convergent trapezoidal rule", SIAM Review 56 (2014) 385-458,
    # :doi:`10.1137/130932132`); even/odd: exact on the cosine/sine series,
    # compared with scipy.integrate.quad over the sampled half period.
    P = 2.5
    b = Fourier(48, P, "x", parity)
    w = 2 * np.pi / P
    if parity == "full":
        fun = lambda x: np.exp(np.sin(w * x)) * (1 + np.cos(3 * w * x))  # noqa: E731
        a, c = 0.0, P
    elif parity == "even":
        fun = lambda x: np.exp(np.cos(w * x))  # noqa: E731
        a, c = 0.0, P / 2
    else:
        fun = lambda x: np.sin(w * x) / (1.3 - np.cos(w * x))  # noqa: E731
        a, c = 0.0, P / 2
    expected, err = scipy.integrate.quad(fun, a, c, epsabs=1e-13, epsrel=1e-13, limit=200)
    actual = b.integrate(fun(b.points))
    # odd case: sine coefficients of f decay like rho^-k, rho = exp(arccosh 1.3) ~ 2.1,
    # so n = 48 leaves an aliasing error ~ rho^-48 ~ 1e-16
    assert abs(actual - expected) <= 1e-12 + err, (actual, expected)
    # exactness on a single mode, independent of the aliasing-free range
    for k in range(1, 6):
        f, _, _ = fourier_test_function(parity, k, P)
        exact = {"full": 0.0, "even": 0.0, "odd": (2.0 / (k * w)) * (k % 2)}[parity]
        assert abs(b.integrate(f(b.points)) - exact) <= 1e-13


def test_fourier_odd_quadrature_converges():
    # the odd-parity rule is exact on the sine series, so its error decreases with
    # the truncation error of the series (geometric for analytic f) [SMM ch. 3]
    P = 2.5
    w = 2 * np.pi / P
    fun = lambda x: np.sin(w * x) / (1.3 - np.cos(w * x))  # noqa: E731
    expected, _ = scipy.integrate.quad(fun, 0.0, P / 2, epsabs=1e-14, epsrel=1e-14)
    errs = [abs(Fourier(n, P, "x", "odd").integrate(fun(Fourier(n, P, "x", "odd").points)) - expected)
            for n in (8, 16, 32, 64)]
    assert errs[-1] < 1e-13
    assert errs[1] < errs[0] and errs[2] < errs[1]


@pytest.mark.parametrize("parity", ["full", "even", "odd"])
@pytest.mark.parametrize("n", [9, 16])
def test_fourier_interpolation_reproduces_trig_polynomials(parity, n):
    # Trigonometric interpolation is exact on the basis span, and evaluation at
    # any point (including outside the sampled interval) uses periodicity and
    # the even/odd reflection [SMM ch. 3].
    P, origin = 3.0, 0.5
    b = Fourier(n, P, "x", parity, origin=origin)
    ks = {"full": (1, (n - 1) // 2), "even": (0, 3), "odd": (1, 2)}[parity]
    fs = [fourier_test_function(parity, k, P, origin)[0] for k in ks]
    fun = lambda x: fs[0](x) - 0.7 * fs[1](x)  # noqa: E731
    y = np.random.default_rng(n).uniform(-5, 8, 50)
    np.testing.assert_allclose(b.interp(fun(b.points), y), fun(y), rtol=0, atol=1e-13)
    if parity == "full" and n % 2 == 0:
        # symmetric Nyquist mode is interpolated by cos(n theta/2) itself
        g = lambda x: np.cos(n / 2 * 2 * np.pi * (x - origin) / P)  # noqa: E731
        np.testing.assert_allclose(b.interp(g(b.points), y), g(y), rtol=0, atol=1e-13)


def test_fourier_coeffs_full_matches_numpy_fft():
    # coefficients of the full variant are fft/n (numpy.fft reference)
    v = np.random.default_rng(0).standard_normal(10)
    np.testing.assert_allclose(fourier_coeffs(v), np.fft.fft(v) / 10, rtol=0, atol=1e-15)


# ----------------------------------------------------------------------------
# coordinate maps
# ----------------------------------------------------------------------------
@pytest.mark.parametrize(
    "cmap, domain",
    [(AffineMap(), (-2.0, 3.0)),
     (HalfLineMap(1.0), (0.0, np.inf)),
     (HalfLineMap(2.5), (1.0, np.inf)),
     (HalfLineMap(0.5), (-np.inf, 2.0)),
     (ClusterMap(0.0, 0.02), (0.0, 1.0)),
     (ClusterMap(1.0, 0.05), (0.0, 1.0)),
     (ClusterMap(0.3, 0.01), (0.0, 1.0))],
)
def test_map_roundtrip_and_ends(cmap, domain):
    # x(xi(x)) = x and xi(x(xi)) = xi; the ends map to the ends (definition of
    # each map [CFSM ch. 16-17]); dx/dxi * dxi/dx = 1 where finite.
    a, b = domain
    xi = np.linspace(-1, 1, 41)[1:-1]
    x = cmap.forward(xi, a, b)
    np.testing.assert_allclose(cmap.inverse(x, a, b), xi, rtol=0, atol=1e-13)
    ends = cmap.forward(np.array([-1.0, 1.0]), a, b)
    assert ends[0] == a and ends[1] == b
    dx, xi_x, _ = cmap.derivs(xi, a, b)
    np.testing.assert_allclose(dx * xi_x, 1.0, rtol=1e-13)
    assert np.all(np.diff(x) > 0)


def test_map_second_derivative_by_finite_differences():
    # d2xi/dx2 agrees with a central difference of dxi/dx in x (common practice)
    for cmap, (a, b) in [(HalfLineMap(1.5), (0.0, np.inf)), (HalfLineMap(1.0), (-np.inf, 0.0)),
                         (ClusterMap(0.3, 0.05), (0.0, 2.0))]:
        xi = np.linspace(-0.8, 0.8, 9)
        x = cmap.forward(xi, a, b)
        h = 1e-5 * (1 + np.abs(x))
        xp, xm = cmap.inverse(x + h, a, b), cmap.inverse(x - h, a, b)
        _, xi_x, xi_xx = cmap.derivs(xi, a, b)
        _, xi_x_p, _ = cmap.derivs(xp, a, b)
        _, xi_x_m, _ = cmap.derivs(xm, a, b)
        np.testing.assert_allclose((xi_x_p - xi_x_m) / (2 * h), xi_xx, rtol=1e-6,
                                   atol=1e-8 * np.abs(xi_xx).max())


@pytest.mark.parametrize("n", [8, 24, 64])
def test_halfline_map_exact_for_algebraic_decay(n):
    # With x = L(1+xi)/(1-xi) and L = 1, f = 1/(1+x)^2 = (1-xi)^2/4 is a
    # polynomial of degree 2 in xi, so the mapped matrices are exact up to
    # rounding [CFSM ch. 17]: f' = -2/(1+x)^3, f'' = 6/(1+x)^4; at x = inf all
    # x-derivatives vanish.  Rounding: the chain-rule factors are at most 2/L and
    # 2/L^2 for this map, so O(n^2 eps) / O(n^4 eps) as for the bare matrices.
    b = Chebyshev(n, (0.0, np.inf), "r", HalfLineMap(1.0))
    x = b.points
    assert np.isinf(x[-1]) and x[0] == 0.0
    with np.errstate(divide="ignore"):
        f, f1, f2 = 1 / (1 + x) ** 2, -2 / (1 + x) ** 3, 6 / (1 + x) ** 4
    D1, D2 = b.diff_matrices(2)
    assert np.abs(D1 @ f - f1).max() <= 10 * n**2 * EPS
    assert np.abs(D2 @ f - f2).max() <= 10 * n**4 * EPS
    # interpolation at finite off-grid points and at infinity
    y = np.array([0.05, 0.7, 3.0, 41.0, np.inf])
    with np.errstate(divide="ignore"):
        np.testing.assert_allclose(b.interp(f, y), 1 / (1 + y) ** 2, rtol=0, atol=1e-14)


def test_halfline_map_left_infinite_exact():
    # mirror case on (-inf, b] with L = 1: f = 1/(1 + b - x)^2 = (1+xi)^2/4 [CFSM ch. 17]
    bnd = 2.0
    b = Chebyshev(20, (-np.inf, bnd), "r", HalfLineMap(1.0))
    x = b.points
    with np.errstate(divide="ignore"):
        f, f1 = 1 / (1 + bnd - x) ** 2, 2 / (1 + bnd - x) ** 3
    np.testing.assert_allclose(b.diff(f), f1, rtol=0, atol=1e-12)


def test_halfline_map_spectral_for_exponential_decay():
    # exp(-x) on (0, inf) with L = 2 is smooth in xi up to xi = 1 (all derivatives
    # vanish there), so errors decrease faster than any power [CFSM ch. 17].
    errs = []
    for n in (16, 32, 64):
        b = Chebyshev(n, (0.0, np.inf), "r", HalfLineMap(2.0))
        x = b.points
        f = np.where(np.isinf(x), 0.0, np.exp(-np.where(np.isinf(x), 0.0, x)))
        errs.append(np.abs(b.diff(f, 2) - f).max())
    assert errs[2] < 1e-7 and errs[1] < 1e-2 * errs[0]


@pytest.mark.xfail(strict=True, reason="HalfLineMap weights are zero at x = inf, which drops the "
                   "finite end contribution f*dx/dxi of integrands decaying like 1/x^2 (O(n^-2) error)")
def test_halfline_quadrature_of_inverse_square():
    # int_0^inf dx/(1+x)^2 = 1; in xi the integrand is exactly 1/2 (L = 1), so
    # Clenshaw-Curtis should be exact [CFSM ch. 17; ATAP ch. 19].
    b = Chebyshev(16, (0.0, np.inf), "r", HalfLineMap(1.0))
    with np.errstate(divide="ignore"):
        f = 1 / (1 + b.points) ** 2
    assert abs(b.integrate(f) - 1.0) < 1e-12


@pytest.mark.parametrize("center, width", [(0.0, 0.02), (1.0, 0.05), (0.3, 0.01)])
def test_cluster_map_differentiates_layer(center, width):
    # tanh((x - c)/w) resolved by a tangent map clustered at c (end or interior);
    # exact derivatives (1 - t^2)/w and -2 t (1 - t^2)/w^2.  Reference accuracy of
    # such maps: "Mappings and accuracy for Chebyshev pseudo-spectral
    # approximations", J. Comput. Phys. 101 (1992) 349-359 (from memory).
    n = 96
    b = Chebyshev(n, (0.0, 1.0), "z", ClusterMap(center, width))
    x = b.points
    t = np.tanh((x - center) / width)
    f1, f2 = (1 - t**2) / width, -2 * t * (1 - t**2) / width**2
    D1, D2 = b.diff_matrices(2)
    assert np.abs(D1 @ t - f1).max() <= 1e-9 * np.abs(f1).max()
    assert np.abs(D2 @ t - f2).max() <= 1e-7 * np.abs(f2).max()
    # the map is what makes this work: at n = 48 the affine grid is at least 100
    # times less accurate for these layers
    errs = []
    for cmap in (ClusterMap(center, width), AffineMap()):
        g = Chebyshev(48, (0.0, 1.0), "z", cmap)
        tg = np.tanh((g.points - center) / width)
        errs.append(np.abs(g.diff(tg) - (1 - tg**2) / width).max())
    assert errs[0] < 1e-2 * errs[1], errs


def test_cluster_map_quadrature():
    # the mapped rule integrates the layer profile: int_0^1 sech^2((x-c)/w) dx
    # = w (tanh((1-c)/w) + tanh(c/w)) (antiderivative, exact)
    c, w = 0.3, 0.01
    b = Chebyshev(96, (0.0, 1.0), "z", ClusterMap(c, w))
    expected = w * (np.tanh((1 - c) / w) + np.tanh(c / w))
    assert abs(b.integrate(1 / np.cosh((b.points - c) / w) ** 2) - expected) < 1e-12


# ----------------------------------------------------------------------------
# finite-difference preconditioning matrices
# ----------------------------------------------------------------------------
@pytest.mark.parametrize(
    "make, kind",
    [(lambda n: Chebyshev(n, (0.0, 2.0), "z"), "cheb"),
     (lambda n: Chebyshev(n, (0.0, 1.0), "z", ClusterMap(0.0, 0.2)), "cheb"),
     (lambda n: Fourier(n, 2 * np.pi, "x"), "full"),
     (lambda n: Fourier(n, 2 * np.pi, "x", "even"), "even"),
     (lambda n: Fourier(n, 2 * np.pi, "x", "odd"), "odd")],
)
def test_fd_matrices_second_order(make, kind):
    # three-point differences are second order: halving the spacing divides the
    # error by ~4 [FDM ch. 1] (at Chebyshev ends the one-sided second difference
    # is first order in a spacing that is O(n^-2), so the ratio is ~4 too).
    errs = []
    for n in (32, 64, 128):
        b = make(n)
        x = b.points
        if kind == "odd":
            f, f1, f2 = np.sin(x), np.cos(x), -np.sin(x)
        elif kind in ("even", "full"):
            f, f1, f2 = np.cos(x), -np.sin(x), -np.cos(x)
        else:
            f, f1, f2 = np.sin(2 * x), 2 * np.cos(2 * x), -4 * np.sin(2 * x)
        F1, F2 = b.fd_matrices(2)
        errs.append((np.abs(F1 @ f - f1).max(), np.abs(F2 @ f - f2).max()))
    errs = np.array(errs)
    ratios = errs[:-1] / errs[1:]
    assert np.all((ratios > 3.4) & (ratios < 4.6)), ratios


# ----------------------------------------------------------------------------
# tensor grids
# ----------------------------------------------------------------------------
@pytest.fixture(scope="module")
def grid2d():
    return TensorGrid(Chebyshev(11, (0.0, 2.0), "z", ClusterMap(0.0, 0.5)),
                      Fourier(12, 2 * np.pi, "x", "even"))


def test_tensor_operators_agree(grid2d):
    # Kronecker-product operators on tensor grids [SMM ch. 7]: dense = sparse = apply
    g = grid2d
    rng = np.random.default_rng(5)
    v = rng.standard_normal((3, g.size))
    for alpha in g.multi_indices(3):
        if not any(alpha):
            continue
        dense = g.dense_operator(alpha)
        sparse = g.sparse_operator(alpha)
        scale = np.abs(dense).sum(axis=1).max() * np.abs(v).max()
        np.testing.assert_allclose(sparse.toarray(), dense, rtol=0, atol=1e-14 * np.abs(dense).max())
        np.testing.assert_allclose(g.apply(alpha, v), v @ dense.T, rtol=0, atol=50 * EPS * scale)
        np.testing.assert_allclose(sparse @ v[0], dense @ v[0], rtol=0, atol=50 * EPS * scale)


def test_tensor_derivatives_of_separable_function():
    # d^(a,b) [g(z) h(x)] = g^(a)(z) h^(b)(x) (product rule; common practice)
    g = TensorGrid(Chebyshev(24, (0.0, 1.0), "z"), Fourier(16, 2 * np.pi, "x"))
    z, x = g.coords["z"], g.coords["x"]
    gz = [np.exp(z), np.exp(z), np.exp(z)]
    hx = [np.sin(2 * x), 2 * np.cos(2 * x), -4 * np.sin(2 * x)]
    f = gz[0] * hx[0]
    nz, nx = g.shape
    for alpha in g.multi_indices(2):
        expected = gz[alpha[0]] * hx[alpha[1]]
        # rounding O(n^(2k) eps) per Chebyshev order k (affine factor 2/(b-a) = 2),
        # O(n^k eps) per Fourier order (spectral error is far below these)
        tol = 10 * EPS * (2 * nz**2) ** alpha[0] * nx ** alpha[1] * np.abs(f).max() * 2 ** alpha[1]
        np.testing.assert_allclose(g.apply(alpha, f), expected, rtol=0, atol=max(tol, 1e-13))


@pytest.mark.parametrize("parity", ["even", "odd"])
def test_fourier_parity_third_derivative(parity):
    # regression: orders >= 3 raised IndexError for the parity variants
    # d^3/dx^3 cos(kx) = k^3 sin(kx), d^3/dx^3 sin(kx) = -k^3 cos(kx) [SMM ch. 3];
    # the full variant and Chebyshev bases accept any order, so the parity
    # variants (and grids built on them, e.g. multi_indices(3)) should too.
    n = 12
    th = fourier_nodes(n, parity)
    D3 = fourier_diff_matrices(n, 3, parity)[2]
    f, d3 = (np.cos(2 * th), 8 * np.sin(2 * th)) if parity == "even" else (np.sin(2 * th), -8 * np.cos(2 * th))
    np.testing.assert_allclose(D3 @ f, d3, atol=1e-11)


def test_faces_and_boundary_keys(grid2d):
    # boundary keys resolve to the canonical (axis, end) and faces hold the
    # indices of the points on that end (definition in spectral_bulk.grids._grid)
    g = grid2d
    z = g.coords["z"]
    np.testing.assert_array_equal(g.faces[(0, "left")], np.flatnonzero(z == 0.0))
    np.testing.assert_array_equal(g.faces[(0, "right")], np.flatnonzero(z == 2.0))
    assert len(g.faces[(0, "left")]) == g.shape[1]
    assert set(g.faces) == {(0, "left"), (0, "right")}  # x is periodic: no faces
    for key, face in [("left", (0, "left")), ("right", (0, "right")), ("z=0", (0, "left")),
                      ("z=2", (0, "right")), ("z=2.0", (0, "right")), ("z = 0", (0, "left")),
                      ("z=a", (0, "left")), ("z=b", (0, "right"))]:
        assert g.resolve_face(key) == face
    assert g.face_label((0, "right")) == "z=2"


@pytest.mark.parametrize("key", ["x=0", "y=0", "z=1", "z=foo", "top", "zz"])
def test_bad_boundary_keys_raise_naming_the_key(grid2d, key):
    # bad input is a ValueError naming the argument (project convention, STYLE 7)
    with pytest.raises(ValueError, match=re.escape(repr(key))):
        grid2d.resolve_face(key)


def test_left_is_ambiguous_with_two_bounded_axes():
    g = Grid(Chebyshev(5, (0.0, 1.0), "z"), Chebyshev(6, (0.0, 1.0), "y"))
    with pytest.raises(ValueError, match="'left'"):
        g.resolve_face("left")
    assert g.resolve_face("y=1") == (1, "right")


def test_halfline_face_at_infinity():
    g = Grid(Chebyshev(9, (0.0, np.inf), "r"))
    assert g.resolve_face("r=inf") == (0, "right")
    with pytest.raises(ValueError, match="r=-inf"):
        g.resolve_face("r=-inf")


def test_evaluate_off_grid_separable():
    # 2-D interpolation = product of 1-D interpolants (tensor structure; [BARY]
    # along z, trigonometric along x); separable smooth f resolved to ~1e-13.
    g = TensorGrid(Chebyshev(20, (0.0, 2.0), "z"), Fourier(14, 2 * np.pi, "x"))
    z, x = g.coords["z"], g.coords["x"]
    f = np.exp(z / 2) * np.sin(x) + z**3 * np.cos(2 * x)
    exact = lambda zz, xx: np.exp(zz / 2) * np.sin(xx) + zz**3 * np.cos(2 * xx)  # noqa: E731
    rng = np.random.default_rng(11)
    zz = np.concatenate([rng.uniform(0, 2, 30), [0.0, 2.0]])
    xx = np.concatenate([rng.uniform(-7, 13, 30), [1.0, 2 * np.pi]])
    np.testing.assert_allclose(g.evaluate(f, zz, xx), exact(zz, xx), rtol=0, atol=1e-12)
    # broadcasting and a leading field axis
    out = g.evaluate(np.stack([f, -f]), zz[:5, None], xx[None, :4])
    assert out.shape == (2, 5, 4)
    np.testing.assert_allclose(out[1], -exact(zz[:5, None], xx[None, :4]), rtol=0, atol=1e-12)


def test_tensor_quadrature():
    # product rule of CC x trapezoid; int_0^2 int_0^{2pi} e^{z/2} cos^2 x = 2(e - 1) pi
    g = TensorGrid(Chebyshev(20, (0.0, 2.0), "z"), Fourier(12, 2 * np.pi, "x"))
    f = np.exp(g.coords["z"] / 2) * np.cos(g.coords["x"]) ** 2
    assert abs(g.integrate(f) - 2 * (np.e - 1) * np.pi) < 1e-12


# ----------------------------------------------------------------------------
# property tests
# ----------------------------------------------------------------------------
coeff_vectors = st.integers(min_value=2, max_value=64).flatmap(
    lambda n: st.lists(st.floats(-1e3, 1e3, allow_nan=False, allow_infinity=False),
                       min_size=n, max_size=n))


@HYP
@given(coeff_vectors)
def test_property_transform_roundtrip(c):
    # coeffs -> values -> coeffs is the identity (DCT-I inverse pair; scipy.fft)
    c = np.array(c)
    n = c.size
    back = values_to_coeffs(coeffs_to_values(c))
    np.testing.assert_allclose(back, c, rtol=0, atol=20 * EPS * np.log2(n + 1) * max(np.abs(c).sum(), 1e-300))


@HYP
@given(coeff_vectors.filter(lambda c: len(c) >= 3))
def test_property_diff_matches_chebder(c):
    # D acting on the values of sum c_k T_k equals the values of chebder(c)
    # (numpy.polynomial.chebyshev reference).  The D side carries rounding of order
    # n^2 eps sum|c_k| (||D||_inf ~ n^2); the reference evaluates the derivative series
    # (coefficients up to 2k|c_k|) by Clenshaw's recurrence, whose rounding grows like
    # n eps sum|c'_k| (common practice: "Accuracy and Stability of Numerical Algorithms",
    # 2nd ed., SIAM 2002, section 5.2; c = T_30 needs that term).
    c = np.array(c)
    n = c.size
    x = cheb_nodes(n)
    D1, D2 = cheb_diff_matrices(n, 2)
    f = npcheb.chebval(x, c)
    s = max(np.abs(c).sum(), 1e-300)
    for D, order, power in ((D1, 1, 2), (D2, 2, 4)):
        d = npcheb.chebder(c, order)
        atol = 20 * EPS * (n**power * s + n * np.abs(d).sum())
        np.testing.assert_allclose(D @ f, npcheb.chebval(x, d), rtol=0, atol=atol)


@HYP
@given(coeff_vectors, st.lists(st.floats(-1, 1, allow_subnormal=False), min_size=1, max_size=20))
def test_property_barycentric_matches_chebval(c, y):
    # barycentric interpolation of the nodal values reproduces the series [BARY]
    c = np.array(c)
    n = c.size
    x = cheb_nodes(n)
    y = np.array(y)
    P = bary_matrix(x, bary_weights(n), y)
    s = max(np.abs(c).sum(), 1e-300)
    np.testing.assert_allclose(P @ npcheb.chebval(x, c), npcheb.chebval(y, c), rtol=0, atol=100 * n * EPS * s)


def test_barycentric_point_subnormally_close_to_a_node():
    # regression found by the property test above (case c = [0, 0, 0], y = [5e-324]):
    # the interpolant of a constant is that constant everywhere [BARY].
    n = 3
    x = cheb_nodes(n)
    with np.errstate(all="ignore"):
        P = bary_matrix(x, bary_weights(n), [5e-324, -1e-310])
    np.testing.assert_allclose(P @ np.ones(n), 1.0, rtol=1e-15)


@HYP
@given(st.integers(min_value=2, max_value=24), st.integers(min_value=0, max_value=2**31 - 1))
def test_property_fourier_full_derivative_in_coefficient_space(n, key):
    # differentiation multiplies the m-th Fourier coefficient by i m [SMM ch. 3]
    rng = np.random.default_rng(key)
    v = rng.standard_normal(n)
    c = np.fft.fft(v) / n
    m = np.fft.fftfreq(n, 1.0 / n)
    if n % 2 == 0:
        m[n // 2] = 0  # Nyquist convention for first derivatives
    expected = np.fft.ifft(1j * m * c * n).real
    D1 = fourier_diff_matrices(n, 1)[0]
    np.testing.assert_allclose(D1 @ v, expected, rtol=0, atol=100 * n**2 * EPS * np.abs(v).max())
