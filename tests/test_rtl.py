"""Generated Verilog: lint-clean under verilator -Wall, compiles in Icarus, byte-identical."""

from __future__ import annotations

import itertools
import re
import subprocess
from pathlib import Path

import pytest
from conftest import require_simulator

from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.netlist import Add, Mux, Not, Sig
from benchgen.rtl import render_core, verilog_literal
from benchgen.verilog import expr_text
from benchgen.simulators import find_simulator, simulator_env

VARIANTS = [
    # (architecture options, widths and sizes)
    {"architecture": "pipelined"},
    {"architecture": "pipelined", "pipeline_depth": 1},
    {"architecture": "pipelined", "pipeline_depth": 3},
    {"architecture": "iterative"},
    {"architecture": "iterative", "iterations_per_cycle": 4},
    {"architecture": "iterative", "iterations_per_cycle": 13},
]
SIZES = [
    {"data_width": 12, "angle_width": 12},
    {"data_width": 8, "angle_width": 14, "iterations": 9, "guard_bits": 0, "max_error_lsb": 8.0},
    {"data_width": 18, "angle_width": 10, "iterations": 20, "guard_bits": 1, "max_error_lsb": 8.0},
    {"data_width": 40, "angle_width": 36, "iterations": 44, "guard_bits": 8},
]


FUNCTION_CASES = [
    {"function": "rotate", "data_width": 10, "angle_width": 11},
    {"function": "rotate", "data_width": 10, "angle_width": 11, "gain": "raw", "angle_unit": "radians"},
    {"function": "atan2", "data_width": 10, "angle_width": 12},
    {"function": "atan2", "data_width": 9, "angle_width": 10, "gain": "raw", "angle_unit": "radians"},
    {"function": "atan2", "data_width": 10, "angle_width": 12, "prenormalise": False},
    # The narrowest normalisers (a 3-bit atan2's shift is one bit), with iterations enough for
    # every architecture variant.
    {"function": "atan2", "data_width": 3, "angle_width": 5, "iterations": 6, "max_error_lsb": 2.0},
    {"function": "div", "data_width": 5, "iterations": 6, "max_error_lsb": 2.0},
    {"function": "sincos", "data_width": 10, "angle_width": 12, "angle_unit": "radians"},
    {"function": "sincos", "data_width": 10, "angle_width": 11, "gain": "raw"},
    {"function": "mul", "data_width": 10},
    {"function": "div", "data_width": 9},
    {"function": "sinhcosh", "data_width": 10},
    {"function": "sinhcosh", "data_width": 9, "gain": "raw"},
    {"function": "exp", "data_width": 10},
    {"function": "exp", "data_width": 9, "gain": "raw"},
    {"function": "atanh", "data_width": 10},
    {"function": "ln", "data_width": 10},
    {"function": "ln", "data_width": 8},
    {"function": "sqrt", "data_width": 10},
    {"function": "sqrt", "data_width": 9, "gain": "raw"},
    # the phase accumulator in front: with dither (and an LFSR), and with no bit dropped
    {"function": "nco", "data_width": 10, "angle_width": 11, "acc_width": 24, "dither_width": 3},
    {"function": "nco", "data_width": 9, "angle_width": 10, "acc_width": 10},
]


def function_cases() -> list[dict[str, object]]:
    """Every function case in five architecture variants, the rounding alternating between
    them: each case meets both roundings, on different variants (consecutive cases of a
    function swap which), where crossing all of them doubled the cases (200: about 6 minutes
    of the suite's CPU time to render and lint). The sincos cases below cross all three
    roundings with every variant."""
    out = []
    for k, (fn, arch) in enumerate(itertools.product(FUNCTION_CASES, VARIANTS[:5])):
        rounding = ("half_even", "truncate")[k % 2]
        cfg = {"name": f"fn_{k}", "rounding": rounding, "tag_width": k % 3, **arch, **fn}
        cfg["max_error_lsb"] = 1.5 if rounding == "truncate" else 1.0
        out.append(cfg)
    return out


def cases() -> list[dict[str, object]]:
    out = function_cases()
    for k, (arch, size, rounding, tag) in enumerate(
        itertools.product(VARIANTS, SIZES, ("half_even", "half_up", "truncate"), (0, 5))
    ):
        if (k % 3) and size.get("data_width") == 40:
            continue  # the wide case once per architecture is enough
        if tag and rounding == "half_up":
            continue  # tags do not interact with rounding
        cfg = {"name": f"core_{k}", "function": "sincos", "rounding": rounding, "tag_width": tag, **arch, **size}
        if rounding == "truncate":
            cfg["max_error_lsb"] = max(float(cfg.get("max_error_lsb", 1.0)), 1.5)
        if cfg.get("iterations_per_cycle") == 13 and "iterations" in cfg:
            cfg["iterations_per_cycle"] = 7
        out.append(cfg)
    # free-running NCOs (a load port, no input stream): with dither and a clock enable and an
    # asynchronous active-low reset, and a 64-bit accumulator with no dither in 2 stages
    out += [
        {"name": "free_0", "function": "nco", "nco_mode": "free_running", "data_width": 10, "angle_width": 11,
         "acc_width": 24, "dither_width": 3, "clock_enable": True, "reset_style": "asynchronous",
         "reset_polarity": "active_low"},
        {"name": "free_1", "function": "nco", "nco_mode": "free_running", "data_width": 12, "angle_width": 12,
         "acc_width": 64, "pipeline_depth": 2, "rounding": "truncate", "max_error_lsb": 1.5},
    ]
    out.append(ONE_BIT_Z)
    return out


