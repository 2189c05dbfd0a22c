"""The one-dimensional dense workspace against the generic one, and its compiled kernels
against their numpy references.

The generic workspace is the reference: both run the same Newton algorithm, so on every
problem they must give the same status, the same number of iterations and the same
solution to rounding.  The exact solutions used are those of ``tests/problems.py``
(Gelfand-Bratu closed form, common practice).
"""

import warnings

import numpy as np
import pytest

import spectral_bulk as sb
from spectral_bulk.exceptions import ConvergenceWarning, ProblemDefinitionError
from spectral_bulk.newton import NewtonOptions
from spectral_bulk.newton import _kernels as K
from spectral_bulk.newton._problem import split_rows
from spectral_bulk.newton._workspace import (DenseWorkspace, GenericWorkspace, _snorm, field_weights,
                                             workspace)

from .problems import bratu_equations, bratu_exact, dirichlet_zero

GENERIC = NewtonOptions(workspace="generic")
D = K.dispatchers()  # the compiled kernels; K._*_py are their plain references


def bratu(n=20, lam=1.0):
    return sb.Problem(sb.Chebyshev(n, (0.0, 1.0)), ["u"], bratu_equations,
                      {"left": dirichlet_zero, "right": dirichlet_zero}, {"lam": lam})


def coupled(n=18):
    # u'' - u v + g1 = 0, v'' + u' - sinh(v) + g2 = 0, w' = u with manufactured solution
    # u = cos x, v = x^2/2, w = sin x on [-1, 2] (common practice: the forcing is built
    # from the chosen solution); w is first order, so its equation holds at the right end
    def eqs(c, f, p):
        x = c.x
        g1 = np.cos(x) * (1 + x**2 / 2)
        g2 = np.sin(x) + np.sinh(x**2 / 2) - 1
        return [f.u_xx - f.u * f.v + g1, f.v_xx + f.u_x - np.sinh(f.v) + g2, f.w_x - f.u]

    def left(c, f, p):  # Dirichlet u, Robin v, Dirichlet w
        return [f.u - np.cos(-1.0), f.v_x + f.v - (-1.0 + 0.5), f.w - np.sin(-1.0)]

    def right(c, f, p):  # Neumann u and v; w's own equation holds there
        return [f.u_x + np.sin(2.0), f.v_x - 2.0, None]

    def exact(x):
        return {"u": np.cos(x), "v": x**2 / 2, "w": np.sin(x)}

    grid = sb.Chebyshev(n, (-1.0, 2.0))
    return sb.Problem(grid, ["u", "v", "w"], eqs, {"left": left, "right": right}, {}), exact


def both(problem, guess, **kw):
    a = sb.solve(problem, guess, **kw)
    b = sb.solve(problem, guess, options=NewtonOptions(workspace="generic", **kw))
    return a, b


def assert_same_run(a, b, atol=1e-12):
    assert a.status == b.status, (a.message, b.message)
    assert a.iterations == b.iterations and a.nfev == b.nfev
    np.testing.assert_allclose(a.state, b.state, rtol=0, atol=atol)
    # the last update norms are rounding-level numbers: compare them absolutely
    np.testing.assert_allclose(a.update_norms, b.update_norms, rtol=1e-6, atol=1e-11)
    np.testing.assert_allclose(a.damping, b.damping, rtol=1e-12)
    for f in a.tail:
        assert abs(a.tail[f] - b.tail[f]) <= 1e-14
    assert abs(a.residual - b.residual) <= 1e-14 or (np.isnan(a.residual) and np.isnan(b.residual))


# ------------------------------------------------------------------ selection
def test_workspace_selection():
    opts = NewtonOptions().validated()
    assert type(workspace(bratu(), {"lam": 1.0}, opts)) is DenseWorkspace
    assert type(workspace(bratu(), {"lam": 1.0}, GENERIC.validated())) is GenericWorkspace
    fd = sb.Problem(sb.Chebyshev(10, (0.0, 1.0)), ["u"], bratu_equations,
                    {"left": dirichlet_zero, "right": dirichlet_zero}, {"lam": 1.0},
                    linearization="finite-difference")
    assert type(workspace(fd, {"lam": 1.0}, opts)) is GenericWorkspace
    grid2 = sb.TensorGrid(sb.Fourier(6, 2 * np.pi, "x"), sb.Chebyshev(6, (0.0, 1.0), "y"))
    p2 = sb.Problem(grid2, ["u"], lambda c, f, p: f.u_yy - f.u, {"y=0": dirichlet_zero})
    assert type(workspace(p2, {}, opts)) is GenericWorkspace
    with pytest.raises(ValueError, match="workspace"):
        NewtonOptions(workspace="fast").validated()


# ------------------------------------------------------------ same algorithm
@pytest.mark.parametrize("lam,branch,n,guess", [(1.0, "lower", 24, 0.0), (3.0, "lower", 24, 0.0),
                                                (3.0, "upper", 32, lambda x: 8 * x * (1 - x)),
                                                (1.0, "upper", 48, lambda x: 20 * x * (1 - x))])
