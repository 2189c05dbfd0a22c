"""Pointwise curvature of a metric that depends on one coordinate, or on several.

The metric components are given as truncated series (:class:`Series`) in the
offset of the radial coordinate from the evaluation point, with the batch of
points (and complex-step perturbations) carried in the coefficients; constants
(numbers or arrays) are allowed and zero components are simply omitted.  All
tensors are sparse dicts keyed by index tuples, so a diagonal metric costs a
fraction of the dense formulas.

Components that depend on several coordinates (a periodic lattice: the radial one
and a boundary direction) are :class:`~spectral_bulk.gravity.Jet` values, truncated
Taylor polynomials in the offsets of those coordinates; ``dependent`` names the
coordinates and the same formulas take every partial derivative along them.

Formulas (common practice; e.g. "General Relativity", University of Chicago
Press (1984), chapter 3):

    Gamma_{s m n} = (d_m g_{s n} + d_n g_{s m} - d_s g_{m n}) / 2
    Gamma^l_{m n} = g^{l s} Gamma_{s m n}
    R_{m n} = d_l Gamma^l_{m n} - d_n Gamma^l_{m l}
              + Gamma^l_{l s} Gamma^s_{m n} - Gamma^l_{n s} Gamma^s_{m l}
    xi^m = g^{a b} (Gamma^m_{a b} - Gammabar^m_{a b})            (DeTurck vector)
    (nabla xi)_{(m n)} = (d_m xi_n + d_n xi_m)/2 - Gamma^l_{m n} xi_l

Metric components have non-zero derivatives along the ``dependent`` coordinates
only (by default the radial one); scalar fields may in addition depend linearly on
other coordinates (a Q-lattice phase ``k x``, axions ``alpha x``) through explicit
constant gradients.
"""

import itertools

import numpy as np

from ._jet import Jet
from ._series import Series

__all__ = ["Geometry", "ScalarField", "tensor_sum"]


def _is_zero(x):
    # hot path of the sparse tensor bookkeeping: avoid numpy calls for the common types
    t = type(x)
    if t is Series or t is Jet:
        return False
    if t is int or t is float:
        return x == 0
    if x is None:
        return True
    if isinstance(x, Series):
        return False
    if isinstance(x, (int, float)):
        return x == 0
    return np.ndim(x) == 0 and x == 0


def tensor_sum(terms):
    """Sum of terms skipping exact zeros (returns 0 for an empty sum)."""
    out = 0
    for t in terms:
        if _is_zero(t):
            continue
        out = t if _is_zero(out) else out + t
    return out


def _mul(a, b):
    if _is_zero(a) or _is_zero(b):
        return 0
    return a * b


def partial(x, mu, radial):
    """``d_mu x``: a :class:`Series` depends on the ``radial`` coordinate only, a value with a
    ``partial`` method (:class:`~spectral_bulk.gravity.Jet`) on its own coordinates, anything
    else (numbers, arrays) is a constant."""
    if type(x) is Series or isinstance(x, Series):
        return x.derivative() if mu == radial else 0
    p = getattr(x, "partial", None)
    return p(mu) if p is not None else 0


def dependent_coordinates(values, radial, dependent=None):
    """The coordinates ``values`` depend on: ``dependent`` when given (checked), else those of
    their :class:`~spectral_bulk.gravity.Jet` values, else ``(radial,)``.

    Raises
    ------
    ValueError
        A jet depends on a coordinate outside ``dependent`` (its derivatives along it would
        be dropped from the curvature).
    """
    axes = set()
    for v in values:
        if type(v) is Jet:
            axes.update(v.axes)
    if dependent is None:
        return tuple(sorted(axes)) if axes else (int(radial),)
    dependent = tuple(int(m) for m in dependent)
    missing = sorted(axes - set(dependent))
    if missing:
        raise ValueError(f"values depend on coordinate(s) {missing} that are not in dependent={dependent}")
    return dependent


