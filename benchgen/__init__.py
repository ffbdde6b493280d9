"""benchgen: generate, simulate and verify shift-and-add (CORDIC) function cores.

The Python API (docs/api.md)::

    import benchgen

    core = benchgen.design_core({"name": "nco_core", "function": "sincos"})
    out = core.model(in_angle=[0, 16384])        # {"out_cos": ..., "out_sin": ...}
    project = benchgen.generate(core, "nco_core/")

The names below are loaded on first use, so ``import benchgen`` (which the command line does
first) does not pull in numpy and the generator.
"""

from __future__ import annotations

import importlib

# typing is not imported at run time: it would double the import time of this module.
TYPE_CHECKING = False

__all__ = [
    "BenchgenError",
    "ConfigError",
    "Core",
    "CoreSpec",
    "ModelInputError",
    "Port",
    "Project",
    "ProjectError",
    "__version__",
    "design_core",
    "generate",
    "load_config",
    "open_project",
]

__version__ = "0.1.0"

# Where each public name lives.
_HOMES = {
    "BenchgenError": "benchgen.errors",
    "ConfigError": "benchgen.errors",
    "Core": "benchgen.api",
    "CoreSpec": "benchgen.config",
    "ModelInputError": "benchgen.api",
    "Port": "benchgen.api",
    "Project": "benchgen.api",
    "ProjectError": "benchgen.project",
    "design_core": "benchgen.api",
    "generate": "benchgen.api",
    "load_config": "benchgen.api",
    "open_project": "benchgen.api",
}

if TYPE_CHECKING:
    from benchgen.api import (
        Core,
        ModelInputError,
        Port,
        Project,
        design_core,
        generate,
        load_config,
        open_project,
    )
    from benchgen.config import CoreSpec
    from benchgen.errors import BenchgenError, ConfigError
    from benchgen.project import ProjectError


def __getattr__(name: str) -> Any:
    home = _HOMES.get(name)
    if home is None:
        raise AttributeError(f"module 'benchgen' has no attribute '{name}'")
    value = getattr(importlib.import_module(home), name)
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