def test_bratu_both_branches_same_run(lam, branch, n, guess):
    # closed form of the Gelfand-Bratu problem (common practice), see tests/problems.py
    a, b = both(bratu(n, lam), guess)
    assert a.converged
    assert_same_run(a, b, atol=1e-11)
    x = a.grid.coords["x"]
    assert np.abs(a.fields["u"] - bratu_exact(x, lam, branch)).max() < 1e-9


def test_coupled_system_with_free_end_same_run():
    problem, exact = coupled()
    a, b = both(problem, lambda x: {"u": 1 - x**2 / 3, "v": 0.4 * (1 + x), "w": x})
    assert a.converged
    assert_same_run(a, b, atol=1e-11)
    x = a.grid.coords["x"]
    for f, v in exact(x).items():
        assert np.abs(a.fields[f] - v).max() < 1e-9


@pytest.mark.parametrize("case", ["diverges", "singular", "iteration_limit", "tail"])
def test_failures_same_status(case):
    kw = {}
    if case == "diverges":  # beyond the fold there is no solution
        problem, guess, status = bratu(20, 4.0), 0.0, 4
        kw = {"max_iter": 200}
    elif case == "singular":  # u'' = 0 with two Neumann conditions: constants are a null space
        problem = sb.Problem(sb.Chebyshev(12, (0.0, 1.0)), ["u"], lambda c, f, p: f.u_xx,
                             {"left": lambda c, f, p: [f.u_x], "right": lambda c, f, p: [f.u_x]})
        guess, status = 1.0, 2
    elif case == "iteration_limit":
        problem, guess, status = bratu(20, 3.0), 0.0, 1
        kw = {"max_iter": 2}
    else:  # a steep layer on 10 points is not resolved
        problem = sb.Problem(sb.Chebyshev(10, (-1.0, 1.0)), ["u"],
                             lambda c, f, p: 1e-3 * f.u_xx - f.u + np.tanh(c.x / 0.05),
                             {"left": lambda c, f, p: [f.u + 1], "right": lambda c, f, p: [f.u - 1]})
        guess, status = 0.0, 5
    with pytest.warns(ConvergenceWarning):
        a, b = both(problem, guess, **kw)
    assert a.status == b.status == status
    assert a.iterations == b.iterations
    if status != 2:
        np.testing.assert_allclose(a.state, b.state, rtol=0, atol=1e-10 * max(1, np.abs(b.state).max()))
    if status == 2:
        assert a.condition < 1e-12 and b.condition < 1e-12


def test_callbacks_without_batch_support_fall_back():
    # a residual that indexes its argument as one line of points cannot take a batch axis
    def eqs(c, f, p):
        u = f.u
        if u.ndim != 1:
            raise ValueError("one line of points only")
        return [f.u_xx + p.lam * np.exp(u)]

    problem = sb.Problem(sb.Chebyshev(16, (0.0, 1.0)), ["u"], eqs,
                         {"left": dirichlet_zero, "right": dirichlet_zero}, {"lam": 1.0})
    a = sb.solve(problem, 0.0)
    assert a.converged and problem._batched is False
    ref = sb.solve(bratu(16, 1.0), 0.0)
    np.testing.assert_allclose(a.state, ref.state, atol=1e-13)


def test_bad_callback_output_still_named():
    problem = sb.Problem(sb.Chebyshev(10, (0.0, 1.0)), ["u"], lambda c, f, p: [f.u_xx, f.u],
                         {"left": dirichlet_zero, "right": dirichlet_zero})
    with pytest.raises(ProblemDefinitionError, match="returned 2 entries, expected 1"):
        sb.solve(problem, 0.0)
    problem = sb.Problem(sb.Chebyshev(10, (0.0, 1.0)), ["u"], lambda c, f, p: [f.u_xx + 1],
                         {"left": lambda c, f, p: [np.ones(3)], "right": dirichlet_zero})
    with pytest.raises(ProblemDefinitionError, match="boundary condition 'left'"):
        sb.solve(problem, 0.0)


# ------------------------------------------------- leaving the real domain
@pytest.mark.parametrize("ws", ["auto", "generic"])
def test_linearisation_reports_a_state_outside_the_real_domain(ws):
    # sqrt of a negative number: complex arithmetic would return a finite, meaningless
    # residual; the linearisation must say NaN there, as a real evaluation does
    problem = sb.Problem(sb.Chebyshev(9, (0.0, 1.0)), ["u"], lambda c, f, p: f.u_xx - np.sqrt(f.u),
                         {"left": dirichlet_zero, "right": dirichlet_zero})
    x = problem.grid.coords["x"]
    u = np.cos(3 * x)  # negative for x > pi/6
    opts = NewtonOptions(workspace=ws).validated()
    F, A = workspace(problem, problem.merged_params(), opts).linearize(u)
    real = problem.residual(u)
    inside = x[1:-1] < np.pi / 6
    assert np.all(np.isnan(F[1:-1][~inside])) and np.all(np.isnan(real[1:-1][~inside]))
    np.testing.assert_allclose(F[1:-1][inside], real[1:-1][inside], rtol=1e-12)


