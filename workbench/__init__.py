"""workbench: stress-test a belief about where the optimum lies before spending real evaluations."""

import os as _os

__version__ = "0.1.0"


def _same_kernels_everywhere() -> None:
    """Ask NumPy and OpenBLAS for the same floating-point kernels on every x86-64 machine.

    A campaign's GP fit and acquisition search are chaotic in the last bit: the AVX-512
    kernels that NumPy and OpenBLAS pick on some processors round differently from the AVX2
    ones, and a grid computed there differs value for value from one computed here. When this
    package is imported before NumPy, on an x86-64 processor with AVX2 and FMA, and NumPy is a
    release whose feature names are known (2.4 or later), the AVX2 kernels are chosen (the
    variables are only set when unset; ``WORKBENCH_NATIVE_KERNELS=1`` leaves everything as it
    is). Worker processes inherit the environment, so they follow.
    """
    import platform
    import sys
    from importlib import metadata

    if "numpy" in sys.modules or _os.environ.get("WORKBENCH_NATIVE_KERNELS"):
        return
    if platform.system() != "Linux" or platform.machine() != "x86_64":
        return
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as f:
            flags = next(
                (line.split(":", 1)[1].split() for line in f if line.startswith("flags")), []
            )
        major, minor = (int(p) for p in metadata.version("numpy").split(".")[:2])
    except (OSError, ValueError, metadata.PackageNotFoundError):
        return
    if not {"avx2", "fma"} <= set(flags) or (major, minor) < (2, 4):
        return
    _os.environ.setdefault("OPENBLAS_CORETYPE", "Haswell")
    _os.environ.setdefault("NPY_DISABLE_CPU_FEATURES", "X86_V4 AVX512_ICL AVX512_SPR")


_same_kernels_everywhere()
