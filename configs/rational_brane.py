"""Demo model of our own with a rational falloff: Delta_- = 5/4, Delta_+ = 7/4 (m^2 = -35/16).

    V(rho) = -6 - (35/32) rho^2 + 0.15 rho^4,     Phi(rho) = rho^2 + rho^4/5

The potential is even, so the brane is solved in u = z^(1/2); its stress tensor comes from
T s, the trace Ward identity and the radial anisotropy integral, and the renormalised
Euclidean action certifies it (README, "Limitations").
"""


def potential(rho):
    return -6 - 35 / 32 * rho**2 + 0.15 * rho**4


def phase_metric(rho):
    return rho**2 + rho**4 / 5
