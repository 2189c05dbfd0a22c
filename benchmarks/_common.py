"""Helpers shared by the benchmark scripts in this directory.

Importing this module pins BLAS (OpenMP, OpenBLAS, MKL, Accelerate, BLIS) to one thread
through the environment, which only works before numpy is loaded: every script imports
``_common`` before anything else.  :func:`one_blas_thread` adds the same limit through
threadpoolctl when it is installed.

The rest, grouped as below:

* output: :func:`log`, :func:`banner`, :func:`table_header`, :func:`fmt_ratio`, :func:`quiet`;
* the run: :func:`argument_parser`, :func:`default_output`, :func:`machine_info`,
  :func:`package_state`, :func:`utc_timestamp`, :func:`write_json`;
* timing: :func:`gc_paused`, :func:`interleaved` (rounds A B C ... A B C ...),
  :func:`summary` (median and interquartile range), :func:`ratio` (ratio of medians and
  the interquartile range of the per-round ratios);
* instrumentation: :class:`Clock`, exclusive wall time of wrapped package functions.
"""

import os

#: environment variables that cap the BLAS/OpenMP thread count (set to 1 on import)
THREAD_VARS = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS",
               "VECLIB_MAXIMUM_THREADS", "BLIS_NUM_THREADS")
for _var in THREAD_VARS:
    os.environ[_var] = "1"

import argparse  # noqa: E402
import contextlib  # noqa: E402
import datetime  # noqa: E402
import functools  # noqa: E402
import gc  # noqa: E402
import json  # noqa: E402
import math  # noqa: E402
import platform  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
import warnings  # noqa: E402
from collections import defaultdict  # noqa: E402

import numpy as np  # noqa: E402
import scipy  # noqa: E402

try:  # optional: only used when installed
    import threadpoolctl  # noqa: E402
except ImportError:  # pragma: no cover - depends on the environment
    threadpoolctl = None

import spectral_bulk  # noqa: E402
from spectral_bulk.newton import Problem  # noqa: E402
from spectral_bulk.newton import _linalg, _newton, _workspace  # noqa: E402

BENCH_DIR = os.path.dirname(os.path.abspath(__file__))
REPO_ROOT = os.path.dirname(BENCH_DIR)


# =============================================================================
# output
# =============================================================================
def log(msg=""):
    """Print a line at once (progress lines must not wait in a buffer)."""
    print(msg, flush=True)


def banner(title, width=100):
    """A section title between two rules of ``=``."""
    log("=" * width)
    log(title)
    log("=" * width)


def table_header(header, width=None):
    """A table's header line and a rule of ``-`` below it (as long as the header by default)."""
    log(header)
    log("-" * (len(header) if width is None else width))


def fmt_ratio(r, width=8, label=""):
    """A :func:`ratio` result as ``ratio  [label q25, q75]``."""
    return f"{r['ratio']:{width}.3f}  [{label}{r['q25']:.3f}, {r['q75']:.3f}]"


def quiet(fun, *args, **kwargs):
    """``fun(*args, **kwargs)`` with every warning suppressed."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fun(*args, **kwargs)


# =============================================================================
# the run: arguments, environment, results file
# =============================================================================
def default_output(name):
    """``benchmarks/results/<name>``."""
    return os.path.join(BENCH_DIR, "results", name)


def argument_parser(doc, output, quick_help, rounds_help=None):
    """The common command line: ``--quick``, ``--rounds N`` (when ``rounds_help`` is given) and
    ``--output PATH`` (default ``output``); the description is the first line of ``doc``."""
    ap = argparse.ArgumentParser(description=doc.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help=quick_help)
    if rounds_help is not None:
        ap.add_argument("--rounds", type=int, default=None, help=rounds_help)
    ap.add_argument("--output", default=output, help="JSON results file")
    return ap


def one_blas_thread():
    """Context manager limiting BLAS to one thread through threadpoolctl (a no-op without it)."""
    if threadpoolctl is None:
        return contextlib.nullcontext()
    return threadpoolctl.threadpool_limits(limits=1)


def _cpu_model():
    cpu = platform.processor() or ""
    with contextlib.suppress(OSError):
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    return cpu


def _numpy_blas():
    """Name and version of the BLAS numpy was built with (None when numpy does not say)."""
    blas = None
    with contextlib.suppress(Exception):
        cfg = np.show_config(mode="dicts")
        b = cfg.get("Build Dependencies", {}).get("blas", {})
        blas = {"name": b.get("name"), "version": b.get("version")}
    return blas


def _thread_pools(with_library):
    """threadpoolctl's view of the loaded thread pools (None without threadpoolctl)."""
    if threadpoolctl is None:
        return None
    pools = []
    for d in threadpoolctl.threadpool_info():
        pool = {"api": d.get("user_api")}
        if with_library:
            pool["lib"] = d.get("internal_api")
        pool["threads"] = d.get("num_threads")
        pools.append(pool)
    return pools


