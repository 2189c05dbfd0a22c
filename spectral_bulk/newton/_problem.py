"""Pointwise boundary-value problems on a collocation grid.

A :class:`Problem` binds a grid, field names, a pointwise residual, boundary
conditions and parameters.  It evaluates the discretised operator F(U) and its
exact linearisation by complex-step differentiation of the pointwise callbacks:

    F_j(U)[p] = E_j(c[p], {D^alpha U_i [p]}, params)      (interior rows)
    F_j(U)[p] = B_j(c[p], {D^alpha U_i [p]}, params)      (boundary rows)
    dF_j/dU_i = sum_alpha diag(A[j, i, alpha, :]) D^alpha
    A[j, i, alpha, p] = Im E_j(... D^alpha U_i[p] + i h ...) / h

which is exact to rounding for residuals that are real-analytic in their
arguments ("complex-safe": no ``abs``, ``maximum``, ``conj`` or comparisons on
the fields) [1]_.

References
----------
.. [1] "The complex-step derivative approximation", ACM Trans. Math. Softw. 29
   (2003) 245-262, :doi:`10.1145/838250.838251`.
"""

import numpy as np

from ..exceptions import ProblemDefinitionError
from ..grids import as_grid

__all__ = ["Problem", "Namespace"]

_H = 1e-30  # complex step: any tiny h works, the derivative carries no cancellation
_FD_STEP = np.finfo(float).eps ** (1 / 3)  # optimal relative step of central differences


class Namespace:
    """Attribute access to named arrays with a clear error for unknown names.

    The names live in the instance dictionary, so that a known name is an ordinary
    (fast) attribute lookup and only an unknown one reaches :meth:`__getattr__`.
    """

    def __init__(self, data, what):
        d = object.__getattribute__(self, "__dict__")
        d.update(data)
        d["_Namespace__what"] = what

    def _names(self):
        return [k for k in object.__getattribute__(self, "__dict__") if k != "_Namespace__what"]

    def __getattr__(self, name):
        if name.startswith("__"):
            raise AttributeError(name)
        what = object.__getattribute__(self, "__dict__")["_Namespace__what"]
        names = sorted(Namespace._names(self))
        known = ", ".join(names) if len(names) < 40 else ", ".join(names[:40]) + ", ..."
        raise ProblemDefinitionError(f"unknown {what} {name!r}; known: {known}") from None

    def __getitem__(self, name):
        d = object.__getattribute__(self, "__dict__")
        if name in d and name != "_Namespace__what":
            return d[name]
        return self.__getattr__(name)

    def __contains__(self, name):
        return name in Namespace._names(self)

    def __setattr__(self, name, value):
        raise AttributeError("namespaces passed to callbacks are read-only")

    def keys(self):
        return Namespace._names(self)

    def __repr__(self):
        return f"Namespace({', '.join(Namespace._names(self))})"


def _callable_name(fun):
    return getattr(fun, "__qualname__", None) or repr(fun)