class ScalarField:
    """A scalar field: its value (a series in the coordinate offsets) and extra gradients.

    Parameters
    ----------
    value : Series, Jet or array
        Profile (a :class:`Series` in the radial offset, or a
        :class:`~spectral_bulk.gravity.Jet` in the dependent coordinates) whose
        coefficients give the derivatives.
    gradient : dict of int -> float or array, optional
        Constant derivatives along other coordinates (e.g. ``{2: k}`` for a
        phase ``k x`` with ``x`` the coordinate of index 2).
    """

    def __init__(self, value, gradient=None):
        self.value = value
        self.extra = dict(gradient or {})

    def grad(self, mu, radial):
        d = partial(self.value, mu, radial)
        e = self.extra.get(mu, 0)
        if _is_zero(e):
            return d
        return e if _is_zero(d) else d + e

    def hess(self, mu, nu, radial):
        return partial(partial(self.value, mu, radial), nu, radial)


class Geometry:
    """Christoffel symbols, Ricci tensor and DeTurck terms of a radial metric.

    Parameters
    ----------
    metric : dict of (int, int) -> Series or array
        Components ``g_{mu nu}`` with ``mu <= nu`` (the lower triangle is filled
        by symmetry); absent components are zero.
    dim : int
        Spacetime dimension ``D``.
    radial : int
        Index of the radial coordinate (the one :class:`Series` values expand in).
    dependent : tuple of int, optional
        Coordinates the components depend on: by default those of the
        :class:`~spectral_bulk.gravity.Jet` components, else ``(radial,)``; a jet in a
        coordinate outside an explicit ``dependent`` is an error.
    """

    def __init__(self, metric, dim, radial, dependent=None):
        self.dim, self.radial = int(dim), int(radial)
        self.dependent = dependent_coordinates(metric.values(), self.radial, dependent)
        self.g = {}
        for (m, n), v in metric.items():
            if _is_zero(v):
                continue
            self.g[(m, n)] = v
            self.g[(n, m)] = v
        self._inv = self._gamma = self._ricci = None

    # ----------------------------------------------------------------- pieces
    def comp(self, m, n):
        return self.g.get((m, n), 0)

    @property
    def inverse(self):
        """``g^{mu nu}`` as a dict (block-wise inversion of the sparsity pattern)."""
        if self._inv is None:
            self._inv = _block_inverse(self.g, self.dim)
        return self._inv

    def inv(self, m, n):
        return self.inverse.get((m, n), 0)

    def dg(self, mu):
        """``d_mu g_{ab}`` for every stored component (dict; zero unless ``mu`` is dependent)."""
        cache = self.__dict__.setdefault("_dg", {})
        if mu not in cache:
            r = self.radial
            cache[mu] = {k: partial(v, mu, r) for k, v in self.g.items()}
        return cache[mu]

    @property
    def christoffel(self):
        """``Gamma^l_{m n}`` for ``m <= n`` (dict; zeros omitted)."""
        if self._gamma is None:
            # Gamma_{s m n} = (d_m g_{sn} + d_n g_{sm} - d_s g_{mn}) / 2 with d_r non-zero for the
            # dependent r only: each non-zero d_r g_{ab} feeds (s, m, n) = (a, r, b), (a, b, r)
            # and (r, a, b), each in a slot of its own; terms are kept per key in the order of
            # the formula
            parts = {}
            for r in self.dependent:
                for (a, b), d in self.dg(r).items():
                    if _is_zero(d):
                        continue
                    if r <= b:
                        parts.setdefault((a, r, b), [0, 0, 0])[0] = d
                    if b <= r:
                        parts.setdefault((a, b, r), [0, 0, 0])[1] = d
                    if a <= b:
                        parts.setdefault((r, a, b), [0, 0, 0])[2] = -1 * d
            first = {}
            for key, terms in parts.items():
                val = tensor_sum(terms)
                if not _is_zero(val):
                    first[key] = 0.5 * val
            # Gamma^l_{m n} = g^{l s} Gamma_{s m n} over the non-zero inverse entries
            by_s = {}
            for (s_, m, n), v in first.items():
                by_s.setdefault(s_, []).append(((m, n), v))
            sums = {}
            for (l, s_), ginv in self.inverse.items():
                if _is_zero(ginv):
                    continue
                for mn, v in by_s.get(s_, ()):
                    sums.setdefault((l,) + mn, []).append((s_, _mul(ginv, v)))
            gam = {}
            for key in sorted(sums):  # sum over s in increasing order, as the formula reads
                val = tensor_sum(t for _, t in sorted(sums[key], key=lambda st: st[0]))
                if not _is_zero(val):
                    gam[key] = val
            self._gamma = gam
        return self._gamma

    def gamma(self, l, m, n):
        return self.christoffel.get((l, m, n) if m <= n else (l, n, m), 0)

    def _gamma_rows(self):
        """For each lower index n: the non-zero ``Gamma^l_{n s}`` as (l, s, value)."""
        rows = {n: [] for n in range(self.dim)}
        for (l, m, n), v in self.christoffel.items():
            rows[m].append((l, n, v))
            if m != n:
                rows[n].append((l, m, v))
        return rows

    @property
    def ricci(self):
        """``R_{mu nu}`` for ``mu <= nu`` (dict)."""
        if self._ricci is None:
            D, r, dep = self.dim, self.radial, self.dependent
            rows = self._gamma_rows()
            trace = {}
            for s_ in range(D):
                trace[s_] = tensor_sum(v for (l, s2, v) in rows[s_] if l == s2)
            ric = {}
            for m, n in itertools.combinations_with_replacement(range(D), 2):
                terms = [partial(self.gamma(l, m, n), l, r) for l in dep]
                if n in dep and not _is_zero(trace[m]):
                    terms.append(-1 * partial(trace[m], n, r))
                terms += [_mul(trace[s_], self.gamma(s_, m, n)) for s_ in range(D)
                          if not _is_zero(trace[s_])]
                # - Gamma^l_{n s} Gamma^s_{m l}, over the non-zero first factors only
                for l, s_, v in rows[n]:
                    w = self.gamma(s_, m, l)
                    if not _is_zero(w):
                        terms.append(-1 * (v * w))
                val = tensor_sum(terms)
                if not _is_zero(val):
                    ric[(m, n)] = val
            self._ricci = ric
        return self._ricci

    def deturck(self, reference):
        """DeTurck vector ``xi^mu`` and ``nabla_(mu xi_nu)`` against a reference geometry.

        Returns
        -------
        xi_up : dict mu -> series
        sym : dict (mu, nu) -> series, ``mu <= nu``
        """
        D, r, dep = self.dim, self.radial, self.dependent
        xi_up = {}
        for m in range(D):
            terms = []
            for a, b in itertools.product(range(D), repeat=2):
                gab = self.inv(a, b)
                if _is_zero(gab):
                    continue
                diff = tensor_sum([self.gamma(m, a, b), -1 * reference.gamma(m, a, b)
                                   if not _is_zero(reference.gamma(m, a, b)) else 0])
                terms.append(_mul(gab, diff))
            v = tensor_sum(terms)
            if not _is_zero(v):
                xi_up[m] = v
        xi_dn = {m: tensor_sum(_mul(self.comp(m, n), xi_up.get(n, 0)) for n in range(D)) for m in range(D)}
        xi_dn = {m: v for m, v in xi_dn.items() if not _is_zero(v)}
        sym = {}
        for m, n in itertools.combinations_with_replacement(range(D), 2):
            terms = []
            if m in dep:
                d = partial(xi_dn.get(n, 0), m, r)
                terms.append(0 if _is_zero(d) else 0.5 * d)
            if n in dep:
                d = partial(xi_dn.get(m, 0), n, r)
                terms.append(0 if _is_zero(d) else 0.5 * d)
            for l in range(D):
                t = _mul(self.gamma(l, m, n), xi_dn.get(l, 0))
                if not _is_zero(t):
                    terms.append(-1 * t)
            v = tensor_sum(terms)
            if not _is_zero(v):
                sym[(m, n)] = v
        return xi_up, sym

    def dot(self, va, vb):
        """``g^{mu nu} a_mu b_nu`` for covectors given as dicts."""
        return tensor_sum(_mul(self.inv(m, n), _mul(va.get(m, 0), vb.get(n, 0)))
                          for m in range(self.dim) for n in range(self.dim))

    def box(self, field):
        """``g^{mu nu} (d_mu d_nu phi - Gamma^l_{mu nu} d_l phi)`` of a :class:`ScalarField`."""
        D, r = self.dim, self.radial
        terms = []
        for m, n in itertools.product(range(D), repeat=2):
            gmn = self.inv(m, n)
            if _is_zero(gmn):
                continue
            inner = [field.hess(m, n, r)]
            for l in range(D):
                t = _mul(self.gamma(l, m, n), field.grad(l, r))
                if not _is_zero(t):
                    inner.append(-1 * t)
            terms.append(_mul(gmn, tensor_sum(inner)))
        return tensor_sum(terms)

    def raise_first(self, tensor):
        """Mixed components ``T^mu_nu = g^{mu a} T_{a nu}`` of a symmetric dict tensor."""
        D = self.dim
        full = {}
        for (a, b), v in tensor.items():
            full[(a, b)] = v
            full[(b, a)] = v
        out = {}
        for m, n in itertools.product(range(D), repeat=2):
            v = tensor_sum(_mul(self.inv(m, a), full.get((a, n), 0)) for a in range(D))
            if not _is_zero(v):
                out[(m, n)] = v
        return out


