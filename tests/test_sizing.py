"""Sizing to a target: the chosen size meets it and no size with fewer adder bits does."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from conftest import cheaper_sizes_miss

from benchgen.functions import make_datapath
from benchgen.config import parse_config
from benchgen.design import MAX_AUTO_GUARD_BITS, build_design
from benchgen.errors import ConfigError
from benchgen.functions import measure, sizing_inputs


def best_over_guard(spec, n: int) -> float:  # type: ignore[no-untyped-def]
    inputs, _ = sizing_inputs(make_datapath(spec, spec.data_width, 0))
    worst = math.inf
    for g in range(MAX_AUTO_GUARD_BITS + 1):
        if n <= spec.data_width + g + 1:
            worst = min(worst, measure(make_datapath(spec, n, g), inputs).max_error_lsb)
    return worst


@pytest.mark.parametrize("width", [12, 16])
@pytest.mark.parametrize("rounding", ["half_even", "truncate"])
def test_sincos_sizing_is_minimal_in_adder_bits(width: int, rounding: str) -> None:
    """The size meets the target over every input, and every (iterations, guard bits) with fewer
    adder bits misses it (as does every one of equal cost with fewer iterations)."""
    target = 1.0 if rounding == "half_even" else 1.5
    spec = parse_config(
        {"name": "c", "function": "sincos", "data_width": width, "angle_width": width, "rounding": rounding, "max_error_lsb": target}
    )
    design = build_design(spec)
    n, g = design.datapath.iterations, design.datapath.guard_bits
    inputs, exhaustive = sizing_inputs(design.datapath)
    assert exhaustive  # a 2^12 or 2^16 space is checked whole
    assert measure(make_datapath(spec, n, g), inputs).max_error_lsb < target
    # every size of lower sizing cost (fewer adder bits, or as many with fewer iterations) misses
    judged = cheaper_sizes_miss(spec, design, inputs, None, target)
    assert judged >= g  # the smaller guard-bit counts at n are among the sizes judged
    # At 16 bits the cost rule takes more iterations than the fewest that can meet the target
    # (with fewer guard bits, fewer adder bits in all).
    if width == 16 and rounding == "half_even":
        assert best_over_guard(spec, n - 1) < target


def test_rule_of_thumb_from_facts_holds_on_this_model() -> None:
    """FACTS.md [mp]: n = B + 4 iterations with ceil(log2 n) + 1 guard bits stay under 1 LSB."""
    for width in (12, 16):
        spec = parse_config({"name": "c", "function": "sincos", "data_width": width, "angle_width": width})
        n = width + 4
        g = math.ceil(math.log2(n)) + 1
        inputs, _ = sizing_inputs(make_datapath(spec, n, g))
        assert measure(make_datapath(spec, n, g), inputs).max_error_lsb < 1.0


def test_n_equal_b_leaves_an_error_floor() -> None:
    """FACTS.md [mp]: with n = B iterations the worst error stays well above 1 LSB."""
    spec = parse_config({"name": "c", "function": "sincos", "data_width": 16, "angle_width": 16})
    assert best_over_guard(spec, 14) > 1.5


def test_explicit_sizes_are_measured_and_kept() -> None:
    spec = parse_config(
        {"name": "c", "function": "sincos", "data_width": 12, "angle_width": 12, "iterations": 16, "guard_bits": 5}
    )
    design = build_design(spec)
    assert (design.datapath.iterations, design.datapath.guard_bits) == (16, 5)
    assert design.auto_fields == ("angle_guard_bits",)  # z's guard bits are still sized
    assert design.accuracy.max_error_lsb < 1.0
    fixed = build_design(replace(spec, angle_guard_bits=7))
    assert fixed.auto_fields == ()
    assert fixed.datapath.angle_guard_bits == 7
    assert fixed.datapath.z_frac == 12 + 2 + 7  # turns: data bits + 2 + z's guard bits
    assert fixed.accuracy.max_error_lsb < 1.0


def test_large_angle_space_is_sampled_not_exhaustive() -> None:
    spec = parse_config({"name": "c", "function": "sincos", "data_width": 16, "angle_width": 24})
    inputs, exhaustive = sizing_inputs(make_datapath(spec, 18, 6))
    angles = inputs["in_angle"]
    assert not exhaustive and len(angles) > 1_000_000
    assert len(np.unique(angles)) > 900_000


def test_rounded_shifted_terms_follow_rounding_and_buy_a_guard_bit() -> None:
    """A sincos, rotate or NCO that rounds its outputs rounds its shifted terms, pipelined or
    iterative; a truncating one floors them. At the 16-bit core's sized size the rounded terms meet the
    budget over every angle and floored ones miss it: one guard bit fewer than floored terms need."""
    base = {"name": "c", "function": "sincos", "data_width": 16, "angle_width": 16}
    design = build_design(parse_config(base))
    dp = design.datapath
    assert dp.rounded_shifts
    inputs, exhaustive = sizing_inputs(dp)
    assert exhaustive
    assert design.accuracy.max_error_lsb < 1.0
    spec = design.spec
    floored = replace(make_datapath(spec, dp.iterations, dp.guard_bits, dp.angle_guard_bits), rounded_shifts=False)
    assert measure(floored, inputs).max_error_lsb >= 1.0
    # the floored size that meets the budget needs a guard bit more at these iterations
    more = replace(make_datapath(spec, dp.iterations, dp.guard_bits + 1), rounded_shifts=False)
    assert measure(more, inputs).max_error_lsb < 1.0
    for change, rounded in (
        ({"rounding": "truncate", "max_error_lsb": 3.0}, False),
        ({"rounding": "half_up"}, True),
        ({"architecture": "iterative"}, True),
        ({"architecture": "iterative", "rounding": "truncate", "max_error_lsb": 3.0}, False),
    ):
        assert make_datapath(parse_config(base | change), 16, 4).rounded_shifts is rounded, change
    rotate = {"name": "c", "function": "rotate", "data_width": 12, "angle_width": 12}
    assert make_datapath(parse_config(rotate), 14, 4).rounded_shifts
    assert make_datapath(parse_config(rotate | {"architecture": "iterative"}), 14, 4).rounded_shifts
    nco = {"name": "c", "function": "nco", "data_width": 16, "angle_width": 12}
    assert make_datapath(parse_config(nco), 16, 4).rounded_shifts
    assert not make_datapath(parse_config(nco | {"rounding": "truncate", "max_error_lsb": 3.0}), 16, 4).rounded_shifts


def test_shifted_terms_field_overrides_the_rule_and_sizes_by_it() -> None:
    """``shifted_terms`` sets the rule either way; floored terms size the 16-bit core as before
    rounded ones existed (18 iterations, 5 guard bits), and its data path equals the rounded
    core's at that size but for the flag."""
    base = {"name": "c", "function": "sincos", "data_width": 16, "angle_width": 16}
    floored = build_design(parse_config(base | {"shifted_terms": "floored"}))
    dp = floored.datapath
    assert not dp.rounded_shifts and (dp.iterations, dp.guard_bits) == (18, 5)
    assert floored.accuracy.max_error_lsb < 1.0
    rounded = make_datapath(parse_config(base | {"shifted_terms": "rounded", "rounding": "truncate"}), 16, 4)
    assert rounded.rounded_shifts  # the field wins over the rounding rule
    assert parse_config(base | {"shifted_terms": "auto"}).shifted_terms is None
    iterative = {"architecture": "iterative"}
    assert make_datapath(parse_config(base | iterative | {"shifted_terms": "rounded", "rounding": "truncate"}),
                         16, 4).rounded_shifts
    assert not make_datapath(parse_config(base | iterative | {"shifted_terms": "floored"}), 16, 4).rounded_shifts
    # refused: the field where no function reads it, and a value it does not know
    with pytest.raises(ConfigError) as exc:
        parse_config({"name": "c", "function": "atan2", "shifted_terms": "floored"})
    assert exc.value.field == "shifted_terms"
    with pytest.raises(ConfigError) as exc:
        parse_config(base | {"shifted_terms": "round"})
    assert exc.value.suggestion == {"shifted_terms": "rounded"}


