"""Static homogeneous black branes as ODE boundary-value problems (Einstein-DeTurck).

Ansatz (``z`` = radial coordinate, boundary ``z = 0``, horizon ``z = 1``, ``f = 1 - z^d``)::

    ds^2 = z^-2 [ -f A dt^2 + S dz^2 / f + B dx^2 + C (dy^2 + ...) ]
    phi^I = z^{Delta_-} psi^I,   A_t = at,   theta = k x (Q-lattice),   psi_a = alpha x_a (axions)

with the reference metric ``A = S = B = C = 1`` (AdS-Schwarzschild) for the DeTurck term.
Unknowns ``A, S, B, C, psi, [at]`` are smooth on ``[0, 1]``; their equations are the
mixed components ``E^t_t, E^z_z, E^x_x, E^y_y``, the scalar and Maxwell equations,
evaluated by the generic pointwise evaluator (:mod:`spectral_bulk.gravity`) on truncated
series at each collocation point.

Boundary conditions
-------------------
* ``z = 0``: ``A = S = B = C = 1`` (flat boundary metric), ``at = mu``, and the scalar
  source: ``psi = lambda`` (standard), ``psi' - S'(0) psi / 2 = J`` (alternative: the
  Fefferman-Graham ``z^2`` coefficient), or ``psi' - S' psi/2 = J + W'(psi)`` (mixed).
* ``z = 1`` (horizon, a regular singular point): the equations are expanded in Laurent
  series there (exact arithmetic on truncated series); the rows are the residue of
  ``E^t_t`` (which gives ``A(1) = S(1)``: the temperature is that of the reference,
  ``T = d/(4 pi)``), the constant terms of ``E^t_t``, ``E^x_x``, ``E^y_y`` and of the
  scalar equations, and ``at(1) = 0``.

Dimensionless inputs are in units of ``T``: ``lam = lambda/T^{d - Delta}``, ``k = k/T``,
``mu = mu/T``, ``alpha = alpha/T``; they are hit exactly because ``T`` is fixed.

Rational falloffs (radial power)
--------------------------------
When ``Delta_-`` is rational but not an integer, the near-boundary expansions are power
series in ``z^{1/p}`` and the brane is solved in ``u = z^{1/p}`` on the affine grid
``u in [0, 1]`` (boundary ``u = 0``, horizon ``u = 1``; d = 3, one neutral scalar, no
axions, tortoise gauge).  ``p`` is ``model.powers``, lowered to the denominator of
``2 Delta_-`` when the potential (and phase metric) is even, since then every exponent is
a sum of ``3 - 2 Delta_-``, ``2 Delta_-``, 2 and 3.  With ``a = Delta_-``, ``n = (3 - 2a) p``::

    ds^2 = z^-2 [ -f A dt^2 + A dz^2 / f + B dx^2 + C dy^2 ],   z = u^p,  f = 1 - u^{3p},
    dz^2 = p^2 u^{2p-2} du^2,   phi = u^{ap} psi(u),   psi = lambda + beta u^n + ...

Boundary rows: ``A = B = C = 1`` and ``psi = lambda`` (standard) or ``psi^(n)(0)/n! = J/(3-2a)``
(alternative, ``n <= 2``); horizon rows as above.  ``s``, ``T``, the source and ``<O>`` are
read off directly; the stress tensor, whose ``u^{3p}`` Taylor coefficient is out of reach, from
``T s``, the trace Ward identity and a radial integral (``docs/physics/black_branes.md``
sections i and j).  The integer case (``p = 1``) is unchanged.
"""

import math

import numpy as np

from .._utils import emit_user_level_warning
from ..exceptions import ConvergenceWarning, ProblemDefinitionError
from ..grids import Chebyshev
from ..gravity import MatterContent, Series, coordinate_series, einstein_deturck
from ..models import BulkModel, QLatticeModel
from ..newton import NewtonOptions, Problem, SolveResult

