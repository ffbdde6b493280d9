"""rotate and atan2 against outside references: mpmath, FACTS.md values, and worked examples.

Each worked example is computed by hand in its comment.
"""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest
from conftest import cheaper_sizes_miss, run

from benchgen.algorithm import circular_gain
from benchgen.functions import make_datapath
from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.functions.atan2 import small_vector_limit
from benchgen.functions import (
    function_errors,
    ideal_outputs,
    measure,
    random_inputs,
    sizing_inputs,
    )


def design(**values):  # type: ignore[no-untyped-def]
    return build_design(parse_config({"name": "c", **values}))


def test_rotate_worked_example_eighth_turn() -> None:
    # (1000, 0) turned by 1/8 turn (45 degrees, code 512 of 4096): 1000 cos 45 = 707.107,
    # 1000 sin 45 = 707.107, so both outputs round to 707.
    dp = design(function="rotate", data_width=12, angle_width=12).datapath
    out = run(dp, [1000], [0], [512])
    assert (int(out["out_x"][0]), int(out["out_y"][0])) == (707, 707)


def test_rotate_worked_example_radians_quarter_turn() -> None:
    # Radians, 12-bit port with 9 fraction bits: pi/2 = 1.5708 rad = 804.25 codes -> 804 is
    # 1.570313 rad, 0.000483 rad short of a quarter turn. (300, -200) turned by it:
    # x' = 300 cos t + 200 sin t = 200.0 + 0.145 = 200.1, y' = 300 sin t - 200 cos t = 300.0 - 0.097
    # = 299.9, so the outputs are 200 and 300.
    dp = design(function="rotate", data_width=12, angle_width=12, angle_unit="radians").datapath
    out = run(dp, [300], [-200], [804])
    assert (int(out["out_x"][0]), int(out["out_y"][0])) == (200, 300)


def test_atan2_worked_examples() -> None:
    # (300, 400): magnitude 500; angle atan2(400, 300) = 0.927295 rad = 0.147584 turn
    # = 604.51 codes of 4096: 604 or 605 are both within the 1-LSB budget.
    # (-1000, 0): half a turn, code 2048, read as signed -2048; magnitude 1000.
    # (0, 0): defined as angle 0, magnitude 0.
    dp = design(function="atan2", data_width=12, angle_width=12).datapath
    out = run(dp, [300, -1000, 0], [400, 0, 0])
    assert out["out_angle"][0] in (604, 605)
    assert out["out_angle"].tolist()[1:] == [-2048, 0]
    assert out["out_magnitude"].tolist() == [500, 1000, 0]


def test_sincos_raw_gain_widens_the_outputs_by_the_published_growth() -> None:
    # Raw: x starts at the amplitude 2047 (12 bits), so the outputs carry 1/K = 1.64676
    # (Andraka 1998): cos 0 -> 2047 * 1.64676 = 3370.9 -> 3371, which needs a 13-bit output.
    # At 1/8 turn (code 512 of 4096): 3370.9 * cos 45 = 2383.6 for both.
    dp = design(function="sincos", data_width=12, angle_width=12, gain="raw").datapath

    out = run(dp, [0, 512])
    assert dp.out_width == 13
    assert int(out["out_cos"][0]) in (3370, 3371) and abs(int(out["out_sin"][0])) <= 1
    assert int(out["out_cos"][1]) in (2383, 2384) and int(out["out_sin"][1]) in (2383, 2384)


def test_atan2_raw_gain_is_the_published_growth() -> None:
    # Raw: the magnitude carries 1/K = 1.64676 (Andraka 1998). (1000, 0) -> 1646.76 -> 1647.
    dp = design(function="atan2", data_width=12, angle_width=12, gain="raw").datapath
    out = run(dp, [1000], [0])
    assert int(out["out_magnitude"][0]) == 1647
    assert 1 / float(dp.gain) == pytest.approx(1.64676, abs=1e-5)


