"""Newton-Kantorovich iteration with affine-invariant damping.

The damping strategy is the error-oriented one with the natural monotonicity
test ("Newton Methods for Nonlinear Problems: Affine Invariance and Adaptive
Algorithms", Springer Series in Computational Mathematics 35, 2004,
:doi:`10.1007/978-3-642-23899-4`, chapter 3): a trial step ``u + lam dx`` is accepted
when the simplified correction ``dxbar = -J(u)^{-1} F(u + lam dx)`` satisfies
``||dxbar|| < (1 - lam/4) ||dx||``; otherwise ``lam`` is reduced using the local
Lipschitz estimate, and a too-small ``lam`` means the iteration diverges from
this guess.  Norms are the scaled update norm defined in :class:`NewtonOptions`.

For small one-dimensional systems the same iteration runs compiled
(:func:`~spectral_bulk.newton._kernels._drive_py`, through the workspace's ``drive``);
a change to the loop below must be made there too (``tests/test_workspace.py``
demands that the two agree bit for bit).
"""

import dataclasses
import math
import time

import numpy as np

from .._utils import EPS, emit_user_level_warning, validate_tol
from ..exceptions import ConvergenceError, ConvergenceWarning, ProblemDefinitionError
from . import _kernels as _K
from ._linalg import assemble_dense
from ._problem import Problem
from ._result import SolveResult
from ._workspace import _snorm, field_weights, residual_norm, workspace

__all__ = ["solve", "NewtonOptions", "MESSAGES", "check_jacobian", "initial_state", "scaled_norm",
           "residual_norm"]

#: Status codes of :func:`solve`; 0 is success.  Messages are templates.
MESSAGES = {
    0: "converged: update {update:.1e}, residual {residual:.1e} and spectral tails "
       "(worst {tail:.1e}) below tolerance {tol:.1e}",
    1: "iteration limit reached ({max_iter} iterations) with update {update:.1e} above "
       "tolerance {tol:.1e}: raise `max_iter` or improve the guess",
    2: "singular Jacobian (reciprocal condition estimate {rcond:.1e}): the problem is "
       "degenerate at this point (fold, branch point, missing condition or gauge freedom)",
    3: "non-finite residual ({where}): check the equations' domain and the guess",
    4: "damping factor fell below {lambda_min:.0e}: Newton diverges from this guess; "
       "start closer to a solution or follow a branch with continuation",
    5: "Newton converged but the spectral tail is above {tail_tol:.1e} in field(s) "
       "{fields}: the grid is too coarse, increase the number of points or adapt the map",
    6: "update converged but the residual stagnates at {residual:.1e} above tolerance "
       "{tol:.1e}: the problem is ill-conditioned at this resolution",
    7: "linear solver failed: {why}",
}


@dataclasses.dataclass
class NewtonOptions:
    """Tolerances and algorithm constants of :func:`solve`.

    Attributes
    ----------
    tol : float
        Tolerance on the scaled update norm
        ``max_f ||dx_f||_inf / max(||u_f||_inf, scale_f)`` and on the scaled
        residual (componentwise backward error)
        ``max_{j,p} |F_j[p]| / sum_{i,alpha} |A[j,i,alpha,p]| w_i R_alpha[p]``
        with ``w_i = max(||u_i||_inf, scale_i)`` and ``R_alpha`` the absolute row
        sums of ``D^alpha``: the residual relative to the size of the terms of the
        linearised equation.
    tail_tol : float or None
        Tolerance on each field's spectral tail; ``None`` means ``tol``.
    max_iter : int
        Maximum number of Newton iterations (Jacobian evaluations).
    damping : bool
        Use the affine-invariant damping; ``False`` gives undamped Newton.
    lambda_init, lambda_min : float
        First damping factor, and the factor below which the iteration is
        declared divergent.
    linear_solver : {"auto", "dense", "gmres"}
        ``auto``: dense LU in 1-D and for small systems, GMRES otherwise.
    linear_rtol : float or None
        GMRES relative tolerance; ``None`` derives ``min(1e-3, 1e-2 tol)`` from
        ``tol`` (an inexact Newton step with relative error ``eta`` changes the
        converged update by ``eta ||dx||``, so ``eta = 1e-2 tol`` keeps the final
        update accurate to well within ``tol``).
    workspace : {"auto", "generic"}
        ``auto`` uses the preallocated, compiled one-dimensional dense workspace
        where it applies (1-D grid, dense LU, complex-step linearisation) and the
        generic one otherwise; ``generic`` always uses the generic one (same
        algorithm and results, more per-iteration overhead).
    """

    tol: float = 1e-10
    tail_tol: float | None = None
    max_iter: int = 50
    damping: bool = True
    lambda_init: float = 1.0
    lambda_min: float = 1e-8
    linear_solver: str = "auto"
    linear_rtol: float | None = None
    workspace: str = "auto"

    def validated(self):
        out = dataclasses.replace(self)
        out.tol = validate_tol(self.tol)
        out.tail_tol = out.tol if self.tail_tol is None else validate_tol(self.tail_tol, "tail_tol")
        if int(self.max_iter) < 1:
            raise ValueError(f"`max_iter` must be >= 1, got {self.max_iter}")
        out.max_iter = int(self.max_iter)
        if not 0 < self.lambda_min <= self.lambda_init <= 1:
            raise ValueError("need 0 < `lambda_min` <= `lambda_init` <= 1")
        if self.workspace not in ("auto", "generic"):
            raise ValueError(f"`workspace` must be 'auto' or 'generic', got {self.workspace!r}")
        if out.linear_rtol is None:
            out.linear_rtol = max(min(1e-3, 1e-2 * out.tol), 10 * EPS)
        return out


