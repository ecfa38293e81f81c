"""Modules imported at their first use, so that the command line starts quickly.

SciPy's ``stats`` alone takes about a second to import; the modules that read it at import time
would make ``workbench --help`` wait for it. ``stats = LazyModule("scipy.stats")`` in their
place binds a stand-in whose first attribute read imports the module.
"""

from __future__ import annotations

import importlib
from typing import Any

__all__ = ["LazyModule"]


class LazyModule:
    """A module imported at the first read of one of its attributes.

    Each attribute read is kept on the stand-in, so a second read costs what a module's does.
    """

    def __init__(self, name: str) -> None:
        self._name = name

    def __getattr__(self, attr: str) -> Any:
        if attr.startswith("__"):  # copy, pickle and introspection ask for these: not ours
            raise AttributeError(attr)
        value = getattr(importlib.import_module(self._name), attr)
        setattr(self, attr, value)
        return value

    def __repr__(self) -> str:
        return f"<module {self._name!r}, imported at first use>"