@pytest.mark.parametrize("function", ["rotate", "atan2"])
def test_compensation_constant_is_k_n(function: str) -> None:
    # K_n for 16 iterations: 0.60725293510313931731 (FACTS.md [mp]).
    dp = make_datapath(parse_config({"name": "c", "function": function, "data_width": 16}), 16, 6)
    with mpmath.workdps(40):
        assert abs(dp.k_const / mpmath.mpf(2) ** dp.k_frac - mpmath.mpf("0.60725293510313931731")) < 2.0**-dp.k_frac
        assert mpmath.almosteq(circular_gain(16), mpmath.mpf("0.60725293510313931731"), 1e-19)


def test_atan2_against_mpmath() -> None:
    """The angle and magnitude of random vectors against mpmath.atan2 and mpmath.hypot."""
    d = design(function="atan2", data_width=14, angle_width=14)
    dp = d.datapath
    rng = np.random.default_rng(8)
    inputs = random_inputs(dp, rng, 3000)
    out = run(dp, inputs["in_x"], inputs["in_y"])
    worst = 0.0
    with mpmath.workdps(30):
        for x, y, a, m in zip(inputs["in_x"], inputs["in_y"], out["out_angle"], out["out_magnitude"], strict=True):
            if math.hypot(x, y) < small_vector_limit(dp):
                continue
            turns = mpmath.atan2(int(y), int(x)) / (2 * mpmath.pi) * 2**14
            e = float(a - turns)
            e = (e + 2**13) % 2**14 - 2**13  # a binary angle wraps
            worst = max(worst, abs(e), abs(float(m - mpmath.hypot(int(x), int(y)))))
    assert worst < 1.0


def test_rotate_against_mpmath() -> None:
    d = design(function="rotate", data_width=14, angle_width=14, angle_unit="radians")
    dp = d.datapath
    rng = np.random.default_rng(9)
    inputs = random_inputs(dp, rng, 2000)
    out = run(dp, inputs["in_x"], inputs["in_y"], inputs["in_angle"])
    worst = 0.0
    with mpmath.workdps(30):
        for x, y, t, ox, oy in zip(inputs["in_x"], inputs["in_y"], inputs["in_angle"], out["out_x"], out["out_y"], strict=True):
            theta = mpmath.mpf(int(t)) / 2**dp.angle_frac
            ex = int(x) * mpmath.cos(theta) - int(y) * mpmath.sin(theta)
            ey = int(x) * mpmath.sin(theta) + int(y) * mpmath.cos(theta)
            worst = max(worst, abs(float(ox - ex)), abs(float(oy - ey)))
    assert worst < 1.0


@pytest.mark.parametrize("prenormalise", [True, False])
def test_atan2_short_vectors_keep_their_angle_only_when_prenormalised(prenormalise: bool) -> None:
    """Angle error against numpy's arctan2 by vector length: the unnormalised core loses
    accuracy as the vector shrinks (the caution in the docs, measured); the prenormalised
    one (the default) stays within budget at every length."""
    dp = design(function="atan2", data_width=12, angle_width=12, prenormalise=prenormalise).datapath
    rng = np.random.default_rng(4)
    worst = {}
    for radius in (4, 32, 256, 2000):
        t = rng.uniform(-math.pi, math.pi, 4000)
        x = np.round(radius * np.cos(t)).astype(np.int64)
        y = np.round(radius * np.sin(t)).astype(np.int64)
        out = run(dp, x, y)
        ideal = np.arctan2(y, x) / (2 * np.pi) * 4096
        e = (out["out_angle"] - ideal + 2048) % 4096 - 2048
        worst[radius] = float(np.max(np.abs(e)))
    assert worst[2000] < 1.0
    if prenormalise:
        assert max(worst.values()) < 1.0
    else:
        assert worst[4] > worst[256] >= worst[2000] and worst[4] > 2.0




@pytest.mark.parametrize("width", [12, 16])
def test_atan2_sizing_is_minimal(width: int) -> None:
    """The chosen size meets the target on the sizing set; no size of fewer adder bits does."""
    spec = parse_config({"name": "c", "function": "atan2", "data_width": width, "angle_width": width})
    d = build_design(spec)
    n, g = d.datapath.iterations, d.datapath.guard_bits
    inputs, exhaustive = sizing_inputs(d.datapath)
    assert not exhaustive and len(inputs["in_x"]) >= 1_000_000  # 2^(2 width) inputs: sampled
    ideal = ideal_outputs(d.datapath, inputs, with_gain=False)
    assert measure(make_datapath(spec, n, g), inputs, ideal).max_error_lsb < 1.0
    assert measure(make_datapath(spec, n, g - 1), inputs, ideal).max_error_lsb >= 1.0
    assert cheaper_sizes_miss(spec, d, inputs, ideal) > 0


