"""Zero-temperature domain walls (Fefferman-Graham gauge) and their infrared.

Q-lattice walls (:class:`QLatticeWall`)::

    ds^2 = z^-2 [ dz^2 + e^a (-dt^2 + dy^2) + e^b dx^2 ],   rho = z psi,   theta = k x

with boost invariance in (t, y).  The radial half line is truncated at an IR cut-off
``Z`` that is itself an unknown: a constant field ``lz = log Z`` fixed by
``Z = c_cut e^{b(Z)/2} / k`` at the IR end, so that the lattice mode
``rho ~ z exp(-k z e^{-b/2})`` has decayed by ``exp(-c_cut)`` there whatever the
refractive index.  The computational coordinate is ``s = z/Z`` in [0, 1] with an
exponential map (uniform in log z beyond a small scale), so structure spread over many
e-folds (a long intermediate regime before the return to AdS in the IR) is resolved.

Conditions (derivations in ``docs/physics/domain_walls.md``):

* ``z = 0``: ``a = b = 0`` (boundary metric), ``psi = lam`` (standard; ``psi' = J``
  alternative: the FG ``z^2`` coefficient);
* ``z = Z``: no ``z^3`` mode (``a' = b' = 0``), the decaying lattice mode
  ``psi' + k e^{-b/2} psi = 0`` (exact for the linearised IR, whose metric corrections are
  ``O(exp(-2 c_cut))``), and the cut-off rule.

The refractive index is ``n = c_UV/c_IR = e^{(b - a)/2}`` at the IR end.  Units: ``k = 1``,
``lam = lambda/k^{d - Delta}``.

Homogeneous walls (:class:`DomainWall`, ``k = 0``) flow to an IR critical point of ``V``
when one lies in the flow direction (conditions from its linearised spectrum:
``z a' = 2(1 - 1/L_IR)`` and ``z rho' = -gamma (rho - rho*)`` with
``gamma = (Delta_IR - d)/L_IR``); when none does, the flow is singular and that is
reported (``regular = False``) instead of a failed solve.
"""

import math

import numpy as np

from ..exceptions import ProblemDefinitionError
from ..grids import Chebyshev, ExponentialMap
from ..gravity import MatterContent, Series, coordinate_series, einstein_deturck
from ..models import BulkModel, QLatticeModel, critical_points
from ..newton import NewtonOptions, Problem, SolveResult
from ._brane import BackgroundSolution, _warn_uncertified

__all__ = ["QLatticeWall", "DomainWall", "WallSolution"]


def _fs(f, name):
    vals = np.broadcast_arrays(*[np.asarray(v) for v in (getattr(f, name), getattr(f, name + "_s"),
                                                         getattr(f, name + "_ss"))])
    return Series(np.stack([vals[0], vals[1], vals[2] / 2]), 0)


WallSolution = BackgroundSolution


