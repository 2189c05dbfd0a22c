"""Zero-temperature walls: exact linear solution, perturbation theory, finite-T limit,
independent references, cut-off/resolution independence, IR classification.

References
----------
* ``tests/reference/wall_reference.py`` and ``wall_values.json``: independent scipy shooting
  (proper-distance gauge) and ``solve_bvp`` (a second gauge) references; derivations in
  ``docs/physics/domain_walls.md``.
* ``tests/reference/brane_reference.py`` is not used here; the finite-temperature check uses
  the package's own :class:`QLatticeBrane` against the package's :class:`QLatticeWall`, which
  share no equations (different gauges, horizon vs IR cut-off).
"""

import json
import math
import os
import warnings

import numpy as np
import pytest
from scipy.integrate import quad

from spectral_bulk.backgrounds import DomainWall, QLatticeBrane, QLatticeWall
from spectral_bulk.models import BulkModel, builtin

from .problems import load_reference

HERE = os.path.dirname(os.path.abspath(__file__))


REF = load_reference("wall_reference")
with open(os.path.join(HERE, "reference", "wall_values.json")) as fh:
    VALUES = {round(v["lam"], 6): v for v in json.load(fh)["values"]}


@pytest.fixture(scope="module")
def wall():
    return QLatticeWall(builtin("mass2"))


def test_linearised_scalar_is_z_exp_minus_kz(wall):
    """On AdS4 with m^2 = -2 and momentum k the scalar equation is
    z^2 rho'' - 2 z rho' + (2 - k^2 z^2) rho = 0; with rho = z f it reads f'' = k^2 f, so the
    solution regular at the Poincare horizon is rho = lam z exp(-k z) (exact; derivation in
    docs/physics/domain_walls.md section 3).  At lam = 1e-4 the back-reaction is O(lam^3)."""
    lam = 1e-4
    sol = wall.solve(lam=lam)
    assert sol.converged, sol.message
    prof = wall.profile(sol, 300)
    z, rho = prof["z"], prof["rho"]
    keep = z < 20
    exact = lam * z * np.exp(-z)
    assert np.abs(rho[keep] - exact[keep]).max() < 1e-6 * lam
    assert abs(sol.observables["vev"] + lam) < 1e-9 * lam  # <O> = rho_2 = -k lam


def test_refractive_index_at_second_order(wall):
    """n - 1 = c2 (lam/k)^2 + O(lam^4).  Derivation (units k = 1, r = -log z): the xx - tt
    equations give the exact first integral (e^{2A+B} (B' - A'))' = -rho^2 e^{2A-B}/2.  At
    second order, on the background A = B = r with rho1 = lam z e^{-z},
    gamma = B' - A' solves gamma' + 3 gamma = -z^2 rho1^2 / 2 with no z^3 mode in the IR:
    gamma(z) = -(z^3/2) int_z^inf rho1(t)^2 / t^2 dt.  Then
    log n = -int gamma dr = -int_0^inf gamma(z) dz / z, so
    c2 = (1/2) int_0^inf z^2 [ int_z^inf e^{-2t} dt ] dz, evaluated here with quad."""
    inner = lambda z: quad(lambda t: np.exp(-2 * t), z, np.inf, epsabs=1e-14)[0]  # noqa: E731
    c2 = 0.5 * quad(lambda z: z**2 * inner(z), 0, np.inf, epsabs=1e-14, epsrel=1e-13)[0]
    assert abs(c2 - 1 / 16) < 1e-10  # the closed form of the same integral
    lams = (0.02, 0.04)
    vals = [(wall.solve(lam=lam).observables["n"] - 1) / lam**2 for lam in lams]
    # Richardson in lam^2 removes the O(lam^4) term
    extrapolated = (vals[0] * lams[1] ** 2 - vals[1] * lams[0] ** 2) / (lams[1] ** 2 - lams[0] ** 2)
    assert abs(extrapolated - c2) < 1e-7


@pytest.mark.parametrize("lam", [0.1, 0.5, 1.0, 2.0, 4.0, 6.0])
def test_against_independent_references(wall, lam):
    # scipy shooting in the proper-distance gauge, cross-checked by solve_bvp (wall_values.json)
    ref = VALUES[round(lam, 6)]
    obs = wall.solve(lam=lam).observables
    assert abs(obs["n"] / ref["n"] - 1) < 1e-10
    assert abs(obs["vev"] - ref["vev"]) < 1e-8 * max(1.0, abs(ref["vev"]))
    assert abs(obs["energy"] - ref["energy"]) < 1e-8 * max(1.0, abs(ref["energy"]))
    assert abs(obs["anisotropy_J"] - ref["anisotropy"]) < 1e-8 * max(1.0, abs(ref["anisotropy"]))
    assert obs["constraint"] < 1e-8 and obs["cutoff"] < 1e-6
    assert obs["returns_to_uv"] == 1


def test_cutoff_and_resolution_independence():
    model = builtin("mass2")
    ns = []
    for cutoff, n in ((20.0, 64), (30.0, 64), (24.0, 128)):
        obs = QLatticeWall(model, cutoff=cutoff, n=n).solve(lam=2.0).observables
        ns.append(obs["n"])
    assert np.ptp(ns) < 1e-10 * ns[0]


