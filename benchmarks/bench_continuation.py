#!/usr/bin/env python
"""Throughput of pseudo-arclength continuation and where its time goes, in one process.

Usage::

    python benchmarks/bench_continuation.py [--quick] [--rounds N] [--output PATH]

Two branches are followed with :func:`spectral_bulk.continuation.follow` and the
default :class:`ContinuationOptions`:

A. ``bratu``: ``u'' + lam e^u = 0`` on [0, 1], ``u(0) = u(1) = 0`` on
   ``Chebyshev(28, (0, 1))``, from ``lam = 0.1`` (zero guess) through the fold onto
   the upper branch until ``max|u| = 6`` (``bounds={"u": (None, 6.0)}``).
B. ``coupled5``: a 5-field coupled nonlinear system of our own on
   ``Chebyshev(40, (0, 1))`` (a Bratu-like source for ``u``, modulated by two of
   the other fields, which are driven by ``u``; see :func:`coupled_problem`),
   followed in ``lam`` from 0.1 through its fold until ``max|u| = 6``.

Per case: points kept, events (fold value), wall time, points per second,
corrector iterations and Jacobian evaluations per point.  The cases are run in
rounds A B A B ...: in each round one plain run of each (the throughput figures)
and one instrumented run of each (the time shares).  Medians and interquartile
ranges over the rounds are reported.  Garbage collection is collected before and
disabled during every timed run (as in ``timeit``).

Time shares (instrumented runs): the package functions below are wrapped with
timers that keep *exclusive* time (a callee's time is subtracted from its caller):

* LU factorisation + solves: ``DenseSolver.__init__`` (the LU factorisation),
  ``DenseSolver.solve`` (triangular solves, and the ``gecon`` condition estimate
  wherever the package computes it), ``DenseSolver.slogdet``, minus the assembly
  below;
* pointwise linearisation: ``Problem.linearize``, ``Problem.param_derivative`` and
  ``Problem.residual`` (the user's residual on complex-step batches, the namespaces
  handed to it, and the spectral derivatives ``D^alpha U``, shown separately);
* Jacobian assembly: ``assemble_dense`` and the bordering ``_bordered_dense``;
* everything else: wall time minus the above (the continuation loop in Python,
  predictor/tangent bookkeeping, spectral-tail checks and the residual certificate,
  shown separately, ``SolveResult`` construction, event and bound bookkeeping).

Inclusive phase times (event location, regridding, landing on bounds, the
fixed-parameter Newton solves, result construction) are reported alongside.  The
instrumentation overhead is the ratio of the instrumented to the plain median wall
time.  One cProfile run per case lists the hot spots (tottime and cumtime; these
are inflated by the profiler's own per-call cost).

Verification (before any timing; exit status 2 if it fails, 0 otherwise):

* Bratu fold: classical Gelfand-Bratu closed form (common practice): with
  ``u = -2 log(cosh((x - 1/2) th/2) / cosh(th/4))`` and ``th = sqrt(2 lam) cosh(th/4)``
  the fold is where ``(th/4) tanh(th/4) = 1``, ``lam_c = th^2 / (2 cosh^2(th/4))``,
  recomputed here with ``scipy.optimize.brentq`` and compared with the quoted value
  3.513830719125162 (quoted from memory of the classical result; both must agree to
  1e-13).  The located fold must match to 1e-9 and the last point on the upper
  branch must match the closed form (upper root of ``th``) to 1e-8.
* Coupled system: the complex-step linearisation agrees with central finite
  differences (``spectral_bulk.newton.check_jacobian`` < 1e-6); exactly one fold is
  found; at the located fold the unbordered Jacobian is singular (its smallest
  singular value relative to the largest, from ``numpy.linalg.svd``, is at least
  1e3 times below that at the neighbouring points: an independent route to the
  same fact); and the fold value is converged in the grid (a second run on
  ``Chebyshev(56)`` agrees to 1e-8; the difference is reported as the error
  estimate).

Diagnostics: the number of user-callback evaluations per linearisation call (1
when the complex-step batch is evaluated in one call; ``nf * nalpha + ...`` when the
package falls back to slot-by-slot evaluation) and whether the batched path is
active; the JSON also records the commit and the package files with uncommitted
changes (read-only ``git``), since the figures belong to that code.

BLAS is pinned to one thread before numpy is imported (and through threadpoolctl
when it is installed).  Results go to ``benchmarks/results/continuation.json``.
"""

