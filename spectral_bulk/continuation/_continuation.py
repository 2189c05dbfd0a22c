"""Pseudo-arclength continuation with events, branch switching and regridding.

Method
------
The unknown is ``x = (u, lam)`` with the weighted inner product
``<x, y> = (u . v)/m + lam mu`` (``m`` the number of field unknowns, so that the
arclength is comparable with parameter changes for O(1) fields).

* Predictor: ``x0 + ds t`` with ``t`` the unit tangent, the null vector of
  ``[J, F_lam]`` oriented so that ``<t, t_prev> > 0``.
* Corrector: Newton on the bordered system ``F(u, lam) = 0``,
  ``<t, x - x0> = ds`` (pseudo-arclength), whose matrix
  ``B = [[J, F_lam], [t_u^T/m, t_lam]]`` stays regular at folds.  It fails when an
  update grows by more than ``contraction_max`` or after ``max_corrector``
  iterations; the step is then reduced and retried.
* Step control: the step grows by ``growth`` after an easy correction (at most
  ``fast_iterations`` iterations), shrinks by ``shrink`` after a hard one (at
  least ``slow_iterations``) and stays within ``[min_step, max_step]``.
* Events: a fold is a sign change of ``t_lam``; a simple branch point is a
  sign change of ``det B`` (sign and log-magnitude from the LU factors; at a
  fold ``det B`` keeps its sign).  Each is located by the Illinois variant of
  regula falsi on the test function as a function of the arclength from the
  previous point (each trial point is a corrected point on the branch), to
  ``event_tol`` in arclength.  Near a fold ``lam`` is quadratic in the
  arclength, so the located ``lam`` is accurate to about ``event_tol**2``.
* Branch switching (:func:`switch`): at a located branch point the bordered
  matrix is singular; its null vector ``phi`` (by inverse iteration on ``B``)
  spans, with the current tangent, the null space of ``[J, F_lam]``.  The new
  branch is followed from the branch point with ``phi`` as its first tangent
  (predictor ``x* + ds phi``, corrector on the hyperplane orthogonal to
  ``phi``), which for a pitchfork is exactly the new branch's tangent.
* Resolution: after each point the spectral tail of every field along every
  axis is checked; an axis whose tail exceeds ``tail_tol`` is refined by
  ``refine`` (the state and tangent are interpolated and the point
  re-corrected); an axis resolved far below tolerance is coarsened by
  ``coarsen`` and kept only if the tail stays acceptable.  A point is never
  kept under-resolved: at ``n_max`` the run stops and says so.

References: the bordered pseudo-arclength scheme and the test functions are
common practice; see "Numerical Continuation Methods: An Introduction",
Springer Series in Computational Mathematics 13 (1990),
:doi:`10.1007/978-3-642-61257-2`.
"""

import dataclasses
import logging
import time

import numpy as np

from .._utils import validate_tol
from ..exceptions import ProblemDefinitionError, SingularJacobianError
from ..newton import Problem, SolveResult, make_solver, residual_norm, scaled_norm
from ..newton._linalg import BorderedInverse
from ..newton._newton import initial_state

log = logging.getLogger("spectral_bulk.continuation")

__all__ = ["ContinuationOptions", "Branch", "Event", "follow", "switch", "CONTINUATION_MESSAGES"]

#: Stop reasons of a branch; ``success`` is true for 0, 1 and 2.
CONTINUATION_MESSAGES = {
    0: "reached max_points ({max_points} points)",
    1: "reached the bound {name} = {bound:g}",
    2: "reached the last target {param} = {bound:g}",
    3: "step fell below min_step ({min_step:.1e}) at {param} = {value:.10g}: the corrector "
       "cannot converge here (a singular point the test functions did not see, or a jump)",
    4: "under-resolved at {param} = {value:.10g}: the spectral tail stays above {tail_tol:.1e} "
       "with {n} points (n_max): raise n_max or adapt the coordinate map",
    5: "interrupted by the user at {param} = {value:.10g}; the points computed so far are kept",
    6: "the start solution failed its certificate: {why}",
}