_DEFAULT_OPTIONS = {}  # validated defaults by shortcut values (solve is called in tight loops)


def _options(options, shortcuts):
    """Validated options: ``options`` (or the defaults) with the ``solve`` shortcuts applied."""
    if options is not None:
        return dataclasses.replace(options, **shortcuts).validated()
    try:
        key = tuple(sorted(shortcuts.items()))
        cached = _DEFAULT_OPTIONS.get(key)
    except TypeError:  # an unhashable shortcut value: no caching
        key = cached = None
    if cached is None:
        cached = dataclasses.replace(NewtonOptions(), **shortcuts).validated()
        raised = any(k in shortcuts and cached.__dict__[k] != shortcuts[k] for k in ("tol", "tail_tol"))
        if key is not None and not raised and len(_DEFAULT_OPTIONS) < 256:
            _DEFAULT_OPTIONS[key] = cached  # (a raised tolerance warns on every call)
    # shared, read-only: nothing in the engine assigns to options
    return cached


def _status_docs():
    lines = ["Status codes", "------------"]
    for k, v in MESSAGES.items():
        lines.append(f"{k} : {v.split(':')[0]}")
    return "\n".join(lines)


def scaled_norm(problem, dx, u):
    """``max_f ||dx_f||_inf / max(||u_f||_inf, scale_f)``."""
    return _snorm(np.asarray(dx), field_weights(problem, np.asarray(u)))


def initial_state(problem, guess):
    """Flat state vector from a guess (callable, dict, array or previous result)."""
    grid = problem.grid
    nf = problem.nfields
    if isinstance(guess, SolveResult):
        missing = [f for f in problem.fields if f not in guess.fields]
        if missing:
            raise ProblemDefinitionError(f"the previous result has no field(s) {missing}")
        if guess.grid == grid:
            vals = [guess.fields[f] for f in problem.fields]
        else:
            mesh = [grid.coords[n] for n in grid.names]
            ev = guess(*mesh)
            if not isinstance(ev, dict):
                ev = {guess.problem.fields[0]: ev}
            vals = [ev[f] for f in problem.fields]
        guess = dict(zip(problem.fields, vals))
    elif callable(guess):
        mesh = [grid.coords[n].reshape(grid.shape) for n in grid.names]
        try:
            guess = guess(*mesh)
        except Exception as exc:
            raise ProblemDefinitionError(f"the guess function failed: {exc}") from exc
    if isinstance(guess, dict):
        unknown = set(guess) - set(problem.fields)
        if unknown:
            raise ProblemDefinitionError(
                f"guess names unknown field(s) {sorted(unknown)}; fields are {list(problem.fields)}"
            )
        missing = [f for f in problem.fields if f not in guess]
        if missing:
            raise ProblemDefinitionError(f"guess is missing field(s) {missing}")
        arrs = []
        for f in problem.fields:
            try:
                arrs.append(np.broadcast_to(np.asarray(guess[f], dtype=float), grid.shape).ravel())
            except ValueError:
                raise ProblemDefinitionError(
                    f"guess for field {f!r} has shape {np.shape(guess[f])}, expected {grid.shape}"
                ) from None
        state = np.concatenate(arrs)
    else:
        arr = np.asarray(guess, dtype=float)
        if arr.size == problem.size:
            state = arr.ravel().copy()
        elif nf == 1 and arr.size in (1, grid.size):
            state = np.broadcast_to(arr, grid.shape).ravel().copy()
        else:
            raise ProblemDefinitionError(
                f"guess has shape {arr.shape}; expected {(nf,) + grid.shape} or a dict by field"
            )
    if not np.isfinite(state).all():
        bad = [f for f, v in zip(problem.fields, problem.split(state)) if not np.all(np.isfinite(v))]
        raise ProblemDefinitionError(f"the guess has non-finite values (NaN or inf) in field(s) {bad}")
    return state


