"""Black branes: exact solutions, independent shooting references, identities, bad input.

References
----------
* ``tests/reference/brane_reference.py`` (scipy only, independent of the package):
  closed forms and a shooting solver in another radial gauge; ``brane_values.json`` holds
  its values (errors below 2e-10 absolute) and ``docs/physics/black_branes.md`` the
  derivations.
* Planar AdS-Schwarzschild and Reissner-Nordstrom-AdS: textbook results (common practice).
* Linear-axion brane: "A simple holographic model of momentum relaxation", arXiv:1311.5157.
"""

import json
import math
import os
import warnings

import numpy as np
import pytest

from spectral_bulk.backgrounds import AxionBrane, BlackBrane, QLatticeBrane
from spectral_bulk.exceptions import ConvergenceWarning, ProblemDefinitionError, ResolutionWarning
from spectral_bulk.models import BulkModel, QLatticeModel, builtin
from spectral_bulk.newton import extended_precision_available

from .problems import load_reference

HERE = os.path.dirname(os.path.abspath(__file__))


REF = load_reference("brane_reference")
with open(os.path.join(HERE, "reference", "brane_values.json")) as fh:
    VALUES = json.load(fh)

KEYS = ("s", "energy", "f", "p_x", "p_y", "vev", "rho_h")
# relative agreement demanded against the references; the stress tensor needs third
# Taylor coefficients at the boundary, read from the extended-precision refinement of the
# solution (in double their rounding error alone is ~1e-9 relative: platforms whose long
# double is no wider than double get the double-precision floor)
EXTENDED = extended_precision_available()
RTOL = 1e-11 if EXTENDED else 5e-9
IDENTITY_TOL = 1e-10 if EXTENDED else 2e-9


def assert_close(actual, expected, rtol=RTOL, scale=None):
    scale = scale if scale is not None else max(1.0, abs(expected))
    assert abs(actual - expected) <= rtol * scale, (actual, expected)


def assert_certified(obs, tol=IDENTITY_TOL):
    # identities among stress-tensor components: the boundary data are read from the
    # extended-precision refinement of the solution (about 1e-12 relative is measured)
    assert obs["extended_precision"] == int(EXTENDED)
    for key in ("ward_trace", "thermo", "py_f", "action"):
        if not np.isnan(obs[key]):
            assert obs[key] < tol, (key, obs[key])
    assert obs["residual"] < 1e-12 and obs["tail"] < 1e-10
    assert obs["temperature"] < 1e-12
    assert obs["constraint"] < 1e-9  # the zz equation, not imposed, holds


@pytest.fixture(scope="module")
def mass2():
    return builtin("mass2")


def test_ads_schwarzschild_exact():
    # f = 1 - z^3: s/T^2 = 64 pi^3/9, energy/T^3 = 128 pi^3/27, f/T^3 = -64 pi^3/27 (common practice)
    bg = QLatticeBrane(builtin("mass2"), n=16)
    obs = bg.solve(lam=0.0, k=1.0).observables
    ref = REF.ads_schwarzschild(1.0)
    for key in ("s", "energy", "f", "p_x", "p_y"):
        assert_close(obs[key], ref[key if key in ref else "p"], rtol=1e-12)
    assert abs(obs["s"] - 64 * math.pi**3 / 9) < 1e-10
    assert_certified(obs)


@pytest.mark.parametrize("mu", [0.5, 1.3, 3.0])
def test_reissner_nordstrom_exact(mu):
    # closed form of the planar charged brane in our normalisation (common practice)
    model = BulkModel(lambda: -6.0, scalars=(), gauge_coupling=lambda: 1.0, name="einstein_maxwell")
    obs = BlackBrane(model, n=24).solve(mu=mu).observables
    ref = REF.rn_ads(mu)
    for key in ("s", "energy", "f", "p_x", "p_y", "charge"):
        assert_close(obs[key], ref[key])
    assert_close(obs["mu"], mu, rtol=1e-13)
    assert_certified(obs)


