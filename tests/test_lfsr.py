"""The dither LFSR: every tap set of the table is maximal-length, proven two independent ways.

Source of the taps: P. Alfke, Xilinx XAPP052 (1996), Table 3 (benchgen/lfsr.py says which
entries were written from memory). The proof does not rest on the source: the algebraic test
(the order of x modulo the connection polynomial is 2**L - 1) is itself cross-checked against
brute-force periods of every tap set of small registers, and the full period is run for
L <= 16.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from benchgen.lfsr import (
    LFSR_TAPS,
    is_maximal_length,
    lfsr_states,
    lfsr_step,
    prime_factors,
)


def _period(width: int, taps: tuple[int, ...], seed: int = 1) -> int:
    s = lfsr_step(seed, width, taps)
    n = 1
    while s != seed:
        s = lfsr_step(s, width, taps)
        n += 1
        if n > 1 << width:  # a register that never returns to the seed (cannot happen: it is invertible)
            return -1
    return n


def test_table_covers_3_to_64_bits() -> None:
    assert sorted(LFSR_TAPS) == list(range(3, 65))
    assert all(max(t) == w for w, t in LFSR_TAPS.items())


@pytest.mark.parametrize("width", sorted(LFSR_TAPS))
def test_every_table_entry_is_maximal_length(width: int) -> None:
    """XAPP052 Table 3 taps, proven primitive here (order of x = 2**L - 1)."""
    assert is_maximal_length(width, LFSR_TAPS[width])


@pytest.mark.parametrize("width", range(3, 17))
def test_full_period_is_run_for_small_widths(width: int) -> None:
    """Independent of the algebra: the register visits all 2**L - 1 non-zero states."""
    taps = LFSR_TAPS[width]
    seen = set()
    s = 1
    for _ in range((1 << width) - 1):
        seen.add(s)
        s = lfsr_step(s, width, taps)
    assert s == 1
    assert len(seen) == (1 << width) - 1 and 0 not in seen


@pytest.mark.parametrize("width", range(3, 9))
def test_algebraic_check_agrees_with_brute_force_on_every_tap_set(width: int) -> None:
    """The check must also say no: compare it with the measured period for all 2**(L-1) tap sets."""
    verdicts = []
    for k in range(width):
        for lower in itertools.combinations(range(1, width), k):
            taps = (width, *lower)
            brute = _period(width, taps) == (1 << width) - 1
            assert is_maximal_length(width, taps) == brute, taps
            verdicts.append(brute)
    assert any(verdicts) and not all(verdicts)  # both answers occur


def test_prime_factors_of_mersenne_numbers() -> None:
    """Complete and prime: divide them out and 1 is left; each factor passes trial division
    where that is feasible. 2**32 - 1 = 3 5 17 257 65537 and 641 | 2**32 + 1 (Euler) [trade]."""
    assert prime_factors((1 << 32) - 1) == [3, 5, 17, 257, 65537]
    assert 641 in prime_factors((1 << 64) - 1)
    for width in range(3, 65):
        m = (1 << width) - 1
        factors = prime_factors(m)
        rest = m
        for q in factors:
            assert rest % q == 0
            while rest % q == 0:
                rest //= q
        assert rest == 1, width
        for q in factors:
            if q < 10**10:
                assert all(q % d for d in range(2, math.isqrt(q) + 1)), q


@pytest.mark.parametrize(("width", "steps", "count"), [(32, 1, 100), (32, 9, 777), (17, 17, 1000), (64, 40, 300), (3, 2, 50)])
def test_leap_forward_states_match_one_step_at_a_time(width: int, steps: int, count: int) -> None:
    seed = (0x9E3779B97F4A7C15 % ((1 << width) - 1)) + 1
    fast = lfsr_states(width, seed, count, steps)
    s = seed
    slow = []
    for _ in range(count):
        slow.append(s)
        for _ in range(steps):
            s = lfsr_step(s, width)
    assert fast.dtype == np.uint64
    assert [int(v) for v in fast] == slow


def test_bad_register_arguments_are_refused() -> None:
    with pytest.raises(ValueError, match="seed"):
        lfsr_states(8, 0, 10, 1)
    with pytest.raises(ValueError, match="seed"):
        lfsr_states(8, 256, 10, 1)
    with pytest.raises(ValueError, match="width"):
        lfsr_states(65, 1, 10, 1)
