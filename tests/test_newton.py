"""Newton-Kantorovich engine against exact solutions and on its failure paths."""

import numpy as np
import pytest
import xarray as xr

import spectral_bulk as sb
from spectral_bulk.exceptions import ConvergenceError, ConvergenceWarning, ProblemDefinitionError
from spectral_bulk.newton import MESSAGES, NewtonOptions

from .problems import (
    bratu_equations,
    bratu_exact,
    bratu_lambda_fold,
    dirichlet_zero,
    LAYER_X0,
    layer_equations,
    layer_exact,
    program13_equations,
    program13_exact,
)

DIRICHLET = {"left": dirichlet_zero, "right": dirichlet_zero}


def bratu_problem(n=30, lam=1.0, linearization="complex-step"):
    grid = sb.Chebyshev(n, (0.0, 1.0))
    return sb.Problem(grid, ["u"], bratu_equations, DIRICHLET, {"lam": lam},
                      linearization=linearization)


def test_program13_max_error_near_1e10_at_n16():
    # "Spectral Methods in MATLAB", SIAM (2000), Program 13: u_xx = exp(4x), u(+-1) = 0,
    # N = 16 (17 points) gives a maximum error of about 1e-10 on a fine grid (value from memory).
    grid = sb.Chebyshev(17, (-1.0, 1.0))
    pr = sb.Problem(grid, ["u"], program13_equations, DIRICHLET)
    res = sb.solve(pr, 0.0, tol=1e-8)
    assert res.converged, res.message
    xf = np.linspace(-1, 1, 1001)
    err = np.abs(res(xf) - program13_exact(xf)).max()
    assert 1e-11 < err < 1e-9
    # linear problem: one Newton step (plus the confirming one at most)
    assert res.iterations <= 2


def test_program13_certificate_reports_underresolution():
    # the same N = 16 cannot certify 1e-10: the tail says so instead of a silent answer
    grid = sb.Chebyshev(17, (-1.0, 1.0))
    pr = sb.Problem(grid, ["u"], program13_equations, DIRICHLET)
    with pytest.warns(ConvergenceWarning, match="spectral tail"):
        res = sb.solve(pr, 0.0, tol=1e-10)
    assert res.status == 5 and not res.converged
    assert "u" in res.message


@pytest.mark.parametrize("linearization", ["complex-step", "finite-difference"])
@pytest.mark.parametrize("lam", [0.5, 2.0, 3.4])
@pytest.mark.parametrize("branch", ["lower", "upper"])
def test_bratu_both_branches(lam, branch, linearization):
    # classical Gelfand-Bratu problem: closed form in tests/problems.py (common practice)
    n = 64 if branch == "upper" else 30  # the upper branch is sharply peaked at small lam
    pr = bratu_problem(n, lam, linearization)
    x = pr.grid.coords["x"]
    exact = bratu_exact(x, lam, branch)
    # a rough guess: 70% of the solution plus a 30% sine bump of the same height
    guess = 0.7 * exact + 0.3 * exact.max() * np.sin(np.pi * x)
    res = sb.solve(pr, guess, tol=1e-11)
    assert res.converged, res.message
    err = np.abs(res.fields["u"] - exact).max()
    assert err / (1e-10 * (1 + np.abs(exact).max())) < 1
    assert res.iterations <= 12


def test_bratu_fold_value():
    # th/4 tanh(th/4) = 1 and lam = th^2 / (2 cosh^2(th/4)): lam_c = 3.513830719125162
    # (classical value, common practice)
    assert abs(bratu_lambda_fold() - 3.513830719125162) < 1e-12


def test_exponential_convergence():
    errors = []
    ns = [6, 10, 14, 18, 22]
    for n in ns:
        pr = bratu_problem(n, 1.0)
        res = sb.solve(pr, 0.0, tol=1e-13, tail_tol=1.0)
        errors.append(np.abs(res.fields["u"] - bratu_exact(pr.grid.coords["x"], 1.0)).max())
    errors = np.array(errors)
    # geometric decay: each step of 4 points gains at least a factor 20 until rounding
    above = errors[:-1] > 1e-13
    assert np.all(errors[1:][above] < errors[:-1][above] / 20)
    assert errors[-1] < 1e-13


