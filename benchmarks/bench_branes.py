#!/usr/bin/env python
"""Q-lattice black branes: one solve against scipy's solve_bvp, and a family's throughput.

Usage::

    python benchmarks/bench_branes.py [--quick] [--rounds N] [--output PATH]

Model ``V = -6 - rho^2``, ``Phi = rho^2`` (builtin ``"mass2"``), standard quantisation,
everything in units of ``T``.  Everything is measured in one process; the timed
configurations run interleaved in rounds (A B C ... A B C ...), and medians, interquartile
ranges and ratios of medians are reported.  BLAS is pinned to one thread before numpy is
imported.  Results go to ``benchmarks/results/branes.json``.

a. One solve at ``(lam/T, k/T) = (1, 1)`` to ``1e-10`` relative in ``s/T^2``.

   * Truth: ``QLatticeBrane(n=48, n_max=48, tol=1e-13)``, cross-checked against the
     independent scipy shooting of ``tests/reference/brane_reference.py`` (its own error
     estimate) and against a tightly converged solve_bvp run (below).
   * spectral_bulk: ``QLatticeBrane(model, n=N, n_max=N)`` (default ``tol = 1e-10``); ``N``
     is scanned and the smallest ``N`` whose ``s`` is within ``1e-10`` of the truth *and*
     whose solution passes the package's own certificate (``converged``) is timed.  The
     smallest ``N`` within ``1e-10`` regardless of the certificate is timed as well.
     Timed call: ``bg.solve(lam=1.0, k=1.0)`` from the trivial background (the object's
     remembered last solution is cleared before each call; its cached ``Problem`` is
     reused), which includes the package's observables and certificate (with the
     extended-precision refinement of the boundary data).  Variants: a new
     ``QLatticeBrane`` per call, and ``extended=False`` (double-precision observables).
   * scipy: ``scipy.integrate.solve_bvp`` on the areal-gauge Q-lattice brane equations of
     ``tests/reference/brane_reference.py`` (``_rhs``), written as a first-order system in
     the regular variables ``y = (H, chi, w, Omega, phi, q)`` (``phi = rho/z``, ``q = phi'``,
     ``H = (f - 1 - z^2 phi^2/4)/z^3``, ``Omega = w'/z^2``; docs/physics/black_branes.md
     section 0).  For ``V = -6 - rho^2`` and ``Phi = rho^2`` the potential remainder ``U``
     vanishes and ``Phi/z^2 = phi^2``, ``Phi'/z = 2 phi`` exactly, so the right-hand side is
     regular at ``z = 0`` and the interval is ``[0, 1 - delta]``.  Conditions: ``phi(0) =
     lambda_b`` at the boundary; at ``z = 1 - delta`` the horizon data of the reference
     (``chi(1) = w(1) = 0``, ``f(1) = 0``, regularity of ``w`` and ``rho``, all functions of
     the unknown parameter ``rho_h``) -- first-order Taylor for the components with regular
     equations (``H, chi, w, phi``) and the horizon values for ``Omega, q`` (whose equations
     carry ``1/f``; the mismatch excites the singular mode ``c/(1 - z)`` with ``c =
     O(delta^2)``, so the error is ``O(delta^2)``).  ``s/T^2 = 64 pi^3 / (f'(1)^2 e^{chi(0)})``
     with ``f'(1) = k_b^2 rho_h^2/4 - 3 - rho_h^2/2``.
     solve_bvp fixes the bulk parameters ``(lambda_b, k_b)`` (units ``z_h = 1``, horizon
     normalisation ``chi(1) = w(1) = 0``), not ``lam/T`` and ``k/T``: they are taken from the
     shooting reference at the target point, and the BVP solution's own ``lam/T``, ``k/T``
     are reported (their deviation from 1 is part of the verified error).
     Timed call: one ``solve_bvp`` from a trivial guess (``phi = lambda_b (1 - z)``, ``H =
     -1 - phi^2/4``, the rest zero, ``rho_h = 0``) plus the evaluation of ``s/T^2``.  The
     tuning scans ``delta``, ``tol`` (= ``bc_tol``), the initial mesh (size, uniform or
     graded towards the horizon) and the Jacobian (scipy's finite differences or a
     complex-step one); the fastest configuration whose ``s`` is within ``1e-10`` of the
     truth is timed ("tuned": it uses the known answer, an advantage a user would not
     have), and a fixed conservative configuration as well.
   * Warm start (secondary): both from the solution at ``(lam/T, k/T) = (0.9, 1)``.

   * The method on identical equations: ``spectral_bulk.solve`` on the very system solve_bvp
     gets (``ArealBVP.spectral_problem``: the same right-hand side, the rows of ``Omega`` and
     ``q`` multiplied by ``f`` so that at the horizon grid point they are the regularity
     conditions), from the same trivial guess, ``tol = 1e-10``, smallest ``n`` within
     ``1e-10`` with and without a converged certificate.  This separates the cost of the
     method from that of the generic Einstein evaluator the package's branes use.

   Ratio reported: median solve_bvp time / median spectral_bulk time (issue target >= 20),
   for the package's brane solve (headline) and for the engine on identical equations.

b. A family of 100 points in ``lam/T`` at ``k/T = 1``: ``QLatticeBrane(model)`` (defaults
   ``n = 24``, ``tol = 1e-10``), ``.follow("lam", start={"lam": 0.05, "k": 1.0}, step=0.05,
   max_step=0.05, stop=20.0, max_points=100)``.  Rounds alternate a plain run (points per
   second) and an instrumented run (exclusive timers on: ``Brane.family_observables`` =
   observables and certificate besides the refinement's residuals (the gauge check's
   evaluation stays here);
   ``Problem.linearize / param_derivative / residual / linearize_with_param /
   residual_extended`` = pointwise evaluations, wherever they happen; ``DenseSolver`` and
   the dense assembly = linear algebra; the rest = continuation bookkeeping).  ``Branch.to_dataset()`` (which adds the first-law
   check) is timed separately.  Verification: ``s`` at the first, middle and last points
   against the shooting reference and against direct ``n = 48`` solves; worst certificates.

Exit status: 0 when every accuracy verification passed (missed speed targets are reported,
not fatal), 2 otherwise.
"""

import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import _common  # noqa: E402  (first: it pins BLAS to one thread before numpy is imported)
from _common import log, quiet, ratio, summary  # noqa: E402

import importlib.util  # noqa: E402
import json  # noqa: E402
import math  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402
from scipy.integrate import solve_bvp  # noqa: E402

from spectral_bulk import Chebyshev, Problem, solve  # noqa: E402
from spectral_bulk.backgrounds import QLatticeBrane  # noqa: E402
from spectral_bulk.backgrounds._brane import Brane  # noqa: E402
from spectral_bulk.models import builtin  # noqa: E402