import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import _common  # noqa: E402  (first: it pins BLAS to one thread before numpy is imported)

import cProfile  # noqa: E402
import functools  # noqa: E402
import gc  # noqa: E402
import math  # noqa: E402
import pstats  # noqa: E402
import time  # noqa: E402
from collections import defaultdict  # noqa: E402

import numpy as np  # noqa: E402
from scipy.optimize import brentq  # noqa: E402

from spectral_bulk.continuation import _continuation as _cont  # noqa: E402
from spectral_bulk.continuation import follow  # noqa: E402
from spectral_bulk.grids import Chebyshev  # noqa: E402
from spectral_bulk.grids import _grid  # noqa: E402
from spectral_bulk.newton import Problem, assemble_dense, check_jacobian  # noqa: E402
from spectral_bulk.newton import _newton  # noqa: E402

DEFAULT_OUTPUT = _common.default_output("continuation.json")

BRATU_FOLD_QUOTED = 3.513830719125162  # classical Gelfand-Bratu fold (common practice, quoted from memory)
U_BOUND = 6.0
LAM_START = 0.1


# =============================================================================
# the two problems
# =============================================================================
def _bratu_equations(c, f, p):
    return [f.u_xx + p.lam * np.exp(f.u)]


def _bratu_wall(c, f, p):
    return [f.u]


def bratu_problem(n=28):
    return Problem(Chebyshev(n, (0.0, 1.0), "x"), ["u"], _bratu_equations,
                   {"left": _bratu_wall, "right": _bratu_wall}, {"lam": LAM_START}, name="bratu")


def bratu_guess(x):
    return np.zeros_like(x)


# A scenario of our own: a Bratu-like source for u whose strength is modulated by
# v (screened, driven by u) and z (advected by u', with a linear profile set by
# its boundary values); w and y are driven by u and feed back through v's source
# and z's equation.  Every term is real-analytic (complex-safe).
def _coupled_equations(c, f, p):
    source = p.lam * np.exp(f.u) * (1.0 + 0.25 * f.v) * (1.0 + 0.1 * f.z)
    return [
        f.u_xx + source,
        f.v_xx - 4.0 * f.v + f.u * (1.0 + 0.5 * f.w),
        f.w_xx - 2.0 * f.w + 0.3 * f.u_x * f.y + 0.2 * f.v**2,
        f.y_xx - f.y + np.tanh(0.5 * f.u) - 0.1 * f.y**3,
        f.z_xx + 0.5 * f.u_x * f.z_x - f.z + 0.2 * f.u * f.v * f.w + 0.5,
    ]


def _coupled_left(c, f, p):
    return [f.u, f.v, f.w, f.y, f.z - 1.0]


def _coupled_right(c, f, p):
    return [f.u, f.v, f.w, f.y, f.z - 0.5]


def coupled_problem(n=40):
    return Problem(Chebyshev(n, (0.0, 1.0), "x"), ["u", "v", "w", "y", "z"], _coupled_equations,
                   {"left": _coupled_left, "right": _coupled_right}, {"lam": LAM_START},
                   name="coupled5")


def coupled_guess(x):
    zero = np.zeros_like(x)
    return {"u": zero, "v": zero, "w": zero, "y": zero, "z": 1.0 - 0.5 * x}