def machine_info(blas_details=False, loadavg=False):
    """Where the figures were measured: platform, CPU model, versions and thread settings.

    ``blas_details``: also the BLAS numpy was built with (``"blas"``), the library behind each
    thread pool (``"lib"``), and a ``"threadpoolctl"`` entry even when threadpoolctl is not
    installed (``None``; otherwise the entry is left out then).  ``loadavg``: also the load
    average when the run started (``"loadavg_at_start"``).
    """
    info = {"platform": platform.platform(), "machine": platform.machine(), "cpu": _cpu_model(),
            "cpu_count": os.cpu_count(), "python": sys.version.split()[0], "numpy": np.__version__,
            "scipy": scipy.__version__, "spectral_bulk": spectral_bulk.__version__}
    if blas_details:
        info["blas"] = _numpy_blas()
    info["thread_env"] = {k: os.environ.get(k) for k in THREAD_VARS[:3]}
    if loadavg:
        with contextlib.suppress(OSError):
            info["loadavg_at_start"] = os.getloadavg()
    if blas_details or threadpoolctl is not None:
        info["threadpoolctl"] = _thread_pools(with_library=blas_details)
    return info


def package_state(root=None, path=False, changed_key="uncommitted_package_files"):
    """Which code was measured: the commit and the package files changed since (read-only git).

    ``root``: the checkout to ask (default: the directory above the imported package);
    ``path``: also record where the package was imported from (``"path"``); ``changed_key``:
    the key of the list of changed files.  A git failure leaves the keys out.
    """
    pkg = os.path.dirname(os.path.abspath(spectral_bulk.__file__))
    root = os.path.dirname(pkg) if root is None else root
    out = {"path": pkg} if path else {}
    with contextlib.suppress(Exception):
        out["commit"] = subprocess.run(["git", "-C", root, "rev-parse", "--short", "HEAD"], capture_output=True,
                                       text=True, timeout=10).stdout.strip()
        cmd = ["git", "--no-optional-locks", "-C", root, "status", "--porcelain", "--", "spectral_bulk"]
        st = subprocess.run(cmd, capture_output=True, text=True, timeout=10).stdout
        out[changed_key] = [line[3:] for line in st.splitlines()]
    return out


def utc_timestamp():
    """Now, UTC, ISO 8601 to the second."""
    return datetime.datetime.now(datetime.UTC).isoformat(timespec="seconds")


def plain(obj):
    """JSON fallback: numpy scalars (anything with ``.item()``) as Python numbers, the rest as text."""
    return obj.item() if hasattr(obj, "item") else str(obj)


def write_json(path, data, default=plain):
    """Write ``data`` to ``path`` (indented), creating the directory; a temporary file renamed
    into place, so a failed run never leaves half a file."""
    os.makedirs(os.path.dirname(os.path.abspath(path)), exist_ok=True)
    tmp = path + ".tmp"
    with open(tmp, "w") as fh:
        json.dump(data, fh, indent=2, default=default)
    os.replace(tmp, path)


# =============================================================================
# timing
# =============================================================================
@contextlib.contextmanager
def gc_paused():
    """Collect garbage, then keep the collector off for the block (as ``timeit`` does)."""
    gc.collect()
    gc.disable()
    try:
        yield
    finally:
        gc.enable()


def calls_per_sample(fun, min_sample):
    """Number of calls per sample so that one sample lasts at least ``min_sample`` seconds."""
    t0 = time.perf_counter()
    fun()
    dt = time.perf_counter() - t0
    return max(1, math.ceil(min_sample / max(dt, 1e-7)))


def interleaved(funcs, rounds, min_sample=0.0, warmup=False):
    """Time the callables ``funcs`` (name -> fun) in rounds A B C ... A B C ...

    A sample runs a function ``inner`` times and records the time per call; ``inner`` is 1
    when ``min_sample`` is 0, else calibrated so that a sample lasts at least ``min_sample``
    seconds.  ``warmup``: one untimed call of each function first.  Garbage is collected
    before each sample and the collector is off inside it.

    Returns name -> ``{"samples": [seconds per call, one per round], "inner": inner}``.
    """
    inner = {}
    for name, fun in funcs.items():
        if warmup:
            fun()
        inner[name] = calls_per_sample(fun, min_sample) if min_sample > 0 else 1
    out = {name: {"samples": [], "inner": inner[name]} for name in funcs}
    for _ in range(rounds):
        for name, fun in funcs.items():
            k = inner[name]
            with gc_paused():
                t0 = time.perf_counter()
                for _ in range(k):
                    fun()
                dt = (time.perf_counter() - t0) / k
            out[name]["samples"].append(dt)
    return out


def summary(samples):
    """Median, quartiles, extremes and count of ``samples``."""
    s = np.asarray(samples, dtype=float)
    q25, med, q75 = np.percentile(s, [25, 50, 75])
    return {"median": float(med), "q25": float(q25), "q75": float(q75), "min": float(s.min()),
            "max": float(s.max()), "n": int(s.size)}


