"""The bit-true model's shared arithmetic: numpy integer operations, whole arrays at once.

The iterations (circular, linear, hyperbolic; rotation and vectoring), the wrap-around of a
register, the roundings, saturation and the leading-zero count, exactly as the hardware does
them. Each function's module (benchgen.functions) builds its model from these around the same
iterations: its input logic, then :func:`iterate`, then its output logic. For widths that fit
int64 the arrays are int64; wider cores run on arrays of Python integers (exact, slower).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath

__all__ = [
    "BLOCK",
    "INT64_MODEL_BITS",
    "as_ints",
    "dtype_for",
    "iterate",
    "iterate_wrapping",
    "leading_zeros",
    "redundant_sign_bits",
    "round_drop",
    "round_shift",
    "saturate",
    "to_signed",
    "unsigned",
    "wrap",
]

IntArray = npt.NDArray[Any]


INT64_MODEL_BITS = 60
"""Widest intermediate (bits) the model computes on int64; wider ones run on Python integers."""


def dtype_for(width: int) -> type | np.dtype[Any]:
    """int64 while every intermediate of ``width`` bits fits it exactly, else Python integers."""
    # int64 is exact while every intermediate stays below 2**62 in magnitude.
    return np.dtype(np.int64) if width <= INT64_MODEL_BITS else object


def wrap(values: IntArray, width: int) -> IntArray:
    """Two's complement wrap-around to ``width`` bits, as a register of that width does."""
    half = 1 << (width - 1)
    if values.dtype == object:
        return ((values + half) & ((1 << width) - 1)) - half
    return ((values + np.int64(half)) & np.int64((1 << width) - 1)) - np.int64(half)


def to_signed(codes: IntArray, width: int) -> IntArray:
    """Read ``width``-bit codes (any integer representation) as two's complement numbers."""
    return wrap(codes, width)


def round_drop(values: IntArray, drop: int, rounding: str, out_width: int) -> IntArray:
    """Drop ``drop`` fraction bits with the given rounding; wrap to ``out_width`` bits.

    The increment is computed from the dropped bits alone (and the kept LSB for ties to even),
    exactly as the RTL does, so the model and the hardware agree on every tie.
    """
    if drop == 0:
        return wrap(values, out_width)
    kept = values >> drop
    frac = values & ((1 << drop) - 1)
    half = 1 << (drop - 1)
    if rounding == "truncate":
        inc = np.zeros_like(kept)
    elif rounding == "half_up":
        inc = (frac >= half).astype(kept.dtype)
    elif rounding == "half_even":
        tie_up = (frac == half) & ((kept & 1) == 1)
        inc = ((frac > half) | tie_up).astype(kept.dtype)
    else:  # pragma: no cover - the config rejects other modes
        raise ValueError(f"unknown rounding {rounding!r}")
    return wrap(kept + inc, out_width)


def _round_int(value: int, drop: int, rounding: str) -> int:
    """:func:`round_shift` of one Python integer."""
    if drop == 0:
        return value
    kept = value >> drop
    frac = value & ((1 << drop) - 1)
    half = 1 << (drop - 1)
    if rounding == "half_up":
        return kept + (frac >= half)
    if rounding == "half_even":
        return kept + (frac > half or (frac == half and kept & 1 == 1))
    return kept


def round_shift(values: IntArray, drop: IntArray, rounding: str) -> IntArray:
    """Divide by 2**drop (a count per element, each >= 0) with the given rounding.

    The same increment rule as :func:`round_drop`, with the rounding point varying per sample
    (an output shifted back by a normalising shift). No wrap: the caller clamps.
    """
    drop = np.asarray(drop)
    if values.dtype == object:
        return np.array(
            [_round_int(int(v), int(d), rounding) for v, d in zip(values.ravel(), drop.ravel(), strict=True)],
            dtype=object,
        ).reshape(values.shape)
    d = drop.astype(np.int64)
    one = np.int64(1)
    kept = values >> d
    frac = values & ((one << d) - one)
    half = np.where(d > 0, one << np.maximum(d - one, 0), np.int64(-1))  # -1: nothing dropped, no increment
    if rounding == "truncate":
        inc = np.zeros_like(kept)
    elif rounding == "half_up":
        inc = ((half >= 0) & (frac >= half)).astype(np.int64)
    elif rounding == "half_even":
        tie_up = (frac == half) & ((kept & one) == one)
        inc = ((half >= 0) & ((frac > half) | tie_up)).astype(np.int64)
    else:  # pragma: no cover - the config rejects other modes
        raise ValueError(f"unknown rounding {rounding!r}")
    return kept + inc