__all__ = ["Brane", "BlackBrane", "QLatticeBrane", "AxionBrane", "BackgroundSolution", "BraneSolution"]

def _field_series(f, name, prec=3, coord="z"):
    vals = [getattr(f, name), getattr(f, name + "_" + coord), getattr(f, name + "_" + 2 * coord)]
    vals = np.broadcast_arrays(*[np.asarray(v) for v in vals])
    return Series(np.stack([vals[0], vals[1], vals[2] / 2]), 0)


def _minimal_power(model, a, p):
    """Smallest radial power for an even potential (and phase metric), else ``p``.

    With ``V`` (and ``Phi``) even in the scalar, the exponents of ``psi = z^{-a} phi`` and of
    the metric are sums of ``3 - 2a``, ``2a``, 2 and 3, all multiples of ``1/q`` with ``q`` the
    denominator of ``2a``; a smaller power keeps the boundary data at low Taylor order.
    """
    import fractions

    from ..models._models import _taylor_coefficients

    coeffs = [_taylor_coefficients(lambda r: model.V(r), 5)]
    if isinstance(model, QLatticeModel):
        coeffs.append(_taylor_coefficients(lambda r: model.Phi(r), 5))
    if any(abs(c[m]) > 1e-12 for c in coeffs for m in (1, 3, 5)):
        return p
    q = fractions.Fraction(2 * a).limit_denominator(2 * p).denominator
    return q if p % q == 0 else p


class BackgroundSolution(SolveResult):
    """A background solution: the Newton result plus its boundary observables.

    ``observables`` is a dict of dimensionless numbers (units of T for branes, of k for
    walls; see the backgrounds' ``observables``); ``background`` is the object that made it.
    """

    @classmethod
    def wrap(cls, res, background):
        from ..holography import certificate_failures

        out = object.__new__(cls)
        out.__dict__.update(res.__dict__)
        out.background = background
        out.observables = background.observables(res)
        # the factorisation and residual kept for the refinement of the observables are not
        # needed any more
        res._jacobian_solver = out._jacobian_solver = None
        res._extended_residual = out._extended_residual = None
        out.certificate_failures = certificate_failures(background, out.observables)
        out.certified = bool(res.converged and not out.certificate_failures)
        return out


def _warn_uncertified(bg, sol, where):
    """One warning naming what failed: the Newton solve or an observable certificate."""
    if not sol.converged:
        emit_user_level_warning(f"{type(bg).__name__} at {where}: {sol.message}", ConvergenceWarning)
    elif not sol.certified:
        emit_user_level_warning(
            f"{type(bg).__name__} at {where}: observable certificate failed "
            f"({', '.join(sol.certificate_failures)}); raise the resolution (n) or check the model",
            ConvergenceWarning)


