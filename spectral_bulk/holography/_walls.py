"""Observables and infrared classification of zero-temperature walls (d = 3).

Stress tensor (docs/physics/domain_walls.md sections 2.2-2.3): boost invariance gives
``p_y = -energy``; the exact first integral of the xx - tt equations gives the anisotropy

    J = <T_xx> - <T_yy> = k^2 int_0^Z rho^2 e^{a - b/2} dz / z^2 (FG, k = 1 units),

a well-conditioned integral; with the trace Ward identity ``-energy + p_x + p_y = lam <O>``
this fixes ``energy = (J - lam <O>)/3``.  The Taylor route (third coefficients of ``e^a``,
``e^b`` at the boundary, on a local affine resampling) is computed too, and the
difference of the two routes is reported (``energy_routes``).  The first law
``d energy/d lam = -<O>`` is checked along families.

Infrared classification: along the flow (log z grid) the local exponents
``s_A = d A/dr``, ``s_B = d B/dr`` (``e^{2A} = e^a/z^2``, ``e^{2B} = e^b/z^2``,
``r = -log z``) and ``rho`` are compared with the fixed points of the model: AdS4 critical
points of V (``s_A = s_B = 1/L``, ``rho = rho*``) and AdS3 x R scaling solutions
(``rho`` const with ``V'/V = Phi'/(2 Phi)``, ``s_A = sqrt(-V/4)``, ``s_B = 0``).  Ranges
within tolerance are regimes, with their extent in e-folds.
"""

import math

import numpy as np

from ..grids import Chebyshev

__all__ = ["wall_observables", "wall_profile", "fixed_points", "classify_flow", "ir_events",
           "domain_wall_observables", "local_taylor", "critical_coupling_estimate", "WALL_CERTIFICATE"]

#: Tolerances of the regime detection (slopes, and scalar relative to max(1, rho*)).
SLOPE_TOL = 0.05
RHO_TOL = 0.05


def local_taylor(sol, field, z1, order=3, n_loc=24, scale=None):
    """Taylor coefficients in z at z = 0 of a field, from an affine resampling on [0, z1].

    ``scale`` converts the grid coordinate into z (``z = scale * s``).
    """
    from numpy.polynomial import chebyshev as npcheb

    basis = sol.grid.axes[0]
    loc = Chebyshev(n_loc, (0.0, z1))
    coord = loc.points / (scale or 1.0)
    vals = basis.interp(sol.fields[field], coord)
    c = loc.coeffs(vals)
    big = np.abs(c).max()
    keep = np.nonzero(np.abs(c) > 2e-16 * max(big, 1e-300))[0]
    c = c[: (keep[-1] + 2) if keep.size else 1]
    out = [float(npcheb.chebval(-1.0, c))]
    d, fact = c, 1.0
    for k in range(1, order + 1):
        fact *= k
        d = npcheb.chebder(d) if d.size > 1 else np.zeros(1)
        out.append(float(npcheb.chebval(-1.0, d)) * (2.0 / z1) ** k / fact)
    return np.array(out)


def _exp_taylor(a):
    """Taylor coefficients of exp(a(z)) from those of a (to third order)."""
    a0, a1, a2, a3 = a
    e = math.exp(a0)
    return np.array([e, e * a1, e * (a2 + a1**2 / 2), e * (a3 + a1 * a2 + a1**3 / 6)])


def fixed_points(model, k=1.0):
    """AdS4 critical points of V and AdS3 x R scaling points of a Q-lattice model.

    Computed once per model (cached on the model object).
    """
    cached = getattr(model, "_fixed_points_cache", None)
    if cached is not None:
        return cached
    out = _fixed_points(model)
    model._fixed_points_cache = out
    return out


def _fixed_points(model):
    from scipy.optimize import brentq

    from ..gravity import derivative
    from ..models import critical_points

    V = model.potential
    out = []
    for p in critical_points(V, rho_max=12.0):
        if p["V"] < 0:
            name = "UV AdS4" if p["rho"] == 0 else f"AdS4 (rho={p['rho']:.4g}, L={p['L']:.4g})"
            out.append({"kind": "ads4", "name": name, "rho": p["rho"], "sA": 1 / p["L"],
                        "sB": 1 / p["L"], "L": p["L"]})
    Phi = getattr(model, "phase_metric", None)
    if Phi is not None:
        def g(r):
            v, dv = derivative(V, r)
            ph, dph = derivative(Phi, r)
            return float(np.real(dv * 2 * ph - v * dph))
        grid = np.linspace(1e-3, 12.0, 2400)
        vals = [g(r) for r in grid]
        for x0, x1, f0, f1 in zip(grid[:-1], grid[1:], vals[:-1], vals[1:]):
            if f0 * f1 < 0:
                r = brentq(g, x0, x1, xtol=1e-14)
                v = float(np.real(V(r)))
                K = -v / float(np.real(Phi(r)))
                if v < 0 and K > 0:
                    out.append({"kind": "ads3xr", "name": f"AdS3xR (rho={r:.4g})", "rho": r,
                                "sA": math.sqrt(-v / 4), "sB": 0.0, "K": K})
    return out


