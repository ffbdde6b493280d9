"""Reset and clock enable choices: reset_style, reset_polarity, clock_enable (docs/config.md).

Config checks and printed text run without a simulator; the variants are linted (Verilator,
Icarus, GHDL) and simulated with the per-clock bench, which drives clk_en at random and checks
that nothing moves while it is low, and raises the reset between two edges to check its style.
"""

from __future__ import annotations

import itertools
import json
import re
import subprocess
from pathlib import Path

import pytest
from conftest import require_simulator, write_config

from benchgen.config import parse_config, spec_to_dict
from benchgen.design import build_design
from benchgen.errors import ConfigError
from benchgen.harness import bulk_layout, render_bulk_harness
from benchgen.netlist import Const, Module, Reg, RegisterBlock, Sig
from benchgen.project import generate_project
from benchgen.rtl import render_core, render_module, render_vhdl_core, render_vhdl_module
from benchgen.sim import run_sim
from benchgen.simulators import find_simulator, simulator_env

SMALL = {"function": "sincos", "data_width": 8, "angle_width": 8}
STYLES = ("synchronous", "asynchronous")
POLARITIES = ("active_high", "active_low")
# Every style x polarity x enable, alternating the architecture and the function, for lint.
VARIANTS = [
    {
        "name": f"ce_{k}",
        "reset_style": style,
        "reset_polarity": polarity,
        "clock_enable": enable,
        **({"architecture": "iterative", "iterations_per_cycle": 3} if k % 2 else {"pipeline_depth": 3}),
        **(SMALL if k % 4 < 2 else {"function": "atan2", "data_width": 8, "angle_width": 9, "tag_width": 2}),
    }
    for k, (style, polarity, enable) in enumerate(itertools.product(STYLES, POLARITIES, (False, True)))
]


def _spec(**values: object):  # type: ignore[no-untyped-def]
    return parse_config({"name": "ce_core", **SMALL, **values})


def _blocks(text: str) -> list[list[str]]:
    """The clocked blocks of a generated Verilog file, each as its lines."""
    lines = text.splitlines()
    out = []
    for k, line in enumerate(lines):
        if line.startswith("    always @(posedge clk"):
            end = lines.index("    end", k)
            out.append(lines[k : end + 1])
    return out


# ----------------------------------------------------------------------------- config


def test_defaults_are_a_synchronous_active_high_rst_and_no_enable_and_stay_out_of_the_manifest() -> None:
    spec = _spec()
    assert (spec.reset_style, spec.reset_polarity, spec.clock_enable) == ("synchronous", "active_high", False)
    assert not {"reset_style", "reset_polarity", "clock_enable"} & set(spec_to_dict(spec))
    chosen = _spec(reset_style="asynchronous", reset_polarity="active_low", clock_enable=True)
    shown = spec_to_dict(chosen)
    assert (shown["reset_style"], shown["reset_polarity"], shown["clock_enable"]) == ("asynchronous", "active_low", True)
    assert parse_config(shown) == chosen  # the manifest's config reads back as the same core


@pytest.mark.parametrize(
    ("field", "value", "fixed"),
    [
        ("reset_style", "async", "asynchronous"),
        ("reset_style", "sync", "synchronous"),
        ("reset_style", 1, "synchronous"),
        ("reset_polarity", "low", "active_low"),
        ("reset_polarity", "active-high", "active_high"),
        ("reset_polarity", True, "active_high"),
        ("clock_enable", "true", True),
        ("clock_enable", "no", False),
        ("clock_enable", 1, True),
    ],
)
def test_a_bad_value_is_one_line_naming_field_value_and_a_fix_that_is_accepted(
    field: str, value: object, fixed: object
) -> None:
    with pytest.raises(ConfigError) as info:
        _spec(**{field: value})
    message = str(info.value)
    assert "\n" not in message and field in message and str(value) in message
    assert info.value.suggestion == {field: fixed}
    assert getattr(_spec(**info.value.suggestion), field) == fixed