class Problem:
    """A boundary-value problem written pointwise.

    Parameters
    ----------
    grid : Chebyshev, Fourier or Grid
        Collocation grid (a single basis means a one-dimensional problem).
    fields : sequence of str
        Names of the unknown functions, e.g. ``["u", "v"]``.
    equations : callable
        ``equations(c, f, p) -> sequence (or dict by field name) of arrays``, one
        residual per field, evaluated pointwise: ``c.<coord>`` are coordinate
        arrays, ``f.<field>`` and ``f.<field>_<coords>`` the fields and their
        derivatives (``f.u_x``, ``f.u_xx``; in 2-D ``f.u_z``, ``f.u_zx``, ...),
        ``p.<name>`` the parameters.  Arrays may carry a leading batch axis
        (used for the linearisation), so write elementwise, complex-safe code.
    boundary : dict, optional
        Maps each end of a non-periodic direction (``"left"``, ``"right"``,
        ``"x=0"``, ``"x=a"``, ...) to ``cond(c, f, p) -> sequence`` (or dict) with
        one entry per field.  The entry for field ``i`` replaces equation ``i`` at
        that end; ``None`` keeps the equation itself there (use it at regular
        singular points such as horizons, where the equation degenerates into a
        regularity condition).  Ends that are not listed keep all equations.
    params : dict, optional
        Parameter values by name (floats).  They can be changed per solve.
    max_order : int
        Highest total derivative order made available to the callbacks (2).
    scales : dict, optional
        Per-field size floor used by the norms (default 1): update, tail and
        residual norms are relative to ``max(max|u_f|, scale_f)``.
    name : str, optional
        A label used in messages and files.
    linearization : {"complex-step", "finite-difference"}
        How the pointwise coefficients are obtained.  The complex step is exact
        to rounding and is the default; central finite differences (relative
        step ``EPS**(1/3)``, accurate to about ``1e-10``) serve residuals that
        cannot be made complex-safe and as an independent check.

    Notes
    -----
    The unknown vector stacks the fields: ``U[i*size:(i+1)*size]`` is field ``i``
    at the grid points in C order.
    """

    def __init__(self, grid, fields, equations, boundary=None, params=None, *,
                 max_order=2, scales=None, name=None, linearization="complex-step"):
        self.grid = as_grid(grid)
        if isinstance(fields, str):
            fields = [fields]
        fields = list(fields)
        if not fields:
            raise ProblemDefinitionError("`fields` must name at least one field")
        for fname in fields:
            if not (isinstance(fname, str) and fname.isidentifier()):
                raise ProblemDefinitionError(f"field name {fname!r} is not an identifier")
            if fname in self.grid.names:
                raise ProblemDefinitionError(f"field name {fname!r} clashes with a coordinate name")
        if len(set(fields)) != len(fields):
            raise ProblemDefinitionError(f"duplicate field names in {fields}")
        self.fields = tuple(fields)
        if not callable(equations):
            raise ProblemDefinitionError("`equations` must be callable as equations(c, f, p)")
        self.equations = equations
        self.max_order = int(max_order)
        if self.max_order < 1:
            raise ProblemDefinitionError("`max_order` must be >= 1")
        self.params = {}
        for k, v in dict(params or {}).items():
            self.params[k] = _as_param(k, v)
        self.boundary = {}
        for key, fun in dict(boundary or {}).items():
            try:
                face = self.grid.resolve_face(key)
            except ValueError as exc:
                raise ProblemDefinitionError(str(exc)) from None
            if face in self.boundary:
                raise ProblemDefinitionError(f"boundary key {key!r} repeats an end already given")
            if fun is not None and not callable(fun):
                raise ProblemDefinitionError(f"boundary condition for {key!r} must be callable")
            self.boundary[face] = (key, fun)
        sc = dict(scales or {})
        for k in sc:
            if k not in self.fields:
                raise ProblemDefinitionError(f"`scales` names unknown field {k!r}")
        self.scales = np.array([float(sc.get(f, 1.0)) for f in self.fields])
        self.name = name or _callable_name(equations)
        if linearization not in ("complex-step", "finite-difference"):
            raise ProblemDefinitionError(
                f"`linearization` must be 'complex-step' or 'finite-difference', got {linearization!r}"
            )
        self.linearization = linearization
        self.alphas = self.grid.multi_indices(self.max_order)
        self._batched = True
        self._joint = {}  # parameter -> whether linearize_with_param may batch it (checked once)
        self._ops = None

    def __getstate__(self):
        # the per-grid cache is rebuilt on demand; it holds per-thread buffers that do not pickle
        state = dict(self.__dict__)
        state["_ops"] = None
        return state

    # --------------------------------------------------------------- utilities
    @property
    def nfields(self):
        return len(self.fields)

    @property
    def size(self):
        """Number of unknowns (fields times grid points)."""
        return self.nfields * self.grid.size

    def with_grid(self, grid):
        """The same problem on another grid (same callbacks, params and scales)."""
        new = object.__new__(Problem)
        new.__dict__.update(self.__dict__)
        new.grid = as_grid(grid)
        if len(new.grid.axes) != len(self.grid.axes) or new.grid.names != self.grid.names:
            raise ProblemDefinitionError("a regridded problem must keep the coordinate names")
        new.boundary = {}
        for key, fun in self.boundary.values():
            new.boundary[new.grid.resolve_face(key)] = (key, fun)
        new.alphas = new.grid.multi_indices(new.max_order)
        new._ops = None
        new._joint = dict(self._joint)
        return new

    def merged_params(self, params=None):
        """Problem parameters updated by ``params`` (unknown names are an error)."""
        out = dict(self.params)
        for k, v in dict(params or {}).items():
            if k not in out:
                raise ProblemDefinitionError(
                    f"unknown parameter {k!r}; the problem defines {sorted(out) or 'none'}"
                )
            out[k] = _as_param(k, v)
        return out

    def split(self, state):
        """View of a flat state as ``(nfields, size)``."""
        return np.asarray(state).reshape(self.nfields, self.grid.size)

    def field_dict(self, state):
        """Dict field name -> nodal values shaped like the grid."""
        u = self.split(state)
        return {f: u[i].reshape(self.grid.shape) for i, f in enumerate(self.fields)}

    def _plan(self):
        """Per-grid constants of the evaluation, computed once (names, faces, operators)."""
        if self._ops is None:
            names = []
            for i, f in enumerate(self.fields):
                for k, a in enumerate(self.alphas):
                    for suffix in self.grid.deriv_aliases(a):
                        names.append((f + suffix, i, k))
            faces = [(key, fun, self.grid.faces[face]) for face, (key, fun) in self.boundary.items()
                     if fun is not None]
            coords, face_coords = _coordinate_namespaces(self.grid.coords, faces)
            dstack = None
            if self.grid.ndim == 1:
                d = self.grid.axes[0].diff_matrices(self.max_order)
                n = self.grid.size
                mats = [np.eye(n)] + [d[a[0] - 1] for a in self.alphas[1:]]
                dstack = np.ascontiguousarray(np.concatenate([m.T for m in mats], axis=1))
            self._ops = {"names": names, "faces": faces, "coords": coords,
                         "face_coords": face_coords, "dstack": dstack}
        return self._ops

    def derivatives(self, state):
        """All derivatives ``D^alpha U_i``; shape ``(nfields, nalpha, size)``."""
        u = self.split(state)
        plan = self._plan()
        if plan["dstack"] is not None:
            return (u @ plan["dstack"]).reshape(self.nfields, len(self.alphas), self.grid.size)
        return np.stack([self.grid.apply(a, u) if any(a) else u for a in self.alphas], axis=1)

    def _dense_ops(self):
        """Stack of dense derivative operators ``(nalpha, size, size)`` (cached per grid)."""
        plan = self._plan()
        if "dense" not in plan:
            plan["dense"] = np.stack([self.grid.dense_operator(a) for a in self.alphas])
        return plan["dense"]

    def row_sums(self):
        """Absolute row sums of each derivative operator, ``(nalpha, size)`` (cached)."""
        plan = self._plan()
        if "rowsums" not in plan:
            out = []
            for alpha in self.alphas:
                parts = [np.ones(b.n) if o == 0 else np.abs(b.diff_matrices(o)[o - 1]).sum(axis=1)
                         for b, o in zip(self.grid.axes, alpha)]
                r = parts[0]
                for q in parts[1:]:
                    r = np.multiply.outer(r, q)
                out.append(np.ravel(r))
            plan["rowsums"] = np.stack(out)
        return plan["rowsums"]

    def _namespace(self, values):
        """Field namespace from values shaped ``(nfields, nalpha, ...)``."""
        return Namespace({name: values[i, k] for name, i, k in self._plan()["names"]},
                         "field or derivative")

    # ----------------------------------------------------------- evaluations
    def _call(self, fun, c, fvals, params, what, npts):
        out = fun(c, self._namespace(fvals), params)
        return self._normalise(out, what, npts, fvals.shape[2:-1])

    def _normalise(self, out, what, npts, batch):
        if isinstance(out, dict):
            unknown = set(out) - set(self.fields)
            if unknown:
                raise ProblemDefinitionError(f"{what} returned unknown field(s) {sorted(unknown)}")
            out = [out.get(f) for f in self.fields]
        elif isinstance(out, np.ndarray) and out.ndim >= 1 and self.nfields > 1 and out.shape[0] == self.nfields:
            out = list(out)
        elif not isinstance(out, (list, tuple)):
            out = [out]
        if len(out) != self.nfields:
            raise ProblemDefinitionError(
                f"{what} returned {len(out)} entries, expected {self.nfields} "
                f"(one per field: {', '.join(self.fields)})"
            )
        res = []
        target = batch + (npts,)
        for f, r in zip(self.fields, out):
            if r is None:
                res.append(None)
                continue
            if getattr(r, "shape", None) != target:
                r = np.asarray(r)
                try:
                    r = np.broadcast_to(r, target)
                except ValueError:
                    raise ProblemDefinitionError(
                        f"{what}: entry for field {f!r} has shape {r.shape}, "
                        f"expected {(npts,)} (one value per point)"
                    ) from None
            res.append(r)
        return res

    def _evaluate(self, dvals, params, complex_step=None, coords=None, dtype=float):
        """Residual rows (boundary rows replaced); shape ``(nfields, [batch,] size)``.

        ``dvals`` has shape ``(nfields, nalpha, [batch,] size)``; ``coords`` (default the
        grid's) is a dict name -> coordinate array and ``dtype`` the real type of the rows.
        """
        npts = self.grid.size
        plan = self._plan()
        p = Namespace(params, "parameter")
        if coords is None:
            coords, face_coords = plan["coords"], plan["face_coords"]
        else:
            coords, face_coords = _coordinate_namespaces(coords, plan["faces"])
        eq = self._call(self.equations, coords, dvals, p, f"equations {self.name!r}", npts)
        for i, e in enumerate(eq):
            if e is None:
                raise ProblemDefinitionError(
                    f"equations returned None for field {self.fields[i]!r}; "
                    "None is only meaningful in boundary conditions"
                )
        if not complex_step:
            eq = [real_rows(e) for e in eq]
        rows = np.array(eq, dtype=complex if complex_step else dtype)
        for (key, fun, idx), cb in zip(plan["faces"], face_coords):
            bc = self._call(fun, cb, dvals[..., idx], p, f"boundary condition {key!r}", len(idx))
            for i, b in enumerate(bc):
                if b is not None:
                    rows[i][..., idx] = b if complex_step else real_rows(b)
        return rows

    def residual(self, state, params=None):
        """The discretised operator F(U), flat, shape ``(size,)``."""
        params = self.merged_params(params)
        dv = self.derivatives(state)
        with np.errstate(all="ignore"):
            return self._evaluate(dv, params).ravel()

    def residual_extended(self, state, params=None, dtype=np.longdouble):
        """The residual in a floating type wider than double (1-D affine Chebyshev grids).

        Coordinates, differentiation matrices, state and the callbacks' arithmetic are
        all in ``dtype``; callbacks written with numpy operations carry it through.

        Parameters
        ----------
        state : array_like
            Flat state, converted to ``dtype``.
        params : dict, optional
        dtype : numpy floating type

        Returns
        -------
        ndarray, shape (size,), of ``dtype``

        Raises
        ------
        NotImplementedError
            On a multi-dimensional grid or a non-affine map.
        """
        grid = self.grid
        if grid.ndim != 1 or not hasattr(grid.axes[0], "extended"):
            raise NotImplementedError("extended-precision residuals need a 1-D Chebyshev grid")
        params = self.merged_params(params)
        points, mats = grid.axes[0].extended(self.max_order, dtype)
        u = np.asarray(state, dtype=dtype).reshape(self.nfields, grid.size)
        dv = np.empty((self.nfields, len(self.alphas), grid.size), dtype=dtype)
        for k, (order,) in enumerate(self.alphas):
            dv[:, k] = u if order == 0 else u @ mats[order - 1].T
        coords = {grid.names[0]: points}
        with np.errstate(all="ignore"):
            return self._evaluate(dv, params, coords=coords, dtype=dtype).ravel()

    def linearize(self, state, params=None):
        """Residual and pointwise linearisation coefficients.

        Returns
        -------
        F : ndarray, shape (size,)
        A : ndarray, shape (nfields, nfields, nalpha, npoints)
            ``A[j, i, k, p] = dF_j[p] / d(D^{alpha_k} U_i)[p]``.
        """
        params = self.merged_params(params)
        dv = self.derivatives(state)
        nf, na, npts = dv.shape
        if self.linearization == "finite-difference":
            return self._linearize_fd(dv, params)
        nslot = nf * na
        with np.errstate(all="ignore"):
            if self._batched:
                try:
                    pert = dv[:, :, None, :] + self._plan_perturbation()
                    rows = self._evaluate(pert, params, complex_step=True)
                except ProblemDefinitionError:
                    raise
                except (ValueError, TypeError, IndexError):
                    # the callbacks do not broadcast over a batch axis: evaluate slot by slot
                    self._batched = False
            if not self._batched:
                rows = np.empty((nf, nslot + 1, npts), dtype=complex)
                for s in range(nslot):
                    pert = dv.astype(complex)
                    pert[s // na, s % na] += 1j * _H
                    rows[:, s] = self._evaluate(pert, params, complex_step=True)
                rows[:, nslot] = self._evaluate(dv.astype(complex), params, complex_step=True)
        return split_rows(rows, nf, na, npts)

    def _plan_perturbation(self):
        """Complex-step perturbations ``(nf, na, nslot + 1, 1)``: one slot per field and
        derivative, and a last, unperturbed slot that gives the residual itself."""
        plan = self._plan()
        if "perturb" not in plan:
            plan["perturb"] = complex_step_perturbation(self.nfields, len(self.alphas))
        return plan["perturb"]

    def _linearize_fd(self, dv, params):
        nf, na, npts = dv.shape
        with np.errstate(all="ignore"):
            F = self._evaluate(dv, params)
            A = np.empty((nf, nf, na, npts))
            for s in range(nf * na):
                i, k = divmod(s, na)
                h = _FD_STEP * np.maximum(1.0, np.abs(dv[i, k]))
                up, um = dv.copy(), dv.copy()
                up[i, k] += h
                um[i, k] -= h
                A[:, i, k] = (self._evaluate(up, params) - self._evaluate(um, params)) / (2 * h)
        return F.ravel(), A

    def param_derivative(self, state, name, params=None):
        """dF/dp for parameter ``name`` (complex step), flat shape ``(size,)``."""
        params = self.merged_params(params)
        if name not in params:
            raise ProblemDefinitionError(f"unknown parameter {name!r}; have {sorted(params)}")
        dv = self.derivatives(state).astype(complex)
        p2 = dict(params)
        p2[name] = params[name] + 1j * _H
        with np.errstate(all="ignore"):
            rows = self._evaluate(dv, p2, complex_step=True)
        return (rows.imag / _H).ravel()

    def linearize_with_param(self, state, name, params=None):
        """:meth:`linearize` and :meth:`param_derivative` for ``name`` in one evaluation.

        The parameter's complex step rides in one more slot of the batched complex-step
        evaluation: the callbacks then see ``p.<name>`` as an array with the batch axis
        (shape ``(nslot + 2, 1)``), which numpy arithmetic broadcasts.  Callbacks that
        need a scalar there (``math`` functions, ``if`` on the value) raise, and some
        could broadcast it wrongly without raising; so the first call for each parameter
        also evaluates the two separately and uses the batched route from then on only if
        both agree to rounding.  Otherwise (and for finite-difference or unbatched
        problems) it is the two separate evaluations.

        Returns
        -------
        F, A, Fp : ndarray
            As :meth:`linearize` and :meth:`param_derivative`.
        """
        params = self.merged_params(params)
        if name not in params:
            raise ProblemDefinitionError(f"unknown parameter {name!r}; have {sorted(params)}")
        mode = self._joint.get(name)
        joint = None
        if mode is not False and self.linearization == "complex-step" and self._batched:
            try:
                joint = self._linearize_joint(state, name, params)
            except (ProblemDefinitionError, ValueError, TypeError, IndexError):
                pass
            if joint is not None and mode:
                return joint
        separate = self.linearize(state, params) + (self.param_derivative(state, name, params),)
        if mode is None:  # the first call decides, once
            self._joint[name] = joint is not None and all(_agree(a, b) for a, b in zip(joint, separate))
        return separate

    def _linearize_joint(self, state, name, params):
        dv = self.derivatives(state)
        nf, na, npts = dv.shape
        nslot = nf * na
        base = dv[:, :, None, :]
        pert = np.concatenate([base + self._plan_perturbation(), base.astype(complex)], axis=2)
        value = np.full((nslot + 2, 1), params[name], dtype=complex)
        value[nslot + 1, 0] += 1j * _H
        with np.errstate(all="ignore"):
            rows = self._evaluate(pert, {**params, name: value}, complex_step=True)
        if rows.shape != (nf, nslot + 2, npts):
            raise ValueError("the callbacks did not keep the batch axis")
        F, A = split_rows(rows[:, : nslot + 1], nf, na, npts)
        return F, A, (rows[:, nslot + 1].imag / _H).ravel()

    def check(self, state, params=None):
        """Evaluate the callbacks once and raise a clear error if they are malformed."""
        params = self.merged_params(params)
        u = self.split(state)
        if not np.all(np.isfinite(u)):
            bad = [self.fields[i] for i in range(self.nfields) if not np.all(np.isfinite(u[i]))]
            raise ProblemDefinitionError(f"the initial guess has non-finite values in field(s) {bad}")
        F = self.residual(state, params)
        if not np.all(np.isfinite(F)):
            rows = self.split(F)
            bad = [self.fields[i] for i in range(self.nfields) if not np.all(np.isfinite(rows[i]))]
            raise ProblemDefinitionError(
                f"the residual is not finite at the initial guess in the equation(s) of {bad}"
            )
        return F


def _agree(a, b):
    """Equal to rounding (NaN where the other is NaN): the batched and separate routes."""
    a, b = np.asarray(a), np.asarray(b)
    if a.shape != b.shape or not np.array_equal(np.isnan(a), np.isnan(b)):
        return False
    ok = ~np.isnan(a)
    scale = np.abs(b[ok]).max() if ok.any() else 0.0
    return bool(np.all(np.abs(a[ok] - b[ok]) <= 1e-12 * scale))


def _coordinate_namespaces(coords, faces):
    """Coordinate namespaces of the whole grid and of each face ``(key, fun, idx)``."""
    return (Namespace(dict(coords), "coordinate"),
            [Namespace({n: c[idx] for n, c in coords.items()}, "coordinate") for _, _, idx in faces])


def complex_step_perturbation(nf, na):
    """Perturbations of the batched complex-step evaluation (see :meth:`Problem.linearize`)."""
    nslot = nf * na
    t = np.zeros((nf, na, nslot + 1, 1), dtype=complex)
    s = np.arange(nslot)
    t[s // na, s % na, s, 0] = 1j * _H
    return t


def real_rows(r):
    """Rows of a real evaluation; NaN where a callback returned a complex value with a
    non-zero imaginary part (it left the real domain), as the complex-step rows say."""
    if np.iscomplexobj(r):
        r = np.asarray(r)
        r = np.where(r.imag == 0, r.real, np.nan)
    return r


def split_rows(rows, nf, na, npts):
    """Residual and coefficients from the batched complex-step rows ``(nf, nslot + 1, npts)``.

    The last slot is unperturbed: for residuals that are real-analytic where they are
    evaluated its imaginary part is exactly zero.  A non-zero imaginary part there means
    the state left the real domain of the equations (``sqrt`` or ``log`` of a negative
    number, say), where complex arithmetic would silently continue: the residual is NaN
    at those points, as a real evaluation would give.
    """
    base = rows[:, nf * na, :]
    F = np.where(base.imag == 0, base.real, np.nan).ravel()
    A = (rows[:, : nf * na, :].imag * (1 / _H)).reshape(nf, nf, na, npts)
    return F, A


def _as_param(name, value):
    try:
        v = complex(value) if isinstance(value, complex) else float(value)
    except (TypeError, ValueError):
        raise ProblemDefinitionError(f"parameter {name!r} must be a number, got {value!r}") from None
    return v