@pytest.mark.parametrize("alpha", [0.7, 1.5, 2.0])
def test_linear_axion_brane_exact(alpha):
    # arXiv:1311.5157: f = 1 - alpha^2 z^2/2 - (1 - alpha^2 z_h^2/2)(z/z_h)^3, T and s closed form
    obs = AxionBrane(n=24).solve(alpha=alpha).observables
    ref = REF.axion_brane(alpha)
    assert_close(obs["s"], ref["s"], rtol=1e-12)
    # the stress tensor comes from third boundary derivatives of the Chebyshev interpolant;
    # read from the extended-precision refinement it is free of the double rounding floor
    # (about 1e-9 relative, amplified by ~k^6/15 for the k-th coefficient)
    for key in ("energy", "f", "p_x", "p_y"):
        assert_close(obs[key], ref[key], rtol=RTOL if EXTENDED else 2e-8)
    # axion sources are exactly marginal: the trace vanishes (same reference)
    floor = 1e-11 if EXTENDED else 2e-8
    assert abs(-obs["energy"] + obs["p_x"] + obs["p_y"]) < floor * obs["energy"]
    assert obs["action"] < floor and obs["ward_trace"] < floor


@pytest.mark.parametrize("index", range(len(VALUES["points"])))
def test_qlattice_brane_against_shooting_reference(mass2, index):
    # values of the independent scipy shooting code (brane_values.json), V = -6 - rho^2, Phi = rho^2
    point = VALUES["points"][index]
    bg = QLatticeBrane(mass2, quantization=point["quantization"], n=24)
    sol = bg.solve(lam=point["source"], k=point["k"])
    assert sol.converged, sol.message
    obs = sol.observables
    for key in KEYS:
        assert_close(obs[key], point[key], scale=max(1.0, abs(point[key])))
    assert_certified(obs)
    assert abs(obs["source"] - point["source"]) < 1e-12  # imposed exactly, read back spectrally


def test_qlattice_brane_against_shooting_in_the_test():
    # a potential of our own with a quartic term; the shooting solver runs here (scipy only)
    V = lambda r: -6 - r**2 + r**4 / 5  # noqa: E731
    model = QLatticeModel(V, lambda r: r**2)
    obs = QLatticeBrane(model, n=28).solve(lam=1.2, k=0.8).observables
    ref = REF.qlattice_brane_shooting(V, lambda r: -2 * r + 4 * r**3 / 5, lambda r: r**2,
                                      lambda r: 2 * r, lam=1.2, k=0.8, rtol=1e-11)
    for key in ("s", "vev", "rho_h", "energy", "p_x", "p_y"):
        assert_close(obs[key], ref[key], rtol=1e-8, scale=max(1.0, abs(ref[key])))
    assert_certified(obs)


def test_a_model_without_long_double_support_falls_back_to_double(mass2, monkeypatch):
    # a model function with no long-double loop (as some scipy.special ufuncs) must not break
    # the observables: they are read in double precision and the flag says so
    from spectral_bulk.newton import Problem

    def refuse(self, *args, **kwargs):
        raise TypeError("ufunc 'erf' not supported for the input types")

    monkeypatch.setattr(Problem, "residual_extended", refuse)
    obs = QLatticeBrane(mass2, n=24).solve(lam=1.0, k=1.0).observables
    assert obs["extended_precision"] == 0
    assert obs["ward_trace"] < 2e-9 and obs["thermo"] < 2e-9  # the double-precision floor


@pytest.mark.parametrize("lam, k", [(1.0, 1.0), (2.5, 0.4)])
def test_stress_tensor_from_identities_matches_holographic_renormalisation(mass2, lam, k):
    # second route (used for rational falloffs): T s, the trace Ward identity and the radial
    # anisotropy integral for p_x - p_y (docs section j) against the counterterm stress tensor.
    # energy + p_y = T s (radially conserved Noether charge) and the trace Ward identity are
    # common practice ("Holographic renormalization", hep-th/0112119, for the latter)
    from spectral_bulk.holography._branes import anisotropy_integral, stress_from_identities

    bg = QLatticeBrane(mass2, n=24)
    sol = bg.solve(lam=lam, k=k)
    obs = sol.observables
    w = obs["source"] * obs["vev"]  # (d - Delta) lambda <O> with d - Delta = 1
    routes = stress_from_identities(obs["s"], w, anisotropy_integral(bg, sol) / bg.T**3)
    for key, value in zip(("energy", "p_x", "p_y"), routes):
        assert_close(value, obs[key], rtol=1e-10 if EXTENDED else 5e-9)