class Brane:
    """Base class of static homogeneous branes (see the module notes).

    Subclasses set the matter content; the public methods are shared.

    Parameters
    ----------
    model : BulkModel
    quantization : {"standard", "alternative", "mixed"}
        Quantisation of the scalar(s).
    n : int
        Initial number of Chebyshev points (raised automatically when a field's
        spectral tail exceeds ``tol``, up to ``n_max``).
    tol : float
        Newton and spectral-tail tolerance.
    multi_trace : callable, optional
        ``W(lam_hat)`` for mixed quantisation: the condition is
        ``rho_2 = J + W'(lambda)`` in units of T.
    extended : bool
        Read the boundary data (stress tensor, vevs) from the solution refined with
        residuals in extended precision (:func:`spectral_bulk.newton.polish`; about 25 ms
        per solution at n = 24).  In double precision alone their rounding floor is about
        1e-9 relative (third boundary derivatives); refined, about 1e-12.  The model's
        functions must compute in the dtype of their arguments (numpy operations do).
    """

    lattice = False
    n_axions = 0

    def __init__(self, model, quantization="standard", n=24, tol=1e-10, n_max=160, multi_trace=None,
                 gauge="tortoise", extended=True):
        if not isinstance(model, BulkModel):
            raise TypeError(f"`model` must be a BulkModel or QLatticeModel, got {type(model).__name__}")
        self.model = model
        self.d = model.d
        self.quantization = quantization
        for sc in model.uv:
            sc.check(quantization)
        if quantization == "mixed" and multi_trace is None:
            raise ProblemDefinitionError("mixed quantization needs `multi_trace`, a function W(lam)")
        self.multi_trace = multi_trace
        self.extended = bool(extended)
        self.power = model.powers([quantization]) if model.nscalars else 1
        if isinstance(model, QLatticeModel):
            model.check_expansions(quantization, lattice=self.lattice)
        if model.nscalars and self.power is None:
            raise ProblemDefinitionError(
                f"model {model.name}: falloffs {[(s.delta_minus, s.delta_plus) for s in model.uv]} "
                "are irrational: no radial power z = u^p makes the near-boundary expansion "
                "analytic, and the brane backgrounds need one"
            )
        self.n, self.n_max, self.tol = int(n), int(n_max), float(tol)
        # the stress tensor needs third boundary derivatives: resolve the fields until their
        # Chebyshev coefficients reach the rounding plateau, not just the Newton tolerance
        self.tail_tol = min(self.tol, 1e-13)
        self.T = self.d / (4 * math.pi)
        if gauge not in ("tortoise", "deturck"):
            raise ProblemDefinitionError(f"`gauge` must be 'tortoise' or 'deturck', got {gauge!r}")
        self.gauge = gauge
        #: radial coordinate of the grid: z (integer falloffs) or u = z^{1/p}
        self.coord = "z"
        if model.nscalars and self.power != 1:
            self._setup_power(quantization)
        metric = ["A", "B", "C"] if gauge == "tortoise" else ["A", "S", "B", "C"]
        self.fields = metric + self.scalar_fields + (["at"] if self.charged else [])
        self._problems = {}
        self._last = None

    def _setup_power(self, quantization):
        """Check and record the data of the ``z = u^p`` formulation (rational ``Delta_-``)."""
        m, p = self.model, self.power
        where = f"model {m.name}: rational falloffs need the radial power z = u^{p}, which"
        if self.d != 3:
            raise ProblemDefinitionError(f"{where} is implemented for d = 3 (got d = {self.d})")
        if m.nscalars != 1:
            raise ProblemDefinitionError(f"{where} is implemented for one scalar (got {m.nscalars})")
        if m.charged or self.n_axions:
            raise ProblemDefinitionError(
                f"{where} is implemented without gauge field and axions")
        if self.gauge != "tortoise":
            raise ProblemDefinitionError(f"{where} is implemented in the tortoise gauge only "
                                         f"(got gauge={self.gauge!r})")
        if quantization == "mixed":
            raise ProblemDefinitionError(f"{where} supports standard and alternative quantization, "
                                         "not 'mixed'")
        a = m.uv[0].delta_minus
        self.power = p = _minimal_power(m, a, p)
        where = f"model {m.name}: rational falloffs need the radial power z = u^{p}, which"
        if not 0 < a < 1.5:
            raise ProblemDefinitionError(
                f"{where} needs 0 < Delta_- < 3/2 (a relevant source); got Delta_- = {a:.6g}")
        # logarithms: no power of z makes the expansion analytic
        causes = QLatticeModel.log_warnings(m, lattice=self.lattice)
        if causes:
            raise ProblemDefinitionError(
                f"model {m.name}: {causes[0]}; a logarithm is not analytic in any u = z^(1/p), so "
                "the brane cannot be solved to spectral accuracy")
        c = 3 - 2 * a
        self.alpha = a
        ap = a * p
        self.rho_power = int(round(ap)) if abs(ap - round(ap)) < 1e-9 else ap  # phi = u^{a p} psi
        self.n_vev = int(round(c * p))         # psi = lambda + beta u^n + ...
        if abs(self.n_vev - c * p) > 1e-9:
            raise ProblemDefinitionError(f"{where}: a p = {a * p:.6g} is not an integer (internal error)")
        if quantization == "alternative" and self.n_vev > 2:
            raise ProblemDefinitionError(
                f"{where}: alternative quantization fixes the u^{self.n_vev} coefficient of psi; "
                "only n <= 2 is implemented (choose Delta_- > 1 with 3 - 2 Delta_- = n/p, n <= 2)")
        self.coord = "u"

    def horizon_metric(self, sol, values=None):
        """``(A, S, B, C)`` at the horizon (``S = A`` in the tortoise gauge).

        ``values`` (field -> nodal values, e.g. extended precision) replaces ``sol.fields``.
        """
        fl = values or sol.fields
        return tuple(float(fl[name][-1]) for name in ("A", "S" if self.gauge == "deturck" else "A", "B", "C"))

    # ----------------------------------------------------------------- layout
    @property
    def scalar_fields(self):
        m = self.model
        if m.nscalars == 1:
            return ["psi"]
        return [f"psi_{s}" for s in m.scalars[: m.nscalars]]

    @property
    def charged(self):
        return self.model.charged

    def default_params(self):
        p = {}
        for name in self.source_names():
            p[name] = 0.0
        if self.lattice:
            p["k"] = 1.0
        if self.charged:
            p["mu"] = 0.0
        if self.n_axions:
            p["alpha"] = 0.0
        return p

    def source_names(self):
        m = self.model
        if m.nscalars == 0:
            return []
        if m.nscalars == 1:
            return ["lam"]
        return [f"lam_{s}" for s in m.scalars]

    def _dims(self):
        """(Delta_-, Delta of the source) per scalar."""
        out = []
        for sc in self.model.uv:
            src_dim = self.d - sc.dimension(self.quantization)
            out.append((sc.delta_minus, src_dim))
        return out

    # ---------------------------------------------------------------- problem
    def problem(self, n=None):
        """The :class:`Problem` on ``n`` points (cached)."""
        n = int(n or self.n)
        if n not in self._problems:
            grid = Chebyshev(n, (0.0, 1.0), name=self.coord)
            bc = {f"{self.coord}=0": self._uv_rows, f"{self.coord}=1": self._horizon_rows}
            # scalars may be tiny (small sources): measure them relative to themselves
            self._problems[n] = Problem(grid, self.fields, self._equations, bc, self.default_params(),
                                        scales={f: 1e-8 for f in self.scalar_fields},
                                        name=type(self).__name__)
        return self._problems[n]

    def _matter(self, z, fs, p):
        scal = []
        if self.power != 1:  # z is the coordinate u here: phi = u^{a p} psi
            scal.append(z**self.rho_power * fs[self.scalar_fields[0]])
        for (dm, _), name in zip(self._dims() if self.power == 1 else (), self.scalar_fields):
            scal.append(z**dm * fs[name] if dm else fs[name])
        phase = None
        if self.lattice:
            kk = p["k"] * self.T
            phase = (self.model.Phi(scal[0]), {2: kk})
        axions = []
        if self.n_axions:
            a = p["alpha"] * self.T
            axions = [{2 + i: a} for i in range(self.n_axions)]
        at = fs.get("at") if self.charged else None
        return MatterContent(scal, phase, axions, at)

    def _metric(self, x, fs):
        """Metric components in the grid coordinate ``x``: ``z = x^p``, ``dz = p x^{p-1} dx``
        (``p = 1`` except for rational falloffs; module notes)."""
        d, p = self.d, self.power
        z = x if p == 1 else x**p
        f = 1 - z**d
        S = fs["A"] if self.gauge == "tortoise" else fs["S"]
        ix2 = 1 / (x * x)  # series division is the costly operation: each inverse once
        iz2 = ix2 if p == 1 else 1 / (z * z)
        izf = (p * p) * ix2 / f  # g_xx / S = p^2 / (x^2 f)
        g = {(0, 0): -1 * (f * fs["A"]) * iz2, (1, 1): S * izf, (2, 2): fs["B"] * iz2}
        ref = {(0, 0): -1 * f * iz2, (1, 1): izf, (2, 2): iz2}
        for i in range(3, d + 1):
            g[(i, i)] = fs["C"] * iz2
            ref[(i, i)] = iz2
        return g, (ref if self.gauge == "deturck" else None)

    def evaluate(self, z, fs, p):
        """All equations as series at points ``z`` (a Series) for field series ``fs``."""
        g, ref = self._metric(z, fs)
        return einstein_deturck(g, ref, self.model, self._matter(z, fs, p), radial=1, dim=self.d + 1)

    def _equations(self, c, f, p):
        z = np.asarray(getattr(c, self.coord))
        zz = np.where((z <= 0) | (z >= 1), 0.5, z)  # ends carry boundary rows, not these
        batch = np.broadcast_shapes(np.shape(getattr(f, self.fields[0])), zz.shape)
        zs = coordinate_series(np.broadcast_to(zz, batch))
        fs = {name: _field_series(f, name, coord=self.coord) for name in self.fields}
        out = self.evaluate(zs, fs, p)
        if self.power != 1:
            # rows divided by their leading boundary powers (metric u^{2ap}, scalar u^{ap})
            E = out["E"]
            return [E[(0, 0)].coefficient(0), E[(2, 2)].coefficient(0), E[(3, 3)].coefficient(0),
                    out["scalar"][0].coefficient(0)]
        E = out["E"]
        rows = [E[(0, 0)].coefficient(0)]
        if self.gauge == "deturck":
            rows.append(E[(1, 1)].coefficient(0))
        rows.append(E[(2, 2)].coefficient(0))
        rows.append(E[(3, 3)].coefficient(0) if self.d >= 3 else 0 * rows[0])
        rows += [s.coefficient(0) for s in out["scalar"]]
        if self.charged:
            rows.append(out["maxwell"].coefficient(0))
        return rows

    def _horizon_rows(self, c, f, p):
        batch = np.shape(getattr(f, self.fields[0]))
        zs = coordinate_series(np.ones(batch))
        fs = {name: _field_series(f, name, coord=self.coord) for name in self.fields}
        out = self.evaluate(zs, fs, p)
        E = out["E"]
        tt = E[(0, 0)]
        # tortoise gauge: the constant term of E^t_t (= that of E^z_z, the constraint);
        # DeTurck gauge: its residue (A(1) = S(1)) and its constant term
        rows = [tt.coefficient(0)] if self.gauge == "tortoise" else [tt.coefficient(-1), tt.coefficient(0)]
        rows.append(E[(2, 2)].coefficient(0))
        rows.append(E[(3, 3)].coefficient(0) if self.d >= 3 else 0 * rows[0])
        rows += [s.coefficient(0) for s in out["scalar"]]
        if self.charged:
            rows.append(f.at)
        return rows

    def _uv_rows_power(self, f, p):
        a, n = self.alpha, self.n_vev
        (_, src_dim), = self._dims()
        value = p[self.source_names()[0]] * self.T**src_dim
        psi = f.psi
        rows = [f.A - 1, f.B - 1, f.C - 1]
        if self.quantization == "standard":
            rows.append(psi - value)
        else:  # J = c beta with beta the u^n coefficient of psi
            coef = f.psi_u if n == 1 else f.psi_uu / 2
            rows.append(coef - value / (3 - 2 * a))
        return rows

    def _uv_rows(self, c, f, p):
        if self.power != 1:
            return self._uv_rows_power(f, p)
        rows = [f.A - 1] + ([f.S - 1] if self.gauge == "deturck" else []) + [f.B - 1, f.C - 1]
        for (dm, src_dim), name, src in zip(self._dims(), self.scalar_fields, self.source_names()):
            value = p[src] * self.T**src_dim
            psi, dpsi = getattr(f, name), getattr(f, name + "_z")
            if self.quantization == "standard":
                rows.append(psi - value)
            else:
                rho2 = dpsi - (f.S_z if self.gauge == "deturck" else f.A_z) * psi / 2
                if self.quantization == "alternative":
                    rows.append(rho2 - value)
                else:
                    # rho_2 = J + W'(lambda) in units of T: W'(lam_hat) T^{Delta+}
                    from ..gravity import derivative

                    lam_hat = psi / self.T**dm
                    wprime = derivative(self.multi_trace, lam_hat)[1]
                    rows.append(rho2 - value - wprime * self.T**src_dim)
        if self.charged:
            rows.append(f.at - p["mu"] * self.T)
        return rows

    # ------------------------------------------------------------------ guess
    def _trivial_guess(self, params):
        if self.power != 1:
            return self._trivial_guess_power(params)

        def g(z):
            out = {"A": 1 + 0 * z, "B": 1 + 0 * z, "C": 1 + 0 * z}
            if self.gauge == "deturck":
                out["S"] = 1 + 0 * z
            for (_, src_dim), name, src in zip(self._dims(), self.scalar_fields, self.source_names()):
                val = params.get(src, 0.0) * self.T**src_dim
                out[name] = (val * (1 - z) if self.quantization == "standard" else val * z * (1 - z / 2))
            if self.charged:
                out["at"] = params.get("mu", 0.0) * self.T * (1 - z)
            return out
        return g

    def _trivial_guess_power(self, params):
        a, n = self.alpha, self.n_vev
        (_, src_dim), = self._dims()
        val = params.get(self.source_names()[0], 0.0) * self.T**src_dim


        def g(u):
            if self.quantization == "standard":
                psi = val * (1 - u)
            else:
                psi = val / (3 - 2 * a) * u**n * (1 - n * u / (n + 1))
            return {"A": 1 + 0 * u, "B": 1 + 0 * u, "C": 1 + 0 * u, "psi": psi}
        return g

    # ------------------------------------------------------------------- solve
    def solve(self, guess=None, **params):
        """Solve at the given dimensionless parameters (units of T).

        Parameters
        ----------
        guess : SolveResult, optional
            A previous solution to start from (default: the last one computed,
            or the trivial background).
        **params
            ``lam`` (or ``lam_<scalar>``), ``k`` (Q-lattice), ``mu`` (charged),
            ``alpha`` (axions).  Unknown names raise ``ProblemDefinitionError``.

        Returns
        -------
        BraneSolution
            With ``.observables`` and ``.certified`` (Newton converged *and* every
            observable certificate within ``holography.BRANE_CERTIFICATE``); a
            warning says which part failed.  Large deformations are reached by
            continuation from the guess when a direct Newton solve does not converge.
        """
        target = self.default_params()
        unknown = set(params) - set(target)
        if unknown:
            raise ProblemDefinitionError(
                f"unknown parameter(s) {sorted(unknown)} for {type(self).__name__}; "
                f"expected {sorted(target)}"
            )
        target.update({k: float(v) for k, v in params.items()})
        start = guess if guess is not None else self._last
        n = self.n if start is None else min(self.n_max, max(self.n, start.grid.shape[0]))
        pr = self.problem(n)
        g = start if start is not None else self._trivial_guess(target)
        res = self._newton(pr, g, target)
        if res.status not in (0, 5):
            res = self._homotopy(start, target) or res
        while res.status == 5 and res.grid.shape[0] < self.n_max:
            n = min(self.n_max, int(math.ceil(res.grid.shape[0] * 1.5)))
            res = self._newton(self.problem(n), res, target)
        sol = BackgroundSolution.wrap(res, self)
        if res.converged:
            self._last = res
        _warn_uncertified(self, sol, target)
        return sol

    def _newton(self, pr, guess, params):
        from ..newton._newton import _newton, initial_state
        from ..newton._polish import extended_precision_available

        u0 = initial_state(pr, guess)
        kept = {}

        def extended_residual(u):
            # the refinement of the observables starts from this very residual: evaluate it once,
            # in extended precision, and certify the Newton result with it rounded to double
            try:
                r = pr.residual_extended(u, params)
            except (NotImplementedError, TypeError, ValueError, ArithmeticError):
                return None  # the refinement will say so; the double residual certifies
            kept["state"], kept["residual"] = u, r
            return r.astype(np.float64)

        extended = self.extended and extended_precision_available()
        # the last factorisation serves the extended-precision refinement of the observables
        res = _newton(pr, u0, params, NewtonOptions(tol=self.tol, tail_tol=self.tail_tol, max_iter=40).validated(),
                      keep_factor=self.extended, final_residual=extended_residual if extended else None)
        if kept and res.state is kept["state"]:
            res._extended_residual = kept["residual"]
        return res

    def _homotopy(self, start, target):
        """Continue from the start (or the trivial background) to the target, one parameter at a time."""
        from ..continuation import follow

        base = dict(start.params) if start is not None else {k: 0.0 for k in target}
        if start is None:
            for k in target:
                if k == "k":
                    base[k] = target[k]
            pr = self.problem(self.n)
            cur = self._newton(pr, self._trivial_guess(base), base)
            if cur.status != 0:
                return None
        else:
            cur = start
        for name, value in target.items():
            if abs(cur.params.get(name, 0.0) - value) < 1e-15:
                continue
            pr = self.problem(cur.grid.shape[0])
            step = 0.1 * (1 if value > cur.params[name] else -1) * max(1.0, abs(value - cur.params[name]))
            br = follow(pr, cur, name, step=step, targets=[value], stop_at_last_target=True,
                        max_points=400, params={k: v for k, v in cur.params.items() if k != name},
                        tol=self.tol, max_step=abs(step) * 5, n_max=self.n_max)
            hits = [s for s in br.solutions if abs(s.params[name] - value) < 1e-14]
            if not hits:
                return None
            cur = hits[-1]
        return cur

    # -------------------------------------------------------------- families
    def follow(self, param, start=None, *, step=0.1, stop=None, max_points=200, targets=(),
               checkpoint=None, resume=None, callback=None, attrs=None, **kwargs):
        """Follow a family in ``param`` (units of T) with observables at every point.

        Parameters
        ----------
        param : str
            ``"lam"``, ``"k"``, ``"mu"`` or ``"alpha"``.
        start : BraneSolution or dict, optional
            Start solution, or the parameters to solve at first.
        stop : float, optional
            Parameter value to end at (a bound landed on exactly).
        Other parameters as :func:`spectral_bulk.continuation.follow`.

        Returns
        -------
        Branch
            ``branch.to_dataset()`` holds the observables and certificates per point
            (``cert_*`` variables) and the first-law check along the family.
        """
        from ..continuation import follow

        if not isinstance(start, SolveResult):
            start = self.solve(**(start or {}))
        if not start.converged:
            raise ProblemDefinitionError(f"the start solution is not certified: {start.message}")
        lo_hi = None
        if stop is not None:
            v0 = start.params[param]
            lo_hi = (min(v0, stop) - 1e-12 * 0, max(v0, stop))
            step = abs(step) * (1 if stop > v0 else -1)
        bounds = {param: lo_hi} if lo_hi else {}
        bounds.update(kwargs.pop("bounds", {}) or {})
        pr = self.problem(start.grid.shape[0])
        kwargs.setdefault("tol", self.tol)
        kwargs.setdefault("tail_tol", self.tail_tol)
        kwargs.setdefault("n_max", self.n_max)
        attrs = dict(attrs or {})
        attrs.update({"background": type(self).__name__, "model": self.model.name,
                      "quantization": self.quantization, "gauge": self.gauge})
        br = follow(pr, start, param, step=step, bounds=bounds, max_points=max_points, targets=targets,
                    observables=self.family_observables, checkpoint=checkpoint, resume=resume,
                    callback=callback, attrs=attrs, **kwargs)
        br.postprocess = lambda ds: _add_family_certificates(ds, param)
        return br

    # ------------------------------------------------------------ observables
    def family_observables(self, solution):
        """Observables for a family dataset: certificate entries prefixed ``cert_``."""
        from ..holography import CERTIFICATE_KEYS

        return {("cert_" + k if k in CERTIFICATE_KEYS else k): v
                for k, v in self.observables(solution).items()}

    def observables(self, solution):
        """Boundary observables and the certificate, in units of T (see ``holography``)."""
        from ..holography import brane_observables

        return brane_observables(self, solution)


