"""Holographic renormalisation and thermodynamics of static branes (d = 3).

Formulas (derivations in ``docs/physics/black_branes.md``; counterterms
``-int sqrt(-gamma) [4 + R[gamma] + rho^2/2]``, common practice, "Holographic
renormalization", hep-th/0112119):

For the metric ``z^-2 [-F dt^2 + G dz^2 + B dx^2 + C dy^2]`` with Taylor expansions
``X = X0 (1 + X1 z + X2 z^2 + X3 z^3)``, ``G = 1 + G1 z + G2 z^2 + G3 z^3``, ``rho = r1 z + r2 z^2``::

    s2 = G2/4 - G1^2/16,           s3 = G3/6 - G1 G2/12 + G1^3/48
    l2 = X2 - X1^2/2,              l3 = X3 - X1 X2 + X1^3/3
    g3^X = l3 + 2 s3 - G1 (l2 + 2 s2),     lambda = r1,   rho_2 = r2 - G1 r1/2
    energy = -3 g3^F - lambda rho_2,  p_x = 3 g3^B + lambda rho_2,  p_y = 3 g3^C + lambda rho_2
    <O> = rho_2 (Delta = 2);  alternative (Delta = 1): J = rho_2, <O> = -lambda and
    T^i_j -> T^i_j - lambda rho_2 delta^i_j.

The trace Ward identity ``-energy + p_x + p_y = sum_I (d - Delta_I) J_I <O_I>`` holds only
on shell (it is ``3 sum g3 = -2 lambda rho_2``), so its residual certifies the numerical
solution.  ``T`` and ``s`` come from the horizon; the free energy is computed twice: from
``energy - T s - mu rho`` and from the renormalised Euclidean action (bulk integral in the
areal coordinate plus boundary terms), and their difference is part of the certificate.

The third Taylor coefficients are read from the solution refined with residuals in extended
precision (:func:`spectral_bulk.newton.polish`): in double precision alone the rounding of the
residual, amplified by about ``n^6/15``, limits them to about 1e-9 relative.

Rational falloffs (one scalar, ``3/4 < Delta_- = a < 3/2``, even potential, solved in
``u = z^{1/p}``): counterterm ``(a/2) phi^2``; ``psi = lambda + beta u^n + ...`` with
``n = (3 - 2a) p`` gives ``<O> = (3 - 2a) beta`` (standard) or ``J = (3 - 2a) beta``,
``<O> = -lambda`` (alternative), reported with ``s`` and ``T``.  The stress tensor would need
the ``u^{3p}`` Taylor coefficient of the metric, which the Chebyshev series does not resolve
(~1e-5 for p = 2); it is computed instead from ``energy + p_y = T s``, the trace Ward identity
and the radial anisotropy integral for ``p_x - p_y`` (:func:`stress_from_identities`,
:func:`anisotropy_integral`; ``stress_from_identities = 1``), which on integer falloffs agrees
with the counterterm route to ~1e-12.  The identities used are then no certificate (NaN); the
free energy from the renormalised Euclidean action (:func:`_action_free_energy`, which
sees the energy only through ``f_3``) is, and the first law along families and
``p_x = -f + k df/dk`` check the result too (tests).
"""

import functools
import math

import numpy as np

from ..gravity import Series, coordinate_series

__all__ = ["brane_observables", "taylor_at_boundary", "CERTIFICATE_KEYS", "BRANE_CERTIFICATE",
           "certificate_failures", "renormalisation_available", "renormalisation_obstruction",
           "RENORMALISATION_WINDOW", "anisotropy_integral", "stress_from_identities",
           "certificate_limit"]

#: Keys of the certificate part of the observables.
CERTIFICATE_KEYS = ("residual", "tail", "ward_trace", "thermo", "py_f", "action", "deturck",
                    "constraint", "temperature")

#: Certificate thresholds (relative residuals) of brane observables; the stress tensor needs
#: third boundary Taylor coefficients, accurate to ~1e-9 relative in double precision.
BRANE_CERTIFICATE = {"ward_trace": 1e-8, "thermo": 1e-8, "py_f": 1e-8, "action": 1e-8,
                     "temperature": 1e-10, "deturck": 1e-10, "constraint": 1e-8}

#: Stress-tensor identities whose thresholds are ten times smaller when the boundary data come
#: from the extended-precision refinement (``extended_precision = 1``; measured ~1e-12).
EXTENDED_KEYS = ("ward_trace", "thermo", "py_f", "action")