def redundant_sign_bits(values: tuple[IntArray, ...], width: int) -> IntArray:
    """The left shift that normalises signed ``width``-bit values together: how many of their
    top bits below the sign all repeat the sign, counted for the value that has fewest.

    Every value shifted left by it still fits ``width`` bits, and the largest of them then
    reaches at least 2**(width - 2) in magnitude. The count is at most width - 2 (inputs that
    are all 0 or -1 give that).
    """
    bits = np.zeros(values[0].shape, dtype=values[0].dtype)
    for v in values:
        bits = bits | (v ^ (v >> (width - 1)))  # |v| less one for negatives: the bits below the sign
    return leading_zeros(bits, width - 1)


def saturate(values: IntArray, limit: int) -> IntArray:
    """Clip to +-limit, as the output logic does."""
    out = values.copy()
    out[values > limit] = limit
    out[values < -limit] = -limit
    return out


BLOCK = 1 << 14
"""Inputs per block of the int64 iterations: they fit the cache."""


#: Called after each iteration with its index and that block's x and y (unwrapped int64).
StageVisitor = Callable[[int, IntArray, IntArray], None]


def iterate(
    dp: Datapath, x: IntArray, y: IntArray, z: IntArray, dtype: Any, *, each: StageVisitor | None = None
) -> tuple[IntArray, IntArray, IntArray]:
    """Circular iterations in the data path's mode; int64 arrays take the fast path.

    ``each`` (fast path only) sees x and y after every iteration, before any wrap: how
    :meth:`benchgen.functions.sincos.SinCos.proved_range` bounds every register.
    """
    if dtype == object or x.dtype == object:
        assert each is None, "the stage visitor runs on the int64 path only"
        return iterate_wrapping(dp, x, y, z, dtype)
    x = np.ascontiguousarray(x, dtype=np.int64).copy()
    y = np.ascontiguousarray(y, dtype=np.int64).copy()
    z = np.ascontiguousarray(z, dtype=np.int64).copy()
    for lo in range(0, x.size, BLOCK):
        sl = slice(lo, lo + BLOCK)
        _iterate_block(dp, x[sl], y[sl], z[sl], each)
    return wrap(x, dp.xy_width), wrap(y, dp.xy_width), wrap(z, dp.z_width)


def _iterate_block(dp: Datapath, x: IntArray, y: IntArray, z: IntArray, each: StageVisitor | None = None) -> None:
    """In-place iterations on int64 without the per-register wrap (any coordinates).

    Leaving the wrap to the end changes no bit here. x and y never reach their register
    limits: the inputs start within sqrt(2) full scale (times K_n when compensated), each
    iteration grows the vector by sqrt(1 + 2^-2i), to at most 2.33 full scale raw, and the
    widths hold 4 full scales (rotate, atan2) or 2 amplitudes (sincos). In rotation z stays
    within +-1/4 turn (or pi/2) after the fold. In vectoring z only accumulates, no decision
    reads it, so wrapping it once at the end equals wrapping it at every step. Hyperbolic
    iterations shrink the vector (by A_n = 0.828) and their widths hold at least twice the
    largest value on the way (see algorithm._hyperbolic_datapath). A property test holds this
    path equal to :func:`iterate_wrapping`.
    """
    s = np.empty_like(x)
    tx = np.empty_like(x)
    ty = np.empty_like(x)
    last = dp.iterations - 1
    vectoring = dp.mode == "vectoring"
    linear = dp.coordinates == "linear"
    hyperbolic = dp.coordinates == "hyperbolic"
    rounded = dp.rounded_shifts
    for i, (shift, step) in enumerate(zip(dp.shifts, dp.atan_table, strict=True)):
        # s = -1 where the turn is clockwise, else 0; (v ^ s) - s negates v where s = -1.
        if vectoring:
            np.right_shift(y, 63, out=s)
            np.invert(s, out=s)
        else:
            np.right_shift(z, 63, out=s)
        np.right_shift(y, shift, out=ty)
        np.right_shift(x, shift, out=tx)
        if rounded and shift > 0:
            # half up: the bit below the shift (the RTL's carry-in)
            ty += (y >> (shift - 1)) & 1
            tx += (x >> (shift - 1)) & 1
        np.bitwise_xor(ty, s, out=ty)
        np.subtract(ty, s, out=ty)
        np.bitwise_xor(tx, s, out=tx)
        np.subtract(tx, s, out=tx)
        if hyperbolic:
            np.add(x, ty, out=x)
        elif not linear:
            np.subtract(x, ty, out=x)
        if not (vectoring and i == last):
            np.add(y, tx, out=y)
        if vectoring or i != last:
            np.bitwise_xor(s, np.int64(step), out=ty)
            np.subtract(ty, s, out=ty)
            np.subtract(z, ty, out=z)
        if each is not None:
            each(i, x, y)


