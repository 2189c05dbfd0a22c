"""Command line: a demo solve, exit codes, and one-line errors on bad input."""

import os
import subprocess
import sys
import textwrap

import pytest
import xarray as xr

from spectral_bulk.cli import main

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DEMO = os.path.join(ROOT, "configs", "gel_front_solve.toml")

GOOD_PROBLEM = textwrap.dedent(
    """
    import numpy as np
    import spectral_bulk as sb

    def build(n=24):
        grid = sb.Chebyshev(n, (0.0, 1.0))
        bc = {"left": lambda c, f, p: [f.u], "right": lambda c, f, p: [f.u]}
        pr = sb.Problem(grid, ["u"], lambda c, f, p: f.u_xx + p.lam * np.exp(f.u), bc, {"lam": 1.0})
        return {"problem": pr, "guess": lambda x: 0 * x}
    """
)


def write_case(tmp_path, problem_src=GOOD_PROBLEM, config=None):
    (tmp_path / "prob.py").write_text(problem_src)
    cfg = config if config is not None else textwrap.dedent(
        """
        [problem]
        file = "prob.py"
        function = "build"
        [params]
        lam = 2.0
        """
    )
    path = tmp_path / "case.toml"
    path.write_text(cfg)
    return str(path)


def run_cli(argv, capsys):
    code = main(argv)
    out = capsys.readouterr()
    return code, out.out, out.err


def test_demo_config_solves_and_writes_netcdf(tmp_path, capsys):
    out = tmp_path / "demo.nc"
    code, stdout, stderr = run_cli(["solve", DEMO, "-o", str(out)], capsys)
    assert code == 0, stderr
    assert "converged" in stdout and "tail[u]" in stdout
    with xr.open_dataset(out) as ds:
        assert ds.attrs["converged"] == 1
        assert "[problem]" in ds.attrs["config"]
        assert ds["u"].dims == ("x",)


def test_unconverged_result_exits_nonzero(tmp_path, capsys):
    cfg = write_case(tmp_path, config=textwrap.dedent(
        """
        [problem]
        file = "prob.py"
        function = "build"
        [params]
        lam = 5.0
        [solver]
        max_iter = 3
        """
    ))
    with pytest.warns(UserWarning, match="iteration limit"):
        code, stdout, _ = run_cli(["solve", cfg, "-o", str(tmp_path / "o.nc")], capsys)
    assert code == 1
    assert "NOT CONVERGED" in stdout


BAD_CASES = {
    "missing key": (GOOD_PROBLEM, '[problem]\nfile = "prob.py"\n', "missing key `problem.function`"),
    "misspelled config key": (GOOD_PROBLEM, '[problem]\nfile = "prob.py"\nfunction = "build"\n'
                              '[solver]\ntolerance = 1e-9\n', "unknown key `solver.tolerance`"),
    "unknown parameter": (GOOD_PROBLEM, '[problem]\nfile = "prob.py"\nfunction = "build"\n'
                          '[params]\nlamda = 1.0\n', "unknown parameter `params.lamda`"),
    "misspelled field name": (GOOD_PROBLEM.replace("f.u_xx +", "f.uxx +"), None,
                              "unknown field or derivative 'uxx'"),
    "residual of wrong count": (GOOD_PROBLEM.replace("lambda c, f, p: f.u_xx + p.lam * np.exp(f.u)",
                                                     "lambda c, f, p: [f.u_xx, f.u]"), None,
                                "returned 2 entries, expected 1"),
    "residual of wrong shape": (GOOD_PROBLEM.replace("lambda c, f, p: f.u_xx + p.lam * np.exp(f.u)",
                                                     "lambda c, f, p: np.zeros(5)"), None,
                                "has shape (5,)"),
    "NaN in the guess": (GOOD_PROBLEM.replace("lambda x: 0 * x", "lambda x: np.nan * x"), None,
                         "non-finite values (NaN or inf) in field(s) ['u']"),
    "unreadable python file": ("def build(:\n", None, "syntax error at line 1"),
    "missing python file": (None, '[problem]\nfile = "nowhere.py"\nfunction = "build"\n', "does not exist"),
    "not a function": (GOOD_PROBLEM, '[problem]\nfile = "prob.py"\nfunction = "make"\n',
                       "is not a function"),
    "invalid toml": (GOOD_PROBLEM, "[problem\n", "invalid TOML"),
}


@pytest.mark.parametrize("case", sorted(BAD_CASES))
def test_bad_input_gives_one_line_error(tmp_path, capsys, case):
    src, cfg, expected = BAD_CASES[case]
    path = write_case(tmp_path, src if src is not None else GOOD_PROBLEM, cfg)
    if src is None:
        os.remove(tmp_path / "prob.py")
    code, stdout, stderr = run_cli(["solve", path, "-o", str(tmp_path / "o.nc")], capsys)
    assert code == 2
    lines = [ln for ln in stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, stderr
    assert lines[0].startswith("spectral-bulk: error:")
    assert expected in lines[0]
    assert "Traceback" not in stderr
    assert not (tmp_path / "o.nc").exists()


def test_console_script_exit_code_and_version():
    # the installed entry point, as a user runs it
    out = subprocess.run([sys.executable, "-m", "spectral_bulk", "--version"],
                         capture_output=True, text=True, check=False)
    assert out.returncode == 0 and out.stdout.startswith("spectral-bulk ")
    out = subprocess.run([sys.executable, "-m", "spectral_bulk", "solve", "/nonexistent.toml"],
                         capture_output=True, text=True, check=False)
    assert out.returncode == 2 and "cannot read config" in out.stderr
    assert "Traceback" not in out.stderr


def test_help_lists_commands(capsys):
    with pytest.raises(SystemExit) as info:
        main(["--help"])
    assert info.value.code == 0
    text = capsys.readouterr().out
    for cmd in ("solve", "follow", "show"):
        assert cmd in text
