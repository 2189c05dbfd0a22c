"""Background configs from the command line: solve, follow, show, exit codes, bad input."""

import os
import textwrap

import pytest
import xarray as xr

from spectral_bulk.cli import main
from spectral_bulk.newton import extended_precision_available

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def run(argv, capsys):
    code = main(argv)
    out = capsys.readouterr()
    return code, out.out, out.err


def test_solve_qlattice_brane_config(tmp_path, capsys):
    out = tmp_path / "qb.nc"
    code, stdout, _ = run(["solve", os.path.join(ROOT, "configs", "qlattice_brane.toml"), "-o", str(out)],
                          capsys)
    assert code == 0
    assert "ward_trace" in stdout and "converged" in stdout
    with xr.open_dataset(out) as ds:
        assert ds.attrs["converged"] == 1 and "obs_s" in ds.attrs and "[background]" in ds.attrs["config"]


def run_config(tmp_path, capsys, command, text):
    """Write ``text`` as a config and run ``command`` on it; returns (code, stdout, stderr, out)."""
    cfg, out = tmp_path / f"{command}.toml", tmp_path / f"{command}.nc"
    cfg.write_text(text)
    return (*run([command, str(cfg), "-o", str(out)], capsys), out)


def test_rational_falloff_config_reports_the_stress_tensor_with_its_action_certificate(tmp_path, capsys):
    out = tmp_path / "rb.nc"
    code, stdout, _ = run(["solve", os.path.join(ROOT, "configs", "rational_brane.toml"), "-o", str(out)],
                          capsys)
    assert code == 0, stdout
    with xr.open_dataset(out) as ds:
        assert ds.attrs["obs_stress_from_identities"] == 1 and ds.attrs["obs_action"] < 1e-9


def test_brane_config_can_skip_the_extended_precision_refinement(tmp_path, capsys):
    code, _, _, out = run_config(tmp_path, capsys, "solve",
                                 '[background]\nkind = "qlattice_brane"\nextended_precision = false\n'
                                 '[model]\nbuiltin = "mass2"\n[params]\nlam = 0.5\nk = 1.0\n')
    assert code == 0
    with xr.open_dataset(out) as ds:
        assert ds.attrs["obs_extended_precision"] == 0


@pytest.mark.skipif(not extended_precision_available(), reason="no long double wider than double here")
def test_show_applies_the_tighter_limits_where_boundary_data_are_extended(tmp_path, capsys):
    code, _, stderr, out = run_config(
        tmp_path, capsys, "follow", '[background]\nkind = "qlattice_brane"\n[model]\nbuiltin = "mass2"\n'
        '[params]\nlam = 0.1\nk = 1.0\n[follow]\nparam = "lam"\nstop = 0.4\nstep = 0.1\n')
    assert code == 0, stderr
    with xr.open_dataset(out) as ds:
        ds = ds.load()
    assert int(ds.extended_precision.min()) == 1
    # 5e-9 passes the double-precision limit (1e-8) but not the extended one (1e-9)
    ds["cert_ward_trace"][1] = 5e-9
    for flag, expected in ((1, 1), (0, 0)):
        ds["extended_precision"][1] = flag
        path = tmp_path / f"edited{flag}.nc"
        ds.to_netcdf(path)
        code, stdout, _ = run(["show", str(path)], capsys)
        assert code == expected, stdout
        assert ("FAILED" in stdout) == bool(expected)


def test_follow_wall_config_and_show(tmp_path, capsys):
    cfg = tmp_path / "wall.toml"
    cfg.write_text(textwrap.dedent("""
        [background]
        kind = "qlattice_wall"
        coupling = "loglam"
        [model]
        builtin = "quartic_well"
        [params]
        lam = 0.5
        [follow]
        param = "loglam"
        stop = 3.0
        step = 0.3
    """))
    out = tmp_path / "fam.nc"
    code, stdout, stderr = run(["follow", str(cfg), "-o", str(out)], capsys)
    assert code == 0, stderr
    assert "reached the bound" in stdout
    code, stdout, _ = run(["show", str(out)], capsys)
    assert code == 0 and "certificate: all points pass" in stdout and "worst constraint" in stdout


def test_singular_homogeneous_flow_exits_nonzero(tmp_path, capsys):
    cfg = tmp_path / "dw.toml"
    cfg.write_text('[background]\nkind = "domain_wall"\n[model]\nbuiltin = "mass2"\n[params]\nlam = 1.0\n')
    code, stdout, _ = run(["solve", str(cfg), "-o", str(tmp_path / "dw.nc")], capsys)
    assert code == 1 and "singular" in stdout


@pytest.mark.parametrize("text, expected", [
    ('[background]\nkind = "black_hole"\n[model]\nbuiltin = "mass2"\n', "`background.kind`"),
    ('[background]\nkind = "qlattice_brane"\n[model]\nbuiltin = "nothing"\n', "`model.builtin`"),
    ('[background]\nkind = "qlattice_brane"\n[model]\nbuiltin = "mass2"\n[params]\nlamda = 1.0\n',
     "unknown parameter"),
    ('[background]\nkind = "qlattice_brane"\nresolution = 3\n[model]\nbuiltin = "mass2"\n',
     "unknown key `background.resolution`"),
    ('[background]\nkind = "qlattice_wall"\nextended_precision = false\n[model]\nbuiltin = "mass2"\n',
     "`background.extended_precision` applies to branes"),
    ('[background]\nkind = "qlattice_brane"\nextended_precision = 1\n[model]\nbuiltin = "mass2"\n',
     "`background.extended_precision`"),
])
def test_bad_background_config_is_one_line(tmp_path, capsys, text, expected):
    cfg = tmp_path / "bad.toml"
    cfg.write_text(text)
    code, _, stderr = run(["solve", str(cfg), "-o", str(tmp_path / "x.nc")], capsys)
    assert code == 2
    lines = [ln for ln in stderr.splitlines() if ln.strip()]
    assert len(lines) == 1 and expected in lines[0] and "Traceback" not in stderr
