"""The Verilog and the VHDL of one core use the same names, so they read side by side: a core's
description avoids names the VHDL printer would have to rename (docs/vhdl.md)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from conftest import write_config

from benchgen.project import generate_project


def _vhdl_declared(text: str) -> set[str]:
    """Signals and constants the VHDL declares (ports are never renamed)."""
    return set(re.findall(r"^\s+(?:constant|signal)\s+(\w+)\s+:", text, re.M))


@pytest.mark.parametrize("arch", [{"architecture": "pipelined"}, {"architecture": "iterative", "iterations_per_cycle": 3}])
def test_exp_declares_the_same_names_in_both_languages(arch: dict[str, object], tmp_path: Path) -> None:
    """exp's start constant X_START beside its wire x_start (one name once case is ignored) and
    its remainder `rem` (a VHDL operator) came out as X_START/x_start_s and rem_s in VHDL."""
    config = write_config(tmp_path / "c.toml", {"name": "exp_twin", "function": "exp", "data_width": 12, **arch})
    config.write_text(config.read_text() + 'hdl = ["verilog", "vhdl"]\n')
    generate_project(config, tmp_path / "p")
    verilog_words = set(re.findall(r"\b\w+\b", (tmp_path / "p" / "rtl" / "exp_twin.v").read_text()))
    declared = _vhdl_declared((tmp_path / "p" / "rtl" / "exp_twin.vhd").read_text())
    assert sorted(declared - verilog_words) == []
    assert {"x_start", "z_start", "rem_first", "X_INIT"} <= declared