@pytest.mark.parametrize(("polarity", "enable"), [("active_high", False), ("active_low", True)])
def test_ports_name_the_reset_by_its_level_and_add_the_enable(polarity: str, enable: bool) -> None:
    design = build_design(_spec(reset_polarity=polarity, clock_enable=enable))
    names = [p.name for p in design.ports]
    reset = "rst_n" if polarity == "active_low" else "rst"
    assert names[:2] == ["clk", reset] and ("rst" in names) == (reset == "rst")
    assert (names[2] == "clk_en") == enable and ("clk_en" in names) == enable
    (port,) = [p for p in design.ports if p.role == "reset"]
    assert port.active_low == (polarity == "active_low")


# ----------------------------------------------------------------------------- printed text


@pytest.mark.parametrize(("style", "polarity"), list(itertools.product(STYLES, POLARITIES)))
def test_verilog_sensitivity_list_and_reset_level(style: str, polarity: str) -> None:
    text = render_core(build_design(_spec(reset_style=style, reset_polarity=polarity, architecture="iterative")))
    low = polarity == "active_low"
    reset, test = ("rst_n", "if (!rst_n) begin") if low else ("rst", "if (rst) begin")
    assert f"    input  wire {reset}," in text
    blocks = _blocks(text)
    with_reset = [b for b in blocks if b[1].strip() == test]
    assert len(with_reset) >= 2 and len(with_reset) < len(blocks)  # control blocks; data blocks have none
    for block in blocks:
        if block in with_reset and style == "asynchronous":
            assert block[0] == f"    always @(posedge clk or {'negedge' if low else 'posedge'} {reset}) begin"
        else:
            assert block[0] == "    always @(posedge clk) begin"
    level = "active low" if low else "active high"
    assert f"// {reset} is {style} and {level};" in text
    assert "clk_en" not in text


def test_verilog_clock_enable_gates_every_update_and_not_the_reset() -> None:
    text = render_core(build_design(_spec(clock_enable=True, reset_polarity="active_low")))
    assert "    input  wire clk_en," in text and "// clk_en is a clock enable" in text
    blocks = _blocks(text)
    assert blocks
    for block in blocks:
        gate = [k for k, line in enumerate(block) if "(clk_en)" in line]
        assert len(gate) == 1, block
        before = [line for line in block[1 : gate[0]] if "<=" in line]
        # Only the reset's loads come before the gate: every update is under it.
        assert not before or block[1].strip() == "if (!rst_n) begin", block
        assert all("<= 1'b0" in line or "<= 2'h0" in line or "'h0;" in line for line in before), block


@pytest.mark.parametrize(
    ("style", "polarity", "enable"),
    [("asynchronous", "active_low", True), ("synchronous", "active_high", True), ("asynchronous", "active_high", False)],
)
def test_vhdl_process_reset_and_enable(style: str, polarity: str, enable: bool) -> None:
    text = render_vhdl_core(build_design(_spec(reset_style=style, reset_polarity=polarity, clock_enable=enable)))
    reset, level = ("rst_n", "0") if polarity == "active_low" else ("rst", "1")
    processes = re.findall(r"    (p_\w+) : process \(([^)]*)\)\n    begin\n(.*?)\n    end process;", text, re.S)
    clocked = [p for p in processes if "rising_edge(clk)" in p[2]]
    assert clocked
    for _, sensitivity, body in clocked:
        resets = f"if {reset} = '{level}' then" in body
        if style == "asynchronous" and resets:
            assert sensitivity == f"clk, {reset}"
            assert body.index(f"if {reset} = '{level}' then") < body.index(f"elsif rising_edge(clk) then")
        else:
            assert sensitivity == "clk"
            if resets:  # synchronous: written last inside the edge, so it wins over the updates
                assert body.index("if rising_edge(clk) then") < body.index(f"if {reset} = '{level}' then")
        assert (body.count("if clk_en = '1' then") == 1) == enable
    assert any(f"if {reset} = '{level}' then" in body for _, _, body in clocked)


