"""What each function's core looks like from outside: ports, stimulus, ideal values, errors.

The arithmetic lives in :mod:`benchgen.algorithm` and :mod:`benchgen.model`; this module says
which ports a function has, which inputs exercise it (corners, random, the sizing set), what
the exact answer is (mpmath/numpy) and how far an output may be from it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath
from benchgen.model import (
    INT64_MODEL_BITS,
    atanh_domain,
    div_domain,
    evaluate_function,
    model_width,
    to_signed,
)
from benchgen.reference import (
    FLOAT64_MAX_DATA_WIDTH,
    ErrorStats,
    error_stats,
    errors_lsb,
    ideal_sincos,
)

__all__ = [
    "EXHAUSTIVE_LIMIT_BITS",
    "Port",
    "bench_corners",
    "corner_inputs",
    "directed_inputs",
    "enumerate_inputs",
    "input_space_bits",
    "join_inputs",
    "int64_model",
    "function_errors",
    "ideal_outputs",
    "input_ports",
    "output_ports",
    "random_inputs",
    "sizing_inputs",
    "small_vector_limit",
]

# Every input is checked when the input space has at most 2**24 codes and the model runs on
# int64 (a few seconds a pass, in chunks), or at most 2**20 codes on any model.
EXHAUSTIVE_LIMIT_BITS = 24
EXHAUSTIVE_SLOW_MODEL_BITS = 20
WIDE_DATA_BITS = 40
RANDOM_SIZING_SAMPLES = 1_000_000
WIDE_SIZING_SAMPLES = 4096
_SIZING_SEED = 20261202

Inputs = dict[str, npt.NDArray[Any]]


@dataclass(frozen=True)
class Port:
    """A data port of a core (the handshake, clock, reset and tag ports are implied).

    Attributes:
        name: Port name.
        width: Bits.
        signed: Read as two's complement.
        doc: Its format, for headers and manifests.
    """

    name: str
    width: int
    signed: bool
    doc: str


def _angle_doc(dp: Datapath) -> str:
    if dp.radians:
        return f"radians, signed fixed point, {dp.angle_width} bits with {dp.angle_frac} fraction bits, [-4, 4) rad"
    return f"binary angle, {dp.angle_width} bits, 2^{dp.angle_width} codes per turn"


def _fixed_doc(width: int, frac: int, signed: bool) -> str:
    kind = "two's complement" if signed else "unsigned"
    lo = -(2.0 ** (width - 1 - frac)) if signed else 0.0
    hi = 2.0 ** (width - 1 - frac) if signed else 2.0 ** (width - frac)
    return f"{kind} fixed point, {width} bits with {frac} fraction bits, [{lo:g}, {hi:g})"


def _hyperbolic_inputs(dp: Datapath) -> tuple[Port, ...]:
    b = dp.data_width
    if dp.function in ("sinhcosh", "exp"):
        return (Port("in_t", b, True, _fixed_doc(b, dp.in_frac, True)),)
    if dp.function == "atanh":
        return (Port("in_u", b, True, _fixed_doc(b, dp.in_frac, True)),)
    return (Port("in_w", b, False, _fixed_doc(b, dp.in_frac, False)),)


def _hyperbolic_outputs(dp: Datapath) -> tuple[Port, ...]:
    b = dp.data_width
    raw = dp.gain_mode == "raw"
    scaled = f"; raw gain: times A_n = 1/{dp.gain[:10]}" if raw else ""
    if dp.function == "sinhcosh":
        doc = _fixed_doc(b, dp.out_frac, True) + scaled
        return (Port("out_cosh", b, True, doc), Port("out_sinh", b, True, doc))
    if dp.function == "exp":
        return (
            Port("out_mantissa", b, False, _fixed_doc(b, dp.out_frac, False) + ", in [1, 2)" + scaled),
            Port("out_exponent", dp.exp_width, True, f"two's complement integer, {dp.exp_width} bits: e^t = mantissa 2^exponent"),
        )
    if dp.function == "atanh":
        return (
            Port("out_atanh", b, True, _fixed_doc(b, dp.out_frac, True) + "; 0 when flagged"),
            Port("out_domain_error", 1, False, f"1 when |u| > {dp.domain_limit} / 2^{dp.in_frac} (beyond tanh 1.1182, the hyperbolic range)"),
        )
    if dp.function == "ln":
        return (
            Port("out_ln", b, True, _fixed_doc(b, dp.out_frac, True) + "; 0 when flagged"),
            Port("out_domain_error", 1, False, "1 when w = 0"),
        )
    return (Port("out_sqrt", b, False, _fixed_doc(b, dp.out_frac, False) + scaled),)


def input_ports(dp: Datapath) -> tuple[Port, ...]:
    """Data inputs, in port order."""
    if dp.coordinates == "hyperbolic":
        return _hyperbolic_inputs(dp)
    b = dp.data_width
    data = f"two's complement, {b} bits"
    frac = f"two's complement fraction, {b} bits with {b - 1} fraction bits, [-1, 1)"
    if dp.function == "mul":
        return (Port("in_a", b, True, frac), Port("in_b", b, True, frac))
    if dp.function == "div":
        return (Port("in_num", b, True, frac), Port("in_den", b, True, frac))
    if dp.function == "sincos":
        return (Port("in_angle", dp.angle_width, dp.radians, _angle_doc(dp)),)
    if dp.function == "rotate":
        return (
            Port("in_x", b, True, data),
            Port("in_y", b, True, data),
            Port("in_angle", dp.angle_width, dp.radians, _angle_doc(dp)),
        )
    return (Port("in_x", b, True, data), Port("in_y", b, True, data))


def output_ports(dp: Datapath) -> tuple[Port, ...]:
    """Data outputs, in port order."""
    if dp.coordinates == "hyperbolic":
        return _hyperbolic_outputs(dp)
    b = dp.data_width
    if dp.function == "mul":
        return (Port("out_product", dp.out_width, True, f"two's complement, {dp.out_width} bits with {b - 1} fraction bits"),)
    if dp.function == "div":
        return (
            Port("out_quotient", b, True, f"two's complement, {b} bits with {b - 2} fraction bits, [-2, 2); 0 when flagged"),
            Port("out_domain_error", 1, False, "1 when den = 0 or |num / den| >= 2 (outside the linear range)"),
        )
    if dp.function == "sincos":
        doc = f"two's complement, {dp.out_width} bits, amplitude {dp.amplitude}"
        if dp.gain_mode == "raw":
            doc += f" times 1/K = 1/{dp.gain[:10]} (raw gain)"
        return (Port("out_cos", dp.out_width, True, doc), Port("out_sin", dp.out_width, True, doc))
    if dp.function == "rotate":
        scale = "input scale" if dp.gain_mode == "compensated" else f"input scale times 1/K = 1/{dp.gain[:10]}"
        doc = f"two's complement, {dp.out_width} bits, {scale}"
        return (Port("out_x", dp.out_width, True, doc), Port("out_y", dp.out_width, True, doc))
    scale = "input scale" if dp.gain_mode == "compensated" else f"input scale times 1/K = 1/{dp.gain[:10]}"
    return (
        Port("out_angle", dp.angle_width, True, _angle_doc(dp) + (" (wraps)" if not dp.radians else "")),
        Port("out_magnitude", dp.out_width, False, f"unsigned, {dp.out_width} bits, {scale}"),
    )


def small_vector_limit(dp: Datapath) -> int:
    """atan2: the angle budget holds for vectors at least this long.

    1 (every vector but the zero vector) for a prenormalised core; 1/16 of full scale for one
    built with ``prenormalise = false``, whose short vectors carry too few significant bits
    for a fine angle (see docs/error_analysis.md).
    """
    if dp.prenorm_max:
        return 1
    return 1 << max(0, dp.data_width - 5)


def _uniform(rng: np.random.Generator, width: int, count: int, signed: bool) -> npt.NDArray[Any]:
    if width <= 62:
        vals = rng.integers(0, 1 << width, size=count, dtype=np.int64)
        return to_signed(vals, width) if signed else vals
    hi = rng.integers(0, 1 << 62, size=count, dtype=np.int64)
    lo = rng.integers(0, 1 << (width - 62), size=count, dtype=np.int64)
    vals = np.array([(int(h) << (width - 62)) | int(v) for h, v in zip(hi, lo, strict=True)], dtype=object)
    return to_signed(vals, width) if signed else vals


def _angle_corners(width: int, radians: bool, frac: int) -> list[int]:
    full = 1 << width
    codes: set[int] = set()
    if radians:
        for num, den in ((0, 1), (1, 2), (-1, 2), (1, 1), (-1, 1), (1, 4), (-1, 4)):
            v = int(mpmath.nint(mpmath.pi * num / den * 2**frac))
            codes.update({v - 1, v, v + 1})
        codes.update({-(full // 2), full // 2 - 1})  # the ends of [-4, 4)
        return sorted(c for c in codes if -(full // 2) <= c < full // 2)
    for k in range(8):
        edge = k * full // 8
        codes.update({(edge - 1) % full, edge % full, (edge + 1) % full})
    codes.add(full // 2)  # the most negative code, read as signed: -1/2 turn
    codes.add(full - 1)
    return sorted(to_signed(np.array([c], dtype=object), width)[0] if width > 62 else c for c in codes)


def _hyperbolic_corners(dp: Datapath) -> list[int]:
    b = dp.data_width
    top = (1 << (b - 1)) - 1
    lo = -(1 << (b - 1))
    codes: set[int] = set()
    if dp.function == "ln" or dp.function == "sqrt":
        # Zero, every power of two and one code either side (each normalising shift), the top.
        for k in range(b):
            codes.update({(1 << k) - 1, 1 << k, (1 << k) + 1})
        codes.update({0, (1 << b) - 1, (1 << b) - 2})
        return sorted(c for c in codes if 0 <= c < (1 << b))
    codes.update({0, 1, -1, top, lo, top - 1, lo + 1, 1 << (b - 2), -(1 << (b - 2))})
    if dp.function == "atanh":
        for v in (dp.domain_limit, -dp.domain_limit):
            codes.update({v - 1, v, v + 1})
    if dp.function == "exp":
        # Multiples of ln 2 (where the exponent steps) and a code either side.
        scale = mpmath.mpf(2) ** dp.in_frac
        q = 0
        while True:
            v = int(mpmath.nint(q * mpmath.log(2) * scale))
            if v > top:
                break
            codes.update({v - 1, v, v + 1, -v - 1, -v, -v + 1})
            q += 1
    return sorted(c for c in codes if lo <= c <= top)


def corner_inputs(dp: Datapath) -> Inputs:
    """Boundary inputs: angle quadrant and octant edges and one code either side, the most
    negative codes, full-scale and zero vectors, axes and diagonals; for the hyperbolic
    functions the format ends, the domain edges, the normalising shifts and the ln 2 steps."""
    dtype: Any = np.int64 if max(dp.angle_width, dp.data_width) <= 62 else object
    if dp.coordinates == "hyperbolic":
        return {input_ports(dp)[0].name: np.array(_hyperbolic_corners(dp), dtype=dtype)}
    angles = _angle_corners(dp.angle_width, dp.radians, dp.angle_frac)
    if dp.function == "sincos":
        return {"in_angle": np.array(angles, dtype=dtype)}
    m = (1 << (dp.data_width - 1)) - 1
    if dp.function in ("mul", "div"):
        lo_ = -(1 << (dp.data_width - 1))
        h = 1 << (dp.data_width - 2)
        values = [0, 1, -1, m, lo_, h, -h, h + 1, h - 1, 2, -2]
        pairs = [(p, q) for p in values for q in values]
        first, second = zip(*pairs, strict=True)
        names = [p.name for p in input_ports(dp)]
        return {names[0]: np.array(first, dtype=dtype), names[1]: np.array(second, dtype=dtype)}
    lo = -(1 << (dp.data_width - 1))
    vectors = [(m, 0), (0, m), (-m, 0), (0, -m), (m, m), (-m, m), (m, -m), (-m, -m), (lo, lo), (lo, 0), (0, lo),
               (lo, m), (m, lo), (1, 0), (0, 1), (-1, 0), (0, -1), (1, 1), (-1, -1), (-1, 1), (1, -1),
               (lo, -1), (lo, 1), (0, 0), (m, 1), (m, -1)]
    if dp.function == "atan2":
        xs, ys = zip(*vectors, strict=True)
        return {"in_x": np.array(xs, dtype=dtype), "in_y": np.array(ys, dtype=dtype)}
    xs, ys, zs = [], [], []
    for k, a in enumerate(angles):
        for vx, vy in (vectors[k % len(vectors)], (m, m), (lo, lo)):
            xs.append(vx)
            ys.append(vy)
            zs.append(a)
    return {"in_x": np.array(xs, dtype=dtype), "in_y": np.array(ys, dtype=dtype), "in_angle": np.array(zs, dtype=dtype)}


def _pack(columns: dict[str, list[int]], widths: dict[str, int]) -> Inputs:
    dtype: Any = np.int64 if max(widths.values()) <= 62 else object
    return {k: np.array(v, dtype=dtype) for k, v in columns.items()}


def _below(rng: np.random.Generator, bound: int) -> int:
    """A uniform integer in [0, bound) for any bound (Python integers past int64)."""
    if bound <= 1:
        return 0
    if bound < 1 << 62:
        return int(rng.integers(0, bound))
    return int(rng.integers(0, 1 << 62)) * bound >> 62


def _octave(rng: np.random.Generator, bits: int) -> int:
    """A random magnitude of exactly ``bits`` bits (1 has one bit)."""
    return (1 << (bits - 1)) + _below(rng, 1 << (bits - 1))


def _signed_octaves(rng: np.random.Generator, width: int, per: int) -> list[int]:
    """``per`` random values of each magnitude octave of a signed ``width``-bit port, both signs."""
    out: list[int] = []
    for bits in range(1, width):
        for _ in range(per):
            v = _octave(rng, bits)
            out.append(-v if rng.integers(0, 2) else v)
    return out


def directed_inputs(dp: Datapath, *, seed: int, per_octave: int = 64) -> Inputs:
    """Inputs aimed at each function's worst regions, which uniform random samples rarely hit.

    Short vectors and small denominators at every octave of their length (where the error of
    an unnormalised core grows), the axes and diagonals, quotients near the edge of the range,
    every normalising shift of ln and sqrt (each power of two and its neighbours), every
    exponent step of exp (multiples of ln 2), the atanh domain edge, the angle octants. The
    sizer adds these to its random set; a test draws a larger set with another seed.

    Args:
        dp: The data path.
        seed: Seed of the random parts.
        per_octave: Random inputs drawn per octave of magnitude.
    """
    rng = np.random.default_rng(seed)
    b = dp.data_width
    top = (1 << (b - 1)) - 1
    lo = -(1 << (b - 1))
    f = dp.function
    names = [p.name for p in input_ports(dp)]
    widths = {p.name: p.width for p in input_ports(dp)}
    cols: dict[str, list[int]] = {n: [] for n in names}

    def add(*values: int) -> None:
        for n, v in zip(names, values, strict=True):
            cols[n].append(v)

    def angle_near_octants() -> list[int]:
        a = dp.angle_width
        full = 1 << a
        out = []
        for k in range(16):
            edge = k * full // 16
            for j in range(-8, 9):
                v = (edge + j) % full
                out.append(v - full if dp.radians and v >= full // 2 else v)
        if dp.radians:
            out = [v for v in out if -(full // 2) <= v < full // 2]
        return out

    def random_angle() -> int:
        v = _below(rng, 1 << dp.angle_width)
        return v - (1 << dp.angle_width) if dp.radians and v >= 1 << (dp.angle_width - 1) else v

    if f == "sincos":
        for v in angle_near_octants():
            add(v)
        for bits in range(1, dp.angle_width):  # small angles of either sign
            for _ in range(per_octave):
                v = _octave(rng, bits)
                add(v)
                add(-v if dp.radians else (1 << dp.angle_width) - v)
    elif f in ("atan2", "rotate"):
        vectors: list[tuple[int, int]] = []
        small = min(8, top)
        vectors += [(x, y) for x in range(-small, small + 1) for y in range(-small, small + 1)]
        for bits in range(1, b):
            for _ in range(per_octave):
                big = _octave(rng, bits)
                other = _below(rng, big + 1)
                x, y = (big, other) if rng.integers(0, 2) else (other, big)
                x = -x if rng.integers(0, 2) else x
                y = -y if rng.integers(0, 2) else y
                vectors.append((max(x, lo), max(y, lo)))
            v = _octave(rng, bits)
            for sx, sy in ((1, 1), (1, -1), (-1, 1), (-1, -1)):  # diagonals
                vectors.append((sx * v, sy * v))
            for j in range(-3, 4):  # near the axes
                vectors += [(v, j), (-v, j), (j, v), (j, -v)]
        vectors += [(lo, lo), (lo, 0), (0, lo), (lo, top), (top, lo), (top, top), (lo, -1), (-1, lo)]
        if f == "atan2":
            for x, y in vectors:
                add(x, y)
        else:
            angles = angle_near_octants()
            for k, (x, y) in enumerate(vectors):
                add(x, y, angles[k % len(angles)])
                add(x, y, random_angle())
    elif f == "mul":
        values = [0, 1, -1, top, lo, top - 1, lo + 1] + _signed_octaves(rng, b, max(1, per_octave // 8))
        for a in values:
            add(a, values[_below(rng, len(values))])
            add(a, lo)
            add(a, top)
    elif f == "div":
        small = min(16, top)
        for den in range(-small, small + 1):
            if den == 0:
                continue
            for num in range(-2 * abs(den) + 1, 2 * abs(den)):
                if lo <= num <= top:
                    add(num, den)
        for bits in range(1, b):
            for _ in range(per_octave):
                mag = _octave(rng, bits)
                den = -mag if rng.integers(0, 2) else mag
                span = min(2 * mag - 1, top)
                num = _below(rng, 2 * span + 1) - span
                add(max(num, lo), den)
            mag = _octave(rng, bits)
            for j in range(1, 5):  # quotients near +-2 and +-1
                for num in (2 * mag - j, -(2 * mag - j), mag - j + 2, -(mag - j + 2)):
                    if lo <= num <= top:
                        add(num, mag)
                        add(num, -mag)
        for num in (lo, lo + 1, top, -top, 1, -1, 0):
            add(num, lo)
    elif f in ("ln", "sqrt"):
        for k in range(b):
            for j in range(-16, 17):
                v = (1 << k) + j
                if 0 <= v < 1 << b:
                    add(v)
        for bits in range(1, b + 1):
            for _ in range(per_octave):
                add(_octave(rng, bits))
    else:  # sinhcosh, exp, atanh: signed inputs
        for v in _signed_octaves(rng, b, per_octave):
            add(v)
        for j in range(64):
            add(top - j)
            add(lo + j)
        if f == "atanh":
            for j in range(-64, 65):
                for v in (dp.domain_limit + j, -dp.domain_limit + j):
                    if lo <= v <= top:
                        add(v)
        if f == "exp":
            with mpmath.workdps(_IDEAL_DPS):
                scale = mpmath.mpf(2) ** dp.in_frac
                step = mpmath.log(2) * scale
                q = 0
                while q * step <= top + 8:
                    centre = int(mpmath.nint(q * step))
                    for j in range(-8, 9):
                        for v in (centre + j, -centre + j):
                            if lo <= v <= top:
                                add(v)
                    q += 1
    return _pack(cols, widths)


def random_inputs(dp: Datapath, rng: np.random.Generator, count: int) -> Inputs:
    """Uniform random codes on every input port."""
    return {p.name: _uniform(rng, p.width, count, p.signed) for p in input_ports(dp)}


def int64_model(dp: Datapath) -> bool:
    """Whether the bit-true model of ``dp`` runs on int64 (else on Python integers, ~100x slower)."""
    if dp.data_width > WIDE_DATA_BITS or dp.angle_width > 56:
        return False
    if dp.coordinates == "hyperbolic":
        return model_width(dp) <= INT64_MODEL_BITS
    product = dp.data_width + 2 + dp.k_frac if dp.k_frac else 0
    return product <= 58


def input_space_bits(dp: Datapath) -> int:
    """log2 of the number of input codes: the sum of the data input widths."""
    return sum(p.width for p in input_ports(dp))


def enumerate_inputs(dp: Datapath, start: int, stop: int) -> Inputs:
    """The inputs with flat index ``start`` to ``stop - 1`` of the whole input space.

    The flat index is the concatenation of the port codes, the first port most significant;
    signed ports are given as signed values.
    """
    ports = input_ports(dp)
    index = np.arange(start, stop, dtype=np.int64)
    shift = sum(p.width for p in ports)
    out: Inputs = {}
    for p in ports:
        shift -= p.width
        codes = (index >> shift) & ((1 << p.width) - 1)
        out[p.name] = to_signed(codes, p.width) if p.signed else codes
    return out


def sizing_inputs(dp: Datapath, *, cheapest: Datapath | None = None) -> tuple[Inputs, bool]:
    """A set of inputs to measure a design on, and whether it is the whole input space.

    The whole space when it has at most 2**20 points (:func:`enumerate_inputs`); otherwise
    10**6 seeded random inputs (4096 where the model runs on Python integers) after the corners
    and the directed worst cases (:func:`directed_inputs`). The sizer itself goes further:
    it checks every input of spaces up to 2**24 codes in chunks (benchgen.design).

    Args:
        dp: The data path (its ports and formats shape the inputs).
        cheapest: The same core at zero guard bits, if the caller has it: the set is large
            when the model runs on int64 there, as it does for the sizes the sizer settles on
            (a candidate with more guard bits may run on Python integers, slower but exact).
    """
    total_bits = input_space_bits(dp)
    if total_bits <= EXHAUSTIVE_SLOW_MODEL_BITS:
        return enumerate_inputs(dp, 0, 1 << total_bits), True
    # Deciding at zero guard bits, not at the most the sizer tries: a 24-bit sqrt judged at 16
    # guard bits was sized on 4096 samples and missed 1.25 LSB errors at 1.5e-4 of its inputs.
    fast = int64_model(cheapest if cheapest is not None else dp)
    count = RANDOM_SIZING_SAMPLES if fast else WIDE_SIZING_SAMPLES
    rng = np.random.default_rng(_SIZING_SEED)
    fixed = join_inputs(corner_inputs(dp), directed_inputs(dp, seed=_SIZING_SEED))
    return join_inputs(fixed, random_inputs(dp, rng, count)), False


BENCH_DIRECTED_SEED = 1241
BENCH_DIRECTED_PER_OCTAVE = 8


def bench_corners(dp: Datapath) -> Inputs:
    """What a bench's corner test sends: the corners, then a small directed worst-case set
    (:func:`directed_inputs`, a seed of its own and 8 random inputs per octave), so the RTL is
    checked where each function is worst, not only where the model was sized."""
    return join_inputs(
        corner_inputs(dp), directed_inputs(dp, seed=BENCH_DIRECTED_SEED, per_octave=BENCH_DIRECTED_PER_OCTAVE)
    )


def join_inputs(*parts: Inputs) -> Inputs:
    """Input sets one after the other (same ports)."""
    names = list(parts[0])
    dtype: Any = object if any(np.asarray(p[n]).dtype == object for p in parts for n in names) else np.int64
    return {n: np.concatenate([np.asarray(p[n]).astype(dtype) for p in parts]) for n in names}


def _ideal_linear(dp: Datapath, inputs: Inputs) -> dict[str, npt.NDArray[Any]]:
    b = dp.data_width
    if dp.function == "mul":
        a = np.asarray(inputs["in_a"], dtype=np.float64)
        m = np.asarray(inputs["in_b"], dtype=np.float64)
        return {"out_product": a * m / 2.0 ** (b - 1)}
    num = np.asarray(inputs["in_num"], dtype=np.float64)
    den = np.asarray(inputs["in_den"], dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        return {"out_quotient": np.where(den != 0, num / np.where(den != 0, den, 1.0), 0.0) * 2.0 ** (b - 2)}


def _hyperbolic_values(dp: Datapath, inputs: Inputs) -> tuple[list[Any] | npt.NDArray[np.float64], bool]:
    """The input port's real values: float64, or mpmath numbers past float64's precision."""
    port = input_ports(dp)[0]
    raw = np.asarray(inputs[port.name])
    wide = dp.data_width > FLOAT64_MAX_DATA_WIDTH
    if wide:
        scale = mpmath.mpf(2) ** -dp.in_frac
        half = 1 << (port.width - 1)
        mask = (1 << port.width) - 1
        # Codes or signed values alike: wrap to the port's width (as model.to_signed does).
        codes = [((int(v) + half) & mask) - half if port.signed else int(v) & mask for v in raw.ravel()]
        with mpmath.workdps(_IDEAL_DPS):
            return [c * scale for c in codes], True
    vals = raw.astype(np.int64)
    vals = to_signed(vals, port.width) if port.signed else vals & np.int64((1 << port.width) - 1)
    return vals.astype(np.float64) / 2.0**dp.in_frac, False


def _exp_exponent(dp: Datapath, inputs: Inputs) -> npt.NDArray[np.int64]:
    """floor(t / ln 2): the exponent of e^t with its mantissa in [1, 2)."""
    values, wide = _hyperbolic_values(dp, inputs)
    if wide:
        with mpmath.workdps(_IDEAL_DPS):
            return np.array([int(mpmath.floor(v / mpmath.log(2))) for v in values], dtype=np.int64)
    return np.floor(np.asarray(values) / np.log(2.0)).astype(np.int64)


_IDEAL_DPS = 40


def _ideal_hyperbolic(dp: Datapath, inputs: Inputs) -> dict[str, npt.NDArray[Any]]:
    """Gain-free exact results in output LSBs (numpy float64, or mpmath for wide formats)."""
    values, wide = _hyperbolic_values(dp, inputs)
    f = dp.function
    if wide:
        with mpmath.workdps(_IDEAL_DPS):
            out_scale = mpmath.mpf(2) ** dp.out_frac

            def each(fn: Any) -> npt.NDArray[Any]:
                return np.array([fn(v) * out_scale for v in values], dtype=object)

            if f == "sinhcosh":
                return {"out_cosh": each(mpmath.cosh), "out_sinh": each(mpmath.sinh)}
            if f == "exp":
                ln2 = mpmath.log(2)
                return {"out_mantissa": each(lambda v: mpmath.exp(v - mpmath.floor(v / ln2) * ln2))}
            if f == "atanh":
                return {"out_atanh": each(lambda v: mpmath.atanh(v) if abs(v) < 1 else mpmath.mpf(0))}
            if f == "ln":
                return {"out_ln": each(lambda v: mpmath.log(v) if v > 0 else mpmath.mpf(0))}
            return {"out_sqrt": each(mpmath.sqrt)}
    v = np.asarray(values)
    out_scale = 2.0**dp.out_frac
    with np.errstate(divide="ignore", invalid="ignore"):
        if f == "sinhcosh":
            return {"out_cosh": np.cosh(v) * out_scale, "out_sinh": np.sinh(v) * out_scale}
        if f == "exp":
            q = np.floor(v / np.log(2.0))
            return {"out_mantissa": np.exp(v - q * np.log(2.0)) * out_scale}
        if f == "atanh":
            return {"out_atanh": np.where(np.abs(v) < 1, np.arctanh(np.where(np.abs(v) < 1, v, 0.0)), 0.0) * out_scale}
        if f == "ln":
            return {"out_ln": np.where(v > 0, np.log(np.where(v > 0, v, 1.0)), 0.0) * out_scale}
        return {"out_sqrt": np.sqrt(v) * out_scale}


def ideal_outputs(dp: Datapath, inputs: Inputs, *, with_gain: bool = True) -> dict[str, npt.NDArray[Any]]:
    """The exact answer for each numeric output (float64 or mpmath values; see reference.py).

    Args:
        dp: The data path.
        inputs: Input values by port.
        with_gain: Include a raw core's growth 1/K_n (False gives the gain-free answer, which
            does not depend on the iteration count).
    """
    if dp.function in ("mul", "div"):
        return _ideal_linear(dp, inputs)
    if dp.coordinates == "hyperbolic":
        ideal = _ideal_hyperbolic(dp, inputs)
        return apply_gain(dp, ideal) if with_gain else ideal
    if dp.function == "sincos":
        cos, sin = ideal_sincos(dp, inputs["in_angle"])
        ideal = {"out_cos": cos, "out_sin": sin}
        return apply_gain(dp, ideal) if with_gain else ideal
    if dp.data_width > FLOAT64_MAX_DATA_WIDTH or dp.angle_width > FLOAT64_MAX_DATA_WIDTH:
        return _ideal_circular_wide(dp, inputs, with_gain)
    x = np.asarray(inputs["in_x"], dtype=np.float64)
    y = np.asarray(inputs["in_y"], dtype=np.float64)
    growth = 1.0 if dp.gain_mode == "compensated" or not with_gain else 1.0 / float(dp.gain)
    if dp.function == "rotate":
        t = _angle_radians(dp, inputs["in_angle"])
        c, s = np.cos(t), np.sin(t)
        return {"out_x": growth * (x * c - y * s), "out_y": growth * (x * s + y * c)}
    theta = np.arctan2(y, x)
    angle = theta * 2.0**dp.angle_frac if dp.radians else theta / (2 * np.pi) * 2.0**dp.angle_width
    return {"out_angle": angle, "out_magnitude": growth * np.hypot(x, y)}


def _ideal_circular_wide(dp: Datapath, inputs: Inputs, with_gain: bool) -> dict[str, npt.NDArray[Any]]:
    """rotate and atan2 past float64's precision: mpmath at 40 digits (a 60-bit product in
    float64 is off by up to 2^(60-53) LSB)."""
    b = dp.data_width

    def signed(values: npt.ArrayLike, width: int) -> list[int]:
        half = 1 << (width - 1)
        mask = (1 << width) - 1
        return [((int(v) + half) & mask) - half for v in np.asarray(values).ravel()]

    xs, ys = signed(inputs["in_x"], b), signed(inputs["in_y"], b)
    with mpmath.workdps(_IDEAL_DPS):
        growth = 1 / mpmath.mpf(dp.gain) if with_gain and dp.gain_mode == "raw" else mpmath.mpf(1)
        if dp.function == "rotate":
            a = dp.angle_width
            codes = signed(inputs["in_angle"], a) if dp.radians else [int(v) & ((1 << a) - 1) for v in np.asarray(inputs["in_angle"]).ravel()]
            out_x, out_y = [], []
            for x, y, c in zip(xs, ys, codes, strict=True):
                t = c / mpmath.mpf(2) ** dp.angle_frac if dp.radians else 2 * mpmath.pi * c / mpmath.mpf(2) ** a
                cos, sin = mpmath.cos(t), mpmath.sin(t)
                out_x.append(growth * (x * cos - y * sin))
                out_y.append(growth * (x * sin + y * cos))
            return {"out_x": np.array(out_x, dtype=object), "out_y": np.array(out_y, dtype=object)}
        angles, mags = [], []
        for x, y in zip(xs, ys, strict=True):
            theta = mpmath.atan2(y, x)
            angles.append(theta * mpmath.mpf(2) ** dp.angle_frac if dp.radians else theta / (2 * mpmath.pi) * mpmath.mpf(2) ** dp.angle_width)
            mags.append(growth * mpmath.hypot(x, y))
        return {"out_angle": np.array(angles, dtype=object), "out_magnitude": np.array(mags, dtype=object)}


def _angle_radians(dp: Datapath, codes: npt.ArrayLike) -> npt.NDArray[np.float64]:
    signed = to_signed(np.asarray(codes).astype(np.int64), dp.angle_width).astype(np.float64)
    if dp.radians:
        return signed / 2.0**dp.angle_frac
    return signed * (2.0 * np.pi / 2.0**dp.angle_width)


# Up to this width the float64 ideal of mul and div is exact to far below an LSB (a product of
# two 26-bit values fits float64's 53 bits); wider ones are judged from exact integers.
EXACT_FLOAT_LINEAR_BITS = 26


def _exact_linear_errors(dp: Datapath, inputs: Inputs, outputs: dict[str, npt.NDArray[Any]]) -> npt.NDArray[np.float64]:
    """mul and div errors in output LSBs from exact integer arithmetic: the difference between
    the output and the exact result is formed as a ratio of integers and only then rounded to
    float64, so it is exact to float64 precision at any width. div's ideal is clamped to the
    format, as in :func:`function_errors`; out-of-domain pairs give NaN (not judged)."""
    b = dp.data_width

    def ints(values: npt.ArrayLike) -> npt.NDArray[np.object_]:
        half = 1 << (b - 1)
        mask = (1 << b) - 1
        return np.array([((int(v) + half) & mask) - half for v in np.asarray(values).ravel()], dtype=object)

    if dp.function == "mul":
        a, m = ints(inputs["in_a"]), ints(inputs["in_b"])
        got = np.array([int(v) for v in np.asarray(outputs["out_product"]).ravel()], dtype=object)
        numer = got * (1 << (b - 1)) - a * m  # exact: (out - a m / 2^(b-1)) 2^(b-1)
        return np.array([float(v) for v in numer], dtype=np.float64) / 2.0 ** (b - 1)
    num, den = ints(inputs["in_num"]), ints(inputs["in_den"])
    got = np.array([int(v) for v in np.asarray(outputs["out_quotient"]).ravel()], dtype=object)
    scaled = num * (1 << (b - 2))  # the exact quotient is scaled / den
    out = np.full(len(got), np.nan)
    for k, (n2, d, q) in enumerate(zip(scaled, den, got, strict=True)):
        if d == 0 or abs(n2) >= abs(d) << (b - 1):
            continue  # outside the domain: not judged
        if abs(n2) > dp.out_max * abs(d):  # beyond the format: judged against the clamped value
            out[k] = float(q - (dp.out_max if (n2 < 0) == (d < 0) else -dp.out_max))
        else:
            out[k] = float(q * d - n2) / float(d)
    return out


def function_errors(
    dp: Datapath, inputs: Inputs, outputs: dict[str, npt.NDArray[Any]], ideal: dict[str, npt.NDArray[Any]] | None = None
) -> dict[str, npt.NDArray[np.float64]]:
    """Per output, the error against the ideal in that output's LSBs; NaN where not judged.

    atan2 angles wrap (turns) and are judged only for vectors at least
    :func:`small_vector_limit` long; the zero vector's angle is defined as 0 and not judged.
    """
    ideal = ideal if ideal is not None else ideal_outputs(dp, inputs)
    if dp.function == "exp":
        # Judged at the core's own exponent: where it differs from floor(t / ln 2) (possible
        # only at a power-of-two boundary) the ideal mantissa is rescaled to it.
        step = _exp_exponent(dp, inputs) - np.asarray(outputs["out_exponent"]).astype(np.int64)
        mant = ideal["out_mantissa"]
        if np.any(step):
            if mant.dtype == object:
                mant = np.array([m * mpmath.mpf(2) ** int(k) for m, k in zip(mant, step, strict=True)], dtype=object)
            else:
                mant = mant * np.exp2(step.astype(np.float64))
        ideal = {"out_mantissa": mant}
    errs = {name: errors_lsb(outputs[name], ideal[name]) for name in ideal}
    if dp.function == "atanh":
        u = to_signed(np.asarray(inputs["in_u"]).astype(np.int64), dp.data_width) if dp.data_width <= 62 else None
        inside = atanh_domain(dp, u) if u is not None else np.asarray(outputs["out_domain_error"]) == 0
        errs["out_atanh"] = np.where(inside, errs["out_atanh"], np.nan)
    if dp.function == "ln":
        w = np.asarray(inputs["in_w"])
        errs["out_ln"] = np.where(w != 0, errs["out_ln"], np.nan)
    if dp.function == "div":
        # Judged at every pair inside the domain. A quotient between the format's largest
        # value (2 - 2^-(b-2)) and 2 saturates to that value by design: it is judged against
        # the ideal clamped to the format.
        num = np.asarray(inputs["in_num"]).astype(np.int64)
        den = np.asarray(inputs["in_den"]).astype(np.int64)
        inside = div_domain(dp, num, den)
        if dp.data_width > EXACT_FLOAT_LINEAR_BITS:
            err = _exact_linear_errors(dp, inputs, outputs)
        else:
            clamped = np.clip(np.asarray(ideal["out_quotient"], dtype=np.float64), -dp.out_max, dp.out_max)
            err = errors_lsb(outputs["out_quotient"], clamped)
        errs["out_quotient"] = np.where(inside, err, np.nan)
    if dp.function == "mul" and dp.data_width > EXACT_FLOAT_LINEAR_BITS:
        errs["out_product"] = _exact_linear_errors(dp, inputs, outputs)
    if dp.function == "atan2":
        e = errs["out_angle"]
        if not dp.radians:
            # A binary angle wraps: an error past half a turn is the same angle the other way.
            # Formed exactly: (e + full/2) % full in float64 would round a small error away
            # once the angle is wider than about 52 bits.
            ideal_angle = np.asarray(ideal["out_angle"])
            full = 1 << dp.angle_width
            if ideal_angle.dtype == object:
                with mpmath.workdps(_IDEAL_DPS):
                    diffs = []
                    for o, i in zip(np.asarray(outputs["out_angle"]).ravel(), ideal_angle.ravel(), strict=True):
                        d = mpmath.mpf(int(o)) - i
                        d = d - full * mpmath.nint(d / full)
                        diffs.append(float(d))
                e = np.array(diffs, dtype=np.float64).reshape(e.shape)
            else:
                e = np.where(np.abs(e) > full / 2, e - np.sign(e) * float(full), e)
        x = np.asarray(inputs["in_x"], dtype=np.float64)
        y = np.asarray(inputs["in_y"], dtype=np.float64)
        errs["out_angle"] = np.where(np.hypot(x, y) >= small_vector_limit(dp), e, np.nan)
    return errs


def apply_gain(dp: Datapath, ideal: dict[str, npt.NDArray[Any]]) -> dict[str, npt.NDArray[Any]]:
    """Scale a gain-free ideal by a raw core's growth 1/K_n (the data outputs only)."""
    if dp.gain_mode == "compensated":
        return ideal
    growth = 1.0 / float(dp.gain)
    keep = {"out_angle"}
    if any(np.asarray(v).dtype == object for v in ideal.values()):
        with mpmath.workdps(_IDEAL_DPS):
            big = 1 / mpmath.mpf(dp.gain)
            return {k: (v if k in keep else np.array([e * big for e in v], dtype=object)) for k, v in ideal.items()}
    return {k: (v if k in keep else v * growth) for k, v in ideal.items()}


def measure(dp: Datapath, inputs: Inputs, ideal_unit: dict[str, npt.NDArray[Any]] | None = None) -> ErrorStats:
    """Pooled error of the bit-true model against the ideal over the inputs.

    Args:
        dp: The data path.
        inputs: Input values by port.
        ideal_unit: The gain-free ideal (``ideal_outputs(..., with_gain=False)``), if computed.
    """
    ideal = apply_gain(dp, ideal_unit) if ideal_unit is not None else None
    outputs = evaluate_function(dp, inputs)
    errs = [e[~np.isnan(e)] for e in function_errors(dp, inputs, outputs, ideal).values()]
    stats = error_stats(errs, [np.zeros_like(e) for e in errs])
    n = len(next(iter(inputs.values())))
    return ErrorStats(n, stats.max_error_lsb, stats.rms_error_lsb, stats.bias_lsb)