def test_angle_guard_bits_are_sized_on_their_own() -> None:
    """z's guard bits are a third sized dimension: the iterative 16-bit core keeps 7 guard bits
    in x and y but needs fewer in z, and one fewer in z misses the budget on some input of the
    whole space (its z is then narrower than a z that follows x and y's guard bits)."""
    spec = parse_config(
        {"name": "c", "function": "sincos", "data_width": 16, "angle_width": 16, "architecture": "iterative"}
    )
    design = build_design(spec)
    dp = design.datapath
    n, g, zg = dp.iterations, dp.guard_bits, dp.angle_guard_bits
    assert zg is not None and zg < g
    assert dp.z_frac == 16 + 2 + zg  # turns: data bits + 2 + z's guard bits
    assert "angle_guard_bits" in design.auto_fields
    inputs, exhaustive = sizing_inputs(dp)
    assert exhaustive
    assert measure(make_datapath(spec, n, g, zg), inputs).max_error_lsb < 1.0
    assert measure(make_datapath(spec, n, g, zg - 1), inputs).max_error_lsb >= 1.0
    assert make_datapath(spec, n, g).z_width > dp.z_width  # z following the guard bits


def test_angle_guard_bits_apply_only_where_the_angle_is_an_input() -> None:
    """atan2's z is its result, sized with guard_bits: the field is refused, naming the fix."""
    with pytest.raises(ConfigError) as err:
        parse_config({"name": "c", "function": "atan2", "angle_guard_bits": 3})
    assert err.value.field == "angle_guard_bits" and err.value.value == 3
    assert "remove angle_guard_bits" in err.value.fix
    assert '"sincos"' in err.value.allowed
    for fn in ("sincos", "rotate", "nco"):
        spec = parse_config({"name": "c", "function": fn, "angle_guard_bits": 3})
        assert spec.angle_guard_bits == 3