@pytest.mark.parametrize("ws", ["auto", "generic"])
def test_damped_newton_stays_in_the_real_domain(ws):
    # u'' = 20 sqrt(u), u = 1e-3 at both ends: full steps from this guess leave u >= 0;
    # the damping must see that (a NaN residual) and shorten them
    problem = sb.Problem(sb.Chebyshev(14, (0.0, 1.0)), ["u"], lambda c, f, p: f.u_xx - 20 * np.sqrt(f.u),
                         {"left": lambda c, f, p: [f.u - 1.0], "right": lambda c, f, p: [f.u - 1.0]})
    res = sb.solve(problem, lambda x: 1.0 + 0.9 * np.sin(np.pi * x), options=NewtonOptions(workspace=ws),
                   tail_tol=1e-6)
    assert np.all(res.fields["u"] > 0)
    assert res.status in (0, 5)
    assert np.abs(problem.residual(res.state)).max() < 1e-8


# ------------------------------------------------- the compiled iteration
def _drive_cases():
    sqrt_problem = sb.Problem(sb.Chebyshev(14, (0.0, 1.0)), ["u"],
                              lambda c, f, p: f.u_xx - 20 * np.sqrt(f.u),
                              {"left": lambda c, f, p: [f.u - 1.0], "right": lambda c, f, p: [f.u - 1.0]})
    coupled8, _ = coupled(8)
    return {
        # damping with reductions and the prediction (upper branch from a poor guess)
        "bratu_upper": (bratu(20, 3.0), lambda x: 8 * x * (1 - x), {}),
        # non-finite trial residuals (the square root leaves its domain): halved steps
        "real_domain": (sqrt_problem, lambda x: 1.0 + 0.9 * np.sin(np.pi * x), {"tail_tol": 1e-6}),
        "coupled_24_unknowns": (coupled8, lambda x: {"u": 1 - x**2 / 3, "v": 0.4 * (1 + x), "w": x}, {}),
        "diverges": (bratu(20, 4.0), 0.0, {"max_iter": 200}),
        "iteration_limit": (bratu(20, 3.0), 0.0, {"max_iter": 2}),
    }


@pytest.mark.parametrize("case", list(_drive_cases()))
def test_compiled_iteration_is_the_python_loop(monkeypatch, case):
    # small 1-D problems run the damped iteration in one kernel (_kernels._drive_py); the
    # Python loop on the same workspace (drive disabled) is its reference: the same
    # arithmetic in the same order, so every record and the state must agree exactly
    problem, guess, kw = _drive_cases()[case]
    calls = []
    drive = DenseWorkspace.drive

    def spy(self, *a):
        calls.append(1)
        return drive(self, *a)

    monkeypatch.setattr(DenseWorkspace, "drive", spy)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        a = sb.solve(problem, guess, **kw)
        monkeypatch.setattr(DenseWorkspace, "drive", lambda self, *a: None)
        b = sb.solve(problem, guess, **kw)
        monkeypatch.setattr(DenseWorkspace, "drive", spy)
        monkeypatch.setattr(K.dispatchers(), "drive", K._drive_py)  # the plain body
        c = sb.solve(problem, guess, **kw)
    assert len(calls) == 2  # the compiled and the plain drive ran
    assert a.status == b.status == c.status and a.message == b.message
    for x in (a, c):
        assert (x.iterations, x.nfev, x.njev) == (b.iterations, b.nfev, b.njev)
        assert x.damping == b.damping
    assert a.update_norms == b.update_norms and a.residual_norms == b.residual_norms
    np.testing.assert_array_equal(a.state, b.state)
    assert a.residual == b.residual or np.isnan(a.residual) and np.isnan(b.residual)
    assert a.condition == b.condition and a.tail == b.tail
    # the plain body: without the compiled kernels' reassociated sums, equal to rounding
    np.testing.assert_allclose(c.state, b.state, rtol=0, atol=1e-12 * max(1, np.abs(b.state).max()))
    np.testing.assert_allclose(c.update_norms, b.update_norms, rtol=1e-8, atol=1e-14)


def test_compiled_iteration_hands_back_when_the_batch_stops_working():
    # callbacks that take the complex-step batch for three evaluations and then refuse
    # it: the compiled iteration stops at the top of its iteration and the Python loop
    # goes on with the generic path; the answer is the generic workspace's
    calls = []

    def eqs(c, f, p):
        if f.u.ndim == 2:
            calls.append(1)
            if len(calls) > 3:
                raise ValueError("no batches any more")
        return [f.u_xx + p.lam * np.exp(f.u)]

    problem = sb.Problem(sb.Chebyshev(20, (0.0, 1.0)), ["u"], eqs,
                         {"left": dirichlet_zero, "right": dirichlet_zero}, {"lam": 3.0})
    a = sb.solve(problem, lambda x: 8 * x * (1 - x), tail_tol=1e-6)  # (20 points: tail ~1e-9)
    b = sb.solve(bratu(20, 3.0), lambda x: 8 * x * (1 - x), options=NewtonOptions(workspace="generic",
                                                                                 tail_tol=1e-6))
    assert a.converged and len(calls) > 3 and problem._batched is False
    assert a.iterations == b.iterations and a.damping == b.damping
    np.testing.assert_allclose(a.state, b.state, rtol=0, atol=1e-12 * np.abs(b.state).max())