CASES = {
    "bratu": {"make": bratu_problem, "guess": bratu_guess,
              "description": "u'' + lam e^u = 0, u(0)=u(1)=0, Chebyshev(28,(0,1)), lam 0.1 -> fold -> max|u|=6"},
    "coupled5": {"make": coupled_problem, "guess": coupled_guess,
                 "description": "5-field coupled Bratu-like system, Chebyshev(40,(0,1)), lam 0.1 -> fold "
                                "-> max|u|=6"},
}


def run_branch(case, problem=None):
    """One continuation run with the default options; returns (branch, wall seconds)."""
    spec = CASES[case]
    prob = spec["make"]() if problem is None else problem
    t0 = time.perf_counter()
    br = follow(prob, spec["guess"], "lam", bounds={"u": (None, U_BOUND)})
    return br, time.perf_counter() - t0, prob


def figures(br, wall):
    n = len(br)
    folds = [e.value for e in br.events if e.kind == "fold"]
    return {
        "points": n,
        "events": [{"kind": e.kind, "value": e.value, "index": e.index} for e in br.events],
        "fold_values": folds,
        "status": br.status,
        "message": br.message,
        "wall_s": wall,
        "points_per_s": n / wall,
        "corrector_iterations": br.nit,
        "jacobian_evaluations": br.njev,
        "corrector_iterations_per_point": br.nit / n,
        "jacobian_evaluations_per_point": br.njev / n,
        "grid_sizes": sorted({p.prob.grid.shape[0] for p in br.points}),
    }


def timed_run(case, clock=None):
    with _common.gc_paused():
        if clock is not None:
            clock.reset()
        br, wall, prob = run_branch(case)
    return br, wall, prob


# =============================================================================
# instrumentation: exclusive timers on the package's pieces
# =============================================================================
class Clock(_common.Clock):
    """Exclusive time per category for nested wrapped calls, and inclusive phase times."""

    def reset(self):
        super().reset()
        self.phase = defaultdict(float)
        self.counts = defaultdict(int)

    def inclusive(self, name, fn):
        clock = self

        @functools.wraps(fn)
        def wrapper(*args, **kwargs):
            t0 = time.perf_counter()
            try:
                return fn(*args, **kwargs)
            finally:
                clock.phase[name] += time.perf_counter() - t0
                clock.counts[name] += 1

        return wrapper

    def counter(self, name, fn):
        clock = self

        @functools.wraps(fn)
        def wrapper(*args, **kwargs):
            clock.counts[name] += 1
            return fn(*args, **kwargs)

        return wrapper

    def install(self):
        """The engine's pieces, the certificate's parts and the continuation's phases."""
        self.time_newton_core(pointwise="pointwise", factorisation="lu", assembly="assembly")
        self.patch(Problem, "derivatives", self.timer("derivatives"))
        self.patch(Problem, "_evaluate", lambda fn: self.counter("callback_evaluations", fn))
        self.patch(_grid.Grid, "axis_tails", self.timer("tails"))
        rn = self.timer("certificate")
        self.patch(_cont, "residual_norm", rn)
        self.patch(_newton, "residual_norm", rn)
        fol = _cont._Follower
        for attr, name in (("locate", "event location"), ("resolve", "resolution/regridding"),
                           ("land", "landing on bounds/targets"), ("natural", "fixed-parameter Newton"),
                           ("make_solution", "SolveResult + observables")):
            self.patch(fol, attr, lambda fn, name=name: self.inclusive(name, fn))

    def shares(self, wall):
        """Percentages of ``wall`` by category (the four headline ones and the details)."""
        e = self.excl
        pointwise = e["pointwise"] + e["derivatives"]
        measured = e["lu"] + e["assembly"] + pointwise + e["tails"] + e["certificate"]
        rest = wall - e["lu"] - e["assembly"] - pointwise
        out = {
            "lu_factorisation_and_solves": 100 * e["lu"] / wall,
            "pointwise_linearisation": 100 * pointwise / wall,
            "jacobian_assembly": 100 * e["assembly"] / wall,
            "everything_else": 100 * rest / wall,
            # details
            "of_pointwise_spectral_derivatives": 100 * e["derivatives"] / wall,
            "of_else_tail_checks": 100 * e["tails"] / wall,
            "of_else_residual_certificate": 100 * e["certificate"] / wall,
            "of_else_python_loop_and_bookkeeping": 100 * (wall - measured) / wall,
        }
        for name, t in self.phase.items():
            out[f"phase_{name}"] = 100 * t / wall
        return out


