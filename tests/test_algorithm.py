"""The algorithm's constants and rules against outside references.

Sources are named beside each check (see ../shared/FACTS.md for the values): Walther 1971 and
Andraka 1998 for the gain and the convergence range, Volder 1959 / Hu 1992 for the residual
angle, IEEE Std 754-2019 section 4.3 for the rounding names, mpmath for recomputed values.
"""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from benchgen.algorithm import circular_gain, make_timing
from benchgen.functions import make_datapath
from benchgen.config import parse_config
from benchgen.model import round_drop, wrap


def spec(**values):  # type: ignore[no-untyped-def]
    return parse_config({"name": "c", "function": "sincos", **values})


def test_gain_limit_matches_published_and_mpmath() -> None:
    # Walther 1971 and Andraka 1998 print K = 0.607253 (6 digits).
    assert float(circular_gain(64)) == pytest.approx(0.607253, abs=5e-7)
    # FACTS.md [mp] 0.60725293500888125617, recomputed here as prod cos(atan 2^-i), a
    # different formula from the code's prod (1 + 2^-2i)^-1/2.
    with mpmath.workdps(60):
        k = mpmath.fprod(mpmath.cos(mpmath.atan(mpmath.mpf(2) ** -i)) for i in range(100))
        assert abs(circular_gain(100) - k) < mpmath.mpf(10) ** -50
        assert mpmath.almosteq(circular_gain(100), mpmath.mpf("0.60725293500888125617"), 1e-19)
    # Andraka 1998: an uncompensated rotation grows the vector by 1.64676.
    assert 1 / float(circular_gain(64)) == pytest.approx(1.64676, abs=5e-6)


@pytest.mark.parametrize(
    ("n", "literal"),
    [  # FACTS.md [mp], K_n for n iterations i = 0..n-1
        (8, "0.60725911229889273006"),
        (12, "0.60725295913894481363"),
        (16, "0.60725293510313931731"),
        (24, "0.60725293500888269443"),
        (32, "0.60725293500888125619"),
    ],
)
def test_finite_gain_values(n: int, literal: str) -> None:
    with mpmath.workdps(40):
        assert mpmath.almosteq(circular_gain(n), mpmath.mpf(literal), 1e-19)


def test_start_value_removes_the_gain() -> None:
    dp = make_datapath(spec(data_width=16), 20, 5)
    expected = round(float(circular_gain(20)) * (2**15 - 1) * 2**5)
    assert dp.x_start == expected
    assert dp.amplitude == 2**15 - 1


def test_angle_table_against_mpmath() -> None:
    dp = make_datapath(spec(data_width=16, angle_width=16), 20, 5)
    with mpmath.workdps(50):
        for i, code in enumerate(dp.atan_table):
            exact = mpmath.atan(mpmath.mpf(2) ** -i) / (2 * mpmath.pi) * 2**dp.z_width
            assert abs(code - exact) <= 0.5


def test_convergence_range_covers_the_folded_quarter_turn() -> None:
    # Sum of atan 2^-i, i >= 0: 1.7432866204723400035 rad = 99.88 degrees (FACTS.md [mp];
    # about 99.88 degrees in Andraka 1998). The fold leaves at most 1/4 turn = pi/2.
    with mpmath.workdps(40):
        total = mpmath.nsum(lambda i: mpmath.atan(mpmath.mpf(2) ** -i), [0, mpmath.inf])
        assert mpmath.almosteq(total, mpmath.mpf("1.7432866204723400035"), 1e-18)
    assert float(total) > math.pi / 2
    # The quantised table reaches beyond a quarter turn too, with room for the last step.
    dp = make_datapath(spec(data_width=16, angle_width=16), 20, 5)
    reach = sum(dp.atan_table) + dp.atan_table[-1]
    assert reach > 2 ** (dp.z_width - 2)


def test_residual_angle_bound() -> None:
    # After n iterations the angle left is at most atan 2^-(n-1) (Volder 1959; Hu 1992),
    # plus the quantisation of the n table entries. Checked on every folded 12-bit angle.
    dp = make_datapath(spec(data_width=12, angle_width=12), 14, 4)
    codes = np.arange(1 << 12, dtype=np.int64)
    folded = np.where(((codes >> 11) ^ (codes >> 10)) & 1, codes ^ (1 << 11), codes)
    z = wrap(folded, 12) << (dp.z_width - 12)
    for step in dp.atan_table:
        z = np.where(z >= 0, z - step, z + step)
    bound = math.atan(2.0 ** -(dp.iterations - 1)) / (2 * math.pi) * 2**dp.z_width + dp.iterations / 2
    assert np.max(np.abs(z)) <= bound