ROOT = _common.REPO_ROOT
DEFAULT_OUTPUT = _common.default_output("branes.json")
TARGET_RTOL = 1e-10
TARGET_RATIO = 20.0
LAM_T, K_T = 1.0, 1.0
WARM_LAM_T = 0.9


def _load_reference():
    path = os.path.join(ROOT, "tests", "reference", "brane_reference.py")
    spec = importlib.util.spec_from_file_location("brane_reference", path)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


REF = _load_reference()


# =============================================================================
# scipy solve_bvp formulation (areal gauge, regular variables)
# =============================================================================
class ArealBVP:
    """The Q-lattice brane of V = -6 - rho^2, Phi = rho^2 as a solve_bvp problem.

    Bulk parameters ``lam_b`` (phi(0)) and ``kb`` (lattice wavenumber with chi(1) = w(1) = 0),
    units z_h = 1.  Unknown parameter: ``rho_h``.  See the module notes.
    """

    def __init__(self, lam_b, kb, delta):
        self.lam_b, self.kb, self.delta = float(lam_b), float(kb), float(delta)

    def terms(self, z, y):
        """``(f, regular, singular)``: ``y' = regular + singular / f`` componentwise.

        docs/physics/black_branes.md section 0 (regular variables), with ``U = 0``,
        ``Phi/z^2 = phi^2``, ``Phi'/z = 2 phi``; same algebra as ``brane_reference._rhs``.
        Only ``Omega`` and ``q`` have a singular part (``None`` for the others).
        """
        H, chi, w, Om, phi, q = y
        kb2 = self.kb * self.kb
        rp = phi + z * q
        Ft = 0.25 * phi * phi + z * H              # (f - 1)/z^2
        f = 1.0 + z * z * Ft
        ew = np.exp(-w)
        z2 = z * z
        chi_z = 0.5 * (rp * rp + z2 * z2 * Om * Om)  # chi'/z
        chip = z * chi_z
        Hp = 0.25 * q * q + 0.25 * Ft * rp * rp + 0.25 * z2 * f * Om * Om + 0.25 * kb2 * ew * phi * phi
        Ftp = H + 0.5 * phi * q + z * Hp
        fp = 2.0 * z * Ft + z2 * Ftp
        fp_z = 2.0 * Ft + z * Ftp
        regular = [Hp, chip, z2 * Om, 0.5 * chip * Om, q, 0.5 * chi_z * rp]
        singular = [None, None, None, -0.5 * kb2 * ew * phi * phi - fp * Om,
                    None, 2.0 * phi * Ft + kb2 * ew * phi - fp_z * rp]
        return f, regular, singular

    def rhs(self, z, y, p=None):
        f, regular, singular = self.terms(z, y)
        return np.array([r if sg is None else r + sg / f for r, sg in zip(regular, singular)])

    def spectral_problem(self, n):
        """The same equations as a :class:`spectral_bulk.Problem` on ``n`` Chebyshev points.

        The method comparison on identical equations: the rows of ``Omega`` and ``q`` are
        multiplied by ``f``, so at the horizon (``f(1) = 0``) they are the regularity
        conditions and need no boundary condition; ``phi(0) = lambda_b``, ``f(1) = 0``
        (``H(1) = -1 - phi(1)^2/4``) and ``chi(1) = w(1) = 0`` as in :meth:`bc`, with ``rho_h =
        phi(1)`` a field value instead of a parameter (no ``delta``: the horizon is a grid
        point).
        """
        names = ["H", "chi", "w", "Om", "phi", "q"]

        def equations(c, fs, p):
            y = [fs[nm] for nm in names]
            f, regular, singular = self.terms(c.z, y)
            return [fs[nm + "_z"] - r if sg is None else f * (fs[nm + "_z"] - r) - sg
                    for nm, r, sg in zip(names, regular, singular)]

        def boundary(c, fs, p):
            return [None, None, None, None, fs.phi - self.lam_b, None]

        def horizon(c, fs, p):
            return [fs.H + 1.0 + 0.25 * fs.phi * fs.phi, fs.chi, fs.w, None, None, None]

        return Problem(Chebyshev(n, (0.0, 1.0), "z"), names, equations,
                       {"left": boundary, "right": horizon}, {}, name="areal_brane")

    def spectral_guess(self, z):
        """The trivial guess of :meth:`trivial_guess` on the collocation points."""
        y, _ = self.trivial_guess(z)
        return dict(zip(["H", "chi", "w", "Om", "phi", "q"], y))

    def spectral_entropy(self, res):
        """``s/T^2`` of a :func:`spectral_bulk.solve` result (as :meth:`observables`)."""
        rh, chi0 = float(res.fields["phi"][-1]), float(res.fields["chi"][0])
        fp1 = 0.25 * self.kb * self.kb * rh * rh - 3.0 - 0.5 * rh * rh
        T = abs(fp1) * math.exp(0.5 * chi0) / (4.0 * math.pi)
        return 4.0 * math.pi / T**2

    def jac(self, z, y, p=None):
        """Complex-step Jacobian (exact to rounding; the right-hand side is analytic)."""
        n, m = y.shape
        h = 1e-30
        J = np.empty((n, n, m))
        for j in range(n):
            yc = y.astype(complex)
            yc[j] += 1j * h
            J[:, j, :] = self.rhs(z, yc).imag / h
        return J, np.zeros((n, 1, m))

    def horizon(self, rh):
        """Horizon values (z = 1) of y for rho(1) = rh (docs section 0, regularity)."""
        kb2 = self.kb * self.kb
        fp1 = 0.25 * kb2 * rh * rh - 3.0 - 0.5 * rh * rh
        Om = -0.5 * kb2 * rh * rh / fp1
        rp1 = rh * (kb2 - 2.0) / fp1
        zero = 0.0 * rh
        return np.array([-1.0 - 0.25 * rh * rh, zero, zero, Om, rh, rp1 - rh])

    def bc(self, ya, yb, p):
        yh = self.horizon(p[0])
        d = self.rhs(1.0, yh)  # only the regular components (0, 1, 2, 4) are used
        tgt = yh.copy()
        for i in (0, 1, 2, 4):
            tgt[i] = yh[i] - self.delta * d[i]
        return np.concatenate([[ya[4] - self.lam_b], yb - tgt])

    def bc_jac(self, ya, yb, p):
        A = np.zeros((7, 6))
        A[0, 4] = 1.0
        B = np.zeros((7, 6))
        B[1:, :] = np.eye(6)
        h = 1e-30
        P = (self.bc(ya.astype(complex), yb.astype(complex), [p[0] + 1j * h]).imag / h).reshape(7, 1)
        return A, B, P

    def mesh(self, m0, kind):
        b = 1.0 - self.delta
        t = np.linspace(0.0, 1.0, m0)
        return b * t if kind == "uniform" else b * (1.0 - (1.0 - t) ** 2)  # graded towards z = 1

    def trivial_guess(self, z):
        y = np.zeros((6, z.size))
        phi = self.lam_b * (1.0 - z)
        y[4], y[5], y[0] = phi, -self.lam_b, -1.0 - 0.25 * phi * phi
        return y, np.array([0.0])

    def solve(self, tol, m0=None, mesh="graded", jac="cs", max_nodes=5000, start=None):
        if start is None:
            z = self.mesh(m0, mesh)
            y0, p0 = self.trivial_guess(z)
        else:
            z, y0, p0 = start.x, start.y, start.p
        kw = dict(fun_jac=self.jac, bc_jac=self.bc_jac) if jac == "cs" else {}
        sol = solve_bvp(self.rhs, self.bc, z, y0, p=p0, tol=tol, bc_tol=tol, max_nodes=max_nodes, **kw)
        return sol, self.observables(sol)

    def observables(self, sol):
        rh = float(sol.p[0])
        kb2 = self.kb * self.kb
        fp1 = 0.25 * kb2 * rh * rh - 3.0 - 0.5 * rh * rh
        chi0, w0, lam0 = float(sol.y[1, 0]), float(sol.y[2, 0]), float(sol.y[4, 0])
        try:
            T = abs(fp1) * math.exp(0.5 * chi0) / (4.0 * math.pi)
            return {"s": 4.0 * math.pi / T**2, "lam": lam0 / T, "k": self.kb * math.exp(-0.5 * w0) / T,
                    "rho_h": rh, "status": int(sol.status), "nodes": int(sol.x.size)}
        except (OverflowError, ZeroDivisionError, ValueError):
            return {"s": float("nan"), "lam": float("nan"), "k": float("nan"), "rho_h": rh,
                    "status": int(sol.status), "nodes": int(sol.x.size)}


