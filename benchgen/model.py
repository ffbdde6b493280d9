"""Bit-true model of the generated cores: numpy integer arithmetic, whole arrays at once.

It follows the :class:`~benchgen.algorithm.Datapath` step for step as the RTL does: the same
quadrant fold, the same floor shifts, the same wrap-around at every register width, the same
rounding and saturation. For widths that fit int64 it runs on int64 arrays; wider cores run on
arrays of Python integers (exact, slower).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath

__all__ = [
    "INT64_MODEL_BITS",
    "SinCos",
    "atan2",
    "atanh",
    "atanh_domain",
    "div",
    "div_domain",
    "evaluate_function",
    "exp",
    "exp_reduce",
    "leading_zeros",
    "ln",
    "model_width",
    "mul",
    "prescale",
    "redundant_sign_bits",
    "rotate",
    "round_drop",
    "round_shift",
    "sincos",
    "sinhcosh",
    "sqrt",
    "to_signed",
    "wrap",
]

IntArray = npt.NDArray[Any]


INT64_MODEL_BITS = 60
"""Widest intermediate (bits) the model computes on int64; wider ones run on Python integers."""


def _dtype_for(width: int) -> type | np.dtype[Any]:
    # int64 is exact while every intermediate stays below 2**62 in magnitude.
    return np.dtype(np.int64) if width <= INT64_MODEL_BITS else object


def model_width(dp: Datapath) -> int:
    """Bits of the widest intermediate of a hyperbolic function's model (sets its dtype)."""
    b = dp.data_width
    f = dp.function
    if f == "exp":
        # t 1/ln2 (|t| < 2^(b-1), the constant < 2^(L+3)); the remainder and q ln 2 (< 2^(L+1)
        # times ln 2 at z's fraction bits); the iterations.
        return max(b + dp.int_bits + 4, dp.z_frac + dp.int_bits + 4, dp.xy_width + 2)
    if f == "ln":
        return max(dp.xy_width, dp.z_width + dp.int_bits) + 3
    if f == "sqrt":
        # The 1/A_n product is formed on Python integers where it is wider (see sqrt()).
        return max(dp.xy_width + dp.norm_max, dp.z_width) + 2
    return max(dp.xy_width, dp.z_width) + 2


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
    out_w = dp.out_width + 1
    cos = _saturate(round_drop(x, dp.guard_bits, dp.rounding, out_w), dp.output_max)
    sin = _saturate(round_drop(y, dp.guard_bits, dp.rounding, out_w), dp.output_max)
    return SinCos(cos, sin)


_BLOCK = 1 << 14


def _fold(dp: Datapath, codes: IntArray) -> tuple[IntArray, IntArray]:
    """Quadrant fold of an angle port value: (z at internal scale, True where the vector turns by pi).

    Turns: angles in the left half-plane (top two bits 01 or 10) are turned by half a turn (flip
    the MSB). Radians: angles beyond +-pi/2 move by -+pi (the port spans [-4, 4) rad, so what is
    left is within +-pi/2). Either way the rest is inside the +-99.88 degree convergence range
    (Walther 1971), and the vector starts negated instead.
    """
    n_bits = dp.angle_width
    if dp.radians:
        theta = to_signed(codes, n_bits) << (dp.z_frac - dp.angle_frac)
        half_pi = dp.pi_const >> 1
        over = theta > half_pi
        under = theta < -half_pi
        z = np.where(over, theta - dp.pi_const, np.where(under, theta + dp.pi_const, theta))
        return z, over | under
    fold = (((codes >> (n_bits - 1)) ^ (codes >> (n_bits - 2))) & 1).astype(bool)
    folded = codes ^ (fold.astype(codes.dtype) << (n_bits - 1))
    z = to_signed(folded, n_bits) << (dp.z_width - n_bits)
    return z, fold


