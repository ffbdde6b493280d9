"""The single source of truth for a core's arithmetic and timing.

Everything the bit-true model and the RTL templates need is computed here, once: the iteration
schedule, the angle constants (mpmath, rounded to the internal width), the gain and the start
value that removes it, the internal widths, and the latency and throughput of the architecture.

Number formats (see docs/number_formats.md):

* Input angle: a binary angle of ``angle_width`` bits, ``2**angle_width`` codes per turn; integer
  wrap-around is angle wrap-around (common practice in the trade).
* Internal x, y: two's complement, ``xy_width = data_width + guard_bits + 1`` bits, of which
  ``guard_bits`` are below the output LSB and one is headroom above the output's sign.
* Internal z: a signed angle in turns with ``z_width`` fraction bits (the full turn is
  ``2**z_width``), so it covers [-1/2, 1/2) turn.
* Outputs: two's complement ``data_width`` bits, amplitude ``2**(data_width-1) - 1``.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache

import mpmath

from benchgen.config import CoreSpec
from benchgen.errors import ConfigError

__all__ = [
    "HYPERBOLIC_FUNCTIONS",
    "Datapath",
    "Timing",
    "circular_gain",
    "hyperbolic_gain",
    "hyperbolic_shifts",
    "make_datapath",
    "make_timing",
]

_MP_DIGITS = 60


@cache
def circular_gain(iterations: int) -> mpmath.mpf:
    """K_n = prod_{i<n} (1 + 2**-2i) ** -1/2: the scale an n-iteration rotation applies inverted.

    Walther 1971 / Andraka 1998 give 0.607253 for n -> infinity.
    """
    with mpmath.workdps(_MP_DIGITS):
        k = mpmath.mpf(1)
        for i in range(iterations):
            k /= mpmath.sqrt(1 + mpmath.mpf(2) ** (-2 * i))
        return +k


@cache
def _atan_turns(i: int, frac_bits: int) -> int:
    """atan(2**-i) in turns, rounded to nearest at ``frac_bits`` fraction bits."""
    with mpmath.workdps(_MP_DIGITS):
        value = mpmath.atan(mpmath.mpf(2) ** -i) / (2 * mpmath.pi) * mpmath.mpf(2) ** frac_bits
        return int(mpmath.nint(value))


@cache
def _atan_radians(i: int, frac_bits: int) -> int:
    """atan(2**-i) in radians, rounded to nearest at ``frac_bits`` fraction bits."""
    with mpmath.workdps(_MP_DIGITS):
        return int(mpmath.nint(mpmath.atan(mpmath.mpf(2) ** -i) * mpmath.mpf(2) ** frac_bits))


def _pi_at(frac_bits: int, fraction: int = 1) -> int:
    with mpmath.workdps(_MP_DIGITS):
        return int(mpmath.nint(mpmath.pi / fraction * mpmath.mpf(2) ** frac_bits))


HYPERBOLIC_FUNCTIONS = ("sinhcosh", "exp", "atanh", "ln", "sqrt")

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
    with mpmath.workdps(_MP_DIGITS):
        a = mpmath.mpf(1)
        for s in hyperbolic_shifts(iterations):
            a *= mpmath.sqrt(1 - mpmath.mpf(2) ** (-2 * s))
        return +a


@cache
def _atanh_at(shift: int, frac_bits: int) -> int:
    """atanh(2**-shift), rounded to nearest at ``frac_bits`` fraction bits."""
    with mpmath.workdps(_MP_DIGITS):
        return int(mpmath.nint(mpmath.atanh(mpmath.mpf(2) ** -shift) * mpmath.mpf(2) ** frac_bits))


def log_int_bits(data_width: int) -> int:
    """Integer bits (sign not counted) of the ln output and the exp input: the smallest L with
    2^L >= data_width ln 2, so ln of the smallest nonzero input, -data_width ln 2, fits."""
    with mpmath.workdps(_MP_DIGITS):
        need = data_width * mpmath.log(2)
    bits = 0
    while mpmath.mpf(2) ** bits < need:
        bits += 1
    return bits


# A radian angle port is signed with 3 integer bits (sign included): [-4, 4) rad covers a turn.
RADIAN_INT_BITS = 3


@dataclass(frozen=True, kw_only=True)
class Datapath:
    """Numbers of the rotation data path, shared by the model and the RTL.

    Attributes:
        function: ``sincos``, ``rotate``, ``atan2``, ``mul``, ``div``, ``sinhcosh``, ``exp``,
            ``atanh``, ``ln`` or ``sqrt``.
        coordinates: ``circular``, ``linear`` or ``hyperbolic`` (Walther 1971).
        mode: ``rotation`` (drive z to 0) or ``vectoring`` (drive y to 0).
        angle_unit: ``turns`` (binary angle) or ``radians`` (fixed point) at the angle port.
        gain_mode: ``compensated`` (the core removes the gain) or ``raw`` (left in).
        angle_width: Bits of the angle port (input for sincos/rotate, output for atan2).
        angle_frac: Fraction bits of the z port: of a turn or a radian; for div, of the
            quotient; for mul, of the multiplier.
        data_width: Bits of the data ports (inputs of rotate/atan2, outputs of sincos).
        iterations: Number of iterations; iteration i shifts by i.
        guard_bits: Fraction bits kept below the data LSB inside the data path.
        rounding: How the guard bits are dropped (``truncate``, ``half_up``, ``half_even``).
        xy_width: Width of the internal x and y.
        z_width: Width of the internal angle.
        z_frac: Fraction bits of the internal angle, in the port's unit.
        amplitude: Full-scale data value, 2**(data_width-1) - 1.
        x_start: sincos: start value of x, amplitude times K_n at internal scale.
        k_const: rotate/atan2 compensated: K_n at ``k_frac`` fraction bits (0 when raw).
        k_frac: Fraction bits of ``k_const``.
        pi_const: radians: pi at ``z_frac`` fraction bits (0 for turns).
        atan_table: The z step of each iteration at ``z_frac`` fraction bits: atan(2**-i)
            (circular) or 2**-i (linear).
        gain: The constant a compensated core multiplies by, as a decimal string (60 digits
            computed, 20 printed): K_n (circular), 1/A_n (hyperbolic), 1 (linear). A raw core's
            outputs are the exact result divided by it.
        out_width: Bits of each data output.
        out_max: Data outputs saturate to +-out_max (unsigned outputs: to out_max).
        shifts: The right shift of each iteration: i (circular, linear) or the hyperbolic
            schedule with its repeats (:func:`hyperbolic_shifts`).
        in_frac: Hyperbolic: fraction bits of the data input.
        out_frac: Hyperbolic: fraction bits of the main data output.
        int_bits: ln/exp: integer bits L of the ln output and the exp input.
        quarter: sqrt: the start offset 1/4 (times 1/A_n when compensated) at internal scale.
        domain_limit: atanh: largest |u| code inside the domain.
        ln2_table: ln: e ln 2 at ``z_frac`` fraction bits for each normalising shift e.
        inv_ln2: exp: 1/ln 2 at ``inv_ln2_shift - in_frac`` fraction bits (first guess of q).
        inv_ln2_shift: exp: fraction bits of the product t inv_ln2.
        ln2_const: exp: ln 2 at ``z_frac`` fraction bits (the reduction t - q ln 2).
        exp_width: exp: bits of the exponent output.
        lz_width: ln/sqrt: bits of the normalising shift.
        norm_max: sqrt: the largest output shift (half the largest even normalising shift).
        prenorm_max: div, atan2 (prenormalised): the largest left shift the input
            normalisation applies (the redundant sign bits of a data_width-bit input, at most
            data_width - 2); 0 when the inputs are not normalised.
        prenorm_width: Bits of that shift count.
    """

    function: str = "sincos"
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
    x_start: int = 0
    k_const: int = 0
    k_frac: int = 0
    pi_const: int = 0
    atan_table: tuple[int, ...]
    gain: str
    out_width: int
    out_max: int
    shifts: tuple[int, ...] = ()
    in_frac: int = 0
    out_frac: int = 0
    int_bits: int = 0
    quarter: int = 0
    domain_limit: int = 0
    ln2_table: tuple[int, ...] = ()
    inv_ln2: int = 0
    inv_ln2_shift: int = 0
    ln2_const: int = 0
    exp_width: int = 0
    lz_width: int = 0
    norm_max: int = 0
    prenorm_max: int = 0
    prenorm_width: int = 0

    @property
    def output_max(self) -> int:
        """Largest data output magnitude; outputs saturate symmetrically to +-output_max."""
        return self.out_max

    @property
    def radians(self) -> bool:
        """Whether angles are in radians (else turns)."""
        return self.angle_unit == "radians"


def make_datapath(spec: CoreSpec, iterations: int, guard_bits: int) -> Datapath:
    """Derive the data path for a spec at a given size.

    Raises:
        ConfigError: if the iterations do not fit the internal width.
    """
    b = spec.data_width
    a = spec.angle_width
    g = guard_bits
    if spec.function in ("mul", "div"):
        return _linear_datapath(spec, iterations, guard_bits)
    if spec.function in HYPERBOLIC_FUNCTIONS:
        return _hyperbolic_datapath(spec, iterations, guard_bits)
    radians = spec.angle_unit == "radians"
    angle_frac = a - RADIAN_INT_BITS if radians else a
    amplitude = (1 << (b - 1)) - 1
    if spec.function == "sincos" and spec.gain == "raw":
        # Raw: x starts at the amplitude, and the outputs carry 1/K = 1.6468 (Andraka 1998) on
        # top of it, up to 1.65 2^(b-1): one more output bit, and one bit of headroom.
        out_width = b + 1
        xy_width = out_width + g + 1
        out_max = (1 << (out_width - 1)) - 1
    elif spec.function == "sincos":
        # Outputs of amplitude 2^(b-1)-1 and one bit of headroom.
        xy_width = b + g + 1
        out_width, out_max = b, amplitude
    elif spec.function == "rotate":
        # A full-scale corner input has magnitude sqrt(2) 2^(b-1); a raw rotation grows it by
        # 1.6468 more (Andraka 1998): 2.33 2^(b-1) < 2^(b+1), so two integer bits on top.
        out_width = b + 1 if spec.gain == "compensated" else b + 2
        # The rounded value carries one bit above the output for the saturation to read.
        xy_width = out_width + 1 + g
        out_max = (1 << (out_width - 1)) - 1
    else:  # atan2
        xy_width = b + g + 2
        out_width = b + 1  # the magnitude: up to sqrt(2) 2^(b-1), or 2.33 2^(b-1) raw
        out_max = (1 << out_width) - 1
    if spec.function == "atan2":
        # The angle is an output: resolve it to its port's LSB plus the guard bits.
        z_frac = angle_frac + g
    elif radians:
        # One output LSB is 1/amplitude rad, about 2^-(b-1): b fraction bits plus guard bits.
        z_frac = max(angle_frac, b + g)
    else:
        # One output LSB is 1/amplitude rad, about 2^-(b + 1.65) turn: b + 2 fraction bits.
        z_frac = max(a, b + 2 + g)
    z_width = z_frac + RADIAN_INT_BITS if radians else z_frac
    _check_width(iterations, xy_width)
    gain = circular_gain(iterations)
    x_start = 0
    k_const = 0
    k_frac = 0
    with mpmath.workdps(_MP_DIGITS):
        if spec.function == "sincos":
            start = gain if spec.gain == "compensated" else mpmath.mpf(1)
            x_start = int(mpmath.nint(start * amplitude * mpmath.mpf(2) ** g))
        elif spec.gain == "compensated":
            k_frac = b + g + 2
            k_const = int(mpmath.nint(gain * mpmath.mpf(2) ** k_frac))
    table = tuple(
        _atan_radians(i, z_frac) if radians else _atan_turns(i, z_frac) for i in range(iterations)
    )
    prenorm = spec.function == "atan2" and spec.prenormalise
    return Datapath(
        function=spec.function,
        mode="vectoring" if spec.function == "atan2" else "rotation",
        angle_unit=spec.angle_unit,
        gain_mode=spec.gain,
        angle_width=a,
        angle_frac=angle_frac,
        data_width=b,
        iterations=iterations,
        guard_bits=g,
        rounding=spec.rounding,
        xy_width=xy_width,
        z_width=z_width,
        z_frac=z_frac,
        amplitude=amplitude,
        x_start=x_start,
        k_const=k_const,
        k_frac=k_frac,
        pi_const=_pi_at(z_frac) if radians else 0,
        atan_table=table,
        gain=mpmath.nstr(gain, 20),
        out_width=out_width,
        out_max=out_max,
        shifts=tuple(range(iterations)),
        prenorm_max=b - 2 if prenorm else 0,
        prenorm_width=(b - 2).bit_length() if prenorm else 0,
    )


MIN_Z_ONLY_ITERATIONS = 3


def _check_z_only(function: str, iterations: int) -> None:
    """div, atanh and ln read only z at the end: the RTL forms x for the iterations before the
    last two alone, so a core needs at least three (fewer could never meet a budget anyway)."""
    if iterations < MIN_Z_ONLY_ITERATIONS:
        raise ConfigError(
            "iterations",
            iterations,
            f'at least {MIN_Z_ONLY_ITERATIONS} for function = "{function}"',
            f'set iterations = {MIN_Z_ONLY_ITERATIONS} or more, or "auto"',
        )


def _check_width(iterations: int, xy_width: int) -> None:
    if iterations > xy_width:
        raise ConfigError(
            "iterations",
            iterations,
            f"at most the internal width, {xy_width} bits (data width + guard_bits + headroom): "
            "a longer shift only adds copies of the sign",
            f"set iterations to {xy_width} or fewer, or raise data_width or guard_bits",
        )


def _linear_datapath(spec: CoreSpec, iterations: int, guard_bits: int) -> Datapath:
    """mul and div: linear coordinates (Walther 1971), x held, z stepping by 2^-i.

    Both take fractions of data_width bits (b - 1 fraction bits, [-1, 1)). mul: y = a * b in
    rotation mode, z starting at b; |b| < 1 is inside the linear range of 2 (i from 0).
    div: z = num / den in vectoring mode, in range while |num / den| < 2; the quotient has
    b - 2 fraction bits, [-2, 2).
    """
    b = spec.data_width
    g = guard_bits
    mul = spec.function == "mul"
    # x and y hold a fraction of b - 1 fraction bits plus g guard bits, with two integer bits:
    # y reaches |a b| < 1 (mul) or stays within |x| < 1 after the first step (div).
    xy_width = b + g + 2
    out_frac = b - 1 if mul else b - 2
    z_frac = out_frac + g
    z_width = z_frac + (2 if mul else 3)  # mul: |z| < 2; div: the quotient, |z| < 4
    _check_width(iterations, xy_width)
    if not mul:
        _check_z_only(spec.function, iterations)
    if iterations > z_frac + 1:
        raise ConfigError(
            "iterations",
            iterations,
            f"at most {z_frac + 1} here: the step 2^-i must stay within the {z_frac} fraction bits of z",
            f"set iterations to {z_frac + 1} or fewer, or raise guard_bits",
        )
    out_width = b + 1 if mul else b
    return Datapath(
        function=spec.function,
        coordinates="linear",
        mode="rotation" if mul else "vectoring",
        angle_unit="turns",
        gain_mode="compensated",
        angle_width=b,
        angle_frac=out_frac,
        data_width=b,
        iterations=iterations,
        guard_bits=g,
        rounding=spec.rounding,
        xy_width=xy_width,
        z_width=z_width,
        z_frac=z_frac,
        amplitude=(1 << (b - 1)) - 1,
        atan_table=tuple(1 << (z_frac - i) for i in range(iterations)),
        gain="1",
        out_width=out_width,
        out_max=(1 << (out_width - 1)) - 1,
        shifts=tuple(range(iterations)),
        prenorm_max=0 if mul else b - 2,
        prenorm_width=0 if mul else (b - 2).bit_length(),
    )


def _hyperbolic_datapath(spec: CoreSpec, iterations: int, guard_bits: int) -> Datapath:
    """sinhcosh, exp, atanh, ln, sqrt: hyperbolic coordinates (Walther 1971).

    Each iteration does x + d y 2^-s, y + d x 2^-s, z - d atanh(2^-s) with the shifts of
    :func:`hyperbolic_shifts`. Formats (docs/number_formats.md), b = data_width, g = guard bits:

    * sinhcosh: t in [-1, 1) (b - 1 fraction bits); cosh t, sinh t in [-2, 2) (b - 2).
    * exp: t with L integer bits (b - 1 - L fraction bits); e^t = mantissa 2^exponent, the
      mantissa in [1, 2) (unsigned, b - 1 fraction bits), after t = q ln 2 + r, 0 <= r < ln 2.
    * atanh: u in [-1, 1) (b - 1); atanh u in [-2, 2) (b - 2); |u| beyond tanh(1.1182) flagged.
    * ln: w = W 2^-b in [0, 1) normalised to m = w 2^e in [1/2, 1); ln w = 2 atanh((m-1)/(m+1))
      - e ln 2 with L integer bits (b - 1 - L fraction bits); w = 0 flagged.
    * sqrt: w in [0, 1) normalised by an even shift to m in [1/4, 1); sqrt w = sqrt(m) 2^(-e/2)
      from the vector (m + 1/4, m - 1/4), in [0, 1) (b fraction bits).
    """
    b = spec.data_width
    g = guard_bits
    f = spec.function
    if f in ("atanh", "ln"):
        _check_z_only(f, iterations)
    shifts = hyperbolic_shifts(iterations)
    a_n = hyperbolic_gain(iterations)
    compensated = spec.gain == "compensated"
    fields: dict[str, object] = {}
    with mpmath.workdps(_MP_DIGITS):
        inv_a = 1 / a_n
        ln2 = mpmath.log(2)
        if f == "sinhcosh":
            in_frac, out_frac = b - 1, b - 2
            xy_frac = out_frac + g
            xy_width = xy_frac + 3  # |x| < 1.21 cosh 1.12 = 2.05 on the way: [-4, 4)
            z_frac = b + g
            z_width = z_frac + 2
            out_width, out_max = b, (1 << (b - 1)) - 1
            start = inv_a if compensated else mpmath.mpf(1)
            fields["x_start"] = int(mpmath.nint(start * mpmath.mpf(2) ** xy_frac))
            mode = "rotation"
        elif f == "exp":
            L = log_int_bits(b)
            in_frac, out_frac = b - 1 - L, b - 1
            xy_frac = out_frac + g
            xy_width = xy_frac + 4  # up to 1.21 e^1.24 = 4.2 on the way: [-8, 8)
            # z carries L + 2 more fraction bits than the output needs, so the reduction's
            # q ln 2 (|q| < 2^(L+1)) stays within a quarter of an LSB of z's first b + g bits.
            z_frac = b + g + L + 2
            z_width = z_frac + 2
            out_width, out_max = b, (1 << b) - 1
            start = inv_a if compensated else mpmath.mpf(1)
            fields["x_start"] = int(mpmath.nint(start * mpmath.mpf(2) ** xy_frac))
            # q's first guess: t (in_frac fraction bits) times 1/ln 2 at L + 2 fraction bits,
            # rounded: within 1/2 + 2^L 2^-(L+3) of t / ln 2, so floor(t / ln 2) or one above;
            # the remainder's sign then corrects it.
            shift = in_frac + L + 2
            q_lo = int(mpmath.floor(-(mpmath.mpf(2) ** L) / ln2))
            q_hi = int(mpmath.floor((mpmath.mpf(2) ** L - mpmath.mpf(2) ** -in_frac) / ln2))
            fields.update(
                int_bits=L,
                inv_ln2=int(mpmath.nint(mpmath.mpf(2) ** (shift - in_frac) / ln2)),
                inv_ln2_shift=shift,
                ln2_const=int(mpmath.nint(ln2 * mpmath.mpf(2) ** z_frac)),
                # q + 1 where the mantissa rounds up to 2.0
                exp_width=max((q_hi + 1).bit_length(), (-q_lo - 1).bit_length()) + 1,
            )
            mode = "rotation"
        elif f == "atanh":
            in_frac, out_frac = b - 1, b - 2
            xy_frac = in_frac + g
            xy_width = xy_frac + 3
            z_frac = out_frac + g
            z_width = z_frac + 3
            out_width, out_max = b, (1 << (b - 1)) - 1
            fields["x_start"] = 1 << xy_frac
            limit = mpmath.tanh(mpmath.mpf(HYPERBOLIC_RANGE))
            fields["domain_limit"] = int(mpmath.floor(limit * mpmath.mpf(2) ** in_frac))
            mode = "vectoring"
        elif f == "ln":
            L = log_int_bits(b)
            in_frac, out_frac = b, b - 1 - L
            xy_frac = in_frac + g
            xy_width = xy_frac + 3  # x starts at m + 1 < 2
            z_frac = out_frac + g + 1  # ln m is 2 z: one more bit
            z_width = z_frac + 2
            out_width, out_max = b, (1 << (b - 1)) - 1
            fields.update(
                int_bits=L,
                lz_width=max(1, (b - 1).bit_length()),
                ln2_table=tuple(int(mpmath.nint(e * ln2 * mpmath.mpf(2) ** z_frac)) for e in range(b)),
            )
            mode = "vectoring"
        else:  # sqrt
            in_frac, out_frac = b, b
            xy_frac = in_frac + g
            xy_width = xy_frac + 3  # x starts at (m + 1/4) / A_n < 1.51
            z_frac = xy_frac
            z_width = z_frac + 2
            out_width, out_max = b, (1 << b) - 1
            if compensated:
                k_frac = b + g + 2
                fields.update(k_const=int(mpmath.nint(inv_a * mpmath.mpf(2) ** k_frac)), k_frac=k_frac)
            quarter = (inv_a if compensated else mpmath.mpf(1)) / 4
            fields.update(
                quarter=int(mpmath.nint(quarter * mpmath.mpf(2) ** xy_frac)),
                lz_width=max(1, (b - 1).bit_length()),
                norm_max=(b - 1) // 2,
            )
            mode = "vectoring"
        table = tuple(_atanh_at(s, z_frac) for s in shifts)
    _check_width(iterations, xy_width)
    uses_gain = f in ("sinhcosh", "exp", "sqrt")
    return Datapath(
        function=f,
        coordinates="hyperbolic",
        mode=mode,
        angle_unit="turns",
        gain_mode=spec.gain if uses_gain else "compensated",
        angle_width=b,
        angle_frac=out_frac,
        data_width=b,
        iterations=iterations,
        guard_bits=g,
        rounding=spec.rounding,
        xy_width=xy_width,
        z_width=z_width,
        z_frac=z_frac,
        amplitude=(1 << (b - 1)) - 1,
        atan_table=table,
        gain=mpmath.nstr(inv_a, 20) if uses_gain else "1",
        out_width=out_width,
        out_max=out_max,
        shifts=shifts,
        in_frac=in_frac,
        out_frac=out_frac,
        **fields,  # type: ignore[arg-type]
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
    """

    architecture: str
    stages: tuple[tuple[int, int], ...]
    latency_cycles: int
    cycles_per_sample: int

    @property
    def depth(self) -> int:
        """Pipelined: register stages. Iterative: clocks of iteration per sample."""
        return len(self.stages)


def make_timing(spec: CoreSpec, iterations: int) -> Timing:
    """Spread the iterations over register stages (pipelined) or clocks (iterative).

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
        return Timing(architecture="pipelined", stages=bounds, latency_cycles=depth, cycles_per_sample=1)
    per_cycle = spec.iterations_per_cycle or 1
    if per_cycle > n:
        raise ConfigError(
            "iterations_per_cycle",
            per_cycle,
            f"from 1 to the number of iterations ({n}, sized automatically)",
            f"set iterations_per_cycle to at most {n}, or fix iterations to a larger number",
        )
    cycles = -(-n // per_cycle)
    bounds = tuple((c * per_cycle, min(n, (c + 1) * per_cycle)) for c in range(cycles))
    # One clock loads the folded start values, `cycles` clocks iterate, and the last of them
    # writes the rounded result into the output register.
    return Timing(
        architecture="iterative", stages=bounds, latency_cycles=cycles + 1, cycles_per_sample=cycles
    )
