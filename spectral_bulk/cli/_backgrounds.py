"""Background runs from TOML configs (``spectral-bulk solve|follow`` with a ``[background]``).

Layout::

    title = "..."
    [background]
    kind = "qlattice_wall"        # black_brane, qlattice_brane, axion_brane, qlattice_wall, domain_wall
    quantization = "standard"     # optional
    n = 64                        # optional: initial resolution
    tol = 1e-10                   # optional

    [model]                       # either a built-in model ...
    builtin = "quartic_well"
    # ... or functions from a Python file (relative to the config):
    # file = "my_model.py"
    # potential = "V"             # V(rho) (one scalar) or V(*phi)
    # phase_metric = "Phi"        # Q-lattice: Phi(rho)
    # gauge_coupling = "Z"        # optional U(1) coupling

    [params]                      # solve: the point; follow: the fixed parameters and the start
    lam = 2.0
    k = 1.0

    [follow]                      # follow only
    param = "lam"
    stop = 20.0
    step = 0.1
    max_points = 200
    targets = [1.0, 2.0]
    bounds = { n = [-inf, 1e6] }

    [output]
    file = "family.nc"
"""

import math
import os

import numpy as np

from .._config import check_section, check_top_level, load_builder
from ..exceptions import ConfigError
from ..holography import certificate_failures
from ._commands import Progress, _output_path, print_branch_summary

__all__ = ["build_background", "solve_background_config", "follow_background_config"]

SECTIONS = {"title", "background", "model", "params", "follow", "output"}
BACKGROUND_KEYS = {"kind": str, "quantization": str, "n": int, "tol": float, "n_max": int,
                   "cutoff": float, "coupling": str, "extended_precision": bool}
MODEL_KEYS = {"builtin": str, "file": str, "potential": str, "phase_metric": str,
              "gauge_coupling": str, "scalars": list, "axions": int}
FOLLOW_KEYS = {"param": str, "stop": float, "step": float, "max_points": int, "targets": list,
               "bounds": dict, "max_step": float, "min_step": float, "tol": float, "n_max": int}
KINDS = ("black_brane", "qlattice_brane", "axion_brane", "qlattice_wall", "domain_wall")

def _model(cfg, path):
    from ..models import BulkModel, QLatticeModel, builtin

    sec = check_section(cfg, "model", MODEL_KEYS, path=path)
    if "builtin" in sec:
        try:
            return builtin(sec["builtin"])
        except KeyError as exc:
            raise ConfigError(f"{path}: `model.builtin`: {exc.args[0]}") from None
    if "file" not in sec or "potential" not in sec:
        raise ConfigError(f"{path}: `model` needs `builtin`, or `file` and `potential`")
    base = os.path.dirname(os.path.abspath(path))
    V = load_builder(sec["file"], sec["potential"], base, path)
    Z = load_builder(sec["file"], sec["gauge_coupling"], base, path) if "gauge_coupling" in sec else None
    if "phase_metric" in sec:
        Phi = load_builder(sec["file"], sec["phase_metric"], base, path)
        return QLatticeModel(V, Phi, gauge_coupling=Z, name=sec["potential"])
    return BulkModel(V, scalars=tuple(sec.get("scalars", ["phi"])), gauge_coupling=Z,
                     axions=sec.get("axions", 0), name=sec["potential"])


def build_background(cfg, path):
    """The background object described by ``[background]`` and ``[model]``."""
    from ..backgrounds import AxionBrane, BlackBrane, DomainWall, QLatticeBrane, QLatticeWall

    check_top_level(cfg, SECTIONS, path)
    sec = check_section(cfg, "background", BACKGROUND_KEYS, path=path, required=("kind",))
    kind = sec["kind"]
    if kind not in KINDS:
        raise ConfigError(f"{path}: `background.kind` = {kind!r} is not one of {', '.join(KINDS)}")
    opts = {k: sec[k] for k in ("n", "tol", "n_max") if k in sec}
    if "extended_precision" in sec:
        if not kind.endswith("_brane"):
            raise ConfigError(f"{path}: `background.extended_precision` applies to branes, not {kind!r}")
        opts["extended"] = sec["extended_precision"]
    if kind == "axion_brane" and "model" not in cfg:
        return AxionBrane(**opts)
    model = _model(cfg, path)
    q = sec.get("quantization", "standard")
    if kind == "black_brane":
        return BlackBrane(model, quantization=q, **opts)
    if kind == "qlattice_brane":
        return QLatticeBrane(model, quantization=q, **opts)
    if kind == "axion_brane":
        return AxionBrane(model, **opts)
    if kind == "qlattice_wall":
        for key in ("cutoff", "coupling"):
            if key in sec:
                opts[key] = sec[key]
        return QLatticeWall(model, quantization=q, **opts)
    return DomainWall(model, **opts)


