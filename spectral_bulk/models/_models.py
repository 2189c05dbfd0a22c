"""Bulk theories: Einstein gravity with scalars, an optional U(1) field and axions.

Action (L = 1, 16 pi G = 1; DESIGN conventions)::

    S = int d^{d+1}x sqrt(-g) [ R - 1/2 G_IJ(phi) dphi^I.dphi^J - V(phi) - 1/4 Z(phi) F^2
                                - 1/2 sum_a (d psi_a)^2 ] + boundary terms

A user writes the potential (and optionally the sigma-model metric and the gauge
coupling) as plain Python functions built from numpy operations; derivatives are
taken automatically (dual numbers, :mod:`spectral_bulk.gravity._dual`), so the
same functions serve collocation arrays, truncated series and complex-step
perturbations.

The UV analysis finds the fixed point at the origin (``V(0) = -d(d-1)``,
``dV(0) = 0``), the masses there (eigenvalues of ``G^{-1} Hess V``), the operator
dimensions ``Delta_pm = d/2 +- sqrt(d^2/4 + m^2)``, which quantisations are
allowed (Breitenlohner-Freedman and unitarity bounds, common practice), the
coordinate power ``p`` (``z = u^p``) that makes the falloffs analytic, and
whether logarithms appear in the near-boundary expansion.
"""

import fractions
import math

import numpy as np

from .._utils import emit_user_level_warning
from ..exceptions import ProblemDefinitionError, ResolutionWarning
from ..gravity._dual import Dual, derivative

__all__ = ["BulkModel", "QLatticeModel", "ScalarData", "critical_points"]


def _second_derivative(fn, x):
    return derivative(lambda y: derivative(fn, y)[1], x)[1]


def _taylor_coefficients(fn, order):
    """Taylor coefficients of a scalar function of one variable at 0 (nested duals)."""
    coeffs = []
    g = fn
    fact = 1.0
    for k in range(order + 1):
        if k:
            fact *= k
        coeffs.append(float(np.real(g(0.0))) / fact)
        g = (lambda h: (lambda y: derivative(h, y)[1]))(g)
    return coeffs


class ScalarData:
    """UV data of one scalar direction: mass, dimensions and allowed quantisations."""

    def __init__(self, name, m2, d):
        self.name, self.m2, self.d = name, float(m2), d
        disc = d * d / 4 + self.m2
        if disc < -1e-12:
            raise ProblemDefinitionError(
                f"scalar {name!r}: m^2 = {m2:.6g} violates the Breitenlohner-Freedman bound "
                f"m^2 >= -d^2/4 = {-d * d / 4:g}: the UV fixed point is unstable"
            )
        nu = math.sqrt(max(disc, 0.0))
        self.delta_plus = d / 2 + nu
        self.delta_minus = d / 2 - nu
        self.allowed = ["standard"]
        # unitarity bound Delta > (d - 2)/2 for the alternative dimension (common practice)
        if 0 < nu < 1 and self.delta_minus > (d - 2) / 2:
            self.allowed += ["alternative", "mixed"]

    def dimension(self, quantization):
        return self.delta_plus if quantization == "standard" else self.delta_minus

    def check(self, quantization):
        if quantization not in ("standard", "alternative", "mixed"):
            raise ProblemDefinitionError(
                f"unknown quantization {quantization!r}; use 'standard', 'alternative' or 'mixed'"
            )
        if quantization not in self.allowed:
            raise ProblemDefinitionError(
                f"quantization {quantization!r} is not allowed for scalar {self.name!r} with "
                f"m^2 = {self.m2:.6g} (Delta_- = {self.delta_minus:.6g}): alternative and mixed "
                f"quantisation need -d^2/4 < m^2 < -d^2/4 + 1"
            )

    def __repr__(self):
        return (f"ScalarData({self.name!r}, m2={self.m2:.6g}, Delta+={self.delta_plus:.6g}, "
                f"Delta-={self.delta_minus:.6g}, allowed={self.allowed})")


