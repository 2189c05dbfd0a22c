"""The one schema of a solution family as an :class:`xarray.Dataset`.

This module is physics-free and knows nothing of how a family was computed:
:func:`build_family_dataset` takes plain per-point records and returns the
dataset; :func:`read_family_dataset` returns the records again (used to resume
an interrupted run).  The layout is documented in DEVELOPERS.md ("Family
datasets") and checked by :func:`validate_family`.
"""

import datetime

import numpy as np
import xarray as xr

from .._version import __version__
from ..exceptions import SchemaError

__all__ = ["SCHEMA_VERSION", "PointRecord", "build_family_dataset", "read_family_dataset",
           "validate_family"]

SCHEMA_VERSION = "spectral_bulk-family-1"

#: Per-point diagnostics stored as float data variables, with their long names.
DIAGNOSTICS = {
    "iterations": "Newton (corrector) iterations",
    "residual": "scaled residual (componentwise backward error)",
    "update": "scaled last Newton update",
    "step": "arclength step that produced the point",
    "tangent_param": "parameter component of the unit tangent",
    "det_sign": "sign of the determinant of the bordered Jacobian",
    "log_abs_det": "log of the absolute determinant of the bordered Jacobian",
}


class PointRecord:
    """Everything stored about one point of a family (plain data).

    Attributes
    ----------
    value : float
        Continuation parameter.
    arclength : float
    grid : Grid
        The point's own grid (its ``n`` per axis may differ between points).
    state : ndarray, shape (nfields * grid.size,)
        Exact nodal values on the point's grid.
    tangent : ndarray or None
        Field part of the unit tangent on the point's grid.
    kind : str
        ``"start"``, ``"regular"``, ``"target"``, ``"bound"``, ``"fold"``,
        ``"branch"``, ``"regrid"``.
    diagnostics : dict of str -> float
        Keys of :data:`DIAGNOSTICS` plus ``tail_<field>``.
    observables : dict of str -> float or ndarray
    """

    __slots__ = ("value", "arclength", "grid", "state", "tangent", "kind", "diagnostics", "observables")

    def __init__(self, value, arclength, grid, state, tangent=None, kind="regular",
                 diagnostics=None, observables=None):
        self.value = float(value)
        self.arclength = float(arclength)
        self.grid = grid
        self.state = np.asarray(state, dtype=float)
        self.tangent = None if tangent is None else np.asarray(tangent, dtype=float)
        self.kind = kind
        self.diagnostics = dict(diagnostics or {})
        self.observables = dict(observables or {})


def _now():
    return datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds")


