"""Independent scipy reference for planar black branes in AdS4 (d = 3).

This module does not import ``spectral_bulk``.  It provides

* closed forms (in units of the temperature ``T``):
  :func:`ads_schwarzschild`, :func:`rn_ads`, :func:`axion_brane`;
* a shooting solver for Q-lattice black branes,
  :func:`qlattice_brane_shooting` (``scipy.integrate.solve_ivp`` from the
  horizon + ``scipy.optimize.root``);
* the second-order small-source coefficient of the entropy,
  :func:`qlattice_entropy_second_order` (and an independent second route,
  :func:`qlattice_entropy_second_order_from_free_energy`);
* :func:`build_reference_values`, which regenerates ``brane_values.json``
  (run this file as a script).

Conventions (see ``docs/physics/black_branes.md`` for the derivations)
----------------------------------------------------------------------
Bulk D = 4, L = 1, 16 pi G = 1, action

    S = int d^4x sqrt(-g) [R - 1/2 (d rho)^2 - 1/2 Phi(rho) (d theta)^2 - V(rho)
        - 1/4 Z(rho) F^2] + 2 int sqrt(-gamma) K + counterterms,

with theta = k x (Q-lattice) and V(rho) = -6 - rho^2 + O(rho^4) (m^2 = -2).
Observables are mixed components of the boundary stress tensor in a unit
boundary metric: energy = <T_tt>, p_x = <T_xx>, p_y = <T_yy>; f = eps - T s
- mu rho_charge; s = 4 pi x (horizon area per unit boundary area).

Shooting gauge ("areal gauge", used only inside this module)

    ds^2 = z^-2 [ -f(z) e^{-chi(z)} dt^2 + dz^2 / f(z) + e^{w(z)} dx^2
                  + e^{-w(z)} dy^2 ],     horizon z = 1, boundary z = 0,

so g_xx g_yy = z^-4 exactly and s = 4 pi in units with z_h = 1.  The near
boundary data are read from the regular variables

    phi = rho / z,  q = phi',  H = (f - 1 - z^2 phi^2 / 4) / z^3,
    Omega = w' / z^2,

whose values at z = 0 are lambda, rho_2, f_3 - lambda rho_2 / 2 and 3 w_3.
"""

from __future__ import annotations

import json
import math
import os
import time

import numpy as np
from scipy.integrate import quad, solve_ivp
from scipy.optimize import root

__all__ = [
    "ads_schwarzschild",
    "rn_ads",
    "axion_brane",
    "qlattice_brane_shooting",
    "qlattice_entropy_second_order",
    "qlattice_entropy_second_order_from_free_energy",
    "quadratic_potential",
    "component_quantisation_profiles",
    "build_reference_values",
]

EPS = np.finfo(float).eps
#: Temperature of the planar AdS4-Schwarzschild brane with horizon at z = 1.
T_SCHW = 3.0 / (4.0 * math.pi)

# Gauss-Legendre rule on [0, 1] used to build U(rho) = V + 6 + rho^2 from
# U'(rho) = V'(rho) + 2 rho without the cancellation of V + 6 + rho^2.
_GL_X, _GL_W = np.polynomial.legendre.leggauss(12)
_GL_X = 0.5 * (_GL_X + 1.0)
_GL_W = 0.5 * _GL_W


# ---------------------------------------------------------------------------
# Closed forms
# ---------------------------------------------------------------------------
def ads_schwarzschild(T=1.0):
    """Planar AdS4-Schwarzschild brane at temperature ``T``.

    Metric ds^2 = z^-2 [-f dt^2 + dz^2/f + dx^2 + dy^2], f = 1 - (z/z_h)^3.

    Parameters
    ----------
    T : float
        Temperature (> 0).

    Returns
    -------
    dict
        ``z_h``, ``T``, ``s``, ``energy``, ``p`` (= p_x = p_y), ``f`` (free
        energy density), all dimensionful at this ``T`` (with ``T = 1`` they
        are the numbers in units of T: s/T^2 = 64 pi^3 / 9,
        eps/T^3 = 128 pi^3 / 27, p/T^3 = -f/T^3 = 64 pi^3 / 27).

    Notes
    -----
    T = 3 / (4 pi z_h), s = 4 pi / z_h^2, eps = 2 / z_h^3, p = 1 / z_h^3
    (common practice; derived in docs/physics/black_branes.md, item e, and
    checked there against eps + p = T s and the Euclidean action).
    """
    if not T > 0:
        raise ValueError(f"`T` must be positive, got {T!r}")
    zh = 3.0 / (4.0 * math.pi * T)
    s = 4.0 * math.pi / zh**2
    eps = 2.0 / zh**3
    p = 1.0 / zh**3
    return dict(z_h=zh, T=T, s=s, energy=eps, p=p, p_x=p, p_y=p, f=eps - T * s)