def _rotate(dp: Datapath, codes: IntArray, dtype: Any) -> tuple[IntArray, IntArray]:
    """sincos: the rotation iterations, wrapping at every register as the RTL does (any width)."""
    z, fold = _fold(dp, codes)
    x = np.full(codes.shape, dp.x_start, dtype=dtype)
    x[fold] = -dp.x_start
    y = np.zeros_like(x)
    x, y, _ = iterate(dp, x, y, z, dtype)
    return x, y


def iterate(dp: Datapath, x: IntArray, y: IntArray, z: IntArray, dtype: Any) -> tuple[IntArray, IntArray, IntArray]:
    """Circular iterations in the data path's mode; int64 arrays take the fast path."""
    if dtype == object or x.dtype == object:
        return iterate_wrapping(dp, x, y, z, dtype)
    x = np.ascontiguousarray(x, dtype=np.int64).copy()
    y = np.ascontiguousarray(y, dtype=np.int64).copy()
    z = np.ascontiguousarray(z, dtype=np.int64).copy()
    for lo in range(0, x.size, _BLOCK):
        sl = slice(lo, lo + _BLOCK)
        _iterate_block(dp, x[sl], y[sl], z[sl])
    return wrap(x, dp.xy_width), wrap(y, dp.xy_width), wrap(z, dp.z_width)


def _iterate_block(dp: Datapath, x: IntArray, y: IntArray, z: IntArray) -> None:
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
    for i, (shift, step) in enumerate(zip(dp.shifts, dp.atan_table, strict=True)):
        # s = -1 where the turn is clockwise, else 0; (v ^ s) - s negates v where s = -1.
        if vectoring:
            np.right_shift(y, 63, out=s)
            np.invert(s, out=s)
        else:
            np.right_shift(z, 63, out=s)
        np.right_shift(y, shift, out=ty)
        np.bitwise_xor(ty, s, out=ty)
        np.subtract(ty, s, out=ty)
        np.right_shift(x, shift, out=tx)
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


def iterate_wrapping(dp: Datapath, x: IntArray, y: IntArray, z: IntArray, dtype: Any) -> tuple[IntArray, IntArray, IntArray]:
    """Circular iterations in the data path's mode, wrapping at every register width.

    Rotation mode turns counter-clockwise where z >= 0; vectoring mode where y < 0 (driving y
    to 0 with x > 0). Either way: x - d y/2^i, y + d x/2^i, z - d atan 2^-i (Walther 1971);
    in linear coordinates x stays and z steps by 2^-i; in hyperbolic coordinates x + d y/2^s,
    z - d atanh 2^-s, with the shift s of each iteration from ``dp.shifts``.
    The values the last iteration does not need (z in rotation, y in vectoring) are left as
    they were, as the RTL does not form them.
    """
    last = dp.iterations - 1
    vectoring = dp.mode == "vectoring"
    for i, (shift, step) in enumerate(zip(dp.shifts, dp.atan_table, strict=True)):
        turn = (y < 0) if vectoring else (z >= 0)
        sign = turn.astype(dtype) * 2 - 1
        xs = x >> shift
        ys = y >> shift
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


def prescale(dp: Datapath, values: IntArray) -> IntArray:
    """Input data at internal scale: times K_n with the guard bits (compensated), or shifted (raw).

    The product's dropped bits round half up, read from all of them, as the RTL does. A product
    too wide for int64 is formed on Python integers and the rounded value (x's width) comes
    back to int64.
    """
    if dp.gain_mode == "raw":
        return values << dp.guard_bits
    drop = dp.k_frac - dp.guard_bits
    wide = values.dtype != object and _product_bits(dp) > INT64_MODEL_BITS
    product = (values.astype(object) if wide else values) * dp.k_const
    scaled = (product >> drop) + ((product & ((1 << drop) - 1)) >= (1 << (drop - 1))).astype(product.dtype)
    return scaled.astype(np.int64) if wide else scaled


def _product_bits(dp: Datapath) -> int:
    """Bits of the prescale product (a data_width + 1 bit value times K_n at k_frac bits)."""
    return dp.data_width + 1 + dp.k_frac + 1 if dp.k_frac else 0


