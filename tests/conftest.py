import sys

# workbench first: before NumPy loads, it picks the floating-point kernels that the command
# line (run in subprocesses by some tests) also gets, so in-process and subprocess grids agree.
assert "numpy" not in sys.modules, "a pytest plugin imported NumPy before workbench"
import workbench  # noqa: E402, F401, I001

import numpy as np  # noqa: E402
import pytest  # noqa: E402


@pytest.fixture
def rng():
    return np.random.default_rng(12345)