@pytest.mark.parametrize("linearization", ["complex-step", "finite-difference"])
def test_jacobian_matches_finite_differences(linearization):
    grid = sb.Chebyshev(12, (0.0, 2.0))

    def eq(c, f, p):
        return [f.u_xx + f.v * np.sin(f.u) + p.a * f.u_x**2, f.v_xx - np.exp(f.u * f.v) + c.x]

    bc = {"left": lambda c, f, p: [f.u - 1, f.v_x], "right": lambda c, f, p: [f.u_x + f.u**2, f.v]}
    pr = sb.Problem(grid, ["u", "v"], eq, bc, {"a": 0.7}, linearization=linearization)
    x = grid.points
    state = np.concatenate([np.cos(x), 0.3 * x**2])
    err = sb.check_jacobian(pr, state)
    assert err < (1e-7 if linearization == "complex-step" else 1e-6)


def test_check_jacobian_flags_non_complex_safe_residual():
    grid = sb.Chebyshev(10, (0.0, 1.0))
    pr = sb.Problem(grid, ["u"], lambda c, f, p: f.u_xx + np.abs(f.u), DIRICHLET)
    assert sb.check_jacobian(pr, guess=lambda x: -np.sin(np.pi * x)) > 1e-2


def test_parameter_derivative_is_exact():
    pr = bratu_problem(16, 2.0)
    u = np.sin(np.pi * pr.grid.coords["x"])
    dp = pr.param_derivative(u, "lam")
    fd = (pr.residual(u, {"lam": 2.0 + 1e-6}) - pr.residual(u, {"lam": 2.0 - 1e-6})) / 2e-6
    assert np.abs(dp - fd).max() < 1e-7
    assert dp[0] == 0 and dp[-1] == 0  # boundary rows do not depend on lam


def test_damping_converges_where_undamped_newton_fails():
    # eps u'' = arctan(u - sin(pi x)): the scalar map arctan makes plain Newton cycle
    # from far away (the classic arctan example of damped Newton; common practice)
    grid = sb.Chebyshev(24, (0.0, 1.0))
    pr = sb.Problem(grid, ["u"], lambda c, f, p: 0.01 * f.u_xx - np.arctan(f.u - np.sin(np.pi * c.x)),
                    DIRICHLET)
    guess = lambda x: 4 * np.sin(np.pi * x)  # noqa: E731
    damped = sb.solve(pr, guess, max_iter=40)
    assert damped.converged and damped.iterations <= 8
    with pytest.warns(ConvergenceWarning):
        plain = sb.solve(pr, guess, damping=False, max_iter=40)
    assert not plain.converged and plain.status == 1


def test_two_dimensional_gmres_and_dense_agree():
    # manufactured solution, periodic in x and Dirichlet in z (common practice)
    L = 2 * np.pi

    def exact(z, x):
        return np.sin(np.pi * z) * (1 + 0.3 * np.cos(x)) + z

    def exact_derivs(z, x):
        s, cz = np.sin(np.pi * z), np.cos(np.pi * z)
        u = exact(z, x)
        uz = np.pi * cz * (1 + 0.3 * np.cos(x)) + 1
        uzz = -np.pi**2 * s * (1 + 0.3 * np.cos(x))
        ux = -0.3 * s * np.sin(x)
        uxx = -0.3 * s * np.cos(x)
        return u, uz, uzz, ux, uxx

    def eqs(c, f, p):
        u, uz, uzz, ux, uxx = exact_derivs(c.z, c.x)
        src = uzz + uxx * (1 + u**2 / 4) + np.exp(u) / 3 + uz * ux / 2
        return f.u_zz + f.u_xx * (1 + f.u**2 / 4) + np.exp(f.u) / 3 + f.u_z * f.u_x / 2 - src

    bc = {"z=0": lambda c, f, p: [f.u - exact(c.z, c.x)], "z=1": lambda c, f, p: [f.u - exact(c.z, c.x)]}
    grid = sb.TensorGrid(sb.Chebyshev(20, (0.0, 1.0), "z"), sb.Fourier(16, L, "x"))
    pr = sb.Problem(grid, ["u"], eqs, bc)
    results = {}
    for kind in ("gmres", "dense"):
        res = sb.solve(pr, lambda z, x: z, linear_solver=kind, tol=1e-11)
        assert res.converged, res.message
        assert res.linear_solver == kind
        results[kind] = res.fields["u"]
    Z, X = (grid.coords[n].reshape(grid.shape) for n in ("z", "x"))
    assert np.abs(results["gmres"] - exact(Z, X)).max() < 1e-11
    assert np.abs(results["gmres"] - results["dense"]).max() < 1e-12
    # the callable result interpolates in both directions
    res_pt = res(0.37, 1.3)
    assert abs(res_pt - exact(0.37, 1.3)) < 1e-10


