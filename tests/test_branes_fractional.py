"""Black branes with a rational, non-integer Delta_- solved in u = z^{1/p}.

Model of our own: V = -6 + m^2 rho^2/2 + 0.15 rho^4 with m^2 = -35/16 (Delta_- = 5/4,
Delta_+ = 7/4), phase metric Phi = rho^2 + rho^4/5.  The potential is even, so the
exponents of psi = z^{-5/4} rho and of the metric are multiples of 1/2 and the brane is
solved in u = z^{1/2}.

References
----------
* Mass-dimension relation m^2 = Delta (Delta - d), the falloffs z^{Delta_-}, z^{Delta_+}
  and the vev <O> = (2 Delta_+ - d) beta: "Holographic renormalization", hep-th/0112119
  (common practice).
* Areal-gauge field equations of a homogeneous neutral brane: written out and derived in
  ``_shoot_homogeneous`` below (independent of the package), integrated with
  ``scipy.integrate.solve_ivp``.
"""

import math
import warnings

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from spectral_bulk.backgrounds import QLatticeBrane
from spectral_bulk.exceptions import ConvergenceWarning, ProblemDefinitionError, ResolutionWarning
from spectral_bulk.holography._branes import renormalisation_obstruction
from spectral_bulk.models import QLatticeModel

A = 1.25                      # Delta_-
M2 = A * (A - 3)              # -35/16
C4 = 0.15


def V(r):
    return -6 + M2 * r**2 / 2 + C4 * r**4


def dV(r):
    return M2 * r + 4 * C4 * r**3


@pytest.fixture(scope="module")
def model():
    return QLatticeModel(V, lambda r: r**2 + r**4 / 5, name="frac54")


def _solve(model, n, **params):
    bg = QLatticeBrane(model, n=n, n_max=n, tol=1e-12)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)  # coarse grids in the convergence scan
        return bg, bg.solve(**params)


def test_radial_power_and_layout(model):
    bg = QLatticeBrane(model)
    # Delta_+ - Delta_- = 1/2 and the potential is even: u = z^{1/2}; psi = lam + beta u + ...
    assert (bg.power, bg.coord, bg.n_vev) == (2, "u", 1)
    assert model.powers(["standard"]) == 4  # without the evenness argument


@pytest.mark.parametrize("lam, k", [(1.0, 1.0), (2.0, 0.5)])
def test_exponential_convergence_of_s_and_vev(model, lam, k):
    _, fine = _solve(model, 40, lam=lam, k=k)
    assert fine.converged
    errs_s, errs_v = [], []
    for n in (10, 12, 14, 16, 18):
        _, sol = _solve(model, n, lam=lam, k=k)
        errs_s.append(abs(sol.observables["s"] / fine.observables["s"] - 1))
        errs_v.append(abs(sol.observables["vev"] / fine.observables["vev"] - 1))
    for errs in (np.array(errs_s), np.array(errs_v)):
        live = errs[:-1] > 1e-12
        # each two more points gain at least a factor 4 until rounding
        assert np.all(errs[1:][live] < errs[:-1][live] / 4), errs
    # the converged values are stable to rounding between n = 24 and n = 40
    _, mid = _solve(model, 24, lam=lam, k=k)
    assert abs(mid.observables["s"] / fine.observables["s"] - 1) < 1e-13
    assert abs(mid.observables["vev"] / fine.observables["vev"] - 1) < 1e-9
    # the zz Einstein equation (not imposed in the tortoise gauge) holds
    assert fine.observables["constraint"] < 1e-11


def _shoot_homogeneous(rho_h, z_end=1e-6):
    """Areal-gauge shooting from the horizon z = 1 to the boundary (k = 0, no gauge field).

    Metric z^-2 [-f e^{-chi} dt^2 + dz^2/f + dx^2 + dy^2], scalar rho(z).  From the
    Einstein equations (tt - zz and tt components) and the Klein-Gordon equation with
    V(rho) (action R - (d rho)^2/2 - V):

        chi' = z rho'^2 / 2
        f'   = 3 f / z + V / (2 z) + z f rho'^2 / 4
        rho'' = V'(rho) / (z^2 f) - (f'/f) rho' + (chi'/2) rho' + 2 rho'/z

    Horizon (f(1) = 0, regular rho): f'(1) = V(rho_h)/2, rho'(1) = V'(rho_h)/f'(1); chi(1) = 0.
    Near z = 0: rho = lam z^a + beta z^{3-a} + O(z^{3a}), a = 5/4 (exponents 5/4, 7/4, 15/4 ...).
    With psi = rho z^{-a}: beta = z^{1-c} psi'/c + O(z^{4a - 3}), c = 3 - 2a, and
    lam = psi - beta z^c + O(z^{2a}).  Returns lam/T^a, <O>/T^{3-a} = c beta/T^{3-a}, s/T^2
    with T = |f'(1)| e^{chi(0)/2} / (4 pi), s = 4 pi (z_h = 1, boundary metric normalised).
    """
    a, c = A, 3 - 2 * A
    fp1 = V(rho_h) / 2
    rp1 = dV(rho_h) / fp1
    eps = 1e-7
    # one Taylor step off the horizon (f ~ fp1 (z - 1))
    y0 = [fp1 * (-eps), 0.0, rho_h - rp1 * eps, rp1]

    def rhs(z, y):
        f, chi, rho, rp = y
        chip = z * rp**2 / 2
        fp = 3 * f / z + V(rho) / (2 * z) + z * f * rp**2 / 4
        rpp = dV(rho) / (z**2 * f) - fp / f * rp + chip / 2 * rp + 2 * rp / z
        return [fp, chip, rp, rpp]

    out = solve_ivp(rhs, (1 - eps, z_end), y0, method="DOP853", rtol=1e-13, atol=1e-16)
    assert out.success
    f, chi, rho, rp = out.y[:, -1]
    z = z_end
    psi = rho * z**-a
    dpsi = rp * z**-a - a * rho * z ** (-a - 1)
    beta = z ** (1 - c) * dpsi / c
    lam = psi - beta * z**c
    T = abs(fp1) * math.exp(chi / 2) / (4 * math.pi)
    return lam / T**a, c * beta / T ** (3 - a), 4 * math.pi / T**2