# --------------------------------------------------------------- kernels
def _random_case(seed, nf=3, n=11):
    rng = np.random.default_rng(seed)
    problem = sb.Problem(sb.Chebyshev(n, (-0.5, 2.0)), [f"u{i}" for i in range(nf)],
                         lambda c, f, p: [f.u0] * nf)
    na = len(problem.alphas)
    A = rng.normal(size=(nf, nf, na, n)) * rng.choice([0.0, 1e-3, 1.0, 1e4], size=(nf, nf, na, n))
    F = rng.normal(size=nf * n)
    u = rng.normal(size=nf * n) * 10.0 ** rng.integers(-9, 3, size=nf).repeat(n)
    problem.scales[:] = 10.0 ** rng.integers(-8, 1, size=nf)
    return problem, A, F, u


@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("compiled", [True, False])
def test_prepare_kernel_matches_numpy_reference(seed, compiled):
    problem, A, F, u = _random_case(seed)
    nf, n = problem.nfields, problem.grid.size
    size = nf * n
    J, w, rs = np.empty((size, size), order="F"), np.empty(nf), np.empty(size)
    fun = D.prepare_dense if compiled else K._prepare_dense_py
    DT = np.ascontiguousarray(problem._dense_ops().transpose(0, 2, 1))
    ok, rnorm, anorm = fun(A, DT, problem.row_sums(), F, u, problem.scales, J, w, rs, True)
    ok_r, rnorm_r, w_r, J_r, rs_r, anorm_r = K.prepare_dense_reference(problem, A, F, u)
    assert ok and ok_r
    np.testing.assert_allclose(w, w_r, rtol=1e-15)
    np.testing.assert_allclose(rnorm, rnorm_r, rtol=1e-13)
    np.testing.assert_allclose(rs, rs_r, rtol=1e-14)
    np.testing.assert_allclose(J, J_r, rtol=1e-13, atol=1e-15)
    np.testing.assert_allclose(anorm, anorm_r, rtol=1e-13)
    A[1, 2, 1, 3] = np.nan
    assert not fun(A, DT, problem.row_sums(), F, u, problem.scales, J, w, rs, True)[0]


@pytest.mark.parametrize("compiled", [True, False])
def test_small_kernels_match_numpy(compiled):
    problem, A, F, u = _random_case(7)
    nf, na, n = problem.nfields, len(problem.alphas), problem.grid.size
    pick = (lambda c, p: c) if compiled else (lambda c, p: p)
    w = field_weights(problem, u)
    wk = np.empty(nf)
    pick(D.field_weights, K._field_weights_py)(u, problem.scales, wk)
    np.testing.assert_array_equal(wk, w)
    b = np.random.default_rng(1).normal(size=u.size)
    assert pick(D.scaled_norm, K._scaled_norm_py)(F, w) == pytest.approx(_snorm(F, w), rel=1e-15)
    na_, nd_ = pick(D.damping_norms, K._damping_norms_py)(F, b, 0.3, w)
    assert na_ == pytest.approx(_snorm(F, w), rel=1e-15)
    assert nd_ == pytest.approx(_snorm(F - 0.7 * b, w), rel=1e-14)
    # tails against the grid's own (DCT) route
    C = np.ascontiguousarray(problem.grid.axes[0].coeffs(np.eye(n), axis=0))
    x = problem.grid.coords["x"]
    vals = np.concatenate([np.exp(-x), np.tanh(8 * x), 1e-9 * np.cos(x) + 1e-12 * x**9])
    out = np.empty(nf)
    pick(D.chebyshev_tails, K._chebyshev_tails_py)(vals, C, problem.scales, out)
    ref = problem.grid.tail(vals.reshape(nf, n), problem.scales)
    np.testing.assert_allclose(out, ref, rtol=1e-9, atol=1e-16)
    # complex-step rows -> residual and coefficients
    rng = np.random.default_rng(3)
    rows = rng.normal(size=(nf, nf * na + 1, n)) + 1j * rng.normal(size=(nf, nf * na + 1, n)) * 1e-30
    rows[:, -1, :].imag = 0.0
    rows[1, -1, 4] += 1e-3j  # out of the real domain at one point
    Fk, Ak = np.empty(nf * n), np.empty((nf, nf, na, n))
    pick(D.split_rows, K._split_rows_py)(rows, 1e30, Fk, Ak)
    Fr, Ar = split_rows(rows, nf, na, n)
    np.testing.assert_array_equal(np.isnan(Fk), np.isnan(Fr))
    assert np.isnan(Fk[n + 4]) and np.isnan(Fk).sum() == 1
    np.testing.assert_allclose(Fk[~np.isnan(Fk)], Fr[~np.isnan(Fr)], rtol=0)
    np.testing.assert_allclose(Ak, Ar, rtol=1e-15)
    lu = np.triu(rng.normal(size=(6, 6))) + np.diag([5, 1, 2, 3, 4, 0.5])
    d = np.abs(np.diag(lu))
    assert pick(D.pivot_ratio, K._pivot_ratio_py)(lu) == pytest.approx(d.min() / d.max(), rel=1e-15)