def shifted_term(value: Any, shift: int, rounded: bool) -> Any:
    """``value / 2^shift`` as an iteration forms it (an int or an integer array): floored, or
    rounded half up where the data path rounds its shifted terms
    (:attr:`benchgen.algorithm.Datapath.rounded_shifts`)."""
    if rounded and shift > 0:
        return (value >> shift) + (value >> (shift - 1) & 1)
    return value >> shift


def iterate_wrapping(dp: Datapath, x: IntArray, y: IntArray, z: IntArray, dtype: Any) -> tuple[IntArray, IntArray, IntArray]:
    """Circular iterations in the data path's mode, wrapping at every register width.

    Rotation mode turns counter-clockwise where z >= 0; vectoring mode where y < 0 (driving y
    to 0 with x > 0). Either way: x - d y/2^i, y + d x/2^i, z - d atan 2^-i (Walther 1971);
    in linear coordinates x stays and z steps by 2^-i; in hyperbolic coordinates x + d y/2^s,
    z - d atanh 2^-s, with the shift s of each iteration from ``dp.shifts``. Where
    ``dp.rounded_shifts``, x/2^s and y/2^s are rounded half up (the bit below the shift added).
    The values the last iteration does not need (z in rotation, y in vectoring) are left as
    they were, as the RTL does not form them.
    """
    last = dp.iterations - 1
    vectoring = dp.mode == "vectoring"
    for i, (shift, step) in enumerate(zip(dp.shifts, dp.atan_table, strict=True)):
        turn = (y < 0) if vectoring else (z >= 0)
        sign = turn.astype(dtype) * 2 - 1
        xs = shifted_term(x, shift, dp.rounded_shifts)
        ys = shifted_term(y, shift, dp.rounded_shifts)
        if dp.coordinates == "linear":
            new_x = x
        elif dp.coordinates == "hyperbolic":
            new_x = wrap(x + sign * ys, dp.xy_width)
        else:
            new_x = wrap(x - sign * ys, dp.xy_width)
        if not (vectoring and i == last):
            y = wrap(y + sign * xs, dp.xy_width)
        if vectoring or i != last:
            z = wrap(z - sign * step, dp.z_width)
        x = new_x
    return x, y, z


def as_ints(values: npt.ArrayLike, width: int, dtype: Any) -> IntArray:
    """What a ``width``-bit input port takes of the values: their low ``width`` bits, as
    unsigned codes (int64, or Python integers for an object-dtype model); :func:`to_signed`
    reads them as two's complement."""
    raw = np.asarray(values)
    if dtype == object or raw.dtype == object:
        ints = np.array([int(v) for v in raw.ravel()], dtype=object).reshape(raw.shape)
        return ints & ((1 << width) - 1)
    return raw.astype(np.int64) & np.int64((1 << width) - 1)


def unsigned(values: npt.ArrayLike, width: int, dtype: Any) -> IntArray:
    """Unsigned ``width``-bit codes (:func:`as_ints`)."""
    return as_ints(values, width, dtype)


def leading_zeros(codes: IntArray, width: int) -> IntArray:
    """Leading zeros of unsigned ``width``-bit codes; ``width - 1`` for 0 (as the RTL's encoder)."""
    lz = np.full(codes.shape, width - 1, dtype=np.int64)
    found = np.zeros(codes.shape, dtype=bool)
    for k in range(width):
        bit = ((codes >> (width - 1 - k)) & 1).astype(bool)
        hit = bit & ~found
        lz[hit] = k
        found |= bit
    return lz


