"""What every core's arithmetic shares: the constants of the three coordinate systems, the data
path's common numbers, and the timing of the two architectures.

The constants are computed once with mpmath at 60 digits and rounded to the internal width:
the circular gain K_n and atan(2^-i) (in turns or radians), the hyperbolic shift schedule with
its repeats, its gain A_n and atanh(2^-s), pi, and the integer bits of a logarithm. Each
function's module (benchgen.functions) builds its data path from them; the bit-true model and
the hardware both read that one data path, so they cannot disagree about a shift, a constant
or a rounding step. Number formats are in docs/number_formats.md.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from functools import cache

import mpmath

from benchgen.spec import CoreSpec
from benchgen.errors import ConfigError

__all__ = [
    "HYPERBOLIC_RANGE",
    "MIN_Z_ONLY_ITERATIONS",
    "MP_DIGITS",
    "RADIAN_INT_BITS",
    "Datapath",
    "Timing",
    "atan_radians",
    "atan_turns",
    "atanh_at",
    "check_width",
    "check_z_only",
    "circular_gain",
    "hyperbolic_gain",
    "hyperbolic_shifts",
    "log_int_bits",
    "make_timing",
    "pi_at",
]

MP_DIGITS = 60


@cache
def circular_gain(iterations: int) -> mpmath.mpf:
    """K_n = prod_{i<n} (1 + 2**-2i) ** -1/2: the scale an n-iteration rotation applies inverted.

    Walther 1971 / Andraka 1998 give 0.607253 for n -> infinity.
    """
    with mpmath.workdps(MP_DIGITS):
        k = mpmath.mpf(1)
        for i in range(iterations):
            k /= mpmath.sqrt(1 + mpmath.mpf(2) ** (-2 * i))
        return +k


@cache
def atan_turns(i: int, frac_bits: int) -> int:
    """atan(2**-i) in turns, rounded to nearest at ``frac_bits`` fraction bits."""
    with mpmath.workdps(MP_DIGITS):
        value = mpmath.atan(mpmath.mpf(2) ** -i) / (2 * mpmath.pi) * mpmath.mpf(2) ** frac_bits
        return int(mpmath.nint(value))


@cache
def atan_radians(i: int, frac_bits: int) -> int:
    """atan(2**-i) in radians, rounded to nearest at ``frac_bits`` fraction bits."""
    with mpmath.workdps(MP_DIGITS):
        return int(mpmath.nint(mpmath.atan(mpmath.mpf(2) ** -i) * mpmath.mpf(2) ** frac_bits))


def pi_at(frac_bits: int, fraction: int = 1) -> int:
    with mpmath.workdps(MP_DIGITS):
        return int(mpmath.nint(mpmath.pi / fraction * mpmath.mpf(2) ** frac_bits))


# Convergence range of hyperbolic rotation with the repeated iterations: the sum of every
# atanh(2^-i) step, 1.1181730155 (mpmath; about 1.13 in Walther 1971).
HYPERBOLIC_RANGE = "1.1181730155265038036"


def hyperbolic_shifts(iterations: int) -> tuple[int, ...]:
    """The shift of each hyperbolic iteration: 1, 2, 3, 4, 4, 5, ..., 13, 13, 14, ...

    Shifts 4, 13, 40, 121, ... (k -> 3k + 1) are done twice, without which the steps atanh(2^-i)
    cannot add up to every angle in range (Walther 1971).
    """
    shifts: list[int] = []
    s = 1
    repeat = 4
    while len(shifts) < iterations:
        shifts.append(s)
        if s == repeat and len(shifts) < iterations:
            shifts.append(s)
            repeat = 3 * repeat + 1
        s += 1
    return tuple(shifts)


@cache
def hyperbolic_gain(iterations: int) -> mpmath.mpf:
    """A_n = prod sqrt(1 - 2^-2s) over the shifts of n hyperbolic iterations (repeats counted).

    The hyperbolic iterations shrink the vector by A_n: 0.82815936 for n -> infinity, and
    0.82978162 if the repeats were left out (mpmath; ../shared/FACTS.md).
    """
    with mpmath.workdps(MP_DIGITS):
        a = mpmath.mpf(1)
        for s in hyperbolic_shifts(iterations):
            a *= mpmath.sqrt(1 - mpmath.mpf(2) ** (-2 * s))
        return +a


@cache
def atanh_at(shift: int, frac_bits: int) -> int:
    """atanh(2**-shift), rounded to nearest at ``frac_bits`` fraction bits."""
    with mpmath.workdps(MP_DIGITS):
        return int(mpmath.nint(mpmath.atanh(mpmath.mpf(2) ** -shift) * mpmath.mpf(2) ** frac_bits))


def log_int_bits(data_width: int) -> int:
    """Integer bits (sign not counted) of the ln output and the exp input: the smallest L with
    2^L >= data_width ln 2, so ln of the smallest nonzero input, -data_width ln 2, fits."""
    with mpmath.workdps(MP_DIGITS):
        need = data_width * mpmath.log(2)
    bits = 0
    while mpmath.mpf(2) ** bits < need:
        bits += 1
    return bits


# A radian angle port is signed with 3 integer bits (sign included): [-4, 4) rad covers a turn.
RADIAN_INT_BITS = 3


@dataclass(frozen=True, kw_only=True)
class Datapath:
    """Numbers of the rotation data path, shared by the model and the hardware.

    Each function module derives its own subclass with the constants of its input and output
    logic (a start value, a scale constant, a table); these fields are the ones every core has.

    Attributes:
        function: The function's name (benchgen.functions).
        coordinates: ``circular``, ``linear`` or ``hyperbolic`` (Walther 1971).
        mode: ``rotation`` (drive z to 0) or ``vectoring`` (drive y to 0).
        angle_unit: ``turns`` (binary angle) or ``radians`` (fixed point) at an angle port.
        gain_mode: ``compensated`` (the core removes the gain) or ``raw`` (left in).
        angle_width: Bits of the angle port (data_width for functions without one).
        angle_frac: Fraction bits of the z port: of a turn or a radian; of the quotient, the
            multiplier or the hyperbolic result for the others.
        data_width: Bits of the data ports.
        iterations: Number of iterations.
        guard_bits: Fraction bits kept below the data LSB inside the data path.
        angle_guard_bits: Where the function sizes them apart (an angle input): the guard bits
            of z, which set ``z_frac``; ``None`` where z's fraction bits follow ``guard_bits``.
        rounding: How the guard bits are dropped (``truncate``, ``half_up``, ``half_even``).
        xy_width: Width of the internal x and y.
        z_width: Width of the internal angle.
        z_frac: Fraction bits of the internal angle, in the port's unit.
        amplitude: Full-scale data value, 2**(data_width-1) - 1.
        atan_table: The z step of each iteration at ``z_frac`` fraction bits: atan(2**-s)
            (circular), 2**-s (linear) or atanh(2**-s) (hyperbolic), s the iteration's shift.
        gain: The constant a compensated core multiplies by, as a decimal string (60 digits
            computed, 20 printed): K_n (circular), 1/A_n (hyperbolic), 1 (linear). A raw core's
            outputs are the exact result divided by it.
        out_width: Bits of each data output.
        out_max: Data outputs saturate to +-out_max (unsigned outputs: to out_max).
        shifts: The right shift of each iteration: i (circular, linear) or the hyperbolic
            schedule with its repeats (:func:`hyperbolic_shifts`).
        in_frac: Fraction bits of the data input (hyperbolic functions; 0 elsewhere).
        out_frac: Fraction bits of the main data output (hyperbolic functions; 0 elsewhere).
        saturates: Whether the data outputs carry saturation logic: False only where every
            input of the core was evaluated and none drives a rounded output beyond +-out_max
            (:func:`benchgen.functions.final_datapath`): the logic would never act.
        xy_narrowed: Whether x and y lack the headroom bit above the outputs' range, shown
            unneeded the same way (no value of x or y, and no rounding add, reaches it). A
            narrowed core's rounded output is out_width bits, so the most negative code is the
            only one saturation can meet: it moves to -out_max.
        rounded_shifts: Whether each iteration's shifted terms (x / 2^s, y / 2^s) are rounded half
            up instead of floored: the bit just below the shift enters the adder as its carry-in
            (added where the term is added, its complement where it is subtracted), so rounding
            costs no adder and no carry bit. Each term's error is then within +-1/2 LSB of the
            internal width and unbiased, against [0, 1) LSB and a bias of -1/2 when floored
            (a common practice of shift-and-add arithmetic, stated from memory): the same
            accuracy with about one guard bit fewer.
        table_head: The first iterations a core reads from a table, as the config set it
            (``None``: the architecture's default; :func:`benchgen.functions.table_head`).
    """

    function: str
    coordinates: str = "circular"
    mode: str = "rotation"
    angle_unit: str = "turns"
    gain_mode: str = "compensated"
    angle_width: int
    angle_frac: int
    data_width: int
    iterations: int
    guard_bits: int
    rounding: str
    xy_width: int
    z_width: int
    z_frac: int
    amplitude: int
    atan_table: tuple[int, ...]
    gain: str
    out_width: int
    out_max: int
    shifts: tuple[int, ...] = ()
    in_frac: int = 0
    out_frac: int = 0
    saturates: bool = True
    xy_narrowed: bool = False
    angle_guard_bits: int | None = None
    rounded_shifts: bool = False
    table_head: int | None = None

    def guard_text(self) -> str:
        """The guard bits in words: x and y's, and z's where they are sized apart and differ."""
        text = f"{self.guard_bits} guard bits"
        if self.angle_guard_bits is None or self.angle_guard_bits == self.guard_bits:
            return text
        return f"{text} ({self.angle_guard_bits} for z)"

    @property
    def radians(self) -> bool:
        """Whether angles are in radians (else turns)."""
        return self.angle_unit == "radians"

    def constants(self) -> dict[str, object]:
        """The fields a function's subclass adds (for the manifest), by name."""
        base = {f.name for f in fields(Datapath)}
        return {f.name: getattr(self, f.name) for f in fields(self) if f.name not in base}


MIN_Z_ONLY_ITERATIONS = 3


def check_z_only(function: str, iterations: int) -> None:
    """div, atanh and ln read only z at the end: the RTL forms x for the iterations before the
    last two alone, so a core needs at least three (fewer could never meet a budget anyway)."""
    if iterations < MIN_Z_ONLY_ITERATIONS:
        raise ConfigError(
            "iterations",
            iterations,
            f'at least {MIN_Z_ONLY_ITERATIONS} for function = "{function}"',
            f'set iterations = {MIN_Z_ONLY_ITERATIONS} or more, or "auto"',
        )


def check_width(iterations: int, xy_width: int) -> None:
    if iterations > xy_width:
        raise ConfigError(
            "iterations",
            iterations,
            f"at most the internal width, {xy_width} bits (data width + guard_bits + headroom): "
            "a longer shift only adds copies of the sign",
            f"set iterations to {xy_width} or fewer, or raise data_width or guard_bits",
        )


@dataclass(frozen=True, kw_only=True)
class Timing:
    """How the iterations are laid out in time.

    Attributes:
        architecture: ``pipelined`` or ``iterative``.
        stages: Pipelined: (first, end) iteration range of each register stage. Iterative: the
            range of each clock's group of iterations.
        latency_cycles: Clocks from the input handshake to the output handshake when
            ``out_ready`` is high.
        cycles_per_sample: Clocks between accepted inputs at full rate.
        front: Pipelined: register stages of input logic before the first iteration (a
            constant multiplier split into one adder level per stage), counted in the latency.
    """

    architecture: str
    stages: tuple[tuple[int, int], ...]
    latency_cycles: int
    cycles_per_sample: int
    front: int = 0

    @property
    def depth(self) -> int:
        """Pipelined: register stages. Iterative: clocks of iteration per sample."""
        return len(self.stages)

    def describe(self) -> str:
        """The arrangement in words, as the RTL header, the C model and the README give it."""
        if self.architecture == "pipelined":
            return f"pipelined, {self.depth} register stage(s)"
        first, end = self.stages[0]
        head = f", iterations 0 to {first - 1} in the load clock" if first else ""
        return f"iterative, {end - first} iteration(s) per clock{head}"


def make_timing(spec: CoreSpec, iterations: int, front: int = 0, head: int = 0) -> Timing:
    """Spread the iterations over register stages (pipelined) or clocks (iterative).

    ``front``: register stages the function's input logic takes in a pipeline (see
    :meth:`benchgen.functions.base.Function.front_stages`; ignored by an iterative core).
    ``head``: iterative cores: the first iterations, formed by table in the clock that loads
    a sample (:func:`benchgen.functions.table_head`); the clocks iterate over the rest.

    Raises:
        ConfigError: if the depth or iterations per cycle exceed the iterations.
    """
    n = iterations
    if spec.architecture == "pipelined":
        depth = spec.pipeline_depth if spec.pipeline_depth is not None else n
        if depth > n:
            raise ConfigError(
                "pipeline_depth",
                depth,
                f"from 1 to the number of iterations ({n}, sized automatically)",
                f"set pipeline_depth to at most {n}, or fix iterations to a larger number",
            )
        bounds = tuple((k * n // depth, (k + 1) * n // depth) for k in range(depth))
        # the input logic's stages, depth stages of iterations, then the output register
        # (rounding and saturation from a register of their own) into the output buffer.
        return Timing(
            architecture="pipelined", stages=bounds, latency_cycles=front + depth + 1, cycles_per_sample=1, front=front
        )
    per_cycle = spec.iterations_per_cycle or 1
    if per_cycle > n:
        raise ConfigError(
            "iterations_per_cycle",
            per_cycle,
            f"from 1 to the number of iterations ({n}, sized automatically)",
            f"set iterations_per_cycle to at most {n}, or fix iterations to a larger number",
        )
    looped = n - head
    per_cycle = min(per_cycle, looped)
    cycles = -(-looped // per_cycle)
    bounds = tuple((head + c * per_cycle, min(n, head + (c + 1) * per_cycle)) for c in range(cycles))
    # One clock loads the folded start values (and the head's iterations), `cycles` clocks
    # iterate (the last of them writes the output register of the last iteration's values), and
    # one more rounds and saturates from that register into the output: cycles + 2. A new
    # sample loads in the last iteration's clock, so one sample every `cycles` clocks.
    return Timing(
        architecture="iterative", stages=bounds, latency_cycles=cycles + 2, cycles_per_sample=cycles
    )


def rotation_z_ranges(dp: Datapath, start: tuple[int, int]) -> list[tuple[int, int]]:
    """The range of z before each iteration of a rotation, and after the last, from the range
    of its start value.

    A rotation steps z >= 0 down by the iteration's constant and z < 0 up by it (Volder 1959),
    so each range is the hull of the two halves' images: exact bounds for every input, with no
    assumption about the table (such as the convergence condition) or the rounding of its
    constants. After iteration i the range is about +-atan(2^-i): the top bits of z are copies
    of its sign, and a pipeline need not carry them (:func:`signed_width`).
    """
    lo, hi = start
    out = [(lo, hi)]
    for a in dp.atan_table:
        parts = []
        if hi >= 0:
            parts.append((max(lo, 0) - a, hi - a))
        if lo < 0:
            parts.append((lo + a, min(hi, -1) + a))
        lo, hi = min(p[0] for p in parts), max(p[1] for p in parts)
        out.append((lo, hi))
    return out


def signed_width(lo: int, hi: int) -> int:
    """Bits of the two's complement numbers that hold every integer in [lo, hi]."""
    need_hi = hi.bit_length() + 1 if hi >= 0 else 1
    need_lo = (-lo - 1).bit_length() + 1 if lo < 0 else 1
    return max(need_hi, need_lo)


def csd_terms(k: int) -> list[tuple[int, int]]:
    """The canonical signed digits of ``k`` > 0 as (shift, sign) pairs, highest first:
    k = sum(sign * 2^shift), no two digits adjacent, the fewest nonzero digits of any signed
    binary form (Reitwiesner 1960), so the fewest adders for a multiply by the constant k."""
    if k <= 0:
        raise ValueError("csd_terms needs a positive constant")
    terms = []
    shift = 0
    while k:
        if k & 1:
            digit = 2 - (k & 3)  # +1 where k = ...01, -1 where k = ...11
            terms.append((shift, digit))
            k -= digit
        k >>= 1
        shift += 1
    return sorted(terms, reverse=True)