@dataclasses.dataclass
class ContinuationOptions:
    """Tolerances and constants of :func:`follow` (see the module notes for their roles).

    Attributes
    ----------
    tol : float
        Corrector tolerance on the scaled update (as :class:`NewtonOptions.tol`),
        and the residual tolerance of every point.
    tail_tol : float or None
        Spectral-tail tolerance per field (``None``: ``tol``).
    min_step, max_step : float
        Bounds of the arclength step.
    max_corrector : int
    contraction_max : float
        A corrector update larger than this fraction of the previous one fails.
    growth, shrink : float
        Step factors after easy / hard corrections and on failure.
    fast_iterations, slow_iterations : int
    event_tol : float
        Location tolerance of events, in arclength.
    events : tuple of str
        Which test functions to monitor: ``"fold"``, ``"branch"``.
    regrid : bool
    n_max : int
        Most points per axis when refining.
    n_min : int or None
        Fewest points per axis when coarsening; ``None`` means the start grid's
        (coarsening below the start could misplace events: the determinant
        test also needs the linearised spectrum resolved, not only the state).
    refine, coarsen : float
        Size factors when refining / coarsening an axis.
    coarsen_below : float
        Coarsen an axis only when its tail is below ``coarsen_below * tail_tol``.
    linear_solver : str
        As in :class:`NewtonOptions`.
    checkpoint_every : int
        Points between checkpoints when a checkpoint file is given.
    """

    tol: float = 1e-10
    tail_tol: float | None = None
    min_step: float = 1e-8
    max_step: float = 1.0
    max_corrector: int = 8
    contraction_max: float = 0.5
    growth: float = 1.5
    shrink: float = 0.5
    fast_iterations: int = 3
    slow_iterations: int = 6
    event_tol: float = 1e-9
    events: tuple = ("fold", "branch")
    regrid: bool = True
    n_max: int = 400
    n_min: int | None = None
    refine: float = 1.5
    coarsen: float = 0.8
    coarsen_below: float = 1e-4
    linear_solver: str = "auto"
    checkpoint_every: int = 5

    def validated(self):
        out = dataclasses.replace(self)
        out.tol = validate_tol(self.tol)
        out.tail_tol = out.tol if self.tail_tol is None else validate_tol(self.tail_tol, "tail_tol")
        if not 0 < self.min_step <= self.max_step:
            raise ValueError(f"need 0 < `min_step` <= `max_step`, got {self.min_step}, {self.max_step}")
        unknown = set(self.events) - {"fold", "branch"}
        if unknown:
            raise ValueError(f"`events` may contain 'fold' and 'branch', got {sorted(unknown)}")
        out.events = tuple(self.events)
        return out

    def linear_rtol(self):
        # as in NewtonOptions: eta = 1e-2 tol keeps the converged update within tol
        return max(min(1e-3, 1e-2 * self.tol), 1e-15)


class Event:
    """A located fold or branch point.

    Attributes
    ----------
    kind : {"fold", "branch"}
    value : float
        The continuation parameter there.
    solution : SolveResult
        The located solution.
    index : int
        Its position in ``branch.solutions``.
    test : float
        The test function at the located point (``t_lam`` for folds, the
        relative determinant for branch points).
    """

    def __init__(self, kind, value, solution, index, test, tangent):
        self.kind, self.value, self.solution, self.index = kind, float(value), solution, int(index)
        self.test = float(test)
        self.tangent = tangent  # (t_u, t_lam) on the solution's grid

    def __repr__(self):
        return f"Event({self.kind!r}, value={self.value:.12g}, index={self.index})"


class _Point:
    """Internal continuation state at one point."""

    __slots__ = ("prob", "u", "lam", "t_u", "t_lam", "det_sign", "logdet", "s", "step", "kind",
                 "iterations", "residual", "update", "tails", "solution", "observables", "factor")

    def __init__(self, prob, u, lam, **kw):
        self.prob, self.u, self.lam = prob, u, float(lam)
        for k in self.__slots__[3:]:
            setattr(self, k, kw.get(k))


class Branch:
    """A followed branch: its solutions, events and how the run ended.

    Attributes
    ----------
    param : str
    solutions : list of SolveResult
        In branch order (including located events, target and bound points).
    values : ndarray
        The parameter at each point.
    events : list of Event
    status : int, message : str, success : bool
        Why the run stopped (:data:`CONTINUATION_MESSAGES`).
    points : list
        Internal per-point records (tangent, step, determinant, grid).
    nit : int
        Total corrector iterations; ``njev`` total Jacobian evaluations.
    wall_time : float
    """

    def __init__(self, problem, param, options, observables=None, attrs=None):
        self.problem, self.param, self.options = problem, param, options
        self.observables_fn = observables
        self.points, self.events = [], []
        self.status, self.message = None, ""
        self.next_step = None
        self.nit = self.njev = 0
        self.wall_time = 0.0
        self.attrs = dict(attrs or {})
        self.fixed_params = {}
        #: optional ``callable(dataset) -> dataset`` applied by :meth:`to_dataset`
        self.postprocess = None

    @property
    def success(self):
        return self.status in (0, 1, 2)

    @property
    def solutions(self):
        return [p.solution for p in self.points]

    @property
    def values(self):
        return np.array([p.lam for p in self.points])

    def __len__(self):
        return len(self.points)

    def observable(self, name):
        """Array of a scalar observable along the branch."""
        return np.array([p.observables.get(name, np.nan) for p in self.points])

    def to_dataset(self):
        """The family as an :class:`xarray.Dataset` (layout in DEVELOPERS.md)."""
        from ..family import PointRecord, build_family_dataset

        recs = []
        for p in self.points:
            diag = {"iterations": p.iterations, "residual": p.residual, "update": p.update,
                    "step": p.step, "tangent_param": p.t_lam, "det_sign": p.det_sign,
                    "log_abs_det": p.logdet}
            diag.update({f"tail_{f}": t for f, t in zip(self.problem.fields, p.tails)})
            recs.append(PointRecord(p.lam, p.s, p.prob.grid, p.u, p.t_u, p.kind, diag, p.observables))
        events = [{"kind": e.kind, "value": e.value, "point": e.index, "test": e.test} for e in self.events]
        o = self.options
        attrs = {
            "problem": self.problem.name,
            "status": int(self.status if self.status is not None else -1),
            "message": self.message,
            "success": int(self.success),
            "tol": o.tol, "tail_tol": o.tail_tol, "min_step": o.min_step, "max_step": o.max_step,
            "event_tol": o.event_tol,
            "next_step": float(self.next_step if self.next_step is not None else np.nan),
        }
        for k, v in self.fixed_params.items():
            attrs[f"param_{k}"] = float(np.real(v))
        attrs.update(self.attrs)
        ds = build_family_dataset(self.param, self.problem.fields, recs, events, attrs)
        return self.postprocess(ds) if self.postprocess is not None else ds

    def __repr__(self):
        v = self.values
        rng = f"{v.min():.6g}..{v.max():.6g}" if len(v) else "empty"
        return (f"<Branch {self.param} in [{rng}], {len(self)} points, "
                f"{len(self.events)} events, status {self.status}: {self.message}>")


