"""Implementations of the CLI commands (argument parsing lives in ``_main``)."""

import logging
import os
import sys

import numpy as np

from .._config import SOLVER_KEYS, check_section, check_top_level, load_builder, load_config
from ..exceptions import ConfigError

log = logging.getLogger("spectral_bulk")

ENGINE_SECTIONS = {"title", "problem", "params", "solver", "output", "follow"}
PROBLEM_KEYS = {"file": str, "function": str, "args": dict}
OUTPUT_KEYS = {"file": str}


def _build_engine(cfg, path):
    """Run the user's builder; return (problem, params, guess, extras)."""
    from ..newton import Problem

    prob = check_section(cfg, "problem", PROBLEM_KEYS, path=path, required=("file", "function"))
    fn = load_builder(prob["file"], prob["function"], os.path.dirname(os.path.abspath(path)), path)
    built = fn(**prob.get("args", {}))
    if isinstance(built, dict):
        unknown = set(built) - {"problem", "guess", "params", "observables"}
        if unknown:
            raise ConfigError(f"{prob['function']}() returned unknown key(s) {sorted(unknown)}")
        if "problem" not in built or "guess" not in built:
            raise ConfigError(f"{prob['function']}() must return 'problem' and 'guess'")
        problem, guess = built["problem"], built["guess"]
        params, extras = dict(built.get("params") or {}), {"observables": built.get("observables")}
    elif isinstance(built, tuple) and len(built) in (2, 3):
        problem, guess = built[0], built[-1]
        params = dict(built[1]) if len(built) == 3 else {}
        extras = {}
    else:
        raise ConfigError(
            f"{prob['function']}() must return a dict with 'problem' and 'guess' "
            "or a tuple (problem, [params,] guess)"
        )
    if not isinstance(problem, Problem):
        raise ConfigError(f"{prob['function']}() returned {type(problem).__name__}, not a Problem")
    overrides = cfg.get("params", {})
    if not isinstance(overrides, dict):
        raise ConfigError(f"{path}: `params` must be a table")
    for k, v in overrides.items():
        if k not in problem.params:
            raise ConfigError(
                f"{path}: unknown parameter `params.{k}` (the problem defines "
                f"{', '.join(sorted(problem.params)) or 'none'})"
            )
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            raise ConfigError(f"{path}: `params.{k}` must be a number, got {v!r}")
    params.update(overrides)
    return problem, params, guess, extras


def _output_path(args, cfg, path, default_suffix):
    out = check_section(cfg, "output", OUTPUT_KEYS, path=path)
    target = args.output or out.get("file")
    if target is None:
        target = os.path.splitext(os.path.basename(path))[0] + default_suffix
    elif not args.output and not os.path.isabs(target):
        target = os.path.join(os.path.dirname(os.path.abspath(path)), target)
    return target


def print_solution_summary(res, file=None):
    """A short human summary of a :class:`SolveResult`."""
    out = file or sys.stdout
    state = "converged" if res.converged else "NOT CONVERGED"
    print(f"{state} (status {res.status}) in {res.iterations} Newton iterations, "
          f"{res.wall_time:.3f} s", file=out)
    print(f"  residual {res.residual:.2e}   update {res.update:.2e}   "
          f"grid {' x '.join(str(n) for n in res.grid.shape)}", file=out)
    for f, t in res.tail.items():
        print(f"  tail[{f}] = {t:.2e}", file=out)
    print(f"  {res.message}", file=out)


def cmd_solve(args):
    from ..family import write_atomic

    path = args.config
    cfg, text = load_config(path)
    if "background" in cfg:
        from ._backgrounds import solve_background_config

        return solve_background_config(cfg, text, args)
    check_top_level(cfg, ENGINE_SECTIONS, path)
    solver_opts = check_section(cfg, "solver", SOLVER_KEYS, path=path)
    problem, params, guess, _ = _build_engine(cfg, path)
    from ..newton import NewtonOptions, solve

    res = solve(problem, guess, params=params, options=NewtonOptions(**solver_opts))
    print_solution_summary(res)
    target = _output_path(args, cfg, path, ".nc")
    ds = res.to_dataset()
    ds.attrs["config"] = text
    write_atomic(ds, target)
    print(f"  wrote {target}")
    return 0 if res.converged else 1


FOLLOW_KEYS = {
    "param": str, "step": float, "max_points": int, "targets": list, "bounds": dict,
    "stop_at_last_target": bool, "tol": float, "tail_tol": float, "min_step": float,
    "max_step": float, "max_corrector": int, "event_tol": float, "events": list, "regrid": bool,
    "n_max": int, "n_min": int, "checkpoint_every": int, "linear_solver": str,
}
_FOLLOW_RUN_KEYS = ("param", "step", "max_points", "targets", "bounds", "stop_at_last_target")