def _rational(x, max_den=12):
    fr = fractions.Fraction(x).limit_denominator(max_den)
    return fr if abs(float(fr) - x) < 1e-9 else None


class BulkModel:
    """A bulk theory with real scalars (sigma model), optional gauge field and axions.

    Parameters
    ----------
    potential : callable
        ``potential(*phi) -> V``, numpy-only code (it is evaluated on arrays,
        series and dual numbers).  Convention: ``V(0) = -d(d-1)``.
    scalars : sequence of str
        Names of the scalars (``phi`` arguments in this order).
    sigma_metric : callable, optional
        ``sigma_metric(*phi) -> [[G_IJ]]`` (nested lists); identity if omitted.
    gauge_coupling : callable, optional
        ``gauge_coupling(*phi) -> Z``.  Given means the model has a U(1) field;
        pass ``lambda *phi: 1.0`` for a minimally coupled one.
    axions : int
        Number of massless axions ``psi_a = alpha x_a`` (linear in the boundary
        coordinates; 0, 1 or ``d - 1``).
    d : int
        Boundary dimension (bulk ``D = d + 1``).
    name : str, optional

    Attributes
    ----------
    uv : list of ScalarData
        Masses and dimensions at the UV fixed point (computed at construction).
    """

    def __init__(self, potential, scalars=("phi",), sigma_metric=None, gauge_coupling=None,
                 axions=0, d=3, name=None):
        if not callable(potential):
            raise ProblemDefinitionError("`potential` must be a callable V(*phi)")
        self.d = int(d)
        if self.d < 2:
            raise ProblemDefinitionError(f"`d` must be >= 2, got {d}")
        self.scalars = tuple(scalars)
        self.potential = potential
        self.sigma_metric = sigma_metric
        self.gauge_coupling = gauge_coupling
        self.axions = int(axions)
        if not 0 <= self.axions <= self.d - 1:
            raise ProblemDefinitionError(f"`axions` must be between 0 and d-1 = {self.d - 1}")
        self.name = name or getattr(potential, "__name__", "model")
        self._analyse_uv()

    # ------------------------------------------------------------ evaluation
    @property
    def nscalars(self):
        return len(self.scalars)

    @property
    def charged(self):
        return self.gauge_coupling is not None

    def V(self, *phi):
        return self.potential(*phi)

    def dV(self, *phi):
        """Gradient ``[dV/dphi^I]`` (dual numbers)."""
        out = []
        for i in range(self.nscalars):
            args = [Dual(p, (1.0 if j == i else 0.0) + 0 * p) for j, p in enumerate(phi)]
            v = self.potential(*args)
            out.append(v.b if isinstance(v, Dual) else 0 * phi[0])
        return out

    def G(self, *phi):
        """Sigma-model metric as nested lists."""
        n = self.nscalars
        if self.sigma_metric is None:
            return [[1.0 if i == j else 0.0 for j in range(n)] for i in range(n)]
        return self.sigma_metric(*phi)

    def dG(self, *phi):
        """``dG[K][I][J] = d G_IJ / d phi^K``."""
        n = self.nscalars
        if self.sigma_metric is None:
            return [[[0.0] * n for _ in range(n)] for _ in range(n)]
        out = []
        for k in range(n):
            args = [Dual(p, (1.0 if j == k else 0.0) + 0 * p) for j, p in enumerate(phi)]
            g = self.sigma_metric(*args)
            out.append([[gij.b if isinstance(gij, Dual) else 0.0 for gij in row] for row in g])
        return out

    def Z(self, *phi):
        return 1.0 if self.gauge_coupling is None else self.gauge_coupling(*phi)

    def dZ(self, *phi):
        out = []
        for i in range(self.nscalars):
            if self.gauge_coupling is None:
                out.append(0.0)
                continue
            args = [Dual(p, (1.0 if j == i else 0.0) + 0 * p) for j, p in enumerate(phi)]
            v = self.gauge_coupling(*args)
            out.append(v.b if isinstance(v, Dual) else 0.0)
        return out

    # --------------------------------------------------------------- UV data
    def _analyse_uv(self):
        d = self.d
        zero = [0.0] * self.nscalars
        if not self.nscalars:
            v0 = float(np.real(self.V()))
            if abs(v0 + d * (d - 1)) > 1e-9 * d * d:
                raise ProblemDefinitionError(
                    f"the potential has no AdS critical point with V = -d(d-1) = {-d * (d - 1)}: V = {v0}")
            self.uv = []
            return
        try:
            v0 = float(np.real(self.V(*zero)))
        except Exception as exc:
            raise ProblemDefinitionError(f"the potential cannot be evaluated at phi = 0: {exc}") from exc
        target = -d * (d - 1)
        grad = [float(np.real(g)) for g in self.dV(*zero)]
        if not np.isfinite(v0) or abs(v0 - target) > 1e-9 * abs(target) or max(map(abs, grad), default=0) > 1e-9:
            raise ProblemDefinitionError(
                f"the potential has no AdS critical point at phi = 0 with V = -d(d-1) = {target}: "
                f"V(0) = {v0:.10g}, dV(0) = {grad}; shift the scalars so the UV fixed point is at 0 "
                "and normalise V so the AdS radius is 1"
            )
        n = self.nscalars
        hess = np.zeros((n, n))
        for i in range(n):
            for j in range(n):
                def dv_j(t, i=i, j=j):
                    return self.dV(*[t if k == i else 0 * t for k in range(n)])[j]
                hess[i, j] = float(np.real(derivative(dv_j, 0.0)[1]))
        G0 = np.array(self.G(*zero), dtype=float)
        m2 = np.linalg.eigvals(np.linalg.solve(G0, hess)).real
        self.uv = [ScalarData(name, m, d) for name, m in zip(self.scalars, m2)]

    def powers(self, quantizations):
        """Radial power ``p`` (``z = u^p``) that makes every falloff analytic, or None."""
        exps = [self.d]
        for sc in self.uv:
            exps += [sc.delta_minus, sc.delta_plus]
        dens = []
        for e in exps:
            r = _rational(e)
            if r is None:
                return None
            dens.append(r.denominator)
        p = 1
        for q in dens:
            p = p * q // math.gcd(p, q)
        return p

    def describe(self):
        """A short text of the UV analysis (masses, dimensions, quantisations)."""
        lines = [f"model {self.name}: d = {self.d}, UV fixed point at phi = 0 (V = {-self.d * (self.d - 1)})"]
        for sc in self.uv:
            lines.append(f"  {sc.name}: m^2 = {sc.m2:.6g}, Delta+ = {sc.delta_plus:.6g}, "
                         f"Delta- = {sc.delta_minus:.6g}, quantisations {', '.join(sc.allowed)}")
        return "\n".join(lines)