def _widest(dp: Datapath) -> int:
    """Bits the widest intermediate of the iterations needs: a register plus margin (the
    prescale product is formed on Python integers where it is wider)."""
    return max(dp.xy_width, dp.z_width, dp.angle_width) + 2


def _as_ints(values: npt.ArrayLike, width: int, dtype: Any) -> IntArray:
    raw = np.asarray(values)
    if dtype == object or raw.dtype == object:
        return np.array([int(v) for v in raw.ravel()], dtype=object).reshape(raw.shape)
    return raw.astype(np.int64)


def rotate(dp: Datapath, x_in: npt.ArrayLike, y_in: npt.ArrayLike, angles: npt.ArrayLike) -> dict[str, IntArray]:
    """Predict the rotate core: (x, y) turned by the angle, outputs ``out_x`` and ``out_y``."""
    dtype = _dtype_for(_widest(dp))
    b = dp.data_width
    x = to_signed(_as_ints(x_in, b, dtype), b)
    y = to_signed(_as_ints(y_in, b, dtype), b)
    codes = _as_ints(angles, dp.angle_width, dtype) & ((1 << dp.angle_width) - 1)
    z, fold = _fold(dp, codes)
    x = np.where(fold, -x, x)
    y = np.where(fold, -y, y)
    if dtype == object:
        x, y, z = x.astype(object), y.astype(object), z.astype(object)
    x, y, _ = iterate(dp, prescale(dp, x), prescale(dp, y), z, dtype)
    q_w = dp.out_width + 1
    return {
        "out_x": _saturate(round_drop(x, dp.guard_bits, dp.rounding, q_w), dp.out_max),
        "out_y": _saturate(round_drop(y, dp.guard_bits, dp.rounding, q_w), dp.out_max),
    }


def atan2(dp: Datapath, x_in: npt.ArrayLike, y_in: npt.ArrayLike) -> dict[str, IntArray]:
    """Predict the atan2 core: ``out_angle`` of the vector (x, y) and ``out_magnitude``.

    Prenormalised cores first shift x and y left together by their common redundant sign
    bits (:func:`redundant_sign_bits`), which leaves the angle as it is and puts the longer
    component in the top half of the format, so a short vector is resolved as finely as a long
    one; the magnitude is shifted back before its one rounding. A vector with x < 0 is then
    turned by half a turn (Walther 1971's pre-rotation by pi) and z starts at that half turn.
    The zero vector gives angle 0 and magnitude 0.
    """
    dtype = _dtype_for(_widest(dp))
    b = dp.data_width
    x = to_signed(_as_ints(x_in, b, dtype), b)
    y = to_signed(_as_ints(y_in, b, dtype), b)
    zero = (x == 0) & (y == 0)
    shift = None
    if dp.prenorm_max:
        shift = redundant_sign_bits((x, y), b)
        shift_t = shift.astype(x.dtype)
        x = x << shift_t
        y = y << shift_t
    neg = x < 0
    if dp.radians:
        turn = np.where(y >= 0, dp.pi_const, -dp.pi_const)
    else:
        turn = np.full(x.shape, -(1 << (dp.z_width - 1)))  # half a turn; z wraps at a whole turn
    z = np.where(neg, turn, 0).astype(dtype)
    xv = np.where(neg, -x, x)
    yv = np.where(neg, -y, y)
    x_n, _, z_n = iterate(dp, prescale(dp, xv), prescale(dp, yv), z, dtype)
    angle = round_drop(z_n, dp.z_frac - dp.angle_frac, dp.rounding, dp.angle_width)
    angle = np.where(zero, 0, angle)
    if shift is None:
        mag = round_drop(x_n, dp.guard_bits, dp.rounding, dp.out_width + 1)
    else:
        mag = round_shift(x_n, shift + dp.guard_bits, dp.rounding)
    mag = np.where(mag < 0, 0, np.where(mag > dp.out_max, dp.out_max, mag))
    return {"out_angle": angle, "out_magnitude": mag}