def test_table_head_is_the_users_choice_and_the_timing_follows() -> None:
    """``table_head`` sets how many first iterations come from the table (0: none); an iterative
    core then takes that many clocks fewer per sample, the manifest states it, and a function
    with no start table refuses the field."""
    from benchgen.functions import table_head

    base = {"name": "c", "function": "sincos", "data_width": 12, "angle_width": 12, "architecture": "iterative",
            "iterations": 13, "guard_bits": 4}
    clocks = {}
    for head in (0, 1, 2, 4):
        design = build_design(parse_config(base | {"table_head": head}))
        assert table_head(design.datapath, "iterative") == head
        clocks[head] = design.timing.cycles_per_sample
    assert clocks == {0: 13, 1: 12, 2: 11, 4: 9}
    default = build_design(parse_config(base))
    assert default.timing.cycles_per_sample == 11  # the iterative default: 2
    pipelined = build_design(parse_config(base | {"architecture": "pipelined", "table_head": 0}))
    assert table_head(pipelined.datapath, "pipelined") == 0
    assert table_head(build_design(parse_config(base | {"architecture": "pipelined"})).datapath, "pipelined") == 3
    # never more than iterations - 2
    assert table_head(make_datapath(parse_config(base | {"table_head": 4}), 5, 4), "iterative") == 3
    for bad, fix in ((5, "auto"), (-1, "auto"), ("two", "auto")):
        with pytest.raises(ConfigError) as exc:
            parse_config(base | {"table_head": bad})
        assert exc.value.field == "table_head" and exc.value.suggestion == {"table_head": fix}
    with pytest.raises(ConfigError) as exc:
        parse_config({"name": "c", "function": "rotate", "table_head": 1})
    assert exc.value.field == "table_head" and "sincos" in exc.value.allowed