class QLatticeModel(BulkModel):
    """A Q-lattice: a scalar pair with a U(1) isometry, ``rho e^{i theta}``, ``theta = k x``.

    Kinetic term ``-1/2 (d rho)^2 - 1/2 Phi(rho) (d theta)^2`` and potential ``V(rho)``;
    for ``Phi = rho**2`` this is a complex scalar with canonical kinetic term.

    Parameters
    ----------
    potential : callable
        ``V(rho)``, even in ``rho`` for a U(1)-invariant theory, ``V(0) = -d(d-1)``.
    phase_metric : callable
        ``Phi(rho)``, behaving as ``rho**2`` near 0 so the origin is regular.
    gauge_coupling : callable, optional
        ``Z(rho)`` for an optional U(1) gauge field.
    d : int
    """

    def __init__(self, potential, phase_metric, gauge_coupling=None, d=3, name=None):
        if not callable(phase_metric):
            raise ProblemDefinitionError("`phase_metric` must be a callable Phi(rho)")
        self.phase_metric = phase_metric
        super().__init__(potential, scalars=("rho",), gauge_coupling=gauge_coupling, d=d,
                         name=name or getattr(potential, "__name__", "qlattice"))
        phi_c = _taylor_coefficients(phase_metric, 3)
        if abs(phi_c[0]) > 1e-12 or abs(phi_c[1]) > 1e-12:
            raise ProblemDefinitionError(
                f"`phase_metric` must vanish like rho^2 at rho = 0 (got Phi(0) = {phi_c[0]:.3g}, "
                f"Phi'(0) = {phi_c[1]:.3g}): the phase is not defined at the origin otherwise"
            )

    def Phi(self, rho):
        return self.phase_metric(rho)

    def dPhi(self, rho):
        return derivative(self.phase_metric, rho)[1]

    def log_warnings(self, lattice=True):
        """Causes of logarithms in the near-boundary expansion (empty when analytic).

        Resonances between the two falloffs and the powers generated by the potential's
        Taylor terms, the lattice momentum and the back-reaction (the quantisation does
        not change which powers appear).
        """
        sc = self.uv[0]
        a, b, d = sc.delta_minus, sc.delta_plus, self.d
        causes = []
        if abs(b - a) < 1e-12:
            causes.append("Delta+ = Delta- (m^2 at the BF bound): z^{d/2} log z falloff")
        V = _taylor_coefficients(lambda r: self.potential(r), 5)
        gen = set()
        for m in range(3, 6):
            if abs(V[m]) > 1e-12:
                gen.add(round((m - 1) * a, 9))  # rho^m in V' -> z^{(m-1)a} in the scalar equation
        if lattice:
            gen.add(round(a + 2, 9))
        gen.add(round(a + 2 * a, 9))  # back-reaction of rho^2 on the metric times rho
        for g in sorted(gen):
            if abs(g - b) < 1e-9 and b > a:
                causes.append(f"a source term of order z^{g:g} resonates with the z^Delta+ falloff: "
                              "z^Delta+ log z appears")
        for j in range(0, 4):
            if abs(2 * a + 2 * j - d) < 1e-9 and d % 2 == 0:
                causes.append("the scalar back-reaction resonates with z^d in the metric: z^d log z")
        return causes

    def check_expansions(self, quantization, lattice=True):
        """Warn (ResolutionWarning) about logarithms and non-analytic falloffs; return p."""
        p = self.powers([quantization])
        if p is None:
            emit_user_level_warning(
                f"model {self.name}: falloff exponents {self.uv[0].delta_minus:.6g}, "
                f"{self.uv[0].delta_plus:.6g} are irrational; no power z = u^p makes the expansion "
                "analytic and spectral convergence will only be algebraic", ResolutionWarning)
        for cause in self.log_warnings(lattice):
            emit_user_level_warning(
                f"model {self.name}: {cause}; convergence will only be algebraic", ResolutionWarning)
        return p