def solve(problem, guess, *, params=None, tol=None, max_iter=None, damping=None,
          tail_tol=None, linear_solver=None, raise_on_failure=False, options=None):
    """Solve a :class:`~spectral_bulk.Problem` by damped Newton-Kantorovich iteration.

    Parameters
    ----------
    problem : Problem
    guess : callable, dict, ndarray or SolveResult
        Initial state: ``guess(*coords) -> dict`` (or an array for one field)
        evaluated on the grid-shaped coordinate arrays; a dict field -> values;
        an array of shape ``(nfields,) + grid.shape``; or a previous result,
        interpolated onto this grid.
    params : dict, optional
        Parameter values overriding ``problem.params``.
    tol, max_iter, damping, tail_tol, linear_solver :
        Shortcuts for the fields of :class:`NewtonOptions`.
    raise_on_failure : bool
        Raise :class:`~spectral_bulk.exceptions.ConvergenceError` instead of
        returning a failed result (which is the default, with a warning).
    options : NewtonOptions, optional

    Returns
    -------
    SolveResult
        Always returned (unless ``raise_on_failure``); check ``converged``.

    Raises
    ------
    ProblemDefinitionError
        The callbacks are malformed (wrong count or shape of residuals, unknown
        names) or the guess is not finite.

    Warns
    -----
    ConvergenceWarning
        When the result fails its certificate.

    Notes
    -----
    Converged means: the scaled update is below ``tol``, the scaled residual is
    below ``tol`` and each field's spectral tail is below ``tail_tol``.

    {status_docs}
    """
    if not isinstance(problem, Problem):
        raise TypeError(f"`problem` must be a Problem, got {type(problem).__name__}")
    shortcuts = dict(tol=tol, max_iter=max_iter, damping=damping, tail_tol=tail_tol,
                     linear_solver=linear_solver)
    shortcuts = {k: v for k, v in shortcuts.items() if v is not None}
    opts = _options(options, shortcuts)
    t0 = time.perf_counter()
    params = problem.merged_params(params)
    u = initial_state(problem, guess)
    with np.errstate(all="ignore"):  # the callbacks' domain is checked through the residual
        res = _newton(problem, u, params, opts, first_is_input=True)
    res.wall_time = time.perf_counter() - t0
    if not res.converged:
        if raise_on_failure:
            raise ConvergenceError(res.message, res)
        emit_user_level_warning(f"{problem.name}: {res.message}", ConvergenceWarning)
    return res


solve.__doc__ = solve.__doc__.replace("{status_docs}", _status_docs().replace("\n", "\n    "))


