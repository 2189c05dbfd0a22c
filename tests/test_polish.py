"""Extended-precision refinement (``spectral_bulk.newton.polish``) against closed forms.

Each check compares with a solution known in closed form, evaluated in ``np.longdouble``;
the refinement must beat the double-precision solution by orders of magnitude.
"""

import numpy as np
import pytest

from spectral_bulk import Chebyshev, Fourier, Problem, solve
from spectral_bulk.grids import TensorGrid
from spectral_bulk.grids._chebyshev import cheb_diff_matrices, cheb_nodes
from spectral_bulk.newton import extended_precision_available, polish

L = np.longdouble
pytestmark = pytest.mark.skipif(not extended_precision_available(),
                                reason="np.longdouble is no wider than double on this platform")


def test_extended_differentiation_is_exact_on_polynomials():
    # collocation differentiation is exact on polynomials of degree < n (common practice;
    # "Spectral Methods in MATLAB", SIAM 2000, chapter 6); in longdouble the rounding
    # error must fall with the machine epsilon
    n = 32
    rng = np.random.default_rng(3)
    c = rng.normal(size=n)
    errs = {}
    for dtype in (np.float64, L):
        x = cheb_nodes(n, dtype)
        D1, D2 = cheb_diff_matrices(n, 2, dtype)
        p = np.polynomial.Chebyshev(c.astype(dtype))
        u = p(x)
        e1 = np.abs(D1 @ u - p.deriv(1)(x)).max() / np.abs(p.deriv(1)(x)).max()
        e2 = np.abs(D2 @ u - p.deriv(2)(x)).max() / np.abs(p.deriv(2)(x)).max()
        errs[dtype] = (float(e1), float(e2))
        assert D1.dtype == np.dtype(dtype) and x.dtype == np.dtype(dtype)
    assert errs[L][0] < 1e-16 and errs[L][1] < 1e-16
    assert errs[L][0] < errs[np.float64][0] / 100 and errs[L][1] < errs[np.float64][1] / 100


def _linear_problem(n):
    grid = Chebyshev(n, (-1.0, 1.0), "x")

    def equations(c, f, p):
        return [f.u_xx - np.exp(4 * c.x)]

    def wall(c, f, p):
        return [f.u]

    return Problem(grid, ["u"], equations, {"left": wall, "right": wall}, name="program13")


def test_extended_residual_matches_double_and_keeps_its_type():
    pr = _linear_problem(20)
    u = np.sin(pr.grid.coords["x"])
    r = pr.residual(u)
    rx = pr.residual_extended(u)
    assert rx.dtype == np.dtype(L)
    assert np.abs(rx.astype(float) - r).max() < 1e-12 * np.abs(r).max()


def test_extended_residual_refuses_two_dimensional_grids():
    grid = TensorGrid(Fourier(8, 2 * np.pi, "x"), Chebyshev(6, (0.0, 1.0), "y"))
    pr = Problem(grid, ["u"], lambda c, f, p: [f.u_yy + f.u_xx], {"y=0": lambda c, f, p: [f.u],
                                                                  "y=1": lambda c, f, p: [f.u]})
    with pytest.raises(NotImplementedError, match="1-D Chebyshev"):
        pr.residual_extended(np.zeros(grid.size))


def test_polish_linear_worked_example():
    # u_xx = exp(4x), u(+-1) = 0: u = (exp(4x) - x sinh 4 - cosh 4)/16
    # ("Spectral Methods in MATLAB", SIAM 2000, Program 13).  At n = 40 the Chebyshev
    # coefficients of exp(4x) are below 1e-24, so the discrete solution is the exact one
    # to far below double rounding
    pr = _linear_problem(40)
    res = solve(pr, 0.0, tol=1e-13)
    assert res.converged
    x = pr.grid.axes[0].extended(1)[0]
    exact = (np.exp(4 * x) - x * np.sinh(L(4)) - np.cosh(L(4))) / 16
    err_double = float(np.abs(res.state - exact).max())
    pol = polish(res)
    assert pol.improved and pol.state.dtype == np.dtype(L)
    err_ext = float(np.abs(pol.fields["u"] - exact).max())
    assert err_ext < 1e-17 < err_double and err_ext < err_double / 100, (err_ext, err_double)


def _bratu_exact(lam, x):
    """Lower-branch Bratu solution in longdouble (the classical Gelfand-Bratu closed form:
    u = -2 log(cosh((x - 1/2) theta/2) / cosh(theta/4)), theta = sqrt(2 lam) cosh(theta/4))."""
    c = np.sqrt(2 * L(lam))
    th = L(1.0)
    for _ in range(60):  # Newton on g(theta) = theta - c cosh(theta/4), from below the fold
        th = th - (th - c * np.cosh(th / 4)) / (1 - c * np.sinh(th / 4) / 4)
    return -2 * np.log(np.cosh((x - L(0.5)) * th / 2) / np.cosh(th / 4))


def test_polish_bratu_against_its_closed_form():
    lam, n = 1.0, 40
    grid = Chebyshev(n, (0.0, 1.0), "x")

    def wall(c, f, p):
        return [f.u]

    pr = Problem(grid, ["u"], lambda c, f, p: [f.u_xx + p.lam * np.exp(f.u)],
                 {"left": wall, "right": wall}, {"lam": lam}, name="bratu")
    res = solve(pr, 0.0, tol=1e-13)
    assert res.converged
    x = grid.extended(1)[0]
    exact = _bratu_exact(lam, x)
    err_double = float(np.abs(res.state - exact).max())
    pol = polish(res)
    err_ext = float(np.abs(pol.fields["u"] - exact).max())
    assert pol.improved
    assert err_ext < 1e-17 and err_ext < err_double / 100, (err_ext, err_double)