class QLatticeWall:
    """Zero-temperature Q-lattice domain wall (see the module notes).

    Parameters
    ----------
    model : QLatticeModel
    quantization : {"standard", "alternative"}
    n : int
        Initial number of points (raised automatically up to ``n_max``).
    tol : float
    cutoff : float
        ``c_cut``: the lattice mode has decayed by ``exp(-c_cut)`` at the IR cut-off.
    map_scale : float
        Scale (in units of the cut-off) below which the radial grid is affine.
    coupling : {"lam", "loglam"}
        The continuation parameter of the problem: the source itself, or its logarithm
        (families spanning decades of ``lam``, where the interesting scales are
        logarithmic, are followed far more economically in ``loglam = log(lam)``).
    """

    def __init__(self, model, quantization="standard", n=64, tol=1e-10, n_max=400, cutoff=24.0,
                 map_scale=1e-10, coupling="lam"):
        if not isinstance(model, QLatticeModel):
            raise TypeError("QLatticeWall needs a QLatticeModel")
        if quantization not in ("standard", "alternative"):
            raise ProblemDefinitionError(f"quantization must be 'standard' or 'alternative', got {quantization!r}")
        model.uv[0].check(quantization)
        self.model, self.quantization, self.d = model, quantization, model.d
        if self.d != 3:
            raise ProblemDefinitionError("QLatticeWall is implemented for d = 3")
        if model.powers([quantization]) != 1:
            raise ProblemDefinitionError("QLatticeWall needs integer operator dimensions")
        model.check_expansions(quantization, lattice=True)
        self.n, self.n_max, self.tol = int(n), int(n_max), float(tol)
        self.cutoff, self.map_scale = float(cutoff), float(map_scale)
        if coupling not in ("lam", "loglam"):
            raise ProblemDefinitionError(f"`coupling` must be 'lam' or 'loglam', got {coupling!r}")
        self.coupling = coupling
        # the cut-off enters as its logarithm: it grows like the refractive index, and
        # a log keeps the arclength of families balanced between fields
        self.fields = ["a", "b", "psi", "lz"]
        self._problems = {}
        self._last = None
        sc = model.uv[0]
        self.delta_minus = sc.delta_minus
        self.src_dim = self.d - sc.dimension(quantization)

    # ---------------------------------------------------------------- problem
    def problem(self, n=None):
        n = int(n or self.n)
        if n not in self._problems:
            grid = Chebyshev(n, (0.0, 1.0), name="s", map=ExponentialMap(self.map_scale))
            bc = {"s=0": self._uv_rows, "s=1": self._ir_rows}
            # the scalar may be tiny (small sources): measure it relative to itself
            self._problems[n] = Problem(grid, self.fields, self._equations, bc, {self.coupling: 0.0},
                                        scales={"psi": 1e-8}, name="QLatticeWall")
        return self._problems[n]

    def evaluate(self, s, fs, p, k=1.0):
        """Equations as series at points ``s`` (Series) for field series ``fs``."""
        Z = np.exp(fs["lz"])
        z = Z * s
        ea, eb = np.exp(fs["a"]), np.exp(fs["b"])
        g = {(0, 0): -1 * ea / z**2, (1, 1): 1 / s**2, (2, 2): eb / z**2, (3, 3): ea / z**2}
        rho = z * fs["psi"]
        matter = MatterContent([rho], (self.model.Phi(rho), {2: k}), [], None)
        return einstein_deturck(g, None, self.model, matter, radial=1, dim=4)

    def _equations(self, c, f, p):
        s = np.asarray(c.s)
        ss = np.where((s <= 0) | (s >= 1), 0.5, s)
        batch = np.broadcast_shapes(np.shape(f.a), ss.shape)
        sser = coordinate_series(np.broadcast_to(ss, batch))
        fs = {name: _fs(f, name) for name in self.fields}
        out = self.evaluate(sser, fs, p)
        E = out["E"]
        return [E[(0, 0)].coefficient(0), E[(2, 2)].coefficient(0), out["scalar"][0].coefficient(0),
                f.lz_s]

    def _source(self, p):
        return np.exp(p.loglam) if self.coupling == "loglam" else p.lam

    def _pv(self, lam):
        """Problem parameters for the source ``lam``."""
        return {"loglam": math.log(lam)} if self.coupling == "loglam" else {"lam": float(lam)}

    def source_of(self, sol):
        """The source ``lam`` of a solution, whatever the coupling parameter."""
        return math.exp(sol.params["loglam"]) if self.coupling == "loglam" else sol.params["lam"]

    def _uv_rows(self, c, f, p):
        lam = self._source(p)
        src = f.psi - lam if self.quantization == "standard" else f.psi_s / np.exp(f.lz) - lam
        return [f.a, f.b, src, None]

    def _ir_rows(self, c, f, p):
        q = np.exp(-f.b / 2)  # k e^{-b/2}, k = 1
        return [f.a_s, f.b_s, f.psi_s / np.exp(f.lz) + q * f.psi, f.lz - np.log(self.cutoff) - f.b / 2]

    def _guess(self, lam):
        Z0 = self.cutoff

        def g(s):
            z = Z0 * s
            out = {"a": 0 * s, "b": 0 * s, "lz": np.log(Z0) + 0 * s}
            out["psi"] = lam * np.exp(-z) if self.quantization == "standard" else lam * z * np.exp(-z)
            return out
        return g

    # ------------------------------------------------------------------ solve
    def solve(self, lam, guess=None):
        """Solve at ``lam`` = lambda/k^{d-Delta}; continuation from the last solution if needed."""
        from ..newton._newton import _newton, initial_state

        start = guess if guess is not None else self._last
        n = self.n if start is None else min(self.n_max, max(self.n, start.grid.shape[0]))
        pr = self.problem(n)
        opts = NewtonOptions(tol=self.tol, max_iter=15).validated()
        if self.coupling == "loglam" and not lam > 0:
            raise ProblemDefinitionError("coupling='loglam' needs a positive source")
        near = abs(lam) <= 1.0 if start is None else abs(lam - self.source_of(start)) <= 0.5
        res = None
        if near:  # a direct Newton solve from a nearby state
            g = start if start is not None else self._guess(lam)
            res = _newton(pr, initial_state(pr, g), self._pv(lam), opts)
        if res is None or res.status not in (0, 5):
            res = self._homotopy(start, lam) or res
        if res is None:  # no direct attempt and the continuation did not get there
            g = start if start is not None else self._guess(lam)
            res = _newton(pr, initial_state(pr, g), self._pv(lam), opts)
        while res.status == 5 and res.grid.shape[0] < self.n_max:
            n = min(self.n_max, int(math.ceil(res.grid.shape[0] * 1.5)))
            pr = self.problem(n)
            res = _newton(pr, initial_state(pr, res), self._pv(lam), opts)
        sol = WallSolution.wrap(res, self)
        if res.converged:
            self._last = res
        _warn_uncertified(self, sol, f"lam={lam}")
        return sol

    def _homotopy(self, start, lam):
        from ..continuation import follow
        from ..newton._newton import _newton, initial_state

        if start is None:
            lam0 = min(abs(lam), 0.5) * (1 if lam >= 0 else -1) if self.coupling == "loglam" else 0.0
            pr = self.problem(self.n)
            start = _newton(pr, initial_state(pr, self._guess(lam0)), self._pv(lam0) if lam0 else
                            {self.coupling: 0.0}, NewtonOptions(tol=self.tol).validated())
            if start.status != 0:
                return None
        target = self._pv(lam)[self.coupling]
        v0 = start.params[self.coupling]
        step = 0.1 if target > v0 else -0.1
        br = follow(start.problem, start, self.coupling, step=step, targets=[target],
                    stop_at_last_target=True, max_points=2000, tol=self.tol, n_max=self.n_max, max_step=0.5)
        hits = [s for s in br.solutions if abs(s.params[self.coupling] - target) < 1e-14]
        return hits[-1] if hits else None

    def follow(self, start=None, *, stop=None, step=0.1, max_points=400, targets=(), checkpoint=None,
               resume=None, callback=None, attrs=None, **kwargs):
        """Follow the family in ``lam`` with observables (units of k) at every point."""
        from ..continuation import follow
        from ..holography import fixed_points

        if not isinstance(start, SolveResult):
            start = self.solve(**(start or {"lam": 0.1}))
        if not start.converged:
            raise ProblemDefinitionError(f"the start solution is not certified: {start.message}")
        bounds = dict(kwargs.pop("bounds", {}) or {})
        param = self.coupling
        if stop is not None:
            stop = self._pv(stop)[param]
            v0 = start.params[param]
            bounds[param] = (min(v0, stop), max(v0, stop))
            step = abs(step) * (1 if stop > v0 else -1)
        targets = [self._pv(t)[param] for t in targets]
        kwargs.setdefault("tol", self.tol)
        kwargs.setdefault("n_max", self.n_max)
        kwargs.setdefault("max_step", 0.5)
        attrs = dict(attrs or {})
        attrs.update({"background": "QLatticeWall", "model": self.model.name,
                      "quantization": self.quantization, "plot_observables": "n,intermediate_efolds",
                      "fixed_points": "; ".join(f"{i}: {p['name']}"
                                                for i, p in enumerate(fixed_points(self.model)))})
        locate_ir = kwargs.pop("locate_ir_changes", True)
        br = follow(start.problem, start, param, step=step, bounds=bounds, max_points=max_points,
                    targets=targets, observables=self.family_observables, checkpoint=checkpoint,
                    resume=resume, callback=callback, attrs=attrs, **kwargs)
        if locate_ir:
            self._locate_ir_changes(br)
        br.postprocess = self._postprocess
        return br

    def _classification(self, sol):
        o = self.family_observables(sol)
        return (o["ir_point"], o["returns_to_uv"], o["intermediate_point"]), o

    def _locate_ir_changes(self, br, tol=1e-6):
        """Bisect the coupling between neighbours whose IR classification differs."""
        from ..continuation import Event
        from ..newton._newton import _newton, initial_state

        opts = NewtonOptions(tol=self.tol, max_iter=40).validated()
        found = []
        pts = br.points
        for i in range(1, len(pts)):
            c0 = self._classification(pts[i - 1].solution)[0]
            c1 = self._classification(pts[i].solution)[0]
            if c0 == c1:
                continue
            lo, hi = pts[i - 1].solution, pts[i].solution
            sol_best = hi
            par = self.coupling
            for _ in range(60):
                l0, l1 = lo.params[par], hi.params[par]
                if abs(l1 - l0) <= tol * max(1.0, abs(l1)):
                    break
                mid = 0.5 * (l0 + l1)
                pr = hi.problem
                res = _newton(pr, initial_state(pr, hi), {par: mid}, opts)
                if res.status != 0:
                    break
                if self._classification(res)[0] == c0:
                    lo = res
                else:
                    hi = sol_best = res
            found.append(Event("ir_change", sol_best.params[self.coupling], sol_best, i, 0.0, (None, None)))
        br.events.extend(found)
        return found

    def _postprocess(self, ds):
        from ..holography import family_derivative

        if "energy" in ds and "vev" in ds and ds.sizes["point"] >= 3:
            lam = ds["source"].values
            de = family_derivative(lam, ds["energy"].values)
            scale = max(1.0, float(np.nanmax(np.abs(ds["energy"].values))))
            ds["cert_first_law"] = ("point", np.abs(de + ds["vev"].values) / scale, {
                "long_name": "first law d(energy)/d(lam) = -<O> along the family (5-point derivative)",
                "units": "1"})
        from ..holography import critical_coupling_estimate, ir_events

        if "n" in ds and ds.sizes["point"] >= 4:
            est = critical_coupling_estimate(ds["source"].values, ds["n"].values)
            if est is not None and est[1] > 0:
                ds.attrs.update({"critical_coupling_estimate": est[0], "critical_exponent_estimate": est[1],
                                 "critical_fit_rms": est[3]})
        return ir_events(ds)

    # ------------------------------------------------------------ observables
    def observables(self, solution):
        """n, sources, vevs, stress tensor (units of k), IR classification and certificate."""
        from ..holography import wall_observables

        return wall_observables(self, solution)

    def family_observables(self, solution):
        from ..holography import CERTIFICATE_KEYS

        out = {}
        for k, v in self.observables(solution).items():
            if isinstance(v, (str, list)):
                continue
            out["cert_" + k if k in CERTIFICATE_KEYS or k in ("constraint", "cutoff") else k] = v
        return out

    def compare_with_homogeneous(self, solution, z0=None, rtol=1e-3, npts=400):
        """The k = 0 flow with the same UV data, and where it agrees with the lattice wall.

        The homogeneous equations (``rho'' + 3 A' rho' = V'(rho)``, ``A'' = -rho'^2/4`` in the
        proper distance ``r = -log z``) are integrated with ``scipy.integrate.solve_ivp``
        from ``z0`` (deep in the UV, where the lattice is negligible) with the lattice
        solution's scalar and its derivative there, until the flow becomes singular or
        leaves the computed range.

        Returns
        -------
        dict with ``z`` and ``rho`` of both flows, ``agree_until`` (largest z with relative
        scalar difference below ``rtol``, in units of 1/k), ``singular_at`` (z where the
        homogeneous flow blows up, or None) and ``efolds`` of agreement above ``z0``.
        """
        from scipy.integrate import solve_ivp

        from ..gravity import derivative

        prof = self.profile(solution, npts)
        lam = max(1.0, abs(self.source_of(solution)))
        z0 = z0 or 1e-3 / lam
        keep = prof["z"] >= z0
        zs, rho_lat = prof["z"][keep], prof["rho"][keep]
        V = self.model.potential
        dV = lambda r: float(np.real(derivative(V, r)[1]))  # noqa: E731

        def rhs(r, y):
            rho, drho, Ap = y
            return [drho, -3 * Ap * drho + dV(rho), -(drho**2) / 4]

        # initial data: rho and d rho/dr = -z d rho/dz of the lattice wall (spectral derivative)
        rho0, drho0 = rho_lat[0], -prof["z_drho"][keep][0]
        Ap0 = math.sqrt(max(0.0, (drho0**2 / 4 - float(np.real(V(rho0))) / 2) / 3))
        blow = lambda r, y: 50.0 - abs(y[0])  # noqa: E731
        blow.terminal = True
        r_end = -math.log(zs[-1])
        sol = solve_ivp(rhs, (-math.log(z0), r_end), [rho0, drho0, Ap0], rtol=1e-10, atol=1e-12,
                        dense_output=True, events=blow)
        r_stop = sol.t[-1]
        zh = np.exp(-np.linspace(-math.log(z0), r_stop, npts))
        rho_h = sol.sol(-np.log(zh))[0]
        rho_l = np.interp(np.log(zh), np.log(zs), rho_lat)
        rel = np.abs(rho_h - rho_l) / np.maximum(np.abs(rho_l), 1e-12)
        bad = np.nonzero(rel > rtol)[0]
        agree = zh[bad[0] - 1] if bad.size and bad[0] > 0 else (zh[0] if bad.size else zh[-1])
        singular = float(math.exp(-r_stop)) if sol.status == 1 else None
        return {"z": zh, "rho_homogeneous": rho_h, "rho_lattice": rho_l, "agree_until": float(agree),
                "singular_at": singular, "efolds": float(math.log(agree / z0))}

    def profile(self, solution, npts=400):
        """Radial profiles on a log grid: z, rho, metric slopes (for plots and comparisons)."""
        from ..holography import wall_profile

        return wall_profile(self, solution, npts)