def rn_ads(mu_over_T):
    """Planar Reissner-Nordstrom-AdS4 brane, in units of T.

    Action normalisation: 16 pi G = 1 and -1/4 F^2 (Z = 1), no scalar.
    With horizon at z = 1:

        f(z) = 1 - (1 + mu^2/4) z^3 + (mu^2/4) z^4,  A_t = mu (1 - z),
        T = (3 - mu^2/4) / (4 pi),  s = 4 pi,  rho = mu,
        eps = 2 (1 + mu^2/4),  p = 1 + mu^2/4,  f = -p.

    Parameters
    ----------
    mu_over_T : float
        Chemical potential in units of T (>= 0).

    Returns
    -------
    dict
        ``mu_over_T``, ``s`` (s/T^2), ``energy`` (eps/T^3), ``p`` (p/T^3),
        ``f`` (f/T^3), ``charge`` (rho/T^2), and ``mu_zh`` (mu z_h).

    Notes
    -----
    Field equations and the Euclidean action f = -p were verified
    symbolically (docs/physics/black_branes.md, item e).  Same family as in
    "Charged AdS black holes and catastrophic holography",
    arXiv:hep-th/9902170, written here in our normalisation.
    """
    m = float(mu_over_T)
    if m < 0:
        raise ValueError(f"`mu_over_T` must be >= 0, got {mu_over_T!r}")
    # mu/T = 16 pi mu / (12 - mu^2)  ->  m mu^2 + 16 pi mu - 12 m = 0
    if m == 0:
        mu = 0.0
    else:
        mu = (-16.0 * math.pi + math.sqrt(256.0 * math.pi**2 + 48.0 * m * m)) / (2.0 * m)
    T = (12.0 - mu * mu) / (16.0 * math.pi)
    s = 4.0 * math.pi
    eps = 2.0 * (1.0 + mu * mu / 4.0)
    p = 1.0 + mu * mu / 4.0
    rho = mu
    f = eps - T * s - mu * rho
    return dict(mu_over_T=m, mu_zh=mu, s=s / T**2, energy=eps / T**3, p=p / T**3,
                p_x=p / T**3, p_y=p / T**3, f=f / T**3, charge=rho / T**2)


def axion_brane(alpha_over_T):
    """Planar brane with two massless axions psi_1 = alpha x, psi_2 = alpha y.

    Kinetic term -1/2 sum_I (d psi_I)^2 (the same normalisation as in
    "A simple holographic model of momentum relaxation", arXiv:1311.5157, as
    quoted from memory; no conversion needed), 16 pi G = 1, horizon z = 1:

        f(z) = 1 - alpha^2 z^2 / 2 - (1 - alpha^2/2) z^3,
        T = (3 - alpha^2/2) / (4 pi),  s = 4 pi,
        eps = 2 - alpha^2,  <T_xx> = <T_yy> = 1 - alpha^2/2,
        f = eps - T s = -1 - alpha^2/2.

    In r = 1/z this is r^2 f = r^2 - alpha^2/2 - m0/r with m0 = 1 - alpha^2/2.

    Parameters
    ----------
    alpha_over_T : float
        Axion slope in units of T (>= 0).

    Returns
    -------
    dict
        ``s``, ``energy``, ``p`` (= <T_xx> = <T_yy>), ``f`` in units of T;
        ``alpha_zh``.  Note <T_xx> != -f: the axions break translations,
        and the thermodynamic identity is <T_xx> = -f + (alpha/2) d f/d alpha
        at fixed T (checked in :func:`build_reference_values`).

    Notes
    -----
    The counterterm needed for the axions is +1/2 sqrt(-gamma) gamma^{ij}
    d_i psi_I d_j psi_I (derived in the note, item e); with it the
    Euclidean action gives f = -1 - alpha^2/2 (verified symbolically).
    """
    a = float(alpha_over_T)
    if a < 0:
        raise ValueError(f"`alpha_over_T` must be >= 0, got {alpha_over_T!r}")
    # alpha/T = 8 pi alpha / (6 - alpha^2)
    if a == 0:
        al = 0.0
    else:
        al = (-8.0 * math.pi + math.sqrt(64.0 * math.pi**2 + 24.0 * a * a)) / (2.0 * a)
    T = (6.0 - al * al) / (8.0 * math.pi)
    s = 4.0 * math.pi
    eps = 2.0 - al * al
    p = 1.0 - al * al / 2.0
    f = eps - T * s
    return dict(alpha_over_T=a, alpha_zh=al, s=s / T**2, energy=eps / T**3,
                p=p / T**3, p_x=p / T**3, p_y=p / T**3, f=f / T**3)


# ---------------------------------------------------------------------------
# Q-lattice brane: ODEs in regular variables
# ---------------------------------------------------------------------------
def quadratic_potential():
    """Return (V, V', Phi, Phi') for V = -6 - rho^2, Phi = rho^2 (m^2 = -2)."""
    return (lambda r: -6.0 - r * r, lambda r: -2.0 * r,
            lambda r: r * r, lambda r: 2.0 * r)


class _Model:
    """Bundle of the user callables with the U = V + 6 + rho^2 split."""

    def __init__(self, V, dV, Phi, dPhi):
        self.V, self.dV, self.Phi, self.dPhi = V, dV, Phi, dPhi
        probe = np.linspace(-2.0, 2.0, 9)
        # U' == 0 on a probe set: treat V as exactly -6 - rho^2 (no roundoff)
        self.quadratic = all(dV(float(r)) + 2.0 * float(r) == 0.0 for r in probe)
        try:
            vals = np.asarray(self.dU(_GL_X * 0.5), dtype=float)
            self._vectorised = vals.shape == _GL_X.shape
        except Exception:  # callables that only take floats
            self._vectorised = False

    def dU(self, r):
        # U'(rho) = V'(rho) + 2 rho: O(rho^3), roundoff ~ eps |rho|
        return self.dV(r) + 2.0 * r

    def U(self, r):
        # U(rho) = int_0^rho U'(s) ds by Gauss-Legendre: roundoff ~ eps rho^2
        # instead of eps |V| (exact for polynomial V of degree <= 24).
        if r == 0.0 or self.quadratic:
            return 0.0
        if self._vectorised:
            return float(np.dot(_GL_W, self.dU(_GL_X * r))) * r
        acc = 0.0
        for xg, wg in zip(_GL_X, _GL_W):
            acc += wg * self.dU(xg * r)
        return acc * r