def ratio(num, den):
    """Ratio of the medians of two sample lists taken in the same rounds, and the interquartile
    range of the per-round ratios ``num[i] / den[i]`` as its spread."""
    a, b = np.asarray(num, dtype=float), np.asarray(den, dtype=float)
    q25, q75 = np.percentile(a / b, [25, 75])
    return {"ratio": float(np.median(a) / np.median(b)), "q25": float(q25), "q75": float(q75)}


# =============================================================================
# instrumentation
# =============================================================================
class Clock:
    """Wall time per category of wrapped package functions.

    A function wrapped by :meth:`exclusive` adds its time minus that of the wrapped functions
    it calls to ``excl[cat]`` (so the categories add up to at most the wall time) and counts
    its calls in ``calls[cat]``.  Subclasses say what to wrap in :meth:`install` (with
    :meth:`patch` and :meth:`timer`); :meth:`installed` applies that for the duration of a
    ``with`` block and always restores the originals.  Attributes that do not exist are
    collected in ``missing`` rather than raising.
    """

    def __init__(self):
        self._patches = []
        self._wrapped = {}
        self.missing = set()
        self.reset()

    def reset(self):
        """Zero the timers and counters."""
        self.excl = defaultdict(float)
        self.calls = defaultdict(int)
        self._stack = []

    def exclusive(self, cat, fn):
        """``fn`` wrapped with the exclusive timer of category ``cat``."""
        clock = self

        @functools.wraps(fn)
        def wrapper(*args, **kwargs):
            clock._stack.append(0.0)
            t0 = time.perf_counter()
            try:
                return fn(*args, **kwargs)
            finally:
                dt = time.perf_counter() - t0
                child = clock._stack.pop()
                clock.excl[cat] += dt - child
                clock.calls[cat] += 1
                if clock._stack:
                    clock._stack[-1] += dt

        return wrapper

    def timer(self, cat):
        """A ``make`` for :meth:`patch`: the exclusive timer of ``cat``, one wrapper per function
        object, so a function imported by name into several modules shares one wrapper."""
        def make(fn):
            if id(fn) not in self._wrapped:
                self._wrapped[id(fn)] = self.exclusive(cat, fn)
            return self._wrapped[id(fn)]

        return make

    def patch(self, owner, attr, make):
        """Replace ``owner.attr`` by ``make(original)`` until the :meth:`installed` block ends."""
        orig = owner.__dict__.get(attr) if isinstance(owner, type) else getattr(owner, attr, None)
        if orig is None:
            self.missing.add(f"{getattr(owner, '__name__', owner)}.{attr}")
            return
        self._patches.append((owner, attr, orig))
        setattr(owner, attr, make(orig))

    def time_newton_core(self, pointwise="pointwise", factorisation="linear_algebra",
                         assembly="linear_algebra"):
        """Time the Newton engine's pieces: ``Problem.linearize / param_derivative / residual /
        linearize_with_param / residual_extended`` (every evaluation of the equations, the
        refinement's included) and the 1-D workspace's callbacks (``_rows``) in ``pointwise``,
        ``DenseSolver`` (construction = LU, ``solve``, ``slogdet``) and the 1-D workspace's fused
        ``step`` (assembly, LU and correction in one) and ``trial`` (the simplified correction,
        callbacks excluded) in ``factorisation``, and the dense assembly (``assemble_dense``
        wherever it is looked up, ``_bordered_dense``) in ``assembly``."""
        for attr in ("linearize", "param_derivative", "residual", "linearize_with_param", "residual_extended"):
            self.patch(Problem, attr, self.timer(pointwise))
        # the callbacks of the 1-D workspace, once per evaluation (its linearize and trial
        # wrap them with kernels; timing linearize too would count one evaluation twice)
        self.patch(_workspace.DenseWorkspace, "_rows", self.timer(pointwise))
        for attr in ("step", "trial"):
            self.patch(_workspace.DenseWorkspace, attr, self.timer(factorisation))
        for attr in ("__init__", "solve", "slogdet"):
            self.patch(_linalg.DenseSolver, attr, self.timer(factorisation))
        for mod in (_linalg, _newton):
            self.patch(mod, "assemble_dense", self.timer(assembly))
        self.patch(_linalg, "_bordered_dense", self.timer(assembly))

    def install(self):
        """Wrap what is to be timed (subclasses); called on entering :meth:`installed`."""
        raise NotImplementedError

    @contextlib.contextmanager
    def installed(self):
        """The wrappers of :meth:`install` in place for the duration of the block."""
        self._wrapped = {}
        try:
            self.install()
            yield self
        finally:
            while self._patches:
                owner, attr, orig = self._patches.pop()
                setattr(owner, attr, orig)
            self._wrapped = {}
