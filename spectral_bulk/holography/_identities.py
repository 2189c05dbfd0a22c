"""Thermodynamic identities checked along a family (first law in units of T).

With ``phi = f/T^3`` a function of the dimensionless parameters, the first law at
fixed T gives (docs/physics/black_branes.md, section c; common practice):

    <O>/T^Delta = -d phi / d(source/T^{d-Delta})       (family in a source)
    rho/T^2     = -d phi / d(mu/T)                      (family in mu)
    (k/T) d phi / d(k/T) = p_x/T^3 + phi                (lattice wavenumber)
    (alpha/T) d phi / d(alpha/T) = 2 (p_x/T^3 + phi)    (linear axions)

The derivative along the family comes from the Lagrange interpolant through the
five nearest points (exact for quartics), so the residual measures both the
solutions and the spacing of the points; it is reported, per point, as a
relative residual.
"""

import numpy as np

__all__ = ["first_law_residuals", "family_derivative"]


def family_derivative(x, y, width=5):
    """dy/dx at each point from the Lagrange interpolant through ``width`` nearest points."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    n = len(x)
    out = np.full(n, np.nan)
    if n < 3:
        return out
    w = min(width, n)
    for i in range(n):
        lo = min(max(0, i - w // 2), n - w)
        idx = np.arange(lo, lo + w)
        xs, ys = x[idx], y[idx]
        if len(np.unique(xs)) < len(xs):
            continue
        # derivative of the Lagrange interpolant at x[i]
        d = 0.0
        for a in range(w):
            others = [b for b in range(w) if b != a]
            den = np.prod([xs[a] - xs[b] for b in others])
            s = 0.0
            for c in others:
                s += np.prod([x[i] - xs[b] for b in others if b != c])
            d += ys[a] * s / den
        out[i] = d
    return out


def first_law_residuals(param, values, obs):
    """Per-point first-law residual along a family, or None when no identity applies.

    Parameters
    ----------
    param : str
        The family parameter (``lam``/``lam_<s>``, ``mu``, ``k``, ``alpha``).
    values : ndarray
        Parameter values along the family.
    obs : dict of str -> ndarray
        Observables along the family (``f``, ``vev``, ``charge``, ``p_x``).
    """
    f = np.asarray(obs["f"], dtype=float)
    x = np.asarray(values, dtype=float)
    dphi = family_derivative(x, f)
    scale = max(1.0, np.nanmax(np.abs(f)))
    if param.startswith("lam"):
        key = "vev" + param[3:]
        lhs, rhs = obs[key], -dphi
    elif param == "mu":
        lhs, rhs = obs["charge"], -dphi
    elif param == "k":
        lhs, rhs = x * dphi, np.asarray(obs["p_x"]) + f
    elif param == "alpha":
        lhs, rhs = x * dphi, 2 * (np.asarray(obs["p_x"]) + f)
    else:
        return None
    return np.abs(np.asarray(lhs) - rhs) / scale