@pytest.mark.parametrize("compiled", [True, False])
def test_norm_kernels_propagate_nan_like_numpy(compiled):
    w = np.array([1.0, 2.0])
    for bad, where in [(np.nan, 1), (np.inf, 1), (np.nan, 0), (np.nan, 2)]:
        x = np.array([0.1, 0.05, 0.3, 0.2])
        x[where] = bad
        norm = D.scaled_norm if compiled else K._scaled_norm_py
        damp = D.damping_norms if compiled else K._damping_norms_py
        ref = _snorm(x, w)
        got = norm(x, w)
        assert (np.isnan(ref) and np.isnan(got)) or ref == got
        got2 = damp(np.zeros(4), x, 0.5, w)[1]
        ref2 = _snorm(-0.5 * x, w)
        assert (np.isnan(ref2) and np.isnan(got2)) or ref2 == got2


@pytest.mark.parametrize("compiled", [True, False])
def test_fill_batch_kernel_matches_numpy(compiled):
    from spectral_bulk.newton._problem import _H, complex_step_perturbation

    problem, _, _, u = _random_case(11)
    nf, na, n = problem.nfields, len(problem.alphas), problem.grid.size
    dstack = problem._plan()["dstack"]
    ref = (u.reshape(nf, n) @ dstack).reshape(nf, na, 1, n) + complex_step_perturbation(nf, na)
    buf = np.empty((nf, na, nf * na + 1, n), dtype=complex)
    (D.fill_batch if compiled else K._fill_batch_py)(u, dstack, _H, buf)
    np.testing.assert_allclose(buf.real, ref.real, rtol=1e-13, atol=1e-13 * np.abs(ref.real).max())
    np.testing.assert_array_equal(buf.imag, ref.imag)


# ------------------------------------------------ fused step and trial kernels
def _factors(rng, size):
    # a matrix that needs row interchanges (small leading diagonal), as LAPACK getrf factors it
    import scipy.linalg as sla

    M = rng.normal(size=(size, size)) + np.diag(np.full(size, 1e-3))
    rscale = 1.0 / np.abs(M).max(axis=1)
    lu, piv, info = sla.lapack.dgetrf(np.asfortranarray(M * rscale[:, None]))
    assert info == 0 and np.any(piv != np.arange(size))
    return M, lu, piv, rscale


@pytest.mark.parametrize("compiled", [True, False])
def test_lu_solve_kernel_matches_lapack(compiled):
    # reference: scipy.linalg.lu_solve on the same getrf factors (LAPACK getrs)
    import scipy.linalg as sla

    rng = np.random.default_rng(5)
    M, lu, piv, rscale = _factors(rng, 23)
    rhs = rng.normal(size=23)
    out = np.empty(23)
    (D.lu_solve if compiled else K._lu_solve_py)(lu, piv, rscale, rhs, out)
    ref = -sla.lu_solve((lu, piv), rscale * rhs)
    np.testing.assert_allclose(out, ref, rtol=1e-12, atol=1e-12 * np.abs(ref).max())
    np.testing.assert_allclose(M @ out, -rhs, atol=1e-10 * np.abs(rhs).max())