def _block_inverse(g, D):
    # connected components of the sparsity pattern
    seen, blocks = set(), []
    for i in range(D):
        if i in seen:
            continue
        stack, block = [i], []
        while stack:
            a = stack.pop()
            if a in seen:
                continue
            seen.add(a)
            block.append(a)
            stack.extend(b for b in range(D) if (a, b) in g and b not in seen)
        blocks.append(sorted(block))
    inv = {}
    for blk in blocks:
        if len(blk) == 1:
            a = blk[0]
            if (a, a) not in g:
                raise ZeroDivisionError(f"metric component g_{a}{a} vanishes identically")
            inv[(a, a)] = 1 / g[(a, a)]
        elif len(blk) == 2:
            a, b = blk
            ga, gb, gab = g.get((a, a), 0), g.get((b, b), 0), g.get((a, b), 0)
            det = tensor_sum([_mul(ga, gb), -1 * _mul(gab, gab)])
            idet = 1 / det
            if not _is_zero(gb):
                inv[(a, a)] = gb * idet
            if not _is_zero(ga):
                inv[(b, b)] = ga * idet
            if not _is_zero(gab):
                inv[(a, b)] = inv[(b, a)] = -1 * gab * idet
        else:
            inv.update(_gauss_jordan(g, blk))
    return inv