def _rhs(z, y, kb, m):
    """Right-hand side in regular variables.

    y = [H, chi, w, Omega, phi, q, K]; K is the subtracted on-shell action
    accumulator, K(z) = int_z^1 sqrt(-g) V dz' + B_sing(z).
    """
    H, chi, w, Om, phi, q, _K = y
    rho = z * phi
    rp = phi + z * q
    Ft = 0.25 * phi * phi + z * H            # (f - 1)/z^2
    f = 1.0 + z * z * Ft
    ew = math.exp(-w)
    z2 = z * z
    Phi_z2 = m.Phi(rho) / z2                  # Phi(rho)/z^2, regular
    dPhi_z = m.dPhi(rho) / z                  # Phi'(rho)/z, regular
    U_z4 = m.U(rho) / (z2 * z2)
    dU_z3 = m.dU(rho) / (z2 * z)
    chi_z = 0.5 * (rp * rp + z2 * z2 * Om * Om)   # chi'/z
    chip = z * chi_z
    Hp = (0.25 * q * q + 0.25 * Ft * rp * rp + 0.25 * z2 * f * Om * Om
          + 0.25 * kb * kb * ew * Phi_z2 + 0.5 * U_z4)
    Ftp = H + 0.5 * phi * q + z * Hp
    fp = 2.0 * z * Ft + z2 * Ftp
    fp_z = 2.0 * Ft + z * Ftp
    wp = z2 * Om
    Omp = -0.5 * kb * kb * ew * Phi_z2 / f - fp * Om / f + 0.5 * chip * Om
    qp = (2.0 * phi * Ft / f + dU_z3 / f + 0.5 * kb * kb * ew * dPhi_z / f
          - fp_z * rp / f + 0.5 * chi_z * rp)
    Kp = math.exp(-0.5 * chi) * (-0.5 * q * q - 0.5 * z2 * Om * Om
                                 - 0.25 * chi_z * phi * phi - U_z4)
    return [Hp, chip, wp, Omp, q, qp, Kp]


def _integrate(rho_h, kb, m, rtol, delta=1e-7, z_end=None):
    """Integrate from the horizon (z = 1) to z_end and extrapolate to z = 0.

    Returns the raw data in units z_h = 1 (boundary metric not normalised).
    The default z_end is 1e-7 for V = -6 - rho^2 and 1e-5 otherwise: the
    roundoff of U'(rho) = V' + 2 rho (~ eps |rho|) enters the regular
    variables as ~ eps / z_end after integration.  The extrapolation
    Y(z) = y(z) - z y'(z) = y(0) + O(z^2) is Richardson-combined from z_end
    and 2 z_end, leaving O(z_end^3).
    """
    if z_end is None:
        z_end = 1e-7 if m.quadratic else 1e-5
    Vh = m.V(rho_h)
    Phih = m.Phi(rho_h)
    fp1 = 0.25 * kb * kb * Phih + 0.5 * Vh          # f'(1) (w_h = 0)
    if not fp1 < 0:
        raise _NoHorizon(f"f'(1) = {fp1} >= 0 for rho_h={rho_h}, kb={kb}")
    wp1 = -0.5 * kb * kb * Phih / fp1               # regularity of w
    rp1 = (2.0 * m.dV(rho_h) + kb * kb * m.dPhi(rho_h)) / (2.0 * fp1)  # of rho
    yh = [-1.0 - 0.25 * rho_h * rho_h, 0.0, 0.0, wp1, rho_h, rp1 - rho_h,
          2.0 + 0.5 * rho_h * rho_h]
    # first-order Taylor step for the components whose ODE is regular at the
    # horizon; Omega and q keep their horizon values (error O(delta^2 log)).
    d = _rhs(1.0 - delta, yh, kb, m)
    y0 = list(yh)
    for i in (0, 1, 2, 4, 6):
        y0[i] = yh[i] - delta * d[i]
    sol = solve_ivp(_rhs, (1.0 - delta, z_end), y0, method="DOP853",
                    rtol=rtol, atol=rtol * 1e-3, args=(kb, m), dense_output=True)
    if not sol.success:
        raise _NoHorizon("solve_ivp failed: " + sol.message)

    def Y(zz):
        yy = sol.sol(zz) if zz != sol.t[-1] else sol.y[:, -1]
        dd = _rhs(zz, yy, kb, m)
        return np.array([yy[i] - zz * dd[i] for i in range(7)])
    y0b = (4.0 * Y(z_end) - Y(2.0 * z_end)) / 3.0     # extrapolate to z = 0
    H0, chi0, w0, Om0, lam, rho2, K0 = y0b
    return dict(H0=H0, chi0=chi0, w0=w0, Om0=Om0, lam=lam, rho2=rho2, K0=K0,
                fp1=fp1, rho_h=rho_h, kb=kb, nfev=sol.nfev)