@pytest.mark.parametrize("compiled", [True, False])
def test_newton_update_and_trial_kernels_match_numpy(compiled):
    import scipy.linalg as sla
    from spectral_bulk.newton._problem import _H, complex_step_perturbation

    pick = (lambda c, p: c) if compiled else (lambda c, p: p)
    problem, _, _, u = _random_case(13)
    nf, na, n = problem.nfields, len(problem.alphas), problem.grid.size
    rng = np.random.default_rng(2)
    _, lu, piv, rscale = _factors(rng, nf * n)
    w = field_weights(problem, u)
    F = rng.normal(size=nf * n)
    dx = np.empty(nf * n)
    ratio, ndx = pick(D.newton_update, K._newton_update_py)(lu, piv, rscale, F, w, dx, 1e-12)
    ref = -sla.lu_solve((lu, piv), rscale * F)
    d = np.abs(np.diag(lu))
    assert ratio == pytest.approx(d.min() / d.max(), rel=1e-15)
    np.testing.assert_allclose(dx, ref, rtol=1e-12, atol=1e-12 * np.abs(ref).max())
    assert ndx == pytest.approx(_snorm(ref, w), rel=1e-12)
    # a suspect factorisation (pivot ratio below the threshold) is left to the caller
    assert np.isnan(pick(D.newton_update, K._newton_update_py)(lu, piv, rscale, F, w, dx, 2 * ratio)[1])

    # the trial point and its batch
    dstack = problem._plan()["dstack"]
    trial = np.empty(nf * n)
    buf = np.empty((nf, na, nf * na + 1, n), dtype=complex)
    pick(D.trial_point, K._trial_point_py)(u, 0.3, dx, trial, dstack, _H, buf)
    np.testing.assert_allclose(trial, u + 0.3 * dx, rtol=1e-15, atol=0)
    want = (trial.reshape(nf, n) @ dstack).reshape(nf, na, 1, n) + complex_step_perturbation(nf, na)
    np.testing.assert_allclose(buf.real, want.real, rtol=1e-13, atol=1e-13 * np.abs(want.real).max())
    np.testing.assert_array_equal(buf.imag, want.imag)

    # what the damping test needs at the trial point, against split_rows, LAPACK and the norms
    rows = rng.normal(size=(nf, nf * na + 1, n)) + 1j * rng.normal(size=(nf, nf * na + 1, n)) * 1e-30
    rows[:, -1, :].imag = 0.0
    Ft, At, dxbar = np.empty(nf * n), np.empty((nf, nf, na, n)), np.empty(nf * n)
    finite, nbar, dd, nnew = pick(D.after_trial, K._after_trial_py)(
        rows, 1 / _H, Ft, At, lu, piv, rscale, dx, 0.3, w, trial, problem.scales, dxbar)
    Fr, Ar = split_rows(rows, nf, na, n)
    bar = -sla.lu_solve((lu, piv), rscale * Fr)
    assert finite
    np.testing.assert_allclose(Ft, Fr, rtol=0)
    np.testing.assert_allclose(At, Ar, rtol=1e-15)
    np.testing.assert_allclose(dxbar, bar, rtol=1e-12, atol=1e-12 * np.abs(bar).max())
    assert nbar == pytest.approx(_snorm(bar, w), rel=1e-12)
    assert dd == pytest.approx(_snorm(bar - 0.7 * dx, w), rel=1e-12)
    assert nnew == pytest.approx(_snorm(bar, field_weights(problem, trial)), rel=1e-12)
    rows[2, -1, 5] += 1e-3j  # the trial left the real domain at one point
    assert not pick(D.after_trial, K._after_trial_py)(rows, 1 / _H, Ft, At, lu, piv, rscale, dx, 0.3, w,
                                                      trial, problem.scales, dxbar)[0]


@pytest.mark.parametrize("small", [True, False])
def test_dense_step_and_trial_match_generic(monkeypatch, small):
    # the fused operations of the 1-D workspace against the generic composition; the
    # dense step factorises in the compiled kernel (small) or by LAPACK
    import spectral_bulk.newton._workspace as W

    monkeypatch.setattr(W, "_SMALL_LU", 10**6 if small else 0)
    problem, _ = coupled()
    params, opts = {}, NewtonOptions().validated()
    dense, generic = DenseWorkspace(problem, params, opts), GenericWorkspace(problem, params, opts)
    x = problem.grid.coords["x"]
    u = np.concatenate([1 - x**2 / 3, 0.4 * (1 + x), x])
    steps = []
    for ws in (dense, generic):
        F, A = ws.linearize(u)
        st = ws.step(u, F, A)
        tr = ws.trial(u, 0.5, st.dx, st, True, True)
        steps.append((st, tr))
    (sd, td), (sg, tg) = steps
    assert sd.status == sg.status == 0
    np.testing.assert_allclose(sd.dx, sg.dx, rtol=0, atol=1e-12 * np.abs(sg.dx).max())
    np.testing.assert_allclose([sd.ndx, sd.rnorm], [sg.ndx, sg.rnorm], rtol=1e-12)
    np.testing.assert_allclose(td.u, tg.u, rtol=0, atol=1e-13 * np.abs(tg.u).max())
    # the trial points differ by rounding, amplified in F by the second-derivative matrices
    np.testing.assert_allclose(td.F, tg.F, rtol=0, atol=1e-11 * np.abs(tg.F).max())
    np.testing.assert_allclose(td.dxbar, tg.dxbar, rtol=0, atol=1e-11 * np.abs(tg.dxbar).max())
    np.testing.assert_allclose([td.nbar, td.dd, td.nnew], [tg.nbar, tg.dd, tg.nnew], rtol=1e-10)


# ------------------------------------------------------- small dense systems
def _apply_getrf(lu, piv):
    """``P L U`` from getrf factors: the row interchanges undone in reverse order."""
    n = lu.shape[0]
    M = (np.tril(lu, -1) + np.eye(n)) @ np.triu(lu)
    for i in range(n - 1, -1, -1):
        M[[i, piv[i]]] = M[[piv[i], i]]
    return M