def mul(dp: Datapath, a_in: npt.ArrayLike, b_in: npt.ArrayLike) -> dict[str, IntArray]:
    """Predict the mul core: ``out_product`` = a * b, all fractions with data_width - 1 bits.

    Linear rotation (Walther 1971): x = a, y from 0, z from b; each step adds +-a 2^-i to y and
    takes +-2^-i from z, so y ends at a b within a 2^-(n-1).
    """
    dtype = _dtype_for(_widest(dp))
    b = dp.data_width
    g = dp.guard_bits
    a = to_signed(_as_ints(a_in, b, dtype), b)
    m = to_signed(_as_ints(b_in, b, dtype), b)
    x = a << g
    y = np.zeros_like(x)
    z = m << g
    _, y, _ = iterate(dp, x, y, z, dtype)
    q = round_drop(y, g, dp.rounding, dp.out_width + 1)
    return {"out_product": _saturate(q, dp.out_max)}


def div_domain(dp: Datapath, num: IntArray, den: IntArray) -> IntArray:
    """True where num / den is inside the linear vectoring range: den != 0 and |num| < 2 |den|."""
    return (den != 0) & (np.abs(num) < 2 * np.abs(den))


def div(dp: Datapath, num_in: npt.ArrayLike, den_in: npt.ArrayLike) -> dict[str, IntArray]:
    """Predict the div core: ``out_quotient`` = num / den (data_width - 2 fraction bits) and
    ``out_domain_error``, set (with a zero quotient) where the quotient is out of range.

    Range extension: num and den are first shifted left together by den's redundant sign bits
    (:func:`redundant_sign_bits`), which leaves the quotient as it is and brings |den| into
    [1/2, 1], so a small denominator is divided as finely as a large one. Then linear
    vectoring (Walther 1971): x = |den|, y from num (negated with den), z from 0; y is driven
    to 0 and z collects num / den.
    """
    dtype = _dtype_for(_widest(dp))
    b = dp.data_width
    g = dp.guard_bits
    num = to_signed(_as_ints(num_in, b, dtype), b)
    den = to_signed(_as_ints(den_in, b, dtype), b)
    ok = div_domain(dp, num, den)
    shift = redundant_sign_bits((den,), b).astype(den.dtype)
    # In the domain |num| < 2 |den|, so the shifted num fits b + 1 bits; outside it the
    # register wraps (the quotient is flagged and forced to 0 there).
    num = wrap(num << shift, b + 1)
    den = den << shift
    neg = den < 0
    x = np.where(neg, -den, den) << g
    y = wrap(np.where(neg, -num, num), b + 1) << g
    z = np.zeros_like(x)
    _, _, z = iterate(dp, x, y, z, dtype)
    q = _saturate(round_drop(z, g, dp.rounding, dp.data_width + 1), dp.out_max)
    return {"out_quotient": np.where(ok, q, 0), "out_domain_error": (~ok).astype(q.dtype)}


def _unsigned(values: npt.ArrayLike, width: int, dtype: Any) -> IntArray:
    return _as_ints(values, width, dtype) & ((1 << width) - 1)


def sinhcosh(dp: Datapath, t_in: npt.ArrayLike) -> dict[str, IntArray]:
    """Predict the sinhcosh core: ``out_cosh``, ``out_sinh`` of t (hyperbolic rotation from
    (1/A_n, 0, t), Walther 1971; from (1, 0, t) with the gain left in when raw)."""
    dtype = _dtype_for(model_width(dp))
    b = dp.data_width
    t = to_signed(_as_ints(t_in, b, dtype), b)
    z = t << (dp.z_frac - dp.in_frac)
    x = np.full(t.shape, dp.x_start, dtype=z.dtype)
    y = np.zeros_like(x)
    x, y, _ = iterate(dp, x, y, z, dtype)
    q_w = dp.out_width + 1
    return {
        "out_cosh": _saturate(round_drop(x, dp.guard_bits, dp.rounding, q_w), dp.out_max),
        "out_sinh": _saturate(round_drop(y, dp.guard_bits, dp.rounding, q_w), dp.out_max),
    }