# =============================================================================
# formatting and profiling
# =============================================================================
def _fmt(v):
    if isinstance(v, float):
        return f"{v:.16g}" if 1e-3 <= abs(v) < 1e3 else f"{v:.2e}"
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_fmt(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{k}: {_fmt(x)}" for k, x in v.items()) + "}"
    return str(v)


def _short(path):
    for marker in ("spectral_bulk" + os.sep, "site-packages" + os.sep):
        if marker in path:
            return path.split(marker, 1)[1] if marker != "spectral_bulk" + os.sep else \
                "spectral_bulk/" + path.split(marker, 1)[1]
    return os.path.basename(path)


def profile_case(case, top=12):
    """One cProfile run: hot spots by tottime and by cumtime (profiler overhead included)."""
    pr = cProfile.Profile()
    gc.collect()
    pr.enable()
    br, _, _ = run_branch(case)
    pr.disable()
    st = pstats.Stats(pr)
    total = st.total_tt
    rows = []
    for (fname, line, func), (cc, nc, tt, ct, _callers) in st.stats.items():
        rows.append({"function": f"{_short(fname)}:{line}({func})", "calls": nc, "tottime_s": tt,
                     "cumtime_s": ct})
    by_tt = sorted(rows, key=lambda r: -r["tottime_s"])[:top]
    pkg = [r for r in rows if "spectral_bulk/" in r["function"] and "follow" not in r["function"]]
    by_ct = sorted(pkg, key=lambda r: -r["cumtime_s"])[:top]
    return {"profiled_total_s": total, "points": len(br), "by_tottime": by_tt, "by_cumtime_package": by_ct}


# =============================================================================
# verification (outside the timings)
# =============================================================================
def bratu_fold_reference():
    """Fold of the Bratu problem from the closed form: (th/4) tanh(th/4) = 1."""
    y = brentq(lambda s: s * math.tanh(s) - 1.0, 0.5, 2.0, xtol=1e-15, rtol=4 * np.finfo(float).eps)
    th = 4 * y
    return th * th / (2 * math.cosh(th / 4) ** 2), th


def bratu_upper_exact(x, lam):
    """Upper-branch closed form (larger root of th = sqrt(2 lam) cosh(th/4))."""
    _, th_c = bratu_fold_reference()
    c = math.sqrt(2 * lam)
    th = brentq(lambda t: t - c * math.cosh(t / 4), th_c, 60.0, xtol=1e-14, rtol=4 * np.finfo(float).eps)
    return -2 * np.log(np.cosh((x - 0.5) * th / 2) / np.cosh(th / 4))


def verify_bratu(br):
    lam_c, _ = bratu_fold_reference()
    folds = [e for e in br.events if e.kind == "fold"]
    out = {"fold_reference_brentq": lam_c, "fold_reference_quoted": BRATU_FOLD_QUOTED,
           "reference_agreement": abs(lam_c - BRATU_FOLD_QUOTED), "n_folds": len(folds),
           "status": br.status}
    ok = len(folds) == 1 and br.status == 1 and abs(lam_c - BRATU_FOLD_QUOTED) < 1e-13
    if folds:
        out["fold_located"] = folds[0].value
        out["fold_error"] = abs(folds[0].value - BRATU_FOLD_QUOTED)
        ok = ok and out["fold_error"] < 1e-9
    last = br.points[-1]
    x = last.prob.grid.coords["x"]
    err = float(np.abs(last.prob.split(last.u)[0] - bratu_upper_exact(x, last.lam)).max())
    out["last_point"] = {"lam": last.lam, "max_u": float(np.abs(last.u).max()), "n": last.prob.grid.shape[0],
                         "max_error_vs_closed_form": err}
    ok = ok and err < 1e-8
    out["checks"] = ("one fold; |fold - 3.513830719125162| < 1e-9; closed form recomputed by brentq agrees to "
                     "1e-13; bound max|u| = 6 reached (status 1); last (upper-branch) point within 1e-8 of the "
                     "closed form")
    out["passed"] = bool(ok)
    return out


