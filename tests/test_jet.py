"""Jets (truncated Taylor polynomials in several coordinates) and the evaluator on them.

References:
* Taylor coefficients of exp, log, powers, sin, cos, tanh in closed form: common practice
  (e.g. "Handbook of Mathematical Functions", Dover 1965, chapters 4 and 15).
* AdS4 is maximally symmetric, ``R_mn = -3 g_mn`` for unit radius: common practice (e.g.
  "Spacetime and Geometry", Addison-Wesley 2004, chapter 3); a change of coordinates that
  mixes the radial and a boundary direction must keep it.
* ``z^Delta`` solves ``(box - m^2) phi = 0`` in Poincare AdS4 with ``m^2 = Delta (Delta - 3)``:
  common practice (e.g. "Gauge/Gravity Duality", Cambridge 2015, chapter 5).
* The linear-axion black brane ``ds^2 = -f dt^2 + dr^2/f + r^2 (dx^2 + dy^2)``,
  ``f = r^2 - alpha^2/2 - m0/r``, axions ``alpha x``, ``alpha y``: "A simple holographic model
  of momentum relaxation", arXiv:1311.5157, an exact solution of the equations our evaluator
  implements (V = -6, massless scalars with canonical kinetic terms).
* Planar AdS-Schwarzschild, ``f = 1 - z^3``: common practice.
* The Q-lattice brane: the shooting solver of ``tests/reference/brane_reference.py`` (scipy
  only, independent of the package), and the one-coordinate branes that test_branes.py checks
  against it.
"""

import math

import numpy as np
import pytest

from spectral_bulk.gravity import (Geometry, Jet, MatterContent, PrecisionError, ScalarField, Series,
                                   coordinate_jets, einstein_deturck, jet_from_derivatives)
from spectral_bulk.exceptions import ConvergenceWarning
from spectral_bulk.models import BulkModel

X0 = np.array([0.3, 0.55, 0.8])
Y0 = np.array([0.2, -0.4, 1.1])


def _jets(order=3):
    return coordinate_jets([X0, Y0], (1, 2), order)


def _check(jet, coef):
    """``coef(a, b)`` the closed-form coefficient of ``dx^a dy^b``."""
    for a in range(jet.order):
        for b in range(jet.order - a):
            np.testing.assert_allclose(jet.coefficient((a, b)), coef(a, b), rtol=1e-13, atol=1e-14)


def test_elementary_functions_against_closed_form_coefficients():
    x, y = _jets(4)
    # exp(x + 2y): d^a_x d^b_y = 2^b exp(x + 2y)
    _check(np.exp(x + 2 * y), lambda a, b: 2**b * np.exp(X0 + 2 * Y0) / (math.factorial(a) * math.factorial(b)))
    # log(x (y + 2)) = log x + log(y + 2) has no mixed terms; d^a log x / a! = (-1)^(a-1)/(a x^a)
    def log_coef(a, b):
        if a == 0 and b == 0:
            return np.log(X0 * (Y0 + 2))
        if b == 0:
            return (-1.0) ** (a + 1) / (a * X0**a)
        if a == 0:
            return (-1.0) ** (b + 1) / (b * (Y0 + 2) ** b)
        return 0 * X0

    _check(np.log(x * (y + 2)), log_coef)
    # (x + y + 1)^r: d^a_x d^b_y = r (r-1) ... (r-n+1) (x+y+1)^(r-n), n = a + b
    r = 2.5
    _check((x + y + 1) ** r,
           lambda a, b: math.prod(r - i for i in range(a + b)) * (X0 + Y0 + 1) ** (r - a - b)
           / (math.factorial(a) * math.factorial(b)))
    _check(1 / (x + y + 1), lambda a, b: math.prod(-1 - i for i in range(a + b)) * (X0 + Y0 + 1) ** (-1 - a - b)
           / (math.factorial(a) * math.factorial(b)))
    _check(np.sqrt(x + 2), lambda a, b: (b == 0) * math.prod(0.5 - i for i in range(a)) * (X0 + 2) ** (0.5 - a)
           / math.factorial(a))
    # sin(x - y): d^a_x d^b_y = (-1)^b sin(x - y + (a + b) pi/2)
    _check(np.sin(x - y), lambda a, b: (-1) ** b * np.sin(X0 - Y0 + (a + b) * np.pi / 2)
           / (math.factorial(a) * math.factorial(b)))
    _check(np.cos(2 * x), lambda a, b: (b == 0) * 2**a * np.cos(2 * X0 + a * np.pi / 2) / math.factorial(a))
    # tanh: tanh' = 1 - t^2, tanh'' = -2 t (1 - t^2), tanh''' = (1 - t^2)(6 t^2 - 2)
    t = np.tanh(X0)
    d = [t, 1 - t * t, -2 * t * (1 - t * t), (1 - t * t) * (6 * t * t - 2)]
    _check(np.tanh(x), lambda a, b: (b == 0) * d[a] / math.factorial(a))
    _check(np.cosh(y) ** 2 - np.sinh(y) ** 2, lambda a, b: 1.0 * (a == 0 and b == 0))