def certificate_limit(key, extended=False):
    """Brane threshold of certificate entry ``key`` (``None`` if it has none).

    ``extended``: the boundary data came from the extended-precision refinement, which
    tightens the stress-tensor identities (:data:`EXTENDED_KEYS`) tenfold.
    """
    lim = BRANE_CERTIFICATE.get(key)
    if lim is not None and extended and key in EXTENDED_KEYS:
        lim = lim / 10
    return lim


def certificate_failures(bg, obs):
    """Names of the certificate entries of ``obs`` above their thresholds (empty: certified)."""
    from ._walls import WALL_CERTIFICATE

    limits = WALL_CERTIFICATE if type(bg).__name__.endswith("Wall") else BRANE_CERTIFICATE
    bad = []
    if not obs.get("renormalised", 1):
        why = renormalisation_obstruction(bg) if hasattr(bg, "horizon_metric") else None
        bad.append("renormalisation not implemented for this model" + (f" ({why})" if why else ""))
    extended = obs.get("extended_precision", 0) == 1
    for key, lim in limits.items():
        if limits is BRANE_CERTIFICATE:
            lim = certificate_limit(key, extended)
        v = obs.get(key, np.nan)
        if isinstance(v, (float, int, np.floating)) and np.isfinite(v) and v > lim:
            bad.append(f"{key}={v:.1e}>{lim:.0e}")
    return bad


def taylor_at_boundary(solution, field, order=3, index=0, values=None):
    """Taylor coefficients ``[X(0), X'(0), X''(0)/2, ...]`` of a field at a grid end.

    The derivatives come from the Chebyshev series chopped where its coefficients
    reach the rounding plateau (relative ``2e-16`` in double, scaled by the machine
    epsilon for wider types): differentiating the plateau would amplify rounding by
    ``n**(2k)``, while the chopped terms are below the solution's own accuracy.
    ``values`` (field -> nodal values, e.g. an extended-precision
    :class:`~spectral_bulk.newton.Polished` state) replaces ``solution.fields``.
    """
    from numpy.polynomial import chebyshev as npcheb

    basis = solution.grid.axes[0]
    v = np.asarray((values or solution.fields)[field])
    if not np.issubdtype(v.dtype, np.floating):
        v = v.astype(float)
    c = basis.coeffs(v)
    big = np.abs(c).max()
    plateau = 2e-16 * float(np.finfo(v.dtype).eps / np.finfo(np.float64).eps)
    keep = np.nonzero(np.abs(c) > plateau * max(big, 1e-300))[0]
    m = (keep[-1] + 2) if keep.size else 1
    c = c[: min(m, c.size)]
    a, b = basis.domain
    scale = 2.0 / (b - a)  # affine map: d/dz = (2/(b-a)) d/dxi
    if not basis.map.__class__.__name__ == "AffineMap":
        raise NotImplementedError("boundary Taylor coefficients need an affine radial grid")
    x = v.dtype.type(-1 if index == 0 else 1)
    out = [float(npcheb.chebval(x, c))]
    fact = 1.0
    d = c
    for k in range(1, order + 1):
        fact *= k
        d = npcheb.chebder(d) if d.size > 1 else np.zeros(1)
        out.append(float(npcheb.chebval(x, d)) * scale**k / fact)
    return np.array(out)


def _mul_series(a, b, order=3):
    out = np.zeros(order + 1)
    for i in range(order + 1):
        for j in range(order + 1 - i):
            out[i + j] += a[i] * b[j]
    return out


def _g3(X, G):
    X1, X2, X3 = X[1] / X[0], X[2] / X[0], X[3] / X[0]
    G1, G2, G3 = G[1], G[2], G[3]
    s2 = G2 / 4 - G1**2 / 16
    s3 = G3 / 6 - G1 * G2 / 12 + G1**3 / 48
    l2 = X2 - X1**2 / 2
    l3 = X3 - X1 * X2 + X1**3 / 3
    return l3 + 2 * s3 - G1 * (l2 + 2 * s2)