def build_family_dataset(param, fields, points, events=(), attrs=None, param_attrs=None,
                         observable_attrs=None):
    """Build the family dataset from point records.

    Parameters
    ----------
    param : str
        Name of the continuation parameter (becomes a coordinate along ``point``).
    fields : sequence of str
    points : sequence of PointRecord
        In branch order; all grids share their axes' names and kinds.
    events : sequence of dict
        Each with ``kind`` (str), ``value`` (float), ``point`` (int index into
        ``points``) and ``test`` (float, the located test-function value).
    attrs : dict, optional
        Extra global attributes (tolerances, config text, stop reason, ...).
    param_attrs, observable_attrs : dict, optional
        CF attributes (``long_name``, ``units``) for the parameter and for each
        observable by name.

    Returns
    -------
    xarray.Dataset
    """
    if not points:
        raise SchemaError("a family needs at least one point")
    fields = list(fields)
    nf = len(fields)
    npt = len(points)
    axes_names = points[0].grid.names
    # common output grid: the finest grid used along the family
    finest = max(points, key=lambda p: p.grid.size).grid
    sizes = np.array([p.grid.size for p in points])
    max_state = int(sizes.max()) * nf
    data, coords = {}, {}
    coords["point"] = ("point", np.arange(npt), {"long_name": "index along the branch"})
    coords[param] = ("point", np.array([p.value for p in points]),
                     {"long_name": f"continuation parameter {param}", "units": "1",
                      **(param_attrs or {})})
    coords["arclength"] = ("point", np.array([p.arclength for p in points]),
                           {"long_name": "pseudo-arclength along the branch", "units": "1"})
    for b in finest.axes:
        coords[b.name] = (b.name, np.asarray(b.points, dtype=float),
                          {"long_name": f"{b.name} (output grid: the finest used)", "units": "1"})
    mode_dims = tuple(f"{b.name}_mode" for b in finest.axes)
    values = np.empty((nf, npt) + finest.shape)
    coeffs = np.zeros((nf, npt) + finest.shape, dtype=complex)
    state = np.full((npt, max_state), np.nan)
    tangent = np.full((npt, max_state), np.nan)
    n_axis = np.zeros((npt, len(axes_names)), dtype=np.int64)
    for k, p in enumerate(points):
        u = p.state.reshape(nf, p.grid.size)
        if p.grid == finest:
            vals = u.reshape((nf,) + finest.shape)
        else:
            mesh = [finest.coords[n] for n in finest.names]
            vals = p.grid.evaluate(u, *mesh).reshape((nf,) + finest.shape)
        values[:, k] = vals
        c = u.reshape((nf,) + p.grid.shape)
        for ax, b in enumerate(p.grid.axes):
            c = b.coeffs(c, axis=ax + 1)
        sl = (slice(None), k) + tuple(slice(0, n) for n in p.grid.shape)
        coeffs[sl] = c
        state[k, : p.state.size] = p.state
        if p.tangent is not None:
            tangent[k, : p.tangent.size] = p.tangent
        n_axis[k] = p.grid.shape
    for i, f in enumerate(fields):
        data[f] = (("point",) + axes_names, values[i], {"long_name": f"field {f} on the output grid"})
        data[f"{f}_coeffs"] = (("point",) + mode_dims, coeffs[i].real,
                               {"long_name": f"spectral coefficients of {f} (zero-padded)"})
        if np.any(coeffs[i].imag):  # full Fourier axes have complex coefficients
            data[f"{f}_coeffs_imag"] = (("point",) + mode_dims, coeffs[i].imag,
                                        {"long_name": f"imaginary part of the coefficients of {f}"})
    for j, name in enumerate(axes_names):
        data[f"n_{name}"] = ("point", n_axis[:, j], {"long_name": f"collocation points along {name}"})
    data["state"] = (("point", "state_index"), state,
                     {"long_name": "exact nodal state on the point's own grid (NaN-padded)"})
    data["tangent"] = (("point", "state_index"), tangent,
                       {"long_name": "field part of the unit tangent (NaN-padded)"})
    data["kind"] = ("point", np.array([p.kind for p in points], dtype=object),
                    {"long_name": "how the point was obtained"})
    diag_keys = list(DIAGNOSTICS) + [f"tail_{f}" for f in fields]
    for key in diag_keys:
        arr = np.array([float(p.diagnostics.get(key, np.nan)) for p in points])
        long = DIAGNOSTICS.get(key, f"spectral tail of {key[5:]}")
        data[key] = ("point", arr, {"long_name": long, "units": "1"})
    obs_names = []
    for p in points:
        for k in p.observables:
            if k not in obs_names:
                obs_names.append(k)
    for name in obs_names:
        if name in data or name in coords:
            raise SchemaError(f"observable {name!r} clashes with a family variable")
        samples = [np.asarray(p.observables.get(name, np.nan), dtype=float) for p in points]
        shape = max((s.shape for s in samples), key=len)
        arr = np.full((npt,) + shape, np.nan)
        for k, s in enumerate(samples):
            if s.shape == shape:
                arr[k] = s
        dims = ("point",) + tuple(f"{name}_dim{d}" for d in range(len(shape)))
        attrs_o = {"long_name": name, "units": "1", "observable": 1}
        attrs_o.update((observable_attrs or {}).get(name, {}))
        data[name] = (dims, arr, attrs_o)
    ev = list(events)
    data["event_kind"] = ("event", np.array([e["kind"] for e in ev], dtype=object),
                          {"long_name": "event kind (fold or branch)"})
    data["event_value"] = ("event", np.array([float(e["value"]) for e in ev]),
                           {"long_name": f"{param} at the located event", "units": "1"})
    data["event_point"] = ("event", np.array([int(e["point"]) for e in ev], dtype=np.int64),
                           {"long_name": "index of the located event along point"})
    data["event_test"] = ("event", np.array([float(e.get("test", np.nan)) for e in ev]),
                          {"long_name": "test function at the located event"})
    ds = xr.Dataset(data, coords=coords)
    ds.attrs.update({
        "title": "spectral_bulk solution family",
        "Conventions": "CF-1.10",
        "source": f"spectral_bulk {__version__}",
        "schema": SCHEMA_VERSION,
        "history": f"{_now()} written",
        "parameter": param,
        "fields": ",".join(fields),
        "observables": ",".join(obs_names),
    })
    for k, v in finest.describe().items():
        ds.attrs[k] = v
    for k, v in (attrs or {}).items():
        ds.attrs[k] = int(v) if isinstance(v, bool) else v
    return ds