class _NoHorizon(RuntimeError):
    pass


def _observables(raw, quantization):
    """Physical observables in units of T from the raw shooting data."""
    lam, rho2, H0, Om0, chi0 = raw["lam"], raw["rho2"], raw["H0"], raw["Om0"], raw["chi0"]
    T = abs(raw["fp1"]) * math.exp(0.5 * chi0) / (4.0 * math.pi)
    s = 4.0 * math.pi
    # Standard (Delta = 2) renormalised stress tensor, areal-gauge form of
    # <T^i_j> = 3 g_(3)^i_j + lambda rho_2 delta^i_j (note, item a):
    f3 = H0 + 0.5 * lam * rho2
    eps = -2.0 * f3 + lam * rho2            # = -2 H0
    px = Om0 - f3 + lam * rho2
    py = -Om0 - f3 + lam * rho2
    # Euclidean action (note, item d): f = -(K(0) e^{chi0/2} + f3)
    fE = -(raw["K0"] * math.exp(0.5 * chi0) + f3)
    k_phys = raw["kb"] * math.exp(-0.5 * raw["w0"])
    out = dict(T=T, k=k_phys / T, s=s / T**2, rho_h=raw["rho_h"])
    if quantization == "standard":
        out.update(source=lam / T, vev=rho2 / T**2, energy=eps / T**3,
                   p_x=px / T**3, p_y=py / T**3, f=fE / T**3,
                   f_thermo=(eps - T * s) / T**3, delta=2)
    elif quantization == "alternative":
        # Legendre transform: J = rho_2 is the source, <O_1> = -lambda,
        # T^i_j -> T^i_j - lambda rho_2 delta^i_j, f -> f + lambda rho_2.
        lr = lam * rho2
        out.update(source=rho2 / T**2, vev=-lam / T, energy=(eps + lr) / T**3,
                   p_x=(px - lr) / T**3, p_y=(py - lr) / T**3,
                   f=(fE + lr) / T**3, f_thermo=(eps + lr - T * s) / T**3, delta=1)
    else:
        raise ValueError(f"`quantization` must be 'standard' or 'alternative', got {quantization!r}")
    out["lam_rho2"] = lr if quantization == "alternative" else lam * rho2
    return out


def _check_model(V, dV, Phi, dPhi):
    for name, fn in (("potential", V), ("dpotential", dV),
                     ("phase_metric", Phi), ("dphase_metric", dPhi)):
        if not callable(fn):
            raise TypeError(f"`{name}` must be callable, got {type(fn).__name__}")
    if abs(V(0.0) + 6.0) > 1e-12:
        raise ValueError(f"`potential` must satisfy V(0) = -6, got {V(0.0)}")
    h = 1e-3
    m2 = (dV(h) - dV(-h)) / (2 * h)
    if abs(m2 + 2.0) > 1e-4:
        raise ValueError(f"`dpotential` must give m^2 = V''(0) = -2, got {m2}")
    if abs(dV(0.0)) > 1e-14:
        raise ValueError("`dpotential` must vanish at rho = 0")
    if abs(Phi(0.0)) > 1e-14:
        raise ValueError("`phase_metric` must vanish at rho = 0")


def _solve_point(m, target_src, target_k, quantization, rtol, guess=None):
    """Root-find (rho_h, k_b) so that (source, k/T) hit the targets."""
    key = "source"

    def resid(x):
        try:
            obs = _observables(_integrate(x[0], x[1], m, rtol), quantization)
        except _NoHorizon:
            return [1e3, 1e3]
        return [obs[key] - target_src, obs["k"] - target_k]

    if guess is None:
        # linear-response guess around AdS-Schwarzschild
        kb0 = target_k * T_SCHW
        tiny = 1e-4
        lin = _observables(_integrate(tiny, kb0, m, 1e-10), quantization)
        guess = [tiny * target_src / lin[key], kb0]
    sol = root(resid, guess, method="hybr", options=dict(xtol=1e-13))
    res = np.max(np.abs(resid(sol.x)))
    return sol.x, res


