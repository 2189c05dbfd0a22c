"""Linear algebra for the Newton-Kantorovich engine.

The Jacobian of a :class:`~spectral_bulk.Problem` is ``J = sum_alpha diag(A_alpha) D^alpha``
(block-structured over fields).  Two solvers implement one contract:

* :class:`DenseSolver`: assembles J densely and factorises it by LU with a
  reciprocal condition estimate (LAPACK ``gecon``); the default in 1-D.
* :class:`KrylovSolver`: applies J matrix-free (derivatives along each axis,
  then the pointwise coefficients) and runs GMRES preconditioned by the sparse LU
  of a low-order finite-difference version of the same operator on the same
  nodes; the default for 2-D grids.  If GMRES does not reach its tolerance it
  falls back to :class:`DenseSolver` and says so in ``fallback``.

Both accept an optional border ``(b, c, d)`` and then solve the bordered
system ``[[J, b], [c^T, d]]`` of size ``n + m`` (used by continuation).

Contract: ``solver.solve(rhs)`` returns the solution (raising
:class:`~spectral_bulk.exceptions.SingularJacobianError` if the operator is singular);
``solver.rcond`` is the reciprocal condition estimate (``nan`` when unknown);
``solver.slogdet()`` returns ``(sign, log|det|)`` of the (bordered) operator.
"""


import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .._utils import EPS
from ..exceptions import SingularJacobianError
from ._kernels import dispatchers

__all__ = ["DenseSolver", "KrylovSolver", "BorderedInverse", "make_solver", "assemble_dense",
           "jacobian_action"]

RCOND_MIN = 10 * EPS  # below this the Jacobian is treated as singular to working precision
_SMALL_RCOND = 64  # up to this size the compiled estimator beats the LAPACK call (measured: 2x at 17)


def assemble_dense(problem, A):
    """Dense Jacobian ``(size, size)`` from pointwise coefficients ``A`` (nf, nf, na, npts)."""
    d = problem._dense_ops()
    nf, _, na, n = A.shape
    # the plain C loop of einsum wins for small systems, a BLAS contraction for larger
    # ones; its path is searched once per problem, not on every call
    path = False
    if nf * nf * na * n * n > 20000:
        plan = problem._plan()
        path = plan.get("einsum_path")
        if path is None:
            path = np.einsum_path("jikp,kpq->jpiq", A, d, optimize="greedy")[0]
            plan["einsum_path"] = path
    j4 = np.einsum("jikp,kpq->jpiq", A, d, optimize=path)
    return j4.reshape(nf * n, nf * n)


def jacobian_action(problem, A, v):
    """Matrix-free product ``J @ v`` for a flat vector ``v``."""
    dv = problem.derivatives(v)
    return np.einsum("jikp,ikp->jp", A, dv).ravel()


def assemble_sparse(problem, A, kind="fd"):
    """Sparse Jacobian with derivative operators replaced by their ``kind`` version."""
    grid = problem.grid
    nf, _, na, n = A.shape
    rows, cols, vals = [], [], []
    jj, ii = np.meshgrid(np.arange(nf), np.arange(nf), indexing="ij")
    for k, alpha in enumerate(problem.alphas):
        op = sp.identity(n, format="coo") if not any(alpha) else grid.sparse_operator(alpha, kind).tocoo()
        r, c, v = op.row, op.col, op.data
        coeff = A[:, :, k, :][:, :, r] * v  # (nf, nf, nnz)
        keep = np.abs(coeff).max(axis=(0, 1)) > 0
        if not np.any(keep):
            continue
        rows.append((jj[..., None] * n + r[keep]).ravel())
        cols.append((ii[..., None] * n + c[keep]).ravel())
        vals.append(coeff[..., keep].ravel())
    size = nf * n
    if not rows:
        return sp.csc_matrix((size, size))
    m = sp.coo_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(size, size)
    )
    return m.tocsc()


def _bordered_dense(J, border):
    if border is None:
        return J
    b, c, d = border
    b = np.atleast_2d(np.asarray(b, dtype=float).T).T if np.ndim(b) == 1 else np.asarray(b, float)
    c = np.atleast_2d(np.asarray(c, dtype=float).T).T if np.ndim(c) == 1 else np.asarray(c, float)
    d = np.atleast_2d(np.asarray(d, dtype=float))
    return np.block([[J, b], [c.T, d]])


