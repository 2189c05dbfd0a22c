"""Einstein-DeTurck and matter equations evaluated pointwise on series.

The field equations of the action (L = 1, 16 pi G = 1, D = d + 1)

    sqrt(-g) [ R - 1/2 G_IJ dphi^I.dphi^J - 1/2 Phi(rho) (d theta)^2 - V - 1/4 Z F^2
               - 1/2 sum_a (d psi_a)^2 ]

in trace-reversed form, with the DeTurck term (common practice; "Numerical methods
for finding stationary gravitational solutions", arXiv:1508.01863) are

    E_mn = R_mn - nabla_(m xi_n) - Ttilde_mn = 0,
    Ttilde_mn = 1/2 G_IJ d_m phi^I d_n phi^J + 1/2 Phi d_m theta d_n theta
                + 1/2 sum_a d_m psi_a d_n psi_a + V g_mn / (D - 2)
                + 1/2 Z (F_ml F_n^l - g_mn F^2 / (2 (D - 2))),

    E_I = G_IJ box phi^J + d_K G_IJ (dphi^K . dphi^J) - 1/2 d_I G_JK (dphi^J . dphi^K)
          - d_I V - 1/2 d_I Phi (d theta)^2 - 1/4 d_I Z F^2 = 0,

    E_A = d_r ( sqrt(-g) Z F^{r t} ) = 0     (electric potential A_t(r)).

Solutions with ``xi = 0`` solve the Einstein equations; the DeTurck norm
``xi^m xi_m`` is reported as part of the certificate.  Everything here is
model-agnostic: the model supplies V, G_IJ, Phi and Z as functions, which are
differentiated with dual numbers.
"""

import itertools

import numpy as np

from ._geometry import Geometry, ScalarField, _is_zero, _mul, dependent_coordinates, tensor_sum

__all__ = ["MatterContent", "einstein_deturck"]


class MatterContent:
    """Matter fields at a point set, as series in the radial offset.

    Attributes
    ----------
    scalars : list of Series
        Radial scalars ``phi^I``.
    phase : (Series, dict) or None
        ``(Phi(rho) evaluated, gradient dict)`` of a Q-lattice phase ``theta = k x``.
    axions : list of dict
        Constant gradients of the axions, e.g. ``[{2: alpha}, {3: alpha}]``.
    at : Series or None
        Electric potential ``A_t``.
    """

    def __init__(self, scalars=(), phase=None, axions=(), at=None):
        self.scalars = list(scalars)
        self.phase = phase
        self.axions = list(axions)
        self.at = at


def _covector(field, D, radial):
    return {m: field.grad(m, radial) for m in range(D) if not _is_zero(field.grad(m, radial))}


