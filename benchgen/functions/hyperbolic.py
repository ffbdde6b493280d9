"""What the hyperbolic functions share: the shift schedule with its repeats, the gain A_n, one
real-valued input, and the ideal computed from it (Walther 1971)."""

from __future__ import annotations

from typing import Any, ClassVar

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import MP_DIGITS, Datapath, atanh_at, check_width, check_z_only, hyperbolic_gain, hyperbolic_shifts
from benchgen.functions.base import IDEAL_DPS, WIDE_DATA_BITS, Function, Inputs, octave, pack
from benchgen.hwlib import Builder
from benchgen.model import INT64_MODEL_BITS, to_signed
from benchgen.reference import FLOAT64_MAX_DATA_WIDTH

__all__ = ["HyperbolicFunction", "normalising_directed", "power_of_two_corners"]


class HyperbolicFunction(Function):
    """Base of the hyperbolic functions: each iteration does x + d y 2^-s, y + d x 2^-s,
    z - d atanh(2^-s) with the shifts 1, 2, 3, 4, 4, ..., 13, 13, ... (Walther 1971)."""

    coordinates: ClassVar[str] = "hyperbolic"
    input_name: ClassVar[str]
    input_signed: ClassVar[bool] = True

    def common(self, spec: Any, iterations: int, guard_bits: int, z_frac: int) -> dict[str, Any]:
        """The fields every hyperbolic data path fills the same way, for the subclass's
        constructor (with its own widths and constants)."""
        if self.min_iterations > 1:
            check_z_only(self.name, iterations)
        shifts = hyperbolic_shifts(iterations)
        return {
            "function": self.name,
            "coordinates": "hyperbolic",
            "mode": self.mode,
            "angle_unit": "turns",
            "gain_mode": spec.gain if self.gain_applies else "compensated",
            "angle_width": spec.data_width,
            "data_width": spec.data_width,
            "iterations": iterations,
            "guard_bits": guard_bits,
            "rounding": spec.rounding,
            "z_frac": z_frac,
            "amplitude": (1 << (spec.data_width - 1)) - 1,
            "atan_table": tuple(atanh_at(s, z_frac) for s in shifts),
            "gain": self.gain_text(iterations) if self.gain_applies else "1",
            "shifts": shifts,
        }

    @staticmethod
    def gain_text(iterations: int) -> str:
        """1/A_n to 20 digits (computed at 60)."""
        with mpmath.workdps(MP_DIGITS):
            return mpmath.nstr(1 / hyperbolic_gain(iterations), 20)

    @staticmethod
    def inverse_gain(iterations: int) -> mpmath.mpf:
        """1/A_n at 60 digits: what a compensated core multiplies by."""
        with mpmath.workdps(MP_DIGITS):
            return 1 / hyperbolic_gain(iterations)


    # ---------------------------------------------------------------- documents

    def atan_comment(self, dp: Datapath, i: int) -> str:
        return f"atanh(2^-{dp.shifts[i]})"

    def gain_label(self, dp: Datapath) -> str:
        return f"compensation 1/A_n (iterations {dp.iterations}; raw outputs are A_n times the exact)"

    def header_gain(self, dp: Datapath) -> str:
        if not self.gain_applies:
            return ""
        how = self.compensation if dp.gain_mode == "compensated" else "left in: outputs are A_n times the exact result"
        return f"Gain: {dp.gain_mode} (A_n = 1/{dp.gain}, {how})."

    compensation: ClassVar[str] = "removed by the start value"

    def model_bits(self, dp: Datapath) -> int:
        return max(dp.xy_width, dp.z_width) + 2

    def int64_model(self, dp: Datapath) -> bool:
        if dp.data_width > WIDE_DATA_BITS:
            return False
        return self.model_bits(dp) <= INT64_MODEL_BITS

    # ---------------------------------------------------------------- stimulus and ideal

    def signed_corners(self, dp: Datapath) -> set[int]:
        """0, +-1, the ends of the format and +-1/2."""
        b = dp.data_width
        top, lo = (1 << (b - 1)) - 1, -(1 << (b - 1))
        return {0, 1, -1, top, lo, top - 1, lo + 1, 1 << (b - 2), -(1 << (b - 2))}

    def values(self, dp: Datapath, inputs: Inputs) -> tuple[list[Any] | npt.NDArray[np.float64], bool]:
        """The input port's real values: float64, or mpmath numbers past float64's precision."""
        width, signed = dp.data_width, self.input_signed
        raw = np.asarray(inputs[self.input_name])
        if dp.data_width > FLOAT64_MAX_DATA_WIDTH:
            scale = mpmath.mpf(2) ** -dp.in_frac
            half, mask = 1 << (width - 1), (1 << width) - 1
            # Codes or signed values alike: wrap to the port's width (as model.to_signed does).
            codes = [((int(v) + half) & mask) - half if signed else int(v) & mask for v in raw.ravel()]
            with mpmath.workdps(IDEAL_DPS):
                return [c * scale for c in codes], True
        vals = raw.astype(np.int64)
        vals = to_signed(vals, width) if signed else vals & np.int64((1 << width) - 1)
        return vals.astype(np.float64) / 2.0**dp.in_frac, False

    def each(self, dp: Datapath, values: list[Any], fn: Any) -> npt.NDArray[Any]:
        """mpmath ``fn`` of each value, in output LSBs."""
        with mpmath.workdps(IDEAL_DPS):
            scale = mpmath.mpf(2) ** dp.out_frac
            return np.array([fn(v) * scale for v in values], dtype=object)

    # ---------------------------------------------------------------- hardware

    def hw_start_constant(self, b: Builder, dp: Datapath, value: int) -> None:
        """``localparam X_START`` (declared where the template of old put it)."""
        b.param("X_START", value, dp.xy_width)


def power_of_two_corners(b: int) -> list[int]:
    """Zero, every power of two and one code either side (each normalising shift), the top."""
    codes: set[int] = set()
    for k in range(b):
        codes.update({(1 << k) - 1, 1 << k, (1 << k) + 1})
    codes.update({0, (1 << b) - 1, (1 << b) - 2})
    return sorted(c for c in codes if 0 <= c < (1 << b))


def normalising_directed(dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
    """Every power of two with 16 codes either side (each normalising shift), and random values
    in every octave."""
    b = dp.data_width
    values: list[int] = []
    for k in range(b):
        for j in range(-16, 17):
            v = (1 << k) + j
            if 0 <= v < 1 << b:
                values.append(v)
    for bits in range(1, b + 1):
        for _ in range(per_octave):
            values.append(octave(rng, bits))
    return pack({"in_w": values}, {"in_w": b})
