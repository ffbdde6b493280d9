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
    dtype = _dtype_for(widest)
    raw = np.asarray(angles)
    if dtype == object or raw.dtype == object:
        codes = np.array([int(a) % (1 << n_bits) for a in raw.ravel()], dtype=object).reshape(raw.shape)
        dtype = object
    else:
        codes = raw.astype(np.int64) & np.int64((1 << n_bits) - 1)

    # Quadrant fold: angles in the left half-plane (top two bits 01 or 10) are turned by half a
    # turn (flip the MSB) and start from -x instead; the rest of the turn is then within the
    # +-99.88 degree convergence range (Walther 1971).
    top = (codes >> (n_bits - 1)) & 1
    nxt = (codes >> (n_bits - 2)) & 1
    fold = (top ^ nxt).astype(bool)
    folded = codes ^ (fold.astype(codes.dtype) << (n_bits - 1))
    z = to_signed(folded, n_bits) << (dp.z_width - n_bits)
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

    out_w = dp.data_width + 1
    cos = _saturate(round_drop(x, dp.guard_bits, dp.rounding, out_w), dp.output_max)
    sin = _saturate(round_drop(y, dp.guard_bits, dp.rounding, out_w), dp.output_max)
    return SinCos(cos, sin)
