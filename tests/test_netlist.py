"""The hardware description against the bit-true model, with no simulator: the netlist of every
function, evaluated on numpy arrays over every input of a small core, equals the model bit for
bit. And the Verilog printer's own rules."""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np
import pytest

from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.functions import FUNCTIONS, enumerate_inputs, evaluate, function_of, input_space_bits, output_ports, random_inputs
from benchgen.functions.nco import phase_of
from benchgen.lfsr import lfsr_states
from benchgen.hardware import build_core
from benchgen.netlist import Add, Cat, Cmp, Const, Local, Module, Mux, Not, Rep, Sig, Slice, Sra, Wire
from benchgen.netlist import evaluate as run_netlist
from benchgen.verilog import expr_text, literal

SMALL = {
    "sincos": {"data_width": 8, "angle_width": 8},
    "rotate": {"data_width": 5, "angle_width": 5},
    "atan2": {"data_width": 7, "angle_width": 7},
    "mul": {"data_width": 7},
    "div": {"data_width": 7},
    "sinhcosh": {"data_width": 9},
    "exp": {"data_width": 9},
    "atanh": {"data_width": 9},
    "ln": {"data_width": 9},
    "sqrt": {"data_width": 9},
    # the phase path in front of an 8-bit sincos core: 12-bit accumulator, 2 dither bits
    "nco": {"data_width": 8, "angle_width": 8, "acc_width": 12, "dither_width": 2},
}
VARIANTS = {
    # depths 2 and 5: the table head (the first iterations' x and y read from a table) inside
    # one stage, and crossing stage registers that hold the fold and the directions
    "sincos": [{}, {"gain": "raw"}, {"angle_unit": "radians"}, {"handshake": "valid_only"}, {"pipeline_depth": 2},
               {"pipeline_depth": 5}, {"table_head": 0}, {"table_head": 4, "pipeline_depth": 3}],
    "rotate": [{}, {"gain": "raw", "angle_unit": "radians", "angle_width": 6}],
    "atan2": [{}, {"prenormalise": False}, {"gain": "raw", "angle_unit": "radians"}],
    "sinhcosh": [{}, {"gain": "raw"}],
    "exp": [{}, {"gain": "raw"}],
    "sqrt": [{}, {"gain": "raw"}],
    "nco": [{}, {"dither_width": 0}, {"acc_width": 8, "dither_width": 0}, {"handshake": "valid_only"}],
}


def cases() -> list[Any]:
    out = []
    for fn in FUNCTIONS:
        for variant in VARIANTS.get(fn.name, [{}]):
            for rounding in ("half_even", "half_up", "truncate"):
                for depth in (None, 2):
                    values = {"name": "c", "function": fn.name, **SMALL[fn.name], **variant, "rounding": rounding,
                              "max_error_lsb": 3.0}  # fmt: skip
                    if depth:
                        values["pipeline_depth"] = depth
                    label = "-".join([fn.name, *(f"{k}={v}" for k, v in variant.items()), rounding, f"depth{depth or 'full'}"])
                    out.append(pytest.param(values, id=label))
    return out


def _compare(design: Any, module: Module) -> list[str]:
    dp = design.datapath
    fn = function_of(dp)
    if fn.phase_front(dp) is None:
        inputs = enumerate_inputs(dp, 0, 1 << input_space_bits(dp))
        got = run_netlist(module, inputs)
    else:
        # An NCO's accumulator and LFSR feed themselves: the evaluator is given their value at
        # each sample (from the model's phase path) and evaluates the rest, the phase sum, the
        # truncation and the sine/cosine core; 4096 random tokens reach every 8-bit code.
        inputs = random_inputs(dp, np.random.default_rng(14), 4096)
        path = phase_of(dp, inputs)
        state = lfsr_states(dp.lfsr_width, dp.lfsr_seed, 4096, max(1, dp.dither_width))
        assert len(set(path.codes.tolist())) == 1 << dp.angle_width
        got = run_netlist(module, {**inputs, "acc_reg": path.accumulator.astype(np.int64), "lfsr_reg": state.astype(np.int64)}
                          if dp.dither_width else {**inputs, "acc_reg": path.accumulator.astype(np.int64)})
    want = evaluate(dp, inputs)
    bad = []
    for p in output_ports(dp):
        expected = np.asarray(want[p.name]).astype(np.int64) & ((1 << p.width) - 1)
        if not np.array_equal(np.asarray(got[p.name]).astype(np.int64), expected):
            bad.append(p.name)
    return bad


@pytest.mark.parametrize("values", cases())
def test_description_equals_the_model_on_every_input(values: dict[str, Any]) -> None:
    design = build_design(parse_config(values))
    assert _compare(design, build_core(design)) == []


