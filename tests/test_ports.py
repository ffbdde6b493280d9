"""One description of a core's ports (functions.core_ports, Design.ports): the hardware declares
exactly those ports, and the manifest is written from them."""

from __future__ import annotations

import pytest

from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.functions import FUNCTIONS, input_ports, output_ports
from benchgen.hardware import build_core
from benchgen.project import manifest_for
from benchgen.rtl import render_core

# Small cores, so sizing each one takes a moment.
SMALL = {"sincos": 8, "rotate": 6, "atan2": 7, "mul": 7, "div": 7,
         "sinhcosh": 9, "exp": 9, "atanh": 9, "ln": 9, "sqrt": 9, "nco": 8}


@pytest.mark.parametrize("tag_width", [0, 3])
@pytest.mark.parametrize("function", [f.name for f in FUNCTIONS])
def test_the_core_declares_the_ports_its_design_lists(function: str, tag_width: int) -> None:
    width = SMALL[function]
    values: dict[str, object] = {"name": "c", "function": function, "data_width": width, "tag_width": tag_width,
                                 "max_error_lsb": 2.0}
    if any(f.name == function and f.angle_ports for f in FUNCTIONS):
        values["angle_width"] = width
    design = build_design(parse_config(values))
    ports = design.ports
    declared = [(p.sig.name, p.sig.width, p.direction, p.sig.vector) for p in build_core(design).ports]
    assert declared == [(p.name, p.width, p.direction, p.payload) for p in ports]
    # The function's data ports, in its order, with their formats and signs.
    dp = design.datapath
    assert [p.name for p in ports if p.role == "data"] == [p.name for p in input_ports(dp) + output_ports(dp)]
    assert {p.name for p in ports if p.role == "tag"} == ({"in_tag", "out_tag"} if tag_width else set())
    manifest = manifest_for(design)
    assert manifest["ports"] == {p.name: p.width for p in ports}
    assert manifest["formats"] == {p.name: p.doc for p in input_ports(dp) + output_ports(dp)}
    assert manifest["signed_outputs"] == [p.name for p in output_ports(dp) if p.signed]


@pytest.mark.parametrize(
    ("architecture", "handshake", "readies"),
    [
        ("pipelined", "ready_valid", {"in_ready", "out_ready"}),
        ("iterative", "ready_valid", {"in_ready", "out_ready"}),
        # a sink that takes every sample: no out_ready; a pipeline then takes a sample every clock
        ("pipelined", "valid_only", set()),
        ("iterative", "valid_only", {"in_ready"}),
    ],
)
def test_the_handshake_decides_the_ready_ports(architecture: str, handshake: str, readies: set[str]) -> None:
    values = {"name": "c", "function": "sincos", "data_width": 8, "angle_width": 8, "architecture": architecture,
              "handshake": handshake}  # fmt: skip
    design = build_design(parse_config(values))
    assert {p.name for p in design.ports if p.name.endswith("_ready")} == readies
    declared = {p.sig.name for p in build_core(design).ports}
    assert {n for n in declared if n.endswith("_ready")} == readies
    # the skid buffer's spare entry exists only where the consumer can stall a core that
    # hands over a result every clock; an iterative core (one every few clocks) has a single
    # output register, and every core has its out_valid register
    text = render_core(design)
    assert ("spare_valid_reg" in text) == (handshake == "ready_valid" and architecture == "pipelined")
    assert "out_valid_reg" in text
    assert ("o_to_out" in text) == (handshake == "ready_valid" and architecture == "iterative")
