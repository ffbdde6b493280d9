"""Bit-true model of the generated cores: numpy integer arithmetic, whole arrays at once.

It follows the :class:`~benchgen.algorithm.Datapath` step for step as the RTL does: the same
quadrant fold, the same floor shifts, the same wrap-around at every register width, the same
rounding and saturation. For widths that fit int64 it runs on int64 arrays; wider cores run on
arrays of Python integers (exact, slower).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath

__all__ = ["SinCos", "round_drop", "sincos", "to_signed", "wrap"]

IntArray = npt.NDArray[Any]


def _dtype_for(width: int) -> type | np.dtype[Any]:
    # int64 is exact while every intermediate stays below 2**62 in magnitude.
    return np.dtype(np.int64) if width <= 60 else object


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


def _saturate(values: IntArray, limit: int) -> IntArray:
    out = values.copy()
    out[values > limit] = limit
    out[values < -limit] = -limit
    return out


class SinCos:
    """Outputs of a sine/cosine core for an array of angles.

    Attributes:
        cos: Signed cosine outputs (``data_width`` bits each).
        sin: Signed sine outputs.
    """

    __slots__ = ("cos", "sin")

    def __init__(self, cos: IntArray, sin: IntArray) -> None:
        self.cos = cos
        self.sin = sin


def sincos(dp: Datapath, angles: npt.ArrayLike) -> SinCos:
    """Predict the exact outputs of the sine/cosine core for binary angles.

    Args:
        dp: The core's data path.
        angles: Angle codes; any integers, taken modulo 2**angle_width.

    Returns:
        The signed cosine and sine outputs, int64 arrays (object arrays for wide cores).
    """
    n_bits = dp.angle_width
    widest = max(dp.xy_width, dp.z_width, n_bits) + 2
    raw = np.asarray(angles)
    if _dtype_for(widest) == object or raw.dtype == object:
        codes = np.array([int(a) % (1 << n_bits) for a in raw.ravel()], dtype=object).reshape(raw.shape)
        x, y = _rotate(dp, codes, object)
    else:
        codes = raw.astype(np.int64) & np.int64((1 << n_bits) - 1)
        flat = codes.ravel()
        x = np.empty_like(flat)
        y = np.empty_like(flat)
        # Blocks that fit the cache: the iterations make many passes over each block.
        for lo in range(0, flat.size, _BLOCK):
            x[lo : lo + _BLOCK], y[lo : lo + _BLOCK] = _rotate_int64(dp, flat[lo : lo + _BLOCK])
        x = x.reshape(codes.shape)
        y = y.reshape(codes.shape)
    out_w = dp.data_width + 1
    cos = _saturate(round_drop(x, dp.guard_bits, dp.rounding, out_w), dp.output_max)
    sin = _saturate(round_drop(y, dp.guard_bits, dp.rounding, out_w), dp.output_max)
    return SinCos(cos, sin)


_BLOCK = 1 << 14


def _fold(dp: Datapath, codes: IntArray) -> tuple[IntArray, IntArray]:
    """Quadrant fold: (z in internal turns, True where x starts negated).

    Angles in the left half-plane (top two bits 01 or 10) are turned by half a turn (flip the
    MSB) and start from -x instead; what is left is within +-1/4 turn, inside the +-99.88 degree
    convergence range (Walther 1971).
    """
    n_bits = dp.angle_width
    fold = (((codes >> (n_bits - 1)) ^ (codes >> (n_bits - 2))) & 1).astype(bool)
    folded = codes ^ (fold.astype(codes.dtype) << (n_bits - 1))
    z = to_signed(folded, n_bits) << (dp.z_width - n_bits)
    return z, fold


def _rotate(dp: Datapath, codes: IntArray, dtype: Any) -> tuple[IntArray, IntArray]:
    """The rotation iterations, wrapping at every register as the RTL does (any width)."""
    z, fold = _fold(dp, codes)
    x = np.full(codes.shape, dp.x_start, dtype=dtype)
    x[fold] = -dp.x_start
    y = np.zeros_like(x)
    last = dp.iterations - 1
    for i, step in enumerate(dp.atan_table):
        # z >= 0: turn counter-clockwise (x - y/2^i, y + x/2^i, z - atan 2^-i), else clockwise.
        sign = (z >= 0).astype(dtype) * 2 - 1
        xs = x >> i
        ys = y >> i
        x, y = wrap(x - sign * ys, dp.xy_width), wrap(y + sign * xs, dp.xy_width)
        if i != last:
            z = wrap(z - sign * step, dp.z_width)
    return x, y


def _rotate_int64(dp: Datapath, codes: IntArray) -> tuple[IntArray, IntArray]:
    """The same iterations on int64, without the per-register wrap.

    The wrap never acts for this data path, so leaving it out changes no bit: x and y start at
    K_n A 2^G and each iteration scales the vector by sqrt(1 + 2^-2i), so they end near A 2^G
    plus at most 2 per iteration of floor error, far inside the +-2^(B+G) of their
    B + G + 1 bits; z starts within +-1/4 turn and each step moves it toward zero by at most
    the larger of its value and atan 1 = 1/8 turn, inside +-1/2 turn. tests/test_model.py
    checks this path against :func:`_rotate` on randomised data paths.
    """
    z, fold = _fold(dp, codes)
    x = np.where(fold, np.int64(-dp.x_start), np.int64(dp.x_start))
    y = np.zeros_like(x)
    s = np.empty_like(x)
    ty = np.empty_like(x)
    tx = np.empty_like(x)
    last = dp.iterations - 1
    for i, step in enumerate(dp.atan_table):
        # s = -1 where z < 0, else 0; (v ^ s) - s negates v where s = -1, without a branch.
        np.right_shift(z, 63, out=s)
        np.right_shift(y, i, out=ty)
        np.bitwise_xor(ty, s, out=ty)
        np.subtract(ty, s, out=ty)
        np.right_shift(x, i, out=tx)
        np.bitwise_xor(tx, s, out=tx)
        np.subtract(tx, s, out=tx)
        np.subtract(x, ty, out=x)
        np.add(y, tx, out=y)
        if i != last:
            np.bitwise_xor(s, np.int64(step), out=ty)
            np.subtract(ty, s, out=ty)
            np.subtract(z, ty, out=z)
    return x, y
