"""What a grid's values depend on besides its study: the numerical libraries and their kernels.

A campaign is chaotic in the last bit (see :mod:`workbench`), so the same study gives other
values under another numpy, scipy or BLAS, or with other CPU kernels. The runner records this
in the manifest and the grid file's attributes, and refuses to add chunks computed under one
set to chunks computed under another.
"""

from __future__ import annotations

import os
from importlib import metadata

from .. import __version__

__all__ = ["LIBRARIES", "differences", "provenance"]

# Attribute name → distribution whose version it records.
LIBRARIES = {
    "numpy_version": "numpy",
    "scipy_version": "scipy",
    "scikit_learn_version": "scikit-learn",
    "xarray_version": "xarray",
    "netcdf4_version": "netCDF4",
}
# The variables by which workbench/__init__.py chooses the CPU kernels (or leaves them).
KERNEL_VARIABLES = ("OPENBLAS_CORETYPE", "NPY_DISABLE_CPU_FEATURES", "WORKBENCH_NATIVE_KERNELS")


def _blas() -> str:
    """Every BLAS loaded (numpy's and scipy's may differ), as threadpoolctl sees them:
    ``prefix internal_api version architecture``, sorted, joined by ``; ``."""
    import numpy.linalg  # noqa: F401  (loads numpy's BLAS)
    import scipy.linalg  # noqa: F401  (loads scipy's BLAS)
    from threadpoolctl import threadpool_info

    seen = {
        " ".join(
            str(info.get(k) or "?") for k in ("prefix", "internal_api", "version", "architecture")
        )
        for info in threadpool_info()
        if info.get("user_api") == "blas"
    }
    return "; ".join(sorted(seen)) or "none found"


def _kernels() -> str:
    """The kernel choice in force: the variables set (by workbench or the user), or 'native'."""
    chosen = [f"{k}={os.environ[k]}" for k in KERNEL_VARIABLES if os.environ.get(k)]
    return "; ".join(chosen) or "native"


def provenance() -> dict[str, str]:
    """The package's version (``version``), each of :data:`LIBRARIES`, the BLAS in use
    (``blas``), the kernel choice (``kernels``) and which L-BFGS-B runs (``lbfgsb``: scipy's
    driver or workbench's own), all as strings."""
    from ..engine.lbfgsb import scipy_driver_usable

    record = {"version": __version__}
    for key, dist in LIBRARIES.items():
        try:
            record[key] = metadata.version(dist)
        except metadata.PackageNotFoundError:
            record[key] = "not installed"
    record["blas"] = _blas()
    record["kernels"] = _kernels()
    record["lbfgsb"] = "scipy" if scipy_driver_usable() else "workbench"
    return record


def differences(recorded: dict | None, current: dict[str, str]) -> list[str]:
    """What differs between a recorded provenance and the current one, one phrase each
    (``scipy_version 1.11.1, here 1.17.1``); everything when nothing was recorded."""
    if not isinstance(recorded, dict):
        return ["no record of the libraries"]
    return [
        f"{key} {recorded.get(key, 'unrecorded')}, here {value}"
        for key, value in current.items()
        if recorded.get(key) != value
    ]