def parse_follow_section(cfg, path):
    """Validated ``[follow]`` table -> (run kwargs, ContinuationOptions kwargs)."""
    import math

    sec = check_section(cfg, "follow", FOLLOW_KEYS, path=path, required=("param",))
    run = {k: sec[k] for k in _FOLLOW_RUN_KEYS if k in sec}
    opts = {k: v for k, v in sec.items() if k not in _FOLLOW_RUN_KEYS}
    if "events" in opts:
        opts["events"] = tuple(opts["events"])
    for t in run.get("targets", []):
        if isinstance(t, bool) or not isinstance(t, (int, float)):
            raise ConfigError(f"{path}: `follow.targets` must be numbers, got {t!r}")
    bounds = {}
    for k, v in run.get("bounds", {}).items():
        if not (isinstance(v, list) and len(v) == 2 and all(isinstance(x, (int, float)) for x in v)):
            raise ConfigError(f"{path}: `follow.bounds.{k}` must be [lo, hi] (use -inf/inf for open sides)")
        bounds[k] = tuple(None if math.isinf(x) else float(x) for x in v)
    run["bounds"] = bounds
    return run, opts


class Progress:
    """Live progress: one rewritten line on a terminal, plain log lines otherwise."""

    def __init__(self, stream=None):
        self.stream = stream or sys.stderr
        self.tty = hasattr(self.stream, "isatty") and self.stream.isatty()

    def __call__(self, info):
        n = "x".join(str(k) for k in info["n"])
        step = info["step"] if info["step"] is not None else 0.0
        text = (f"points {info['points']:4d}  {info['param']} = {info['value']:.10g}  step {step:.2e}  "
                f"newton {info['iterations'] or 0:2d}  n {n}  events {info['events']}  [{info['kind']}]")
        if self.tty:
            self.stream.write("\r" + text.ljust(100))
            self.stream.flush()
        else:
            print(text, file=self.stream, flush=True)

    def close(self):
        if self.tty:
            self.stream.write("\n")
            self.stream.flush()


def print_branch_summary(branch, file=None):
    out = file or sys.stdout
    v = branch.values
    print(f"{'finished' if branch.success else 'STOPPED'}: {branch.message}", file=out)
    if len(v):
        print(f"  {len(v)} points, {branch.param} in [{v.min():.10g}, {v.max():.10g}], "
              f"{branch.nit} corrector iterations, {branch.wall_time:.2f} s", file=out)
    for e in branch.events:
        print(f"  {e.kind:6s} at {branch.param} = {e.value:.14g} (point {e.index})", file=out)


def cmd_follow(args):
    from ..continuation import ContinuationOptions, follow
    from ..family import write_atomic

    path = args.config
    cfg, text = load_config(path)
    if "background" in cfg:
        from ._backgrounds import follow_background_config

        return follow_background_config(cfg, text, args)
    check_top_level(cfg, ENGINE_SECTIONS, path)
    run, opt_kw = parse_follow_section(cfg, path)
    problem, params, guess, extras = _build_engine(cfg, path)
    target = _output_path(args, cfg, path, "_family.nc")
    progress = Progress()
    try:
        branch = follow(problem, guess, run.pop("param"), params=params,
                        observables=extras.get("observables"), callback=progress,
                        checkpoint=target, resume=target if args.resume else None,
                        attrs={"config": text}, options=ContinuationOptions(**opt_kw), **run)
    finally:
        progress.close()
    print_branch_summary(branch)
    if branch.points:
        write_atomic(branch.to_dataset(), target)
        print(f"  wrote {target}")
    if branch.status == 5:
        return 130
    return 0 if branch.success else 1


