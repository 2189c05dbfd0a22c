"""Reference problems with exact solutions, shared by the tests.

Each entry gives the residual, the boundary conditions, the exact solution and
its source.  Residuals are written complex-safe.
"""

import importlib.util
import os

import numpy as np
from scipy.optimize import brentq


def load_reference(name):
    """A module of ``tests/reference/`` (independent references: scipy only, never the package)."""
    path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "reference", name + ".py")
    spec = importlib.util.spec_from_file_location(name, path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def dirichlet_zero(c, f, p):
    return [f.u]


# --- u_xx = exp(4x), u(-1) = u(1) = 0 -----------------------------------------
# "Spectral Methods in MATLAB", SIAM (2000), Program 13: exact solution
# u = (exp(4x) - x sinh(4) - cosh(4)) / 16.
def program13_equations(c, f, p):
    return f.u_xx - np.exp(4 * c.x)


def program13_exact(x):
    return (np.exp(4 * x) - x * np.sinh(4) - np.cosh(4)) / 16


# --- Bratu: u'' + lam e^u = 0 on [0, 1], u(0) = u(1) = 0 -------------------------
# Classical Gelfand-Bratu problem (common practice): u = -2 log(cosh((x - 1/2) th/2) / cosh(th/4))
# with th solving th = sqrt(2 lam) cosh(th/4); two roots below the fold, none above.
BRATU_FOLD = 3.513830719125162  # lam_c where the two roots merge (recomputed in the tests)


def bratu_equations(c, f, p):
    return f.u_xx + p.lam * np.exp(f.u)


def bratu_theta(lam, branch="lower"):
    """Root of th = sqrt(2 lam) cosh(th/4) on the lower or upper branch (brentq)."""
    g = lambda th: th - np.sqrt(2 * lam) * np.cosh(th / 4)  # noqa: E731
    th_c = bratu_theta_fold()
    if branch == "lower":
        return brentq(g, 0.0, th_c)
    return brentq(g, th_c, 50.0)


def bratu_theta_fold():
    """The fold: th/4 tanh(th/4) = 1 (tangency of both sides of th = sqrt(2 lam) cosh(th/4))."""
    s = brentq(lambda y: y * np.tanh(y) - 1, 0.5, 2.0)
    return 4 * s


def bratu_lambda_fold():
    th = bratu_theta_fold()
    return th**2 / (2 * np.cosh(th / 4) ** 2)


def bratu_exact(x, lam, branch="lower"):
    th = bratu_theta(lam, branch)
    return -2 * np.log(np.cosh((x - 0.5) * th / 2) / np.cosh(th / 4))


# --- thin interior layer: u'' - u^3 = g(x) with exact u = tanh((x - x0)/w) ----------
# Manufactured solution (common practice); -u'' + u^3 is monotone, so the solution is
# unique and well conditioned (a translation-invariant kink would not be).
LAYER_X0 = 0.3


def layer_exact(x, w):
    return np.tanh((x - LAYER_X0) / w)


def layer_equations(c, f, p):
    t = layer_exact(c.x, p.w)
    g = -2 / p.w**2 * t * (1 - t**2) - t**3
    return f.u_xx - f.u**3 - g