def bulk_parameters(lam_T, k_T):
    """(lambda_b, k_b, shooting result) at the target point from the shooting reference."""
    V, dV, Phi, dPhi = REF.quadratic_potential()
    r = REF.qlattice_brane_shooting(V, dV, Phi, dPhi, lam_T, k_T, error_estimate=True)
    m = REF._Model(V, dV, Phi, dPhi)
    raw = REF._integrate(r["rho_h"], r["k_bulk"], m, 1e-12)
    return float(raw["lam"]), float(r["k_bulk"]), r


# =============================================================================
# instrumentation
# =============================================================================
class Clock(_common.Clock):
    """Exclusive timers on the observables and on the engine's pieces."""

    def install(self):
        self.patch(Brane, "family_observables", self.timer("observables"))
        self.patch(Brane, "observables", self.timer("observables"))
        self.time_newton_core()


# =============================================================================
# part a
# =============================================================================
def part_a(quick, rounds):
    model = builtin("mass2")
    out = {"point": {"lam_over_T": LAM_T, "k_over_T": K_T}, "target_rtol_s": TARGET_RTOL,
           "target_ratio_bvp_over_spectral": TARGET_RATIO}

    # ---- truth and its cross-checks
    t0 = time.perf_counter()
    fine = QLatticeBrane(model, n=48, n_max=48, tol=1e-13).solve(lam=LAM_T, k=K_T)
    fine2 = QLatticeBrane(model, n=64, n_max=64, tol=1e-13).solve(lam=LAM_T, k=K_T)
    s_true = fine.observables["s"]
    lam_b, kb, shoot = bulk_parameters(LAM_T, K_T)
    truth = {
        "s": s_true, "converged": bool(fine.converged and fine2.converged),
        "n48_vs_n64_rel": abs(fine2.observables["s"] / s_true - 1),
        "rho_h": fine.observables["rho_h"],
        "shooting_s": shoot["s"], "shooting_s_err_estimate": shoot["errors"]["s"],
        "shooting_vs_truth_rel": abs(shoot["s"] / s_true - 1),
        "bulk_parameters": {"lambda_b": lam_b, "k_b": kb, "rho_h_shooting": shoot["rho_h"],
                            "source": "shooting reference tests/reference/brane_reference.py at (1, 1)"},
    }
    # tight solve_bvp as a third route
    tight_sol, tight = quiet(ArealBVP(lam_b, kb, 1e-6).solve, 1e-8, 200, "graded", "cs", 200000)
    truth["bvp_tight"] = {"delta": 1e-6, "tol": 1e-8, "s": tight["s"], "status": tight["status"],
                          "nodes": tight["nodes"], "rel_vs_truth": abs(tight["s"] / s_true - 1),
                          "lam_T_minus_1": tight["lam"] - 1, "k_T_minus_1": tight["k"] - 1}
    # sensitivity of s to the point, for the error due to the BVP's own (lam/T, k/T)
    h = 1e-3
    def sp(lam, k):
        return QLatticeBrane(model, n=32, n_max=32, tol=1e-13).solve(lam=lam, k=k).observables["s"]
    ds_dlam = (sp(LAM_T + h, K_T) - sp(LAM_T - h, K_T)) / (2 * h)
    ds_dk = (sp(LAM_T, K_T + h) - sp(LAM_T, K_T - h)) / (2 * h)
    truth["ds_dlam"], truth["ds_dk"] = ds_dlam, ds_dk
    truth_ok = (truth["converged"] and truth["n48_vs_n64_rel"] < 1e-13
                and truth["shooting_vs_truth_rel"] * s_true <= shoot["errors"]["s"] + 1e-12 * s_true
                and truth["bvp_tight"]["rel_vs_truth"] < 1e-11)
    truth["passed"] = bool(truth_ok)
    truth["setup_s"] = time.perf_counter() - t0
    out["truth"] = truth
    log(f"  truth s/T^2 = {s_true:.15f} (n=48 vs n=64: {truth['n48_vs_n64_rel']:.1e}; shooting "
        f"{shoot['s']:.15f} +- {shoot['errors']['s']:.1e}; tight solve_bvp rel "
        f"{truth['bvp_tight']['rel_vs_truth']:.1e})"
        f" -> {'ok' if truth_ok else 'FAILED'}")

    # ---- spectral: scan n
    scan = []
    for n in range(8, 25, 2):
        bg = QLatticeBrane(model, n=n, n_max=n)
        sol = quiet(bg.solve, lam=LAM_T, k=K_T)
        ts = []
        for _ in range(2 if quick else 3):
            bg._last = None
            t1 = time.perf_counter()
            quiet(bg.solve, lam=LAM_T, k=K_T)
            ts.append(time.perf_counter() - t1)
        scan.append({"n": n, "status": int(sol.status), "converged": bool(sol.converged),
                     "iterations": int(sol.iterations), "tail": float(sol.observables["tail"]),
                     "rel_err_s": abs(sol.observables["s"] / s_true - 1), "time_s": float(np.median(ts))})
    out["spectral_scan"] = scan
    ok_any = [r for r in scan if r["rel_err_s"] <= TARGET_RTOL]
    ok_cert = [r for r in ok_any if r["converged"]]
    n_any = ok_any[0]["n"] if ok_any else None
    n_cert = ok_cert[0]["n"] if ok_cert else None
    log("  spectral scan (default tol 1e-10, n_max = n): " + ", ".join(
        f"n={r['n']}:{r['rel_err_s']:.0e}{'' if r['converged'] else '(uncert.)'}" for r in scan))

    # ---- the engine on the very equations solve_bvp gets (areal gauge, regular variables)
    areal = ArealBVP(lam_b, kb, 0.0)
    ascan = []
    areal_problems = {}
    for n in range(8, 33, 2):
        areal_problems[n] = pr = areal.spectral_problem(n)
        res = quiet(solve, pr, areal.spectral_guess, tol=1e-10)
        ascan.append({"n": n, "status": int(res.status), "converged": bool(res.converged),
                      "iterations": int(res.iterations), "tail": float(max(res.tail.values())),
                      "rel_err_s": abs(areal.spectral_entropy(res) / s_true - 1)})
    a_any = [r["n"] for r in ascan if r["rel_err_s"] <= TARGET_RTOL]
    a_cert = [r["n"] for r in ascan if r["rel_err_s"] <= TARGET_RTOL and r["converged"]]
    na_any, na_cert = (a_any[0] if a_any else None), (a_cert[0] if a_cert else None)
    out["areal_spectral_scan"] = ascan
    log("  engine on the areal equations (tol 1e-10): " + ", ".join(
        f"n={r['n']}:{r['rel_err_s']:.0e}{'' if r['converged'] else '(uncert.)'}" for r in ascan))

    # ---- solve_bvp: tuning scan
    deltas = (1e-4, 1e-5, 1e-6) if quick else (1e-3, 1e-4, 1e-5, 1e-6)
    tols = (1e-3, 1e-5, 1e-7) if quick else (1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8)
    m0s = (10, 40) if quick else (5, 10, 20, 40, 80)
    bscan = []
    for delta in deltas:
        prob = ArealBVP(lam_b, kb, delta)
        for tol in tols:
            for m0 in m0s:
                for mesh in ("uniform", "graded"):
                    for jac in ("fd", "cs"):
                        t1 = time.perf_counter()
                        _, o = quiet(prob.solve, tol, m0, mesh, jac)
                        dt = time.perf_counter() - t1
                        err = abs(o["s"] / s_true - 1) if np.isfinite(o["s"]) else float("inf")
                        bscan.append({"delta": delta, "tol": tol, "m0": m0, "mesh": mesh, "jac": jac,
                                      "status": o["status"], "nodes": o["nodes"], "rel_err_s": err,
                                      "time_s": dt})
    good = [r for r in bscan if r["status"] == 0 and r["rel_err_s"] <= TARGET_RTOL]
    # re-time the 8 fastest candidates (3 calls each) before choosing: one call is noisy
    cands = sorted(good, key=lambda r: r["time_s"])[:8]
    for r in cands:
        prob = ArealBVP(lam_b, kb, r["delta"])
        ts = []
        for _ in range(3):
            t1 = time.perf_counter()
            quiet(prob.solve, r["tol"], r["m0"], r["mesh"], r["jac"])
            ts.append(time.perf_counter() - t1)
        r["time_s_retimed"] = float(np.median(ts))
    tuned = min(cands, key=lambda r: r["time_s_retimed"]) if cands else None
    conservative = {"delta": 1e-6, "tol": 1e-6, "m0": 40, "mesh": "graded", "jac": "cs"}
    out["bvp_scan"] = {"configurations": len(bscan), "within_target": len(good),
                       "fastest_candidates": cands,
                       "grid": {"delta": deltas, "tol": tols, "m0": m0s, "mesh": ["uniform", "graded"],
                                "jac": ["fd (scipy default)", "cs (complex step)"]}}
    log(f"  solve_bvp scan: {len(bscan)} configurations, {len(good)} within 1e-10; tuned = "
        + (json.dumps({k: tuned[k] for k in ('delta', 'tol', 'm0', 'mesh', 'jac')}) if tuned else "none"))

    # ---- verification of the timed configurations
    def verify_bvp(cfg, start=None, point=(LAM_T, K_T)):
        prob = ArealBVP(lam_b, kb, cfg["delta"])
        _, o = quiet(prob.solve, cfg["tol"], cfg.get("m0"), cfg.get("mesh", "graded"), cfg["jac"], start=start)
        err = abs(o["s"] / s_true - 1)
        # error at the BVP's own point (its lam/T, k/T differ from 1 by its own error)
        own = abs(o["s"] - (s_true + ds_dlam * (o["lam"] - point[0]) + ds_dk * (o["k"] - point[1]))) / s_true
        return {**{k: cfg[k] for k in ("delta", "tol", "jac") if k in cfg}, "m0": cfg.get("m0"),
                "mesh": cfg.get("mesh"), "status": o["status"], "nodes": o["nodes"], "s": o["s"],
                "rel_err_s": err, "rel_err_s_at_own_point": own, "lam_T_minus_1": o["lam"] - point[0],
                "k_T_minus_1": o["k"] - point[1], "rho_h": o["rho_h"],
                "passed": bool(o["status"] == 0 and err <= TARGET_RTOL)}

    ver = {}
    if tuned:
        ver["bvp_tuned"] = verify_bvp(tuned)
    ver["bvp_conservative"] = verify_bvp(conservative)

    def verify_spec(n):
        sol = quiet(QLatticeBrane(model, n=n, n_max=n).solve, lam=LAM_T, k=K_T)
        err = abs(sol.observables["s"] / s_true - 1)
        return {"n": n, "status": int(sol.status), "converged": bool(sol.converged), "rel_err_s": err,
                "rel_err_rho_h": abs(sol.observables["rho_h"] / truth["rho_h"] - 1),
                "passed": bool(err <= TARGET_RTOL)}

    if n_cert:
        ver["spectral_certified"] = verify_spec(n_cert)
    for key, n in (("areal_engine_certified", na_cert), ("areal_engine_smallest", na_any)):
        if n:
            res = quiet(solve, areal.spectral_problem(n), areal.spectral_guess, tol=1e-10)
            err = abs(areal.spectral_entropy(res) / s_true - 1)
            ver[key] = {"n": n, "status": int(res.status), "converged": bool(res.converged),
                        "rel_err_s": err, "passed": bool(err <= TARGET_RTOL)}
    if n_any and n_any != n_cert:
        ver["spectral_smallest"] = verify_spec(n_any)

    # ---- warm start from (0.9, 1)
    lam_b9, kb9, _ = bulk_parameters(WARM_LAM_T, K_T)
    warm = {}
    warm_tol = None
    if tuned:
        prob9 = ArealBVP(lam_b9, kb9, tuned["delta"])
        sol9, _ = quiet(prob9.solve, tuned["tol"], tuned["m0"], tuned["mesh"], tuned["jac"])
        # the warm start needs its own tolerance: the start mesh is already adapted, so a
        # loose tol stops at once; take the fastest verified one
        wscan = []
        for wt in (1e-3, 1e-4, 1e-5, 1e-6, 1e-7, 1e-8):
            cfg = dict(tuned, tol=wt)
            v = verify_bvp(cfg, start=sol9)
            ts = []
            for _ in range(3):
                t1 = time.perf_counter()
                quiet(ArealBVP(lam_b, kb, tuned["delta"]).solve, wt, start=sol9, jac=tuned["jac"])
                ts.append(time.perf_counter() - t1)
            wscan.append({"tol": wt, "rel_err_s": v["rel_err_s"], "status": v["status"], "time_s": float(np.median(ts)),
                          "passed": v["passed"]})
        okw = [r for r in wscan if r["passed"]]
        warm["bvp_tol_scan"] = wscan
        if okw:
            warm_tol = min(okw, key=lambda r: r["time_s"])["tol"]
            warm["bvp"] = verify_bvp(dict(tuned, tol=warm_tol), start=sol9)
        else:
            warm["bvp"] = verify_bvp(dict(tuned, tol=1e-8), start=sol9)
            warm_tol = 1e-8
    n_w = n_cert or 16
    bg_w = QLatticeBrane(model, n=n_w, n_max=n_w)
    spec9 = quiet(bg_w.solve, lam=WARM_LAM_T, k=K_T)
    sw = quiet(bg_w.solve, lam=LAM_T, k=K_T, guess=spec9)
    warm["spectral"] = {"n": n_w, "converged": bool(sw.converged), "iterations": int(sw.iterations),
                        "rel_err_s": abs(sw.observables["s"] / s_true - 1)}
    warm["spectral"]["passed"] = bool(warm["spectral"]["rel_err_s"] <= TARGET_RTOL)
    ver["warm"] = warm
    out["verification"] = ver
    passed = truth_ok and all(v["passed"] for k, v in ver.items() if k != "warm") and \
        all(v["passed"] for k, v in warm.items() if k != "bvp_tol_scan")
    out["passed"] = bool(passed)

    # ---- interleaved timing
    funcs = {}
    objs = {}

    def cold_solve(key, **kwargs):
        """``bg.solve`` from the trivial background on a cached object (its Problem built once)."""
        objs[key] = QLatticeBrane(model, **kwargs)
        quiet(objs[key].solve, lam=LAM_T, k=K_T)  # builds and caches the Problem

        def run():
            bg = objs[key]
            bg._last = None
            return quiet(bg.solve, lam=LAM_T, k=K_T)
        return run

    if n_cert:
        funcs["spectral (certified n)"] = cold_solve("spec_cert", n=n_cert, n_max=n_cert)
        # the same without the extended-precision refinement of the boundary data (same s;
        # stress-tensor identities ~1e-9 instead of ~1e-12)
        funcs["spectral, double-precision observables"] = cold_solve(
            "spec_double", n=n_cert, n_max=n_cert, extended=False)

        def spec_fresh():
            return quiet(QLatticeBrane(model, n=n_cert, n_max=n_cert).solve, lam=LAM_T, k=K_T)
        funcs["spectral, new object per call"] = spec_fresh
    if n_any and n_any != n_cert:
        funcs["spectral (smallest n, uncertified)"] = cold_solve("spec_any", n=n_any, n_max=n_any)
    for label, n in (("certified n", na_cert), ("smallest n, uncertified", na_any)):
        if n and not (label != "certified n" and n == na_cert):
            def areal_run(pr=areal_problems[n]):
                res = quiet(solve, pr, areal.spectral_guess, tol=1e-10)
                return areal.spectral_entropy(res)
            funcs[f"engine on the areal equations ({label})"] = areal_run
    if tuned:
        pt = ArealBVP(lam_b, kb, tuned["delta"])
        funcs["solve_bvp tuned"] = lambda: quiet(pt.solve, tuned["tol"], tuned["m0"], tuned["mesh"], tuned["jac"])
    pc = ArealBVP(lam_b, kb, conservative["delta"])
    funcs["solve_bvp conservative"] = lambda: quiet(pc.solve, conservative["tol"], conservative["m0"],
                                                   conservative["mesh"], conservative["jac"])
    # warm starts
    bg_w2 = QLatticeBrane(model, n=n_w, n_max=n_w)
    quiet(bg_w2.solve, lam=WARM_LAM_T, k=K_T)
    funcs["spectral warm (from 0.9)"] = lambda: quiet(bg_w2.solve, lam=LAM_T, k=K_T, guess=spec9)
    if tuned:
        pw = ArealBVP(lam_b, kb, tuned["delta"])
        funcs["solve_bvp warm (from 0.9)"] = lambda: quiet(pw.solve, warm_tol, start=sol9, jac=tuned["jac"])
    for fun in funcs.values():  # warm-up
        fun()
    samples = {name: t["samples"] for name, t in _common.interleaved(funcs, rounds).items()}
    timing = {name: summary(s) for name, s in samples.items()}
    ratios = {}
    base = samples.get("spectral (certified n)")
    if base is not None:
        for name in ("solve_bvp tuned", "solve_bvp conservative"):
            if name in samples:
                ratios[f"{name} / spectral (certified n)"] = ratio(samples[name], base)
        ratios["spectral, new object per call / spectral (certified n)"] = ratio(
            samples["spectral, new object per call"], base)
        ratios["spectral, double-precision observables / spectral (certified n)"] = ratio(
            samples["spectral, double-precision observables"], base)
        if "solve_bvp tuned" in samples:
            ratios["solve_bvp tuned / spectral, double-precision observables"] = ratio(
                samples["solve_bvp tuned"], samples["spectral, double-precision observables"])
        if "solve_bvp tuned" in samples:
            ratios["solve_bvp tuned / spectral, new object per call"] = ratio(
                samples["solve_bvp tuned"], samples["spectral, new object per call"])
    if "spectral (smallest n, uncertified)" in samples and "solve_bvp tuned" in samples:
        ratios["solve_bvp tuned / spectral (smallest n, uncertified)"] = ratio(
            samples["solve_bvp tuned"], samples["spectral (smallest n, uncertified)"])
    for label in ("certified n", "smallest n, uncertified"):
        name = f"engine on the areal equations ({label})"
        if name in samples and "solve_bvp tuned" in samples:
            ratios[f"solve_bvp tuned / {name}"] = ratio(samples["solve_bvp tuned"], samples[name])
        if name in samples and "spectral (certified n)" in samples:
            ratios[f"spectral (certified n) / {name}"] = ratio(samples["spectral (certified n)"],
                                                               samples[name])
    if "solve_bvp warm (from 0.9)" in samples:
        ratios["solve_bvp warm / spectral warm"] = ratio(samples["solve_bvp warm (from 0.9)"],
                                                         samples["spectral warm (from 0.9)"])
    out["timing"] = timing
    out["ratios"] = ratios
    head = ratios.get("solve_bvp tuned / spectral (certified n)", {}).get("ratio", float("nan"))
    out["headline_ratio"] = head
    out["target_met"] = bool(head >= TARGET_RATIO)
    out["n_certified"], out["n_smallest"] = n_cert, n_any
    out["areal_engine_n_certified"], out["areal_engine_n_smallest"] = na_cert, na_any
    same = ratios.get("solve_bvp tuned / engine on the areal equations (certified n)", {})
    out["same_equations_ratio"] = same.get("ratio", float("nan"))
    out["tuned_config"] = {k: tuned[k] for k in ("delta", "tol", "m0", "mesh", "jac")} if tuned else None
    out["warm_bvp_tol"] = warm_tol
    out["conservative_config"] = conservative
    out["rounds"] = rounds

    # ---- where the spectral solve's time goes (one instrumented batch)
    clock = Clock()
    bgp = objs.get("spec_cert") or QLatticeBrane(model, n=16, n_max=16)
    reps = 5 if quick else 15
    with clock.installed():
        clock.reset()
        t1 = time.perf_counter()
        for _ in range(reps):
            bgp._last = None
            quiet(bgp.solve, lam=LAM_T, k=K_T)
        wall = time.perf_counter() - t1
    e = clock.excl
    out["spectral_breakdown_percent"] = {
        "pointwise_linearisation_and_residual": 100 * e["pointwise"] / wall,
        "linear_algebra": 100 * e["linear_algebra"] / wall,
        "observables_and_certificate": 100 * e["observables"] / wall,
        "rest": 100 * (wall - e["pointwise"] - e["linear_algebra"] - e["observables"]) / wall,
        "pointwise_calls_per_solve": clock.calls["pointwise"] / reps,
        "ms_per_pointwise_call": 1e3 * e["pointwise"] / max(1, clock.calls["pointwise"]),
    }
    out["evaluation_ms"] = evaluation_cost(bgp, 3 if quick else 9)
    return out