def test_partial_derivatives_and_precision():
    x, y = _jets(3)
    f = x * x * y
    fx, fy = f.partial(1), f.partial(2)
    assert fx.order == fy.order == 2
    np.testing.assert_allclose(fx.value, 2 * X0 * Y0)
    np.testing.assert_allclose(fy.value, X0 * X0)
    np.testing.assert_allclose(fx.partial(2).value, 2 * X0)  # d_x d_y (x^2 y)
    np.testing.assert_allclose(fx.partial(1).value, 2 * Y0)
    assert f.partial(3) == 0  # not a variable of the jet
    with pytest.raises(PrecisionError):
        f.coefficient((3, 0))
    third = fx.partial(1).partial(1)  # a third derivative of data known to second order
    assert third.order == 0
    with pytest.raises(PrecisionError):
        third.value
    with pytest.raises(PrecisionError):
        np.exp(fx.partial(2).partial(2))  # nothing known: no function of it either
    with pytest.raises(TypeError, match="Series"):
        x + Series(np.ones((3, 3)), 0)
    # the jet of a field from its partial derivatives (values of x^2 y and its derivatives)
    j = jet_from_derivatives({(0, 0): X0**2 * Y0, (1, 0): 2 * X0 * Y0, (0, 1): X0**2, (2, 0): 2 * Y0,
                              (1, 1): 2 * X0, (0, 2): 0 * X0}, (1, 2))
    np.testing.assert_allclose(j.c, f.c, rtol=1e-15, atol=1e-15)
    with pytest.raises(ValueError, match="needed"):
        jet_from_derivatives({(0, 0): X0}, (1, 2))


def test_complex_step_passes_through_jets():
    # the engine linearises by complex steps: d/dh Im f(x + i h)/h at h -> 0 is f'(x)
    h = 1e-30
    x, y = coordinate_jets([X0 + 1j * h, Y0], (1, 2), 3)
    f = np.exp(x) * y / (1 + x * x)
    g = np.exp(X0) * Y0 / (1 + X0**2)
    np.testing.assert_allclose(f.value.imag / h, g * (1 - 2 * X0 / (1 + X0**2)), rtol=1e-13)


def _mixed_coordinates(R, X, a=0.3, b=0.2, k=1.7):
    """``r = R (1 + b cos kX)``, ``x = X + a sin(kX)/k`` and the Jacobian entries."""
    c, s = np.cos(k * X), np.sin(k * X)
    r = R * (1 + b * c)
    return r, 1 + b * c, -R * b * k * s, 1 + a * c  # r, dr/dR, dr/dX, dx/dX


def _ads4_metric(R, X):
    # Poincare AdS4, ds^2 = (-dt^2 + dr^2 + dx^2 + dy^2)/r^2 (r is the usual z), coordinates (t, R, X, y)
    r, rR, rX, xX = _mixed_coordinates(R, X)
    w = 1 / (r * r)
    return {(0, 0): -1 * w, (1, 1): rR * rR * w, (1, 2): rR * rX * w, (2, 2): (rX * rX + xX * xX) * w,
            (3, 3): w}, r