def _gauss_jordan(g, blk):
    n = len(blk)
    a = [[g.get((blk[i], blk[j]), 0) for j in range(n)] for i in range(n)]
    e = [[1 if i == j else 0 for j in range(n)] for i in range(n)]
    for col in range(n):
        piv = next((r for r in range(col, n) if not _is_zero(a[r][col])), None)
        if piv is None:
            raise ZeroDivisionError("singular metric block")
        a[col], a[piv] = a[piv], a[col]
        e[col], e[piv] = e[piv], e[col]
        ip = 1 / a[col][col]
        a[col] = [_mul(x, ip) for x in a[col]]
        e[col] = [_mul(x, ip) for x in e[col]]
        for r in range(n):
            if r == col or _is_zero(a[r][col]):
                continue
            fct = a[r][col]
            a[r] = [tensor_sum([x, -1 * _mul(fct, y) if not _is_zero(_mul(fct, y)) else 0])
                    for x, y in zip(a[r], a[col])]
            e[r] = [tensor_sum([x, -1 * _mul(fct, y) if not _is_zero(_mul(fct, y)) else 0])
                    for x, y in zip(e[r], e[col])]
    out = {}
    for i in range(n):
        for j in range(n):
            if not _is_zero(e[i][j]):
                out[(blk[i], blk[j])] = e[i][j]
    return out
