"""Maximal-length linear feedback shift registers for the NCO's phase dither.

The register is the Fibonacci (many-to-one) form with XOR feedback, shifting left:

* the state is an ``L``-bit integer; its bit ``k - 1`` is the register stage numbered ``k``
  (1 to ``L``) in the tap table;
* one step forms ``fb`` = XOR of the stages listed in the taps (stage ``L`` is always one of
  them) and moves to ``((state << 1) | fb) & (2**L - 1)``: the new bit enters at bit 0, the
  oldest leaves from bit ``L - 1``;
* the all-zero state maps to itself (XOR feedback), so a seed must be non-zero; from any other
  state the register runs through all ``2**L - 1`` non-zero states before it repeats.

The bit sequence obeys ``b[n] = XOR_t b[n - t]`` over the taps ``t``, so its connection polynomial
is ``C(x) = 1 + sum_t x**t``; the period is ``2**L - 1`` exactly when ``C`` is primitive over
GF(2). :func:`is_maximal_length` checks that algebraically (the multiplicative order of ``x``
modulo ``C`` is ``2**L - 1``: ``x**(2**L - 1) = 1`` and ``x**((2**L - 1)/q) != 1`` for every prime
``q`` dividing ``2**L - 1``; a reducible ``C`` has fewer than ``2**L - 1`` units, so this also
proves irreducibility), and tests/test_lfsr.py runs the full period for the small widths.

The taps are those of P. Alfke, "Efficient Shift Registers, LFSR Counters, and Long
Pseudo-Random Sequence Generators", Xilinx application note XAPP052 v1.1 (July 1996), Table 3,
written down from memory (the 32-bit entry 32, 22, 2, 1 was checked against a copy; the others
are [mem]); every one is proven maximal-length by :func:`is_maximal_length` in the tests, so
a mistake of memory cannot survive. XAPP052 uses XNOR feedback; the taps of a maximal-length
register are the same for XOR and XNOR (the XNOR register is the XOR one with every state
complemented), and we use XOR.
"""

from __future__ import annotations

import math
import random
from collections.abc import Iterable

import numpy as np
import numpy.typing as npt

__all__ = [
    "LFSR_TAPS",
    "MAX_LFSR_WIDTH",
    "MIN_LFSR_WIDTH",
    "is_maximal_length",
    "leap_map",
    "lfsr_states",
    "lfsr_step",
    "prime_factors",
]

MIN_LFSR_WIDTH = 3
MAX_LFSR_WIDTH = 64

# Stage numbers fed back (XAPP052 Table 3; see the module docstring for the source and the proof).
LFSR_TAPS: dict[int, tuple[int, ...]] = {
    3: (3, 2),
    4: (4, 3),
    5: (5, 3),
    6: (6, 5),
    7: (7, 6),
    8: (8, 6, 5, 4),
    9: (9, 5),
    10: (10, 7),
    11: (11, 9),
    12: (12, 6, 4, 1),
    13: (13, 4, 3, 1),
    14: (14, 5, 3, 1),
    15: (15, 14),
    16: (16, 15, 13, 4),
    17: (17, 14),
    18: (18, 11),
    19: (19, 6, 2, 1),
    20: (20, 17),
    21: (21, 19),
    22: (22, 21),
    23: (23, 18),
    24: (24, 23, 22, 17),
    25: (25, 22),
    26: (26, 6, 2, 1),
    27: (27, 5, 2, 1),
    28: (28, 25),
    29: (29, 27),
    30: (30, 6, 4, 1),
    31: (31, 28),
    32: (32, 22, 2, 1),
    33: (33, 20),
    34: (34, 27, 2, 1),
    35: (35, 33),
    36: (36, 25),
    37: (37, 5, 4, 3, 2, 1),
    38: (38, 6, 5, 1),
    39: (39, 35),
    40: (40, 38, 21, 19),
    41: (41, 38),
    42: (42, 41, 20, 19),
    43: (43, 42, 38, 37),
    44: (44, 43, 18, 17),
    45: (45, 44, 42, 41),
    46: (46, 45, 26, 25),
    47: (47, 42),
    48: (48, 47, 21, 20),
    49: (49, 40),
    50: (50, 49, 24, 23),
    51: (51, 50, 36, 35),
    52: (52, 49),
    53: (53, 52, 38, 37),
    54: (54, 53, 18, 17),
    55: (55, 31),
    56: (56, 55, 35, 34),
    57: (57, 50),
    58: (58, 39),
    59: (59, 58, 38, 37),
    60: (60, 59),
    61: (61, 60, 46, 45),
    62: (62, 61, 6, 5),
    63: (63, 62),
    64: (64, 63, 61, 60),
}


def _check_width(width: int) -> tuple[int, ...]:
    if width not in LFSR_TAPS:
        raise ValueError(f"LFSR width must be {MIN_LFSR_WIDTH} to {MAX_LFSR_WIDTH}, not {width}")
    return LFSR_TAPS[width]


def lfsr_step(state: int, width: int, taps: Iterable[int] | None = None) -> int:
    """One step of the register (the definition the hardware follows, one clock of one stage).

    Args:
        state: The ``width``-bit state.
        width: Register length ``L``.
        taps: Stages fed back; the table's taps for ``width`` when omitted.
    """
    fb = 0
    for t in taps if taps is not None else _check_width(width):
        fb ^= (state >> (t - 1)) & 1
    return ((state << 1) | fb) & ((1 << width) - 1)


