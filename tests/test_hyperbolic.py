"""sinhcosh, exp, atanh, ln and sqrt against outside references.

References: the published constants and recipes in ../shared/FACTS.md (Walther 1971; values
marked [mp] there were computed with mpmath at 60 digits and are recomputed here where cheap),
mpmath itself (never numpy, which the sizer's own ideal uses), and worked examples computed by
hand in their comments. Formats at data width b (algorithm._hyperbolic_datapath):

* sinhcosh: t has b - 1 fraction bits; cosh t and sinh t have b - 2.
* exp: t has b - 1 - L fraction bits (L = 4 for b = 12..23); e^t = mantissa 2^exponent with the
  mantissa unsigned, b - 1 fraction bits, in [1, 2).
* atanh: u has b - 1 fraction bits, atanh u has b - 2; |u| beyond tanh(1.118173) is flagged.
* ln: w = W / 2^b; ln w has b - 1 - L fraction bits; W = 0 is flagged.
* sqrt: w = W / 2^b; sqrt w has b fraction bits.
"""

from __future__ import annotations

import math
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import mpmath
import numpy as np
import pytest
from conftest import cheaper_sizes_miss, run
from hypothesis import given, settings
from hypothesis import strategies as st

from benchgen import model
from benchgen.algorithm import (
    Datapath,
    hyperbolic_gain,
    hyperbolic_shifts,
    log_int_bits,
)
from benchgen.cli import main
from benchgen.config import parse_config, spec_to_dict
from benchgen.design import build_design
from benchgen.errors import ConfigError
from benchgen.functions import (
    corner_inputs,
    function_errors,
    ideal_outputs,
    measure,
    output_ports,
    random_inputs,
    sizing_inputs,
)
from benchgen.functions import FUNCTIONS, make_datapath
from benchgen.functions import evaluate as evaluate_function
from benchgen.model import iterate, iterate_wrapping

HYPERBOLIC_FUNCTIONS = tuple(f.name for f in FUNCTIONS if f.coordinates == "hyperbolic")

# ../shared/FACTS.md, [mp] (mpmath, 60 digits); the repeat rule k -> 3k + 1 is Walther 1971's.
A_H = "0.82815936096021562708"  # prod sqrt(1 - 2^-2s) with shifts 4, 13, 40, ... repeated
A_H_NO_REPEATS = "0.82978162013890119393"  # the same product with every shift once
A_N = {
    8: "0.82816779169748169856",
    12: "0.82815940003858179720",
    16: "0.82815936147440463292",
    24: "0.82815936096022347298",
    32: "0.82815936096021562720",
}
HYPERBOLIC_RANGE = "1.1181730155265038036"  # sum of atanh(2^-s) over the schedule, [mp]
VECTORING_LIMIT = "0.806932494"  # tanh of that range, [mp]

GAIN_FUNCTIONS = ("sinhcosh", "exp", "sqrt")
GAIN_FREE = ("atanh", "ln")


def design(**values: Any):  # type: ignore[no-untyped-def]
    return build_design(parse_config({"name": "c", **values}))


def nearest(exact: float) -> set[int]:
    """The outputs a worked example accepts: the nearest integer, or both neighbours when the
    exact value is within 0.2 of a half (either is inside the 1-LSB budget)."""
    lo = math.floor(exact)
    frac = exact - lo
    if abs(frac - 0.5) < 0.2:
        return {lo, lo + 1}
    return {lo + 1 if frac > 0.5 else lo}


def schedule_with_repeats(count: int) -> list[int]:
    """Walther 1971: shifts 1, 2, 3, ..., with 4, 13, 40, 121 (k -> 3k + 1) done twice.

    Written out here independently of algorithm.hyperbolic_shifts."""
    repeats = {4, 13, 40, 121, 364}
    out: list[int] = []
    s = 1
    while len(out) < count:
        out.extend([s, s] if s in repeats else [s])
        s += 1
    return out[:count]


# --- 1. Schedule, gain, convergence range ------------------------------------------------


def test_schedule_repeats_4_13_40() -> None:
    # Walther 1971: shifts 4, 13, 40 (k -> 3k + 1) are done twice, every other shift once.
    assert hyperbolic_shifts(16) == (1, 2, 3, 4, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 13, 14)
    long = hyperbolic_shifts(45)
    assert list(long) == schedule_with_repeats(45)
    counts = {s: long.count(s) for s in set(long)}
    assert {s for s, c in counts.items() if c == 2} == {4, 13, 40}
    assert all(c in (1, 2) for c in counts.values())
    # 1..4 (4 shifts), 4 again, 5..13 (9), 13 again, 14..40 (27): the second 40 is the 43rd.
    assert hyperbolic_shifts(42)[-1] == 40 and hyperbolic_shifts(43)[-2:] == (40, 40)
    # A schedule is the prefix of any longer one.
    for n in (1, 4, 5, 15, 30):
        assert hyperbolic_shifts(n) == long[:n]


@pytest.mark.parametrize("n", sorted(A_N))
def test_gain_after_n_iterations_matches_facts(n: int) -> None:
    with mpmath.workdps(40):
        assert mpmath.almosteq(hyperbolic_gain(n), mpmath.mpf(A_N[n]), 1e-19)


