"""Pseudo-arclength continuation: folds, branch points, switching, families, resume."""

import os

import numpy as np
import pytest
import xarray as xr
from scipy.integrate import quad
from scipy.optimize import brentq

import spectral_bulk as sb
from spectral_bulk.cli import main
from spectral_bulk.continuation import CONTINUATION_MESSAGES, follow, switch

from .problems import bratu_equations, bratu_exact, dirichlet_zero

DIRICHLET = {"left": dirichlet_zero, "right": dirichlet_zero}
ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def bratu(n=28, lam=0.1):
    return sb.Problem(sb.Chebyshev(n, (0.0, 1.0)), ["u"], bratu_equations, DIRICHLET, {"lam": lam})


def chafee_infante(n=32):
    # u'' + lam (u - u^3) = 0 on [0, pi], u(0) = u(pi) = 0 (Chafee-Infante problem, common practice)
    eq = lambda c, f, p: f.u_xx + p.lam * (f.u - f.u**3)  # noqa: E731
    return sb.Problem(sb.Chebyshev(n, (0.0, np.pi)), ["u"], eq, DIRICHLET, {"lam": 0.5})


def umax(sol):
    return {"u_max": float(np.max(sol.fields["u"]))}


@pytest.fixture(scope="module")
def bratu_branch():
    return follow(bratu(), 0.0, "lam", step=0.1, bounds={"lam": (0.05, 4.0), "u": (None, 6.0)},
                  max_points=80, targets=[1.0, 3.0], observables=umax)


def test_bratu_fold_located_to_ten_digits(bratu_branch):
    # classical Gelfand-Bratu problem: the fold is where the two roots of
    # th = sqrt(2 lam) cosh(th/4) merge, lam_c = 3.513830719125162 (common practice)
    folds = [e for e in bratu_branch.events if e.kind == "fold"]
    assert len(folds) == 1
    assert abs(folds[0].value - 3.513830719125162) < 1e-10
    assert bratu_branch.solutions[folds[0].index] is folds[0].solution
    assert bratu_branch.points[folds[0].index].kind == "fold"


def test_bratu_upper_branch_matches_closed_form(bratu_branch):
    fold = bratu_branch.events[0].index
    checked = 0
    for sol in bratu_branch.solutions[fold + 1:]:
        lam = sol.params["lam"]
        if lam < 0.3:
            continue
        x = sol.grid.coords["x"]
        exact = bratu_exact(x, lam, "upper")
        assert np.abs(sol.fields["u"] - exact).max() < 1e-9 * (1 + np.abs(exact).max())
        checked += 1
    assert checked >= 5


def test_targets_are_hit_exactly_on_both_branches(bratu_branch):
    kinds = [p.kind for p in bratu_branch.points]
    vals = bratu_branch.values[np.array(kinds) == "target"]
    # lam = 1 and 3 are crossed twice: once on each side of the fold
    assert sorted(vals.tolist()) == [1.0, 1.0, 3.0, 3.0]
    for p in bratu_branch.points:
        if p.kind == "target":
            exact = bratu_exact(p.solution.grid.coords["x"], p.lam,
                                "lower" if p.s < bratu_branch.points[bratu_branch.events[0].index].s else "upper")
            assert np.abs(p.solution.fields["u"] - exact).max() < 1e-9 * (1 + abs(exact).max())


def test_every_point_is_certified_and_regridded_when_needed(bratu_branch):
    ns = [p.prob.grid.shape[0] for p in bratu_branch.points]
    assert max(ns) > min(ns)  # the sharpening upper branch forced a finer grid
    for sol in bratu_branch.solutions:
        assert sol.converged, sol.message
        assert max(sol.tail.values()) <= 1e-10


def test_regridded_point_agrees_with_a_direct_fine_solve(bratu_branch):
    # pick the first point after a grid change and compare with a direct solve on a fine grid
    pts = bratu_branch.points
    k = next(i for i in range(1, len(pts)) if pts[i].prob.grid.shape != pts[i - 1].prob.grid.shape)
    sol = pts[k].solution
    fine = sb.solve(bratu(96).with_grid(sb.Chebyshev(96, (0.0, 1.0))), sol, params=sol.params, tol=1e-12)
    x = np.linspace(0, 1, 101)
    assert np.abs(sol(x) - fine(x)).max() < 1e-9


def test_bound_is_landed_on_exactly():
    br = follow(bratu(), 0.0, "lam", step=0.2, bounds={"lam": (0.0, 2.5)}, max_points=50)
    assert br.status == 1 and br.values[-1] == 2.5 and br.points[-1].kind == "bound"
    assert br.success