@pytest.mark.parametrize(
    ("rounding", "biases"),
    [  # mean error when dropping k = 1, 2, 4, 8 bits (FACTS.md [mp]; names per IEEE 754-2019 4.3)
        ("truncate", (-0.25, -0.375, -0.469, -0.498)),
        ("half_up", (0.25, 0.125, 0.031, 0.002)),
        ("half_even", (0.0, 0.0, 0.0, 0.0)),
    ],
)
def test_rounding_biases(rounding: str, biases: tuple[float, ...]) -> None:
    for k, bias in zip((1, 2, 4, 8), biases, strict=True):
        values = np.arange(-(1 << 12), 1 << 12, dtype=np.int64)  # every residue, even and odd kept LSBs
        rounded = round_drop(values, k, rounding, 20)
        mean = float(np.mean(rounded - values / 2**k))
        assert mean == pytest.approx(bias, abs=1e-3)


def test_round_half_even_ties() -> None:
    # 2.5 -> 2, 3.5 -> 4, -2.5 -> -2 (roundTiesToEven, IEEE 754-2019 4.3.1).
    values = np.array([5, 7, -5, -7], dtype=np.int64)  # x2: 2.5, 3.5, -2.5, -3.5
    assert round_drop(values, 1, "half_even", 8).tolist() == [2, 4, -2, -4]
    assert round_drop(values, 1, "half_up", 8).tolist() == [3, 4, -2, -3]
    assert round_drop(values, 1, "truncate", 8).tolist() == [2, 3, -3, -4]


def test_timing_spreads_iterations_evenly() -> None:
    t = make_timing(spec(pipeline_depth=5), 17)
    sizes = [e - b for b, e in t.stages]
    assert sum(sizes) == 17 and max(sizes) - min(sizes) <= 1 and t.latency_cycles == 5 + 1  # + the output register
    assert [s for s in t.stages] == sorted(t.stages)
    it = make_timing(spec(architecture="iterative", iterations_per_cycle=4), 17)
    # the load, 5 clocks of iterations, the output register
    assert it.cycles_per_sample == 5 and it.latency_cycles == 5 + 2
    assert it.stages[-1] == (16, 17)


def test_iterative_timing_starts_after_the_table_head() -> None:
    # two iterations formed by table in the load clock: 15 looped iterations, 4 per clock
    it = make_timing(spec(architecture="iterative", iterations_per_cycle=4), 17, head=2)
    assert it.stages == ((2, 6), (6, 10), (10, 14), (14, 17))
    assert it.cycles_per_sample == 4 and it.latency_cycles == 4 + 2
    # more iterations per clock than are looped: one clock does them all
    one = make_timing(spec(architecture="iterative", iterations_per_cycle=17), 17, head=2)
    assert one.stages == ((2, 17),) and one.cycles_per_sample == 1


def test_only_an_iterative_sine_cosine_takes_a_table_head() -> None:
    from benchgen.config import parse_config
    from benchgen.design import build_design
    from benchgen.functions import ITERATIVE_TABLE_HEAD_ITERATIONS, table_head

    def design(**fields: object):  # type: ignore[no-untyped-def]
        values = {"name": "c", "data_width": 10, "angle_width": 10, "architecture": "iterative", **fields}
        return build_design(parse_config(values))

    sc = design(function="sincos")
    assert table_head(sc.datapath, "iterative") == ITERATIVE_TABLE_HEAD_ITERATIONS
    assert sc.timing.stages[0][0] == ITERATIVE_TABLE_HEAD_ITERATIONS
    assert sc.timing.cycles_per_sample == sc.datapath.iterations - ITERATIVE_TABLE_HEAD_ITERATIONS
    at = design(function="atan2", data_width=10)
    assert table_head(at.datapath, "iterative") == 0 and at.timing.cycles_per_sample == at.datapath.iterations
    # an NCO's load clock holds the phase sum: no head there (a pipelined NCO keeps its own)
    nco = design(function="nco", acc_width=16)
    assert table_head(nco.datapath, "iterative") == 0 and nco.timing.cycles_per_sample == nco.datapath.iterations
    assert table_head(nco.datapath, "pipelined") > 0