def cmd_show(args):
    from ..family import open_family

    ds = open_family(args.file)
    if "schema" not in ds.attrs:
        return _show_solution(ds, args)
    from ..family import validate_family

    validate_family(ds)
    param = ds.attrs["parameter"]
    vals = ds[param].values
    fields = ds.attrs["fields"].split(",")
    ok = bool(ds.attrs.get("success", 0))
    print(f"family of {ds.attrs.get('problem', '?')} in {param}: {ds.sizes['point']} points, "
          f"{param} in [{vals.min():.10g}, {vals.max():.10g}]")
    print(f"  stop: {ds.attrs.get('message', '?')}")
    for i in range(ds.sizes.get("event", 0)):
        print(f"  {str(ds.event_kind.values[i]):6s} at {param} = {ds.event_value.values[i]:.14g} "
              f"(point {int(ds.event_point.values[i])})")
    for k in ds.data_vars:
        if k.startswith("n_") and ds[k].dims == ("point",):
            n = ds[k].values
            print(f"  resolution along {k[2:]}: n from {n.min()} to {n.max()}")
    tails = np.nanmax(np.stack([ds[f"tail_{f}"].values for f in fields]), axis=0)
    res = ds["residual"].values
    wt, wr = int(np.nanargmax(tails)), int(np.nanargmax(res))
    tol, tail_tol = ds.attrs.get("tol", np.nan), ds.attrs.get("tail_tol", np.nan)
    print(f"  worst tail {tails[wt]:.2e} at point {wt} ({param} = {vals[wt]:.8g}); tolerance {tail_tol:.1e}")
    print(f"  worst residual {res[wr]:.2e} at point {wr} ({param} = {vals[wr]:.8g}); tolerance {tol:.1e}")
    certified = bool(np.all(tails <= tail_tol) and np.all(res <= tol))
    extra = [k for k in ds.data_vars if ds[k].attrs.get("observable") == 1]
    if extra:
        print(f"  observables: {', '.join(extra)}")
    from ..holography import WALL_CERTIFICATE
    from ..holography._branes import certificate_limit

    ext = ds["extended_precision"].values == 1 if "extended_precision" in ds else np.zeros(vals.size, bool)
    wall = ds.attrs.get("background", "").endswith("Wall")
    for k in ds.data_vars:
        if k.startswith("cert_") and k[5:] not in ("residual", "tail"):
            v = np.abs(ds[k].values)
            worst = np.nanmax(v) if np.any(np.isfinite(v)) else np.nan
            key = k[5:]
            if wall or certificate_limit(key) is None:
                lim = WALL_CERTIFICATE.get(key, certificate_limit(key))
                lims = None if lim is None else np.full(v.shape, lim)
            else:  # branes: tighter stress-tensor limits where the data are extended-precision
                lims = np.where(ext, certificate_limit(key, True), certificate_limit(key, False))
            if lims is not None:
                shown = sorted({float(x) for x in np.unique(lims)})
                note = " (limit " + " / ".join(f"{x:.0e}" for x in shown) + ")"
            else:
                note = " (depends on the point spacing)" if k == "cert_first_law" else ""
            print(f"  worst {key} {worst:.2e}{note}")
            if lims is not None and np.any(np.isfinite(v) & (v > lims)):
                certified = False
    print(f"  certificate: {'all points pass' if certified else 'FAILED at some points'}")
    if args.plot is not None:
        png = _plot_family(ds, param, extra, args)
        print(f"  wrote {png}")
    return 0 if (ok and certified) else 1


def _show_solution(ds, args):
    print(f"solution: {ds.attrs.get('title', '?')}")
    print(f"  {ds.attrs.get('message', '')}")
    print(f"  iterations {ds.attrs.get('iterations')}, residual {ds.attrs.get('residual', np.nan):.2e}")
    for k in ds.data_vars:
        print(f"  tail[{k}] = {ds[k].attrs.get('spectral_tail', np.nan):.2e}")
    return 0 if ds.attrs.get("converged", 0) == 1 else 1


def _plot_family(ds, param, observables, args):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    preferred = [o for o in ds.attrs.get("plot_observables", "").split(",") if o in ds]
    names = ([args.observable] if args.observable else
             preferred or [o for o in observables if ds[o].ndim == 1][:2])
    if not names:
        raise ConfigError("the family has no scalar observable to plot; pass --observable NAME")
    for n in names:
        if n not in ds:
            raise ConfigError(f"no observable {n!r} in {args.file} (have {', '.join(observables)})")
    fig, axes = plt.subplots(len(names), 1, figsize=(6.4, 3.2 * len(names)), squeeze=False)
    x = ds[param].values
    for ax, n in zip(axes[:, 0], names):
        ax.plot(x, ds[n].values, "-", lw=1.2, color="C0")
        ax.plot(x, ds[n].values, ".", ms=3, color="C0")
        y = ds[n].values
        for i in range(ds.sizes.get("event", 0)):
            k = int(ds.event_point.values[i])
            xe = float(ds.event_value.values[i])
            # located events that are not points of the family sit between two points
            if abs(x[k] - xe) > 1e-12 * max(1.0, abs(xe)) and 0 < k < len(x):
                f = (xe - x[k - 1]) / (x[k] - x[k - 1]) if x[k] != x[k - 1] else 0.0
                ye = y[k - 1] + f * (y[k] - y[k - 1])
            else:
                ye = y[k]
            style = {"fold": ("C3", "o"), "branch": ("C2", "s")}.get(str(ds.event_kind.values[i]), ("k", "x"))
            ax.plot(xe, ye, style[1], color=style[0], ms=7, label=f"{ds.event_kind.values[i]} at {xe:.6g}")
        ax.set_xlabel(ds[param].attrs.get("long_name", param))
        ax.set_ylabel(ds[n].attrs.get("long_name", n))
        if ds.sizes.get("event", 0):
            ax.legend(fontsize=8)
    fig.tight_layout()
    png = args.plot or os.path.splitext(args.file)[0] + ".png"
    fig.savefig(png, dpi=120)
    plt.close(fig)
    return png


__all__ = ["cmd_solve", "cmd_follow", "cmd_show", "print_solution_summary", "print_branch_summary",
           "Progress"]
