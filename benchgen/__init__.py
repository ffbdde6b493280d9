"""benchgen: generate, simulate and verify shift-and-add (CORDIC) function cores."""

from __future__ import annotations

__all__ = ["__version__"]

__version__ = "0.1.0"