def test_exponential_convergence_in_the_number_of_points():
    model = builtin("mass2")
    ref = QLatticeWall(model, n=200, n_max=200).solve(lam=1.0).observables["n"]
    errs = []
    for n in (40, 60, 80, 100, 120):
        w = QLatticeWall(model, n=n, n_max=n)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            errs.append(abs(w.solve(lam=1.0).observables["n"] - ref))
    errs = np.array(errs)
    live = errs[:-1] > 1e-13
    # each 20 more points gain at least a factor 5 (geometric convergence) until rounding
    assert np.all(errs[1:][live] < errs[:-1][live] / 5), errs
    assert errs[-1] < 1e-11


def test_finite_temperature_entropy_tends_to_n():
    """At fixed lam/k, s/s0 -> n as T/k -> 0: deep in the IR the brane sits in AdS4 with
    t, y rescaled by e^{a_IR} and x by e^{b_IR}, so s = s_hat e^{a_IR + b_IR} with
    s_hat = (16 pi^3/9) T_hat^2, T_hat = e^{-a_IR} T, giving s/s0 = e^{b_IR - a_IR} = n.  The
    only zero-momentum irrelevant deformation of the IR is the stress tensor (dimension 3),
    so the corrections are analytic in (T/k)^3, up to exp(-(3/2 pi) k/(n T)) from the lattice
    mode reaching the horizon (docs/physics/domain_walls.md section 8).  We fit
    n + a (T/k)^3 + b (T/k)^6 at k/T = 30..60 where the exponential term is below 1e-6."""
    lam_over_k = 1.0
    n_wall = QLatticeWall(builtin("mass2")).solve(lam=lam_over_k).observables["n"]
    bg = QLatticeBrane(builtin("mass2"), n=40, n_max=240)
    s0 = 64 * math.pi**3 / 9
    xs, ys, prev = [], [], None
    for kT in (10.0, 20.0, 30.0, 40.0, 50.0, 60.0):  # each solve starts from the previous one
        sol = bg.solve(lam=lam_over_k * kT, k=kT, guess=prev)
        assert sol.converged, sol.message
        prev = sol
        if kT >= 30:
            xs.append(1 / kT)
            ys.append(sol.observables["s"] / s0)
    xs, ys = np.array(xs), np.array(ys)
    X = np.stack([np.ones_like(xs), xs**3, xs**6], axis=1)
    coef = np.linalg.lstsq(X, ys, rcond=None)[0]
    assert abs(coef[0] - n_wall) < 2e-5
    assert abs(ys[-1] - n_wall) > 1e-5  # the finite-T correction is visible, so the fit matters


def test_superpotential_flow_against_solve_ivp():
    # W = 2 + phi^2/4 + phi^3/12 - phi^4/16, V = 2 W'^2 - (3/2) W^2 (docs section 6): the flow
    # to the IR fixed point phi = 2 against the first-order flow integrated with solve_ivp
    W = lambda p: 2 + p**2 / 4 + p**3 / 12 - p**4 / 16  # noqa: E731
    Wp = lambda p: p / 2 + p**2 / 4 - p**3 / 4  # noqa: E731
    model = BulkModel(lambda p: 2 * Wp(p) ** 2 - 1.5 * W(p) ** 2, scalars=("phi",))
    dw = DomainWall(model, n=80)
    sol = dw.solve(1.0)
    assert sol.converged, sol.message
    obs = sol.observables
    assert obs["L_ir"] == pytest.approx(0.75) and obs["Delta_ir"] == pytest.approx(21 / 4)
    assert abs(obs["vev"] - 0.5) < 1e-8  # <O> = lam^2 / 2 for this W
    z = np.geomspace(1e-2, 30.0, 40)
    ref = REF.superpotential_flow(z, 1.0)
    phi_ref = ref["phi"] if isinstance(ref, dict) else ref[0]
    assert np.abs(sol(z, field="psi") * z - phi_ref).max() < 1e-8


def test_homogeneous_flow_without_ir_fixed_point_is_reported_singular():
    dw = DomainWall(builtin("mass2"))
    sol = dw.solve(1.0)
    assert sol.regular is False and not sol.converged
    assert "singular" in sol.message


def test_large_coupling_family_finds_the_critical_coupling():
    """Following lam/k upwards, n diverges as lam -> lam_c and the flow lingers near the
    AdS3 x R scaling solution rho = sqrt 6 (docs section 7; independent shooting value
    lam_c = 8.7710267981, exponent nu = 2.8291567)."""
    w = QLatticeWall(builtin("mass2"))
    start = w.solve(lam=6.0)
    br = w.follow(start, stop=20.0, step=0.3, max_points=80, bounds={"n": (None, 1e6)})
    assert br.status == 1 and "n = 1e+06" in br.message
    ds = br.to_dataset()
    assert float(ds["cert_constraint"].max()) < 1e-6 and float(ds["cert_cutoff"].max()) < 1e-6
    lam_c = ds.attrs["critical_coupling_estimate"]
    assert abs(lam_c - 8.7710267981) < 1e-4
    assert abs(ds.attrs["critical_exponent_estimate"] - 2.8291567) < 0.03
    # the onset of the intermediate AdS3 x R regime is an event located by bisection
    ir = [e for e in br.events if e.kind == "ir_change"]
    assert len(ir) == 1 and 8.0 < ir[0].value < lam_c
    last = w.observables(br.solutions[-1])
    assert "AdS3xR" in " ".join(last["regimes"]) and last["intermediate_efolds"] > 1.0
    assert last["returns_to_uv"] == 1