def test_gain_limit_and_the_schedule_matters() -> None:
    """With the repeats the product tends to A_h = 0.828159360960; without, 0.829781620139."""
    with mpmath.workdps(60):
        assert mpmath.almosteq(hyperbolic_gain(96), mpmath.mpf(A_H), 1e-19)

        def product(shifts: list[int]) -> mpmath.mpf:
            a = mpmath.mpf(1)
            for s in shifts:
                a *= mpmath.sqrt(1 - mpmath.mpf(2) ** (-2 * s))
            return a

        with_repeats = product(schedule_with_repeats(120))
        without = product(list(range(1, 120)))
        assert mpmath.almosteq(with_repeats, mpmath.mpf(A_H), 1e-19)
        assert mpmath.almosteq(without, mpmath.mpf(A_H_NO_REPEATS), 1e-19)
        # The two differ in the third decimal: a schedule without repeats is a wrong gain.
        assert without - with_repeats > mpmath.mpf("1.6e-3")
        # 1/A_h, which the compensated start values carry (FACTS.md [mp]).
        assert mpmath.almosteq(1 / with_repeats, mpmath.mpf("1.2074970677630721289"), 1e-19)


def test_convergence_range_and_vectoring_limit() -> None:
    # The sum of every step atanh(2^-s) is the rotation range, 1.1181730155 (FACTS.md [mp];
    # about 1.13 in Walther 1971); its tanh, 0.806932494, bounds |y / x| in vectoring.
    with mpmath.workdps(60):
        steps = [mpmath.atanh(mpmath.mpf(2) ** -s) for s in hyperbolic_shifts(80)]
        total = mpmath.fsum(steps)
        assert abs(total - mpmath.mpf(HYPERBOLIC_RANGE)) < mpmath.mpf(10) ** -18
        assert abs(mpmath.tanh(total) - mpmath.mpf(VECTORING_LIMIT)) < mpmath.mpf(10) ** -9


def test_every_step_is_within_reach_of_the_later_ones_only_with_repeats() -> None:
    """Walther 1971's convergence condition: each step is at most the sum of the steps after it.

    atanh is convex, so atanh(2^-s) > 2 atanh(2^-(s+1)) and a schedule of distinct shifts
    breaks the condition at every step: the first, atanh(1/2) = 0.5493, exceeds all later ones
    together (0.5 + the cubic terms, about 0.5062), so angles near 0.53 cannot be reached.
    Each repeat makes up the shortfall of the steps before it, so with the repeats the
    condition holds at every step that still has a repeat after it (here up to the second 40;
    121 is beyond 120 shifts)."""
    with mpmath.workdps(60):

        def violations(shifts: list[int]) -> list[int]:
            steps = [mpmath.atanh(mpmath.mpf(2) ** -s) for s in shifts]
            return [i for i in range(len(steps) - 1) if steps[i] > mpmath.fsum(steps[i + 1 :])]

        shifts = list(hyperbolic_shifts(120))
        last_repeat = max(i for i in range(1, 120) if shifts[i] == shifts[i - 1])
        assert shifts[last_repeat] == 40
        assert violations(shifts) == list(range(last_repeat, 119))
        assert violations(list(range(1, 121))) == list(range(119))


# --- 2. Recipes (Walther 1971) and the model against mpmath -----------------------------


def test_recipe_identities_and_their_domains() -> None:
    """The FACTS.md recipe table (Walther 1971), checked as identities with mpmath."""
    with mpmath.workdps(40):
        for w in ("0.11", "0.5", "0.75", "1", "2.5", "9.3"):
            v = mpmath.mpf(w)
            # ln w = 2 atanh((w - 1)/(w + 1)), from the vector (w + 1, w - 1, 0).
            assert mpmath.almosteq(mpmath.log(v), 2 * mpmath.atanh((v - 1) / (v + 1)), 1e-35)
            # sqrt w = sqrt((w + 1/4)^2 - (w - 1/4)^2), the hyperbolic length of (w + 1/4, w - 1/4).
            q = mpmath.mpf(1) / 4
            assert mpmath.almosteq(mpmath.sqrt(v), mpmath.sqrt((v + q) ** 2 - (v - q) ** 2), 1e-35)
        for t in ("-1.1", "-0.3", "0", "0.6931", "1.1"):
            v = mpmath.mpf(t)
            # Rotating (x0, y0) by t gives x = x0 cosh t + y0 sinh t: from (1, 1) that is e^t,
            # from (1, 0) cosh t and sinh t.
            assert mpmath.almosteq(mpmath.cosh(v) + mpmath.sinh(v), mpmath.exp(v), 1e-35)
        # The domains in the table follow from |y / x| <= 0.806932494 (and |t| <= 1.118173):
        u = mpmath.mpf(VECTORING_LIMIT)
        r = mpmath.mpf(HYPERBOLIC_RANGE)
        assert abs((1 + u) / (1 - u) - mpmath.mpf("9.35907")) < 1e-5  # ln's upper end
        assert abs((1 - u) / (1 + u) - mpmath.mpf("0.106848")) < 1e-6  # ln's lower end
        assert abs((1 + u) / (1 - u) / 4 - mpmath.mpf("2.339768")) < 1e-5  # sqrt's upper end
        assert abs((1 - u) / (1 + u) / 4 - mpmath.mpf("0.026712")) < 1e-6  # sqrt's lower end
        assert abs(mpmath.exp(r) - mpmath.mpf("3.05926")) < 1e-5  # exp's range
        assert abs(mpmath.exp(-r) - mpmath.mpf("0.32688")) < 1e-5
        # The model's reductions land inside them: ln and sqrt normalise w to m in [1/2, 1)
        # and [1/4, 1); exp reduces t to r in [0, ln 2); sinhcosh takes |t| < 1.
        assert (1 - u) / (1 + u) < 0.5 and (1 - u) / (1 + u) / 4 < 0.25
        assert mpmath.log(2) < r and 1 < r


