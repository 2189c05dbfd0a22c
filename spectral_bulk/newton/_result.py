"""The result object of a Newton-Kantorovich solve."""

import datetime

import numpy as np

__all__ = ["SolveResult"]


class SolveResult:
    """Solution of a :class:`~spectral_bulk.Problem` with its certificate.

    Attributes
    ----------
    fields : dict of str -> ndarray
        Field values at the collocation points, each shaped like the grid.
    converged : bool
        True only if the update, the residual and every field's spectral tail
        are below tolerance (``success`` is an alias).
    status : int
        See :data:`spectral_bulk.newton.MESSAGES`; 0 means converged.
    message : str
        What happened, and what to change when it failed.
    iterations : int
        Newton iterations (Jacobian evaluations); ``nit`` is an alias.
    nfev, njev : int
        Residual and Jacobian evaluations.
    residual_norms, update_norms : list of float
        Scaled residual (componentwise backward error) and scaled update norm
        per iteration; ``residual`` and ``update`` are the final values.
    damping : list of float
        Accepted damping factors per iteration.
    tail : dict of str -> float
        Spectral tail per field (relative size of the highest modes).
    condition : float
        Reciprocal condition estimate of the last Jacobian (``nan`` if unknown).
    params : dict
        Parameter values of this solution.
    grid, problem :
        The grid and problem it belongs to.
    state : ndarray
        The flat unknown vector.
    wall_time : float
        Seconds spent in :func:`solve`.

    Calling the result at coordinates evaluates the fields there by barycentric
    (Chebyshev) and trigonometric (Fourier) interpolation:
    ``res(x)`` in 1-D, ``res(z, x)`` in 2-D (arrays broadcast pointwise); it returns
    an array when there is one field or ``field=`` is given, else a dict.
    """

    def __init__(self, problem, state, params, *, status, message, iterations=0, nfev=0, njev=0,
                 residual_norms=(), update_norms=(), damping=(), residual=np.nan, update=np.nan,
                 tail=None, condition=np.nan, wall_time=0.0, tol=None, linear_solver=None, **extra):
        self.problem = problem
        self.grid = problem.grid
        self.state = np.asarray(state, dtype=float)
        self.params = dict(params)
        self.fields = problem.field_dict(self.state)
        self.status = status
        self._message = message  # a str, or (template, values) formatted on first access
        self.converged = status == 0
        self.iterations = iterations
        self.nfev = nfev
        self.njev = njev
        self.residual_norms = list(residual_norms)
        self.update_norms = list(update_norms)
        self.damping = list(damping)
        self.residual = float(residual)
        self.update = float(update)
        self.tail = dict(tail or {})
        self.condition = float(condition)
        self.wall_time = float(wall_time)
        self.tol = tol
        self.linear_solver = linear_solver
        self.extra = extra

    @property
    def message(self):
        m = self._message
        if type(m) is tuple:  # formatting costs microseconds; most solves in a scan are not read
            m = self._message = m[0].format(**m[1])
        return m

    @message.setter
    def message(self, value):
        self._message = value

    # aliases used across the package (one naming scheme: nit, success)
    @property
    def success(self):
        return self.converged

    @property
    def nit(self):
        return self.iterations

    @property
    def worst_tail(self):
        return max(self.tail.values()) if self.tail else np.nan

    def __call__(self, *points, field=None):
        names = self.problem.fields if field is None else [field]
        for n in names:
            if n not in self.fields:
                raise KeyError(f"no field {n!r}; fields are {list(self.fields)}")
        u = self.problem.split(self.state)
        idx = [self.problem.fields.index(n) for n in names]
        vals = self.grid.evaluate(u[idx], *points)
        if field is not None or len(names) == 1:
            return vals[0]
        return dict(zip(names, vals))

    def derivative(self, field, alpha):
        """Nodal values of a derivative, e.g. ``alpha=(1,)`` or ``(0, 2)``; grid-shaped."""
        i = self.problem.fields.index(field)
        d = self.grid.apply(tuple(alpha), self.problem.split(self.state)[i])
        return d.reshape(self.grid.shape)

    def coefficients(self, field):
        """Spectral coefficients of a field along each axis (ndarray of the grid's shape)."""
        v = self.fields[field]
        for k, b in enumerate(self.grid.axes):
            v = b.coeffs(v, axis=k)
        return v

    def certificate(self):
        """Dict of the certificate numbers (residual, update, tails, status)."""
        out = {"converged": self.converged, "status": self.status, "residual": self.residual,
               "update": self.update, "iterations": self.iterations}
        out.update({f"tail_{k}": v for k, v in self.tail.items()})
        return out

    def to_dataset(self):
        """The solution as an :class:`xarray.Dataset` (fields on the grid, certificate in attrs)."""
        import xarray as xr

        from .._version import __version__

        coords = {}
        for b in self.grid.axes:
            coords[b.name] = (b.name, np.asarray(b.points), {"long_name": f"{b.name} coordinate"})
        data = {f: (self.grid.names, np.asarray(v)) for f, v in self.fields.items()}
        ds = xr.Dataset(data, coords=coords)
        for f in self.fields:
            ds[f].attrs["long_name"] = f"field {f}"
            ds[f].attrs["spectral_tail"] = float(self.tail.get(f, np.nan))
        attrs = {
            "title": f"spectral_bulk solution of {self.problem.name}",
            "source": f"spectral_bulk {__version__}",
            "history": f"{datetime.datetime.now(datetime.UTC).isoformat(timespec='seconds')} solve",
            "converged": int(self.converged),
            "status": int(self.status),
            "message": self.message,
            "iterations": int(self.iterations),
            "residual": self.residual,
            "update": self.update,
            "tol": float(self.tol) if self.tol is not None else np.nan,
        }
        attrs.update({f"param_{k}": float(np.real(v)) for k, v in self.params.items()})
        attrs.update(self.grid.describe())
        ds.attrs.update(attrs)
        return ds

    def __repr__(self):
        tails = ", ".join(f"{k}={v:.1e}" for k, v in self.tail.items())
        return (
            f"<SolveResult converged={self.converged} status={self.status} "
            f"iterations={self.iterations} residual={self.residual:.1e} tail[{tails}]>\n"
            f"  {self.message}"
        )