def _newton(problem, u, params, opts, first_is_input=False, keep_factor=False, final_residual=None):
    """The Newton iteration behind :func:`solve`.

    ``keep_factor``: a converged result keeps its last dense factorisation as
    ``_jacobian_solver`` (for :func:`~spectral_bulk.newton.polish`; the caller drops it when
    done, so that stored results do not hold n^2 arrays).
    ``final_residual``: ``state -> F`` (double) for the certificate of a returned state whose
    residual is not at hand, in place of the workspace's (a caller that evaluates it anyway,
    say in extended precision, keeps that evaluation); ``None`` from it falls back.
    """
    tol = opts.tol
    nfev = njev = 0
    rnorms, unorms, damping = [], [], []
    fmt = dict(tol=tol, max_iter=opts.max_iter, lambda_min=opts.lambda_min, tail_tol=opts.tail_tol,
               update=np.nan, residual=np.nan, tail=np.nan, rcond=np.nan, where="", fields="",
               why="")
    # In 1-D the trial point is linearised right away (its real part is the residual
    # the monotonicity test needs); when the step is accepted, as it is near the
    # solution (and always without damping), that linearisation serves the next iteration.
    linearize_trial = problem.grid.ndim == 1
    ws = workspace(problem, params, opts)

    def finish(status, state, A=None, F=None, solver=None):
        nonlocal nfev
        if F is None:
            F = final_residual(state) if final_residual is not None else None
            if F is None:
                F = ws.residual(state)
            nfev += 1
        tails, r = ws.certificate(state, F, A)
        tail = dict(zip(problem.fields, tails.tolist()))
        worst = max(tail.values())
        if status == 0:
            if not r <= tol:
                status = 6
            elif worst > opts.tail_tol:
                status = 5
                fmt["fields"] = ", ".join(f for f, t in tail.items() if t > opts.tail_tol)
        rcond = solver.rcond if solver is not None else np.nan
        fmt.update(residual=r, tail=worst, rcond=rcond,
                   update=unorms[-1] if unorms else np.nan)
        res = SolveResult(problem, state, params, status=status, message=(MESSAGES[status], fmt),
                          iterations=njev, residual=r, update=fmt["update"], tail=tail,
                          condition=rcond, linear_solver=getattr(solver, "kind", None), nfev=nfev,
                          njev=njev, residual_norms=rnorms, update_norms=unorms, damping=damping,
                          tol=tol)
        keep = keep_factor and status == 0 and getattr(solver, "kind", None) == "dense"
        res._jacobian_solver = solver if keep else None
        return res

    lam = opts.lambda_init
    prev = None  # (norm dx, dxbar, lam) of the previous iteration
    pending = None  # linearisation of the accepted trial point, if any
    drive = getattr(ws, "drive", None) if opts.damping and linearize_trial else None
    if drive is not None:
        # small one-dimensional problems: the same iteration, compiled (_kernels._drive_py);
        # what it hands back, the loop below goes on with
        F, A = ws.linearize(u)
        nfev += 1
        d = drive(u, F, A, lam)
        if d is None:
            pending = (F, A)
        else:
            nfev += d.nfev
            njev = d.njev
            rnorms += d.rnorms
            unorms += d.unorms
            damping += d.damping
            code = d.code
            if code == _K.DRIVE_STEP_CONVERGED:
                return finish(0, d.u + d.dx, A=d.A, solver=d.solver)
            if code == _K.DRIVE_TRIAL_CONVERGED:
                return finish(0, d.u + d.dxbar, A=d.A, solver=d.solver)
            if code == _K.DRIVE_LAMBDA_MIN:
                fmt["update"] = d.ndx
                return finish(4, d.u, A=d.A, F=d.F, solver=d.solver)
            if code == _K.DRIVE_MAX_ITER:
                fmt["update"] = unorms[-1]
                return finish(1, d.u, A=d.A_step, solver=d.solver)
            u, pending, lam, prev = d.u, (d.F, d.A), d.lam, d.prev  # DRIVE_HAND_BACK
    for _ in range(opts.max_iter - njev):
        if pending is not None:
            F, A = pending
            pending = None
        else:
            F, A = ws.linearize(u)
            nfev += 1
        njev += 1
        step = ws.step(u, F, A)
        status, rnorm, w_u, solver, dx, ndx, _ = step
        if status:
            if status == 3:
                if first_is_input and njev == 1:
                    problem.check(u, params)  # raises, naming the equations that are not finite
                fmt["where"] = "in the residual or its linearisation at iteration " + str(njev)
                return finish(3, u, F=F)
            rnorms.append(rnorm)
            if status == 2:
                return finish(2, u, A=A, F=F, solver=solver)
            fmt["why"] = step.why  # status 7: the linear solver failed (defensive)
            return finish(7, u, A=A, F=F)
        rnorms.append(rnorm)
        if not ndx < math.inf:  # NaN or inf: dx is not finite
            fmt["why"] = "non-finite Newton update"
            return finish(7, u, A=A, F=F)
        unorms.append(ndx)
        if ndx <= tol:
            damping.append(1.0)
            return finish(0, u + dx, A=A, solver=solver)
        if opts.damping and prev is not None:
            ndx_prev, dxbar_prev, lam_prev = prev
            nprev, denom = ws.damping_norms(dxbar_prev, dx, 0.0, w_u)
            denom *= ndx
            mu = ndx_prev * nprev / denom * lam_prev if denom > 0 else 1.0
            lam = min(1.0, mu)
        reduced = False  # the step may be enlarged once, and only if it was never reduced
        while True:
            if lam < opts.lambda_min:
                fmt["update"] = ndx
                return finish(4, u, A=A, F=F, solver=solver)
            t = ws.trial(u, lam, dx, step, linearize_trial, opts.damping)
            nfev += 1
            if not t.finite:
                if not opts.damping:
                    fmt["where"] = f"after an undamped step at iteration {njev}"
                    return finish(3, u, A=A, F=F, solver=solver)
                lam /= 2
                reduced = True
                continue
            if not opts.damping:
                break
            theta = t.nbar / ndx
            mu_p = 0.5 * ndx * lam**2 / t.dd if t.dd > 0 else math.inf
            if theta >= 1 - lam / 4:
                lam = min(mu_p, lam / 2)
                reduced = True
                continue
            lam_new = min(1.0, mu_p)
            if lam_new >= 4 * lam and lam < 1 and not reduced:
                lam = lam_new
                reduced = True  # one enlargement per iteration: no ping-pong
                continue
            break
        damping.append(lam)
        u, dxbar = t.u, t.dxbar
        if t.A is not None:
            pending = (t.F, t.A)  # a non-finite A is caught when it is prepared
        if dxbar is not None and lam == 1.0 and t.nnew <= tol:
            # the simplified-Newton correction is already below tolerance
            unorms.append(t.nnew)
            if pending is not None:
                return finish(0, u + dxbar, A=pending[1], solver=solver)
            return finish(0, u + dxbar, A=A, solver=solver)
        prev = (ndx, dxbar, lam) if dxbar is not None else None
    fmt["update"] = unorms[-1]
    return finish(1, u, A=A, solver=solver)