def test_a_changed_constant_in_the_description_is_seen() -> None:
    """The comparison can fail: one angle constant off by one LSB in the description (the
    model keeps the right one) shows on some inputs."""
    design = build_design(parse_config({"name": "c", "function": "sincos", **SMALL["sincos"]}))
    module = build_core(design)
    for k, st in enumerate(module.body):
        if isinstance(st, Local) and st.param.name == "ATAN_3":
            module.body[k] = Local(dataclasses.replace(st.param, value=st.param.value + 1))
            break
    else:
        raise AssertionError("no ATAN_3 in the description")
    # Every reference to the constant is to the same object in the description, so re-point them.
    fixed = {st.param.name: st.param for st in module.body if isinstance(st, Local)}
    module.body = [_repoint(st, fixed) for st in module.body]
    assert _compare(design, module) != []


def _repoint(st: Any, params: dict[str, Any]) -> Any:
    if isinstance(st, Wire):
        return Wire(st.sig, _swap(st.expr, params), st.comment)
    return st


def _swap(e: Any, params: dict[str, Any]) -> Any:
    from benchgen.netlist import Param

    if isinstance(e, Param):
        return params.get(e.name, e)
    if not dataclasses.is_dataclass(e):
        return e
    changes = {}
    for f in dataclasses.fields(e):
        v = getattr(e, f.name)
        if isinstance(v, tuple):
            changes[f.name] = tuple(_swap(x, params) for x in v)
        elif dataclasses.is_dataclass(v):
            changes[f.name] = _swap(v, params)
    return dataclasses.replace(e, **changes) if changes else e


def test_widths_are_checked_when_the_description_is_built() -> None:
    a, b = Sig("a", 8), Sig("b", 7)
    with pytest.raises(ValueError, match="8 and 7 bits"):
        Add(a, b)
    with pytest.raises(ValueError):
        Mux(a, a, a)  # an 8-bit select
    with pytest.raises(ValueError):
        Slice(a, 8, 0)
    with pytest.raises(ValueError):
        Wire(Sig("w", 9), Add(a, a))


def test_printer_rules() -> None:
    a, d = Sig("a", 8), Sig("d", 1)
    assert literal(-1, 40) == "40'hffffffffff" and literal(1, 1) == "1'b1"
    # The add/sub form that synthesises small (DESIGN.md): a + (d ? ~b : b) + {0, d}.
    assert expr_text(Add(a, Mux(d, Not(a), a), d)) == "a + (d ? ~a : a) + {7'h00, d}"
    assert expr_text(Cat((Rep(2, a[7]), Slice(a, 7, 2)))) == "{{2{a[7]}}, a[7:2]}"
    assert expr_text(Slice(a, 7, 0)) == "a"  # the whole signal is written by name
    assert expr_text(Cmp(">", a, Const(3, 8), signed=True)) == "$signed(a) > $signed(8'h03)"
    assert expr_text(Sra(a, d)) == "$signed(a) >>> d"
    with pytest.raises(ValueError, match="named signal"):
        expr_text(Slice(Add(a, a), 3, 0))


def test_directions_split_over_two_sign_copies_of_z() -> None:
    """A pipelined rotation forms z one bit wider than its range needs before each iteration
    with x and y adders: x's direction reads the top bit and y's the one below, two copies of
    the sign from different adder outputs, so each net drives half the loads. The model knows
    nothing of it: the description still equals it on every input (the test above), and here
    the wiring is checked against the range bounds (benchgen.algorithm.rotation_z_ranges)."""
    from benchgen.algorithm import rotation_z_ranges, signed_width
    from benchgen.functions import table_head

    design = build_design(parse_config({"name": "c", "function": "sincos", "angle_width": 16, "data_width": 16}))
    dp = design.datapath
    module = build_core(design)
    wires = {st.sig.name: st for st in module.body if isinstance(st, Wire)}
    ranges = rotation_z_ranges(dp, function_of(dp).z_start_range(dp))  # type: ignore[arg-type]
    head = table_head(dp, "pipelined")
    assert head > 0
    for j in range(dp.iterations):
        if j < head:
            assert f"dir_y_{j}" not in wires, "the table head's directions pick a table entry: no split"
            continue
        top, below = wires[f"dir_{j}"].expr, wires[f"dir_y_{j}"].expr
        assert isinstance(top, Cmp) and isinstance(below, Cmp) and isinstance(top.b, Const) and isinstance(below.b, Const)
        z_in = top.a
        assert z_in.width == signed_width(*ranges[j]) + 1 <= dp.z_width, f"iteration {j}: one sign copy more"
        assert top.b.value == 1 << (z_in.width - 1)
        assert isinstance(below.a, Slice) and below.a.of is z_in and below.a.hi == z_in.width - 2 and below.a.lo == 0
        assert below.b.value == 1 << (z_in.width - 2)
        # y's adder reads y's direction (carry-in too), x's adder x's
        texts = [expr_text(w.expr) for w in wires.values()]
        y_sum = [t for t in texts if f"(dir_y_{j} ? xs_{j} : ~xs_{j})" in t]
        x_sum = [t for t in texts if f"(dir_{j} ? ~ys_{j} : ys_{j})" in t]
        assert len(y_sum) == len(x_sum) == 1, f"iteration {j}"
        assert f"~dir_y_{j} ^" in y_sum[0] and f"dir_{j} ^" in x_sum[0]
