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
    "Datapath",
    "Timing",
    "circular_gain",
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


@dataclass(frozen=True, kw_only=True)
class Datapath:
    """Numbers of the rotation data path, shared by the model and the RTL.

    Attributes:
        angle_width: Input angle bits (binary angle).
        data_width: Output bits.
        iterations: Number of rotation iterations; iteration i shifts by i.
        guard_bits: Fraction bits kept below the output LSB inside the data path.
        rounding: How the guard bits are dropped (``truncate``, ``half_up``, ``half_even``).
        xy_width: Width of the internal x and y registers.
        z_width: Width of the internal angle (fraction bits of a turn; covers [-1/2, 1/2)).
        amplitude: Output value of cos(0), in output LSBs.
        x_start: Start value of x, amplitude times the gain inverse, at internal scale.
        atan_table: atan(2**-i) in turns at ``z_width`` fraction bits, for each iteration.
        gain: K_n as a decimal string (60 digits computed, 20 printed).
    """

    angle_width: int
    data_width: int
    iterations: int
    guard_bits: int
    rounding: str
    xy_width: int
    z_width: int
    amplitude: int
    x_start: int
    atan_table: tuple[int, ...]
    gain: str

    @property
    def output_max(self) -> int:
        """Largest output magnitude; outputs saturate symmetrically to +-output_max."""
        return self.amplitude


def make_datapath(spec: CoreSpec, iterations: int, guard_bits: int) -> Datapath:
    """Derive the data path for a spec at a given size.

    Raises:
        ConfigError: if the iterations do not fit the internal width.
    """
    b = spec.data_width
    xy_width = b + guard_bits + 1
    # One output LSB is 1/amplitude rad, about 2**-(b + 1.65) turn: b + 2 fraction bits of a
    # turn match the output LSB, and the same guard bits keep the angle as fine as x and y.
    z_width = max(spec.angle_width, b + 2 + guard_bits)
    if iterations > xy_width:
        raise ConfigError(
            "iterations",
            iterations,
            f"at most the internal width, {xy_width} bits (data_width + guard_bits + 1): "
            "a longer shift only adds copies of the sign",
            f"set iterations to {xy_width} or fewer, or raise data_width or guard_bits",
        )
    amplitude = (1 << (b - 1)) - 1
    gain = circular_gain(iterations)
    with mpmath.workdps(_MP_DIGITS):
        x_start = int(mpmath.nint(gain * amplitude * mpmath.mpf(2) ** guard_bits))
    return Datapath(
        angle_width=spec.angle_width,
        data_width=b,
        iterations=iterations,
        guard_bits=guard_bits,
        rounding=spec.rounding,
        xy_width=xy_width,
        z_width=z_width,
        amplitude=amplitude,
        x_start=x_start,
        atan_table=tuple(_atan_turns(i, z_width) for i in range(iterations)),
        gain=mpmath.nstr(gain, 20),
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
