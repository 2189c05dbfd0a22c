"""Implementations of the CLI commands (argument parsing lives in ``_main``)."""

import logging
import os
import sys

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
        from ..backgrounds._config import solve_background_config

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


def cmd_follow(args):
    raise ConfigError("`follow` needs the continuation module")


def cmd_show(args):
    raise ConfigError("`show` needs the family module")


__all__ = ["cmd_solve", "cmd_follow", "cmd_show", "print_solution_summary"]