class DenseSolver:
    """Dense LU of the (optionally bordered) Jacobian.

    Parameters
    ----------
    problem : Problem
    A : ndarray
        Pointwise coefficients from :meth:`Problem.linearize`.
    border : tuple (b, c, d), optional
        ``b`` shape (n,) or (n, m), ``c`` likewise, ``d`` scalar or (m, m).
    matrix : ndarray, optional
        A pre-assembled (unbordered) Jacobian to use instead of ``A``.
    check : bool
        Raise :class:`SingularJacobianError` from :meth:`solve` when the
        reciprocal condition estimate is below ``RCOND_MIN``; ``False`` solves
        anyway (used when locating singular points, where the right-hand side
        is consistent).
    """

    kind = "dense"

    def __init__(self, problem, A, border=None, matrix=None, check=True):
        self.check = check
        J = assemble_dense(problem, A) if matrix is None else np.array(matrix, dtype=float)
        M = _bordered_dense(J, border)  # a fresh array: scaled in place below
        # row equilibration: rows of different equations (or of strongly mapped grids)
        # differ in scale by many orders; scaling them makes LU and the condition
        # estimate meaningful (the determinant is corrected in slogdet)
        rmax = np.maximum(M.max(axis=1), -M.min(axis=1))
        self.rscale = np.where(rmax > 0, 1.0 / np.where(rmax > 0, rmax, 1.0), 1.0)
        M *= self.rscale[:, None]
        self.matrix = M
        # raw LAPACK getrf/getrs: the checking wrappers cost more than small factorisations
        self.lu, self.piv, info = sla.lapack.dgetrf(self.matrix)
        d = np.abs(np.diag(self.lu))
        top = d.max() if d.size else 0.0
        # cheap screen: only a tiny pivot relative to the largest warrants the estimate
        self._suspect = info != 0 or not (np.isfinite(top) and top > 0) or d.min() <= 1e4 * EPS * top
        self._rcond = None
        self._anorm = None
        self.fallback = None
        self.iterations = 0

    @classmethod
    def from_factors(cls, lu, piv, rscale, anorm, suspect, check=True):
        """A solver from an LU factorisation made elsewhere (the 1-D workspace).

        ``lu, piv`` are LAPACK ``getrf`` output for the row-equilibrated matrix,
        ``rscale`` its row scale factors, ``anorm`` its 1-norm and ``suspect``
        whether a small pivot warrants the condition estimate.
        """
        out = object.__new__(cls)
        out.check, out.lu, out.piv, out.rscale = check, lu, piv, rscale
        out.matrix = None
        out._anorm, out._suspect, out._rcond = float(anorm), bool(suspect), None
        out.fallback = None
        out.iterations = 0
        return out

    @property
    def rcond(self):
        """Reciprocal condition estimate in the 1-norm (LAPACK ``gecon``), computed on demand.

        Up to ``_SMALL_RCOND`` unknowns the same estimator runs as a compiled kernel
        (:func:`~spectral_bulk.newton._kernels._rcond_py`): the LAPACK call's own overhead
        is most of its cost there.
        """
        if self._rcond is None:
            anorm = self._anorm if self._anorm is not None else np.abs(self.matrix).sum(axis=0).max()
            if not (anorm > 0 and np.isfinite(anorm)):
                self._rcond = 0.0
            elif self.lu.shape[0] <= _SMALL_RCOND:
                self._rcond = dispatchers().rcond(self.lu, float(anorm))
            else:
                rcond, info = sla.lapack.dgecon(self.lu, anorm, norm="1")
                self._rcond = float(rcond) if info == 0 and np.isfinite(rcond) else 0.0
        return self._rcond

    def solve(self, rhs):
        if self.check and self._suspect and not self.rcond > RCOND_MIN:
            raise SingularJacobianError(
                f"singular Jacobian (reciprocal condition estimate {self.rcond:.1e})"
            )
        x, info = sla.lapack.dgetrs(self.lu, self.piv, rhs * self.rscale)
        return x

    def slogdet(self):
        d = np.diag(self.lu)
        swaps = np.count_nonzero(self.piv != np.arange(len(self.piv)))  # getrf pivots are 0-based
        sign = (-1.0) ** swaps * np.prod(np.sign(d))
        with np.errstate(divide="ignore"):
            return float(sign), float(np.sum(np.log(np.abs(d))) - np.sum(np.log(self.rscale)))