def evaluation_cost(bg, rounds):
    """Milliseconds per evaluation of a brane's equations by batch size, type and point kind.

    One evaluation of the generic Einstein evaluator at the certified solution of ``bg``,
    called directly (``bg._equations`` at interior points, ``bg._horizon_rows`` at the
    horizon): one point or all of them, one slot or the complex-step batch of the
    linearisation, double or long double.  Interleaved medians.  If the cost barely moves
    with the size of the batch, it is per operation (Python and numpy call overhead), not
    per point.
    """
    from spectral_bulk.newton._problem import Namespace

    sol = bg._last
    pr = sol.problem
    dv = pr.derivatives(sol.state)  # (nf, na, n)
    nf, na, n = dv.shape
    nslot = nf * na + 1
    z = pr.grid.coords[bg.coord]
    p = Namespace(sol.params, "parameter")

    def coords(zz):
        return Namespace({bg.coord: zz}, "coordinate")

    def slots(v):
        return np.broadcast_to(v[:, :, None, :], v.shape[:2] + (nslot, v.shape[-1])).astype(complex)

    mid = slice(n // 2, n // 2 + 1)
    cases = {
        f"interior, double, 1 slot x {n} points": (coords(z), dv),
        "interior, double, 1 slot x 1 point": (coords(z[mid]), dv[..., mid]),
        f"interior, complex, {nslot} slots x {n} points": (coords(z), slots(dv)),
        f"interior, long double, 1 slot x {n} points": (coords(z.astype(np.longdouble)),
                                                        dv.astype(np.longdouble)),
        "horizon, double, 1 slot x 1 point": (None, dv[..., -1:]),
        f"horizon, complex, {nslot} slots x 1 point": (None, slots(dv[..., -1:])),
    }
    funcs = {}
    for name, (c, vals) in cases.items():
        f = pr._namespace(vals)
        if c is None:
            funcs[name] = (lambda f=f: bg._horizon_rows(None, f, p))
        else:
            funcs[name] = (lambda c=c, f=f: bg._equations(c, f, p))
    timing = _common.interleaved(funcs, rounds, min_sample=0.02, warmup=True)
    return {name: 1e3 * summary(t["samples"])["median"] for name, t in timing.items()}


# =============================================================================
# part b
# =============================================================================
FAMILY = dict(start={"lam": 0.05, "k": 1.0}, step=0.05, max_step=0.05, stop=20.0, max_points=100)


def run_family():
    bg = QLatticeBrane(builtin("mass2"))
    with _common.gc_paused():
        t0 = time.perf_counter()
        c0 = time.process_time()
        br = quiet(bg.follow, "lam", **FAMILY)
        wall = time.perf_counter() - t0
        cpu = time.process_time() - c0
    return bg, br, wall, cpu


def part_b(quick, rounds):
    out = {"call": "QLatticeBrane(builtin('mass2')).follow('lam', start={'lam': 0.05, 'k': 1.0}, step=0.05, "
                   "max_step=0.05, stop=20.0, max_points=100)"}
    plain, instr = [], []
    clock = Clock()
    first = None
    for r in range(rounds):
        bg, br, wall, cpu = run_family()
        plain.append({"wall_s": wall, "cpu_s": cpu, "points": len(br), "points_per_s": len(br) / wall})
        if first is None:
            first = (bg, br)
        with clock.installed():
            clock.reset()
            _, br2, wall2, _ = run_family()
        e = dict(clock.excl)
        obs = e.get("observables", 0.0)
        pw = e.get("pointwise", 0.0)
        la = e.get("linear_algebra", 0.0)
        instr.append({"wall_s": wall2, "points": len(br2),
                      "observables_percent": 100 * obs / wall2,
                      "solving_percent": 100 * (wall2 - obs) / wall2,
                      "of_solving_pointwise_percent": 100 * pw / wall2,
                      "of_solving_linear_algebra_percent": 100 * la / wall2,
                      "of_solving_rest_percent": 100 * (wall2 - obs - pw - la) / wall2,
                      "observables_calls": clock.calls.get("observables", 0),
                      "pointwise_calls": clock.calls.get("pointwise", 0),
                      "ms_observables_per_point": 1e3 * obs / max(1, len(br2)),
                      "ms_per_pointwise_call": 1e3 * pw / max(1, clock.calls.get("pointwise", 0))})
        log(f"  round {r + 1}/{rounds}: plain {wall:.2f} s ({len(br)} points), instrumented {wall2:.2f} s")
    bg, br = first
    t0 = time.perf_counter()
    ds = br.to_dataset()
    t_ds = time.perf_counter() - t0
    out["points"] = len(br)
    out["status"], out["message"] = int(br.status), br.message
    out["lam_range"] = [float(br.values[0]), float(br.values[-1])]
    out["grid_sizes"] = sorted({int(p.prob.grid.shape[0]) for p in br.points})
    out["corrector_iterations_per_point"] = br.nit / len(br)
    out["jacobian_evaluations_per_point"] = br.njev / len(br)
    out["timing"] = {"wall_s": summary([p["wall_s"] for p in plain]),
                     "cpu_s": summary([p["cpu_s"] for p in plain]),
                     "points_per_s": summary([p["points_per_s"] for p in plain]),
                     "ms_per_point": summary([1e3 * p["wall_s"] / p["points"] for p in plain]),
                     "instrumented_wall_s": summary([p["wall_s"] for p in instr]),
                     "to_dataset_s": t_ds}
    out["instrumentation_overhead"] = out["timing"]["instrumented_wall_s"]["median"] / \
        out["timing"]["wall_s"]["median"] - 1
    keys = [k for k in instr[0] if k.endswith("percent") or k.startswith("ms_") or k.endswith("calls")]
    out["shares"] = {k: summary([p[k] for p in instr]) for k in keys}
    out["ratio_observables_to_solving"] = ratio([p["observables_percent"] for p in instr],
                                                [p["solving_percent"] for p in instr])
    out["rounds"] = rounds
    out["missing_instrumentation"] = sorted(clock.missing)

    # ---- verification
    certs = {k: float(np.nanmax(ds[k].values)) for k in ds.data_vars if k.startswith("cert_")}
    out["worst_certificates"] = certs
    V, dV, Phi, dPhi = REF.quadratic_potential()
    model = builtin("mass2")
    checks = []
    idx = [0, len(br) // 2, len(br) - 1]
    for i in idx:
        lam = float(br.values[i])
        s_fam = float(ds["s"].values[i])
        e_fam = float(ds["energy"].values[i])
        sh = REF.qlattice_brane_shooting(V, dV, Phi, dPhi, lam, 1.0, error_estimate=True)
        d = QLatticeBrane(model, n=48, n_max=48, tol=1e-12).solve(lam=lam, k=1.0).observables
        checks.append({"lam": lam, "s_family": s_fam, "s_shooting": sh["s"], "s_shooting_err": sh["errors"]["s"],
                       "rel_vs_shooting": abs(s_fam / sh["s"] - 1), "rel_vs_direct_n48": abs(s_fam / d["s"] - 1),
                       "energy_rel_vs_shooting": abs(e_fam / sh["energy"] - 1),
                       "energy_shooting_err_rel": sh["errors"]["energy"] / abs(sh["energy"]),
                       "energy_rel_vs_direct_n48": abs(e_fam / d["energy"] - 1)})
    out["checks"] = checks
    ok = (out["points"] >= 100 and br.success
          and all(c["rel_vs_shooting"] * 1.0 <= c["s_shooting_err"] / c["s_shooting"] + 1e-10 for c in checks)
          and all(c["rel_vs_direct_n48"] < 1e-10 for c in checks)
          and all(c["energy_rel_vs_direct_n48"] < 1e-8 for c in checks)
          and certs.get("cert_ward_trace", 1.0) < 1e-8 and certs.get("cert_residual", 1.0) <= 1e-10)
    out["passed"] = bool(ok)
    return out


# =============================================================================
# report
# =============================================================================
def ms(x):
    return f"{1e3 * x:8.2f}"


def report(a, b):
    log()
    _common.banner("a. One Q-lattice brane solve, V=-6-rho^2, Phi=rho^2, standard, (lam/T, k/T) = (1, 1), "
                   "target 1e-10 relative in s/T^2")
    t = a["truth"]
    log(f"truth s/T^2 = {t['s']:.15f}  [n=48 vs n=64 {t['n48_vs_n64_rel']:.1e}; shooting rel "
        f"{t['shooting_vs_truth_rel']:.1e} (its estimate {t['shooting_s_err_estimate'] / t['s']:.1e}); "
        f"tight solve_bvp rel {t['bvp_tight']['rel_vs_truth']:.1e}]")
    bp = t["bulk_parameters"]
    log(f"solve_bvp bulk parameters (from the shooting reference): lambda_b = {bp['lambda_b']:.15g}, "
        f"k_b = {bp['k_b']:.15g} (z_h = 1, chi(1) = w(1) = 0)")
    log(f"spectral: smallest n within 1e-10: {a['n_smallest']}; smallest n within 1e-10 and certified "
        f"(converged at tol 1e-10): {a['n_certified']}")
    log(f"solve_bvp tuned: {a['tuned_config']}; conservative: {a['conservative_config']}")
    log()
    _common.table_header(f"{'configuration':40s} {'median ms':>10s} {'IQR ms':>19s} {'rel err s':>10s} "
                         f"{'verified':>9s}")
    ver = a["verification"]
    errs = {"spectral (certified n)": ver.get("spectral_certified"),
            "spectral, new object per call": ver.get("spectral_certified"),
            "spectral, double-precision observables": ver.get("spectral_certified"),
            "spectral (smallest n, uncertified)": ver.get("spectral_smallest"),
            "solve_bvp tuned": ver.get("bvp_tuned"), "solve_bvp conservative": ver.get("bvp_conservative"),
            "spectral warm (from 0.9)": ver["warm"].get("spectral"),
            "solve_bvp warm (from 0.9)": ver["warm"].get("bvp"),
            "engine on the areal equations (certified n)": ver.get("areal_engine_certified"),
            "engine on the areal equations (smallest n, uncertified)": ver.get("areal_engine_smallest")}
    for name, s in a["timing"].items():
        v = errs.get(name) or {}
        log(f"{name:40s} {ms(s['median']):>10s} [{ms(s['q25'])},{ms(s['q75'])}] "
            f"{v.get('rel_err_s', float('nan')):10.1e} {'yes' if v.get('passed') else 'NO':>9s}")
    log()
    for name, r in a["ratios"].items():
        log(f"ratio {name:58s} {_common.fmt_ratio(r, 7, 'IQR of per-round ratios ')}")
    log(f"issue target solve_bvp/spectral >= {TARGET_RATIO:g}: {'MET' if a['target_met'] else 'NOT MET'} "
        f"(headline ratio {a['headline_ratio']:.3f}, medians over {a['rounds']} interleaved rounds)")
    log(f"  on identical equations (the engine on solve_bvp's areal-gauge system, n = "
        f"{a.get('areal_engine_n_certified')}): solve_bvp/engine {a.get('same_equations_ratio', float('nan')):.1f}")
    for k in ("bvp_tuned", "bvp_conservative"):
        if k in ver:
            v = ver[k]
            log(f"  {k}: status {v['status']}, {v['nodes']} nodes, lam/T-1 = {v['lam_T_minus_1']:.1e}, "
                f"k/T-1 = {v['k_T_minus_1']:.1e}, rel err at its own point {v['rel_err_s_at_own_point']:.1e}")
    if a.get("warm_bvp_tol") is not None:
        log(f"  warm starts: solve_bvp from the (0.9, 1) solution with tol {a['warm_bvp_tol']:g} (fastest verified); "
            f"spectral from the (0.9, 1) solution ({ver['warm']['spectral']['iterations']} Newton iterations)")
    bd = a["spectral_breakdown_percent"]
    log(f"spectral solve breakdown: pointwise evaluations (linearisations, residuals, extended residuals) "
        f"{bd['pointwise_linearisation_and_residual']:.0f}% ({bd['pointwise_calls_per_solve']:.0f} calls/solve, "
        f"{bd['ms_per_pointwise_call']:.1f} ms each), linear algebra {bd['linear_algebra']:.1f}%, "
        f"observables+certificate besides the refinement's residuals {bd['observables_and_certificate']:.0f}%, "
        f"rest {bd['rest']:.0f}%")
    log("one evaluation of the equations (ms, at the certified solution; per operation, not per point, "
        "when the sizes barely matter):")
    for name, v in a["evaluation_ms"].items():
        log(f"  {name:44s} {v:6.2f}")
    log()
    _common.banner("b. Family of 100 points in lam/T at k/T = 1 (QLatticeBrane.follow with observables)")
    tb = b["timing"]
    log(f"{b['points']} points, lam/T {b['lam_range'][0]:.3f} .. {b['lam_range'][1]:.4f}, grid sizes "
        f"{b['grid_sizes']}, status {b['status']} ({b['message']})")
    log(f"wall {tb['wall_s']['median']:.2f} s [IQR {tb['wall_s']['q25']:.2f}, {tb['wall_s']['q75']:.2f}], "
        f"{tb['points_per_s']['median']:.1f} points/s, {tb['ms_per_point']['median']:.1f} ms/point, "
        f"{b['corrector_iterations_per_point']:.2f} corrector it./point, "
        f"{b['jacobian_evaluations_per_point']:.2f} Jacobians/point; to_dataset {tb['to_dataset_s']:.2f} s")
    sh = b["shares"]
    log(f"share of follow() wall time (medians over {b['rounds']} instrumented runs, overhead "
        f"{100 * b['instrumentation_overhead']:.1f}%):")
    log(f"  observables + certificate  {sh['observables_percent']['median']:5.1f}%  "
        f"({sh['ms_observables_per_point']['median']:.1f} ms per point; the refinement's residuals are "
        f"counted as pointwise)")
    log(f"  pointwise evaluations      {sh['of_solving_pointwise_percent']['median']:5.1f}%  "
        f"({sh['ms_per_pointwise_call']['median']:.1f} ms/call: linearisations, residuals, the refinement's "
        f"extended residuals)")
    log(f"  linear algebra             {sh['of_solving_linear_algebra_percent']['median']:5.1f}%")
    log(f"  continuation/rest          {sh['of_solving_rest_percent']['median']:5.1f}%")
    log(f"  ratio observables/solving  {b['ratio_observables_to_solving']['ratio']:.3f}")
    log("worst certificates: " + ", ".join(f"{k[5:]} {v:.1e}" for k, v in b["worst_certificates"].items()))
    for c in b["checks"]:
        log(f"  check lam/T={c['lam']:.4f}: s rel vs shooting {c['rel_vs_shooting']:.1e} (shooting est. "
            f"{c['s_shooting_err'] / c['s_shooting']:.1e}), vs direct n=48 {c['rel_vs_direct_n48']:.1e}; energy rel "
            f"vs shooting {c['energy_rel_vs_shooting']:.1e} (est. {c['energy_shooting_err_rel']:.1e}), "
            f"vs n=48 {c['energy_rel_vs_direct_n48']:.1e}")


def main(argv=None):
    ap = _common.argument_parser(__doc__, DEFAULT_OUTPUT, "smaller scans, fewer rounds (about a minute)",
                                 rounds_help="rounds for part a (default 10 quick, 40 full)")
    args = ap.parse_args(argv)
    rounds_a = args.rounds or (10 if args.quick else 40)
    rounds_b = 1 if args.quick else 3
    t0 = time.perf_counter()
    with _common.one_blas_thread():
        log("part a: verification and tuning ...")
        a = part_a(args.quick, rounds_a)
        log("part b: family runs (plain / instrumented, alternating) ...")
        b = part_b(args.quick, rounds_b)
    total = time.perf_counter() - t0
    report(a, b)
    passed = a["passed"] and b["passed"]
    log()
    log(f"verification: part a {'passed' if a['passed'] else 'FAILED'}, part b "
        f"{'passed' if b['passed'] else 'FAILED'}; total {total:.1f} s")
    out = {"benchmark": "branes", "timestamp": _common.utc_timestamp(),
           "quick": bool(args.quick), "total_wall_s": total, "verification_passed": bool(passed),
           "targets": {"solve_bvp_over_spectral": TARGET_RATIO, "rel_accuracy_s": TARGET_RTOL},
           "machine": _common.machine_info(loadavg=True), "package_state": _common.package_state(ROOT),
           "single_solve": a, "family": b}
    _common.write_json(args.output, out)
    log(f"wrote {args.output}")
    return 0 if passed else 2


if __name__ == "__main__":
    sys.exit(main())
