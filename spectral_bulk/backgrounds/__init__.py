"""Backgrounds: ansatz and boundary conditions for branes and walls.

``BlackBrane``     homogeneous black brane of a BulkModel (charged if the model has a U(1))
``QLatticeBrane``  Q-lattice black brane (lam = lambda/T^{d-Delta}, k = k/T)
``AxionBrane``     black brane with linear axions (alpha = alpha/T), Einstein-Maxwell by default
``BraneSolution``  a solution with its observables and certificate
``QLatticeWall``   zero-temperature Q-lattice domain wall (lam = lambda/k^{d-Delta}); n, IR class
``DomainWall``     homogeneous (k = 0) flow: to an IR fixed point, or reported singular
"""

from ._brane import AxionBrane, BlackBrane, Brane, BraneSolution, QLatticeBrane
from ._wall import DomainWall, QLatticeWall, WallSolution

__all__ = ["Brane", "BlackBrane", "QLatticeBrane", "AxionBrane", "BraneSolution", "QLatticeWall",
           "DomainWall", "WallSolution"]