def test_cluster_map_resolves_thin_tanh_layer():
    # manufactured interior layer tanh((x - 0.3)/w), w = 1e-3 (tests/problems.py)
    w = 1e-3
    bc = {"left": lambda c, f, p: [f.u - layer_exact(c.x, p.w)],
          "right": lambda c, f, p: [f.u - layer_exact(c.x, p.w)]}
    n = 80
    grid = sb.Chebyshev(n, (-1.0, 1.0), map=sb.ClusterMap(center=LAYER_X0, width=2 * w))
    pr = sb.Problem(grid, ["u"], layer_equations, bc, {"w": w})
    res = sb.solve(pr, lambda x: np.tanh((x - LAYER_X0) / (5 * w)), tol=1e-11)
    assert res.converged, res.message
    xf = np.concatenate([np.linspace(-1, 1, 2001), LAYER_X0 + np.linspace(-10 * w, 10 * w, 2001)])
    err = np.abs(res(xf) - layer_exact(xf, w)).max()
    assert err < 1e-10
    # the unmapped grid with five times the points still misses the layer by far:
    # even the interpolant of the exact profile there is off by more than 1e-3
    plain = sb.Chebyshev(5 * n, (-1.0, 1.0))
    interp = plain.interp(layer_exact(plain.points, w), xf)
    assert np.abs(interp - layer_exact(xf, w)).max() > 1e-3


def test_guess_from_previous_result_on_another_grid():
    coarse = sb.solve(bratu_problem(16, 2.0), 0.0, tol=1e-9, tail_tol=1e-6)
    fine_pr = bratu_problem(32, 2.0)
    res = sb.solve(fine_pr, coarse, tol=1e-12)
    assert res.converged
    assert res.iterations <= 3  # the interpolated coarse answer is already close


def test_result_interface_and_netcdf_roundtrip(roundtrip):
    pr = bratu_problem(24, 1.5)
    res = sb.solve(pr, 0.0)
    x = np.linspace(0, 1, 7)
    assert np.abs(res(x) - bratu_exact(x, 1.5)).max() < 1e-11
    assert res.success is res.converged and res.nit == res.iterations
    assert set(res.tail) == {"u"} and res.params == {"lam": 1.5}
    assert len(res.residual_norms) == res.iterations
    ds = res.to_dataset()
    assert ds.attrs["converged"] == 1 and ds.attrs["param_lam"] == 1.5
    back = roundtrip(ds)
    xr.testing.assert_identical(ds, back)


def test_iteration_count_is_bounded():
    # regression guard: Bratu from the zero guess needs few Newton steps
    res = sb.solve(bratu_problem(30, 1.0), 0.0)
    assert res.converged and res.iterations <= 6 and res.njev == res.iterations


# ------------------------------------------------------------------ failure paths
def test_status_iteration_limit():
    with pytest.warns(ConvergenceWarning):
        res = sb.solve(bratu_problem(20, 3.0), 0.0, max_iter=1)
    assert res.status == 1 and not res.converged


def test_status_singular_jacobian_with_condition_estimate():
    # u'' = 1 with Neumann conditions at both ends: no unique solution
    grid = sb.Chebyshev(12, (0.0, 1.0))
    neumann = lambda c, f, p: [f.u_x]  # noqa: E731
    pr = sb.Problem(grid, ["u"], lambda c, f, p: f.u_xx - 1.0, {"left": neumann, "right": neumann})
    with pytest.warns(ConvergenceWarning, match="singular"):
        res = sb.solve(pr, 0.0)
    assert res.status == 2 and res.condition < 1e-14
    assert "reciprocal condition estimate" in res.message


def test_status_non_finite_after_undamped_step():
    # u'' = 20 sqrt(u): a full Newton step from this guess leaves the domain u >= 0
    grid = sb.Chebyshev(12, (0.0, 1.0))
    pr = sb.Problem(grid, ["u"], lambda c, f, p: f.u_xx - 20 * np.sqrt(f.u), {
        "left": lambda c, f, p: [f.u - 1e-3], "right": lambda c, f, p: [f.u - 1e-3]})
    with pytest.warns(ConvergenceWarning, match="non-finite"):
        res = sb.solve(pr, lambda x: 1e-3 + 0.5 * np.sin(np.pi * x), damping=False)
    assert res.status == 3