def _sigma_ratio(p):
    _, A = p.prob.linearize(p.u, {"lam": p.lam})
    s = np.linalg.svd(assemble_dense(p.prob, A), compute_uv=False)
    return float(s[-1] / s[0])


def verify_coupled(br):
    folds = [e for e in br.events if e.kind == "fold"]
    out = {"n_folds": len(folds), "status": br.status}
    ok = len(folds) == 1 and br.status == 1
    # complex-safety of the residual: complex-step coefficients against finite differences
    probe = br.points[min(3, len(br) - 1)]
    cj = check_jacobian(probe.prob, probe.u, {"lam": probe.lam})
    out["check_jacobian"] = cj
    ok = ok and cj < 1e-6
    if folds:
        k = folds[0].index
        fold_ratio = _sigma_ratio(br.points[k])
        neigh = [_sigma_ratio(br.points[i]) for i in (k - 1, k + 1) if 0 <= i < len(br)]
        out["fold_located"] = folds[0].value
        out["sigma_min_over_max_at_fold"] = fold_ratio
        out["sigma_min_over_max_neighbours"] = neigh
        ok = ok and fold_ratio < 1e-3 * min(neigh)
        br56, _, _ = run_branch("coupled5", coupled_problem(56))
        f56 = [e.value for e in br56.events if e.kind == "fold"]
        out["fold_on_chebyshev56"] = f56[0] if f56 else None
        if f56:
            out["fold_grid_difference"] = abs(f56[0] - folds[0].value)
            ok = ok and out["fold_grid_difference"] < 1e-8
        else:
            ok = False
    out["checks"] = ("check_jacobian < 1e-6 (complex-safe residual); one fold; bound reached (status 1); "
                     "sigma_min/sigma_max of the unbordered Jacobian at the fold >= 1e3 times below the "
                     "neighbours' (numpy SVD); fold on Chebyshev(56) within 1e-8 (grid-convergence error "
                     "estimate)")
    out["passed"] = bool(ok)
    return out


# =============================================================================
# main
# =============================================================================
SHARE_COLUMNS = [
    ("lu_factorisation_and_solves", "LU+solves"),
    ("pointwise_linearisation", "pointwise lin."),
    ("jacobian_assembly", "assembly"),
    ("everything_else", "else"),
]
DETAIL_COLUMNS = [
    ("of_pointwise_spectral_derivatives", "D^a U (in pointwise)"),
    ("of_else_tail_checks", "tail checks (in else)"),
    ("of_else_residual_certificate", "residual certificate (in else)"),
    ("of_else_python_loop_and_bookkeeping", "loop/bookkeeping (in else)"),
]