def _stress_tensor(bg, sol, values=None):
    """Internal-unit (z_h = 1) boundary data: energy, p_x, p_y, sources, vevs, raw energy.

    ``values``: the extended-precision fields of :func:`~spectral_bulk.newton.polish`, if any.
    """
    d = bg.d
    fblack = np.zeros(4)
    fblack[0] = 1.0
    if d <= 3:
        fblack[d] -= 1.0
    A = taylor_at_boundary(sol, "A", values=values)
    S = taylor_at_boundary(sol, "S" if bg.gauge == "deturck" else "A", values=values)
    B = taylor_at_boundary(sol, "B", values=values)
    C = taylor_at_boundary(sol, "C", values=values)
    F = _mul_series(fblack, A)
    inv_f = np.array([1.0, 0.0, 0.0, 1.0 if d == 3 else 0.0])  # 1/(1 - z^3) to O(z^4)
    G = _mul_series(S, inv_f)
    F0 = F[0]
    g3F, g3B, g3C = _g3(F, G), _g3(B, G), _g3(C, G)
    lam_rho2 = 0.0
    srcs, vevs, lams, rho2s = [], [], [], []
    for name in bg.scalar_fields:
        psi = taylor_at_boundary(sol, name, order=1, values=values)
        lam, rho2 = psi[0], psi[1] - G[1] * psi[0] / 2
        lams.append(lam)
        rho2s.append(rho2)
        lam_rho2 += lam * rho2
    energy = -3 * g3F - lam_rho2
    px = 3 * g3B + lam_rho2
    py = 3 * g3C + lam_rho2
    energy_raw = 3 * (g3B + g3C) + lam_rho2
    for lam, rho2 in zip(lams, rho2s):
        if bg.quantization == "standard":
            srcs.append(lam)
            vevs.append(rho2)
        else:
            srcs.append(rho2)
            vevs.append(-lam)
    shift = 0.0
    if bg.quantization in ("alternative", "mixed"):
        shift = lam_rho2
        if bg.quantization == "mixed":
            from ..gravity import derivative

            for lam in lams:
                lh = lam / bg.T ** 1
                w, wp = derivative(bg.multi_trace, lh)
                # h = lambda W'(lambda) - W(lambda), in internal units (dimension 3)
                shift -= (lh * wp - w) * bg.T**3
    energy += shift
    px -= shift
    py -= shift
    energy_raw += shift
    mu = rho_c = 0.0
    if bg.charged:
        at = taylor_at_boundary(sol, "at", order=1, values=values)
        mu, rho_c = at[0] / math.sqrt(F0), -at[1] / math.sqrt(F0)
    return dict(energy=energy, p_x=px, p_y=py, energy_raw=energy_raw, sources=srcs, vevs=vevs,
                lams=lams, rho2s=rho2s, mu=mu, charge=rho_c, G1=G[1], shift=shift)


@functools.lru_cache(maxsize=32)
def _gauss_points(m):
    """Gauss-Legendre nodes and weights on [0, 1] (cached: ``leggauss`` costs more than the
    quadrature it serves; read-only arrays)."""
    x, w = np.polynomial.legendre.leggauss(m)
    x, w = 0.5 * (x + 1), 0.5 * w
    x.flags.writeable = w.flags.writeable = False
    return x, w


