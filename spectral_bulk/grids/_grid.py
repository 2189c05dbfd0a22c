"""Tensor-product grids of one-dimensional bases.

Points of a grid with axes ``(b1, b2)`` are flattened in C order (the first axis
varies slowest), so nodal arrays have shape ``(..., n1*n2)`` internally and
``(..., n1, n2)`` when handed to users.
"""

import functools
import itertools

import numpy as np
import scipy.sparse as sp

from ._basis import Basis

__all__ = ["Grid", "TensorGrid"]


class Grid:
    """A tensor product of one or more :class:`Basis` objects.

    Parameters
    ----------
    *axes : Basis
        The factors, slowest-varying first.  Coordinate names must differ.

    Notes
    -----
    Derivatives are labelled by multi-indices ``alpha`` (one order per axis).
    Their names follow the axes' order: with axes ``z`` then ``x``, the mixed
    second derivative of ``u`` is ``u_zx`` (``u_xz`` is accepted as an alias).
    """

    def __init__(self, *axes):
        if not axes:
            raise ValueError("a Grid needs at least one axis")
        for b in axes:
            if not isinstance(b, Basis):
                raise TypeError(f"grid axes must be Chebyshev or Fourier bases, got {b!r}")
        names = [b.name for b in axes]
        if len(set(names)) != len(names):
            raise ValueError(f"grid axes need distinct coordinate names, got {names}")
        self.axes = tuple(axes)
        self.names = tuple(names)
        self.shape = tuple(b.n for b in axes)
        self.size = int(np.prod(self.shape))
        self.ndim = len(axes)
        mesh = np.meshgrid(*[b.points for b in axes], indexing="ij")
        self.coords = {name: m.ravel() for name, m in zip(names, mesh)}
        self.faces = {}
        idx = np.arange(self.size).reshape(self.shape)
        for k, b in enumerate(axes):
            for end in b.ends:
                sl = [slice(None)] * self.ndim
                sl[k] = b.end_index(end)
                self.faces[(k, end)] = idx[tuple(sl)].ravel()

    # ------------------------------------------------------------------ labels
    def multi_indices(self, max_order=2):
        """Derivative multi-indices of total order <= ``max_order``; the first is zero."""
        out = []
        for total in range(max_order + 1):
            for alpha in itertools.product(range(total + 1), repeat=self.ndim):
                if sum(alpha) == total:
                    out.append(alpha)
        # within an order, derivatives along earlier axes first
        out.sort(key=lambda a: (sum(a), tuple(-x for x in a)))
        return tuple(out)

    def deriv_suffix(self, alpha):
        """Suffix such as ``"_zx"`` for a multi-index (empty for zero)."""
        s = "".join(name * k for name, k in zip(self.names, alpha))
        return "_" + s if s else ""

    def deriv_aliases(self, alpha):
        """All accepted suffixes for a multi-index (orderings of mixed derivatives)."""
        letters = [name for name, k in zip(self.names, alpha) for _ in range(k)]
        if not letters:
            return ("",)
        return tuple(sorted({"_" + "".join(p) for p in itertools.permutations(letters)}))

    def resolve_face(self, key):
        """Canonical ``(axis, end)`` of a boundary key.

        Accepted keys: ``"left"``/``"right"`` (only with one bounded axis),
        ``"<name>=a"``/``"<name>=b"``, or ``"<name>=<value>"`` where value is an end
        point of that axis (``inf`` allowed).
        """
        bounded = [k for k, b in enumerate(self.axes) if b.ends]
        if key in ("left", "right"):
            if len(bounded) != 1:
                raise ValueError(
                    f"boundary key {key!r} is ambiguous on a grid with axes {self.names}; "
                    "use '<name>=<value>'"
                )
            return (bounded[0], key)
        if not isinstance(key, str) or "=" not in key:
            raise ValueError(
                f"boundary key {key!r} not understood; use 'left', 'right' or '<name>=<value>'"
            )
        name, value = (s.strip() for s in key.split("=", 1))
        if name not in self.names:
            raise ValueError(f"boundary key {key!r} names no coordinate (have {self.names})")
        k = self.names.index(name)
        b = self.axes[k]
        if not b.ends:
            raise ValueError(f"boundary key {key!r}: coordinate {name!r} is periodic")
        if value in ("a", "b"):
            return (k, "left" if value == "a" else "right")
        try:
            v = float(value)
        except ValueError:
            raise ValueError(f"boundary key {key!r}: {value!r} is not a number") from None
        a, bb = b.domain
        scale = max(1.0, abs(a) if np.isfinite(a) else 1.0, abs(bb) if np.isfinite(bb) else 1.0)
        for end, e in (("left", a), ("right", bb)):
            if v == e or (np.isfinite(e) and abs(v - e) <= 1e-12 * scale):
                return (k, end)
        raise ValueError(f"boundary key {key!r}: {name}={v} is not an end of ({a}, {bb})")

    def face_label(self, face):
        """Readable label ``"<name>=<value>"`` of a canonical face."""
        k, end = face
        return f"{self.names[k]}={self.axes[k].end_value(end):g}"

    # --------------------------------------------------------------- operators
    def _axis_matrix(self, k, order, kind="dense"):
        if order == 0:
            return None
        if kind == "fd":
            return self.axes[k].fd_matrices(order)[order - 1]
        return self.axes[k].diff_matrices(order)[order - 1]

    def apply(self, alpha, values):
        """Apply the derivative ``alpha`` to nodal values of shape ``(..., size)``."""
        v = np.asarray(values)
        lead = v.shape[:-1]
        v = v.reshape(lead + self.shape)
        for k, order in enumerate(alpha):
            if order:
                d = self._axis_matrix(k, order)
                v = np.moveaxis(np.tensordot(v, d, axes=([len(lead) + k], [1])), -1, len(lead) + k)
        return v.reshape(lead + (self.size,))

    @functools.lru_cache(maxsize=32)  # noqa: B019
    def dense_operator(self, alpha):
        """Dense ``(size, size)`` matrix of the derivative ``alpha`` (Kronecker product)."""
        mats = [
            np.eye(b.n) if o == 0 else self._axis_matrix(k, o)
            for k, (b, o) in enumerate(zip(self.axes, alpha))
        ]
        out = functools.reduce(np.kron, mats)
        out.setflags(write=False)
        return out

    @functools.lru_cache(maxsize=32)  # noqa: B019
    def sparse_operator(self, alpha, kind="dense"):
        """Sparse Kronecker form of derivative ``alpha``; ``kind="fd"`` for finite differences."""
        mats = []
        for k, (b, o) in enumerate(zip(self.axes, alpha)):
            if o == 0:
                mats.append(sp.identity(b.n, format="csr"))
            elif kind == "fd":
                mats.append(sp.csr_matrix(self._axis_matrix(k, o, "fd")))
            else:
                mats.append(sp.csr_matrix(self._axis_matrix(k, o)))
        return functools.reduce(lambda a, b: sp.kron(a, b, format="csr"), mats)

    # ----------------------------------------------------------------- analysis
    @property
    def weights(self):
        """Quadrature weights, shape ``(size,)``."""
        return functools.reduce(np.multiply.outer, [b.weights for b in self.axes]).ravel()

    def integrate(self, values):
        """Integral of nodal values (shape ``(..., size)``) over the grid."""
        return np.asarray(values) @ self.weights

    def axis_tails(self, values, scale=1.0):
        """Tail measure per field and axis, shape ``(nf, ndim)``.

        For each axis the coefficients along that axis are taken on every grid
        line; the worst line counts.  The size floor is
        ``max(max|u_f|, scale_f)`` for the whole field.
        """
        v = np.asarray(values).reshape((-1,) + self.shape)
        nf = v.shape[0]
        scale = np.broadcast_to(np.asarray(scale, dtype=float), (nf,))
        floor = np.maximum(np.abs(v).reshape(nf, -1).max(axis=1), scale)[:, None]
        if self.ndim == 1:
            return self.axes[0].tail(v, floor[:, 0])[:, None]
        out = np.zeros((nf, self.ndim))
        for k, b in enumerate(self.axes):
            lines = np.moveaxis(v, k + 1, -1).reshape(nf, -1, b.n)
            out[:, k] = b.tail(lines, floor).max(axis=1)
        return out

    def tail(self, values, scale=1.0):
        """Per-field tail measure: the worst over axes (see :meth:`axis_tails`).

        Parameters
        ----------
        values : ndarray, shape (nf, size)
        scale : float or ndarray, shape (nf,)
        """
        return self.axis_tails(values, scale).max(axis=1)

    def interp_matrices(self, *points):
        """Per-axis interpolation matrices for pointwise evaluation at ``points``."""
        if len(points) != self.ndim:
            raise ValueError(f"expected {self.ndim} coordinate arrays ({self.names}), got {len(points)}")
        arrays = np.broadcast_arrays(*[np.asarray(p, dtype=float) for p in points])
        return [b.interp_matrix(a.ravel()) for b, a in zip(self.axes, arrays)], arrays[0].shape

    def evaluate(self, values, *points):
        """Evaluate nodal values (shape ``(..., size)``) at the points ``(x1_i, x2_i, ...)``.

        The coordinate arrays broadcast against each other; the result has shape
        ``(...,) + broadcast shape``.
        """
        mats, shape = self.interp_matrices(*points)
        v = np.asarray(values)
        lead = v.shape[:-1]
        v = v.reshape(lead + self.shape)
        if self.ndim == 1:
            out = v @ mats[0].T
        elif self.ndim == 2:
            out = np.einsum("...ij,pi,pj->...p", v, mats[0], mats[1])
        else:
            raise NotImplementedError("evaluation on grids of more than two axes")
        return out.reshape(lead + shape)

    def resized(self, *ns):
        """The same grid with other numbers of points per axis (None keeps an axis)."""
        if len(ns) != self.ndim:
            raise ValueError(f"expected {self.ndim} sizes, got {len(ns)}")
        return Grid(*[b if n is None else b.resized(n) for b, n in zip(self.axes, ns)])

    def describe(self):
        """Flat dict of the grid's layout, for file attributes."""
        out = {}
        for b in self.axes:
            for k, v in b.describe().items():
                out[f"grid_{b.name}_{k}"] = v
        return out

    def __eq__(self, other):
        return isinstance(other, Grid) and self.axes == other.axes

    def __hash__(self):
        return hash(self.axes)

    def __repr__(self):
        return "Grid(" + ", ".join(repr(b) for b in self.axes) + ")"


def TensorGrid(first, second):  # noqa: N802 - reads like a class to users
    """Two-dimensional tensor-product grid (e.g. ``Chebyshev`` in z times ``Fourier`` in x)."""
    return Grid(first, second)


def as_grid(grid):
    """Return ``grid`` as a :class:`Grid` (a single basis becomes a 1-D grid)."""
    if isinstance(grid, Grid):
        return grid
    if isinstance(grid, Basis):
        return Grid(grid)
    raise TypeError(f"`grid` must be a Chebyshev/Fourier basis or a Grid, got {type(grid).__name__}")
