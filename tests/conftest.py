"""Shared test helpers: simulator availability (skip locally, fail in CI) and config files."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import pytest

from benchgen.simulators import SimulatorMissing, find_simulator

IN_CI = os.environ.get("CI", "").lower() in ("1", "true", "yes")


def require_simulator(name: str) -> None:
    """Skip the calling test when ``name`` is missing, with the reason; fail instead under CI=true."""
    try:
        find_simulator(name)
    except SimulatorMissing as exc:
        if IN_CI:
            pytest.fail(f"CI needs {name}: {exc}")
        pytest.skip(f"{name} not available: {exc}")


def write_config(path: Path, values: dict[str, Any]) -> Path:
    """Write a TOML config from simple values (strings, numbers, booleans)."""
    lines = []
    for key, value in values.items():
        if isinstance(value, str):
            lines.append(f'{key} = "{value}"')
        elif isinstance(value, bool):
            lines.append(f"{key} = {'true' if value else 'false'}")
        else:
            lines.append(f"{key} = {value}")
    path.write_text("\n".join(lines) + "\n")
    return path


@pytest.fixture
def config_file(tmp_path: Path):  # type: ignore[no-untyped-def]
    """Factory: config_file(**values) writes a config file and returns its path."""

    def make(filename: str = "core.toml", /, **values: Any) -> Path:
        return write_config(tmp_path / filename, values)

    return make


def best_over_guard(spec: Any, n: int, inputs: Any, ideal: Any) -> float:
    """The best worst-case error any guard-bit count (0 to the sizer's maximum) gives at ``n``
    iterations: the sizing proofs show a smaller ``n`` fails whatever the guard bits."""
    import math

    from benchgen.functions import make_datapath
    from benchgen.design import MAX_AUTO_GUARD_BITS
    from benchgen.errors import ConfigError
    from benchgen.functions import measure

    best = math.inf
    for g in range(MAX_AUTO_GUARD_BITS + 1):
        try:
            dp = make_datapath(spec, n, g)
        except ConfigError:
            continue  # more iterations than this width holds
        best = min(best, measure(dp, inputs, ideal).max_error_lsb)
    return best


def cheaper_sizes_miss(spec: Any, design: Any, inputs: Any, ideal: Any, target: float = 1.0) -> int:
    """Assert that every (iterations, guard bits, z's guard bits where the function sizes them
    apart) of lower sizing cost than ``design``'s (benchgen.design.sizing_cost: fewer adder
    bits) misses ``target`` on ``inputs``; return how many were judged. The cost grows with
    each, so the search is finite."""
    from benchgen.design import MAX_AUTO_GUARD_BITS, sizing_cost, sizing_evidence
    from benchgen.errors import ConfigError
    from benchgen.functions import ideal_outputs, make_datapath, measure, sizes_angle_guard

    cost = sizing_cost(spec, design.datapath)
    # A size that misses on the sizer's own search set (corners, directed worst cases, inputs
    # that failed) misses, full stop; only the rest are measured on all of ``inputs``.
    evidence = sizing_evidence(spec)
    evidence_ideal = ideal_outputs(design.datapath, evidence, with_gain=False)
    z_guards = (
        list(range(MAX_AUTO_GUARD_BITS + 1)) if sizes_angle_guard(spec) and spec.angle_guard_bits is None else [None]
    )
    judged = 0
    for n in range(1, 4 * spec.data_width + 8):
        for g in range(MAX_AUTO_GUARD_BITS + 1):
            for zg in z_guards:
                try:
                    dp = make_datapath(spec, n, g, zg)
                except ConfigError:
                    continue  # more iterations than this width holds
                if sizing_cost(spec, dp) >= cost:
                    break
                judged += 1
                if measure(dp, evidence, evidence_ideal).max_error_lsb >= target:
                    continue
                worst = measure(dp, inputs, ideal).max_error_lsb
                assert worst >= target, f"{n} iterations, {g} guard bits, z {zg} cost less and reach {worst} LSB"
    return judged


def run(dp: Any, *values: Any) -> Any:
    """The bit-true model of ``dp`` on input values given in port order (a test shorthand)."""
    from benchgen.functions import evaluate, input_ports

    names = [p.name for p in input_ports(dp)]
    return evaluate(dp, {n: __import__("numpy").asarray(v) for n, v in zip(names, values, strict=True)})