def test_ads4_in_coordinates_mixing_radius_and_boundary_direction():
    R, X = coordinate_jets([np.array([0.4, 0.9, 1.6]), np.array([0.1, 1.3, 2.9])], (1, 2), 3)
    g, _ = _ads4_metric(R, X)
    geo = Geometry(g, 4, radial=1, dependent=(1, 2))
    ric = geo.ricci
    for m in range(4):
        for n in range(m, 4):
            lhs = ric.get((m, n), 0)
            lhs = lhs.value if isinstance(lhs, Jet) else np.zeros(3)
            ref = g[(m, n)].value if (m, n) in g else np.zeros(3)
            np.testing.assert_allclose(lhs, -3 * ref, rtol=1e-12, atol=1e-12)
    # the same geometry through the Einstein evaluator: pure gravity, V = -6
    model = BulkModel(lambda phi: -6 + 0 * phi, scalars=("phi",))
    out = einstein_deturck(g, None, model, MatterContent([0 * R]), radial=1, dim=4, dependent=(1, 2))
    for key, e in out["E"].items():
        np.testing.assert_allclose(e.value, 0, atol=1e-11)
    np.testing.assert_allclose(out["scalar"][0].value, 0, atol=1e-12)


@pytest.mark.parametrize("delta", [2.0, 1.5, 2.7])
def test_box_of_a_power_of_the_radius(delta):
    R, X = coordinate_jets([np.array([0.5, 1.2]), np.array([0.7, 2.0])], (1, 2), 3)
    g, r = _ads4_metric(R, X)
    phi = r**delta
    box = Geometry(g, 4, radial=1, dependent=(1, 2)).box(ScalarField(phi))
    np.testing.assert_allclose(box.value, delta * (delta - 3) * phi.value, rtol=1e-12)


@pytest.mark.parametrize("alpha,m0", [(0.0, 1.3), (1.1, 0.8), (2.0, 2.5)])
def test_linear_axion_brane_in_mixed_coordinates(alpha, m0):
    R, X = coordinate_jets([np.array([1.4, 2.2, 3.5]), np.array([0.2, 1.9, 4.0])], (1, 2), 3)
    r, rR, rX, xX = _mixed_coordinates(R, X)
    f = r * r - alpha**2 / 2 - m0 / r
    ir = 1 / f
    g = {(0, 0): -1 * f, (1, 1): rR * rR * ir, (1, 2): rR * rX * ir,
         (2, 2): rX * rX * ir + r * r * xX * xX, (3, 3): r * r}
    x = X + 0.3 * np.sin(1.7 * X) / 1.7  # the boundary coordinate of the solution
    # psi_1 = alpha x (a field of (R, X) here) and psi_2 = alpha y (a constant gradient)
    model = BulkModel(lambda p: -6 + 0 * p, scalars=("p",))
    out = einstein_deturck(g, None, model, MatterContent([alpha * x], axions=[{3: alpha}]), radial=1,
                           dim=4, dependent=(1, 2))
    scale = np.abs(r.value) ** 2
    for key, e in out["E"].items():
        np.testing.assert_allclose(e.value / scale, 0, atol=1e-12)
    np.testing.assert_allclose(out["scalar"][0].value / scale, 0, atol=1e-12)
    # and the equations do see a wrong mass: m0 -> m0 + 0.1 violates them
    f2 = r * r - alpha**2 / 2 - (m0 + 0.1) / r
    g[(0, 0)] = -1 * f2
    bad = einstein_deturck(g, None, model, MatterContent([alpha * x], axions=[{3: alpha}]), radial=1,
                           dim=4, dependent=(1, 2))
    assert max(float(np.abs(e.value / scale).max()) for e in bad["E"].values()) > 1e-3


def test_deturck_vector_against_a_constant_reference_is_minus_box_of_the_coordinates():
    # with a reference of constant components (no Christoffel symbols), xi^mu = g^ab Gamma^mu_ab
    # = -box x^mu: the harmonic-coordinate identity (common practice)
    R, X = coordinate_jets([np.array([0.5, 1.2]), np.array([0.7, 2.0])], (1, 2), 3)
    g, _ = _ads4_metric(R, X)
    geo = Geometry(g, 4, radial=1, dependent=(1, 2))
    xi_up, _ = geo.deturck(Geometry({(0, 0): -1.0, (1, 1): 1.0, (2, 2): 1.0, (3, 3): 1.0}, 4, 1, (1, 2)))
    for mu, coord in ((1, R), (2, X)):
        np.testing.assert_allclose(xi_up[mu].value, -geo.box(ScalarField(coord)).value, rtol=1e-12)
    assert 0 not in xi_up and 3 not in xi_up  # t and y are harmonic here


