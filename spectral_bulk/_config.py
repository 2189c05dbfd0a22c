"""TOML run configurations: loading, schema checks and the user's problem builder.

A configuration is a TOML file.  Every key is checked against a schema; an
unknown or missing key is a :class:`~spectral_bulk.exceptions.ConfigError` whose
one-line message names the key (``solver.tol``) and the file.

Engine runs (any pointwise problem) name a Python file and a builder function::

    [problem]
    file = "my_problem.py"      # relative to the config file
    function = "build"          # build(**args) -> dict(problem=..., guess=..., params=...)
    args = { n = 32 }           # optional keyword arguments for the builder

    [params]                    # optional: override parameter values
    lam = 3.0

    [solver]                    # optional: NewtonOptions fields
    tol = 1e-10

    [output]                    # optional
    file = "solution.nc"
"""

import importlib.util
import os
import sys
import tomllib

from .exceptions import ConfigError

__all__ = ["load_config", "check_section", "load_builder", "SOLVER_KEYS"]

SOLVER_KEYS = {
    "tol": float,
    "tail_tol": float,
    "max_iter": int,
    "damping": bool,
    "lambda_init": float,
    "lambda_min": float,
    "linear_solver": str,
}


def load_config(path):
    """Read a TOML file; return ``(dict, text)`` or raise ConfigError naming the problem."""
    try:
        with open(path, "rb") as fh:
            raw = fh.read()
    except OSError as exc:
        raise ConfigError(f"cannot read config {path!r}: {exc.strerror}") from None
    text = raw.decode("utf-8", errors="replace")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"{path}: invalid TOML: {exc}") from None
    return data, text


def _typename(t):
    return {float: "a number", int: "an integer", str: "a string", bool: "true/false",
            dict: "a table", list: "an array"}.get(t, t.__name__)


def check_section(cfg, section, schema, *, path="config", required=(), allow_extra=False):
    """Validate ``cfg[section]`` against ``schema`` (key -> type).

    Returns the section dict (empty if absent and nothing is required).  Ints
    are accepted where floats are expected.
    """
    data = cfg.get(section, {})
    if not isinstance(data, dict):
        raise ConfigError(f"{path}: `{section}` must be a table")
    for key in required:
        if key not in data:
            raise ConfigError(f"{path}: missing key `{section}.{key}`")
    if not allow_extra:
        for key in data:
            if key not in schema:
                known = ", ".join(sorted(schema))
                raise ConfigError(f"{path}: unknown key `{section}.{key}` (known: {known})")
    for key, value in data.items():
        t = schema.get(key)
        if t is None:
            continue
        ok = isinstance(value, t) and not (t in (int, float) and isinstance(value, bool))
        if t is float and isinstance(value, int) and not isinstance(value, bool):
            ok = True
        if not ok:
            raise ConfigError(
                f"{path}: `{section}.{key}` must be {_typename(t)}, got {value!r}"
            )
    return data


def check_top_level(cfg, allowed, path):
    """Raise ConfigError for unknown top-level tables."""
    for key in cfg:
        if key not in allowed:
            raise ConfigError(f"{path}: unknown section `{key}` (known: {', '.join(sorted(allowed))})")


def load_builder(file, function, base_dir, path="config"):
    """Import ``function`` from the Python ``file`` (relative to ``base_dir``)."""
    full = file if os.path.isabs(file) else os.path.join(base_dir, file)
    if not os.path.isfile(full):
        raise ConfigError(f"{path}: `problem.file` {file!r} does not exist")
    name = "_spectral_bulk_user_" + os.path.splitext(os.path.basename(full))[0]
    spec = importlib.util.spec_from_file_location(name, full)
    module = importlib.util.module_from_spec(spec)
    try:
        spec.loader.exec_module(module)
    except SyntaxError as exc:
        raise ConfigError(f"cannot load {file!r}: syntax error at line {exc.lineno}: {exc.msg}") from None
    except Exception as exc:  # any import-time failure of user code
        raise ConfigError(f"cannot load {file!r}: {type(exc).__name__}: {exc}") from None
    sys.modules.setdefault(name, module)
    fn = getattr(module, function, None)
    if fn is None or not callable(fn):
        raise ConfigError(f"{path}: `problem.function` {function!r} is not a function in {file!r}")
    return fn