# ----------------------------------------------------------------------------
class _Follower:
    """The continuation loop (one instance per run)."""

    def __init__(self, problem, param, params, opts, branch, bounds, targets, callback,
                 checkpoint):
        self.template = problem
        self.param = param
        self.params = dict(params)
        self.o = opts
        self.branch = branch
        self.bounds = bounds
        self.targets = sorted(set(float(t) for t in targets))
        self.callback = callback
        self.checkpoint = checkpoint
        self._probs = {}

    # ---------------------------------------------------------------- helpers
    def prob_for(self, grid_or_shape):
        key = grid_or_shape if isinstance(grid_or_shape, tuple) else grid_or_shape.shape
        if key not in self._probs:
            if key == self.template.grid.shape:
                self._probs[key] = self.template
            else:
                self._probs[key] = self.template.with_grid(self.template.grid.resized(*key))
        return self._probs[key]

    def pv(self, lam):
        out = dict(self.params)
        out[self.param] = lam
        return out

    @staticmethod
    def metric(prob, u):
        """Weights of the field part of the inner product at state ``u``.

        ``<du, dv> = sum_f w_f^2 sum_p du_fp dv_fp / m`` with ``w_f = 1/max(max|u_f|, 1)``:
        fields of order one count as they are, large fields by their relative change, so
        that a field growing with the parameter does not shrink the parameter steps.
        """
        mags = np.abs(prob.split(u)).max(axis=1)
        w2 = 1.0 / np.maximum(mags, 1.0) ** 2
        return np.repeat(w2, prob.grid.size) / u.size

    @staticmethod
    def wnorm(m, t_u, t_lam):
        return np.sqrt(np.dot(m * t_u, t_u) + t_lam**2)

    def bordered(self, prob, u, lam, t_u, t_lam, check=True, m=None):
        """Linearise at (u, lam) and factorise B with border (t_u, t_lam)."""
        pv = self.pv(lam)
        F, A, Fl = prob.linearize_with_param(u, self.param, pv)
        self.branch.njev += 1
        m = self.metric(prob, u) if m is None else m
        solver = make_solver(prob, A, self.o.linear_solver, border=(Fl, m * t_u, t_lam),
                             rtol=self.o.linear_rtol(), check=check)
        return F, A, Fl, solver

    def correct(self, prob, x0_u, x0_lam, t_u, t_lam, u, lam, ds, check=True):
        """Pseudo-arclength corrector from the predicted (u, lam)."""
        u = u.copy()
        prev = None
        m = self.metric(prob, x0_u)
        for k in range(self.o.max_corrector):
            try:
                F, A, Fl, solver = self.bordered(prob, u, lam, t_u, t_lam, check, m=m)
                N = np.dot(m * t_u, u - x0_u) + t_lam * (lam - x0_lam) - ds
                d = -solver.solve(np.concatenate([F, [N]]))
            except SingularJacobianError:
                return None
            self.branch.nit += 1
            if not np.all(np.isfinite(d)):
                return None
            u = u + d[:-1]
            lam = lam + d[-1]
            nrm = max(scaled_norm(prob, d[:-1], u), abs(d[-1]) / max(1.0, abs(lam)))
            if nrm <= self.o.tol:
                return u, lam, k + 1, nrm
            if prev is not None and nrm > self.o.contraction_max * prev:
                return None
            prev = nrm
        return None

    def natural(self, prob, u, lam):
        """Newton at fixed parameter (targets and bounds), quietly."""
        from ..newton._newton import NewtonOptions, _newton

        res = _newton(prob, u, self.pv(lam), NewtonOptions(tol=self.o.tol, tail_tol=self.o.tail_tol,
                                                           max_iter=12, linear_solver=self.o.linear_solver
                                                           ).validated())
        self.branch.nit += res.iterations
        self.branch.njev += res.njev
        return res if res.status in (0, 5) else None

    def finish_point(self, prob, u, lam, t_prev_u, t_prev_lam, tangent=True, **kw):
        """Tangent, determinant and certificate at a converged point.

        With ``tangent=False`` (trial points when locating a branch point, where
        the bordered matrix is nearly singular) the previous tangent is kept and
        only the determinant is evaluated.
        """
        m = self.metric(prob, u)
        F, A, Fl, solver = self.bordered(prob, u, lam, t_prev_u, t_prev_lam, check=tangent, m=m)
        try:
            sign, logdet = solver.slogdet() if "branch" in self.o.events else (np.nan, np.nan)
            if tangent:
                rhs = np.zeros(u.size + 1)
                rhs[-1] = 1.0
                z = solver.solve(rhs)
                t_u, t_lam = z[:-1], z[-1]
                nz = self.wnorm(m, t_u, t_lam)
                t_u, t_lam = t_u / nz, t_lam / nz
            else:
                t_u, t_lam = t_prev_u, t_prev_lam
        except SingularJacobianError:
            return None
        tails = prob.grid.tail(prob.split(u), prob.scales)
        r = residual_norm(prob, F, A, u)
        p = _Point(prob, u, lam, t_u=t_u, t_lam=t_lam, det_sign=sign, logdet=logdet, tails=tails,
                   residual=r, **kw)
        if tangent and getattr(solver, "kind", None) == "dense":
            # J^{-1} from the factorisation at this point, for observables that refine the
            # solution (polish); dropped once they are computed (make_solution)
            p.factor = BorderedInverse(solver, Fl)
        return p

    def make_solution(self, p):
        prob = p.prob
        status = 0 if p.residual <= self.o.tol and max(p.tails) <= self.o.tail_tol else 5
        msg = ("converged (continuation point)" if status == 0 else
               "continuation point above tolerance in residual or tail")
        p.solution = SolveResult(prob, p.u, self.pv(p.lam), status=status, message=msg,
                                 iterations=p.iterations or 0, residual=p.residual,
                                 update=p.update if p.update is not None else np.nan,
                                 tail=dict(zip(prob.fields, map(float, p.tails))))
        fn = self.branch.observables_fn
        factor, p.factor = p.factor, None  # the point and its solution never keep it
        if fn is not None:
            p.solution._jacobian_solver = factor
            try:
                obs = fn(p.solution)
            finally:
                p.solution._jacobian_solver = None
            if not isinstance(obs, dict):
                raise ProblemDefinitionError("`observables` must return a dict of floats or arrays")
            p.observables = {k: (float(v) if np.ndim(v) == 0 else np.asarray(v, dtype=float))
                             for k, v in obs.items()}
        else:
            p.observables = {}
        return p

    # ------------------------------------------------------------- resolution
    def resolve(self, p, base):
        """Refine/coarsen the grid of a converged point; return the (new) point or None."""
        if not self.o.regrid:
            return p
        prob = p.prob
        for _ in range(12):
            tails = prob.grid.axis_tails(prob.split(p.u), prob.scales).max(axis=0)
            shape = list(prob.grid.shape)
            worst = tails.max()
            if worst > self.o.tail_tol:
                for k, t in enumerate(tails):
                    if t > self.o.tail_tol:
                        shape[k] = min(self.o.n_max, max(shape[k] + 4, int(np.ceil(shape[k] * self.o.refine))))
                if tuple(shape) == prob.grid.shape:
                    return None  # already at n_max
            elif worst < self.o.coarsen_below * self.o.tail_tol:
                floor = self.template.grid.shape if self.o.n_min is None else (self.o.n_min,) * len(shape)
                for k, t in enumerate(tails):
                    if t < self.o.coarsen_below * self.o.tail_tol:
                        shape[k] = max(floor[k], int(np.floor(shape[k] * self.o.coarsen)))
                if tuple(shape) == prob.grid.shape:
                    return p
                q = self.regrid(p, tuple(shape), base)
                ok = q is not None and max(q.tails) <= 0.1 * self.o.tail_tol
                return q if ok else p
            else:
                return p
            q = self.regrid(p, tuple(shape), base)
            if q is None:
                return None
            p, prob = q, q.prob
        return p

    def regrid(self, p, shape, base):
        new = self.prob_for(shape)
        mesh = [new.grid.coords[n] for n in new.grid.names]
        u = p.prob.grid.evaluate(p.prob.split(p.u), *mesh).ravel()
        t_u = p.prob.grid.evaluate(p.prob.split(p.t_u), *mesh).ravel()
        t_lam = p.t_lam
        nz = self.wnorm(self.metric(new, u), t_u, t_lam)
        t_u, t_lam = t_u / nz, t_lam / nz
        if p.kind in ("target", "bound", "start"):
            # these points keep their parameter value exactly: re-converge at fixed parameter
            res = self.natural(new, u, p.lam)
            if res is None:
                return None
            u2, lam2, it, upd = res.state, p.lam, res.iterations, res.update
        else:
            out = self.correct(new, u, p.lam, t_u, t_lam, u, p.lam, 0.0)
            if out is None:
                return None
            u2, lam2, it, upd = out
        q = self.finish_point(new, u2, lam2, t_u, t_lam, s=p.s, step=p.step, kind=p.kind,
                              iterations=(p.iterations or 0) + it, update=upd)
        log.info("regrid at %s=%.8g: n %s -> %s", self.param, p.lam, p.prob.grid.shape, shape)
        return q

    # ------------------------------------------------------------------ events
    def trial(self, base, s, kind="fold"):
        """Corrected point at arclength s from ``base`` along its tangent.

        For a branch point the bordered matrix becomes singular at the root, so
        the solves are not refused there and the base tangent is kept.
        """
        prob = base.prob
        fold = kind == "fold"
        out = self.correct(prob, base.u, base.lam, base.t_u, base.t_lam,
                           base.u + s * base.t_u, base.lam + s * base.t_lam, s, check=fold)
        if out is None:
            return None
        u, lam, it, upd = out
        return self.finish_point(prob, u, lam, base.t_u, base.t_lam, tangent=fold, s=base.s + s,
                                 step=s, iterations=it, update=upd)

    def test_value(self, kind, p, ref_logdet):
        if kind == "fold":
            return p.t_lam
        return p.det_sign * np.exp(np.clip(p.logdet - ref_logdet, -700, 700))

    def locate(self, kind, base, new):
        """Illinois regula falsi on the test function between base (s=0) and new (s=ds)."""
        if new.prob is not base.prob:
            return None
        ds = new.s - base.s
        ref = base.logdet
        g0 = self.test_value(kind, self.trial(base, 0.0, kind) or base, ref) if kind == "branch" else base.t_lam
        g1 = self.test_value(kind, new, ref)
        a, b, ga, gb = 0.0, ds, g0, g1
        side = 0
        best = new
        for _ in range(60):
            if abs(b - a) <= self.o.event_tol * max(1.0, abs(ds)):
                break
            c = b - gb * (b - a) / (gb - ga) if gb != ga else 0.5 * (a + b)
            if not (min(a, b) < c < max(a, b)):
                c = 0.5 * (a + b)
            p = self.trial(base, c, kind)
            if p is None:
                return None
            gc = self.test_value(kind, p, ref)
            best = p
            if gc == 0:
                break
            if np.sign(gc) == np.sign(gb):
                b, gb = c, gc
                if side == -1:
                    ga /= 2
                side = -1
            else:
                a, ga = c, gc
                if side == 1:
                    gb /= 2
                side = 1
        best.kind = kind
        return best, self.test_value(kind, best, ref)

    # --------------------------------------------------------------- the loop
    def add(self, p):
        self.make_solution(p)
        self.branch.points.append(p)
        if self.callback is not None:
            self.callback(self.progress(p))
        return p

    def progress(self, p):
        return {"points": len(self.branch.points), "param": self.param, "value": p.lam,
                "step": p.step, "iterations": p.iterations, "events": len(self.branch.events),
                "n": p.prob.grid.shape, "kind": p.kind}

    def maybe_checkpoint(self, force=False):
        if self.checkpoint is None:
            return
        n = len(self.branch.points)
        if force or (n % max(1, self.o.checkpoint_every) == 0):
            from ..family import write_atomic

            write_atomic(self.branch.to_dataset(), self.checkpoint)

    def crossing_points(self, base, new):
        """Target and bound values crossed between two consecutive points."""
        out = []
        lo, hi = sorted((base.lam, new.lam))
        for t in self.targets:
            if lo < t <= hi or (t == lo and t != base.lam):
                out.append(("target", t))
        for k, (blo, bhi) in self.bounds.items():
            if k != self.param:
                continue
            for b in (blo, bhi):
                if b is not None and lo < b <= hi and b != base.lam:
                    out.append(("bound", b))
        return out

    def land(self, kind, value, base, new):
        """Solve at a target/bound value from the interpolant between base and new."""
        f = (value - base.lam) / (new.lam - base.lam) if new.lam != base.lam else 0.5
        if new.prob is base.prob:
            prob, u0 = base.prob, base.u + f * (new.u - base.u)
            t_u = base.t_u + f * (new.t_u - base.t_u)
        else:
            prob = new.prob
            mesh = [prob.grid.coords[n] for n in prob.grid.names]
            ub = base.prob.grid.evaluate(base.prob.split(base.u), *mesh).ravel()
            u0 = ub + f * (new.u - ub)
            t_u = new.t_u
        res = self.natural(prob, u0, value)
        if res is None:
            return None
        t_lam = base.t_lam + f * (new.t_lam - base.t_lam)
        nz = self.wnorm(self.metric(prob, res.state), t_u, t_lam)
        p = self.finish_point(prob, res.state, value, t_u / nz, t_lam / nz,
                              s=base.s + f * (new.s - base.s), step=f * (new.s - base.s),
                              kind=kind, iterations=res.iterations, update=res.update)
        return p

    def out_of_bounds(self, p):
        for k, (lo, hi) in self.bounds.items():
            if k == self.param:
                v = p.lam
            elif k in self.template.fields:
                v = float(np.abs(p.prob.split(p.u)[self.template.fields.index(k)]).max())
            else:
                v = p.observables.get(k, np.nan) if p.observables else np.nan
            if (lo is not None and v < lo) or (hi is not None and v > hi):
                return k, lo if (lo is not None and v < lo) else hi
        return None

    def run(self, start, step, max_points):
        br = self.branch
        o = self.o
        cur = start
        ds = abs(step)
        fmt = dict(max_points=max_points, param=self.param, name=self.param, bound=np.nan, min_step=o.min_step,
                   value=cur.lam, tail_tol=o.tail_tol, n=cur.prob.grid.shape, why="")
        status = 0
        try:
            while len(br.points) < max_points:
                fmt["value"] = cur.lam
                pred_u = cur.u + ds * cur.t_u
                pred_lam = cur.lam + ds * cur.t_lam
                out = self.correct(cur.prob, cur.u, cur.lam, cur.t_u, cur.t_lam, pred_u, pred_lam, ds)
                new = None
                if out is not None:
                    u, lam, it, upd = out
                    new = self.finish_point(cur.prob, u, lam, cur.t_u, cur.t_lam, s=cur.s + ds,
                                            step=ds, kind="regular", iterations=it, update=upd)
                if new is None:
                    ds *= o.shrink
                    if ds < o.min_step:
                        status = 3
                        break
                    continue
                inserted = []
                for kind in o.events:
                    if not np.isfinite(cur.t_lam if kind == "fold" else cur.det_sign):
                        continue
                    if kind == "fold":
                        changed = np.sign(new.t_lam) != np.sign(cur.t_lam) and cur.t_lam != 0
                    else:
                        changed = (np.isfinite(new.det_sign) and cur.det_sign != 0
                                   and new.det_sign != cur.det_sign)
                    if changed:
                        loc = self.locate(kind, cur, new)
                        if loc is not None:
                            inserted.append(("event", loc[0], loc[1]))
                crossed = self.crossing_points(cur, new)
                for kind, value in crossed:
                    q = self.land(kind, value, cur, new)
                    if q is not None:
                        inserted.append((kind, q, value))
                # the new point itself (resolution-checked)
                resolved = self.resolve(new, cur)
                if resolved is None:
                    fmt["n"] = tuple(min(o.n_max, n) for n in new.prob.grid.shape)
                    fmt["value"] = new.lam
                    status = 4
                    break
                new = resolved
                stop = None
                for kind, q, val in sorted(inserted, key=lambda e: e[1].s):
                    q = self.resolve(q, cur) or q
                    self.add(q)
                    if kind == "event":
                        br.events.append(Event(q.kind, q.lam, q.solution, len(br.points) - 1, val,
                                               (q.t_u, q.t_lam)))
                        log.info("%s located at %s = %.12g", q.kind, self.param, q.lam)
                    if kind == "bound":
                        stop = (1, val)
                    elif kind == "target" and self.stop_at_last and val == self.targets[-1]:
                        stop = (2, val)
                    if stop is not None:
                        break
                if stop is not None:
                    status, fmt["bound"] = stop
                    break
                self.add(new)
                ob = self.out_of_bounds(new)
                if ob is not None:
                    fmt["name"], fmt["bound"] = ob
                    status = 1
                    break
                # step control
                it = new.iterations or 0
                if it <= o.fast_iterations:
                    ds = min(o.max_step, ds * o.growth)
                elif it >= o.slow_iterations:
                    ds = max(o.min_step, ds * o.shrink)
                cur = new
                self.maybe_checkpoint()
        except KeyboardInterrupt:
            status = 5
            fmt["value"] = cur.lam
        br.status = status
        br.message = CONTINUATION_MESSAGES[status].format(**fmt)
        br.next_step = ds
        self.maybe_checkpoint(force=True)
        return br

    stop_at_last = False