def qlattice_brane_shooting(potential, dpotential, phase_metric, dphase_metric,
                            lam, k, quantization="standard", rtol=1e-12,
                            error_estimate=True):
    """Q-lattice black brane by shooting from the horizon.

    Solves the static equations of the theory
    R - 1/2 (d rho)^2 - 1/2 Phi(rho) (d theta)^2 - V(rho), theta = k x,
    for a planar brane with the given source and lattice wavenumber, both in
    units of T, using ``solve_ivp`` (DOP853) from z = 1 - 1e-7 to z = 1e-7
    (1e-5 if V is not exactly -6 - rho^2) in regular variables and
    ``scipy.optimize.root`` on the two horizon data (rho_h, k_bulk).

    Parameters
    ----------
    potential, dpotential : callable ``float -> float``
        V(rho) and V'(rho).  Must satisfy V = -6 - rho^2 + O(rho^4) (a
        cubic term would produce log terms that this reader ignores).
    phase_metric, dphase_metric : callable ``float -> float``
        Phi(rho) and Phi'(rho), with Phi = O(rho^2).
    lam : float
        Source in units of T^(3-Delta): lambda/T (coefficient of z^1) for
        ``quantization="standard"`` (Delta = 2); J/T^2 with J the coefficient
        of z^2 for ``"alternative"`` (Delta = 1).
    k : float
        Lattice wavenumber k/T (> 0).
    quantization : {"standard", "alternative"}
    rtol : float
        Relative tolerance of ``solve_ivp`` (atol = 1e-3 rtol).
    error_estimate : bool
        If True, re-solve with rtol*1e3 and horizon offset 1e-6 and report
        the largest change of each observable as its error.

    Returns
    -------
    dict
        ``s`` (s/T^2), ``energy`` (eps/T^3), ``f`` (f/T^3 from the
        Euclidean action), ``p_x``, ``p_y`` (/T^3), ``vev`` (<O>/T^Delta),
        ``source``, ``k``, ``rho_h`` (rho at the horizon; bulk field, so
        independent of units), ``errors`` (dict of absolute error estimates
        for each of these), ``residual`` (root-finder residual), ``delta``,
        ``f_thermo`` (eps - T s, for comparison with ``f``).

    Notes
    -----
    Formulas used are derived in docs/physics/black_branes.md (items a, c,
    d): energy = -2 f_3 + lambda rho_2, p_x,y = +-3 w_3 - f_3 + lambda rho_2,
    T = |f'(1)| e^{chi_0/2} / (4 pi), s = 4 pi (areal gauge, z_h = 1), f from
    the subtracted Euclidean action.  Reading the near-boundary data from
    regular variables avoids the cancellations of a direct fit.

    References
    ----------
    The Q-lattice ansatz (phase k x, metric depending on the radial
    coordinate only) is that of "Holographic Q-lattices", arXiv:1311.3292
    (common practice); the equations here are derived independently.
    """
    _check_model(potential, dpotential, phase_metric, dphase_metric)
    if not k > 0:
        raise ValueError(f"`k` must be positive, got {k!r}")
    if quantization not in ("standard", "alternative"):
        raise ValueError(f"`quantization` must be 'standard' or 'alternative', got {quantization!r}")
    if rtol < 100 * EPS:
        rtol = 100 * EPS
    m = _Model(potential, dpotential, phase_metric, dphase_metric)
    lam = float(lam)
    if lam == 0.0:
        out = ads_schwarzschild(1.0)
        return dict(s=out["s"], energy=out["energy"], f=out["f"], p_x=out["p"],
                    p_y=out["p"], vev=0.0, source=0.0, k=float(k), rho_h=0.0,
                    residual=0.0, errors={}, delta=2 if quantization == "standard" else 1)
    x, res = _solve_point(m, lam, k, quantization, rtol)
    if res > 1e-8:
        # continuation in the source from the linear regime
        x = None
        for frac in np.linspace(0.1, 1.0, 10):
            x, res = _solve_point(m, frac * lam, k, quantization, rtol, guess=x)
        if res > 1e-8:
            raise RuntimeError(f"shooting did not converge (residual {res:.3e})")
    raw = _integrate(x[0], x[1], m, rtol)
    out = _observables(raw, quantization)
    out["residual"] = float(res)
    out["rho_h"] = float(x[0])
    out["k_bulk"] = float(x[1])
    names = ("s", "energy", "f", "p_x", "p_y", "vev", "rho_h", "f_thermo")
    if error_estimate:
        x2, res2 = _solve_point(m, lam, k, quantization, rtol * 1e3, guess=x)
        raw2 = _integrate(x2[0], x2[1], m, rtol * 1e3, delta=1e-6)
        o2 = _observables(raw2, quantization)
        o2["rho_h"] = x2[0]
        out["errors"] = {n: float(abs(out[n] - o2[n]) + 10 * max(res, res2) * abs(out[n]) + 1e-13 * abs(out[n]))
                         for n in names}
    else:
        out["errors"] = {}
    return out


def component_quantisation_profiles(result, kx):
    """x-profiles when phi1 = rho cos kx is quantised with Delta = 2 and
    phi2 = rho sin kx with Delta = 1 (same bulk solution).

    Parameters
    ----------
    result : dict
        Output of :func:`qlattice_brane_shooting` with
        ``quantization="standard"`` (uses ``source`` = lambda/T,
        ``vev`` = rho_2/T^2, ``energy``, ``p_x``, ``p_y``, ``f``, ``k``).
    kx : array_like
        Phase k x at which to evaluate.

    Returns
    -------
    dict of ndarray
        Sources ``lam1`` (Delta=2), ``J2`` (Delta=1), vevs ``O1``, ``O2``,
        ``energy``, ``p_x``, ``p_y`` (functions of x, units of T), the
        period averages ``energy_avg``, ``p_avg_shift``, ``f_avg``, and the
        pointwise residuals ``ward_trace`` (-eps + p_x + p_y - sum_I
        (3 - Delta_I) src_I <O_I>) and ``ward_momentum`` (d p_x/d x -
        sum_I <O_I> d src_I/d x, in units of k T^3).

    Notes
    -----
    The Legendre boundary term for phi2 alone adds -lambda rho_2 sin^2(kx)
    eta_ij to <T_ij> (note, item b): eps(x) = eps + (lambda rho_2/2)(1 -
    cos 2kx), p_i(x) = p_i - (lambda rho_2/2)(1 - cos 2kx).
    """
    kx = np.asarray(kx, dtype=float)
    lam, rho2 = result["source"], result["vev"]
    lr = lam * rho2
    c, s_ = np.cos(kx), np.sin(kx)
    out = dict(lam1=lam * c, J2=rho2 * s_, O1=rho2 * c, O2=-lam * s_)
    shift = lr * s_ ** 2
    out["energy"] = result["energy"] + shift
    out["p_x"] = result["p_x"] - shift
    out["p_y"] = result["p_y"] - shift
    out["energy_avg"] = result["energy"] + 0.5 * lr
    out["p_avg_shift"] = -0.5 * lr
    out["f_avg"] = result["f"] + 0.5 * lr
    out["ward_trace"] = (-out["energy"] + out["p_x"] + out["p_y"]
                         - (1 * out["lam1"] * out["O1"] + 2 * out["J2"] * out["O2"]))
    # d/d(kx): dp_x = -2 lr s c ; sources' derivatives: -lam s, rho2 c
    dpx = -2.0 * lr * s_ * c
    out["ward_momentum"] = dpx - (out["O1"] * (-lam * s_) + out["O2"] * (rho2 * c))
    return out