def test_one_coordinate_jets_agree_with_series():
    # a diagonal radial metric through both types (the series route is what the branes use)
    z0 = np.array([0.3, 0.6, 0.85])
    (zj,) = coordinate_jets([z0], (1,), 3)
    zs = Series(np.stack([z0, np.ones(3), np.zeros(3)]), 0)
    outs = []
    for z in (zj, zs):
        f = 1 - z**3
        g = {(0, 0): -1 * f * np.exp(-z * z) / (z * z), (1, 1): 1 / (f * z * z), (2, 2): np.cosh(z) / (z * z),
             (3, 3): 1 / (z * z * np.cosh(z))}
        ric = Geometry(g, 4, radial=1, dependent=(1,)).ricci
        outs.append({k: (v.value if isinstance(v, Jet) else v.coefficient(0)) for k, v in ric.items()})
    assert outs[0].keys() == outs[1].keys()
    for k in outs[0]:
        np.testing.assert_allclose(outs[0][k], outs[1][k], rtol=1e-13)


def test_probe_scalar_in_ads4_solved_on_a_two_dimensional_grid():
    # a nonlinear probe scalar in AdS4 written in coordinates mixing r and x, solved by the engine
    # on a Chebyshev x Fourier grid with the equation from the evaluator: V = -6 + m^2 phi^2/2 +
    # G phi^4/4 with the quartic force cancelled by a source made of the exact solution,
    # phi = r^Delta (common practice, see the module notes), so Newton needs several steps
    import spectral_bulk as sb

    delta, quartic, k = 2.7, 0.5, 1.7
    m2 = delta * (delta - 3)
    model = BulkModel(lambda phi: -6 + m2 * phi**2 / 2 + quartic * phi**4 / 4, scalars=("phi",))

    def exact(R, X):
        return (R * (1 + 0.2 * np.cos(k * X))) ** delta

    def equations(c, f, p):
        R, X = coordinate_jets([c.R, c.X], (1, 2), 3)
        phi = jet_from_derivatives({(0, 0): f.phi, (1, 0): f.phi_R, (0, 1): f.phi_X, (2, 0): f.phi_RR,
                                    (1, 1): f.phi_RX, (0, 2): f.phi_XX}, (1, 2))
        g, _ = _ads4_metric(R, X)
        out = einstein_deturck(g, None, model, MatterContent([phi]), radial=1, dim=4, dependent=(1, 2))
        return out["scalar"][0].value + quartic * exact(c.R, c.X) ** 3

    def wall(c, f, p):
        return [f.phi - exact(c.R, c.X)]

    errors = {}
    for n_r, n_x in ((10, 12), (16, 24)):
        grid = sb.TensorGrid(sb.Chebyshev(n_r, (0.5, 1.5), "R"), sb.Fourier(n_x, 2 * np.pi / k, "X"))
        problem = sb.Problem(grid, ["phi"], equations, {"R=0.5": wall, "R=1.5": wall})
        if n_r == 10:  # too coarse for 1e-11: the certificate says so
            with pytest.warns(ConvergenceWarning, match="spectral tail"):
                res = sb.solve(problem, lambda R, X: R**2, tol=1e-11, linear_solver="gmres")
            assert res.status == 5
        else:
            res = sb.solve(problem, lambda R, X: R**2, tol=1e-11, linear_solver="gmres")
            assert res.converged, res.message
            assert res.iterations >= 3  # the quartic term makes it a genuine Newton solve
        R, X = (grid.coords[n].reshape(grid.shape) for n in ("R", "X"))
        errors[n_r] = float(np.abs(res.fields["phi"] - exact(R, X)).max())
    assert errors[16] < 1e-12
    assert errors[10] > 100 * errors[16]  # spectral convergence


def test_maxwell_needs_a_radial_potential():
    R, X = coordinate_jets([np.array([0.5]), np.array([0.1])], (1, 2), 3)
    g, _ = _ads4_metric(R, X)
    model = BulkModel(lambda phi: -6 + 0 * phi, scalars=("phi",), gauge_coupling=lambda phi: 1 + 0 * phi)
    with pytest.raises(NotImplementedError, match="Maxwell"):
        einstein_deturck(g, None, model, MatterContent([0 * R], at=R), radial=1, dim=4, dependent=(1, 2))


def _known(jet):
    """Every known coefficient ``(alpha, value)`` of a two-variable jet (Laurent in the first)."""
    for e in range(jet.val, jet.order):
        for b in range(jet.order - e):
            yield (e, b), jet.coefficient((e, b))