@pytest.mark.parametrize("compiled", [True, False])
def test_lu_factor_kernel_matches_lapack_getrf(compiled):
    # reference: LAPACK getrf through scipy.linalg.lapack (partial pivoting on the first
    # entry of largest modulus of each column, as idamax chooses it)
    import scipy.linalg as sla

    fun = D.lu_factor if compiled else K._lu_factor_py
    rng = np.random.default_rng(11)
    for n in (1, 2, 5, 17, 40):
        M = rng.normal(size=(n, n))
        M[0, 0] = 1e-3  # the first column needs an interchange
        lu_r, piv_r, info_r = sla.lapack.dgetrf(np.asfortranarray(M))
        a, piv = np.asfortranarray(M.copy()), np.empty(n, dtype=np.int32)
        assert fun(a, piv) == info_r == 0
        np.testing.assert_array_equal(piv, piv_r)
        np.testing.assert_allclose(a, lu_r, rtol=0, atol=1e-13 * np.abs(lu_r).max())
        np.testing.assert_allclose(_apply_getrf(a, piv), M, rtol=0, atol=1e-13 * np.abs(M).max())
    # an exactly singular matrix: info names the first zero pivot (1-based), as getrf's
    M = rng.normal(size=(6, 6))
    M[:, 3] = 0.0
    info_r = sla.lapack.dgetrf(np.asfortranarray(M))[2]
    a, piv = np.asfortranarray(M.copy()), np.empty(6, dtype=np.int32)
    assert fun(a, piv) == info_r == 4


@pytest.mark.parametrize("compiled", [True, False])
def test_rcond_kernel_matches_lapack_gecon(compiled):
    # references: LAPACK gecon on the same factors (the same 1-norm estimator, "FORTRAN
    # codes for estimating the one-norm of a real or complex matrix", ACM TOMS 14 (1988) 381,
    # doi:10.1145/50063.214386, details from memory), and the exact reciprocal condition number
    # 1 / (||M||_1 ||M^-1||_1) from numpy, which the estimate never undercuts
    import scipy.linalg as sla

    fun = D.rcond if compiled else K._rcond_py
    rng = np.random.default_rng(12)
    for case in range(60):
        n = 2 + case % 29
        M = rng.normal(size=(n, n))
        if case % 3 == 1:  # badly scaled columns
            M = M * 10.0 ** rng.uniform(-6, 6, n)
        if case % 3 == 2:  # nearly dependent columns
            M[:, 0] = M[:, 1] + 1e-9 * rng.normal(size=n)
        lu, piv, info = sla.lapack.dgetrf(np.asfortranarray(M))
        anorm = np.abs(M).sum(axis=0).max()
        got = fun(lu, anorm)
        ref = sla.lapack.dgecon(lu, anorm, norm="1")[0]
        exact = 1.0 / (anorm * np.abs(np.linalg.inv(M)).sum(axis=0).max())
        assert got == pytest.approx(ref, rel=1e-10), (case, got, ref)
        assert got >= exact * (1 - 1e-8), (case, got, exact)
    # exactly singular (a zero pivot) and a zero matrix norm
    M = rng.normal(size=(5, 5))
    M[:, 2] = 0.0
    lu = sla.lapack.dgetrf(np.asfortranarray(M))[0]
    assert fun(lu, 1.0) == 0.0
    assert fun(np.asfortranarray(np.eye(3)), 0.0) == 0.0


@pytest.mark.parametrize("compiled", [True, False])
def test_small_step_kernel_matches_its_parts(compiled):
    # the fused step against its parts with LAPACK getrf in the middle
    import scipy.linalg as sla

    fun = D.small_step if compiled else K._small_step_py
    problem, A, F, u = _random_case(6, nf=2, n=9)
    nf, n = problem.nfields, problem.grid.size
    size = nf * n
    DT = np.ascontiguousarray(problem._dense_ops().transpose(0, 2, 1))
    R = problem.row_sums()
    J, w, rs = np.empty((size, size), order="F"), np.empty(nf), np.empty(size)
    ok, rnorm, anorm = D.prepare_dense(A, DT, R, F, u, problem.scales, J, w, rs, True)
    lu, piv, info = sla.lapack.dgetrf(J)
    dx = np.empty(size)
    ratio, ndx = D.newton_update(lu, piv, rs, F, w, dx, 1e-12)
    J2, w2, rs2, piv2, dx2 = (np.empty((size, size), order="F"), np.empty(nf), np.empty(size),
                              np.empty(size, dtype=np.int32), np.empty(size))
    got = fun(A, DT, R, F, u, problem.scales, J2, w2, rs2, piv2, dx2, 1e-12)
    assert got[0] and got[3] == info == 0
    np.testing.assert_allclose(got[1:3], [rnorm, anorm], rtol=1e-13)
    np.testing.assert_array_equal(piv2, piv)
    np.testing.assert_allclose(J2, lu, rtol=0, atol=1e-12 * np.abs(lu).max())
    np.testing.assert_allclose(dx2, dx, rtol=0, atol=1e-11 * np.abs(dx).max())
    assert got[4] == pytest.approx(ratio, rel=1e-10) and got[5] == pytest.approx(ndx, rel=1e-10)
    A[1, 0, 2, 4] = np.nan  # a non-finite coefficient stops it before the factorisation
    assert fun(A, DT, R, F, u, problem.scales, J2, w2, rs2, piv2, dx2, 1e-12)[0] is False