def _mp_value(code: int, frac: int) -> mpmath.mpf:
    return mpmath.mpf(int(code)) / mpmath.mpf(2) ** frac


def _worst_against_mpmath(dp: Datapath, codes: np.ndarray, outs: dict[str, np.ndarray]) -> float:
    """Worst |output - exact| in output LSBs, exact from mpmath at 30 digits; in-domain only."""
    f = dp.function
    worst = 0.0
    with mpmath.workdps(30):
        out_scale = mpmath.mpf(2) ** dp.out_frac
        ln2 = mpmath.log(2)
        for i, c in enumerate(codes.tolist()):
            v = _mp_value(c, dp.in_frac)
            if f == "sinhcosh":
                pairs = [("out_cosh", mpmath.cosh(v)), ("out_sinh", mpmath.sinh(v))]
            elif f == "exp":
                q = int(mpmath.floor(v / ln2))
                got = int(outs["out_exponent"][i])
                # floor(t / ln 2), or one more where e^r rounds up to 2.0 (mantissa 1.0).
                assert got == q or (
                    got == q + 1 and int(outs["out_mantissa"][i]) == 1 << (dp.data_width - 1)
                )
                pairs = [("out_mantissa", mpmath.exp(v - got * ln2))]
            elif f == "atanh":
                if abs(c) > dp.domain_limit:
                    continue
                pairs = [("out_atanh", mpmath.atanh(v))]
            elif f == "ln":
                if c == 0:
                    continue
                pairs = [("out_ln", mpmath.log(v))]
            else:
                pairs = [("out_sqrt", mpmath.sqrt(v))]
            for name, exact in pairs:
                worst = max(worst, abs(float(int(outs[name][i]) - exact * out_scale)))
    return worst


@pytest.mark.parametrize("function", HYPERBOLIC_FUNCTIONS)
def test_model_against_mpmath_at_14_bits(function: str) -> None:
    """3000 random inputs plus the corners, each within the 1-LSB budget of mpmath."""
    d = design(function=function, data_width=14)
    dp = d.datapath
    port = next(iter(corner_inputs(dp)))
    rng = np.random.default_rng(14)
    codes = np.concatenate([corner_inputs(dp)[port], random_inputs(dp, rng, 3000)[port]])
    outs = evaluate_function(dp, {port: codes})
    worst = _worst_against_mpmath(dp, codes, outs)
    assert worst < 1.0
    # Not a trivially exact reference either: rounding alone leaves about half an LSB.
    assert worst > 0.4


def test_atanh_flags_exactly_beyond_the_vectoring_limit() -> None:
    # 14 bits, 13 fraction bits: tanh(1.118173) = 0.806932494 (FACTS.md [mp]) is
    # 0.806932494 * 8192 = 6610.39 codes, so |u| <= 6610 is inside and 6611 up is flagged.
    dp = design(function="atanh", data_width=14).datapath
    assert dp.domain_limit == 6610
    u = np.arange(-(1 << 13), 1 << 13, dtype=np.int64)
    out = run(dp, u)
    flagged = out["out_domain_error"] == 1
    assert np.array_equal(flagged, np.abs(u) >= 6611)
    assert np.all(out["out_atanh"][flagged] == 0)
    assert set(np.unique(out["out_domain_error"]).tolist()) == {0, 1}
    # Inside, the edge codes are judged like the rest: atanh(6610/8192) = 1.11736, 4577.7 LSBs.
    edge = run(dp, [6610, -6610])["out_atanh"].tolist()
    with mpmath.workdps(30):
        exact = float(mpmath.atanh(mpmath.mpf(6610) / 8192) * 4096)
    assert abs(edge[0] - exact) < 1 and abs(edge[1] + exact) < 1


def test_ln_flags_only_zero() -> None:
    dp = design(function="ln", data_width=14).datapath
    w = np.arange(1 << 14, dtype=np.int64)
    out = run(dp, w)
    assert out["out_domain_error"].tolist() == [1] + [0] * ((1 << 14) - 1)
    assert int(out["out_ln"][0]) == 0
    # The rest is negative (w < 1), down to ln(2^-14) = -9.70406 = -4968.5 LSBs at 9 fraction bits.
    assert np.all(out["out_ln"][1:] <= 0)
    assert int(out["out_ln"][1]) in nearest(-14 * math.log(2) * 2**9)


# --- 3. Worked examples (12 bits) ---------------------------------------------------------


def test_sinhcosh_worked_examples() -> None:
    # nearest(v): the nearest integer, or either neighbour when v is within 0.2 of a half.
    # t has 11 fraction bits, cosh/sinh 10. t = 1024/2048 = 0.5: cosh 0.5 = 1.127626 -> 1154.69
    # -> 1155 or 1154; sinh 0.5 = 0.521095 -> 533.60 -> 534 or 533.
    # t = -2048/2048 = -1: cosh 1 = 1.543081 -> 1580.11 -> 1580; sinh -1 = -1.175201 -> -1203.41
    # -> -1203 or -1204. t = 0: cosh 0 = 1 -> 1024 exactly, sinh 0 = 0 (an integer exact value
    # leaves no other output within 1 LSB).
    dp = design(function="sinhcosh", data_width=12).datapath
    out = run(dp, [1024, -2048, 0])
    cosh, sinh = out["out_cosh"].tolist(), out["out_sinh"].tolist()
    assert cosh[0] in nearest(1154.69) and sinh[0] in nearest(533.60)
    assert cosh[1] in nearest(1580.11) and sinh[1] in nearest(-1203.41)
    assert (cosh[2], sinh[2]) == (1024, 0)