# ---------------------------------------------------------------------------
# Second order in the source
# ---------------------------------------------------------------------------
def _linear_rhs(z, y, kb):
    """Linear scalar on AdS4-Schwarzschild (z_h = 1), regular variables.

    rho = z phi, q = phi'; with f = 1 - z^3 the scalar equation
    z^2 f rho'' + (z^2 f' - 2 z f) rho' + (2 - kb^2 z^2) rho = 0 becomes
    q' = (kb^2 phi + z phi + 3 z^2 q) / f.  The last two components are the
    k-derivatives (phi_k, q_k) and the running integral of z rho'^2.
    """
    phi, q, phik, qk, _I = y
    f = 1.0 - z**3
    qp = (kb * kb * phi + z * phi + 3.0 * z * z * q) / f
    qkp = (2.0 * kb * phi + kb * kb * phik + z * phik + 3.0 * z * z * qk) / f
    rp = phi + z * q
    return [q, qp, qk, qkp, -z * rp * rp]


def _linear_solution(kb, rtol=1e-12, delta=1e-7, dense=False):
    qh = -(kb * kb + 1.0) / 3.0          # horizon regularity, phi(1) = 1
    # I starts with the horizon sliver int_{1-delta}^1 z rho'^2 ~ delta rho'(1)^2
    y0 = [1.0 - delta * qh, qh, delta * 2.0 * kb / 3.0, -2.0 * kb / 3.0,
          delta * (1.0 + qh) ** 2]
    sol = solve_ivp(_linear_rhs, (1.0 - delta, 1e-8), y0, method="DOP853",
                    rtol=rtol, atol=rtol * 1e-3, args=(kb,), dense_output=dense)
    ye = sol.y[:, -1]
    de = _linear_rhs(1e-8, ye, kb)
    y0b = [ye[i] - 1e-8 * de[i] for i in range(5)]
    return y0b, sol


def qlattice_entropy_second_order(k, use_quad=False):
    """Coefficient c(k/T) in s/s0 = 1 + c (lambda/T)^2 + O(lambda^4).

    Model V = -6 - rho^2, Phi = rho^2, Delta = 2 standard, s0 = entropy of
    AdS4-Schwarzschild at the same T.  In the areal gauge with z_h = 1
    (note, item f):

        c = T0^2 [ (2/3) rho1(1)^2 (kb^2/4 - 1/2) + 1/2 int_0^1 z rho1'^2 dz ],

    with T0 = 3/(4 pi), kb = (k/T) T0 and rho1 the regular solution of the
    linear scalar equation on AdS-Schwarzschild normalised to rho1 = z + O(z^2).

    Parameters
    ----------
    k : float
        k/T (>= 0).
    use_quad : bool
        Evaluate the integral with ``scipy.integrate.quad`` on the dense
        output instead of the ODE-accumulated integral (second route).

    Returns
    -------
    float
        c(k/T).
    """
    if k < 0:
        raise ValueError(f"`k` must be >= 0, got {k!r}")
    kb = k * T_SCHW
    y0, sol = _linear_solution(kb, dense=use_quad)
    phi0 = y0[0]
    if use_quad:
        def integrand(z):
            phi, q = sol.sol(z)[:2]
            return z * (phi + z * q) ** 2
        delta = 1e-7
        qh = -(kb * kb + 1.0) / 3.0
        # quad on the dense output plus the two end slivers (z < 1e-8, where
        # z rho'^2 ~ z phi0^2, and 1 - delta < z < 1, where ~ rho'(1)^2)
        I = (quad(integrand, 1e-8, 1.0 - delta, epsabs=1e-14, epsrel=1e-13, limit=200)[0]
             + 0.5e-16 * phi0 * phi0 + delta * (1.0 + qh) ** 2)
    else:
        I = y0[4]
    I /= phi0 * phi0
    rho1h = 1.0 / phi0
    return T_SCHW**2 * ((2.0 / 3.0) * rho1h**2 * (kb * kb / 4.0 - 0.5) + 0.5 * I)


