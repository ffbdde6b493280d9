"""The hand-written reference cores of benchmarks/hardware.py: lint-clean, and as their headers say.

The cores are the yardstick the generated cores are measured against, so what their headers
state (worst and RMS error over every angle, latency, clocks per sample) is checked here by
simulating every angle on Icarus and comparing with numpy (benchmarks/hand_cores/check_hand_cores.py).
"""

from __future__ import annotations

import importlib.util
import subprocess
import sys
from pathlib import Path
from types import ModuleType

import pytest

from benchgen.simulators import find_simulator, simulator_env
from conftest import require_simulator

CHECKER = Path(__file__).resolve().parent.parent / "benchmarks" / "hand_cores" / "check_hand_cores.py"


def _checker() -> ModuleType:
    spec = importlib.util.spec_from_file_location("check_hand_cores", CHECKER)
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # dataclasses look their module up by name
    spec.loader.exec_module(module)
    return module


CHECK = _checker()
NAMES = [c.name for c in CHECK.CORES]


@pytest.mark.sim
@pytest.mark.parametrize("name", NAMES)
def test_hand_core_lint_clean(name: str) -> None:
    require_simulator("verilator")
    info = find_simulator("verilator")
    core = next(c for c in CHECK.CORES if c.name == name)
    with simulator_env(info):
        proc = subprocess.run([str(info.executable), "--lint-only", "-Wall", str(core.path)],
                              capture_output=True, text=True)
    assert proc.returncode == 0 and "%Warning" not in proc.stderr, proc.stderr[:800]


@pytest.mark.sim
@pytest.mark.parametrize("name", NAMES)
def test_hand_core_matches_its_header(name: str, tmp_path: Path) -> None:
    """Every angle simulated: the error, latency and rate the header states are what it does."""
    require_simulator("icarus")
    core = next(c for c in CHECK.CORES if c.name == name)
    measured = CHECK.simulate(core, tmp_path)
    worst, rms = measured.errors()
    assert (round(worst, 4), round(rms, 4)) == CHECK.stated_errors(core.path)
    # A core this size cannot be exact: a worst error under half an LSB would mean the
    # comparison lost its ideal (numpy's 32767 cos/sin), not a perfect core.
    assert 1.0 < worst < 3.0
    assert measured.latencies == (core.latency,)
    assert measured.cycles_per_sample == (core.cycles_per_sample,)


def test_stated_errors_are_read_from_the_header(tmp_path: Path) -> None:
    """The parser finds the header's numbers, and refuses a header without them."""
    good = tmp_path / "good.v"
    good.write_text("// Worst error against numpy's 32767 cos/sin, all 65536 angles (simulated,\n"
                    "// check_hand_cores.py): 1.2345 LSB (RMS 0.5678 LSB).\nmodule good; endmodule\n")
    assert CHECK.stated_errors(good) == (1.2345, 0.5678)
    bare = tmp_path / "bare.v"
    bare.write_text("module bare; endmodule\n")
    with pytest.raises(RuntimeError, match="no 'worst error"):
        CHECK.stated_errors(bare)