@pytest.mark.parametrize("compiled", [True, False])
def test_certificate_kernel_matches_generic_parts(compiled):
    # the fused certificate (tails and backward error in one call) against the generic
    # workspace's numpy routes: the grid's DCT tails and residual_norm
    problem, A, F, u = _random_case(5)
    nf, n = problem.nfields, problem.grid.size
    C = np.ascontiguousarray(problem.grid.axes[0].coeffs(np.eye(n), axis=0))
    tails = np.empty(nf)
    fun = D.certificate if compiled else K._certificate_py
    r = fun(A, problem.row_sums(), F, u, problem.scales, C, tails)
    gen = GenericWorkspace(problem, {}, NewtonOptions().validated())
    tails_r, r_r = gen.certificate(u, F, A)
    np.testing.assert_allclose(tails, tails_r, rtol=1e-9, atol=1e-16)
    assert r == pytest.approx(r_r, rel=1e-13)
    F2 = F.copy()
    F2[3] = np.inf
    assert np.isnan(fun(A, problem.row_sums(), F2, u, problem.scales, C, tails))
    assert np.isnan(gen.certificate(u, F2, A)[1])
    A[0, 1, 2, 5] = np.nan
    assert np.isnan(fun(A, problem.row_sums(), F, u, problem.scales, C, tails))
    np.testing.assert_allclose(tails, tails_r, rtol=1e-9, atol=1e-16)  # the tails do not need A


@pytest.mark.parametrize("complex_out", [False, True])
def test_dense_real_residual_matches_generic(complex_out):
    # the dense workspace's residual (the state alone, in real arithmetic) against the
    # generic evaluation; a callback that computes in complex arithmetic gives NaN where
    # it leaves the real domain, as the complex-step linearisation reports it
    sqrt = (lambda v: np.sqrt(v + 0j)) if complex_out else np.sqrt

    def eqs(c, f, p):
        return [f.u_xx - sqrt(f.u) + f.v, f.v_x - f.u]

    def left(c, f, p):
        return [f.u - 1.0 + 0 * sqrt(f.u), None]

    problem = sb.Problem(sb.Chebyshev(12, (0.0, 1.0)), ["u", "v"], eqs,
                         {"left": left, "right": lambda c, f, p: [f.u - 0.5, f.v]})
    x = problem.grid.coords["x"]
    opts = NewtonOptions().validated()
    ws = workspace(problem, {}, opts)
    assert type(ws) is DenseWorkspace
    for u in (np.concatenate([1 + x, np.sin(x)]), np.concatenate([np.cos(4 * x), x])):
        with np.errstate(invalid="ignore"):
            got, ref, lin = ws.residual(u), problem.residual(u), ws.linearize(u)[0]
        np.testing.assert_array_equal(np.isnan(got), np.isnan(lin))
        np.testing.assert_array_equal(np.isnan(got), np.isnan(ref))
        ok = ~np.isnan(ref)
        np.testing.assert_allclose(got[ok], ref[ok], rtol=0, atol=1e-13 * np.abs(ref[ok]).max())
    assert np.isnan(got).any()  # cos(4x) < 0 on part of the grid


def test_concurrent_solves_of_one_problem_match_sequential_ones():
    # the dense workspace's evaluation buffers are per thread: threads solving the same
    # problem at once must get exactly the sequential iterates (with one shared buffer they
    # read each other's states; some results even passed their certificate off by 4e-9)
    import sys
    import threading

    problem = bratu(17, 1.0)
    lams = [0.5, 1.0, 2.0, 3.0]
    ref = {lam: sb.solve(problem, 0.0, params={"lam": lam}, tol=1e-8).state for lam in lams}
    bad = []

    def work(lam):
        for _ in range(60):
            res = sb.solve(problem, 0.0, params={"lam": lam}, tol=1e-8)
            if not np.array_equal(res.state, ref[lam]):
                bad.append((lam, res.converged))

    interval = sys.getswitchinterval()
    sys.setswitchinterval(1e-6)  # switch threads as often as the interpreter allows
    try:
        threads = [threading.Thread(target=work, args=(lam,)) for lam in lams]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
    finally:
        sys.setswitchinterval(interval)
    assert not bad, bad[:5]


def test_used_problem_pickles_without_its_buffers():
    # the per-grid cache (with per-thread buffers) is dropped on pickling and rebuilt
    import pickle

    problem = bratu(14, 1.0)
    a = sb.solve(problem, 0.0, tol=1e-8)
    b = sb.solve(pickle.loads(pickle.dumps(problem)), 0.0, tol=1e-8)
    np.testing.assert_array_equal(a.state, b.state)