# More iterations than z's fraction bits resolve (z's guard bits sized on their own, here 3):
# z narrows to its sign in the last stages (plus the second sign copy that splits the
# directions' fanout: two bits), whose sums take the carry-in with a one-bit pad.
ONE_BIT_Z: dict[str, object] = {
    "name": "one_bit_z", "function": "sincos", "angle_width": 16, "data_width": 12, "iterations": 20,
    "guard_bits": 7, "pipeline_depth": 1,
}


def test_a_one_bit_sum_takes_its_carry_without_a_zero_width_pad() -> None:
    """A zero-width literal (0'h0) is illegal Verilog (Yosys refuses it); the sweep found one in
    the one-bit z stages of the config above, before z kept a second sign copy."""
    text = render_core(build_design(parse_config(ONE_BIT_Z)))
    assert re.search(r"^\s*wire \[1:0\] z_\d+ = .* \+ \{1'b0, dir_\d+\};", text, re.MULTILINE), "no sign-only z stage"
    assert not re.search(r"\b0'", text)
    a, d = Sig("a", 1), Sig("d", 1)
    assert expr_text(Add(a, Mux(d, Not(a), a), d)) == "a + (d ? ~a : a) + d"


@pytest.fixture(scope="module")
def rendered(tmp_path_factory: pytest.TempPathFactory) -> list[Path]:
    folder = tmp_path_factory.mktemp("rtl")
    files = []
    for cfg in cases():
        path = folder / f"{cfg['name']}.v"
        path.write_text(render_core(build_design(parse_config(cfg))))
        files.append(path)
    return files


@pytest.mark.sim
def test_lint_clean_with_all_warnings(rendered: list[Path]) -> None:
    require_simulator("verilator")
    info = find_simulator("verilator")
    failures = []
    with simulator_env(info):
        for path in rendered:
            proc = subprocess.run(
                [str(info.executable), "--lint-only", "-Wall", str(path)], capture_output=True, text=True
            )
            if proc.returncode != 0 or "%Warning" in proc.stderr:
                failures.append(f"{path.name}:\n{proc.stderr[:800]}")
    assert not failures, "\n".join(failures)


@pytest.mark.sim
def test_compiles_in_icarus_verilog_2005(rendered: list[Path], tmp_path: Path) -> None:
    require_simulator("icarus")
    failures = []
    for path in rendered:
        proc = subprocess.run(
            ["iverilog", "-g2005", "-Wall", "-o", str(tmp_path / "a.out"), str(path)], capture_output=True, text=True
        )
        if proc.returncode != 0 or proc.stderr.strip():
            failures.append(f"{path.name}:\n{proc.stderr[:800]}")
    assert not failures, "\n".join(failures)


def test_same_config_gives_byte_identical_rtl() -> None:
    for cfg in cases()[:12]:
        spec = parse_config(cfg)
        first = render_core(build_design(spec), config_text="a = 1\n")
        second = render_core(build_design(parse_config(dict(cfg))), config_text="a = 1\n")
        assert first == second
        assert "/tmp" not in first and "20" + "26-" not in first  # no paths, no dates


def test_ports_follow_the_contract() -> None:
    with_tag = render_core(build_design(parse_config({"name": "p", "function": "sincos", "data_width": 12, "angle_width": 12, "tag_width": 3})))
    for port in ("clk", "rst", "in_valid", "in_ready", "in_angle", "in_tag", "out_valid", "out_ready", "out_cos", "out_sin", "out_tag"):
        assert f" {port}," in with_tag or f" {port}\n" in with_tag
    no_tag = render_core(build_design(parse_config({"name": "p", "function": "sincos", "data_width": 12, "angle_width": 12})))
    assert "in_tag" not in no_tag and "out_tag" not in no_tag


def test_wide_literals_carry_their_width() -> None:
    assert verilog_literal(-1, 40) == "40'hffffffffff"
    assert verilog_literal(5, 3) == "3'h5"
    assert verilog_literal(0, 1) == "1'b0"  # a one-bit literal is written in binary