def _action_free_energy(bg, sol, lam_beta, energy_std, shift=0.0):
    """Free energy density (internal units) from the renormalised Euclidean action.

    Sections d and i.4 of docs/physics/black_branes.md, in the areal coordinate
    ``zeta = z (B C)^{-1/4}`` written in the grid coordinate ``x`` (``z = x^p``;
    ``p = 1`` for integer falloffs) so that every term is regular::

        s_L = B_sing(zeta_h) + int e^{-chi/2} [ (1/2) zeta^{2a-2} h_zeta^2 + w_zeta^2/(2 zeta^2)
              + a chi_zeta rho^2/(4 zeta^3) + U/zeta^4 ] dzeta
              + (Z/2) int sqrt(B C/(A S)) a_t,z^2 dz + f_3 + a (1 - a) lambda beta

    with ``Delta_- = a`` (1 for m^2 = -2), ``rho = x^(a p) psi``, ``h = rho/zeta^a = psi q^{-a}``,
    ``q = (B C)^{-1/4}``, ``w = log(B/C)/2``, ``e^{-chi} = A S/(B C)/(d zeta/dz)^2``,
    ``B_sing = e^{-chi/2} (2 + a rho^2/2)/zeta^3``, ``U = V + 6 + rho^2`` and
    ``f_3 = (a lambda beta - energy)/2`` with the energy in the standard scheme
    (``energy_std``); ``F = -s_L + shift`` (``shift``: the Legendre term of alternative
    quantisation).  The bulk integral is Gauss-Legendre on the Chebyshev interpolant;
    ``energy_std`` enters only through ``f_3``, so comparing ``F`` with ``energy - T s``
    checks the energy against the bulk integral.
    """
    a, p = getattr(bg, "alpha", 1.0), getattr(bg, "power", 1)
    rho_power = getattr(bg, "rho_power", 1)
    basis = sol.grid.axes[0]
    D1 = basis.diff_matrices(1)[0]
    xq, wq = _gauss_points(max(64, 2 * basis.n))
    P = basis.interp_matrix(xq)
    fields = sol.fields
    A, B, C = fields["A"], fields["B"], fields["C"]
    S = fields["S"] if bg.gauge == "deturck" else A
    x_nodes = sol.grid.coords[sol.grid.names[0]]
    q_nodes = (B * C) ** -0.25
    qx_nodes = D1 @ q_nodes
    # e^{-chi} at the nodes (d zeta/dz = q + x q_x / p), then its log-derivative spectrally
    emchi_nodes = A * S / (B * C) / (q_nodes + x_nodes * qx_nodes / p) ** 2
    chi_x = -(P @ (D1 @ np.log(emchi_nodes)))
    q, qx = P @ q_nodes, P @ qx_nodes
    zeta = xq**p * q
    zeta_x = p * xq ** (p - 1) * q + xq**p * qx
    w_x = 0.5 * (P @ (D1 @ np.log(B / C)))
    integrand = w_x**2 / (2 * zeta**2 * zeta_x)
    rho_h = 0.0
    if bg.scalar_fields:
        psi = fields[bg.scalar_fields[0]]
        h_x = P @ (D1 @ (psi * q_nodes ** (-a)))
        rho = xq**rho_power * (P @ psi)
        U_over_rho4 = _quartic_remainder(bg.model.V, rho)
        integrand = integrand + (0.5 * zeta ** (2 * a - 2) * h_x**2 / zeta_x
                                 + a * chi_x * rho**2 / (4 * zeta**3)
                                 + U_over_rho4 * (rho / zeta) ** 4 * zeta_x)
        rho_h = psi[-1]
    integral = float(np.sum(wq * np.sqrt(P @ emchi_nodes) * integrand))
    if bg.charged:
        # the Maxwell part of the on-shell Lagrangian: -sqrt(-g) Z F^2/4 = +(Z/2) sqrt(BC/(AS)) a_t,z^2
        at_x = P @ (D1 @ fields["at"])
        Zv = np.real(bg.model.Z(xq**rho_power * (P @ fields[bg.scalar_fields[0]]))) if bg.scalar_fields else 1.0
        Ai, Bi, Ci, Si = (P @ v for v in (A, B, C, S))
        integral += float(np.sum(wq * 0.5 * Zv * np.sqrt(Bi * Ci / (Ai * Si)) * at_x**2
                                 / (p * xq ** (p - 1))))
    b_sing_h = math.sqrt(emchi_nodes[-1]) * (2 + a * rho_h**2 / 2) / q_nodes[-1] ** 3  # zeta_h = q_h
    f3 = (a * lam_beta - energy_std) / 2
    s_L = b_sing_h + integral + f3 + a * (1 - a) * lam_beta
    return -s_L + shift


def _quartic_remainder(V, rho):
    """``(V(rho) + 6 + rho^2) / rho^4`` without cancellation (m^2 = -2 potentials).

    Taylor's theorem with integral remainder: since ``U = V + 6 + rho^2`` has
    ``U(0) = U^(1)(0) = U^(2)(0) = 0``, ``U(rho) = rho^3 U^(3)(0)/6 + rho^4 int_0^1 (1-t)^3/6
    U^(4)(t rho) dt`` with ``U^(4) = V^(4)`` (nested dual numbers), by 16-point
    Gauss-Legendre in ``t``.
    """
    from ..gravity import derivative

    def nth(fn, k):
        for _ in range(k):
            fn = (lambda g: (lambda y: derivative(g, y)[1]))(fn)
        return fn

    d3 = float(np.real(nth(V, 3)(0.0)))
    d4 = nth(V, 4)
    t, w = _gauss_points(16)
    rho = np.asarray(rho, dtype=float)
    # all quadrature nodes in one evaluation (the nested duals cost per call, not per point)
    vals = np.real(d4(t[:, None] * rho[None, :]))
    acc = np.einsum("j,j...->...", w * (1 - t) ** 3 / 6, np.broadcast_to(vals, (t.size,) + rho.shape))
    if d3:
        with np.errstate(divide="ignore", invalid="ignore"):
            acc = acc + np.where(rho != 0, d3 / (6 * rho), 0.0)
    return acc