def test_exp_worked_examples() -> None:
    # t has 12 - 1 - 4 = 7 fraction bits (ln 2 = 88.72 codes); the mantissa has 11.
    # t = 0: e^0 = 1 = 1 * 2^0 -> mantissa 2048 exactly, exponent 0.
    # t = 256/128 = 2: 2 / ln 2 = 2.885 -> exponent 2; e^2 / 4 = 7.389056 / 4 = 1.847264
    # -> 3783.20 -> 3783.
    # t = 88/128 = 0.6875, just below ln 2 = 0.693147: exponent 0, e^0.6875 = 1.988737 -> 4072.93
    # -> 4073.
    # t = 89/128 = 0.6953125, just above ln 2: exponent 1, e^(0.6953125 - 0.693147) = e^0.0021653
    # = 1.002168 -> 2052.44 -> 2052 or 2053.
    # t = -89/128: -1.00312 -> exponent -2; e^(-0.6953125 + 1.386294) = e^0.690982 = 1.995693
    # -> 4087.14 -> 4087.
    # t = -2048/128 = -16: -16 / ln 2 = -23.08 -> exponent -24; e^(-16 + 24 ln 2) = e^0.635532
    # = 1.888027 -> 3866.68 -> 3867 (3866 also within 1 LSB).
    dp = design(function="exp", data_width=12).datapath
    out = run(dp, [0, 256, 88, 89, -89, -2048])
    m, e = out["out_mantissa"].tolist(), out["out_exponent"].tolist()
    assert e == [0, 2, 0, 1, -2, -24]
    assert m[0] == 2048
    for got, hand in zip(m[1:], [3783.20, 4072.93, 2052.44, 4087.14, 3866.68], strict=True):
        assert got in nearest(hand)


def test_atanh_worked_examples() -> None:
    # u has 11 fraction bits, atanh u 10. u = 1536/2048 = 0.75: atanh 0.75 = 0.972955 -> 996.31
    # -> 996 or 997. u = -0.5: -0.549306 -> -562.49 -> -562 or -563. u = 0 -> 0 exactly.
    # The limit 0.806932494 * 2048 = 1652.6: u = 1652 is inside, atanh(0.806641) = 1.117337
    # -> 1144.15 -> 1144; 1653 and -2048 (u = -1) are flagged with a zero result.
    dp = design(function="atanh", data_width=12).datapath
    out = run(dp, [1536, -1024, 0, 1652, 1653, -2048])
    a, flag = out["out_atanh"].tolist(), out["out_domain_error"].tolist()
    assert flag == [0, 0, 0, 0, 1, 1]
    assert a[0] in nearest(996.31) and a[1] in nearest(-562.49) and a[3] in nearest(1144.15)
    assert a[2] == 0 and a[4:] == [0, 0]


def test_ln_worked_examples() -> None:
    # w = W / 4096; ln w has 12 - 1 - 4 = 7 fraction bits, [-16, 16).
    # W = 2048: ln(1/2) = -0.693147 * 128 = -88.72 -> -89.
    # W = 3072: ln(3/4) = -0.287682 * 128 = -36.82 -> -37.
    # W = 4095: ln(4095/4096) = -0.000244 * 128 = -0.031 -> 0 (see below).
    # W = 1: ln(2^-12) = -12 * 0.693147 = -8.317766 * 128 = -1064.67 -> -1065 (or -1064).
    # W = 0: flagged, 0.
    dp = design(function="ln", data_width=12).datapath
    out = run(dp, [2048, 3072, 4095, 1, 0])
    v, flag = out["out_ln"].tolist(), out["out_domain_error"].tolist()
    for got, hand in zip([v[0], v[1], v[3]], [-88.72, -36.82, -1064.67], strict=True):
        assert got in nearest(hand)
    # Near w = 1 the result is 2 z, so the residual angle counts twice: up to atanh(2^-9) after
    # the 10 iterations this core is sized to, 2 * 0.00195 * 128 = 0.5 LSB on top of the
    # rounding; -0.031 may come out as 0 or -1 (both within 1 LSB).
    assert v[2] in {0, -1} and v[4] == 0
    assert flag == [0, 0, 0, 0, 1]


def test_sqrt_worked_examples() -> None:
    # w = W / 4096, sqrt w has 12 fraction bits. W = 1024: sqrt(1/4) = 1/2 -> 2048 exactly.
    # W = 1: sqrt(2^-12) = 2^-6 -> 64. W = 9: 3/64 -> 192. W = 100: 10/64 -> 640 (all exact, so
    # nothing else is within 1 LSB). W = 2048: sqrt(1/2) = 0.707107 -> 2896.31 -> 2896 (or 2897).
    # W = 3072: sqrt(3/4) = 0.866025 -> 3547.24 -> 3547. W = 0 -> 0.
    dp = design(function="sqrt", data_width=12).datapath
    out = run(dp, [1024, 1, 9, 100, 2048, 3072, 0])["out_sqrt"].tolist()
    assert out[:4] == [2048, 64, 192, 640]
    assert out[4] in nearest(2896.31) and out[5] in nearest(3547.24) and out[6] == 0


