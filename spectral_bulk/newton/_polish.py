"""Extended-precision polishing of a converged 1-D solution (mixed-precision refinement).

A double-precision Newton solution is accurate to the rounding of its residual, about
``1e-16`` relative to the largest term of each row.  Quantities read off high
boundary derivatives (``u'''(0)`` amplifies coefficient errors by about ``n^6/15``)
inherit that rounding many times over.  Iterative refinement removes it: the residual
is evaluated in ``np.longdouble`` (coordinates, differentiation matrices, state and
the callbacks' arithmetic), the correction is solved with the double-precision
Jacobian factorisation, and the state is kept in ``np.longdouble``.  Each step
contracts the error by about ``cond(J) * 1e-16``; two or three steps reach the
extended rounding level (common practice: "Accuracy and Stability of Numerical
Algorithms", 2nd ed., SIAM 2002, chapter 12, iterative refinement with a residual
in higher precision).

Where ``np.longdouble`` is no wider than double (some platforms), :func:`polish`
returns ``None`` and callers keep the double solution.
"""

from dataclasses import dataclass, field

import numpy as np
import scipy.linalg as sla

from ..exceptions import SingularJacobianError
from ._linalg import assemble_dense

__all__ = ["Polished", "polish", "extended_precision_available"]


def _floor_ratio(dtype):
    """Where refinement stops: the extended residual within 4x of its rounding level.

    A converged double solution has its residual at double rounding, ``r0 ~ eps64 T``
    (``T`` the size of the residual's terms); the same terms round at ``eps(dtype) T``
    in ``dtype``, so the extended residual cannot fall below about ``r0 eps(dtype)/eps64``
    (``4.9e-4 r0`` for the x87 80-bit type).  One step normally gets there.
    """
    return 4 * float(np.finfo(dtype).eps / np.finfo(np.float64).eps)


def _jacobian_solve(result):
    """``rhs -> J^{-1} rhs`` with a factorisation kept on the result, or a new LU.

    Kept are the Newton iteration's last factorisation (results made with ``keep_factor``,
    as the branes do) and, on continuation points while their observables are computed,
    the bordered factorisation of the tangent (:class:`~spectral_bulk.newton.BorderedInverse`).
    """
    solver = getattr(result, "_jacobian_solver", None)
    if solver is not None and getattr(solver, "kind", None) == "dense":
        try:
            solver.solve(np.zeros(result.problem.size))  # a singular one raises here
            return solver.solve
        except SingularJacobianError:
            pass
    problem = result.problem
    _, A = problem.linearize(result.state, result.params)
    with np.errstate(all="ignore"):
        lu = sla.lu_factor(assemble_dense(problem, A), check_finite=False)
    return lambda rhs: sla.lu_solve(lu, rhs, check_finite=False)


def extended_precision_available(dtype=np.longdouble):
    """True when ``dtype`` resolves at least 100 times finer than double."""
    return bool(np.finfo(dtype).eps < 0.01 * np.finfo(np.float64).eps)


@dataclass
class Polished:
    """A solution refined in extended precision.

    Attributes
    ----------
    state : ndarray of ``dtype``
        The refined flat state.
    fields : dict
        Field name -> refined values at the collocation points (``dtype``).
    residual_norms : list of float
        ``max |F|`` in extended precision at the double solution and after each step.
    improved : bool
        The residual fell at least 100-fold below its value at the double solution.
        This says the refinement converged, not that every intermediate of the callbacks
        was computed in ``dtype``: a callback that rounds to double somewhere (``float()``,
        ``math`` functions, ``astype(float)``) refines to a state no better than the
        double one.  Check the quantity of interest independently (the brane
        observables carry identities for that).
    """

    state: np.ndarray
    fields: dict
    residual_norms: list = field(default_factory=list)
    improved: bool = False


def polish(result, steps=4, dtype=np.longdouble):
    """Refine a converged 1-D Chebyshev solution with residuals in extended precision.

    Parameters
    ----------
    result : SolveResult
        A converged solution on a 1-D affine Chebyshev grid.
    steps : int
        Maximum refinement steps (stops early when the residual stops falling).
    dtype : numpy floating type

    Returns
    -------
    Polished or None
        ``None`` when ``dtype`` is no wider than double on this platform.

    Raises
    ------
    NotImplementedError
        For grids other than 1-D affine Chebyshev.

    Notes
    -----
    A result may carry the extended residual of its state (``_extended_residual``: the
    branes certify their Newton result with it, rounded to double); refinement then
    starts from it instead of evaluating it again.
    """
    if not extended_precision_available(dtype):
        return None
    problem, params = result.problem, result.params
    solve = _jacobian_solve(result)
    u = np.asarray(result.state, dtype=dtype)
    r = getattr(result, "_extended_residual", None)  # evaluated by the caller at this state
    if r is None or r.dtype != np.dtype(dtype):
        r = problem.residual_extended(u, params, dtype)
    norms = [float(np.abs(r).max())]
    best = (norms[0], u)
    for _ in range(int(steps)):
        du = solve(r.astype(np.float64))
        if not np.all(np.isfinite(du)):
            break
        u = u - du.astype(dtype)
        r = problem.residual_extended(u, params, dtype)
        norms.append(float(np.abs(r).max()))
        if not norms[-1] < best[0]:
            break
        # stop when a step gains little, or once the residual is at the extended rounding
        # level (one step usually takes a double solution there)
        done = norms[-1] > 0.5 * best[0] or norms[-1] <= _floor_ratio(dtype) * norms[0]
        best = (norms[-1], u)
        if done:
            break
    state = best[1]
    nf, n = problem.nfields, problem.grid.size
    fields = dict(zip(problem.fields, state.reshape(nf, n)))
    improved = bool(norms[0] == 0 or best[0] <= 1e-2 * norms[0])
    return Polished(state=state, fields=fields, residual_norms=norms, improved=improved)