def _gauge_checks(bg, sol):
    """DeTurck norm ``max |xi^2|`` and the unimposed ``zz`` equation at interior points.

    In the tortoise gauge the ``zz`` Einstein equation is a constraint that holds by
    regularity; its size relative to the potential term is reported as ``constraint``.
    """
    basis = sol.grid.axes[0]
    z = basis.points[1:-1]
    D = basis.diff_matrices(2)
    fs = {}
    for name in bg.fields:
        v = sol.fields[name]
        fs[name] = Series(np.stack([v, D[0] @ v, (D[1] @ v) / 2])[:, 1:-1], 0)
    out = bg.evaluate(coordinate_series(z), fs, sol.params)
    xi2 = out["xi2"]
    deturck = float(np.max(np.abs(xi2.coefficient(0)))) if isinstance(xi2, Series) else 0.0
    ezz = np.abs(out["E"][(1, 1)].coefficient(0))
    V = out["V"]
    vterm = np.abs(np.real(V.coefficient(0) if isinstance(V, Series) else V))
    constraint = float(np.max(ezz / np.maximum(vterm, 1.0)))
    return deturck, constraint


#: Window of Delta_- (open interval) where the counterterms
#: ``-int sqrt(-gamma) [4 + R[gamma] + (Delta_-/2) phi^2]`` make the action finite and no
#: logarithm appears (d = 3, even potential): Delta_- <= 3/4 needs a phi^4 counterterm and
#: logarithms appear at Delta_- = 3/4 and 3/2.
RENORMALISATION_WINDOW = (0.75, 1.5)


def renormalisation_obstruction(bg):
    """Why the renormalised observables of ``bg`` are not available (``None`` when they are).

    Covered: d = 3 with scalars of m^2 = -2 in ``z`` (Delta = 2 or 1), and one scalar with a
    rational ``3/4 < Delta_- < 3/2`` solved in ``u = z^{1/p}`` whose potential (and phase
    metric) is even to the orders that matter (stress tensor from the identities there).
    """

    if bg.d != 3:
        return f"holographic renormalisation is implemented for d = 3 (got d = {bg.d})"
    if getattr(bg, "power", 1) == 1:
        bad = [sc for sc in bg.model.uv if abs(sc.m2 + 2) > 1e-9]
        if not bad:
            return None
        sc = bad[0]
        return (f"scalar {sc.name!r}: m^2 = {sc.m2:.6g} (Delta_- = {sc.delta_minus:.6g}); integer "
                "falloffs are renormalised for m^2 = -2 only, rational ones need "
                f"{RENORMALISATION_WINDOW[0]:g} < Delta_- < {RENORMALISATION_WINDOW[1]:g}")
    # the vev is available; the stress tensor then follows from the identities (module notes)
    return _fractional_vev_obstruction(bg)


def _fractional_vev_obstruction(bg):
    """Why ``<O> = (3 - 2a) beta`` is not the renormalised vev of a rational falloff (or None)."""
    from ..models import QLatticeModel
    from ..models._models import _taylor_coefficients

    a = bg.alpha
    lo, hi = RENORMALISATION_WINDOW
    if not lo < a < hi:
        return (f"Delta_- = {a:.6g} is outside {lo:g} < Delta_- < {hi:g}: the counterterms "
                "4 + R + (Delta_-/2) phi^2 do not suffice there (a phi^4 counterterm is needed)")
    V = _taylor_coefficients(lambda r: bg.model.V(r), 5)
    odd = [f"V{m}" for m in (1, 3, 5) if abs(V[m]) > 1e-12]
    if isinstance(bg.model, QLatticeModel):
        Phi = _taylor_coefficients(lambda r: bg.model.Phi(r), 5)
        odd += [f"Phi{m}" for m in (3, 5) if abs(Phi[m]) > 1e-12]
    if odd:
        return (f"model {bg.model.name}: odd Taylor terms {odd} in the potential / phase metric "
                "generate falloffs (and a phi^3 counterterm) the formulas do not cover")
    return None


def renormalisation_available(bg):
    """True where the renormalised stress tensor and vevs are implemented.

    d = 3 with m^2 = -2 scalars (integer falloffs), or one scalar with rational
    ``3/4 < Delta_- < 3/2`` and an even potential (solved in ``u = z^{1/p}``, stress tensor
    from :func:`stress_from_identities`); see
    :func:`renormalisation_obstruction` for the reason in the other cases.
    """
    return renormalisation_obstruction(bg) is None