class DomainWall:
    """Homogeneous (k = 0) domain wall of a scalar model, regular or singular in the IR.

    Parameters
    ----------
    model : BulkModel or QLatticeModel
        One scalar (for a Q-lattice model, its modulus with ``k = 0``).
    n, tol : as for :class:`QLatticeWall`
    cutoff : float
        IR cut-off in units of the flow scale ``lam^{-1/(d-Delta)}``.
    """

    def __init__(self, model, n=60, tol=1e-10, n_max=300, cutoff=1e4, map_scale=1e-5):
        if not isinstance(model, BulkModel) or model.nscalars != 1:
            raise TypeError("DomainWall needs a model with one scalar")
        self.model, self.d = model, model.d
        if self.d != 3:
            raise ProblemDefinitionError("DomainWall is implemented for d = 3")
        self.n, self.n_max, self.tol, self.cutoff, self.map_scale = int(n), int(n_max), float(tol), float(cutoff), float(map_scale)
        self.fields = ["a", "psi"]
        self._problems = {}

    def ir_point(self, lam):
        """The critical point the flow with source ``lam`` reaches, or None (singular flow)."""
        V = self.model.potential
        side = 1.0 if lam >= 0 else -1.0
        pts = [p for p in critical_points(lambda r: V(side * r), rho_max=20.0) if p["rho"] > 1e-9]
        good = [p for p in pts if p["V"] < 0 and p["V2"] > 0]
        if not good:
            return None
        p = dict(min(good, key=lambda q: q["rho"]))
        p["rho"] *= side
        L = p["L"]
        m2 = p["m2L2"]
        delta = 1.5 + math.sqrt(2.25 + m2)
        p["Delta"] = delta
        p["gamma"] = (delta - 3) / L
        return p

    def problem(self, lam, n=None):
        ir = self.ir_point(lam)
        if ir is None:
            return None, None
        n = int(n or self.n)
        Z = self.cutoff / abs(lam) if lam else self.cutoff
        key = (n, Z, ir["rho"])
        if key not in self._problems:
            grid = Chebyshev(n, (0.0, Z), name="z", map=ExponentialMap(self.map_scale * Z))
            L, rs, gam = ir["L"], ir["rho"], ir["gamma"]

            def eqs(c, f, p):
                z = np.asarray(c.z)
                zz = np.where((z <= 0) | (z >= Z), 0.5 * Z, z)
                batch = np.broadcast_shapes(np.shape(f.a), zz.shape)
                zs = coordinate_series(np.broadcast_to(zz, batch))
                fs = {k: Series(np.stack(np.broadcast_arrays(getattr(f, k), getattr(f, k + "_z"),
                                                             getattr(f, k + "_zz") / 2)), 0)
                      for k in ("a", "psi")}
                ea = np.exp(fs["a"])
                g = {(0, 0): -1 * ea / zs**2, (1, 1): 1 / zs**2, (2, 2): ea / zs**2, (3, 3): ea / zs**2}
                out = einstein_deturck(g, None, self.model, MatterContent([zs * fs["psi"]]), 1, 4)
                return [out["E"][(0, 0)].coefficient(0), out["scalar"][0].coefficient(0)]

            def uv(c, f, p):
                return [f.a, f.psi - p.lam]

            def ir_rows(c, f, p):
                z = c.z
                rho = z * f.psi
                zrho = z * f.psi + z * z * f.psi_z
                return [z * f.a_z - 2 * (1 - 1 / L), zrho + gam * (rho - rs)]

            self._problems[key] = Problem(grid, self.fields, eqs, {"z=0": uv, f"z={Z!r}": ir_rows},
                                          {"lam": 0.0}, name="DomainWall")
        return self._problems[key], ir

    def solve(self, lam):
        """Solve the flow with source ``lam``; ``regular=False`` (and no exception) if singular."""
        from ..newton._newton import _newton, initial_state

        pr, ir = self.problem(lam)
        if pr is None:
            out = object.__new__(WallSolution)
            out.__dict__.update(dict(regular=False, converged=False, certified=False, status=-1,
                                     observables={}, certificate_failures=["singular flow"],
                                     params={"lam": lam}))
            out.message = (f"no critical point of V in the direction of the source (lam = {lam}): "
                           "the homogeneous flow is singular in the IR")
            return out
        Z = pr.grid.axes[0].domain[1]
        res = None
        for n in (self.n, int(self.n * 1.5), self.n_max):
            pr, ir = self.problem(lam, n)
            g0 = res if res is not None else self._ramp_guess(lam, ir, Z)
            res = _newton(pr, initial_state(pr, g0), {"lam": float(lam)},
                          NewtonOptions(tol=self.tol, max_iter=80).validated())
            if res.status == 0:
                break
        res.regular, res.ir = True, ir
        sol = WallSolution.wrap(res, self)
        _warn_uncertified(self, sol, f"lam={lam}")
        return sol

    def _ramp_guess(self, lam, ir, Z):
        L, rs = ir["L"], ir["rho"]

        def g(z):
            x = abs(lam) * z
            w = x / (1 + x)
            rho = lam * z / (1 + x) + rs * w**2  # ~ lam z in the UV, -> rho* in the IR
            psi = np.where(z > 0, rho / np.where(z > 0, z, 1.0), lam)
            return {"a": 2 * (1 - 1 / L) * np.log1p(x) * w, "psi": psi}
        return g

    def observables(self, solution):
        from ..holography import domain_wall_observables

        return domain_wall_observables(self, solution)
