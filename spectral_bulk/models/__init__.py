"""Bulk theories written by the user as a few Python functions.

``BulkModel``      Einstein gravity + scalars (sigma model), optional U(1) field and axions
``QLatticeModel``  a scalar pair with a U(1) isometry: V(rho), Phi(rho), phase k x
``ScalarData``     UV mass, dimensions and allowed quantisations of one scalar
``critical_points`` critical points of V(rho) (fixed points of flows)
``builtin``        small library of models of our own (by name)
"""

from ._builtin import BUILTIN, builtin
from ._models import BulkModel, QLatticeModel, ScalarData, critical_points

__all__ = ["BulkModel", "QLatticeModel", "ScalarData", "critical_points", "builtin", "BUILTIN"]
