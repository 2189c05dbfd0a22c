"""A small library of models of our own, addressable by name from configs.

* ``"mass2"``: V = -6 - rho^2, Phi = rho^2 (a complex scalar of m^2 = -2; Delta = 2 or 1).
* ``"quartic_well"``: V = -6 - rho^2 + rho^4, Phi = rho^2 (a second critical point of V at
  rho^2 = 1/2: an AdS4 of radius 0.9798 where the scalar is irrelevant, so homogeneous
  flows end there and large-coupling lattice walls linger near it before returning to the
  UV fixed point in the infrared).
* ``"cosh_phase"``: V = -6 - rho^2, Phi = 4 sinh(rho/2)^2 (a phase metric that grows faster
  than rho^2, still rho^2 near the origin).
* ``"einstein"``: pure gravity (a massless decoupled scalar that stays zero).
"""

import numpy as np

from ._models import BulkModel, QLatticeModel

__all__ = ["builtin", "BUILTIN"]


def _mass2(rho):
    return -6 - rho**2


def _quartic_well(rho):
    return -6 - rho**2 + rho**4


def _square(rho):
    return rho**2


def _cosh_phase(rho):
    return 4 * np.sinh(rho / 2) ** 2


BUILTIN = {
    "mass2": lambda: QLatticeModel(_mass2, _square, name="mass2"),
    "quartic_well": lambda: QLatticeModel(_quartic_well, _square, name="quartic_well"),
    "cosh_phase": lambda: QLatticeModel(_mass2, _cosh_phase, name="cosh_phase"),
    "einstein": lambda: BulkModel(lambda phi: -6 + 0 * phi, scalars=("phi",), name="einstein"),
}


def builtin(name):
    """A built-in model by name (see the module docstring)."""
    try:
        return BUILTIN[name]()
    except KeyError:
        raise KeyError(f"no built-in model {name!r}; choose from {', '.join(sorted(BUILTIN))}") from None
