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
  For small systems it also runs the whole damped iteration in one compiled kernel
  (:meth:`DenseWorkspace.drive`), returning to Python only for the callbacks.

Contract (``ws`` is a workspace bound to a problem and its parameters).  The Newton
loop uses the two coarse operations; the fine ones are their parts (and what other
callers need):

``ws.step(u, F, A) -> Step``
    the Newton correction at ``u``: finiteness of ``F`` and ``A``, field weights,
    backward error, factorisation, ``dx = -J^{-1} F`` and its norm (:class:`Step`);
``ws.trial(u, lam, dx, step, linearize, damped) -> Trial``
    the trial point ``u + lam dx``, its residual (and linearisation when
    ``linearize``) and, when ``damped``, the simplified correction with the damping
    test's norms (:class:`Trial`);
``ws.linearize(u) -> (F, A)``
    residual and pointwise coefficients, as :meth:`Problem.linearize`;
``ws.residual(u) -> F``;
``ws.prepare(u, F, A) -> (finite, w, rnorm)`` and ``ws.factor(A) -> solver``
    the parts of :meth:`step` (a :class:`DenseSolver` or :class:`KrylovSolver`);
``ws.norm(dx, w) -> float``
    the scaled update norm; ``ws.damping_norms(a, b, lam, w)`` gives
    ``(norm(a), norm(a - (1 - lam) b))`` at once;
``ws.drive(u, F, A, lam) -> Drive or None``
    optional: the whole damped iteration from ``u`` in compiled code (:class:`Drive`);
    ``None`` where it does not apply;
``ws.backward_error(F, A, u) -> float`` and ``ws.tails(u) -> (nfields,) ndarray``
    the certificate's residual and spectral tails; ``ws.certificate(u, F, A)`` gives both
    at once (the backward error NaN when ``A`` is ``None`` or ``F`` is not finite).
