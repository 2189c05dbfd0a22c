"""Holographic renormalisation, observables and identities (d = 3).

``brane_observables``   stress tensor, vevs, charge, T, s, free energy (two routes), certificate
``taylor_at_boundary``  Taylor coefficients of a solution field at the boundary
``CERTIFICATE_KEYS``    names of the certificate entries
``first_law_residuals`` the first law checked along a family
"""

from ._branes import CERTIFICATE_KEYS, brane_observables, taylor_at_boundary
from ._identities import family_derivative, first_law_residuals

__all__ = ["brane_observables", "taylor_at_boundary", "CERTIFICATE_KEYS", "first_law_residuals",
           "family_derivative"]