def test_raw_gain_worked_examples() -> None:
    # Raw: no 1/A_n start scaling, so the outputs are A_n times the exact. With 16 iterations
    # A_16 = 0.828159361 (FACTS.md [mp]).
    # sinhcosh t = 0.5: 1.127626 * 0.828159 = 0.933854 -> 956.27 -> 956;
    #   0.521095 * 0.828159 = 0.431550 -> 441.91 -> 442.
    # exp t = 0: 0.828159 * 2048 = 1696.07 -> 1696, exponent 0.
    # sqrt W = 1024: 0.5 * 0.828159 * 4096 = 1696.07 -> 1696.
    sc = design(function="sinhcosh", data_width=12, gain="raw", iterations=16).datapath
    ex = design(function="exp", data_width=12, gain="raw", iterations=16).datapath
    sq = design(function="sqrt", data_width=12, gain="raw", iterations=16).datapath
    out = run(sc, [1024])
    assert int(out["out_cosh"][0]) in nearest(956.27) and int(out["out_sinh"][0]) in nearest(441.91)
    e = run(ex, [0])
    assert int(e["out_mantissa"][0]) in nearest(1696.07) and int(e["out_exponent"][0]) == 0
    assert int(run(sq, [1024])["out_sqrt"][0]) in nearest(1696.07)
    for dp in (sc, ex, sq):
        assert dp.gain_mode == "raw"
        with mpmath.workdps(30):
            assert mpmath.almosteq(mpmath.mpf(dp.gain), 1 / mpmath.mpf(A_N[16]), 1e-18)


@pytest.mark.parametrize("function", GAIN_FUNCTIONS)
def test_raw_outputs_are_a_n_times_the_exact(function: str) -> None:
    """Every 12-bit input: within 1 LSB of A_16 times mpmath's value, and far from the value."""
    d = design(function=function, data_width=12, gain="raw", iterations=16)
    dp = d.datapath
    port = next(iter(corner_inputs(dp)))
    codes = np.arange(-2048, 2048) if function != "sqrt" else np.arange(4096)
    outs = evaluate_function(dp, {port: codes})
    names = [p.name for p in output_ports(dp) if p.name != "out_exponent"]
    worst_scaled = 0.0
    worst_plain = 0.0
    with mpmath.workdps(30):
        a16 = mpmath.mpf(A_N[16])
        scale = mpmath.mpf(2) ** dp.out_frac
        ln2 = mpmath.log(2)
        for i, c in enumerate(codes.tolist()):
            v = _mp_value(c, dp.in_frac)
            if function == "sinhcosh":
                exact = [mpmath.cosh(v), mpmath.sinh(v)]
            elif function == "exp":
                exact = [mpmath.exp(v - int(outs["out_exponent"][i]) * ln2)]
            else:
                exact = [mpmath.sqrt(v)]
            for name, x in zip(names, exact, strict=True):
                o = int(outs[name][i])
                worst_scaled = max(worst_scaled, abs(float(o - a16 * x * scale)))
                worst_plain = max(worst_plain, abs(float(o - x * scale)))
    assert worst_scaled < 1.0
    # 1 - A_h = 0.17 of the output's range: hundreds of LSBs at 12 bits.
    assert worst_plain > 100


# --- 4. Range extension -----------------------------------------------------------------


@pytest.mark.parametrize("function", ["ln", "sqrt"])
def test_every_octave_within_one_lsb(function: str) -> None:
    """All 4096 inputs of the 12-bit core, grouped by normalising shift: each octave
    [2^k, 2^(k+1)) is under 1 LSB against mpmath, so no shift is left badly corrected."""
    dp = design(function=function, data_width=12).datapath
    w = np.arange(1 << 12, dtype=np.int64)
    outs = evaluate_function(dp, {"in_w": w})
    name = "out_ln" if function == "ln" else "out_sqrt"
    fn = mpmath.log if function == "ln" else mpmath.sqrt
    worst_by_octave: dict[int, float] = {}
    with mpmath.workdps(30):
        scale = mpmath.mpf(2) ** dp.out_frac
        for code in range(1, 1 << 12):
            k = code.bit_length() - 1
            e = abs(float(int(outs[name][code]) - fn(_mp_value(code, 12)) * scale))
            worst_by_octave[k] = max(worst_by_octave.get(k, 0.0), e)
    assert sorted(worst_by_octave) == list(range(12))
    assert max(worst_by_octave.values()) < 1.0, worst_by_octave
    assert int(outs[name][0]) == 0


