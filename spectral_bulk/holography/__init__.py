"""Holographic renormalisation, observables and identities (d = 3).

``brane_observables``   stress tensor, vevs, charge, T, s, free energy (two routes), certificate
``taylor_at_boundary``  Taylor coefficients of a solution field at the boundary
``stress_from_identities``, ``anisotropy_integral``  second route to a brane's stress tensor
``CERTIFICATE_KEYS``    names of the certificate entries
``first_law_residuals`` the first law checked along a family
``wall_observables``    n, vevs, stress tensor and IR classification of T = 0 walls
``fixed_points``        AdS4 and AdS3 x R fixed points of a model (for the classification)
``classify_flow``       regimes of a flow near fixed points, with their extent in e-folds
"""

from ._branes import (
    BRANE_CERTIFICATE,
    CERTIFICATE_KEYS,
    anisotropy_integral,
    brane_observables,
    certificate_failures,
    stress_from_identities,
    taylor_at_boundary,
)
from ._identities import family_derivative, first_law_residuals
from ._walls import (
    WALL_CERTIFICATE,
    classify_flow,
    critical_coupling_estimate,
    domain_wall_observables,
    fixed_points,
    ir_events,
    local_taylor,
    wall_observables,
    wall_profile,
)

__all__ = ["brane_observables", "taylor_at_boundary", "CERTIFICATE_KEYS", "BRANE_CERTIFICATE",
           "certificate_failures", "first_law_residuals", "stress_from_identities",
           "anisotropy_integral",
           "family_derivative", "wall_observables", "wall_profile", "fixed_points", "classify_flow",
           "ir_events", "domain_wall_observables", "local_taylor", "critical_coupling_estimate",
           "WALL_CERTIFICATE"]