def test_status_damping_failure_beyond_the_fold():
    # no solution exists above the fold lam_c = 3.5138...
    with pytest.warns(ConvergenceWarning, match="diverges"):
        res = sb.solve(bratu_problem(20, 4.0), 0.0, max_iter=200)
    assert res.status == 4 and not res.converged


@pytest.mark.parametrize("workspace", ["auto", "generic"])
def test_status_residual_stagnation(monkeypatch, workspace):
    from spectral_bulk.newton._workspace import DenseWorkspace, GenericWorkspace

    for cls in (DenseWorkspace, GenericWorkspace):  # the certificate's backward error stays at 1
        monkeypatch.setattr(cls, "certificate",
                            lambda self, u, F, A, orig=cls.certificate: (orig(self, u, F, A)[0], 1.0))
    with pytest.warns(ConvergenceWarning, match="stagnates"):
        res = sb.solve(bratu_problem(20, 1.0), 0.0, options=NewtonOptions(workspace=workspace))
    assert res.status == 6


@pytest.mark.parametrize("workspace, small", [("auto", True), ("auto", False), ("generic", True)])
def test_status_linear_solver_failure(monkeypatch, workspace, small):
    import spectral_bulk.newton._workspace as W
    from spectral_bulk.newton._workspace import DenseWorkspace, GenericWorkspace

    class Broken:
        kind = "broken"
        rcond = 1.0

        def __init__(self, *a, **k):
            pass

        def solve(self, rhs):
            return np.full_like(rhs, np.nan)

    def broken_update(lu, piv, rscale, F, w, dx, min_ratio):  # the dense workspace's compiled solve
        dx[:] = np.nan
        return 1.0, np.nan

    for cls in (DenseWorkspace, GenericWorkspace):
        monkeypatch.setattr(cls, "factor", lambda *a, **k: Broken())
    from spectral_bulk.newton._kernels import dispatchers

    kernels = dispatchers()
    prepare = kernels.prepare_dense

    def broken_small_step(A, DT, R, F, u, scales, J, w, rscale, piv, dx, min_ratio):  # fused form
        finite, rnorm, anorm = prepare(A, DT, R, F, u, scales, J, w, rscale, True)
        dx[:] = np.nan
        return finite, rnorm, anorm, 0, 1.0, np.nan

    monkeypatch.setattr(kernels, "newton_update", broken_update)
    monkeypatch.setattr(kernels, "small_step", broken_small_step)
    # the compiled iteration (small systems) runs as its plain body, on the broken step:
    # it hands the non-finite correction back to the Python loop, which reports it
    import spectral_bulk.newton._kernels as K

    monkeypatch.setattr(kernels, "drive", K._drive_py)
    monkeypatch.setattr(K, "_small_step_py", broken_small_step)
    if not small:  # the LAPACK path of the dense step
        monkeypatch.setattr(W, "_SMALL_LU", 0)
    with pytest.warns(ConvergenceWarning, match="linear solver"):
        res = sb.solve(bratu_problem(12, 1.0), 0.0, options=NewtonOptions(workspace=workspace))
    assert res.status == 7


def test_raise_on_failure_attaches_result():
    with pytest.raises(ConvergenceError) as info:
        sb.solve(bratu_problem(20, 3.0), 0.0, max_iter=1, raise_on_failure=True)
    assert info.value.result.status == 1


def test_every_status_is_documented():
    doc = sb.solve.__doc__
    for code, text in MESSAGES.items():
        assert f"{code} : {text.split(':')[0]}" in doc


# ------------------------------------------------------------------- bad input
def test_wrong_number_of_residuals():
    grid = sb.Chebyshev(8)
    pr = sb.Problem(grid, ["u", "v"], lambda c, f, p: [f.u_xx], {})
    with pytest.raises(ProblemDefinitionError, match="returned 1 entries, expected 2"):
        sb.solve(pr, {"u": 0.0, "v": 0.0})


def test_wrong_residual_shape():
    grid = sb.Chebyshev(8)
    pr = sb.Problem(grid, ["u"], lambda c, f, p: [np.zeros(3)], {})
    with pytest.raises(ProblemDefinitionError, match="shape"):
        sb.solve(pr, 0.0)