@pytest.mark.parametrize("width", [12, 16])
def test_exp_exponent_is_floor_t_over_ln2_everywhere(width: int) -> None:
    """Every input: the exponent is floor(t / ln 2) (mpmath), except where e^r is within an LSB
    of 2.0 and rounds up to it, which is written as mantissa 1.0 at the next exponent; the
    exponent fits its port; the mantissa is in [1, 2), i.e. [2^(b-1), 2^b); and the value
    mantissa 2^exponent is within 1 LSB (of that exponent's mantissa) of mpmath's e^t."""
    dp = design(function="exp", data_width=width).datapath
    L = log_int_bits(width)
    assert L == 4  # 2^3 = 8 < b ln 2 (8.32 for 12 bits, 11.09 for 16) <= 16
    assert dp.in_frac == width - 1 - L
    t = np.arange(-(1 << (width - 1)), 1 << (width - 1), dtype=np.int64)
    out = run(dp, t)
    got_e = out["out_exponent"].tolist()
    mant = out["out_mantissa"].tolist()
    one = 1 << (width - 1)
    carries = []
    worst = 0.0
    with mpmath.workdps(30):
        ln2 = mpmath.log(2)
        scale = mpmath.mpf(2) ** dp.in_frac
        for c, e, m in zip(t.tolist(), got_e, mant, strict=True):
            v = c / scale
            q = int(mpmath.floor(v / ln2))
            exact = mpmath.exp(v - q * ln2) * one  # the mantissa at exponent q, in [2^(b-1), 2^b)
            if e == q + 1:
                carries.append(c)
                assert m == one and exact > 2 * one - 1  # 2.0 is within 1 LSB of e^r
                exact /= 2
            else:
                assert e == q, (c, e, q)
            worst = max(worst, abs(float(m - exact)))
    assert worst < 1.0
    assert len(carries) <= 4  # only where e^r is in the top LSB below 2.0
    # Both widths: t in [-16, 16), floor(-16 / ln 2) = floor(-23.08) = -24 up to floor(15.99 / ln 2)
    # = floor(23.07) = 23 (no carry there: e^r would need to be within an LSB of 2).
    assert min(got_e) == -24 and max(got_e) == 23
    width_e = next(p.width for p in output_ports(dp) if p.name == "out_exponent")
    assert -(1 << (width_e - 1)) <= min(got_e) and max(got_e) < 1 << (width_e - 1)
    assert min(mant) >= one and max(mant) < 2 * one


# --- 5. Sizing proofs -------------------------------------------------------------------




@pytest.mark.parametrize("function", ["sqrt", "ln"])
@pytest.mark.parametrize("width", [12, 16])
def test_sizing_is_minimal(function: str, width: int) -> None:
    """The chosen size meets max_error_lsb = 1.0 on every input; no cheaper one does (fewer
    adder bits: design.sizing_cost)."""
    spec = parse_config({"name": "c", "function": function, "data_width": width})
    d = build_design(spec)
    n, g = d.datapath.iterations, d.datapath.guard_bits
    inputs, exhaustive = sizing_inputs(d.datapath)
    assert exhaustive and d.accuracy_exhaustive
    assert np.array_equal(np.sort(inputs["in_w"]), np.arange(1 << width))
    ideal = ideal_outputs(d.datapath, inputs, with_gain=False)
    stats = measure(make_datapath(spec, n, g), inputs, ideal)
    assert stats.max_error_lsb < 1.0
    # The reported accuracy is this measurement.
    assert stats.max_error_lsb == pytest.approx(d.accuracy.max_error_lsb, abs=1e-12)
    assert stats.rms_error_lsb == pytest.approx(d.accuracy.rms_error_lsb, abs=1e-12)
    assert stats.samples == d.accuracy.samples == 1 << width
    # Guard bits are chosen smallest first: every count below g misses.
    for fewer in range(g):
        assert measure(make_datapath(spec, n, fewer), inputs, ideal).max_error_lsb >= 1.0
    # Every size of fewer adder bits misses too (the smaller guard-bit counts among them).
    assert cheaper_sizes_miss(spec, d, inputs, ideal) >= g


# --- 6. The fast path equals the wrapping path ------------------------------------------


@contextmanager
def compare_iterate_paths() -> Iterator[list[int]]:
    """Run every model call of ``iterate`` on int64 both ways (fast, and wrapping per register)
    on the very start values the model builds; yields the size of each call (-1 where the
    model ran on Python integers and there is no fast path to compare)."""
    seen: list[int] = []
    original: Callable[..., Any] = model.iterate  # what every function module imported

    def both(dp, x, y, z, dtype):  # type: ignore[no-untyped-def]
        fast = original(dp, x, y, z, dtype)
        if np.asarray(x).dtype != object and dtype != object:
            slow = iterate_wrapping(
                dp, np.asarray(x).copy(), np.asarray(y).copy(), np.asarray(z).copy(), dtype
            )
            for f, s in zip(fast, slow, strict=True):
                assert np.array_equal(f, s)
            seen.append(int(np.asarray(x).size))
        else:
            seen.append(-1)  # Python integers: iterate is iterate_wrapping itself
        return fast

    with pytest.MonkeyPatch.context() as mp:
        for fn in FUNCTIONS:  # each function's module calls iterate by the name it imported
            module = sys.modules[type(fn).__module__]
            if getattr(module, "iterate", None) is original:
                mp.setattr(module, "iterate", both)
        yield seen


@settings(max_examples=150, deadline=None)
@given(
    function=st.sampled_from(HYPERBOLIC_FUNCTIONS),
    data_width=st.integers(3, 28),
    guard_bits=st.integers(0, 10),
    extra_iterations=st.integers(-4, 6),
    gain=st.sampled_from(["compensated", "raw"]),
    seed=st.integers(0, 2**32 - 1),
)
def test_fast_path_equals_the_wrapping_path(
    function: str, data_width: int, guard_bits: int, extra_iterations: int, gain: str, seed: int
) -> None:
    """The int64 path leaves out the per-register wrap; on the start values each hyperbolic
    model builds (random codes, every corner, domain errors included) it must agree."""
    values: dict[str, Any] = {"name": "c", "function": function, "data_width": data_width}
    if function in GAIN_FUNCTIONS:
        values["gain"] = gain
    spec = parse_config(values)
    probe = make_datapath(spec, 3, guard_bits)
    n = max(3, min(data_width + extra_iterations, probe.xy_width))
    dp = make_datapath(spec, n, guard_bits)
    rng = np.random.default_rng(seed)
    port = next(iter(corner_inputs(dp)))
    codes = np.concatenate([corner_inputs(dp)[port], random_inputs(dp, rng, 1500)[port]])
    if data_width <= 12:
        every = np.arange(1 << data_width, dtype=np.int64)
        codes = np.concatenate(
            [
                codes,
                every - (1 << (data_width - 1))
                if function in ("sinhcosh", "exp", "atanh")
                else every,
            ]
        )
    with compare_iterate_paths() as seen:
        evaluate_function(dp, {port: codes})
    assert len(seen) == 1
    if data_width <= 20:  # every model runs on int64 here
        assert seen == [len(codes)]


