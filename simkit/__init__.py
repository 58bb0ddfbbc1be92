"""simkit: design and check the high-voltage DC supply of vacuum-tube equipment with ngspice.

The Python API (:mod:`simkit.api`): ``simkit.load``, ``simkit.run``, ``simkit.check``,
``simkit.sweep``, ``simkit.compare`` and ``simkit.example``.  They are looked up when first used,
so ``import simkit`` (and the command line's start) loads nothing else.
"""

import sys
import types
from typing import Any

__version__ = "0.1.0"

#: The names the package gives from simkit.api, loaded on first use.
API = ("Design", "Result", "Sweep", "Verdicts", "check", "compare", "example", "load", "run", "sweep")

__all__ = ["API", "__version__", *API]


def __getattr__(name: str) -> Any:
    # Lazy: the API module pulls in the design reader (and, when run, numpy and ngspice).
    if name in API:
        from simkit import api  # the package's one upward import: see tests/test_layers.py

        return getattr(api, name)
    raise AttributeError(f"module 'simkit' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted([*globals(), *API])


class _Package(types.ModuleType):
    """The package's module type: ``simkit.sweep`` stays the API's function.

    Importing the ``simkit.sweep`` subpackage (the engine of ``simkit sweep``) would otherwise bind
    it to the package's ``sweep`` attribute and hide the function.  The subpackage is still what
    ``from simkit.sweep.runner import ...`` and ``sys.modules["simkit.sweep"]`` give.
    """

    def __setattr__(self, name: str, value: Any) -> None:
        if name in API and isinstance(value, types.ModuleType):
            return
        super().__setattr__(name, value)


sys.modules[__name__].__class__ = _Package