def exp_reduce(dp: Datapath, t: IntArray) -> tuple[IntArray, IntArray]:
    """t = q ln 2 + r with 0 <= r < ln 2: (q, r at ``z_frac`` fraction bits), as the RTL does.

    q starts as t 1/ln2 from a constant multiply (1/ln 2 at L + 2 fraction bits, within 1/8 of
    t / ln 2 over the whole input format), rounded half up: floor(t / ln 2) or one above, never
    below. Where the remainder t - q ln 2 is negative, q was one above: q - 1, remainder + ln 2.
    """
    prod = t * dp.inv_ln2
    drop = dp.inv_ln2_shift
    q = (prod >> drop) + ((prod & ((1 << drop) - 1)) >= (1 << (drop - 1))).astype(prod.dtype)
    rem = (t << (dp.z_frac - dp.in_frac)) - q * dp.ln2_const
    neg = rem < 0
    q = q - neg.astype(q.dtype)
    rem = rem + neg.astype(rem.dtype) * dp.ln2_const  # Python-int constant: exact on object arrays
    return q, rem


def exp(dp: Datapath, t_in: npt.ArrayLike) -> dict[str, IntArray]:
    """Predict the exp core: e^t = ``out_mantissa`` 2^``out_exponent``, the mantissa in [1, 2).

    Range extension (Walther 1971): t = q ln 2 + r; e^r from hyperbolic rotation of
    (1/A_n, 1/A_n, r) (x = y all the way); the exponent is q, or q + 1 where e^r rounds up
    to 2.0 (the mantissa is then 1.0).
    """
    b = dp.data_width
    dtype = _dtype_for(model_width(dp))
    t = to_signed(_as_ints(t_in, b, dtype), b)
    q, r = exp_reduce(dp, t)
    x = np.full(t.shape, dp.x_start, dtype=r.dtype)
    y = x.copy()
    x, _, _ = iterate(dp, x, y, r, dtype)
    m = round_drop(x, dp.guard_bits, dp.rounding, dp.xy_width - dp.guard_bits)
    # e^r just below 2 can round up to 2.0: that is mantissa 1.0 at the next exponent.
    carry = m > dp.out_max
    m = np.where(m < 0, 0, np.where(carry, 1 << (b - 1), m))
    return {"out_mantissa": m, "out_exponent": q + carry.astype(q.dtype)}


def atanh_domain(dp: Datapath, u: IntArray) -> IntArray:
    """True where |u| <= tanh(1.1182) (the hyperbolic vectoring range), as the core decides it."""
    return np.abs(u) <= dp.domain_limit


def atanh(dp: Datapath, u_in: npt.ArrayLike) -> dict[str, IntArray]:
    """Predict the atanh core: ``out_atanh`` from hyperbolic vectoring of (1, u, 0) and
    ``out_domain_error`` (with a zero result) where |u| is beyond the range."""
    dtype = _dtype_for(model_width(dp))
    b = dp.data_width
    u = to_signed(_as_ints(u_in, b, dtype), b)
    ok = atanh_domain(dp, u)
    x = np.full(u.shape, dp.x_start, dtype=u.dtype)
    y = u << dp.guard_bits
    z = np.zeros_like(x)
    _, _, z = iterate(dp, x, y, z, dtype)
    q = _saturate(round_drop(z, dp.z_frac - dp.out_frac, dp.rounding, dp.out_width + 1), dp.out_max)
    return {"out_atanh": np.where(ok, q, 0), "out_domain_error": (~ok).astype(q.dtype)}


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


