"""Demo problem of our own: a reaction front in a slab with temperature-dependent conductivity.

    ((1 + 0.3 u) u')' + lam * exp(u / (1 + eps u)) = 0   on  [0, 1]
    u(0) = 0,  u'(1) + 2 u(1) = 0 (Robin: heat loss at the right wall)

An Arrhenius-type source with a bounded exponent; the family in ``lam`` has a fold.
"""

import numpy as np

import spectral_bulk as sb


def equations(c, f, p):
    return (1 + 0.3 * f.u) * f.u_xx + 0.3 * f.u_x**2 + p.lam * np.exp(f.u / (1 + p.eps * f.u))


def build(n=32):
    grid = sb.Chebyshev(n, domain=(0.0, 1.0), name="x")
    problem = sb.Problem(
        grid,
        fields=["u"],
        equations=equations,
        boundary={"x=0": lambda c, f, p: [f.u], "x=1": lambda c, f, p: [f.u_x + 2 * f.u]},
        params={"lam": 1.0, "eps": 0.05},
        name="gel_front",
    )
    return {"problem": problem, "guess": lambda x: 0 * x, "params": {"lam": 1.0},
            "observables": observables}


def observables(solution):
    """Peak temperature and the heat flux through the right wall."""
    u = solution.fields["u"]
    return {"u_max": float(u.max()), "flux_right": float(-solution.derivative("u", (1,))[-1])}