def wall_profile(bg, sol, npts=400):
    """Profiles on a log grid in z: z, r, rho, s_A, s_B (dict of arrays)."""
    basis = sol.grid.axes[0]
    Z = float(np.exp(sol.fields["lz"][0]))
    lam = abs(bg.source_of(sol)) or 1.0
    zmin = 1e-3 / max(1.0, lam)
    z = np.geomspace(zmin, Z * (1 - 1e-9), npts)
    s = z / Z
    D = basis.diff_matrices(1)[0]
    P = basis.interp_matrix(s)
    a, b, psi = (P @ sol.fields[f] for f in ("a", "b", "psi"))
    sa = P @ (D @ sol.fields["a"])
    sb = P @ (D @ sol.fields["b"])
    spsi = P @ (D @ sol.fields["psi"])  # s d psi/ds = z d psi/dz
    return {"z": z, "r": -np.log(z), "rho": z * psi, "sA": 1 - 0.5 * s * sa, "sB": 1 - 0.5 * s * sb,
            "a": a, "b": b, "z_drho": z * psi + z * s * spsi}


def classify_flow(profile, points, slope_tol=SLOPE_TOL, rho_tol=RHO_TOL):
    """Regimes of a flow near fixed points.

    Returns
    -------
    dict with ``regimes`` (list of (index, name, z_start, z_end, efolds)), ``ir`` (index of
    the point matched at the IR end or -1), ``returns_to_uv`` (bool), ``intermediate``
    (index of the longest non-UV regime before the IR end, or -1) and its ``efolds``.
    """
    z, rho, sA, sB = profile["z"], profile["rho"], profile["sA"], profile["sB"]
    regimes = []
    match = np.full(z.size, -1)
    for i, p in enumerate(points):
        ok = ((np.abs(sA - p["sA"]) < slope_tol) & (np.abs(sB - p["sB"]) < slope_tol)
              & (np.abs(np.abs(rho) - p["rho"]) < rho_tol * max(1.0, p["rho"])))
        match[ok & (match < 0)] = i
    # contiguous runs
    start = 0
    for j in range(1, z.size + 1):
        if j == z.size or match[j] != match[start]:
            if match[start] >= 0:
                efolds = math.log(z[j - 1] / z[start]) if j - 1 > start else 0.0
                regimes.append((int(match[start]), points[match[start]]["name"], float(z[start]),
                                float(z[j - 1]), efolds))
            start = j
    ir = int(match[-1])
    uv = next((i for i, p in enumerate(points) if p["kind"] == "ads4" and p["rho"] == 0), -1)
    inter = [r for r in regimes if r[0] != uv and r[3] < z[-1] * 0.999]
    if ir >= 0 and ir != uv:
        inter = [r for r in regimes if r[0] != uv and r[0] != ir] + inter
    best = max(inter, key=lambda r: r[4]) if inter else None
    return {"regimes": regimes, "ir": ir, "returns_to_uv": ir == uv and ir >= 0,
            "intermediate": best[0] if best else -1, "efolds": best[4] if best else 0.0}