def ln(dp: Datapath, w_in: npt.ArrayLike) -> dict[str, IntArray]:
    """Predict the ln core: ``out_ln`` and ``out_domain_error`` (w = 0, with a zero result).

    w = m 2^-e with m in [1/2, 1); ln w = 2 atanh((m - 1)/(m + 1)) - e ln 2, the atanh from
    hyperbolic vectoring of (m + 1, m - 1, 0) (Walther 1971).
    """
    b = dp.data_width
    dtype = _dtype_for(model_width(dp))
    w = _unsigned(w_in, b, dtype)
    e = leading_zeros(w, b)
    m = (w << e.astype(w.dtype)) & ((1 << b) - 1)
    one = 1 << b
    x = (m + one) << dp.guard_bits
    y = (m - one) << dp.guard_bits
    z = np.zeros_like(x)
    _, _, z = iterate(dp, x, y, z, dtype)
    table = np.array(dp.ln2_table, dtype=z.dtype)
    res = (z << 1) - table[e]
    q = _saturate(round_drop(res, dp.z_frac - dp.out_frac, dp.rounding, dp.out_width + 1), dp.out_max)
    bad = w == 0
    return {"out_ln": np.where(bad, 0, q), "out_domain_error": bad.astype(q.dtype)}


def sqrt(dp: Datapath, w_in: npt.ArrayLike) -> dict[str, IntArray]:
    """Predict the sqrt core: ``out_sqrt`` of w in [0, 1).

    w = m 2^-2k with m in [1/4, 1); sqrt w = sqrt(m) 2^-k, sqrt(m) from hyperbolic vectoring of
    (m + 1/4, m - 1/4) (Walther 1971), scaled by 1/A_n on the way in when compensated.
    """
    b = dp.data_width
    g = dp.guard_bits
    dtype = _dtype_for(model_width(dp))
    w = _unsigned(w_in, b, dtype)
    e = leading_zeros(w, b)
    half = e >> 1
    m = w << (half << 1).astype(w.dtype)
    if dp.k_frac:
        drop = dp.k_frac - g
        # The product m 1/A_n needs b + k_frac + 1 bits: past int64 it is formed on Python
        # integers, and the rounded value (x's width) comes back to the iterations' dtype.
        wide = b + dp.k_frac + 2 > INT64_MODEL_BITS and m.dtype != object
        prod = (m.astype(object) if wide else m) * dp.k_const
        p = (prod >> drop) + ((prod & ((1 << drop) - 1)) >= (1 << (drop - 1))).astype(prod.dtype)
        p = p.astype(m.dtype)
    else:
        p = m << g
    x = p + dp.quarter
    y = p - dp.quarter
    z = np.zeros_like(x)
    x, _, _ = iterate(dp, x, y, z, dtype)
    wide = (x << dp.norm_max) >> half.astype(x.dtype)
    q = round_drop(wide, g + dp.norm_max, dp.rounding, dp.xy_width - g)
    q = np.where(q < 0, 0, np.where(q > dp.out_max, dp.out_max, q))
    return {"out_sqrt": np.where(w == 0, 0, q)}


_HYPERBOLIC_MODELS = {
    "sinhcosh": ("in_t", sinhcosh),
    "exp": ("in_t", exp),
    "atanh": ("in_u", atanh),
    "ln": ("in_w", ln),
    "sqrt": ("in_w", sqrt),
}


def evaluate_function(dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> dict[str, IntArray]:
    """The model's outputs for the data path's function, by output port name."""
    if dp.function in _HYPERBOLIC_MODELS:
        port, model = _HYPERBOLIC_MODELS[dp.function]
        return model(dp, inputs[port])
    if dp.function == "mul":
        return mul(dp, inputs["in_a"], inputs["in_b"])
    if dp.function == "div":
        return div(dp, inputs["in_num"], inputs["in_den"])
    if dp.function == "sincos":
        out = sincos(dp, inputs["in_angle"])
        return {"out_cos": out.cos, "out_sin": out.sin}
    if dp.function == "rotate":
        return rotate(dp, inputs["in_x"], inputs["in_y"], inputs["in_angle"])
    return atan2(dp, inputs["in_x"], inputs["in_y"])


def _rotate_int64(dp: Datapath, codes: IntArray) -> tuple[IntArray, IntArray]:
    """sincos on int64: the fold, then the in-place iterations of :func:`_iterate_block`."""
    z, fold = _fold(dp, codes)
    x = np.where(fold, np.int64(-dp.x_start), np.int64(dp.x_start))
    y = np.zeros_like(x)
    _iterate_block(dp, x, y, z)
    return x, y