def test_homogeneous_brane_against_shooting_in_z(model):
    lam_hat = 0.5
    rho_h = brentq(lambda r: _shoot_homogeneous(r)[0] - lam_hat, 0.01, 0.3, xtol=1e-15)
    _, vev, s = _shoot_homogeneous(rho_h)
    _, sol = _solve(model, 24, lam=lam_hat, k=0.0)
    assert sol.converged
    obs = sol.observables
    assert abs(obs["s"] / s - 1) < 1e-9, (obs["s"], s)
    # (the shooting's own extraction error is ~3e-10: z_end = 1e-6 vs 1e-5)
    assert abs(obs["vev"] / vev - 1) < 5e-9, (obs["vev"], vev)
    assert abs(obs["rho_h"] - rho_h) < 1e-8


def test_alternative_quantisation_reads_back_the_same_bulk_solution(model):
    # standard at lam gives <O>; alternative at J = <O> (same units) must give <O_alt> = -lam
    _, std = _solve(model, 24, lam=0.7, k=1.0)
    bg = QLatticeBrane(model, quantization="alternative", n=24, n_max=24, tol=1e-12)
    J = std.observables["vev"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        alt = bg.solve(lam=J, k=1.0)
    assert alt.converged
    assert abs(alt.observables["vev"] + 0.7) < 1e-9
    assert abs(alt.observables["s"] / std.observables["s"] - 1) < 1e-12


def _five_point(fun, x0, h):
    v = [fun(x0 + j * h) for j in (-2, -1, 1, 2)]
    return (v[0] - 8 * v[1] + 8 * v[2] - v[3]) / (12 * h)


@pytest.mark.parametrize("quantization", ["standard", "alternative"])
def test_stress_tensor_from_the_identities_obeys_the_first_law(model, quantization):
    # the stress tensor of a rational falloff comes from T s, the trace Ward identity and the
    # anisotropy integral; two thermodynamic identities it does not use check it (both common
    # practice): the first law <O> = -df/dJ at fixed T and k, and p_x = -f + k df/dk at fixed
    # T and J (a rescaling of x changes k, for lattices along x)
    bg = QLatticeBrane(model, quantization=quantization, n=30, n_max=30, tol=1e-12)
    lam0, k0, h = 0.8, 1.2, 0.02
    sol = bg.solve(lam=lam0, k=k0)
    obs = sol.observables
    assert sol.certified and obs["renormalised"] == 1 and obs["stress_from_identities"] == 1
    assert np.isnan(obs["ward_trace"]) and np.isnan(obs["thermo"])  # used, so not certificates
    # the renormalised Euclidean action (docs section i.4) sees the energy only through f_3
    assert obs["action"] < 1e-9 and abs(obs["f_action"] / obs["f"] - 1) < 1e-9
    assert abs(obs["f"] + obs["p_y"]) < 1e-12 * abs(obs["f"])
    dfdj = _five_point(lambda x: bg.solve(lam=x, k=k0).observables["f"], lam0, h)
    assert abs(dfdj + obs["vev"]) < 1e-8 * abs(obs["vev"]), (dfdj, obs["vev"])
    dfdk = _five_point(lambda x: bg.solve(lam=lam0, k=x).observables["f"], k0, h)
    assert abs(obs["p_x"] - (-obs["f"] + k0 * dfdk)) < 1e-9 * abs(obs["p_x"])


def test_logarithmic_case_is_refused_with_its_cause():
    # Delta_- = 3/4: the rho^3 back-reaction term z^{3 Delta_-} = z^{9/4} hits z^{Delta_+}
    a = 0.75
    m = QLatticeModel(lambda r: -6 + a * (a - 3) * r**2 / 2 + 0.1 * r**4, lambda r: r**2)
    with pytest.warns(ResolutionWarning, match="resonates"):
        with pytest.raises(ProblemDefinitionError, match="resonates.*logarithm"):
            QLatticeBrane(m)


def test_outside_the_counterterm_window_the_vev_is_not_reported():
    # Delta_- = 2/3 < 3/4: a phi^4 counterterm would be needed; the brane solves, no vev
    a = 2 / 3
    m = QLatticeModel(lambda r: -6 + a * (a - 3) * r**2 / 2, lambda r: r**2)
    bg = QLatticeBrane(m, n=24)
    assert "outside" in renormalisation_obstruction(bg)
    with pytest.warns(ConvergenceWarning, match="phi\\^4 counterterm"):
        sol = bg.solve(lam=0.5, k=1.0)
    assert sol.converged and np.isnan(sol.observables["vev"]) and np.isfinite(sol.observables["s"])