def anisotropy_integral(bg, sol, m=64):
    """``<T_xx> - <T_yy>`` (internal units) of a Q-lattice brane as a radial integral.

    ``R^x_x - R^y_y = Phi(rho) k^2 g^xx / 2`` and ``sqrt(-g) (R^x_x - R^y_y)`` is
    ``-(1/2) d/dz [sqrt(-g) g^zz (log B/C)']``; the bracket vanishes at the horizon and equals
    ``3 (l3^B - l3^C) = p_x - p_y`` at the boundary, so (docs/physics/black_branes.md
    section j)::

        p_x - p_y = k^2 int_0^1 z^-2 A sqrt(C/B) Phi(phi) dz

    evaluated by Gauss-Legendre on the Chebyshev interpolant (in ``u``, ``dz = p u^{p-1} du``).
    Zero for branes without a lattice.
    """
    if not getattr(bg, "lattice", False):
        return 0.0
    basis = sol.grid.axes[0]
    xq, wq = _gauss_points(max(m, 2 * basis.n))
    P = basis.interp_matrix(xq)
    A, B, C, psi = (P @ sol.fields[name] for name in ("A", "B", "C", bg.scalar_fields[0]))
    p = getattr(bg, "power", 1)
    if p == 1:
        z, dz, phi = xq, np.ones_like(xq), xq ** bg._dims()[0][0] * psi
    else:
        z, dz, phi = xq**p, p * xq ** (p - 1), xq**bg.rho_power * psi
    kk = sol.params["k"] * bg.T
    integrand = dz * A * np.sqrt(C / B) * np.real(bg.model.Phi(phi)) / z**2
    return float(kk**2 * np.sum(wq * integrand))


def stress_from_identities(Ts, ward_rhs, anisotropy):
    """``(energy, p_x, p_y)`` of a homogeneous brane from ``T s``, the Ward trace and ``p_x - p_y``.

    Solves ``energy + p_y = T s`` (radially conserved charge; ``mu = 0``),
    ``-energy + p_x + p_y = sum_I (d - Delta_I) J_I <O_I>`` (trace Ward identity, d = 3) and
    ``p_x - p_y = anisotropy``: ``p_y = (T s + w - J)/3``, ``p_x = p_y + J``, ``energy = T s - p_y``.
    """
    py = (Ts + ward_rhs - anisotropy) / 3
    return Ts - py, py + anisotropy, py


def _horizon_only(bg, sol):
    """Observables that need no renormalisation, for models outside its coverage."""
    T = bg.T
    Ah, Sh, Bh, Ch = bg.horizon_metric(sol)
    deturck, constraint = _gauge_checks(bg, sol)
    nan = float("nan")
    obs = {"T": 1.0, "s": 4 * math.pi * math.sqrt(Bh * Ch) / T**2, "f": nan, "energy": nan,
           "p_x": nan, "p_y": nan, "f_action": nan, "renormalised": 0, "stress_from_identities": 0,
           "extended_precision": 0}
    for name in bg.source_names():
        obs["source" + ("" if name == "lam" else name[3:])] = float(sol.params[name])
        obs["vev" + ("" if name == "lam" else name[3:])] = nan
    if getattr(bg, "power", 1) != 1 and _fractional_vev_obstruction(bg) is None:
        obs["vev"] = _fractional_vev(bg, sol)
    for name in bg.scalar_fields:
        obs["rho_h" + ("" if name == "psi" else name[3:])] = float(sol.fields[name][-1])
    obs.update({"residual": float(sol.residual), "tail": float(max(sol.tail.values())),
                "ward_trace": nan, "thermo": nan, "py_f": nan, "action": nan, "deturck": deturck,
                "constraint": constraint, "temperature": float(abs(math.sqrt(Ah / Sh) - 1))})
    return obs


def _fractional_vev(bg, sol):
    """``<O>/T^Delta`` of a rational falloff solved in ``u = z^{1/p}`` (3/4 < Delta_- < 3/2).

    ``psi = lambda + beta u^n + ...`` with ``n = (3 - 2a) p``: standard ``<O> = (3 - 2a) beta``
    (counterterm ``(a/2) phi^2``), alternative ``J = (3 - 2a) beta``, ``<O> = -lambda``
    (docs/physics/black_branes.md section i).
    """
    a, n = bg.alpha, bg.n_vev
    psi = taylor_at_boundary(sol, bg.scalar_fields[0], order=n)
    if bg.quantization == "standard":
        return float((3 - 2 * a) * psi[n] / bg.T ** (3 - a))
    return float(-psi[0] / bg.T**a)


