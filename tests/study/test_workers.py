"""A worker process's set-up: the C library's allocator keeps numpy's temporaries mapped."""

import os
import subprocess
import sys

import pytest

# A worker under Dask's nanny: glibc then maps and unmaps every block above 128 KiB
# (mallopt(3), the Linux man-pages: setting MALLOC_TRIM_THRESHOLD_ disables the dynamic mmap
# threshold). 200 temporaries of 1 MiB, each written, count their page faults.
PROBE = """
import resource, sys
import numpy as np
from workbench.study.workers import tune_allocator
if sys.argv[1] == "tuned":
    assert tune_allocator()
np.ones(2**17)
start = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
for _ in range(200):
    block = np.empty(2**17)
    block[:] = 1.0
    del block
print(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - start)
"""


def _faults(mode: str) -> int:
    env = {**os.environ, "MALLOC_TRIM_THRESHOLD_": "65536"}
    done = subprocess.run(
        [sys.executable, "-c", PROBE, mode], env=env, capture_output=True, text=True, check=True
    )
    return int(done.stdout.strip())


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="glibc's allocator")
def test_a_tuned_worker_reuses_its_temporaries_instead_of_faulting_them_in_again():
    # 1 MiB is 256 pages of 4 KiB: mapped afresh each time, 200 blocks fault about 51,200
    # times; kept by the allocator, only the first block faults.
    assert _faults("untuned") > 200 * 256 // 2
    assert _faults("tuned") < 4 * 256