def test_chafee_infante_branch_points_and_switching():
    # on u = 0 the linearisation u'' + lam u has the simple eigenvalues lam = n^2 (n = 1, 2, 3)
    br = follow(chafee_infante(), 0.0, "lam", step=0.3, bounds={"lam": (0.0, 10.0)}, max_points=60)
    bps = [e for e in br.events if e.kind == "branch"]
    assert [round(e.value) for e in bps] == [1, 4, 9]
    for e, n in zip(bps, (1, 2, 3)):
        assert abs(e.value - n * n) < 1e-8
    assert not [e for e in br.events if e.kind == "fold"]
    # switch at lam = 1 onto the one-signed branch
    new = switch(br, bps[0], step=0.05, bounds={"lam": (0.5, 5.0)}, targets=[2.0, 3.5], max_points=80)
    assert new.success
    for target in (2.0, 3.5):
        sol = new.solutions[list(new.values).index(target)]
        u = sol.fields["u"]
        assert np.all(u >= -1e-14)  # one-signed
        # time map of u'' + lam f(u) = 0 with f = u - u^3, F = u^2/2 - u^4/4: the
        # half width pi/2 = int_0^a du / sqrt(2 lam (F(a) - F(u))); with u = a sin(phi)
        # this is int_0^{pi/2} dphi / sqrt(lam (1 - a^2 (1 + sin^2 phi)/2)) (common practice)
        def half_width(a):
            val = quad(lambda ph: 1 / np.sqrt(1 - a * a * (1 + np.sin(ph) ** 2) / 2), 0, np.pi / 2,
                       epsabs=1e-13, epsrel=1e-13, limit=200)[0]
            return val / np.sqrt(target) - np.pi / 2

        amp = brentq(half_width, 1e-6, 0.9999, xtol=1e-14)
        assert abs(sol(np.pi / 2) - amp) < 1e-9


def test_switch_rejects_a_fold(bratu_branch):
    with pytest.raises(ValueError, match="branch point"):
        switch(bratu_branch, bratu_branch.events[0])


def test_family_netcdf_roundtrip(bratu_branch, roundtrip):
    ds = bratu_branch.to_dataset()
    back = roundtrip(ds)
    xr.testing.assert_identical(ds, back)
    assert ds.attrs["parameter"] == "lam" and ds.sizes["event"] == 1
    assert set(ds["lam"].attrs) >= {"long_name", "units"}
    assert "u_max" in ds and ds["u_max"].attrs["observable"] == 1
    n = ds["n_x"].values
    coeffs = ds["u_coeffs"].values
    assert np.all(coeffs[np.arange(len(n)), n.max() - 1][n < n.max()] == 0)  # zero padding


def test_resume_equals_uninterrupted_run(tmp_path):
    kwargs = dict(step=0.1, bounds={"lam": (0.05, 4.0), "u": (None, 5.0)}, observables=umax)
    full = follow(bratu(24), 0.0, "lam", max_points=30, **kwargs)
    part_file = tmp_path / "part.nc"
    part = follow(bratu(24), 0.0, "lam", max_points=12, checkpoint=part_file, **kwargs)
    assert len(part) < len(full)
    resumed = follow(bratu(24), 0.0, "lam", max_points=30, resume=part_file, **kwargs)
    a, b = full.to_dataset(), resumed.to_dataset()
    for name in ("lam", "arclength", "state", "u", "u_max", "event_value", "n_x", "kind"):
        np.testing.assert_array_equal(a[name].values, b[name].values)
    assert resumed.status == full.status


def test_interrupt_keeps_points(tmp_path):
    calls = []

    def cb(info):
        calls.append(info)
        if len(calls) == 6:
            raise KeyboardInterrupt

    br = follow(bratu(), 0.0, "lam", step=0.1, max_points=50, callback=cb, checkpoint=tmp_path / "c.nc")
    assert br.status == 5 and not br.success and len(br) == 6
    assert (tmp_path / "c.nc").exists()


def test_step_below_minimum_is_reported():
    # an absurd corrector budget makes every step fail: the run says where and why it stopped
    br = follow(bratu(), 0.0, "lam", step=0.5, max_points=10, max_corrector=1, min_step=1e-3)
    assert br.status == 3 and "min_step" in br.message and not br.success
    assert len(br) == 1


def test_every_stop_reason_formats_with_the_fields_the_loop_provides():
    # the keys filled in by the continuation loop (and `why` for a failed start)
    fields = dict(max_points=10, param="lam", name="lam", bound=1.0, min_step=1e-8, value=0.5,
                  tail_tol=1e-10, n=(32,), why="x")
    for text in CONTINUATION_MESSAGES.values():
        assert text.format(**fields)  # raises KeyError for a field the loop does not provide


def test_cli_follow_and_show(tmp_path, capsys):
    cfg = os.path.join(ROOT, "configs", "gel_front_follow.toml")
    out = tmp_path / "fam.nc"
    assert main(["follow", cfg, "-o", str(out)]) == 0
    text = capsys.readouterr()
    assert "fold" in text.out and "points" in text.err
    png = tmp_path / "fam.png"
    assert main(["show", str(out), "--plot", str(png)]) == 0
    shown = capsys.readouterr().out
    assert "fold" in shown and "certificate: all points pass" in shown
    assert png.exists() and png.stat().st_size > 1000
    with xr.open_dataset(out) as ds:
        assert "[follow]" in ds.attrs["config"]
