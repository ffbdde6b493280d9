"""The cocotb bench library: the generated benches' tests and the pieces for users' own tests.

:class:`CoreChecker`, :class:`StreamDriver` and :class:`StreamMonitor` (benchgen/bench/checker.py)
check a generated core inside a user's own design (docs/api.md). They are loaded on first use:
importing cocotb is not needed by the modules of this package that the command line imports.
"""

from __future__ import annotations

import importlib

__all__ = ["CoreChecker", "StreamDriver", "StreamMonitor"]

TYPE_CHECKING = False
if TYPE_CHECKING:
    from benchgen.bench.checker import CoreChecker, StreamDriver, StreamMonitor


def __getattr__(name: str) -> object:
    if name not in __all__:
        raise AttributeError(f"module 'benchgen.bench' has no attribute '{name}'")
    value = getattr(importlib.import_module("benchgen.bench.checker"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