def _start_point(fol, problem, start, step, tangent=None):
    """Converge (if needed) the start solution and compute its tangent."""
    params = fol.params
    if isinstance(start, SolveResult):
        prob = problem if start.grid == problem.grid else problem.with_grid(start.grid)
        fol._probs[start.grid.shape] = prob
        u = start.state.copy()
        lam = float(np.real(start.params.get(fol.param, params[fol.param])))
    else:
        prob = problem
        u = initial_state(problem, start)
        lam = params[fol.param]
    res = fol.natural(prob, u, lam) if tangent is None else None
    if tangent is None:
        if res is None or res.status != 0:
            return None, "start solution did not converge" if res is None else res.message
        u = res.state
    if tangent is None:
        t_u0 = np.zeros_like(u)
        p = fol.finish_point(prob, u, lam, t_u0, 1.0, s=0.0, step=0.0, kind="start",
                             iterations=res.iterations if res is not None else 0,
                             update=res.update if res is not None else np.nan)
        if p is None:
            return None, "the Jacobian is singular at the start (a fold or branch point)"
        if np.sign(p.t_lam) != np.sign(step) and p.t_lam != 0:
            p.t_u, p.t_lam = -p.t_u, -p.t_lam
    else:
        t_u, t_lam = tangent
        p = fol.finish_point(prob, u, lam, t_u, t_lam, tangent=False, s=0.0, step=0.0, kind="start",
                             iterations=0, update=np.nan)
        if p is None:
            return None, "cannot factorise the bordered system at the switching point"
        p.t_u, p.t_lam = t_u, t_lam
        p.det_sign = np.nan  # the determinant vanishes at a branch point: skip the first test
    return p, ""