def _rational_observables(bg, sol):
    """Observables of a rational falloff (one neutral scalar, solved in ``u = z^{1/p}``).

    ``s``, ``T``, the source and ``<O>`` come from the horizon and the ``u^n`` coefficient of
    ``psi``; the stress tensor from :func:`stress_from_identities` with the anisotropy
    integral (its ``u^{3p}`` Taylor coefficient is out of reach of the Chebyshev series).
    The two identities used are then not certificates (``ward_trace``, ``thermo``, ``py_f``
    are NaN); the free energy from the Euclidean action (``action``, independent of the
    identities) is, and so are the first law along a family (``cert_first_law``:
    ``<O> = -d f/d source``) and ``p_x = -f + k df/dk`` (tests).
    """
    obs = _horizon_only(bg, sol)
    T = bg.T
    (_, src_dim), = bg._dims()
    w = src_dim * obs["source"] * obs["vev"]  # (d - Delta) J <O> in units of T^3
    J = anisotropy_integral(bg, sol) / T**3
    energy, px, py = stress_from_identities(obs["s"], w, J)
    f = energy - obs["s"]
    # the Euclidean action sees the energy only through f_3 (weight 1/2): an independent check
    shift = 0.0
    if bg.quantization == "alternative":  # <T^i_j>_alt = <T^i_j> - c lambda beta delta^i_j
        shift = -obs["source"] * obs["vev"]  # c lambda beta / T^3 with J = c beta, <O> = -lambda
    coef = taylor_at_boundary(sol, bg.scalar_fields[0], order=bg.n_vev)
    f_action = _action_free_energy(bg, sol, coef[0] * coef[bg.n_vev], (energy - shift) * T**3,
                                   shift * T**3) / T**3
    scale = max(abs(energy), obs["s"], abs(px), abs(py), abs(f))
    obs.update({"energy": energy, "p_x": px, "p_y": py, "f": f, "f_action": f_action,
                "action": abs(f_action - f) / scale, "renormalised": 1, "stress_from_identities": 1})
    return obs


def _polished_values(sol):
    """Extended-precision fields of a converged solution (None when unavailable or no better).

    The stress tensor sits in third boundary derivatives, where double-precision
    rounding of the residual (about 1e-14 near the horizon) is amplified to about
    1e-9 relative; refining in ``np.longdouble`` lowers that floor (module notes of
    :mod:`spectral_bulk.newton._polish`).
    """
    from ..newton import polish

    if not sol.converged:
        return None
    try:
        pol = polish(sol)
    except (NotImplementedError, TypeError, ValueError, ArithmeticError):
        # e.g. a model function without a long-double loop (some scipy.special ufuncs):
        # the double data stand, and extended_precision = 0 says so
        return None
    return pol.fields if pol is not None and pol.improved else None