def test_laurent_jets_against_closed_forms():
    # at a zero of the first variable: 1/(d (2 + d + y)) = d^-1/(2 + y) - 1/(2 + y)^2 + d/(2 + y)^3 ...
    Y = np.array([0.2, -0.5])
    z, y = coordinate_jets([np.zeros(2), Y], (1, 2), 5)
    s = 1 / (z * (2 + z + y))
    assert s.val == -1 and s.order == 3  # O(|d|^5) divided by d^2 as a Laurent series
    # the coefficient of d^e y^b of 1/(d (c + d)) with c = 2 + Y0 + y: sum over the y-expansion
    # of (-1)^(e+1) c^-(e+2), i.e. (-1)^(e+1) binom(-(e+2), b) (2 + Y0)^(-(e+2)-b)
    for (e, b), v in _known(s):
        ref = (-1.0) ** (e + 1) * math.comb(e + 1 + b, b) * (-1.0) ** b * (2 + Y) ** (-(e + 2) - b)
        np.testing.assert_allclose(v, ref, rtol=1e-13)
    # d/dz of the pole and of a product with a zero
    ds = s.partial(1)
    assert ds.val == -2
    np.testing.assert_allclose(ds.coefficient((-2, 0)), -1 / (2 + Y), rtol=1e-13)
    np.testing.assert_allclose(ds.coefficient((-1, 0)), 0 * Y, atol=1e-15)  # d/dd of the constant term
    np.testing.assert_allclose(ds.coefficient((0, 0)), 1 / (2 + Y) ** 3, rtol=1e-13)
    np.testing.assert_allclose((s * z).value, 1 / (2 + Y), rtol=1e-13)
    np.testing.assert_allclose(np.sqrt(z * z * (1 + y)).coefficient((1, 1)), 0.5 / np.sqrt(1 + Y), rtol=1e-13)
    with pytest.raises(PrecisionError, match="pole"):
        np.exp(s)
    np.testing.assert_allclose(np.exp(s - s + y).value, np.exp(Y), rtol=1e-14)  # a removable pole
    with pytest.raises(PrecisionError):
        s.coefficient((3, 0))


def _tortoise_metric(z, A=1, B=1, C=1):
    """``(-f A dt^2 + A dz^2/f + B dx^2 + C dy^2)/z^2``, ``f = 1 - z^3``: the branes' ansatz."""
    f = 1 - z**3
    iz2 = 1 / (z * z)
    return {(0, 0): -1 * (f * A) * iz2, (1, 1): A * iz2 / f, (2, 2): B * iz2, (3, 3): C * iz2}


def _brane_metric(z, x_of_X=None):
    """AdS-Schwarzschild (the planar brane with T = 3/(4 pi); common practice), with
    ``x = x(X)`` when given."""
    return _tortoise_metric(z, B=1 if x_of_X is None else x_of_X * x_of_X)


def test_horizon_laurent_expansion_agrees_with_series():
    # one variable: the Laurent expansions at the horizon z = 1 from Jet and from Series
    zs = Series(np.stack([np.ones(2), np.ones(2)] + [np.zeros(2)] * 4), 0)
    (zj,) = coordinate_jets([np.ones(2)], (1,), 6)
    rs = Geometry(_brane_metric(zs), 4, radial=1).ricci
    rj = Geometry(_brane_metric(zj), 4, radial=1, dependent=(1,)).ricci
    assert rs.keys() == rj.keys()
    for key in rs:
        assert rs[key].val == rj[key].normalized().val
        for e in range(rs[key].val, min(rs[key].prec, rj[key].order)):
            np.testing.assert_allclose(rj[key].coefficient((e,)), rs[key].coefficient(e), rtol=1e-13, atol=1e-13)


def test_brane_horizon_in_an_x_dependent_coordinate():
    # AdS-Schwarzschild with x = X + a sin(kX)/k: at the horizon the Einstein equations hold as
    # Laurent series in z - 1 and Taylor series in X - X0, every known coefficient
    a, k = 0.4, 1.3
    z, X = coordinate_jets([np.ones(3), np.array([0.1, 1.0, 2.2])], (1, 2), 6)
    g = _brane_metric(z, 1 + a * np.cos(k * X))
    model = BulkModel(lambda phi: -6 + 0 * phi, scalars=("phi",))
    out = einstein_deturck(g, None, model, MatterContent([0 * z]), radial=1, dim=4, dependent=(1, 2))
    assert min(e.normalized().val for e in out["E"].values()) >= -1  # poles cancel to first order
    checked = 0
    for key, e in out["E"].items():
        for alpha, v in _known(e):
            np.testing.assert_allclose(v, 0, atol=1e-11)
            checked += 1
    assert checked > 20
    # a wrong blackening factor is seen at the horizon
    g[(0, 0)] = -1 * (1 - z**3) * (1 + 0.01 * (z - 1)) / (z * z)
    bad = einstein_deturck(g, None, model, MatterContent([0 * z]), radial=1, dim=4, dependent=(1, 2))
    assert max(float(np.abs(v).max()) for e in bad["E"].values() for _, v in _known(e)) > 1e-3