def test_misspelled_field_name_is_named():
    grid = sb.Chebyshev(8)
    pr = sb.Problem(grid, ["u"], lambda c, f, p: f.uxx + f.u, DIRICHLET)
    with pytest.raises(ProblemDefinitionError, match="unknown field or derivative 'uxx'"):
        sb.solve(pr, 0.0)


def test_unknown_parameter_is_named():
    with pytest.raises(ProblemDefinitionError, match="unknown parameter 'lamda'"):
        sb.solve(bratu_problem(8), 0.0, params={"lamda": 1.0})


def test_nan_in_guess_is_named():
    with pytest.raises(ProblemDefinitionError, match="non-finite.*'u'"):
        sb.solve(bratu_problem(8), np.full(8, np.nan))


def test_guess_dict_with_unknown_field():
    with pytest.raises(ProblemDefinitionError, match="unknown field"):
        sb.solve(bratu_problem(8), {"u": 0.0, "w": 1.0})


def test_bad_boundary_key():
    with pytest.raises(ProblemDefinitionError, match="x=2"):
        sb.Problem(sb.Chebyshev(8, (0, 1)), ["u"], bratu_equations, {"x=2": dirichlet_zero})


def test_tiny_tolerance_is_raised_with_warning():
    from spectral_bulk.exceptions import AccuracyWarning

    with pytest.warns(AccuracyWarning):
        res = sb.solve(bratu_problem(20, 1.0), 0.0, tol=1e-18)
    assert res.converged


# ------------------------------------- Jacobian and parameter derivative in one pass
def _separate(problem, u, name, params=None):
    F, A = problem.linearize(u, params)
    return F, A, problem.param_derivative(u, name, params)


def test_linearize_with_param_batches_the_parameter_slot():
    # dF/dlam of u'' + lam e^u is e^u on interior rows and 0 on the Dirichlet rows
    # (differentiating the Bratu operator by hand; Gelfand-Bratu problem, common practice)
    problem = bratu_problem(16, 2.0)
    x = problem.grid.coords["x"]
    u = 0.3 * np.sin(np.pi * x)
    for _ in range(2):  # the first call checks the batched route against the separate one
        F, A, Fp = problem.linearize_with_param(u, "lam")
    assert problem._joint["lam"] is True
    Fs, As, Fps = _separate(problem, u, "lam")
    np.testing.assert_allclose(F, Fs, rtol=0, atol=1e-13 * np.abs(Fs).max())
    np.testing.assert_allclose(A, As, rtol=0, atol=1e-13 * np.abs(As).max())
    want = np.exp(u)
    want[[0, -1]] = 0.0
    np.testing.assert_allclose(Fp, want, rtol=1e-14, atol=1e-15)


@pytest.mark.parametrize("how", ["raises", "wrong"])
def test_linearize_with_param_falls_back_for_scalar_only_callbacks(how):
    import cmath

    if how == "raises":  # cmath.exp takes a (complex) scalar parameter, not an array
        def eqs(c, f, p):
            return f.u_xx + cmath.exp(p.s) * np.exp(f.u)
    else:  # broadcasts without raising, but wrongly: np.sum of a batched parameter
        def eqs(c, f, p):
            return f.u_xx + np.sum(p.s) * np.exp(f.u)
    problem = sb.Problem(sb.Chebyshev(14, (0.0, 1.0)), ["u"], eqs, DIRICHLET, {"s": 0.5})
    u = 0.2 * np.sin(np.pi * problem.grid.coords["x"])
    for _ in range(2):
        got = problem.linearize_with_param(u, "s")
    assert problem._joint["s"] is False
    for a, b in zip(got, _separate(problem, u, "s")):
        np.testing.assert_array_equal(a, b)
    with pytest.raises(ProblemDefinitionError, match="unknown parameter"):
        problem.linearize_with_param(u, "t")


@pytest.mark.parametrize("workspace", ["auto", "generic"])
def test_undamped_newton_in_1d_evaluates_once_per_iteration(workspace):
    # the linearisation at each new point serves the next step: evaluations are the guess,
    # each new point (one per iteration but the last, whose update is below tolerance) and
    # the certificate at the result (Gelfand-Bratu closed form, tests/problems.py)
    res = sb.solve(bratu_problem(20, 1.0), 0.0, options=NewtonOptions(damping=False, tol=1e-10,
                                                                     workspace=workspace))
    assert res.converged
    assert res.nfev == res.iterations + 1
    x = res.grid.coords["x"]
    assert np.abs(res.fields["u"] - bratu_exact(x, 1.0, "lower")).max() < 1e-10
