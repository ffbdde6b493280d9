"""mul: a b for fractions in [-1, 1), by linear rotation (Walther 1971)."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, ClassVar

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath
from benchgen.functions.base import Inputs, Outputs, Port, below, pack, signed_octaves
from benchgen.functions.linear import EXACT_FLOAT_LINEAR_BITS, LinearDatapath, LinearFunction
from benchgen.hwlib import Builder, Final, Start
from benchgen.model import as_ints, dtype_for, iterate, round_drop, saturate, to_signed
from benchgen.netlist import Const
from benchgen.reference import errors_lsb
from benchgen.spec import CoreSpec

__all__ = ["Mul"]


class Mul(LinearFunction):
    """a b: x holds a, z starts at b and is driven to 0 while y collects a b (each step adds
    +-a 2^-i to y and takes +-2^-i from z, so y ends at a b within a 2^-(n-1))."""

    name: ClassVar[str] = "mul"
    mode: ClassVar[str] = "rotation"
    summary: ClassVar[str] = "a b for fractions in [-1, 1) (linear rotation)"
    synonyms: ClassVar[tuple[str, ...]] = ("multiply",)

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> LinearDatapath:
        # |b| < 1 is inside the linear range of 2 (i from 0); z holds |z| < 2.
        return self.linear_datapath(spec, iterations, guard_bits, out_width=spec.data_width + 1, prenorm=False)

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        return self.fraction_ports(dp, ("in_a", "in_b"))

    def output_ports(self, dp: Datapath) -> tuple[Port, ...]:
        b = dp.data_width
        return (Port("out_product", dp.out_width, True, f"two's complement, {dp.out_width} bits with {b - 1} fraction bits"),)

    def describe(self, dp: Datapath) -> str:
        return f"Product of two {dp.data_width}-bit fractions by linear rotation"

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        """x = a, y = 0, z = b; the linear rotation; y rounded and saturated."""
        dtype = dtype_for(self.model_bits(dp))
        b, g = dp.data_width, dp.guard_bits
        a = to_signed(as_ints(inputs["in_a"], b, dtype), b)
        m = to_signed(as_ints(inputs["in_b"], b, dtype), b)
        x = a << g
        y = np.zeros_like(x)
        z = m << g
        _, y, _ = iterate(dp, x, y, z, dtype)
        q = round_drop(y, g, dp.rounding, dp.out_width + 1)
        return {"out_product": saturate(q, dp.out_max)}

    def corners(self, dp: Datapath) -> Inputs:
        return self.corner_pairs(dp, ("in_a", "in_b"))

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        """The ends of the range and values of every octave, each with a random partner, with
        the most negative value and with the largest."""
        b = dp.data_width
        top, lo = (1 << (b - 1)) - 1, -(1 << (b - 1))
        values = [0, 1, -1, top, lo, top - 1, lo + 1] + signed_octaves(rng, b, max(1, per_octave // 8))
        cols: dict[str, list[int]] = {"in_a": [], "in_b": []}
        for a in values:
            for partner in (values[below(rng, len(values))], lo, top):
                cols["in_a"].append(a)
                cols["in_b"].append(partner)
        return pack(cols, {"in_a": b, "in_b": b})

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        a = np.asarray(inputs["in_a"], dtype=np.float64)
        m = np.asarray(inputs["in_b"], dtype=np.float64)
        return {"out_product": a * m / 2.0 ** (dp.data_width - 1)}

    def judge(self, dp: Datapath, inputs: Inputs, outputs: Outputs, ideal: Outputs) -> dict[str, npt.NDArray[np.float64]]:
        """Wider than 26 bits the float64 product is off by up to 2^(b-54) LSB, so the error is
        formed exactly: (out 2^(b-1) - a b) / 2^(b-1) on integers, rounded to float64 once."""
        b = dp.data_width
        if b <= EXACT_FLOAT_LINEAR_BITS:
            return {"out_product": errors_lsb(outputs["out_product"], ideal["out_product"])}
        a, m = self.exact_ints(inputs["in_a"], b), self.exact_ints(inputs["in_b"], b)
        numer = self.output_ints(outputs, "out_product") * (1 << (b - 1)) - a * m
        return {"out_product": np.array([float(v) for v in numer], dtype=np.float64) / 2.0 ** (b - 1)}

    def final_values(self, dp: Datapath) -> tuple[bool, bool, bool]:
        return False, True, False

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        W, ZW = dp.xy_width, dp.z_width
        b.note("Linear rotation: x holds a, z starts at b and is driven to 0 while y collects a b.")
        in_a, in_b = b.sig("in_a"), b.sig("in_b")
        x = b.wire("x_start", b.internal(in_a, W), of="xy")
        y = b.wire("y_start", Const(0, W), of="xy")
        z = b.wire("z_start", b.internal(in_b, ZW), of="z")
        return Start(x, y, z)

    def hw_outputs(self, b: Builder, dp: Datapath, final: Final, side: Mapping[str, Any]) -> None:
        drop = self.drops(dp)["y"]
        q = b.round_q("fin_out_product", final.y, dp.xy_width, drop, final.y_kept)
        b.saturate("fin_out_product", q, dp.out_max)


FUNCTION = Mul()