def test_qlattice_brane_as_two_x_dependent_real_scalars():
    # The Q-lattice scalar rho e^{i k x} is the pair phi_1 = rho cos kx, phi_2 = rho sin kx of real
    # scalars with G = identity and V(sqrt(phi_1^2 + phi_2^2)) (common practice). A certified
    # one-coordinate brane (itself checked against shooting in test_branes.py) must then solve
    # the two-coordinate equations with x-dependent scalars, at interior points and, as Laurent
    # series in z - 1, at the horizon; the z-x equation holds by a cancellation between the two.
    from spectral_bulk.backgrounds import QLatticeBrane
    from spectral_bulk.models import builtin

    bg = QLatticeBrane(builtin("mass2"), n=24, n_max=24)
    k_over_t = 1.3
    sol = bg.solve(lam=1.0, k=k_over_t)
    assert sol.certified
    kk = k_over_t * bg.T
    pair = BulkModel(lambda p1, p2: -6 - p1 * p1 - p2 * p2, scalars=("p1", "p2"))
    z = sol.grid.axes[0].points
    x0 = np.linspace(0.0, 2.0, 5)

    def residuals(idx, kx):
        zz, xx = np.meshgrid(z[idx], x0, indexing="ij")
        Z, X = coordinate_jets([zz, xx], (1, 2), 6)
        fs = {}
        for name in bg.fields:
            v, d1, d2 = (np.asarray(sol.derivative(name, (m,)))[idx] if m else sol.fields[name][idx]
                         for m in range(3))
            b = np.broadcast_to
            fs[name] = jet_from_derivatives({(0, 0): b(v[:, None], zz.shape), (1, 0): b(d1[:, None], zz.shape),
                                             (0, 1): 0 * zz, (2, 0): b(d2[:, None], zz.shape),
                                             (1, 1): 0 * zz, (0, 2): 0 * zz}, (1, 2))
        g = _tortoise_metric(Z, fs["A"], fs["B"], fs["C"])
        rho = Z * fs["psi"]
        out = einstein_deturck(g, None, pair, MatterContent([rho * np.cos(kx * X), rho * np.sin(kx * X)]),
                               radial=1, dim=4, dependent=(1, 2))
        return list(out["E"].values()) + list(out["scalar"])

    interior = np.arange(1, z.size - 1)
    worst = max(float(np.abs(e.value).max()) for e in residuals(interior, kk))
    assert worst < 1e-9
    assert max(float(np.abs(e.value).max()) for e in residuals(interior, 1.02 * kk)) > 1e-4  # the k it was solved at
    # the horizon: every coefficient the data determine vanishes; the constant terms are among
    # them (the regularity rows of the one-coordinate brane), and a wrong k is seen there too
    horizon = np.array([z.size - 1])
    rows = residuals(horizon, kk)
    assert all(e.order >= 1 for e in rows)
    assert max(float(np.abs(v).max()) for e in rows for _, v in _known(e)) < 1e-9
    bad = residuals(horizon, 1.02 * kk)
    assert max(float(np.abs(v).max()) for e in bad for _, v in _known(e)) > 1e-5