@pytest.mark.parametrize("k", [0.5, 1.0, 2.0])
def test_entropy_at_second_order_in_the_source(mass2, k):
    # s/s0 = 1 + c(k/T) (lambda/T)^2 + O(lambda^4); c from the independent linear-response
    # computation of docs/physics/black_branes.md section f (solve_ivp + quad)
    c = REF.qlattice_entropy_second_order(k)
    s0 = 64 * math.pi**3 / 9
    bg = QLatticeBrane(mass2, n=24, tol=1e-12)
    lams = [0.05, 0.1]
    ratios = [(bg.solve(lam=lam, k=k).observables["s"] / s0 - 1) / lam**2 for lam in lams]
    # Richardson in lambda^2 removes the O(lambda^4) term
    extrapolated = (ratios[0] * lams[1] ** 2 - ratios[1] * lams[0] ** 2) / (lams[1] ** 2 - lams[0] ** 2)
    assert abs(extrapolated - c) < 1e-8 * abs(c) + 1e-12


def test_exponential_convergence_of_s_and_vev(mass2):
    errs_s, errs_v = [], []
    fine = QLatticeBrane(mass2, n=40, tol=1e-12).solve(lam=2.0, k=1.5).observables
    for n in (8, 10, 12, 14, 16):
        bg = QLatticeBrane(mass2, n=n, tol=1e-12, n_max=n)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            obs = bg.solve(lam=2.0, k=1.5).observables
        errs_s.append(abs(obs["s"] / fine["s"] - 1))
        errs_v.append(abs(obs["vev"] / fine["vev"] - 1))
    for errs in (errs_s, errs_v):
        errs = np.array(errs)
        live = errs[:-1] > 1e-13
        # each two more points gain at least a factor 5 until rounding
        assert np.all(errs[1:][live] < errs[:-1][live] / 5), errs


def test_split_quantisation_profiles_satisfy_the_ward_identities(mass2):
    # component 1 standard, component 2 alternative (docs section b): pointwise Ward
    # identities and period averages shifted by lambda rho_2 / 2
    bg = QLatticeBrane(mass2, component_quantization=("standard", "alternative"), n=24)
    plain = QLatticeBrane(mass2, n=24).solve(lam=1.0, k=1.0).observables
    obs = bg.solve(lam=1.0, k=1.0).observables
    assert obs["ward_trace_profile"] < 1e-9
    lam_rho2 = 1.0 * plain["vev"]  # lambda <O> in units of T^3 (Delta = 2, source 1)
    assert_close(obs["energy_avg"], plain["energy"] + lam_rho2 / 2)
    assert_close(obs["p_x_avg"], plain["p_x"] - lam_rho2 / 2)
    # momentum Ward identity d_x T_xx = sum <O_I> d_x J_I on the profile (spectral in x)
    kx = obs["x_phase"]
    ptx = obs["p_x_profile"]
    dptx = np.real(np.fft.ifft(1j * np.fft.fftfreq(kx.size, 1 / kx.size) * np.fft.fft(ptx)))
    # sources lambda cos(kx) (lambda/T = 1) and rho_2 sin(kx): their phase derivatives
    rhs = obs["vev1_profile"] * (-np.sin(kx)) + obs["vev2_profile"] * (plain["vev"] * np.cos(kx))
    assert np.abs(dptx - rhs).max() < 1e-9 * max(1.0, np.abs(ptx).max())