class KrylovSolver:
    """Matrix-free GMRES preconditioned by a sparse low-order operator (see module notes).

    Parameters
    ----------
    problem, A, border : as for :class:`DenseSolver`.
    rtol : float
        Relative residual tolerance of GMRES, ``||J x - r|| <= rtol ||r||``
        (checked on the true, unpreconditioned residual).
    restart, maxiter : int
        GMRES restart length and maximum number of restarts.
    """

    kind = "gmres"

    def __init__(self, problem, A, border=None, rtol=1e-12, restart=60, maxiter=20, check=True):
        self.problem, self.A, self.rtol, self.check = problem, A, float(rtol), check
        self.restart, self.maxiter = int(restart), int(maxiter)
        self.border = border
        n = problem.size
        P = assemble_sparse(problem, A, "fd")
        if border is not None:
            b, c, d = (np.asarray(x, dtype=float) for x in border)
            P = sp.bmat([[P, sp.csc_matrix(b.reshape(n, -1))],
                         [sp.csc_matrix(c.reshape(n, -1).T), np.atleast_2d(d)]], format="csc")
        self.nb = 0 if border is None else np.asarray(border[0]).reshape(n, -1).shape[1]
        self.rcond = float("nan")
        self.fallback = None
        self.iterations = 0
        self._dense = None
        try:
            self.precond = spla.splu(P.tocsc(), permc_spec="COLAMD")
        except RuntimeError:  # the low-order operator itself is singular
            self.precond = None

    def _matvec(self, x):
        n = self.problem.size
        if self.border is None:
            return jacobian_action(self.problem, self.A, x)
        b, c, d = self.border
        u, t = x[:n], x[n:]
        top = jacobian_action(self.problem, self.A, u) + np.asarray(b).reshape(n, -1) @ t
        bottom = np.asarray(c).reshape(n, -1).T @ u + np.atleast_2d(d) @ t
        return np.concatenate([top, np.ravel(bottom)])

    def _dense_solver(self):
        if self._dense is None:
            self._dense = DenseSolver(self.problem, self.A, self.border, check=self.check)
            self.rcond = self._dense.rcond
        return self._dense

    def solve(self, rhs):
        rhs = np.asarray(rhs, dtype=float)
        if self.precond is not None:
            size = rhs.shape[0]
            op = spla.LinearOperator((size, size), matvec=self._matvec, dtype=float)
            pre = spla.LinearOperator((size, size), matvec=self.precond.solve, dtype=float)
            count = [0]

            def cb(_):
                count[0] += 1

            x0 = self.precond.solve(rhs)
            x, info = spla.gmres(op, rhs, x0=x0, rtol=self.rtol, atol=0.0, restart=self.restart,
                                 maxiter=self.maxiter, M=pre, callback=cb,
                                 callback_type="pr_norm")
            self.iterations += count[0]
            r = np.linalg.norm(self._matvec(x) - rhs)
            if np.all(np.isfinite(x)) and r <= 10 * self.rtol * max(np.linalg.norm(rhs), 1e-300):
                return x
        self.fallback = "dense LU (GMRES did not reach its tolerance)"
        return self._dense_solver().solve(rhs)

    def slogdet(self):
        return self._dense_solver().slogdet()


class BorderedInverse:
    """``rhs -> J^{-1} rhs`` from a factorisation of the bordered matrix ``M = [[J, b], [c^T, d]]``.

    Block elimination: with ``M [x; mu] = [rhs; 0]`` and ``M [y; nu] = [b; 0]``,
    ``J (x + mu y / (1 - nu)) = rhs``.  The second solve is made once, on first use.
    ``nu = 1`` exactly when ``J`` is singular (a fold, where ``M`` stays regular): then
    :meth:`solve` raises :class:`SingularJacobianError`.  Used to refine a continuation
    point with the factorisation its tangent was computed with.

    Parameters
    ----------
    solver : DenseSolver or KrylovSolver
        Factorisation of ``M`` (one border column).
    b : ndarray, shape (n,)
        The border column of ``M``.
    """

    def __init__(self, solver, b):
        self.solver, self.b = solver, np.asarray(b, dtype=float).ravel()
        self.kind = solver.kind
        self._y = None
        self._nu = np.nan

    def solve(self, rhs):
        if self._y is None:
            z = self.solver.solve(np.append(self.b, 0.0))
            self._y, self._nu = z[:-1], float(z[-1])
        if not abs(1.0 - self._nu) > 1e-12:
            raise SingularJacobianError("singular Jacobian: the bordered system gives no inverse")
        z = self.solver.solve(np.append(np.asarray(rhs, dtype=float), 0.0))
        return z[:-1] + z[-1] / (1.0 - self._nu) * self._y


def make_solver(problem, A, kind="auto", border=None, rtol=1e-12, check=True):
    """Factorise the Jacobian with the solver ``kind`` ("dense", "gmres" or "auto")."""
    if kind == "auto":
        kind = "dense" if problem.grid.ndim == 1 or problem.size <= 800 else "gmres"
    if kind == "dense":
        return DenseSolver(problem, A, border, check=check)
    if kind == "gmres":
        return KrylovSolver(problem, A, border, rtol=rtol, check=check)
    raise ValueError(f"`linear_solver` must be 'auto', 'dense' or 'gmres', got {kind!r}")