def einstein_deturck(metric, reference, model, matter, radial=1, dim=None, dependent=None):
    """Evaluate the equations of motion for a metric depending on one coordinate (or several).

    Parameters
    ----------
    metric, reference : dict of (int, int) -> Series
        Components (``mu <= nu``) of the metric and of the DeTurck reference metric;
        ``reference=None`` gives the plain Einstein equations (for ansaetze whose
        gauge is fixed algebraically).
    model : BulkModel
        Supplies ``V``, ``G``, ``dV``, ``dG``, ``Z``, ``dZ`` and (Q-lattice) ``Phi``, ``dPhi``.
    matter : MatterContent
    radial : int
        Index of the radial coordinate.
    dim : int, optional
        Spacetime dimension (default ``model.d + 1``).
    dependent : tuple of int, optional
        Coordinates the fields depend on: by default those of the :class:`Jet` values
        among them, else ``(radial,)`` (values are :class:`Series`); with several, the
        Maxwell field must be absent.

    Returns
    -------
    dict with
        ``"E"``: mixed components ``E^mu_nu`` (dict), ``"scalar"``: list of scalar
        equations, ``"maxwell"``: the ``A_t`` equation (or None), ``"xi2"``:
        the DeTurck norm ``xi^mu xi_mu``, ``"geometry"``: the :class:`Geometry`.
    """
    D = dim or model.d + 1
    dependent = dependent_coordinates(list(metric.values()) + list(matter.scalars)
                                      + ([matter.at] if matter.at is not None else []), radial, dependent)
    if matter.at is not None and dependent != (radial,):
        raise NotImplementedError("the Maxwell equation is implemented for A_t depending on the "
                                  "radial coordinate only")
    geo = Geometry(metric, D, radial, dependent)
    ric = geo.ricci
    if reference is None:  # plain Einstein equations (gauge fixed by the ansatz)
        xi_up, sym = {}, {}
    else:
        xi_up, sym = geo.deturck(Geometry(reference, D, radial, dependent))
    phis = [ScalarField(s) for s in matter.scalars]
    grads = [_covector(f, D, radial) for f in phis]
    V = model.V(*matter.scalars)
    G = model.G(*matter.scalars)
    # matter tensor Ttilde_{mn}
    T = {}
    n_sc = len(phis)

    def add(key, val):
        if _is_zero(val):
            return
        T[key] = val if key not in T else T[key] + val

    for m, n in itertools.combinations_with_replacement(range(D), 2):
        for I, J in itertools.product(range(n_sc), repeat=2):
            gij = G[I][J]
            if _is_zero(gij):
                continue
            add((m, n), 0.5 * _mul(gij, _mul(grads[I].get(m, 0), grads[J].get(n, 0))))
        if matter.phase is not None:
            Phi, th = matter.phase
            add((m, n), 0.5 * _mul(Phi, _mul(th.get(m, 0), th.get(n, 0))))
        for ax in matter.axions:
            add((m, n), 0.5 * _mul(ax.get(m, 0), ax.get(n, 0)))
        gmn = geo.comp(m, n)
        if not _is_zero(gmn):
            add((m, n), _mul(V, gmn) * (1.0 / (D - 2)))
    F2 = 0
    Fdn = {}
    if matter.at is not None:
        at_field = ScalarField(matter.at)
        dat = at_field.grad(radial, radial)
        # F_{r t} = d_r A_t,  F_{t r} = -d_r A_t
        Fdn = {(radial, 0): dat, (0, radial): -1 * dat}
        Z = model.Z(*matter.scalars)
        F2 = tensor_sum(_mul(geo.inv(a, c), _mul(geo.inv(b, e), _mul(Fdn.get((a, b), 0), Fdn.get((c, e), 0))))
                        for a, b, c, e in itertools.product(range(D), repeat=4)
                        if (a, b) in Fdn and (c, e) in Fdn)
        for m, n in itertools.combinations_with_replacement(range(D), 2):
            FF = tensor_sum(_mul(geo.inv(l, s), _mul(Fdn.get((m, l), 0), Fdn.get((n, s), 0)))
                            for l in range(D) for s in range(D))
            gmn = geo.comp(m, n)
            val = tensor_sum([FF, -1 * _mul(gmn, F2) * (1.0 / (2 * (D - 2))) if not _is_zero(gmn) else 0])
            add((m, n), 0.5 * _mul(Z, val))
    E = {}
    for m, n in itertools.combinations_with_replacement(range(D), 2):
        terms = [ric.get((m, n), 0)]
        if (m, n) in sym:
            terms.append(-1 * sym[(m, n)])
        if (m, n) in T:
            terms.append(-1 * T[(m, n)])
        v = tensor_sum(terms)
        if not _is_zero(v):
            E[(m, n)] = v
    Emixed = geo.raise_first(E)
    # scalar equations
    scal = []
    if n_sc:
        dV = model.dV(*matter.scalars)
        dG = model.dG(*matter.scalars)
        boxes = [geo.box(f) for f in phis]
        dots = [[geo.dot(grads[a], grads[b]) for b in range(n_sc)] for a in range(n_sc)]
        for I in range(n_sc):
            terms = [_mul(G[I][J], boxes[J]) for J in range(n_sc)]
            for K, J in itertools.product(range(n_sc), repeat=2):
                terms.append(_mul(dG[K][I][J], dots[K][J]))
                t = _mul(dG[I][J][K], dots[J][K])
                if not _is_zero(t):
                    terms.append(-0.5 * t)
            terms.append(-1 * dV[I])
            if matter.phase is not None and hasattr(model, "dPhi"):
                th = matter.phase[1]
                dPhi = model.dPhi(matter.scalars[0]) if I == 0 else 0
                t = _mul(dPhi, geo.dot(th, th))
                if not _is_zero(t):
                    terms.append(-0.5 * t)
            if matter.at is not None:
                dZ = model.dZ(*matter.scalars)[I]
                t = _mul(dZ, F2)
                if not _is_zero(t):
                    terms.append(-0.25 * t)
            scal.append(tensor_sum(terms))
    maxwell = None
    if matter.at is not None:
        # d_r ( sqrt(-g) Z g^{rr} g^{tt} F_{rt} ), for a diagonal metric
        detg = 1
        for m in range(D):
            detg = _mul(detg, geo.comp(m, m))
        sqrtg = np.sqrt(-1 * detg)
        Z = model.Z(*matter.scalars)
        flux = _mul(_mul(sqrtg, Z), _mul(geo.inv(radial, radial), _mul(geo.inv(0, 0), Fdn[(radial, 0)])))
        maxwell = flux.derivative() if hasattr(flux, "derivative") else 0
    xi_dn = {m: tensor_sum(_mul(geo.comp(m, n), xi_up.get(n, 0)) for n in range(D)) for m in range(D)}
    xi2 = tensor_sum(_mul(xi_up.get(m, 0), xi_dn.get(m, 0)) for m in range(D))
    return {"E": Emixed, "scalar": scal, "maxwell": maxwell, "xi2": xi2, "geometry": geo, "V": V}

