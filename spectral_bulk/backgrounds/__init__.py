"""Backgrounds: ansatz and boundary conditions for branes and walls.

``BlackBrane``     homogeneous black brane of a BulkModel (charged if the model has a U(1))
``QLatticeBrane``  Q-lattice black brane (lam = lambda/T^{d-Delta}, k = k/T)
``AxionBrane``     black brane with linear axions (alpha = alpha/T), Einstein-Maxwell by default
``BraneSolution``  a solution with its observables and certificate
"""

from ._brane import AxionBrane, BlackBrane, Brane, BraneSolution, QLatticeBrane

__all__ = ["Brane", "BlackBrane", "QLatticeBrane", "AxionBrane", "BraneSolution"]
