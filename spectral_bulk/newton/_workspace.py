"""What one Newton iteration needs from a problem: linearise, measure, factorise.

:func:`~spectral_bulk.newton.solve` runs one algorithm on top of a workspace.  Two
workspaces implement the same contract:

* :class:`GenericWorkspace` works for every problem (any grid, GMRES or dense LU,
  callbacks that do or do not broadcast over a batch axis).
* :class:`DenseWorkspace` serves one-dimensional problems solved by dense LU with
  the complex-step linearisation.  It evaluates the callbacks on preallocated
  buffers viewed through namespaces built once per problem, and does the
  measurements, assembly and equilibration in one compiled kernel
  (:mod:`._kernels`).  It computes the same quantities as the generic one (the
  tests compare them); at one-dimensional sizes it removes most of the per-iteration
  cost that is not the user's own residual.

Contract (``ws`` is a workspace bound to a problem and its parameters):

``ws.linearize(u) -> (F, A)``
    residual and pointwise coefficients, as :meth:`Problem.linearize`;
``ws.residual(u) -> F``;
``ws.prepare(u, F, A) -> (finite, w, rnorm)``
    finiteness of ``F`` and ``A``, field weights and backward error; the
    workspace keeps what :meth:`factor` needs;
``ws.factor(A) -> solver``
    a :class:`DenseSolver` or :class:`KrylovSolver` for the Jacobian of ``A``;
``ws.norm(dx, w) -> float``
    the scaled update norm; ``ws.damping_norms(a, b, lam, w)`` gives
    ``(norm(a), norm(a - (1 - lam) b))`` at once;
``ws.backward_error(F, A, u) -> float`` and ``ws.tails(u) -> (nfields,) ndarray``
    the certificate's residual and spectral tails.
"""

import numpy as np
import scipy.linalg as sla

from ..exceptions import ProblemDefinitionError
from ._kernels import (chebyshev_tails, damping_norms, pivot_ratio, prepare_dense, scaled_norm_kernel,
                       split_rows_kernel, field_weights_kernel, fill_batch)
from ._linalg import DenseSolver, make_solver
from ._problem import _H, Namespace

__all__ = ["GenericWorkspace", "DenseWorkspace", "workspace"]

_EPS = np.finfo(float).eps


def _snorm(dx, w):
    return float((np.abs(dx.reshape(w.size, -1)).max(axis=1) / w).max())


def field_weights(problem, u):
    """``w_f = max(||u_f||_inf, scale_f)``, the per-field size used by all norms."""
    return np.maximum(np.abs(u.reshape(problem.nfields, -1)).max(axis=1), problem.scales)


def residual_norm(problem, F, A, u, w=None):
    """Componentwise backward error of the residual (see :class:`NewtonOptions`)."""
    w = field_weights(problem, u) if w is None else w
    R = problem.row_sums()  # (na, npts)
    scale = np.einsum("jikp,i,kp->jp", np.abs(A), w, R)
    F = np.abs(F.reshape(scale.shape))
    with np.errstate(divide="ignore", invalid="ignore"):
        r = np.where(scale > 0, F / np.where(scale > 0, scale, 1.0), F)
    return float(r.max())


class GenericWorkspace:
    """The workspace for every problem (see the module notes)."""

    kind = "generic"

    def __init__(self, problem, params, opts):
        self.problem, self.params, self.opts = problem, params, opts

    def linearize(self, u):
        return self.problem.linearize(u, self.params)

    def residual(self, u):
        return self.problem.residual(u, self.params)

    def prepare(self, u, F, A):
        if not (np.all(np.isfinite(F)) and np.all(np.isfinite(A))):
            return False, None, np.nan
        w = field_weights(self.problem, u)
        return True, w, residual_norm(self.problem, F, A, u, w)

    def factor(self, A):
        return make_solver(self.problem, A, self.opts.linear_solver, rtol=self.opts.linear_rtol)

    def norm(self, dx, w):
        return _snorm(dx, w)

    def weights(self, u):
        return field_weights(self.problem, u)

    def damping_norms(self, a, b, lam, w):
        return _snorm(a, w), _snorm(a - (1 - lam) * b, w)

    def backward_error(self, F, A, u):
        return residual_norm(self.problem, F, A, u)

    def tails(self, u):
        pr = self.problem
        return pr.grid.tail(pr.split(u), pr.scales)