def _add_family_certificates(ds, param):
    """Add the first-law residual along the family (``cert_first_law``) to a dataset."""
    from ..holography import first_law_residuals

    obs = {k: ds[k].values for k in ("f", "vev", "charge", "p_x") if k in ds}
    for k in ds.data_vars:
        if k.startswith("vev"):
            obs[k] = ds[k].values
    res = first_law_residuals(param, ds[param].values, obs) if "f" in obs else None
    if res is not None:
        ds["cert_first_law"] = ("point", res, {
            "long_name": f"first-law residual along the family in {param} (5-point derivative)",
            "units": "1"})
    return ds


BraneSolution = BackgroundSolution


class BlackBrane(Brane):
    """Homogeneous black brane of a :class:`BulkModel` (charged when the model has a gauge field).

    Parameters: ``lam`` (or ``lam_<scalar>``) for each scalar source, ``mu`` when charged.
    """


class QLatticeBrane(Brane):
    """Q-lattice black brane: ``rho(z) e^{i k x}`` with a homogeneous metric.

    Parameters: ``lam`` = lambda/T^{d - Delta}, ``k`` = k/T, and ``mu`` when charged.

    ``component_quantization=("standard", "alternative")`` quantises the two real
    components ``rho cos kx`` and ``rho sin kx`` differently (a boundary term that
    breaks the U(1)): the bulk solution is the standard one, and the observables
    gain x-profiles over one period (``*_profile`` arrays on ``x_phase = k x``) and
    their period averages (``*_avg``), see ``docs/physics/black_branes.md`` section b.
    """

    lattice = True

    def __init__(self, model, quantization="standard", component_quantization=None, **kwargs):
        if not isinstance(model, QLatticeModel):
            raise TypeError("QLatticeBrane needs a QLatticeModel (potential and phase metric)")
        super().__init__(model, quantization, **kwargs)
        if component_quantization is not None:
            cq = tuple(component_quantization)
            if cq != ("standard", "alternative") or quantization != "standard":
                raise ProblemDefinitionError(
                    "component_quantization supports ('standard', 'alternative') on top of the "
                    f"standard bulk solution, got {component_quantization!r} with {quantization!r}"
                )
            model.uv[0].check("alternative")
            if self.power != 1:
                raise ProblemDefinitionError(
                    "component_quantization is implemented for m^2 = -2 (Delta = 1, 2), not for "
                    f"the fractional falloffs of model {model.name}")
            if self.d != 3:
                raise ProblemDefinitionError("component_quantization is implemented for d = 3")
        self.component_quantization = component_quantization


class AxionBrane(Brane):
    """Black brane with ``d - 1`` linear axions ``psi_a = alpha x_a`` (momentum relaxation).

    Default model: Einstein-Maxwell with ``Z = 1`` and no scalar.  Parameters:
    ``alpha`` = alpha/T and ``mu`` = mu/T.
    """

    def __init__(self, model=None, **kwargs):
        if model is None:
            model = BulkModel(lambda *phi: -6.0, scalars=(), gauge_coupling=lambda *phi: 1.0, axions=2,
                              name="einstein_maxwell")
        self.n_axions = model.axions or model.d - 1
        super().__init__(model, **kwargs)