def qlattice_entropy_second_order_from_free_energy(k):
    """Second route to c(k/T) through the free energy.

    f = f0(T) - 1/2 T g(k/T) lambda^2 + O(lambda^4), where <O> = T g lambda is
    the static linear response (g = rho_2/(lambda T)); s = -df/dT gives

        c = 9 [g(kappa) - kappa g'(kappa)] / (128 pi^3),   kappa = k/T,

    with g' from the k-derivative (sensitivity) equations.
    """
    kb = k * T_SCHW
    y0, _ = _linear_solution(kb)
    phi0, q0, phik0, qk0 = y0[:4]
    G = q0 / phi0
    dG = (qk0 * phi0 - q0 * phik0) / phi0**2
    g = G / T_SCHW
    return 9.0 * (g - k * dG) / (128.0 * math.pi**3)


# ---------------------------------------------------------------------------
# Reference values
# ---------------------------------------------------------------------------
def _fd(fun, x0, h):
    """Five-point central difference (truncation O(h^4))."""
    return (-fun(x0 + 2 * h) + 8 * fun(x0 + h) - 8 * fun(x0 - h) + fun(x0 - 2 * h)) / (12 * h)


def build_reference_values(path=None, fd_step=0.02):
    """Regenerate the reference values and the checks behind them.

    Model: V = -6 - rho^2, Phi = rho^2.  Points (source/T^(3-Delta), k/T):
    standard (0.5, 1.0), (1.0, 0.5), (2.0, 1.5); alternative (1.0, 1.0).

    Checks per point (residuals stored):
    * ``noether``: eps + p_y - T s (radially conserved charge);
    * ``py_plus_f``: p_y + f with f from the Euclidean action;
    * ``euclid_vs_thermo``: f(Euclidean) - (eps - T s);
    * ``first_law_s``: s/T^2 - (-3 f + (3-Delta) src df/dsrc + k df/dk);
    * ``vev_fd``: <O> + df/dsrc (fixed T, k)  [Delta=1: vev - (-df/dJ)];
    * ``px_thermo``: p_x - (-f + k df/dk) (fixed T, source);
    * ``ward_thermo``: -eps + p_x^thermo + p_y - (3-Delta) src <O>^thermo,
      with the x-pressure and the vev from finite differences of f;
    * ``ward_stress``: -eps + p_x + p_y - (3-Delta) src <O> (stress tensor);
    * ``tol_change``: observables at rtol 1e-12 vs 1e-9 (in ``errors``).
    Plus the small-source test of c(k/T) and the closed-form checks.
    """
    V, dV, Phi, dPhi = quadratic_potential()
    t0 = time.time()
    pts = [("standard", 0.5, 1.0), ("standard", 1.0, 0.5), ("standard", 2.0, 1.5),
           ("alternative", 1.0, 1.0)]
    entries = []
    for quant, src, kk in pts:
        r = qlattice_brane_shooting(V, dV, Phi, dPhi, src, kk, quant)
        D = r["delta"]

        def fval(a, b, quant=quant):
            return qlattice_brane_shooting(V, dV, Phi, dPhi, a, b, quant,
                                           error_estimate=False)["f"]

        h = fd_step
        dfd_src = _fd(lambda a: fval(a, kk), src, h)
        dfd_k = _fd(lambda b: fval(src, b), kk, h)
        px_th = -r["f"] + kk * dfd_k
        vev_th = -dfd_src
        s_th = -3 * r["f"] + (3 - D) * src * dfd_src + kk * dfd_k
        checks = dict(
            noether=r["energy"] + r["p_y"] - r["s"],
            py_plus_f=r["p_y"] + r["f"],
            euclid_vs_thermo=r["f"] - r["f_thermo"],
            first_law_s=r["s"] - s_th,
            vev_fd=r["vev"] - vev_th,
            px_thermo=r["p_x"] - px_th,
            ward_thermo=-r["energy"] + px_th + r["p_y"] - (3 - D) * src * vev_th,
            ward_stress=-r["energy"] + r["p_x"] + r["p_y"] - (3 - D) * src * r["vev"],
        )
        fd_note = (f"five-point differences, step {h}: truncation ~ h^4 f^(5) "
                   "plus rtol/h; expect ~1e-8")
        entries.append(dict(quantization=quant, delta=D, source=src, k=kk,
                            s=r["s"], energy=r["energy"], f=r["f"], p_x=r["p_x"],
                            p_y=r["p_y"], vev=r["vev"], rho_h=r["rho_h"],
                            errors=r["errors"], root_residual=r["residual"],
                            checks=checks, fd_note=fd_note))
    # phi1 standard / phi2 alternative on the first standard point
    r0 = qlattice_brane_shooting(V, dV, Phi, dPhi, 0.5, 1.0, error_estimate=False)
    prof = component_quantisation_profiles(r0, np.linspace(0, 2 * np.pi, 65))
    component_example = dict(
        point=dict(source=0.5, k=1.0), lam_rho2=r0["source"] * r0["vev"],
        energy_avg=prof["energy_avg"], p_avg=r0["p_y"] + prof["p_avg_shift"],
        f_avg=prof["f_avg"],
        max_abs_ward_trace=float(np.max(np.abs(prof["ward_trace"]))),
        max_abs_ward_momentum=float(np.max(np.abs(prof["ward_momentum"]))),
        py_avg_plus_f_avg=r0["p_y"] + prof["p_avg_shift"] + prof["f_avg"],
        note="algebraic consequence of the standard solution; checks the bookkeeping only")
    # small-source limit of s/s0 against the second-order coefficient
    small = []
    for kk in (0.5, 1.0, 2.0):
        c = qlattice_entropy_second_order(kk)
        cq = qlattice_entropy_second_order(kk, use_quad=True)
        cB = qlattice_entropy_second_order_from_free_energy(kk)
        s0 = 64 * math.pi**3 / 9
        rows = []
        for lam in (0.02, 0.04, 0.08):
            r = qlattice_brane_shooting(V, dV, Phi, dPhi, lam, kk, error_estimate=False)
            rows.append(dict(lam=lam, ratio_minus_1_over_lam2=(r["s"] / s0 - 1) / lam**2))
        # Richardson in lam^2 (the next term is O(lam^4))
        a1, a2 = rows[0]["ratio_minus_1_over_lam2"], rows[1]["ratio_minus_1_over_lam2"]
        c_extrap = (4 * a1 - a2) / 3
        small.append(dict(k=kk, c_integral=c, c_integral_quad=cq, c_free_energy=cB,
                          c_from_shooting_extrapolated=c_extrap, shooting=rows,
                          residual_routes=c - cB, residual_shooting=c - c_extrap))
    # closed forms: first law by finite differences
    closed = {}
    m = 1.3
    r = rn_ads(m)

    def f_rn(T, mu):
        d = rn_ads(mu / T)
        return d["f"] * T**3
    s_fd = -_fd(lambda T: f_rn(T, m), 1.0, 1e-3)
    q_fd = -_fd(lambda mu: f_rn(1.0, mu), m, 1e-3)
    closed["rn_ads"] = dict(mu_over_T=m, values=r, check_first_law_s=r["s"] - s_fd,
                            check_charge=r["charge"] - q_fd,
                            check_euler=r["energy"] + r["p"] - r["s"] - m * r["charge"])
    a = 2.0
    ra = axion_brane(a)

    def f_ax(T, al):
        return axion_brane(al / T)["f"] * T**3
    s_fd = -_fd(lambda T: f_ax(T, a), 1.0, 1e-3)
    dfda = _fd(lambda al: f_ax(1.0, al), a, 1e-3)
    closed["axion_brane"] = dict(alpha_over_T=a, values=ra, check_first_law_s=ra["s"] - s_fd,
                                 check_px=ra["p"] - (-ra["f"] + 0.5 * a * dfda))
    # k = 0 linear response on AdS4-Schwarzschild is hypergeometric:
    # rho = z 2F1(1/3,1/3;2/3;z^3) - r z^2 2F1(2/3,2/3;4/3;z^3) is regular at
    # z = 1 iff r = 3 Gamma(2/3)^3 / Gamma(1/3)^3 (connection formula for
    # c = a + b: NIST Digital Library of Mathematical Functions, eq. 15.4.21,
    # quoted from memory), so rho_2/lambda = -r (z_h = 1)
    # and c(0) = -9 Gamma(2/3)^3 / (32 pi^2 Gamma(1/3)^3).
    from scipy.special import gamma as _gamma
    r_exact = 3.0 * _gamma(2.0 / 3.0) ** 3 / _gamma(1.0 / 3.0) ** 3
    y0, _ = _linear_solution(0.0)
    closed["linear_response_k0"] = dict(
        rho2_over_lam_numeric=y0[1] / y0[0], rho2_over_lam_exact=-r_exact,
        c0_numeric=qlattice_entropy_second_order(0.0),
        c0_exact=-9.0 * r_exact / (96.0 * math.pi**2),
        residual_G=y0[1] / y0[0] + r_exact,
        residual_c0=qlattice_entropy_second_order(0.0) + 9.0 * r_exact / (96.0 * math.pi**2))
    rs = ads_schwarzschild(1.0)
    closed["ads_schwarzschild"] = dict(values=rs, check_euler=rs["energy"] + rs["p"] - rs["s"])
    data = dict(
        description=("Reference values for Q-lattice black branes, V=-6-rho^2, Phi=rho^2, "
                     "16 pi G = 1, in units of T (s/T^2, energy/T^3, f/T^3, p/T^3, "
                     "vev/T^Delta, source/T^(3-Delta), k/T). rho_h is the bulk scalar "
                     "at the horizon. Generated by tests/reference/brane_reference.py "
                     "(scipy shooting from the horizon). Derivations: "
                     "docs/physics/black_branes.md."),
        conventions=dict(standard="Delta=2: source lambda = coefficient of z_FG^1, vev = rho_2 (coefficient of z_FG^2)",
                         alternative="Delta=1: source J = rho_2, vev = -lambda; T_ij -> T_ij - lambda rho_2 eta_ij, f -> f + lambda rho_2"),
        points=entries, second_order=small, closed_forms=closed,
        component_quantisation_example=component_example,
        runtime_seconds=time.time() - t0)
    if path is not None:
        with open(path, "w") as fh:
            json.dump(data, fh, indent=1, default=float)
    return data


if __name__ == "__main__":  # regenerate brane_values.json
    here = os.path.dirname(os.path.abspath(__file__))
    build_reference_values(os.path.join(here, "brane_values.json"))
