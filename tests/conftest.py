"""Shared pytest configuration: the opt-in `slow` marker and small fixtures."""

import os

# small dense solves are much faster on one BLAS thread on these machines
for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import pytest  # noqa: E402


def pytest_addoption(parser):
    parser.addoption("--runslow", action="store_true", default=False, help="run tests marked slow")


def pytest_collection_modifyitems(config, items):
    if config.getoption("--runslow"):
        return
    skip = pytest.mark.skip(reason="slow: run with --runslow")
    for item in items:
        if "slow" in item.keywords:
            item.add_marker(skip)


@pytest.fixture
def roundtrip(tmp_path):
    """Write a dataset with the package's atomic writer and read it back."""
    from spectral_bulk.family import open_family, write_atomic

    def _rt(ds, name="rt.nc"):
        path = tmp_path / name
        write_atomic(ds, path)
        return open_family(path)

    return _rt