def critical_points(potential, rho_max=10.0, n=2000):
    """Critical points of ``V(rho)`` on ``[0, rho_max]`` (sign changes of V', refined).

    Returns a list of dicts with ``rho``, ``V``, ``V''``, and for ``V < 0`` the AdS
    radius ``L = sqrt(-d(d-1)/V)`` for d = 3 and the mass ``m^2 L^2 = V'' L^2``.
    """
    from scipy.optimize import brentq

    dV = lambda r: float(np.real(derivative(potential, r)[1]))  # noqa: E731
    grid = np.linspace(0.0, rho_max, n + 1)
    vals = np.array([dV(r) for r in grid])
    out = []
    if abs(vals[0]) < 1e-12:
        out.append(0.0)
    for a, b, fa, fb in zip(grid[:-1], grid[1:], vals[:-1], vals[1:]):
        if fa == 0 or fa * fb < 0:
            if fa == 0 and a == 0.0:
                continue
            out.append(brentq(dV, a, b, xtol=1e-14) if fa * fb < 0 else a)
    pts = []
    for r in out:
        v = float(np.real(potential(r)))
        v2 = float(np.real(_second_derivative(potential, r)))
        item = {"rho": r, "V": v, "V2": v2}
        if v < 0:
            L2 = -6.0 / v
            item["L"] = math.sqrt(L2)
            item["m2L2"] = v2 * L2
        pts.append(item)
    return pts