@pytest.mark.parametrize("function", ["sinhcosh", "exp", "ln"])
def test_direct_iterate_calls_agree_on_the_model_ranges(function: str) -> None:
    """The same, called directly at 16 bits with 6 guard bits: rotation from (1/A_n, 0, t) over
    the whole convergence range |t| < 1.118 (sinhcosh itself only needs |t| < 1), from
    (1/A_n, 1/A_n, r) with 0 <= r < ln 2 (exp), and vectoring from (m + 1, m - 1, 0) with m in
    [1/2, 1) (ln)."""
    rng = np.random.default_rng(3)
    spec = parse_config({"name": "c", "function": function, "data_width": 16})
    dp = make_datapath(spec, 18, 6)
    size = 20000
    if function == "sinhcosh":
        x = np.full(size, dp.x_start, dtype=np.int64)
        y = np.zeros(size, dtype=np.int64)
        limit = int(1.118 * 2**dp.z_frac)
        z = rng.integers(-limit, limit, size, dtype=np.int64)
    elif function == "exp":
        x = np.full(size, dp.x_start, dtype=np.int64)
        y = x.copy()
        z = rng.integers(0, int(math.log(2) * 2**dp.z_frac), size, dtype=np.int64)
    else:
        one = 1 << (dp.in_frac + dp.guard_bits)
        m = rng.integers(one // 2, one, size, dtype=np.int64)
        x, y, z = m + one, m - one, np.zeros(size, dtype=np.int64)
    fast = iterate(dp, x, y, z, np.int64)
    slow = iterate_wrapping(dp, x, y, z, np.int64)
    for f, s in zip(fast, slow, strict=True):
        assert np.array_equal(f, s)


# --- 7. Config ------------------------------------------------------------------------


@pytest.mark.parametrize("function", HYPERBOLIC_FUNCTIONS)
def test_hyperbolic_functions_parse(function: str) -> None:
    spec = parse_config({"name": "c", "function": function, "data_width": 12})
    assert spec.function == function
    fields = spec_to_dict(spec)
    assert "angle_width" not in fields and "angle_unit" not in fields
    assert ("gain" in fields) == (function in GAIN_FUNCTIONS)


@pytest.mark.parametrize("function", HYPERBOLIC_FUNCTIONS)
@pytest.mark.parametrize(
    ("field", "value"), [("angle_width", 12), ("angle_unit", "radians"), ("angle_unit", "turns")]
)
def test_angle_fields_refused(function: str, field: str, value: object) -> None:
    with pytest.raises(ConfigError) as info:
        parse_config({"name": "c", "function": function, field: value})
    assert info.value.field == field and info.value.value == value
    assert f"remove {field}" in info.value.fix
    assert f'"{function}"' in str(info.value)


@pytest.mark.parametrize("function", GAIN_FREE)
@pytest.mark.parametrize("value", ["compensated", "raw"])
def test_gain_refused_for_atanh_and_ln(function: str, value: str) -> None:
    with pytest.raises(ConfigError) as info:
        parse_config({"name": "c", "function": function, "gain": value})
    assert info.value.field == "gain" and info.value.value == value
    assert "remove gain" in info.value.fix


@pytest.mark.parametrize("function", GAIN_FUNCTIONS)
@pytest.mark.parametrize("value", ["compensated", "raw"])
def test_gain_accepted_for_sinhcosh_exp_sqrt(function: str, value: str) -> None:
    spec = parse_config({"name": "c", "function": function, "gain": value})
    assert spec.gain == value
    assert make_datapath(spec, 12, 4).gain_mode == value


@pytest.mark.parametrize(
    ("function", "field", "value"),
    [("ln", "gain", "raw"), ("sqrt", "angle_width", 12), ("exp", "angle_unit", "radians")],
)
def test_refusals_exit_2_naming_the_field(
    function: str,
    field: str,
    value: object,
    config_file,
    tmp_path: Path,
    capsys: pytest.CaptureFixture[str],
) -> None:
    config = config_file(name="h", function=function, data_width=12, **{field: value})
    out = tmp_path / "project"
    status = main(["generate", str(config), "-o", str(out)])
    err = capsys.readouterr().err
    assert status == 2
    assert f"field '{field}'" in err and f"remove {field}" in err and "Fix:" in err
    assert "Traceback" not in err and err.count("\n") == 1
    assert not out.exists()


# --- Past 40 bits: the mpmath ideal and the Python-integer model ----------------------------


def test_wide_ideal_reads_negative_codes() -> None:
    # 41 bits, t has 40 fraction bits: t = -2^38 / 2^40 = -0.25; cosh 0.25 = 1.031413 and the
    # output has 39 fraction bits, so the ideal is 1.031413 * 2^39.
    dp = make_datapath(parse_config({"name": "c", "function": "sinhcosh", "data_width": 41}), 43, 8)
    ideal = ideal_outputs(dp, {"in_t": np.array([-(1 << 38)])})["out_cosh"][0]
    assert abs(float(ideal) / 2**39 - 1.0314131) < 1e-6


def test_wide_exp_reduction() -> None:
    # 48 bits: L = 6 (48 ln 2 = 33.3 <= 64), t has 41 fraction bits, z 48 + 8 + 6 + 2 = 64.
    # t = 2^40 / 2^41 = 0.5: 0.5 / ln 2 = 0.72 -> exponent 0, mantissa e^0.5 = 1.648721.
    dp = make_datapath(parse_config({"name": "c", "function": "exp", "data_width": 48}), 50, 8)
    out = run(dp, np.array([1 << 40]))
    assert int(out["out_exponent"][0]) == 0
    assert abs(int(out["out_mantissa"][0]) / 2**47 - 1.6487213) < 1e-6


def test_64_bit_ideal_keeps_every_bit() -> None:
    # 64 bits: t = (2^62 + 1) / 2^63 = 0.5 + 2^-63; the ideal cosh has 62 fraction bits, so it
    # must resolve 2^-62: cosh(0.5 + d) = cosh 0.5 + d sinh 0.5 (mpmath at 40 digits), which a
    # 53-bit computation would round away.
    dp = make_datapath(parse_config({"name": "c", "function": "sinhcosh", "data_width": 64}), 67, 6)
    code = (1 << 62) + 1
    ideal = ideal_outputs(dp, {"in_t": np.array([code], dtype=object)})["out_cosh"][0]
    with mpmath.workdps(40):
        exact = mpmath.cosh(mpmath.mpf(code) / mpmath.mpf(2) ** 63) * mpmath.mpf(2) ** 62
        assert abs(ideal - exact) < mpmath.mpf(2) ** -8


@pytest.mark.parametrize("function", ["ln", "atanh", "div"])
def test_z_only_functions_refuse_fewer_than_three_iterations(function: str) -> None:
    # Their last iteration reads only y's sign and z; with fewer than three the core would build
    # an x nobody reads (verilator -Wall flags it), and no such core meets a budget anyway.
    with pytest.raises(ConfigError) as info:
        build_design(parse_config({"name": "c", "function": function, "data_width": 8, "iterations": 2, "max_error_lsb": 1e6}))
    assert info.value.field == "iterations" and "at least 3" in str(info.value)
    assert build_design(parse_config({"name": "c", "function": function, "data_width": 8, "iterations": 3, "max_error_lsb": 1e6})).datapath.iterations == 3


def test_64_bit_exp_ideal_keeps_ln2_exact() -> None:
    # 64 bits: L = 6, t has 57 fraction bits. t just above -91 ln 2 (-63.076...): the exponent is
    # -91 and the mantissa e^(t + 91 ln 2) just above 1.0, with 63 fraction bits. Reducing by a
    # 53-bit ln 2 (mpmath's default precision) moves t + 91 ln 2 by about 91 * 2^-54 = 2^-47.5,
    # about 2^15.5 output LSBs, and across the boundary it gives floor(t / ln 2) = -92 and a
    # mantissa near 2.0: an error of 2^63 LSB against a correct output.
    dp = make_datapath(parse_config({"name": "c", "function": "exp", "data_width": 64}), 60, 8)
    assert dp.in_frac == 57 and dp.out_frac == 63
    with mpmath.workdps(60):
        ln2 = mpmath.log(2)
        edge = int(mpmath.ceil(-91 * ln2 * mpmath.mpf(2) ** 57))  # the first code above -91 ln 2
    codes = [edge, edge + 1, edge + 1000, (1 << 62) + 1, -(1 << 63)]
    # Called at mpmath's default precision, as the sizer and the reports call it.
    ideal = ideal_outputs(dp, {"in_t": np.array(codes, dtype=object)})["out_mantissa"]
    with mpmath.workdps(60):
        for code, got in zip(codes, ideal, strict=True):
            t = mpmath.mpf(code) / mpmath.mpf(2) ** 57
            q = mpmath.floor(t / ln2)
            exact = mpmath.exp(t - q * ln2) * mpmath.mpf(2) ** 63
            assert abs(got - exact) < mpmath.mpf(2) ** -8, (code, float(got - exact))
    # Judged against that ideal, the model (60 iterations: last shift 57, residue about 2^6
    # LSB at 63 fraction bits) is off by its residue and rounding, not by 2^63.
    inputs = {"in_t": np.array(codes, dtype=object)}
    err = function_errors(dp, inputs, run(dp, inputs["in_t"]))["out_mantissa"]
    assert np.max(np.abs(err)) < 2**12, err


def test_64_bit_exp_corners_hit_every_exponent_step() -> None:
    # The corner set holds the code nearest each multiple q ln 2 (where the exponent steps).
    # At 64 bits that code is q ln 2 2^57 ~ 2^63: computed at 53 bits it missed 90 of the 92 positive ones.
    dp = make_datapath(parse_config({"name": "c", "function": "exp", "data_width": 64}), 60, 8)
    codes = {int(v) for v in corner_inputs(dp)["in_t"]}
    with mpmath.workdps(60):
        steps = [mpmath.nint(q * mpmath.log(2) * mpmath.mpf(2) ** 57) for q in range(-92, 93)]
        inside = [int(v) for v in steps if -(2**63) <= v < 2**63]
    assert len(inside) == 185  # |q| <= 92: 92 ln 2 = 63.77 < 64 = 2^L
    assert not [v for v in inside if v not in codes]