def test_function_errors_judge_every_vector_but_zero_when_prenormalised() -> None:
    x = np.array([0, 1, 2000, -2000, -1, 3])
    y = np.array([0, 0, 0, 5, -1, -4])
    dp = design(function="atan2", data_width=12, angle_width=12).datapath
    errs = function_errors(dp, {"in_x": x, "in_y": y}, run(dp, x, y))
    assert np.isnan(errs["out_angle"][0]) and not np.isnan(errs["out_angle"][1:]).any()
    assert not np.isnan(errs["out_magnitude"]).any()
    # Without prenormalisation short vectors (below 2^(b-5) = 128) are not judged.
    dp = design(function="atan2", data_width=12, angle_width=12, prenormalise=False).datapath
    errs = function_errors(dp, {"in_x": x, "in_y": y}, run(dp, x, y))
    assert list(np.isnan(errs["out_angle"])) == [True, True, False, False, True, True]


def test_mul_worked_example() -> None:
    # 10-bit fractions with 9 fraction bits: a = 256/512 = 0.5, b = -384/512 = -0.75;
    # a b = -0.375 = -192/512, so out_product = -192 (exact: the core should hit it within 1 LSB,
    # and a product with few bits set comes out exactly).
    dp = design(function="mul", data_width=10).datapath
    assert int(run(dp, [256], [-384])["out_product"][0]) == -192


def test_div_worked_examples_and_domain() -> None:
    # 10-bit fractions; the quotient has 8 fraction bits. 100 / 400 = 0.25 -> 64 codes.
    # -300 / 200 = -1.5 -> -384 codes. 300 / 100 = 3 is outside |q| < 2: flagged, quotient 0.
    # 5 / 0: flagged. -511 / -256 = 1.996 -> 511 codes (the format's largest value).
    dp = design(function="div", data_width=10).datapath
    out = run(dp, [100, -300, 300, 5, -511], [400, 200, 100, 0, -256])
    assert out["out_domain_error"].tolist() == [0, 0, 1, 1, 0]
    assert out["out_quotient"].tolist()[:4] == [64, -384, 0, 0]
    assert abs(int(out["out_quotient"][4]) - 511) <= 1


def test_mul_and_div_against_exact_fractions() -> None:
    """Exact rational references (Python's fractions): no rounding in the reference at all."""
    from fractions import Fraction

    rng = np.random.default_rng(12)
    for fn in ("mul", "div"):
        dp = design(function=fn, data_width=12).datapath
        a = rng.integers(-2048, 2048, 3000)
        b = rng.integers(-2048, 2048, 3000)
        out = run(dp, a, b)["out_product"] if fn == "mul" else run(dp, a, b)["out_quotient"]
        worst = Fraction(0)
        for p, q, o in zip(a.tolist(), b.tolist(), out.tolist(), strict=True):
            if fn == "mul":
                exact = Fraction(p * q, 2**11)
            else:
                if q == 0 or abs(p) >= 2 * abs(q):
                    continue
                exact = Fraction(p, q) * 2**10
                if abs(exact) > dp.out_max:
                    continue
            worst = max(worst, abs(o - exact))
        assert worst < 1


@pytest.mark.parametrize("width", [12, 16])
def test_div_sizing_is_minimal(width: int) -> None:
    spec = parse_config({"name": "c", "function": "div", "data_width": width})
    d = build_design(spec)
    n, g = d.datapath.iterations, d.datapath.guard_bits
    inputs, _ = sizing_inputs(d.datapath)
    ideal = ideal_outputs(d.datapath, inputs, with_gain=False)
    assert measure(make_datapath(spec, n, g), inputs, ideal).max_error_lsb < 1.0
    if g > 0:
        assert measure(make_datapath(spec, n, g - 1), inputs, ideal).max_error_lsb >= 1.0
    assert cheaper_sizes_miss(spec, d, inputs, ideal) > 0