def wall_observables(bg, sol):
    """Observables of a Q-lattice wall in units of k (k = 1), with certificate and IR class."""
    basis = sol.grid.axes[0]
    Z = float(np.exp(sol.fields["lz"][0]))
    lam_in = float(bg.source_of(sol))
    a_ir, b_ir = float(sol.fields["a"][-1]), float(sol.fields["b"][-1])
    n = math.exp((b_ir - a_ir) / 2)
    lam_scale = max(1.0, abs(lam_in))
    z1 = min(0.25, 0.25 / lam_scale)
    psi = local_taylor(sol, "psi", z1, order=1, scale=Z)
    lam, rho2 = psi[0], psi[1]
    if bg.quantization == "standard":
        source, vev, lam_rho2 = lam, rho2, lam * rho2
    else:
        source, vev, lam_rho2 = rho2, -lam, lam * rho2
    # anisotropy integral J = int psi^2 e^{a - b/2} dz (k = 1)
    w = basis.weights * Z
    J = float(np.sum(w * sol.fields["psi"] ** 2 * np.exp(sol.fields["a"] - sol.fields["b"] / 2)))
    # trace Ward identity with p_y = -energy (standard); alternative: T^i_j - lam rho_2 delta
    energy = (J - lam_rho2) / 3 + (lam_rho2 if bg.quantization == "alternative" else 0.0)
    p_y = -energy
    p_x = J + p_y
    # Taylor route
    A = _exp_taylor(local_taylor(sol, "a", z1, scale=Z))
    B = _exp_taylor(local_taylor(sol, "b", z1, scale=Z))
    l3 = lambda X: X[3] / X[0] - (X[1] / X[0]) * (X[2] / X[0]) + (X[1] / X[0]) ** 3 / 3  # noqa: E731
    e_taylor = -3 * l3(A) - lam * rho2 + (lam_rho2 if bg.quantization == "alternative" else 0.0)
    anis_taylor = 3 * (l3(B) - l3(A))
    scale = max(1e-300, abs(energy), abs(J), abs(lam_rho2))
    # constraint E^z_z at interior points, relative to the size of its terms
    from ..gravity import Series

    D = basis.diff_matrices(2)
    s = basis.points[1:-1]
    fs = {f: Series(np.stack([v, D[0] @ v, (D[1] @ v) / 2])[:, 1:-1], 0)
          for f, v in ((f, sol.fields[f]) for f in bg.fields)}
    from ..gravity import coordinate_series

    out = bg.evaluate(coordinate_series(s), fs, sol.params)
    ezz = np.abs(out["E"][(1, 1)].coefficient(0))
    vterm = np.abs(np.real(out["V"].coefficient(0) if hasattr(out["V"], "coefficient") else out["V"]))
    constraint = float(np.max(ezz / np.maximum(vterm, 1.0)))
    prof = wall_profile(bg, sol)
    pts = fixed_points(bg.model)
    cls = classify_flow(prof, pts)
    obs = {
        "n": n,
        "source": float(source),
        "vev": float(vev),
        "energy": float(energy),
        "p_x": float(p_x),
        "p_y": float(p_y),
        "anisotropy_J": J,
        "ir_point": cls["ir"],
        "returns_to_uv": int(cls["returns_to_uv"]),
        "intermediate_point": cls["intermediate"],
        "intermediate_efolds": cls["efolds"],
        "cutoff_z": Z,
        "residual": float(sol.residual),
        "tail": float(max(sol.tail.values())),
        "constraint": constraint,
        "cutoff": abs(float(sol.fields["psi"][-1])) * Z,
        # informative: the Taylor route needs third boundary derivatives of a resampled
        # solution and is far less accurate than the integral route used above
        "anisotropy_taylor": abs(anis_taylor - J) / scale,
        "energy_taylor": abs(e_taylor - energy) / scale,
        "regimes": [r[1] + f" [{r[2]:.3g}, {r[3]:.3g}] {r[4]:.2f} e-folds" for r in cls["regimes"]],
        "fixed_points": [p["name"] for p in pts],
    }
    return obs


#: Certificate thresholds of walls (the constraint is relative to the potential term).
WALL_CERTIFICATE = {"constraint": 1e-6, "cutoff": 1e-6}


def critical_coupling_estimate(lam, n, last=8):
    """Fit ``n = C (lam_c - lam)^(-nu)`` to the last points of a diverging family.

    Returns ``(lam_c, nu, C, rms)`` or None when there are too few points or ``n`` does
    not grow; ``rms`` is the root-mean-square residual of ``log n``.
    """
    from scipy.optimize import minimize_scalar

    lam = np.asarray(lam, dtype=float)[-last:]
    logn = np.log(np.asarray(n, dtype=float)[-last:])
    if lam.size < 4 or not np.all(np.diff(lam) > 0) or logn[-1] - logn[0] < 1.0:
        return None

    def fit(lc):
        X = np.stack([np.ones_like(lam), -np.log(lc - lam)], axis=1)
        coef, *_ = np.linalg.lstsq(X, logn, rcond=None)
        return coef, float(np.sqrt(np.mean((X @ coef - logn) ** 2)))

    span = lam[-1] - lam[0]
    res = minimize_scalar(lambda t: fit(lam[-1] + np.exp(t))[1],
                          bounds=(np.log(1e-9 * max(1.0, span)), np.log(10 * span + 1e-9)),
                          method="bounded", options={"xatol": 1e-10})
    lc = lam[-1] + np.exp(res.x)
    coef, rms = fit(lc)
    return float(lc), float(coef[1]), float(np.exp(coef[0])), rms


def ir_events(ds):
    """Mark neighbouring points whose infrared classification differs (``ir_change``)."""
    if "ir_point" not in ds:
        return ds
    keys = [k for k in ("ir_point", "returns_to_uv", "intermediate_point") if k in ds]
    vals = np.stack([ds[k].values for k in keys], axis=1)
    change = np.zeros(ds.sizes["point"], dtype=np.int64)
    change[1:] = np.any(vals[1:] != vals[:-1], axis=1)
    ds["ir_change"] = ("point", change, {"long_name": "infrared classification differs from the previous point"})
    return ds


def domain_wall_observables(bg, sol):
    """Homogeneous wall: source, vev, IR fixed point data and the metric profile."""
    if not getattr(sol, "regular", True):
        return {"regular": 0}
    basis = sol.grid.axes[0]
    lam = float(sol.params["lam"])
    psi = local_taylor(sol, "psi", min(0.25, 0.25 / max(1.0, abs(lam))), order=1)
    return {"regular": 1, "source": psi[0], "vev": psi[1], "rho_ir": float(sol.ir["rho"]),
            "L_ir": float(sol.ir["L"]), "Delta_ir": float(sol.ir["Delta"]),
            "residual": float(sol.residual), "tail": float(max(sol.tail.values())),
            "cutoff_z": float(basis.domain[1])}