"""

import math
import threading
from typing import NamedTuple

import numpy as np
import scipy.linalg as sla

from ..exceptions import ProblemDefinitionError, SingularJacobianError
from . import _kernels as K
from ._kernels import dispatchers
from ._linalg import DenseSolver, make_solver
from ._problem import _H, Namespace, real_rows

__all__ = ["GenericWorkspace", "DenseWorkspace", "workspace", "Step", "Trial", "Drive"]

_EPS = np.finfo(float).eps
_MIN_PIVOT_RATIO = 1e4 * _EPS  # below it a factorisation gets the condition estimate
#: Up to this many unknowns the dense step factorises in the compiled kernel
#: (:func:`~spectral_bulk.newton._kernels._small_step_py`), above it by LAPACK ``getrf``:
#: at small sizes the LAPACK call's own overhead exceeds the arithmetic (measured side by
#: side: the kernel's LU 1.0 / 2.7 us against getrf's 1.3 / 3.3 us at 10 / 17 unknowns; on
#: par near 30; getrf twice as fast at 64).
_SMALL_LU = 24
_DRIVE_MAX_ITER = 10_000  # DenseWorkspace.drive preallocates its records (3 floats per iteration)


class Step(NamedTuple):
    """One Newton correction (:meth:`GenericWorkspace.step`).

    ``status`` is 0 (``dx`` computed), 3 (``F`` or ``A`` not finite), 2 (singular
    Jacobian) or 7 (the linear solver failed, ``why`` says how); ``ndx`` may be NaN or
    inf when ``dx`` is not finite.
    """

    status: int
    rnorm: float = math.nan
    w: np.ndarray | None = None
    solver: object = None
    dx: np.ndarray | None = None
    ndx: float = math.nan
    why: str = ""


class Trial(NamedTuple):
    """A trial point of the damped iteration (:meth:`GenericWorkspace.trial`).

    ``F`` (and ``A`` when linearised) at ``u``; ``finite`` whether ``F`` is finite; when
    damped and finite, ``dxbar`` the simplified correction, ``nbar`` and ``dd`` the
    norms of ``dxbar`` and ``dxbar - (1 - lam) dx`` in the weights of the current
    point, and ``nnew`` the norm of ``dxbar`` in the weights of ``u``.
    """

    u: np.ndarray
    F: np.ndarray
    A: np.ndarray | None
    finite: bool
    dxbar: np.ndarray | None = None
    nbar: float = math.nan
    dd: float = math.nan
    nnew: float = math.nan


class Drive(NamedTuple):
    """How a compiled run of the damped iteration (:meth:`DenseWorkspace.drive`) ended.

    ``code`` is one of the ``DRIVE_*`` exits of :func:`~spectral_bulk.newton._kernels._drive_py`.
    ``u`` is the state (for ``DRIVE_TRIAL_CONVERGED`` the accepted trial point), ``F`` and
    ``A`` the residual and coefficients there, ``dx`` and ``dxbar`` the last Newton and
    simplified corrections, ``solver`` the last factorisation, ``A_step`` the coefficients
    it was made from, ``ndx`` its update norm; ``njev``, ``nfev`` and the three record
    lists count and hold what the run did.  For ``DRIVE_HAND_BACK`` these describe the top
    of the iteration where the Python loop goes on, with damping factor ``lam`` and the
    previous iteration's ``prev = (ndx, dxbar, lam)`` (or ``None``).
    """

    code: int
    u: np.ndarray
    F: np.ndarray
    A: np.ndarray
    dx: np.ndarray
    dxbar: np.ndarray
    solver: object
    A_step: np.ndarray
    ndx: float
    njev: int
    nfev: int
    rnorms: list
    unorms: list
    damping: list
    lam: float
    prev: tuple | None


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

    def step(self, u, F, A):
        finite, w, rnorm = self.prepare(u, F, A)
        if not finite:
            return Step(3)
        solver = None
        try:
            solver = self.factor(A)
            dx = -solver.solve(F)
        except SingularJacobianError:
            return Step(2, rnorm, w, solver)
        except (ValueError, RuntimeError) as exc:  # pragma: no cover - defensive
            return Step(7, rnorm, w, solver, why=str(exc))
        return Step(0, rnorm, w, solver, dx, self.norm(dx, w))

    def trial(self, u, lam, dx, step, linearize, damped):
        trial = u + lam * dx
        if linearize:
            Ft, At = self.linearize(trial)
        else:
            Ft, At = self.residual(trial), None
        if not np.isfinite(Ft).all():
            return Trial(trial, Ft, At, False)
        if not damped:
            return Trial(trial, Ft, At, True)
        dxbar = -step.solver.solve(Ft)
        nbar, dd = self.damping_norms(dxbar, dx, lam, step.w)
        return Trial(trial, Ft, At, True, dxbar, nbar, dd, self.norm(dxbar, self.weights(trial)))

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

    def certificate(self, u, F, A):
        r = self.backward_error(F, A, u) if A is not None and np.isfinite(F).all() else np.nan
        return self.tails(u), r


class DenseWorkspace(GenericWorkspace):
    """Preallocated one-dimensional dense workspace (see the module notes)."""

    kind = "dense-1d"

    def __init__(self, problem, params, opts):
        super().__init__(problem, params, opts)
        self.c = _cached(problem)
        self.k = dispatchers()
        self.p = Namespace(params, "parameter")
        size = problem.size
        self.J = np.empty((size, size), order="F")
        self.rscale = np.empty(size)
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
        c = self.c
        self.k.fill_batch(u, c["dstack"], _H, c["buf"])
        rows = self._rows()
        F = np.empty(c["nf"] * c["n"])
        A = np.empty((c["nf"], c["nf"], c["na"], c["n"]))
        self.k.split_rows(rows, 1 / _H, F, A)
        return F, A

    def _rows(self, ev=None):
        """The callbacks on a batch of derivatives: their rows in a reused buffer.

        ``ev`` is one of the evaluation sets of :func:`_cached`: the complex-step batch in
        ``buf`` (default) or the real state alone (``"real"``).  The rows are consumed by
        the caller before the next call.
        """
        c, pr = self.c, self.problem
        ev = c["cs"] if ev is None else ev
        nf, n = c["nf"], c["n"]
        rows = ev["rowbuf"]
        out = pr.equations(c["coords"], ev["f"], self.p)
        target, real = ev["target"], ev["real"]
        ok = type(out) is list and len(out) == nf
        if ok:  # the common case: one array of the batch shape per field, copied as checked
            for i in range(nf):
                r = out[i]
                if getattr(r, "shape", None) != target or (real and r.dtype.kind == "c"):
                    ok = False
                    break
                rows[i] = r
        if not ok:
            for i, e in enumerate(pr._normalise(out, c["eq_what"], n, ev["batch"])):
                if e is None:
                    raise ProblemDefinitionError(
                        f"equations returned None for field {pr.fields[i]!r}; "
                        "None is only meaningful in boundary conditions"
                    )
                rows[i] = real_rows(e) if real else e
        for fun, cb, fns, sl, what, target in ev["faces"]:
            bc = fun(cb, fns, self.p)
            if type(bc) is list and len(bc) == nf:
                for i in range(nf):
                    b = bc[i]
                    if b is None:
                        continue
                    if getattr(b, "shape", None) != target or (real and b.dtype.kind == "c"):
                        break
                    rows[i, :, sl] = b
                else:
                    continue  # every row checked and written: next face
            # anything else (scalars, wrong shapes or counts) is normalised, or named in an error
            for i, b in enumerate(pr._normalise(bc, what, target[1], ev["batch"])):
                if b is not None:
                    rows[i, :, sl] = real_rows(b) if real else b
        return rows

    def step(self, u, F, A):
        if self.generic:
            return super().step(u, F, A)
        c = self.c
        size = F.shape[0]
        w, dx = np.empty(c["nf"]), np.empty(size)
        if size <= _SMALL_LU:  # one compiled call: checks, assembly, LU and correction
            piv = np.empty(size, dtype=np.int32)
            finite, rnorm, anorm, info, ratio, ndx = self.k.small_step(
                A, c["dense"], c["rowsums"], F, u, self.problem.scales, self.J, w, self.rscale, piv, dx,
                _MIN_PIVOT_RATIO)
            if not finite:
                return Step(3)
            lu = self.J
        else:
            finite, rnorm, anorm = self.k.prepare_dense(A, c["dense"], c["rowsums"], F, u,
                                                        self.problem.scales, self.J, w, self.rscale, True)
            if not finite:
                return Step(3)
            lu, piv, info = sla.lapack.dgetrf(self.J, overwrite_a=True)
            ratio, ndx = self.k.newton_update(lu, piv, self.rscale, F, w, dx, _MIN_PIVOT_RATIO)
        self.J = np.empty((size, size), order="F")  # `lu` holds the old buffer
        rscale, self.rscale = self.rscale, np.empty(size)
        suspect = info != 0 or ratio <= _MIN_PIVOT_RATIO
        solver = DenseSolver.from_factors(lu, piv, rscale, anorm, suspect)
        if suspect:  # the condition estimate decides (and raises when singular)
            try:
                dx = -solver.solve(F)
            except SingularJacobianError:
                return Step(2, rnorm, w, solver)
            ndx = self.norm(dx, w)
        return Step(0, rnorm, w, solver, dx, ndx)

    def trial(self, u, lam, dx, step, linearize, damped):
        solver = step.solver
        if self.generic or not (linearize and damped) or getattr(solver, "lu", None) is None:
            return super().trial(u, lam, dx, step, linearize, damped)
        c = self.c
        nf, na, n = c["nf"], c["na"], c["n"]
        trial = np.empty(u.shape[0])
        lam = float(lam)
        self.k.trial_point(u, lam, dx, trial, c["dstack"], _H, c["buf"])
        try:
            rows = self._rows()
        except ProblemDefinitionError:
            raise
        except (ValueError, TypeError, IndexError):
            self.generic = True  # as in linearize: the generic path copes
            return super().trial(u, lam, dx, step, linearize, damped)
        Ft, At, dxbar = np.empty(nf * n), np.empty((nf, nf, na, n)), np.empty(nf * n)
        finite, nbar, dd, nnew = self.k.after_trial(rows, 1 / _H, Ft, At, solver.lu, solver.piv,
                                                    solver.rscale, dx, lam, step.w, trial,
                                                    self.problem.scales, dxbar)
        if not finite:
            return Trial(trial, Ft, At, False)
        return Trial(trial, Ft, At, True, dxbar, nbar, dd, nnew)

    def drive(self, u, F, A, lam):
        """The damped iteration from ``u`` (``F, A`` there; damping factor ``lam``), compiled.

        Applies to systems small enough for the fused step (``_SMALL_LU`` unknowns) and
        iteration limits up to ``_DRIVE_MAX_ITER`` (its records are preallocated); returns
        ``None`` otherwise.  See :func:`~spectral_bulk.newton._kernels._drive_py`: the
        kernel returns here only to have the callbacks evaluated.
        """
        if self.generic or u.shape[0] > _SMALL_LU or self.opts.max_iter > _DRIVE_MAX_ITER:
            return None
        c, opts, k = self.c, self.opts, self.k
        nf, na, n = c["nf"], c["na"], c["n"]
        size = u.shape[0]
        V = np.empty((8, size))
        V[0], V[4] = u, F
        Ab = np.empty((2, nf, nf, na, n))
        Ab[0] = A
        J = np.empty((size, size), order="F")
        piv = np.empty(size, dtype=np.int32)
        W = np.empty((2, nf))
        H = np.empty((3, opts.max_iter + 1))
        S = np.zeros(11)
        S[K.S_LAM], S[K.S_TOL], S[K.S_LAMBDA_MIN] = lam, opts.tol, opts.lambda_min
        S[K.S_MIN_RATIO], S[K.S_H] = _MIN_PIVOT_RATIO, _H
        I = np.zeros(K.I_TOP + 4, dtype=np.int64)
        I[K.I_MAX_ITER] = opts.max_iter
        const = (c["dense"], c["rowsums"], self.problem.scales, c["dstack"], c["buf"])
        code = k.drive(c["cs"]["rowbuf"], V, Ab, J, piv, W, H, S, I, *const)
        while code == K.DRIVE_EVALUATE:
            try:
                rows = self._rows()
            except ProblemDefinitionError:
                raise
            except (ValueError, TypeError, IndexError):
                self.generic = True  # as in linearize: the Python loop and generic path go on
                code = K.DRIVE_HAND_BACK
                break
            code = k.drive(rows, V, Ab, J, piv, W, H, S, I, *const)
        cur = int(I[K.I_CUR])
        if code == K.DRIVE_HAND_BACK:  # from the top of the iteration
            njev, nr, nu, nd = (int(v) for v in I[K.I_TOP:K.I_TOP + 4])
            prev = (float(S[K.S_NDX_PREV]), V[K.V_DXBAR_PREV], float(S[K.S_LAM_PREV])) \
                if I[K.I_HAS_PREV] else None
            return Drive(code, V[cur], V[4 + cur], Ab[cur], None, None, None, None,
                         np.nan, njev, int(I[K.I_NFEV]), H[0, :nr].tolist(), H[1, :nu].tolist(),
                         H[2, :nd].tolist(), float(S[K.S_LAM_TOP]), prev)
        solver = DenseSolver.from_factors(J, piv, V[K.V_RSCALE], S[K.S_ANORM], False)
        # the step was made at the state, or, once a trial point was accepted, at the one before
        A_step = Ab[cur] if code in (K.DRIVE_STEP_CONVERGED, K.DRIVE_LAMBDA_MIN) else Ab[1 - cur]
        # views: the buffers are this call's own
        return Drive(code, V[cur], V[4 + cur], Ab[cur], V[K.V_DX], V[K.V_DXBAR], solver, A_step,
                     float(S[K.S_NDX]), int(I[K.I_NJEV]),
                     int(I[K.I_NFEV]), H[0, :I[K.I_NR]].tolist(), H[1, :I[K.I_NU]].tolist(),
                     H[2, :I[K.I_ND]].tolist(), float(S[K.S_LAM]), None)

    def residual(self, u):
        if self.generic:
            return self.problem.residual(u, self.params)
        c = self.c
        ev = c["real"]
        nf, n = c["nf"], c["n"]
        np.matmul(u.reshape(nf, n), c["dstack"], out=ev["flat"])  # D^k u_f, all at once
        try:
            rows = self._rows(ev)
        except ProblemDefinitionError:
            raise
        except (ValueError, TypeError, IndexError):  # as in linearize: the complex batch copes
            return self.linearize(u)[0]
        return rows.reshape(nf * n).copy()

    def norm(self, dx, w):
        return self.k.scaled_norm(dx, w)

    def weights(self, u):
        w = np.empty(self.c["nf"])
        self.k.field_weights(u, self.problem.scales, w)
        return w

    def damping_norms(self, a, b, lam, w):
        return self.k.damping_norms(a, b, float(lam), w)

    def backward_error(self, F, A, u):
        c = self.c
        w = np.empty(c["nf"])
        _, rnorm, _ = self.k.prepare_dense(A, c["dense"], c["rowsums"], F, u, self.problem.scales,
                                           self.J, w, self.rscale, False)
        return rnorm

    def tails(self, u):
        out = np.empty(self.c["nf"])
        self.k.chebyshev_tails(u, self.c["coeffs"], self.problem.scales, out)
        return out

    def certificate(self, u, F, A):
        if self.generic or A is None:
            return super().certificate(u, F, A)
        c = self.c
        tails = np.empty(c["nf"])
        rnorm = self.k.certificate(A, c["rowsums"], F, u, self.problem.scales, c["coeffs"], tails)
        return tails, rnorm


def _evaluation_set(problem, plan, buf, real):
    """Namespaces over a derivative buffer ``(nf, na, batch, n)`` and a rows buffer for it."""
    nf, _, nb, n = buf.shape
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
        faces.append((fun, cb, fns, sl, what, (nb, len(pts))))
    return {"buf": buf, "rowbuf": np.empty((nf, nb, n), dtype=buf.dtype), "batch": (nb,),
            "target": (nb, n), "real": real, "faces": faces,
            "f": Namespace({nm: buf[i, k] for nm, i, k in names}, "field or derivative")}


def _cached(problem):
    """Buffers and namespaces of :class:`DenseWorkspace`, built once per problem, grid and thread.

    Two evaluation sets: ``"cs"``, the complex-step batch (one slot per field and
    derivative and a last, unperturbed one) and ``"real"``, the state alone in real
    arithmetic (a residual without the linearisation).  The callbacks read the buffers
    that the kernels fill, so threads solving the same problem at once each get their own
    (a shared set gave wrong iterates under concurrent solves: ``tests/test_workspace.py``).
    """
    plan = problem._plan()
    local = plan.get("workspace")
    if local is None:
        local = plan.setdefault("workspace", threading.local())  # atomic under the GIL
    c = getattr(local, "c", None)
    if c is None:
        nf, na, n = problem.nfields, len(problem.alphas), problem.grid.size
        nslot = nf * na + 1
        cs = _evaluation_set(problem, plan, np.zeros((nf, na, nslot, n), dtype=complex), False)
        real = _evaluation_set(problem, plan, np.zeros((nf, na, 1, n)), True)
        real["flat"] = real["buf"].reshape(nf, na * n)  # a view: the layout of `u_f @ dstack`
        c = local.c = {
            "nf": nf, "na": na, "n": n, "cs": cs, "real": real, "buf": cs["buf"],
            "dstack": plan["dstack"], "coords": plan["coords"],
            "dense": np.ascontiguousarray(problem._dense_ops().transpose(0, 2, 1)),  # kernel layout
            "rowsums": problem.row_sums(),
            "eq_what": f"equations {problem.name!r}",
            "coeffs": np.ascontiguousarray(problem.grid.axes[0].coeffs(np.eye(n), axis=0)),
        }
    return c


def workspace(problem, params, opts):
    """The fastest workspace that serves ``problem`` with options ``opts``."""
    if opts.workspace == "auto" and opts.linear_solver in ("auto", "dense") and _dense_capable(problem):
        return DenseWorkspace(problem, params, opts)
    return GenericWorkspace(problem, params, opts)


def _dense_capable(problem):
    """Whether :class:`DenseWorkspace` can serve ``problem`` (decided once per problem and grid)."""
    plan = problem._plan()
    ok = plan.get("dense_capable")
    if ok is None:
        ok = plan["dense_capable"] = (
            problem.grid.ndim == 1 and type(problem.grid.axes[0]).__name__ == "Chebyshev"
            and problem.linearization == "complex-step"
            and all(len(idx) == 1 for _, _, idx in plan["faces"]))
    return ok and problem._batched
