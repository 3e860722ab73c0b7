"""Fixtures for the icefield protocol and notebook tests.

The kernel under test is the one Jupyter finds under the name "icefield" (installed by
tests/run-all.sh into the project's .venv with `icefield install --sys-prefix`). When
ICEFIELD_BIN is set (run-all.sh sets it), the installed spec must start exactly that
binary, so a stale spec elsewhere on the Jupyter path cannot be tested by mistake.
"""

from __future__ import annotations

import os
from pathlib import Path

import pytest
from jupyter_client.kernelspec import KernelSpecManager

from helpers import KERNEL_NAME, installed_binary, start_kernel, stop_kernel


@pytest.fixture(scope="session", autouse=True)
def check_installed_kernel() -> None:
    """Fail loudly if the icefield kernel spec is missing or points elsewhere."""
    try:
        spec = KernelSpecManager().get_kernel_spec(KERNEL_NAME)
    except Exception as exc:  # NoSuchKernel
        pytest.fail(f"no '{KERNEL_NAME}' kernel spec installed ({exc}); run tests/run-all.sh")
    expected = os.environ.get("ICEFIELD_BIN")
    if expected:
        assert Path(spec.argv[0]).resolve() == Path(expected).resolve(), (
            f"kernel spec {spec.resource_dir} starts {spec.argv[0]}, expected {expected}"
        )
    assert spec.argv[1:] == ["kernel", "--connection-file", "{connection_file}"]


@pytest.fixture(scope="session")
def icefield_bin() -> str:
    return os.environ.get("ICEFIELD_BIN") or installed_binary()


@pytest.fixture()
def kernel():
    """A fresh kernel per test: (manager, blocking client)."""
    km, kc = start_kernel()
    try:
        yield km, kc
    finally:
        stop_kernel(km, kc)