def follow(problem, start, param, *, step=0.05, bounds=None, max_points=200, targets=(),
           params=None, observables=None, callback=None, checkpoint=None, resume=None,
           stop_at_last_target=False, attrs=None, options=None, **kwargs):
    """Follow a branch of solutions of ``problem`` in the parameter ``param``.

    Parameters
    ----------
    problem : Problem
    start : SolveResult or guess
        A solution to start from (re-converged at its parameters), or a guess
        for :func:`spectral_bulk.solve` at ``params``.
    param : str
        The continuation parameter (one of ``problem.params``).
    step : float
        First arclength step; its sign sets the direction (increasing or
        decreasing ``param`` at the start).
    bounds : dict, optional
        ``{name: (lo, hi)}`` with ``None`` for an open side; ``name`` is the
        parameter (the run lands exactly on the bound and stops), a field (max
        absolute value) or an observable.
    max_points : int
        The run stops once this many points are kept (events, targets and
        bounds count).  The points located within the last step are all kept,
        so a run can end a few points above ``max_points``; this keeps the last
        point a regular one, from which ``resume`` continues exactly.
    targets : sequence of float
        Parameter values to land on exactly (solved at fixed parameter from the
        interpolant between the neighbouring points).
    params : dict, optional
        Values of the other parameters.
    observables : callable, optional
        ``observables(solution) -> dict`` of floats or arrays, stored per point.
    callback : callable, optional
        ``callback(progress_dict)`` after each kept point (the CLI progress line).
    checkpoint : path, optional
        Write the family there atomically every ``checkpoint_every`` points and
        at the end.
    resume : path, optional
        Continue the family stored in this file (written by a previous run with
        the same problem and parameter); the result equals an uninterrupted run.
    stop_at_last_target : bool
        Stop after landing on the largest target.
    attrs : dict, optional
        Extra attributes for the family dataset (e.g. the config text).
    options : ContinuationOptions, optional
    **kwargs
        Shortcuts for :class:`ContinuationOptions` fields (``tol``, ``max_step``, ...).

    Returns
    -------
    Branch
        Also when the run stops early: ``status``/``message`` say why, and the
        points computed so far are kept.  Ctrl-C stops cleanly (status 5).
    """
    if not isinstance(problem, Problem):
        raise TypeError(f"`problem` must be a Problem, got {type(problem).__name__}")
    if param not in problem.params:
        raise ProblemDefinitionError(
            f"`param` {param!r} is not a parameter of the problem (have {sorted(problem.params)})"
        )
    tangent = kwargs.pop("_tangent", None)
    opts = dataclasses.replace(options or ContinuationOptions())
    for k, v in kwargs.items():
        if not hasattr(opts, k):
            raise TypeError(f"follow() got an unknown option {k!r}")
        setattr(opts, k, v)
    opts = opts.validated()
    if step == 0 or not np.isfinite(step):
        raise ValueError(f"`step` must be non-zero and finite, got {step}")
    bounds = _check_bounds(bounds)
    t0 = time.perf_counter()
    branch = Branch(problem, param, opts, observables, attrs)
    merged = dict(problem.params)
    if isinstance(start, SolveResult):
        merged.update(start.params)
    merged = problem.merged_params({**merged, **dict(params or {})})
    fol = _Follower(problem, param, merged, opts, branch, bounds, targets, callback, checkpoint)
    fol.stop_at_last = bool(stop_at_last_target)
    branch.fixed_params = {k: v for k, v in merged.items() if k != param}
    if resume is not None:
        cur = _resume(fol, resume)
        step = branch.next_step if branch.next_step and np.isfinite(branch.next_step) else step
    else:
        cur, why = _start_point(fol, problem, start, step, tangent)
        if cur is None:
            branch.status = 6
            branch.message = CONTINUATION_MESSAGES[6].format(why=why)
            return branch
        fol.add(cur)
    fol.run(cur, step, max_points)
    branch.wall_time = time.perf_counter() - t0
    return branch