class DenseWorkspace(GenericWorkspace):
    """Preallocated one-dimensional dense workspace (see the module notes)."""

    kind = "dense-1d"

    def __init__(self, problem, params, opts):
        super().__init__(problem, params, opts)
        self.c = _cached(problem)
        self.p = Namespace(params, "parameter")
        size = problem.size
        self.J = np.empty((size, size), order="F")
        self.rscale = np.empty(size)
        self.anorm = np.nan
        self.generic = False

    def linearize(self, u):
        if self.generic:
            return self.problem.linearize(u, self.params)
        try:
            return self._linearize(u)
        except ProblemDefinitionError:
            raise
        except (ValueError, TypeError, IndexError):
            # the callbacks do not broadcast over a batch axis: the generic path copes
            self.generic = True
            return self.problem.linearize(u, self.params)

    def _linearize(self, u):
        c, pr = self.c, self.problem
        nf, na, n = c["nf"], c["na"], c["n"]
        fill_batch(u, c["dstack"], _H, c["buf"])
        rows = c["rowbuf"]  # consumed below: F and A are fresh arrays
        out = pr.equations(c["coords"], c["f"], self.p)
        if _well_formed(out, nf, c["target"]):
            for i in range(nf):
                rows[i] = out[i]
        else:
            for i, e in enumerate(pr._normalise(out, c["eq_what"], n, c["batch"])):
                if e is None:
                    raise ProblemDefinitionError(
                        f"equations returned None for field {pr.fields[i]!r}; "
                        "None is only meaningful in boundary conditions"
                    )
                rows[i] = e
        for fun, cb, fns, sl, what, target in c["faces"]:
            bc = fun(cb, fns, self.p)
            if not _well_formed(bc, nf, target):
                bc = pr._normalise(bc, what, target[1], c["batch"])
            for i, b in enumerate(bc):
                if b is not None:
                    rows[i, :, sl] = b
        F = np.empty(nf * n)
        A = np.empty((nf, nf, na, n))
        split_rows_kernel(rows, 1 / _H, F, A)
        return F, A

    def prepare(self, u, F, A):
        c = self.c
        w = np.empty(c["nf"])
        finite, rnorm, self.anorm = prepare_dense(A, c["dense"], c["rowsums"], F, u, self.problem.scales,
                                                  self.J, w, self.rscale)
        return finite, (w if finite else None), rnorm

    def factor(self, A):
        lu, piv, info = sla.lapack.dgetrf(self.J, overwrite_a=True)
        suspect = info != 0 or pivot_ratio(lu) <= 1e4 * _EPS
        solver = DenseSolver.from_factors(lu, piv, self.rscale.copy(), self.anorm, suspect)
        self.J = np.empty_like(self.J, order="F")
        return solver

    def residual(self, u):
        if self.generic:
            return self.problem.residual(u, self.params)
        return self.linearize(u)[0]

    def norm(self, dx, w):
        return scaled_norm_kernel(dx, w)

    def weights(self, u):
        w = np.empty(self.c["nf"])
        field_weights_kernel(u, self.problem.scales, w)
        return w

    def damping_norms(self, a, b, lam, w):
        return damping_norms(a, b, lam, w)

    def backward_error(self, F, A, u):
        c = self.c
        w = np.empty(c["nf"])
        _, rnorm, _ = prepare_dense(A, c["dense"], c["rowsums"], F, u, self.problem.scales,
                                    self.J, w, self.rscale, False)
        return rnorm

    def tails(self, u):
        out = np.empty(self.c["nf"])
        chebyshev_tails(u, self.c["coeffs"], self.problem.scales, out)
        return out


def _cached(problem):
    """Buffers and namespaces of :class:`DenseWorkspace`, built once per problem and grid."""
    plan = problem._plan()
    if "workspace" not in plan:
        nf, na, n = problem.nfields, len(problem.alphas), problem.grid.size
        nslot = nf * na + 1
        buf = np.zeros((nf, na, nslot, n), dtype=complex)
        rowbuf = np.empty((nf, nslot, n), dtype=complex)
        names = plan["names"]
        # one point per end in 1-D; both ends share one call when they share the callback
        # (the conditions are pointwise); basic slices keep the namespaces views of `buf`
        groups = {}
        for key, fun, idx in plan["faces"]:
            groups.setdefault(id(fun), (fun, []))[1].append((key, int(idx[0])))
        faces = []
        for fun, ends in groups.values():
            pts = sorted(i for _, i in ends)
            sl = slice(pts[0], pts[-1] + 1, max(pts[-1] - pts[0], 1))
            cb = Namespace({nm: c[sl] for nm, c in problem.grid.coords.items()}, "coordinate")
            fns = Namespace({nm: buf[i, k][..., sl] for nm, i, k in names}, "field or derivative")
            what = "boundary condition " + ", ".join(repr(key) for key, _ in ends)
            faces.append((fun, cb, fns, sl, what, (nslot, len(pts))))
        plan["workspace"] = {
            "nf": nf, "na": na, "n": n, "batch": (nslot,), "buf": buf, "rowbuf": rowbuf,
            "dstack": plan["dstack"], "coords": plan["coords"], "faces": faces,
            "f": Namespace({nm: buf[i, k] for nm, i, k in names}, "field or derivative"),
            "dense": np.ascontiguousarray(problem._dense_ops()), "rowsums": problem.row_sums(),
            "eq_what": f"equations {problem.name!r}", "target": (nslot, n),
            "coeffs": np.ascontiguousarray(problem.grid.axes[0].coeffs(np.eye(n), axis=0)),
        }
    return plan["workspace"]


def _well_formed(out, nf, target):
    """Whether callback output needs no normalisation: a list of ``nf`` arrays of ``target`` shape."""
    if type(out) is not list or len(out) != nf:
        return False
    for r in out:
        if getattr(r, "shape", None) != target:
            return False
    return True


def workspace(problem, params, opts):
    """The fastest workspace that serves ``problem`` with options ``opts``."""
    one_d_dense = (problem.grid.ndim == 1 and opts.linear_solver in ("auto", "dense")
                   and type(problem.grid.axes[0]).__name__ == "Chebyshev"
                   and problem.linearization == "complex-step" and problem._batched
                   and all(len(idx) == 1 for _, _, idx in problem._plan()["faces"]))
    if one_d_dense and opts.workspace == "auto":
        return DenseWorkspace(problem, params, opts)
    return GenericWorkspace(problem, params, opts)