def test_an_asynchronous_reset_must_reset_its_whole_block() -> None:
    """A register left out of an asynchronous reset would be built with an enable on the reset:
    both printers refuse the description rather than print it."""
    from benchgen.netlist import Clocking

    m = Module(name="m", clocking=Clocking(asynchronous=True))
    a, b = Sig("a_reg", 1), Sig("b_reg", 1)
    m.port("clk", 1, "in")
    m.port("rst", 1, "in")
    m.add(Reg(a), Reg(b), RegisterBlock(updates=(((None, ((a, b), (b, a))),),), reset=((a, Const(0, 1)),)))
    with pytest.raises(ValueError, match="b_reg"):
        render_module(m)
    with pytest.raises(ValueError, match="b_reg"):
        render_vhdl_module(m)


def test_bulk_harness_drives_the_reset_at_its_level_and_holds_the_enable_high() -> None:
    design = build_design(_spec(reset_polarity="active_low", clock_enable=True))
    harness = render_bulk_harness(bulk_layout("ce_core", design.ports))
    assert "        .rst_n(~rst),\n        .clk_en(1'b1),\n" in harness and ".rst(" not in harness


def test_manifest_and_header_state_the_choice(tmp_path: Path) -> None:
    values = {"name": "ce_core", **SMALL, "reset_style": "asynchronous", "reset_polarity": "active_low", "clock_enable": True}
    project = tmp_path / "p"
    generate_project(write_config(tmp_path / "c.toml", values), project)
    manifest = json.loads((project / "manifest.json").read_text())
    assert manifest["config"]["reset_style"] == "asynchronous" and manifest["config"]["clock_enable"] is True
    assert {"rst_n", "clk_en"} <= set(manifest["ports"]) and "rst" not in manifest["ports"]
    header = (project / "rtl/ce_core.v").read_text().split("`resetall")[0]
    assert "// rst_n is asynchronous and active low;" in header and "// clk_en is a clock enable" in header


# ----------------------------------------------------------------------------- lint


@pytest.fixture(scope="module")
def variant_files(tmp_path_factory: pytest.TempPathFactory) -> list[tuple[Path, Path]]:
    folder = tmp_path_factory.mktemp("variants")
    out = []
    for cfg in VARIANTS:
        design = build_design(parse_config(cfg))
        v, vhd = folder / f"{cfg['name']}.v", folder / f"{cfg['name']}.vhd"
        v.write_text(render_core(design))
        vhd.write_text(render_vhdl_core(design))
        out.append((v, vhd))
    return out


@pytest.mark.sim
def test_every_variant_is_lint_clean_in_verilator_and_icarus(
    variant_files: list[tuple[Path, Path]], tmp_path: Path
) -> None:
    require_simulator("verilator")
    require_simulator("icarus")
    info = find_simulator("verilator")
    failures = []
    with simulator_env(info):
        for v, _ in variant_files:
            proc = subprocess.run([str(info.executable), "--lint-only", "-Wall", str(v)], capture_output=True, text=True)
            if proc.returncode or "%Warning" in proc.stderr:
                failures.append(f"verilator {v.name}: {proc.stderr[:600]}")
            proc = subprocess.run(["iverilog", "-g2005", "-Wall", "-o", str(tmp_path / "a.out"), str(v)], capture_output=True, text=True)
            if proc.returncode or proc.stderr.strip():
                failures.append(f"icarus {v.name}: {proc.stderr[:600]}")
    assert not failures, "\n".join(failures)


@pytest.mark.sim
def test_every_variant_analyses_and_synthesises_in_ghdl(
    variant_files: list[tuple[Path, Path]], tmp_path: Path
) -> None:
    require_simulator("ghdl")
    from test_vhdl import GHDL_WARNINGS, ghdl

    failures = []
    for _, vhd in variant_files:
        proc = ghdl("-a", "--std=08", f"--workdir={tmp_path}", *GHDL_WARNINGS, str(vhd), cwd=tmp_path)
        if proc.returncode or (proc.stdout + proc.stderr).strip():
            failures.append(f"ghdl -a {vhd.name}: {(proc.stdout + proc.stderr)[:600]}")
            continue
        proc = ghdl("--synth", "--std=08", f"--workdir={tmp_path}", vhd.stem, cwd=tmp_path)
        if proc.returncode or proc.stderr.strip() or f"entity {vhd.stem} is" not in proc.stdout:
            failures.append(f"ghdl --synth {vhd.name}: {proc.stderr[:600]}")
    assert not failures, "\n".join(failures)


