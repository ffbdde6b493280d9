"""benchmarks/hardware.py without the tools: core selection, preparation and the ratio table.

The benchmark itself runs Yosys and nextpnr for an hour; these tests check, in seconds, that
what it prints is what it measured: every ratio is to the right reference, every target's
verdict follows its bound, and a generated core is synthesised from its own project's RTL.
"""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path
from types import ModuleType

import pytest

from benchgen.functions import ITERATIVE_TABLE_HEAD_ITERATIONS
from benchgen.synth import Estimate

SCRIPT = Path(__file__).resolve().parent.parent / "benchmarks" / "hardware.py"


def _bench() -> ModuleType:
    spec = importlib.util.spec_from_file_location("hardware_bench", SCRIPT)
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # dataclasses look their module up by name
    spec.loader.exec_module(module)
    return module


HW = _bench()


def _est(target: str, luts: int, carry: int, ffs: int, mux: int = 0) -> Estimate:
    return Estimate(target=target, part="p", luts=luts, ffs=ffs, carry=carry, mux=mux, bram=0, dsp=0,
                    cells={}, fmax_mhz=None, clock_mhz=200.0, logic_cells=None, tools={}, seconds=0.0)


def test_only_brings_the_reference_along() -> None:
    assert [c.key for c in HW.select(["gen_iterative_auto"])] == ["hand_iterative", "gen_iterative_auto"]
    assert [c.key for c in HW.select(["atan2_compensated"])] == ["atan2_raw", "atan2_compensated"]
    assert [c.key for c in HW.select(["hand_pipelined"])] == ["hand_pipelined"]
    assert [c.key for c in HW.select(None)] == [c.key for c in HW.CORES]
    # Every reference named is a core of the benchmark, and is itself a reference.
    for c in HW.CORES:
        assert c.reference is None or HW.BY_KEY[c.reference].reference is None


def test_unknown_core_is_refused_in_one_line(capsys: pytest.CaptureFixture[str]) -> None:
    with pytest.raises(SystemExit) as exc:
        HW.main(["--only", "gen_nonsense"])
    assert exc.value.code == 2
    err = capsys.readouterr().err.strip().splitlines()[-1]
    assert "--only" in err and "gen_nonsense" in err and "gen_pipelined_auto" in err


def test_table_ratios_and_verdicts_follow_the_measurements(tmp_path: Path) -> None:
    hand = HW.prepare(HW.BY_KEY["hand_pipelined"], tmp_path)
    gen = HW.prepare(HW.BY_KEY["gen_pipelined_hand_size"], tmp_path)
    measured = {
        "hand_pipelined": {
            "ice40": HW.Measured(_est("ice40", 1000, 800, 900), {1: 100.0, 2: 120.0, 3: 110.0}),
            "ecp5": HW.Measured(_est("ecp5", 400, 500, 900, mux=10), {1: 150.0, 2: 140.0, 3: 160.0}),
        },
        "gen_pipelined_hand_size": {
            "ice40": HW.Measured(_est("ice40", 1100, 800, 950), {1: 99.0, 2: 121.0, 3: 88.0}),
            "ecp5": HW.Measured(_est("ecp5", 380, 500, 950, mux=30), {1: 150.0, 2: 170.0, 3: 160.0}),
        },
    }
    lines = HW.render({"hand_pipelined": hand, "gen_pipelined_hand_size": gen}, measured, ["ice40", "ecp5"])
    header = [c.strip() for c in lines[0].strip("|").split("|")]
    row = dict(zip(header, [c.strip() for c in lines[3].strip("|").split("|")], strict=True))
    assert row["iCE40 LUT4"] == "1100 (1.10x)"
    assert row["HX8K MHz"] == "99.0 (0.90x)"  # medians 99 against 110
    assert row["ECP5 LUT4+CCU2C"] == "880 (0.98x)"
    assert row["ECP5 PFUMX+L6MUX"] == "30 (3.00x)"
    assert row["ECP5 MHz"] == "160.0 (1.07x)"
    assert row["clk/sample"] == "1" and row["latency clk"] == str(gen.latency)
    verdicts = {tuple(c.strip() for c in line.split("|")[1:3]): line.split("|")[4].strip() for line in lines
                if line.startswith("| ") and "size, pipelined:" in line}
    label = HW.BY_KEY["gen_pipelined_hand_size"].label
    assert verdicts == {
        (f"{label}: iCE40 LUT4", "<= 1x"): "not met",  # 1.10x
        (f"{label}: HX8K MHz", ">= 1x"): "not met",  # 0.90x
        (f"{label}: ECP5 LUT4", "<= 1x"): "met",  # 0.95x
        (f"{label}: ECP5 MHz", ">= 1x"): "met",  # 1.07x
    }


def test_generated_core_is_synthesised_from_its_project(tmp_path: Path) -> None:
    p = HW.prepare(HW.BY_KEY["gen_iterative_hand_size"], tmp_path)
    assert [s.name for s in p.sources] == [f"{p.top}.v"] and all(s.is_file() for s in p.sources)
    assert f"module {p.top}" in p.sources[0].read_text()
    # one iteration per clock, 16 iterations, the first two by table in the load clock
    assert p.cycles_per_sample == 16 - ITERATIVE_TABLE_HEAD_ITERATIONS
    assert "16 it., 4 guard, truncate" in p.describe
    hand = HW.prepare(HW.BY_KEY["hand_iterative"], tmp_path)
    assert hand.sources[0].parent.name == "hand_cores" and hand.cycles_per_sample == 16