def test_qlattice_brane_solved_as_a_pde_with_x_dependent_sources():
    # The whole two-coordinate route of a lattice brane: fields A, B, C of (z, x) and the two real
    # scalar components psi_i (phi_i = z psi_i) with the sources lambda cos kx, lambda sin kx at
    # the boundary, the evaluator's equations on jets at interior points, its Laurent horizon rows
    # at z = 1, solved by the engine on a Chebyshev x Fourier grid (GMRES path). The Q-lattice
    # solution is x-independent in the metric; s/T^2 and rho_h must agree with the independent
    # shooting solution (tests/reference/brane_reference.py, scipy only).
    import spectral_bulk as sb

    from .problems import load_reference

    lam_over_t, k_over_t = 1.0, 1.3
    temp = 3 / (4 * np.pi)  # tortoise gauge, z_h = 1
    kb, lb = k_over_t * temp, lam_over_t * temp
    pair = BulkModel(lambda p1, p2: -6 - p1 * p1 - p2 * p2, scalars=("p1", "p2"))
    fields = ["A", "B", "C", "p1", "p2"]
    names = {(0, 0): "", (1, 0): "_z", (0, 1): "_x", (2, 0): "_zz", (1, 1): "_zx", (0, 2): "_xx"}

    def rows(z, x, f):
        Z, X = coordinate_jets([z, x], (1, 2), 6)
        fs = {n: jet_from_derivatives({a: getattr(f, n + s) for a, s in names.items()}, (1, 2)) for n in fields}
        g = _tortoise_metric(Z, fs["A"], fs["B"], fs["C"])
        out = einstein_deturck(g, None, pair, MatterContent([Z * fs["p1"], Z * fs["p2"]]), radial=1, dim=4,
                               dependent=(1, 2))
        return [e.value for e in [out["E"][(0, 0)], out["E"][(2, 2)], out["E"][(3, 3)]] + out["scalar"]]

    def equations(c, f, p):
        return rows(np.where((c.z <= 0) | (c.z >= 1), 0.5, c.z), c.x, f)  # the ends carry their own rows

    def boundary(c, f, p):
        return [f.A - 1, f.B - 1, f.C - 1, f.p1 - lb * np.cos(kb * c.x), f.p2 - lb * np.sin(kb * c.x)]

    def horizon(c, f, p):  # the constant Laurent coefficients at z = 1, as for the ODE branes
        return rows(c.z, c.x, f)

    def guess(z, x):
        return {"A": 1 + 0 * z, "B": 1 + 0 * z, "C": 1 + 0 * z, "p1": lb * (1 - z) * np.cos(kb * x),
                "p2": lb * (1 - z) * np.sin(kb * x)}

    grid = sb.TensorGrid(sb.Chebyshev(24, (0.0, 1.0), "z"), sb.Fourier(6, 2 * np.pi / kb, "x"))
    res = sb.solve(sb.Problem(grid, fields, equations, {"z=0": boundary, "z=1": horizon}), guess,
                   tol=1e-10, linear_solver="gmres")
    assert res.converged, res.message
    B, C = res.fields["B"][-1], res.fields["C"][-1]
    rho_h = np.hypot(res.fields["p1"][-1], res.fields["p2"][-1])
    s_over_t2 = 4 * np.pi * np.sqrt(B * C) / temp**2
    shooting = load_reference("brane_reference")
    ref = shooting.qlattice_brane_shooting(*shooting.quadratic_potential(), lam=lam_over_t, k=k_over_t, rtol=1e-11)
    assert res.linear_solver == "gmres"
    np.testing.assert_allclose(s_over_t2, ref["s"], rtol=1e-10)  # reference error estimate 2.5e-12
    np.testing.assert_allclose(rho_h, ref["rho_h"], rtol=1e-8)
    for name in ("A", "B", "C"):  # the lattice of a Q-lattice leaves the metric homogeneous
        assert np.ptp(res.fields[name], axis=1).max() < 1e-12


def test_dependent_coordinates_come_from_the_jets_and_are_checked():
    # leaving out a coordinate the jets depend on would drop its derivatives from the curvature
    R, X = coordinate_jets([np.array([0.4, 0.9]), np.array([0.1, 1.3])], (1, 2), 3)
    g, _ = _ads4_metric(R, X)
    assert Geometry(g, 4, radial=1).dependent == (1, 2)
    with pytest.raises(ValueError, match=r"coordinate\(s\) \[2\]"):
        Geometry(g, 4, radial=1, dependent=(1,))
    model = BulkModel(lambda phi: -6 + 0 * phi, scalars=("phi",))
    out = einstein_deturck(g, None, model, MatterContent([0 * R]), radial=1, dim=4)  # inferred
    for e in out["E"].values():
        np.testing.assert_allclose(e.value, 0, atol=1e-11)
    with pytest.raises(ValueError, match="not in dependent"):
        einstein_deturck(g, None, model, MatterContent([0 * R]), radial=1, dim=4, dependent=(1,))