# ----------------------------------------------------------------------------- simulation

SIM_CASES = {
    # (config, simulators): each reset style and each level runs mid-stream with the enable
    # toggling (the default synchronous active-high rst runs in every other simulation test).
    "async_low_ce_iter": ({"reset_style": "asynchronous", "reset_polarity": "active_low", "clock_enable": True,
                           "architecture": "iterative", "iterations_per_cycle": 3}, ("icarus", "verilator")),
    "sync_low_ce_pipe": ({"reset_polarity": "active_low", "clock_enable": True, "pipeline_depth": 4, "tag_width": 3},
                         ("icarus",)),
}
SIM_RUNS = [(case, sim) for case, (_, sims) in SIM_CASES.items() for sim in sims]


def _project(tmp_path: Path, name: str, values: dict[str, object]) -> Path:
    project = tmp_path / name
    values = {"name": name, **SMALL, "data_width": 10, "angle_width": 10, **values}
    generate_project(write_config(tmp_path / f"{name}.toml", values), project)
    return project


@pytest.mark.sim
@pytest.mark.parametrize(("case", "simulator"), SIM_RUNS, ids=["-".join(r) for r in SIM_RUNS])
def test_variant_matches_the_model_with_the_enable_toggling(case: str, simulator: str, tmp_path: Path) -> None:
    """The four bench tests pass: bit for bit, latency and throughput in enabled clocks, nothing
    moving while clk_en is low, the reset mid-stream acting as its style says."""
    require_simulator(simulator)
    project = _project(tmp_path, case, SIM_CASES[case][0])
    report = run_sim(project, simulator=simulator, samples=2000, seed=515, mode="per-clock")
    assert report.passed, report.table()
    assert report.tests == 4 and report.mismatches == 0 and report.samples >= 2000
    manifest = json.loads((project / "manifest.json").read_text())
    assert report.latency_cycles == manifest["derived"]["latency_cycles"]
    assert report.cycles_per_sample == manifest["derived"]["cycles_per_sample"]


@pytest.mark.sim
def test_variant_on_ghdl(tmp_path: Path) -> None:
    require_simulator("ghdl")
    project = _project(tmp_path, "ce_vhdl", {**SIM_CASES["async_low_ce_iter"][0], "hdl": "vhdl"})
    report = run_sim(project, simulator="ghdl", samples=1000, seed=5)
    assert report.passed, report.table()


@pytest.mark.sim
def test_bulk_bench_runs_a_variant_with_the_enable_held_high(tmp_path: Path) -> None:
    require_simulator("icarus")
    project = _project(tmp_path, "ce_bulk", SIM_CASES["async_low_ce_iter"][0])
    report = run_sim(project, simulator="icarus", seed=8, exhaustive=True)
    assert report.passed, report.problems
    assert report.samples == 1 << 10 and report.mismatches == 0