def _check_bounds(bounds):
    out = {}
    for k, v in dict(bounds or {}).items():
        try:
            lo, hi = v
        except (TypeError, ValueError):
            raise ValueError(f"bound for {k!r} must be a pair (lo, hi), got {v!r}") from None
        out[k] = (None if lo is None else float(lo), None if hi is None else float(hi))
    return out


def _resume(fol, path):
    from ..family import open_family, read_family_dataset

    ds = open_family(path)
    if ds.attrs.get("parameter") != fol.param:
        raise ProblemDefinitionError(
            f"cannot resume {path}: it follows {ds.attrs.get('parameter')!r}, not {fol.param!r}"
        )
    if ds.attrs.get("fields", "").split(",") != list(fol.template.fields):
        raise ProblemDefinitionError(f"cannot resume {path}: its fields differ from the problem's")
    recs, events = read_family_dataset(ds, lambda shape: fol.prob_for(shape).grid)
    br = fol.branch
    for k, v in ds.attrs.items():
        if k.startswith("param_") and k[6:] in fol.params:
            fol.params[k[6:]] = float(v)
    br.fixed_params = {k: v for k, v in fol.params.items() if k != fol.param}
    for r in recs:
        prob = fol.prob_for(r.grid.shape)
        d = r.diagnostics
        p = _Point(prob, r.state, r.value, t_u=r.tangent, t_lam=d.get("tangent_param"),
                   det_sign=d.get("det_sign"), logdet=d.get("log_abs_det"), s=r.arclength,
                   step=d.get("step"), kind=r.kind, iterations=int(d.get("iterations", 0)),
                   residual=d.get("residual"), update=d.get("update"),
                   tails=np.array([d.get(f"tail_{f}", np.nan) for f in fol.template.fields]))
        fol.make_solution(p)
        p.observables = r.observables or p.observables
        br.points.append(p)
    for e in events:
        q = br.points[e["point"]]
        br.events.append(Event(e["kind"], e["value"], q.solution, e["point"], e["test"], (q.t_u, q.t_lam)))
    br.next_step = float(ds.attrs.get("next_step", np.nan))
    return br.points[-1]


