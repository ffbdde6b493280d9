"""What the linear functions share: two fractions in, x held, z stepping by 2^-i (Walther 1971)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath, check_width
from benchgen.errors import ConfigError
from benchgen.functions.base import Function, Outputs, Port
from benchgen.spec import CoreSpec

__all__ = ["EXACT_FLOAT_LINEAR_BITS", "LinearDatapath", "LinearFunction"]

# Up to this width the float64 ideal of a product or quotient is exact to far below an LSB (a
# product of two 26-bit values fits float64's 53 bits); wider ones are judged from integers.
EXACT_FLOAT_LINEAR_BITS = 26


@dataclass(frozen=True, kw_only=True)
class LinearDatapath(Datapath):
    """A linear core's data path.

    Attributes:
        prenorm_max: div: the largest left shift of the operands' normalisation (0: none).
        prenorm_width: Bits of that shift count.
    """

    prenorm_max: int = 0
    prenorm_width: int = 0


class LinearFunction(Function):
    """Base of the linear functions: fractions of data_width bits (b - 1 fraction bits)."""

    coordinates: ClassVar[str] = "linear"
    output_frac_bits: ClassVar[int] = 1
    """The output has data_width - output_frac_bits fraction bits."""
    z_integer_bits: ClassVar[int] = 2

    def no_angle_reason(self) -> str:
        return "linear coordinates have no angle and no gain"

    def no_gain_reason(self) -> str:
        return "linear coordinates have no angle and no gain"

    def linear_datapath(self, spec: CoreSpec, iterations: int, guard_bits: int, *, out_width: int, prenorm: bool) -> LinearDatapath:
        """x and y hold a fraction of b - 1 fraction bits plus g guard bits with two integer
        bits; z holds the result's fraction bits plus the guard bits."""
        b, g = spec.data_width, guard_bits
        xy_width = b + g + 2
        out_frac = b - self.output_frac_bits
        z_frac = out_frac + g
        check_width(iterations, xy_width)
        if iterations > z_frac + 1:
            raise ConfigError(
                "iterations",
                iterations,
                f"at most {z_frac + 1} here: the step 2^-i must stay within the {z_frac} fraction bits of z",
                f"set iterations to {z_frac + 1} or fewer, or raise guard_bits",
            )
        return LinearDatapath(
            function=self.name,
            coordinates="linear",
            mode=self.mode,
            angle_unit="turns",
            gain_mode="compensated",
            angle_width=b,
            angle_frac=out_frac,
            data_width=b,
            iterations=iterations,
            guard_bits=g,
            rounding=spec.rounding,
            xy_width=xy_width,
            z_width=z_frac + self.z_integer_bits,
            z_frac=z_frac,
            amplitude=(1 << (b - 1)) - 1,
            atan_table=tuple(1 << (z_frac - i) for i in range(iterations)),
            gain="1",
            out_width=out_width,
            out_max=(1 << (out_width - 1)) - 1,
            shifts=tuple(range(iterations)),
            prenorm_max=b - 2 if prenorm else 0,
            prenorm_width=(b - 2).bit_length() if prenorm else 0,
        )

    def fraction_ports(self, dp: Datapath, names: tuple[str, str]) -> tuple[Port, ...]:
        """Two signed fraction inputs, [-1, 1)."""
        b = dp.data_width
        doc = f"two's complement fraction, {b} bits with {b - 1} fraction bits, [-1, 1)"
        return tuple(Port(n, b, True, doc) for n in names)

    def atan_comment(self, dp: Datapath, i: int) -> str:
        return f"2^-{i}"

    def gain_label(self, dp: Datapath) -> str:
        return "gain (linear coordinates: none)"

    def model_bits(self, dp: Datapath) -> int:
        return max(dp.xy_width, dp.z_width, dp.angle_width) + 2

    def int64_model(self, dp: Datapath) -> bool:
        return dp.data_width <= 40

    def corner_pairs(self, dp: Datapath, names: tuple[str, str]) -> dict[str, npt.NDArray[Any]]:
        """Every pair of 0, +-1, +-2, the ends of the range and the neighbours of 1/2."""
        dtype: Any = np.int64 if dp.data_width <= 62 else object
        m = (1 << (dp.data_width - 1)) - 1
        lo = -(1 << (dp.data_width - 1))
        h = 1 << (dp.data_width - 2)
        values = [0, 1, -1, m, lo, h, -h, h + 1, h - 1, 2, -2]
        pairs = [(p, q) for p in values for q in values]
        first, second = zip(*pairs, strict=True)
        return {names[0]: np.array(first, dtype=dtype), names[1]: np.array(second, dtype=dtype)}

    @staticmethod
    def exact_ints(values: npt.ArrayLike, width: int) -> npt.NDArray[np.object_]:
        """Signed ``width``-bit codes as Python integers (for exact error arithmetic)."""
        half, mask = 1 << (width - 1), (1 << width) - 1
        return np.array([((int(v) + half) & mask) - half for v in np.asarray(values).ravel()], dtype=object)

    @staticmethod
    def output_ints(outputs: Outputs, name: str) -> npt.NDArray[np.object_]:
        """An output's codes as Python integers."""
        return np.array([int(v) for v in np.asarray(outputs[name]).ravel()], dtype=object)