@pytest.mark.sim
def test_the_bench_catches_a_register_that_ignores_the_enable_and_a_reset_of_the_wrong_style(tmp_path: Path) -> None:
    """The checks can fail: one block left ungated, then the asynchronous reset made synchronous."""
    require_simulator("icarus")
    project = _project(tmp_path, "ce_bad", SIM_CASES["async_low_ce_iter"][0])
    rtl = project / "rtl/ce_bad.v"
    good = rtl.read_text()
    # the block that drives out_valid (an iterative core's single output register, set when a
    # result moves in): ungated, out_valid moves on an edge with clk_en low
    assert good.count("out_valid_reg <= 1'b1") == 1
    first = good.rindex("if (clk_en) begin", 0, good.index("out_valid_reg <= 1'b1"))
    rtl.write_text(good[:first] + good[first:].replace("if (clk_en) begin", "if (1'b1) begin", 1))
    report = run_sim(project, simulator="icarus", samples=500, seed=9, mode="per-clock")
    assert not report.passed
    assert any("clk_en low at edge" in p for p in report.problems), report.problems
    rtl.write_text(good.replace(" or negedge rst_n", ""))
    report = run_sim(project, simulator="icarus", samples=500, seed=9, mode="per-clock")
    assert not report.passed
    assert report.problems == [
        "reset_mid_stream: out_valid had not fallen by the next clock edge after the reset rose; "
        "the reset should be asynchronous"
    ]


CHECKER_TEST = '''
"""A user's CoreChecker on a core with an active-low reset and a clock enable toggling at random."""

import os

import cocotb
import numpy as np
from cocotb.clock import Clock
from cocotb.triggers import ClockCycles, RisingEdge

from benchgen.bench import CoreChecker, StreamDriver


async def toggle(dut, rng):
    while True:
        dut.clk_en.value = int(rng.random() >= 0.3)
        await RisingEdge(dut.clk)


@cocotb.test()
async def test_checker_follows_the_enable_and_the_active_low_reset(dut):
    Clock(dut.clk, 10, unit="ns").start()
    dut.out_ready.value = 1
    dut.in_valid.value = 0
    dut.clk_en.value = 1
    dut.rst_n.value = 0
    await ClockCycles(dut.clk, 3)
    dut.rst_n.value = 1
    checker = CoreChecker(dut, os.environ["CE_PROJECT"])  # reset and enable found by name
    checker.start()
    await RisingEdge(dut.clk)  # the checker judges from the edge after the next one on
    rng = np.random.default_rng(3)
    cocotb.start_soon(toggle(dut, rng))
    # The driver knows nothing of clk_en: a sample it offers at an edge with clk_en low is not
    # taken by the core, and the checker must not count it either.
    driver = StreamDriver(dut.clk, dut.in_valid, dut.in_ready, {"in_angle": dut.in_angle})
    sender = cocotb.start_soon(driver.send({"in_angle": rng.integers(0, 1 << 10, 400)}))
    await ClockCycles(dut.clk, 300)
    assert checker.in_flight > 0
    sender.cancel()
    dut.in_valid.value = 0
    dut.rst_n.value = 0
    await ClockCycles(dut.clk, 2)
    dut.rst_n.value = 1
    await driver.send({"in_angle": rng.integers(0, 1 << 10, 300)})
    await ClockCycles(dut.clk, 100)
    await checker.drain()
    result = checker.stop()  # raises on any problem
    assert result.extra["dropped_by_reset"] > 0
    assert result.samples >= 100 and result.mismatches == 0
    assert result.latency_cycles[0] >= checker.design.timing.latency_cycles
'''


@pytest.mark.sim
def test_the_users_checker_follows_the_enable_and_an_active_low_reset(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    require_simulator("icarus")
    from cocotb_tools.check_results import get_results
    from cocotb_tools.runner import get_runner

    project = _project(tmp_path, "ce_chk", SIM_CASES["async_low_ce_iter"][0])
    (tmp_path / "test_ce_checker.py").write_text(CHECKER_TEST)
    monkeypatch.syspath_prepend(str(tmp_path))
    build = tmp_path / "build"
    runner = get_runner("icarus")
    runner.build(sources=[project / "rtl/ce_chk.v"], hdl_toplevel="ce_chk", build_dir=build, timescale=("1ns", "1ps"))
    try:
        runner.test(
            test_module="test_ce_checker", hdl_toplevel="ce_chk", build_dir=build, test_dir=build, seed=1,
            results_xml=str(build / "results.xml"), extra_env={"CE_PROJECT": str(project)},
        )  # fmt: skip
    except SystemExit:
        pass  # a failing test ends test(); the results file says which
    assert get_results(build / "results.xml") == (1, 0)