def validate_family(ds):
    """Raise :class:`SchemaError` naming the first missing piece of the layout."""
    for key in ("schema", "parameter", "fields"):
        if key not in ds.attrs:
            raise SchemaError(f"family dataset lacks the attribute {key!r}")
    if ds.attrs["schema"] != SCHEMA_VERSION:
        raise SchemaError(f"unknown family schema {ds.attrs['schema']!r} (expected {SCHEMA_VERSION})")
    param = ds.attrs["parameter"]
    needed = ["state", "tangent", "kind", "arclength", param] + list(DIAGNOSTICS)
    needed += ds.attrs["fields"].split(",")
    for name in needed:
        if name not in ds.variables:
            raise SchemaError(f"family dataset lacks the variable {name!r}")
    return ds


def read_family_dataset(ds, grid_for):
    """Point records and events back from a family dataset.

    Parameters
    ----------
    ds : xarray.Dataset
    grid_for : callable
        ``grid_for(shape) -> Grid``: the grid with the given points per axis.

    Returns
    -------
    points : list of PointRecord
    events : list of dict
    """
    validate_family(ds)
    fields = ds.attrs["fields"].split(",")
    param = ds.attrs["parameter"]
    axes = [k[2:] for k in ds.data_vars if k.startswith("n_") and ds[k].dims == ("point",)]
    obs_names = [o for o in ds.attrs.get("observables", "").split(",") if o]
    points = []
    for k in range(ds.sizes["point"]):
        shape = tuple(int(ds[f"n_{a}"].values[k]) for a in axes)
        grid = grid_for(shape)
        size = grid.size * len(fields)
        state = ds["state"].values[k, :size]
        tan = ds["tangent"].values[k, :size]
        diag = {key: float(ds[key].values[k]) for key in list(DIAGNOSTICS) + [f"tail_{f}" for f in fields]
                if key in ds}
        obs = {}
        for name in obs_names:
            v = ds[name].values[k]
            obs[name] = float(v) if np.ndim(v) == 0 else np.array(v)
        points.append(PointRecord(
            ds[param].values[k], ds["arclength"].values[k], grid, state,
            None if np.all(np.isnan(tan)) else tan, str(ds["kind"].values[k]), diag, obs))
    events = [
        {"kind": str(ds["event_kind"].values[i]), "value": float(ds["event_value"].values[i]),
         "point": int(ds["event_point"].values[i]), "test": float(ds["event_test"].values[i])}
        for i in range(ds.sizes.get("event", 0))
    ]
    return points, events