def brane_observables(bg, sol):
    """Dimensionless observables (units of T) and certificate of a brane solution.

    The renormalised stress tensor, vevs and free energy are implemented for d = 3 with
    scalars of m^2 = -2 (Delta = 2 or 1); for other models only the horizon quantities
    (``s``, ``rho_h``) and the gauge certificate are returned, the rest is NaN and
    ``renormalised = 0`` (which fails the certificate instead of reporting wrong numbers;
    :func:`renormalisation_obstruction` gives the reason).  Rational falloffs with
    ``3/4 < Delta_- < 3/2`` (solved in ``u = z^{1/p}``) report the source, ``<O>`` and the
    stress tensor from the identities (module notes).
    """
    if not renormalisation_available(bg):
        return _horizon_only(bg, sol)
    if getattr(bg, "power", 1) != 1:
        return _rational_observables(bg, sol)
    T = bg.T
    values = _polished_values(sol) if getattr(bg, "extended", True) else None
    st = _stress_tensor(bg, sol, values)
    Ah, Sh, Bh, Ch = bg.horizon_metric(sol, values)
    s = 4 * math.pi * math.sqrt(Bh * Ch)
    T_sol = T * math.sqrt(Ah / Sh)
    f_thermo = st["energy"] - T * s - st["mu"] * st["charge"]
    f_action = np.nan
    if bg.d == 3 and all(abs(sc.m2 + 2) <= 1e-9 for sc in bg.model.uv):
        lam_rho2 = sum(lam * r for lam, r in zip(st["lams"], st["rho2s"]))
        f_action = _action_free_energy(bg, sol, lam_rho2, st["energy"] - st["shift"], st["shift"])
    deturck, constraint = _gauge_checks(bg, sol)
    scale = max(abs(st["energy"]), T * s, abs(st["p_x"]), abs(st["p_y"]), abs(f_thermo))
    obs = {
        "T": 1.0,
        "renormalised": 1,
        "stress_from_identities": 0,
        "extended_precision": int(values is not None),
        "s": s / T**2,
        "f": f_thermo / T**3,
        "energy": st["energy"] / T**3,
        "p_x": st["p_x"] / T**3,
        "p_y": st["p_y"] / T**3,
        "f_action": f_action / T**3,
    }
    # sources and vevs in units of T
    for (_, src_dim), name, src, vev in zip(bg._dims(), bg.source_names(), st["sources"], st["vevs"]):
        suffix = "" if name == "lam" else name[3:]
        vev_dim = bg.d - src_dim
        obs["source" + suffix] = src / T**src_dim
        obs["vev" + suffix] = vev / T**vev_dim
    for name in bg.scalar_fields:
        suffix = "" if name == "psi" else name[3:]
        obs["rho_h" + suffix] = float(sol.fields[name][-1])  # z = 1 at the horizon
    if bg.charged:
        obs["mu"] = st["mu"] / T
        obs["charge"] = st["charge"] / T**2
    # certificate
    trace = -st["energy"] + st["p_x"] + st["p_y"]
    # (d - Delta_I) is the dimension of the source
    ward_rhs = sum(sd * j * o for (_, sd), j, o in zip(bg._dims(), st["sources"], st["vevs"]))
    if bg.quantization == "mixed":
        ward_rhs = np.nan  # the multi-trace term changes the trace identity (not checked)
    homogeneous_y = bg.n_axions == 0
    obs.update({
        "residual": float(sol.residual),
        "tail": float(max(sol.tail.values())),
        "ward_trace": float(abs(trace - ward_rhs) / scale),
        "thermo": float(abs(st["energy"] + st["p_y"] - T * s - st["mu"] * st["charge"]) / scale)
        if homogeneous_y else np.nan,
        "py_f": float(abs(st["p_y"] + f_thermo) / scale) if homogeneous_y else np.nan,
        "action": float(abs(f_action - f_thermo) / scale) if np.isfinite(f_action) else np.nan,
        "deturck": deturck,
        "constraint": constraint,
        "temperature": float(abs(T_sol / T - 1)),
    })
    if getattr(bg, "component_quantization", None):
        obs.update(_split_profiles(bg, st, T))
    return obs


def _split_profiles(bg, st, T, npts=16):
    """x-profiles over one period when the two Q-lattice components are quantised differently.

    Component 1 (cos kx) standard, component 2 (sin kx) alternative: the Legendre term of
    component 2 adds ``-lambda rho_2 sin^2(kx)`` to <T_ij> (docs section b).
    """
    lam, rho2 = st["lams"][0], st["rho2s"][0]
    # the bulk is the standard-quantised Q-lattice; undo a global shift if any
    e0, px0, py0 = st["energy"] - st["shift"], st["p_x"] + st["shift"], st["p_y"] + st["shift"]
    kx = np.linspace(0, 2 * np.pi, npts, endpoint=False)
    s2 = np.sin(kx) ** 2
    out = {
        "x_phase": kx,
        "energy_profile": (e0 + lam * rho2 * s2) / T**3,
        "p_x_profile": (px0 - lam * rho2 * s2) / T**3,
        "p_y_profile": (py0 - lam * rho2 * s2) / T**3,
        "source1_profile": lam * np.cos(kx) / T,
        "source2_profile": rho2 * np.sin(kx) / T**2,
        "vev1_profile": rho2 * np.cos(kx) / T**2,
        "vev2_profile": -lam * np.sin(kx) / T,
    }
    out["energy_avg"] = float(out["energy_profile"].mean())
    out["p_x_avg"] = float(out["p_x_profile"].mean())
    out["p_y_avg"] = float(out["p_y_profile"].mean())
    # pointwise trace Ward identity: -e + p_x + p_y = sum (3 - Delta_I) src_I <O_I>
    lhs = -out["energy_profile"] + out["p_x_profile"] + out["p_y_profile"]
    rhs = 1 * out["source1_profile"] * out["vev1_profile"] + 2 * out["source2_profile"] * out["vev2_profile"]
    out["ward_trace_profile"] = float(np.max(np.abs(lhs - rhs)) / max(1.0, np.abs(out["energy_profile"]).max()))
    return out
