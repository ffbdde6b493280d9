"""The bulk bench on GHDL: the VHDL twin of the bulk harness, driven by the same cocotb code.

GHDL simulates these cores at a few thousand clocks per second, so the runs here are small
cores with few samples; the stream rules themselves are the Verilog harness's, checked at
volume on Icarus and Verilator (tests/test_bulk.py).
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from conftest import require_simulator, write_config

from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.harness import bulk_layout, bulk_project_files, render_vhdl_bulk_harness
from benchgen.project import generate_project, load_manifest
from benchgen.sim import SimReport, run_sim

# rst_n, clk_en, an asynchronous reset and a tag: every control the harness must wire.
CONTROLS = {
    "name": "gb_sincos",
    "function": "sincos",
    "angle_width": 10,
    "data_width": 10,
    "tag_width": 2,
    "reset_polarity": "active_low",
    "reset_style": "asynchronous",
    "clock_enable": True,
    "hdl": ["verilog", "vhdl"],
}
# Iterative, valid-only: no out_ready, so no output stalls; in_ready stays (the core is busy
# between samples).
VALID_ONLY = {
    "name": "gb_atan2",
    "function": "atan2",
    "data_width": 6,
    "angle_width": 8,
    "architecture": "iterative",
    "iterations_per_cycle": 3,
    "handshake": "valid_only",
    "hdl": ["verilog", "vhdl"],
}


def _project(tmp_path: Path, values: dict[str, object]) -> Path:
    out = tmp_path / str(values["name"])
    generate_project(write_config(tmp_path / f"{values['name']}.toml", values), out)
    return out


def test_each_language_gets_its_harness_and_one_test_module_drives_both() -> None:
    both = bulk_project_files(build_design(parse_config(VALID_ONLY)))
    assert sorted(both) == ["bench/test_gb_atan2_bulk.py", "rtl/gb_atan2_bulk.v", "rtl/gb_atan2_bulk.vhd"]
    vhdl_only = bulk_project_files(build_design(parse_config({**CONTROLS, "hdl": "vhdl"})))
    assert sorted(vhdl_only) == ["bench/test_gb_sincos_bulk.py", "rtl/gb_sincos_bulk.vhd"]
    verilog_only = bulk_project_files(build_design(parse_config({**CONTROLS, "hdl": "verilog"})))
    assert sorted(verilog_only) == ["bench/test_gb_sincos_bulk.py", "rtl/gb_sincos_bulk.v"]


def test_the_vhdl_harness_wires_the_core_s_controls_and_handshake_as_the_verilog_one() -> None:
    design = build_design(parse_config(CONTROLS))
    layout = bulk_layout("gb_sincos", design.ports)
    text = render_vhdl_bulk_harness(layout)
    assert layout.vhdl_controls == ("rst_n => not rst", "clk_en => '1'")
    assert "rst_n => not rst," in text and "clk_en => '1'," in text
    assert "out_ready => out_ready_reg" in text and "in_ready => core_in_ready" in text
    valid_only = bulk_layout("gb_atan2", build_design(parse_config(VALID_ONLY)).ports)
    text = render_vhdl_bulk_harness(valid_only)
    assert "rst => rst," in text and "clk_en" not in text
    assert "out_ready =>" not in text and "in_ready => core_in_ready" in text
    pipelined_values = {k: v for k, v in VALID_ONLY.items() if k != "iterations_per_cycle"}
    pipelined = build_design(parse_config({**pipelined_values, "architecture": "pipelined"}))
    text = render_vhdl_bulk_harness(bulk_layout("gb_atan2", pipelined.ports))
    assert "in_ready =>" not in text and "core_in_ready <= '1';" in text


@pytest.mark.sim
def test_the_vhdl_harness_analyses_with_every_warning_and_says_nothing(tmp_path: Path) -> None:
    require_simulator("ghdl")
    from test_vhdl import GHDL_WARNINGS

    for values in (CONTROLS, VALID_ONLY):
        project = _project(tmp_path, values)
        name = str(values["name"])
        work = tmp_path / f"work_{name}"
        work.mkdir()
        proc = subprocess.run(
            ["ghdl", "-a", "--std=08", *GHDL_WARNINGS, str(project / f"rtl/{name}.vhd"),
             str(project / f"rtl/{name}_bulk.vhd")],
            capture_output=True, text=True, cwd=work, check=False,
        )  # fmt: skip
        assert proc.returncode == 0 and not (proc.stdout + proc.stderr).strip(), proc.stdout + proc.stderr


@pytest.fixture(scope="module")
def controls_project(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return _project(tmp_path_factory.mktemp("ghdl_bulk"), CONTROLS)


@pytest.fixture(scope="module")
def ghdl_exhaustive(controls_project: Path, tmp_path_factory: pytest.TempPathFactory) -> tuple[SimReport, Path]:
    """The exhaustive run on GHDL, and its per-sample CSV."""
    require_simulator("ghdl")
    csv = tmp_path_factory.mktemp("ghdl_csv") / "samples.csv"
    return run_sim(controls_project, simulator="ghdl", exhaustive=True, seed=11, csv_path=csv), csv


@pytest.mark.sim
def test_exhaustive_on_ghdl_with_rst_n_and_clk_en(ghdl_exhaustive: tuple[SimReport, Path]) -> None:
    report, _ = ghdl_exhaustive
    assert report.mode == "bulk, exhaustive" and report.engine == "cocotb"
    assert report.passed, report.problems
    assert report.samples == 1 << 10 and report.mismatches == 0 and report.over_budget == 0
    assert report.latency_cycles == report.expected_latency_cycles and report.cycles_per_sample == 1
    (record,) = report.per_test
    assert record["test"] == "bulk_exhaustive"


@pytest.mark.sim
def test_the_vhdl_and_verilog_harnesses_stream_alike(
    controls_project: Path, ghdl_exhaustive: tuple[SimReport, Path], tmp_path: Path
) -> None:
    """Same stream rules: with one seed, GHDL on the VHDL pair and Icarus on the Verilog pair see
    the same samples, latencies and spacing under the same idle and stall clocks."""
    require_simulator("icarus")
    ghdl_report, ghdl_csv = ghdl_exhaustive
    icarus = run_sim(controls_project, simulator="icarus", exhaustive=True, seed=11, csv_path=tmp_path / "i.csv")
    assert icarus.passed, icarus.problems
    assert icarus.per_test == ghdl_report.per_test
    assert (tmp_path / "i.csv").read_bytes() == ghdl_csv.read_bytes()


@pytest.mark.sim
def test_one_flipped_bit_is_caught_on_ghdl(controls_project: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    require_simulator("ghdl")
    monkeypatch.setenv("BENCHGEN_BULK_FAULT", "700:out_sin:3")
    report = run_sim(controls_project, simulator="ghdl", exhaustive=True, seed=11)
    assert not report.passed and report.mismatches == 1
    (record,) = report.per_test
    (row,) = record["first_mismatches"]
    assert row["index"] == 700 and abs(row["got_out_sin"] - row["expected_out_sin"]) == 8
    assert row["got_out_cos"] == row["expected_out_cos"] and row["got_out_tag"] == row["in_tag"]


@pytest.mark.sim
def test_bulk_run_on_ghdl_of_a_valid_only_iterative_core(tmp_path: Path) -> None:
    require_simulator("ghdl")
    project = _project(tmp_path, VALID_ONLY)
    assert (project / "rtl/gb_atan2_bulk.v").is_file() and (project / "rtl/gb_atan2_bulk.vhd").is_file()
    report = run_sim(project, simulator="ghdl", samples=600, seed=4, mode="bulk")
    assert report.mode == "bulk" and Path(report.log_file).parent.name == "ghdl_bulk"
    assert report.passed, report.problems
    assert report.mismatches == 0 and report.over_budget == 0
    assert report.latency_cycles == report.expected_latency_cycles
    gaps = next(t for t in report.per_test if t["test"] == "bulk_gaps_and_stalls")
    assert gaps["samples"] == 4000 and gaps["mismatches"] == 0
    assert gaps["cycles_per_sample"] > report.expected_cycles_per_sample  # the idle gaps were applied


@pytest.mark.sim
def test_the_harness_clock_parks_so_ghdl_ends_with_no_block_asked_for(tmp_path: Path) -> None:
    """GHDL ignores cocotb's request to finish, so after the last test the harness must leave no
    event behind: its clock parks PARK_CLOCKS clocks after the last block (here, with no cocotb
    at all, after the reset) instead of running until a watchdog."""
    require_simulator("ghdl")
    from benchgen.harness import PARK_CLOCKS

    project = _project(tmp_path, CONTROLS)
    work = tmp_path / "work"
    work.mkdir()
    sources = [str(project / "rtl/gb_sincos.vhd"), str(project / "rtl/gb_sincos_bulk.vhd")]
    subprocess.run(["ghdl", "-a", "--std=08", *sources], cwd=work, check=True)
    subprocess.run(["ghdl", "-e", "--std=08", "gb_sincos_bulk"], cwd=work, check=True)
    # rst starts high, so the clock runs; the controls' initial values ask for no block.
    proc = subprocess.run(
        ["ghdl", "-r", "--std=08", "gb_sincos_bulk", "--stop-time=1ms", "--ieee-asserts=disable"],
        cwd=work, capture_output=True, text=True, check=False,
    )  # fmt: skip
    assert proc.returncode == 0, proc.stdout + proc.stderr
    # It ended by itself, PARK_CLOCKS clocks (10 ns each) in, long before the 1 ms stop.
    assert PARK_CLOCKS * 10 < 1_000_000 and "stop-time" not in proc.stdout + proc.stderr


def test_a_vhdl_project_without_its_bulk_harness_is_told_to_regenerate(tmp_path: Path) -> None:
    from benchgen.bench.bulk_plan import BulkError, bulk_run_args

    project = _project(tmp_path, CONTROLS)
    (project / "rtl/gb_sincos_bulk.vhd").unlink()
    with pytest.raises(BulkError, match="rtl/gb_sincos_bulk.vhd.*benchgen generate"):
        bulk_run_args(project, load_manifest(project), "ghdl", False)
    shutil.rmtree(project)