def check_jacobian(problem, state=None, params=None, *, guess=None, step=None):
    """Compare the assembled Jacobian with central finite differences of ``F``.

    Parameters
    ----------
    problem : Problem
    state : ndarray or SolveResult, optional
        Where to compare (default: ``guess`` turned into a state).
    params : dict, optional
    step : float, optional
        Relative finite-difference step; default ``EPS**(1/3)`` (optimal for
        central differences).

    Returns
    -------
    float
        The worse of two relative discrepancies: the assembled Jacobian against
        column-by-column central differences of ``F``,
        ``max |J - J_fd| / max(1, max |J_fd|)``, and the pointwise coefficients
        against central differences of the callbacks, per field pair and
        derivative ``max_p |A - A_fd| / max(1, max_p |A_fd|)`` (this one sees an
        error in a small coefficient next to large differentiation-matrix
        entries).  About ``1e-8`` or below when the residual is complex-safe,
        order one when it is not (for example with ``abs`` or ``np.maximum``).
    """
    if isinstance(state, SolveResult):
        params = state.params if params is None else params
        state = state.state
    if state is None:
        state = initial_state(problem, guess)
    params = problem.merged_params(params)
    u = np.asarray(state, dtype=float)
    _, A = problem.linearize(u, params)
    J = assemble_dense(problem, A)
    h0 = EPS ** (1 / 3) if step is None else float(step)
    Jfd = np.empty_like(J)
    for k in range(u.size):
        h = h0 * max(1.0, abs(u[k]))
        up, um = u.copy(), u.copy()
        up[k] += h
        um[k] -= h
        Jfd[:, k] = (problem.residual(up, params) - problem.residual(um, params)) / (2 * h)
    _, A_fd = problem._linearize_fd(problem.derivatives(u), params)
    coeff = np.abs(A - A_fd).max(axis=-1) / np.maximum(1.0, np.abs(A_fd).max(axis=-1))
    full = np.abs(J - Jfd).max() / max(1.0, np.abs(Jfd).max())
    return float(max(full, coeff.max()))