def main(argv=None):
    ap = _common.argument_parser(__doc__, DEFAULT_OUTPUT, "5 rounds, shorter profile listing (< 30 s)",
                                 rounds_help="rounds A B A B (default 5 quick, 30 full)")
    args = ap.parse_args(argv)
    rounds = args.rounds or (5 if args.quick else 30)
    log = _common.log
    t_start = time.perf_counter()
    names = list(CASES)
    results = {}
    with _common.one_blas_thread():
        # ---- warm-up runs double as the verification runs
        log("verification (warm-up runs, not timed) ...")
        first = {}
        for case in names:
            br, wall, prob = run_branch(case)
            first[case] = figures(br, wall)
            ver = verify_bratu(br) if case == "bratu" else verify_coupled(br)
            results[case] = {"description": CASES[case]["description"], "verification": ver,
                             "batched_linearisation": getattr(prob, "_batched", None)}
            log(f"  {case:9s} {'passed' if ver['passed'] else 'FAILED'}: " + ", ".join(
                f"{k}={_fmt(v)}" for k, v in ver.items() if k not in ("checks", "passed")))

        # ---- interleaved rounds: plain A, plain B, instrumented A, instrumented B
        log(f"timing {rounds} rounds (A B A B, plain then instrumented) ...")
        plain = {c: [] for c in names}
        instr = {c: [] for c in names}
        clock = Clock()
        for _ in range(rounds):
            for case in names:
                br, wall, _ = timed_run(case)
                plain[case].append(figures(br, wall))
            with clock.installed():
                for case in names:
                    br, wall, _ = timed_run(case, clock)
                    rec = {"wall_s": wall, "shares": clock.shares(wall),
                           "calls": dict(clock.calls), "counts": dict(clock.counts)}
                    instr[case].append(rec)

        # ---- one profile per case
        log("profiling one run per case ...")
        for case in names:
            results[case]["profile"] = profile_case(case)

    # ---- aggregate
    for case in names:
        runs = plain[case]
        keys = ("points", "corrector_iterations", "jacobian_evaluations")
        deterministic = all(all(r[k] == runs[0][k] for k in keys) and r["fold_values"] == runs[0]["fold_values"]
                            for r in runs)
        fig = {k: runs[0][k] for k in ("points", "events", "fold_values", "status", "message",
                                        "corrector_iterations", "jacobian_evaluations",
                                        "corrector_iterations_per_point", "jacobian_evaluations_per_point",
                                        "grid_sizes")}
        fig["deterministic_across_runs"] = bool(deterministic)
        timing = {"wall_s": _common.summary([r["wall_s"] for r in runs]),
                  "points_per_s": _common.summary([r["points_per_s"] for r in runs]),
                  "ms_per_point": _common.summary([1e3 * r["wall_s"] / r["points"] for r in runs])}
        shares_keys = instr[case][0]["shares"].keys()
        shares = {k: _common.summary([r["shares"].get(k, 0.0) for r in instr[case]]) for k in shares_keys}
        iw = _common.summary([r["wall_s"] for r in instr[case]])
        calls = instr[case][0]["calls"]
        counts = instr[case][0]["counts"]
        lin_calls = calls.get("pointwise", 0)
        results[case].update({
            "figures": fig,
            "timing": timing,
            "shares_percent_of_wall": shares,
            "instrumented_wall_s": iw,
            "instrumentation_overhead": iw["median"] / timing["wall_s"]["median"] - 1.0,
            "calls_per_run": calls,
            "callback_evaluations_per_run": counts.get("callback_evaluations", 0),
            "callback_evaluations_per_pointwise_call": (counts.get("callback_evaluations", 0) / lin_calls
                                                        if lin_calls else None),
            "phase_calls_per_run": {k: v for k, v in counts.items() if k != "callback_evaluations"},
        })
    total = time.perf_counter() - t_start
    passed = all(results[c]["verification"]["passed"] for c in names)

    # ---- table
    log()
    log(f"Continuation throughput: medians over {rounds} interleaved rounds "
        f"(IQR in brackets), default ContinuationOptions, BLAS 1 thread")
    _common.table_header(f"{'case':9s} {'pts':>4s} {'fold lam':>17s} {'|err| / est.':>10s} {'wall ms':>22s} "
                         f"{'points/s':>20s} {'it/pt':>6s} {'jac/pt':>6s}")
    for case in names:
        r = results[case]
        f, t, v = r["figures"], r["timing"], r["verification"]
        fold = f["fold_values"][0] if f["fold_values"] else float("nan")
        err = v.get("fold_error", v.get("fold_grid_difference", float("nan")))
        w, pps = t["wall_s"], t["points_per_s"]
        log(f"{case:9s} {f['points']:4d} {fold:17.13f} {err:10.1e} "
            f"{1e3 * w['median']:7.1f} [{1e3 * w['q25']:6.1f},{1e3 * w['q75']:6.1f}] "
            f"{pps['median']:6.1f} [{pps['q25']:5.1f},{pps['q75']:5.1f}] "
            f"{f['corrector_iterations_per_point']:6.2f} {f['jacobian_evaluations_per_point']:6.2f}")
    log("  fold error: bratu against 3.513830719125162 (closed form); coupled5 estimated by the")
    log("  difference to a Chebyshev(56) run. Points include the start, the fold and the bound point.")
    log()
    log("Share of wall time (median % over instrumented runs, exclusive timers)")
    _common.table_header(f"{'case':9s} " + " ".join(f"{lab:>15s}" for _, lab in SHARE_COLUMNS)
                         + f" {'instr. ovh':>10s}")
    for case in names:
        s = results[case]["shares_percent_of_wall"]
        log(f"{case:9s} " + " ".join(f"{s[k]['median']:14.1f}%" for k, _ in SHARE_COLUMNS)
            + f" {100 * results[case]['instrumentation_overhead']:9.1f}%")
    log("  details:")
    for case in names:
        s = results[case]["shares_percent_of_wall"]
        det = ", ".join(f"{lab} {s[k]['median']:.1f}%" for k, lab in DETAIL_COLUMNS)
        ph = ", ".join(f"{k[6:]} {v['median']:.1f}%" for k, v in s.items() if k.startswith("phase_"))
        log(f"  {case:9s} {det}")
        log(f"  {'':9s} phases (inclusive): {ph}")
        ce = results[case]["callback_evaluations_per_pointwise_call"]
        log(f"  {'':9s} user-callback evaluations per linearize/param_derivative/residual call: "
            f"{ce:.2f} (batched linearisation active: {results[case]['batched_linearisation']})")
    if clock.missing:
        log(f"  WARNING: not found in the package, so not instrumented: {', '.join(sorted(clock.missing))}")
    log()
    log("Hot spots (cProfile, one run each; times include profiler overhead)")
    for case in names:
        pf = results[case]["profile"]
        log(f"  {case} (profiled total {pf['profiled_total_s']:.3f} s), top by tottime:")
        for row in pf["by_tottime"][: (6 if args.quick else 10)]:
            log(f"    {row['tottime_s']:7.3f} s self {row['cumtime_s']:7.3f} s cum {row['calls']:8d} calls  "
                f"{row['function']}")
    log()
    log(f"verification {'passed' if passed else 'FAILED'}; total {total:.1f} s")

    out = {
        "benchmark": "continuation",
        "timestamp": _common.utc_timestamp(),
        "quick": bool(args.quick),
        "rounds": rounds,
        "total_wall_s": total,
        "verification_passed": bool(passed),
        "machine": _common.machine_info(blas_details=True),
        "package_state": _common.package_state(path=True, changed_key="uncommitted"),
        "method": {
            "options": "default ContinuationOptions; follow(problem, guess, 'lam', bounds={'u': (None, 6.0)})",
            "interleaving": "per round: plain bratu, plain coupled5, instrumented bratu, instrumented coupled5",
            "gc": "collected before and disabled during each timed run",
            "shares": "exclusive wall time of wrapped package functions; 'everything_else' = wall - "
                      "(LU + pointwise + assembly); percentages of the instrumented run's wall time",
        },
        "not_instrumented": sorted(clock.missing),
        "cases": results,
    }
    _common.write_json(args.output, out)
    log(f"wrote {args.output}")
    return 0 if passed else 2


if __name__ == "__main__":
    sys.exit(main())