def _params(cfg, path):
    p = cfg.get("params", {})
    if not isinstance(p, dict):
        raise ConfigError(f"{path}: `params` must be a table")
    for k, v in p.items():
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            raise ConfigError(f"{path}: `params.{k}` must be a number, got {v!r}")
    return {k: float(v) for k, v in p.items()}


def _print_observables(obs, file=None):
    for k, v in obs.items():
        if isinstance(v, (float, int, np.floating, np.integer)):
            print(f"  {k:>22s} = {float(v): .12g}", file=file)
        elif isinstance(v, list) and v and isinstance(v[0], str):
            print(f"  {k:>22s} : " + "; ".join(v), file=file)


def solve_background_config(cfg, text, args):
    from ..family import write_atomic

    path = args.config
    bg = build_background(cfg, path)
    params = _params(cfg, path)
    if type(bg).__name__ in ("QLatticeWall", "DomainWall"):
        if set(params) - {"lam"}:
            raise ConfigError(f"{path}: walls take only `params.lam` (units of k)")
        sol = bg.solve(params.get("lam", 0.0))
    else:
        sol = bg.solve(**params)
    obs = getattr(sol, "observables", {}) or {}
    state = "converged" if sol.converged else "NOT CONVERGED"
    print(f"{type(bg).__name__}: {state} (status {sol.status}): {sol.message}")
    _print_observables(obs)
    bad = certificate_failures(bg, obs)
    if bad:
        print("  certificate FAILED: " + ", ".join(bad))
    if getattr(sol, "grid", None) is not None:
        ds = sol.to_dataset()
        for k, v in obs.items():
            if isinstance(v, (float, int, np.floating, np.integer)):
                ds.attrs[f"obs_{k}"] = float(v)
        ds.attrs["config"] = text
        target = _output_path(args, cfg, path, ".nc")
        write_atomic(ds, target)
        print(f"  wrote {target}")
    return 0 if (sol.converged and not bad) else 1


def follow_background_config(cfg, text, args):
    from ..family import write_atomic

    path = args.config
    bg = build_background(cfg, path)
    params = _params(cfg, path)
    sec = check_section(cfg, "follow", FOLLOW_KEYS, path=path, required=("param",))
    param = sec["param"]
    bounds = {}
    for k, v in sec.get("bounds", {}).items():
        if not (isinstance(v, list) and len(v) == 2):
            raise ConfigError(f"{path}: `follow.bounds.{k}` must be [lo, hi]")
        bounds[k] = tuple(None if math.isinf(x) else float(x) for x in v)
    kw = {k: sec[k] for k in ("max_step", "min_step", "tol", "n_max") if k in sec}
    target = _output_path(args, cfg, path, "_family.nc")
    progress = Progress()
    run = dict(stop=sec.get("stop"), step=sec.get("step", 0.1), max_points=sec.get("max_points", 200),
               targets=sec.get("targets", ()), bounds=bounds, checkpoint=target,
               resume=target if args.resume else None, callback=progress, attrs={"config": text}, **kw)
    try:
        if type(bg).__name__ == "QLatticeWall":
            if param not in ("lam", "loglam"):
                raise ConfigError(f"{path}: wall families follow `lam` (or its log), not {param!r}")
            br = bg.follow({"lam": params.get("lam", 0.1)} if not args.resume else None, **run)
        elif type(bg).__name__ == "DomainWall":
            raise ConfigError(f"{path}: `follow` is not available for domain_wall; use solve")
        else:
            br = bg.follow(param, start=params, **run)
    finally:
        progress.close()
    print_branch_summary(br)
    ds = br.to_dataset()
    for key in ("critical_coupling_estimate", "critical_exponent_estimate"):
        if key in ds.attrs:
            print(f"  {key.replace('_', ' ')}: {ds.attrs[key]:.10g}")
    write_atomic(ds, target)
    print(f"  wrote {target}")
    if br.status == 5:
        return 130
    return 0 if br.success else 1
