"""Shared set-up: the Headroom kernelspec must be installed where Jupyter looks.

tests/run installs it into a throwaway JUPYTER_DATA_DIR before calling pytest; to run these
files by hand, `headroom install --user` (or set JUPYTER_DATA_DIR and install there) first.
"""

from __future__ import annotations

import pytest
from jupyter_client.kernelspec import KernelSpecManager, NoSuchKernel
from jupyter_client.manager import start_new_kernel

KERNEL_NAME = "headroom"
TIMEOUT = 15

# Worksheet functions f0 … f10, each calling the one below it twice: f10 makes 1 024 calls.
# A sweep of ten million points over f10 runs for seconds however fast plain sweeps get,
# so a test can interrupt it while it runs.
DOUBLING = "f0(p) = p" + "".join(
    f"\nf{i}(p) = f{i - 1}(p) + f{i - 1}(p)" for i in range(1, 11))


def pytest_configure(config: pytest.Config) -> None:
    try:
        KernelSpecManager().get_kernel_spec(KERNEL_NAME)
    except NoSuchKernel:
        raise pytest.UsageError(
            "the 'headroom' kernelspec is not installed: run `headroom install --user` "
            "or use tests/run, which installs it into a temporary JUPYTER_DATA_DIR"
        ) from None


@pytest.fixture
def kernel():
    """A fresh kernel and a ready client, shut down afterwards."""
    km, kc = start_new_kernel(kernel_name=KERNEL_NAME, startup_timeout=TIMEOUT)
    try:
        yield km, kc
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=False)