def test_polish_with_the_kept_factorisation_matches_a_fresh_one():
    # plain solve() results keep no factorisation (stored results would hold n^2 arrays);
    # the internal keep_factor path (branes) reuses Newton's last one
    from spectral_bulk.newton._newton import NewtonOptions, _newton, initial_state

    pr = _linear_problem(40)
    res = solve(pr, 0.0, tol=1e-13)
    assert getattr(res, "_jacobian_solver", None) is None
    kept = _newton(pr, initial_state(pr, 0.0), {}, NewtonOptions(tol=1e-13).validated(), keep_factor=True)
    assert kept._jacobian_solver is not None
    a, b = polish(res), polish(kept)
    assert a.improved and b.improved
    assert np.abs(a.state - b.state).max() < 1e-17


def test_polish_needs_a_wider_type():
    res = solve(_linear_problem(16), 0.0)
    assert polish(res, dtype=np.float64) is None


def test_bordered_inverse_solves_with_the_jacobian():
    # block elimination on [[J, b], [c^T, d]] against numpy.linalg.solve with J itself
    from spectral_bulk.exceptions import SingularJacobianError
    from spectral_bulk.newton import BorderedInverse, DenseSolver

    pr = _linear_problem(12)
    _, A = pr.linearize(np.zeros(pr.size))
    from spectral_bulk.newton import assemble_dense

    J = assemble_dense(pr, A)
    rng = np.random.default_rng(4)
    b, c, rhs = rng.normal(size=(3, pr.size))
    inv = BorderedInverse(DenseSolver(pr, A, border=(b, c, 0.7)), b)
    np.testing.assert_allclose(inv.solve(rhs), np.linalg.solve(J, rhs), rtol=1e-10, atol=1e-12)
    assert inv.kind == "dense"
    # J singular (u'' with two Neumann ends), the bordered matrix regular: no inverse
    sing = Problem(Chebyshev(10, (0.0, 1.0), "x"), ["u"], lambda c, f, p: [f.u_xx],
                   {"left": lambda c, f, p: [f.u_x], "right": lambda c, f, p: [f.u_x]})
    _, As = sing.linearize(np.zeros(sing.size))
    ones = np.ones(sing.size)
    inv = BorderedInverse(DenseSolver(sing, As, border=(ones, ones, 0.0)), ones)
    with pytest.raises(SingularJacobianError):
        inv.solve(rng.normal(size=sing.size))


def test_continuation_points_polish_with_their_bordered_factorisation():
    # the points of a family hand their tangent's factorisation to the observables, which
    # refine with it exactly as with a fresh LU (Gelfand-Bratu closed form, common practice)
    from spectral_bulk.continuation import follow

    grid = Chebyshev(24, (0.0, 1.0), "x")
    wall = lambda c, f, p: [f.u]  # noqa: E731
    pr = Problem(grid, ["u"], lambda c, f, p: [f.u_xx + p.lam * np.exp(f.u)],
                 {"left": wall, "right": wall}, {"lam": 0.5}, name="bratu")
    seen = []

    def observables(sol):
        kept = getattr(sol, "_jacobian_solver", None)
        seen.append(type(kept).__name__)
        fresh = polish(solve(pr, sol, params=sol.params, tol=1e-13))
        mine = polish(sol)
        assert mine.improved
        exact = _bratu_exact(float(sol.params["lam"]), grid.extended(1)[0])
        return {"err": float(np.abs(mine.state - exact).max()),
                "vs_fresh": float(np.abs(mine.state - fresh.state).max())}

    br = follow(pr, 0.0, "lam", step=0.2, max_points=4, observables=observables, regrid=False)
    ds = br.to_dataset()
    assert "BorderedInverse" in seen
    assert float(ds["err"].max()) < 1e-17 and float(ds["vs_fresh"].max()) < 1e-17
    assert all(getattr(s, "_jacobian_solver", None) is None for s in br.solutions)


def test_brane_newton_result_keeps_the_extended_residual_of_its_state():
    # the branes certify their Newton result with the extended-precision residual the refinement
    # starts from (evaluated once): it must be that of the returned state, and refining from it
    # must give what a fresh evaluation gives, bit for bit
    from spectral_bulk.backgrounds import QLatticeBrane
    from spectral_bulk.models import builtin

    bg = QLatticeBrane(builtin("mass2"), n=18, n_max=18)
    params = {"lam": 0.8, "k": 1.2}
    pr = bg.problem(18)
    res = bg._newton(pr, bg._trivial_guess(params), params)
    assert res.converged
    kept = res._extended_residual
    assert kept.dtype == np.dtype(L)
    assert np.array_equal(kept, pr.residual_extended(res.state, res.params))
    a = polish(res)
    res._extended_residual = None
    b = polish(res)
    assert a.residual_norms == b.residual_norms and np.array_equal(a.state, b.state)
    # the wrapped solution does not carry it (nor the factorisation)
    sol = bg.solve(**params)
    assert sol.converged and getattr(sol, "_extended_residual", None) is None
    assert getattr(sol, "_jacobian_solver", None) is None