def leap_map(width: int, steps: int) -> tuple[int, ...]:
    """The register after ``steps`` steps as a linear map: the image of each one-bit state.

    The step is linear over GF(2) (XOR feedback, no constant), so the state after ``steps``
    steps is the XOR of ``leap_map(...)[i]`` over the set bits ``i`` of the start state. The
    hardware's D-steps-per-sample update is this matrix, one XOR tree per bit.
    """
    taps = _check_width(width)
    images = []
    for i in range(width):
        s = 1 << i
        for _ in range(steps):
            s = lfsr_step(s, width, taps)
        images.append(s)
    return tuple(images)


def _apply(images: tuple[int, ...], states: npt.NDArray[np.uint64]) -> npt.NDArray[np.uint64]:
    out = np.zeros_like(states)
    one = np.uint64(1)
    for i, image in enumerate(images):
        bit = (states >> np.uint64(i)) & one
        out ^= bit * np.uint64(image)
    return out


def _compose(outer: tuple[int, ...], inner: tuple[int, ...]) -> tuple[int, ...]:
    """The map ``outer(inner(s))``, by images."""
    result = []
    for image in inner:
        acc = 0
        i = 0
        while image:
            if image & 1:
                acc ^= outer[i]
            image >>= 1
            i += 1
        result.append(acc)
    return tuple(result)


def lfsr_states(width: int, seed: int, count: int, steps_per_state: int) -> npt.NDArray[np.uint64]:
    """States ``s_0 = seed``, ``s_k = T**(steps_per_state * k) seed`` for ``k < count``, as uint64.

    Computed by doubling (the states ``m .. 2m - 1`` are the map ``T**(steps m)`` applied to the
    states ``0 .. m - 1``), so a record of 2**16 samples costs a few dozen numpy passes instead
    of a Python loop per step; tests/test_lfsr.py checks it against :func:`lfsr_step`.

    Raises:
        ValueError: if the width has no table entry, or the seed is 0 or wider than the register.
    """
    _check_width(width)
    if not 0 < seed < 1 << width:
        raise ValueError(f"LFSR seed must be 1 to 2**{width} - 1 (the all-zero state never leaves itself), not {seed}")
    if steps_per_state < 1:
        raise ValueError(f"steps per state must be at least 1, not {steps_per_state}")
    states = np.array([seed], dtype=np.uint64)
    jump = leap_map(width, steps_per_state)
    while states.size < count:
        states = np.concatenate([states, _apply(jump, states)])
        jump = _compose(jump, jump)
    return states[:count]


def _is_probable_prime(n: int) -> bool:
    """Miller-Rabin with the first 12 primes as bases: exact for n < 3.3e24 (Sorenson and Webster 2015)."""
    if n < 2:
        return False
    small = (2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37)
    for p in small:
        if n % p == 0:
            return n == p
    d, r = n - 1, 0
    while d % 2 == 0:
        d //= 2
        r += 1
    for a in small:
        x = pow(a, d, n)
        if x in (1, n - 1):
            continue
        for _ in range(r - 1):
            x = x * x % n
            if x == n - 1:
                break
        else:
            return False
    return True


def _pollard_rho(n: int, rng: random.Random) -> int:
    """A non-trivial factor of the composite ``n`` (Pollard's rho with Floyd's cycle test)."""
    if n % 2 == 0:
        return 2
    while True:
        c = rng.randrange(1, n)
        x = y = rng.randrange(2, n)
        d = 1
        while d == 1:
            x = (x * x + c) % n
            y = (y * y + c) % n
            y = (y * y + c) % n
            d = math.gcd(abs(x - y), n)
        if d != n:
            return d


def prime_factors(n: int) -> list[int]:
    """The distinct prime factors of ``n`` (n < 3.3e24), sorted."""
    rng = random.Random(1)  # seeded: the factors do not depend on it, only the time taken
    found: set[int] = set()
    todo = [n]
    while todo:
        m = todo.pop()
        if m == 1:
            continue
        if _is_probable_prime(m):
            found.add(m)
            continue
        d = _pollard_rho(m, rng)
        todo += [d, m // d]
    return sorted(found)


def _polymulmod(a: int, b: int, mod: int, degree: int) -> int:
    """a * b modulo ``mod`` over GF(2); polynomials as integers (bit k = coefficient of x**k)."""
    result = 0
    while b:
        if b & 1:
            result ^= a
        b >>= 1
        a <<= 1
        if (a >> degree) & 1:
            a ^= mod
    return result


def _polypowmod(base: int, exponent: int, mod: int, degree: int) -> int:
    result = 1
    while exponent:
        if exponent & 1:
            result = _polymulmod(result, base, mod, degree)
        base = _polymulmod(base, base, mod, degree)
        exponent >>= 1
    return result


def is_maximal_length(width: int, taps: Iterable[int]) -> bool:
    """Whether the register with these taps runs through all ``2**width - 1`` non-zero states.

    True exactly when the connection polynomial ``1 + sum_t x**t`` is primitive over GF(2): the
    order of ``x`` modulo it is ``2**width - 1`` (see the module docstring).
    """
    taps = tuple(taps)
    if max(taps) != width or min(taps) < 1:
        return False
    poly = 1
    for t in taps:
        poly ^= 1 << t
    period = (1 << width) - 1
    if _polypowmod(0b10, period, poly, width) != 1:
        return False
    return all(_polypowmod(0b10, period // q, poly, width) != 1 for q in prime_factors(period))