def test_family_in_lambda_carries_observables_and_first_law(mass2, roundtrip):
    bg = QLatticeBrane(mass2, n=24)
    br = bg.follow("lam", start={"lam": 0.2, "k": 1.0}, stop=1.0, step=0.05, max_step=0.1)
    assert br.success and br.values[-1] == 1.0
    ds = br.to_dataset()
    for key in ("s", "f", "energy", "vev", "cert_ward_trace", "cert_first_law"):
        assert key in ds
    assert float(ds.cert_ward_trace.max()) < IDENTITY_TOL
    # vev = -d(f/T^3)/d(lambda/T) along the family (5-point derivative, spacing <= 0.1)
    assert float(ds.cert_first_law.max()) < 1e-6
    back = roundtrip(ds)
    np.testing.assert_array_equal(back["s"].values, ds["s"].values)


# ------------------------------------------------------------------ bad input
def test_potential_without_ads_critical_point():
    with pytest.raises(ProblemDefinitionError, match="no AdS critical point"):
        QLatticeModel(lambda r: -5 - r**2, lambda r: r**2)
    with pytest.raises(ProblemDefinitionError, match="no AdS critical point"):
        QLatticeModel(lambda r: -6 - r, lambda r: r**2)


def test_unsupported_quantisation_is_named():
    model = QLatticeModel(lambda r: -6 + 0.5 * r**2, lambda r: r**2)  # m^2 = 1: Delta_- < 0
    with pytest.raises(ProblemDefinitionError, match="quantization 'alternative' is not allowed"):
        QLatticeBrane(model, quantization="alternative")


def test_breitenlohner_freedman_violation_is_named():
    with pytest.raises(ProblemDefinitionError, match="Breitenlohner-Freedman"):
        QLatticeModel(lambda r: -6 - 3 * r**2, lambda r: r**2)


def test_non_analytic_falloff_warns_and_is_refused():
    # m^2 = -2.2: Delta irrational, no power z = u^p makes the expansion analytic
    model = QLatticeModel(lambda r: -6 - 1.1 * r**2, lambda r: r**2)
    with pytest.warns(ResolutionWarning, match="irrational"):
        with pytest.raises(ProblemDefinitionError, match="radial power"):
            QLatticeBrane(model)


def test_log_terms_are_warned_about():
    # a cubic term in V resonates with z^Delta+ for Delta = 2 in d = 3: z^2 log z
    model = QLatticeModel(lambda r: -6 - r**2 + r**3, lambda r: r**2)
    with pytest.warns(ResolutionWarning, match="log"):
        QLatticeBrane(model)


def test_unknown_parameter_is_named(mass2):
    with pytest.raises(ProblemDefinitionError, match="unknown parameter"):
        QLatticeBrane(mass2).solve(lam=1.0, kk=2.0)


def test_far_guess_terminates_and_homotopy_reaches_the_point(mass2):
    # regression: the damping could alternate between reducing and enlarging the step
    # forever; each Newton iteration now enlarges at most once
    from spectral_bulk.newton._newton import NewtonOptions, _newton, initial_state

    bg = QLatticeBrane(mass2, n=40, n_max=240)
    pr = bg.problem(40)
    params = {"lam": 30.0, "k": 30.0}
    res = _newton(pr, initial_state(pr, bg._trivial_guess(params)), params,
                  NewtonOptions(max_iter=40).validated())
    assert res.nfev <= 10 * 40
    # the public solve falls back to continuation from the trivial background; at k/T = 30
    # the scalar lives within z ~ 1/k of the boundary and the boundary Taylor coefficients of
    # the affine grid lose accuracy (the certificate says so: ~5e-8 rather than ~1e-9)
    with pytest.warns(ConvergenceWarning, match="observable certificate failed"):
        sol = bg.solve(**params)
    assert sol.converged and not sol.certified and sol.observables["ward_trace"] < 1e-7


def test_models_outside_the_renormalisation_coverage_are_not_reported_as_certified():
    # m^2 = 0 (Delta = 3): the brane solves, s is reported, the stress tensor is not
    model = QLatticeModel(lambda r: -6 + 0 * r, lambda r: r**2)
    bg = QLatticeBrane(model, n=20)
    with pytest.warns(ConvergenceWarning, match="renormalisation not implemented"):
        sol = bg.solve(lam=0.5, k=1.0)
    assert sol.converged and not sol.certified
    assert np.isfinite(sol.observables["s"]) and np.isnan(sol.observables["energy"])