def switch(branch, event, *, step=0.05, bounds=None, max_points=200, targets=(), observables=None,
           callback=None, checkpoint=None, options=None, **kwargs):
    """Follow the other branch through a located branch point.

    Parameters
    ----------
    branch : Branch
        The branch on which ``event`` was found.
    event : Event
        An event of kind ``"branch"``.
    step : float
        First arclength step along the new direction ``phi``; its sign picks
        one half of the new branch: with a parameter component, positive means
        increasing parameter; for a pitchfork (no parameter component), positive
        means the half whose field part has a positive mean.
    bounds, max_points, targets, observables, callback, checkpoint, options, **kwargs :
        As for :func:`follow` (defaults for ``options`` and ``observables`` are
        taken from ``branch``).

    Returns
    -------
    Branch
        Starting at the branch point.

    Notes
    -----
    ``phi`` is the null vector of the bordered matrix at the located point
    (two steps of inverse iteration from a fixed random vector); it is
    orthogonal to the current tangent and spans with it the null space of
    ``[J, F_lam]``.  See the module notes.
    """
    if event.kind != "branch":
        raise ValueError(f"can only switch at a branch point, not at a {event.kind!r}")
    opts = options or branch.options
    fol = _Follower(branch.problem, branch.param, event.solution.params, opts, Branch(
        branch.problem, branch.param, opts), {}, (), None, None)
    prob = event.solution.problem
    u = event.solution.state
    lam = float(np.real(event.solution.params[branch.param]))
    t_u, t_lam = event.tangent
    F, A, Fl, solver = fol.bordered(prob, u, lam, t_u, t_lam)
    rng = np.random.default_rng(12345)
    z = rng.standard_normal(u.size + 1)
    for _ in range(3):
        try:
            z = solver.solve(z / np.linalg.norm(z))
        except SingularJacobianError:  # exactly singular: use the dense SVD instead
            from ..newton import DenseSolver

            mat = DenseSolver(prob, A, border=(Fl, _Follower.metric(prob, u) * t_u, t_lam)).matrix
            z = np.linalg.svd(mat)[2][-1]
            break
    phi_u, phi_lam = z[:-1], z[-1]
    nz = _Follower.wnorm(_Follower.metric(prob, u), phi_u, phi_lam)
    phi_u, phi_lam = phi_u / nz, phi_lam / nz
    ref = phi_lam if abs(phi_lam) > 1e-8 else np.sum(phi_u)
    if np.sign(ref) != np.sign(step):
        phi_u, phi_lam = -phi_u, -phi_lam
    return follow(branch.problem, event.solution, branch.param, step=abs(step), bounds=bounds,
                  max_points=max_points, targets=targets,
                  observables=observables if observables is not None else branch.observables_fn,
                  callback=callback, checkpoint=checkpoint, options=opts, _tangent=(phi_u, phi_lam),
                  **kwargs)
