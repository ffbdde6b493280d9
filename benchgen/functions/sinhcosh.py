"""sinhcosh: cosh t and sinh t, by hyperbolic rotation from (1/A_n, 0, t) (Walther 1971)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import MP_DIGITS, Datapath, check_width
from benchgen.functions.base import Inputs, Outputs, Port, fixed_doc, pack, signed_octaves
from benchgen.functions.hyperbolic import HyperbolicFunction
from benchgen.hwlib import Builder, Final, Start
from benchgen.model import as_ints, dtype_for, iterate, round_drop, saturate, to_signed
from benchgen.netlist import Cat, Const, Rep
from benchgen.spec import CoreSpec

__all__ = ["SinhCosh", "SinhCoshDatapath"]


@dataclass(frozen=True, kw_only=True)
class SinhCoshDatapath(Datapath):
    """Attributes: x_start: x's start value, 1/A_n (raw: 1) at x's LSB."""

    x_start: int = 0


class SinhCosh(HyperbolicFunction):
    """cosh t and sinh t for t in [-1, 1) (inside the hyperbolic range 1.1182): rotation from
    (1/A_n, 0, t), or from (1, 0, t) with the gain A_n left in (raw)."""

    name: ClassVar[str] = "sinhcosh"
    mode: ClassVar[str] = "rotation"
    gain_applies: ClassVar[bool] = True
    input_name: ClassVar[str] = "in_t"
    summary: ClassVar[str] = "cosh t and sinh t for t in [-1, 1) (hyperbolic rotation)"
    synonyms: ClassVar[tuple[str, ...]] = ("sinh", "cosh")

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> SinhCoshDatapath:
        b, g = spec.data_width, guard_bits
        in_frac, out_frac = b - 1, b - 2
        xy_frac = out_frac + g
        xy_width = xy_frac + 3  # |x| < 1.21 cosh 1.12 = 2.05 on the way: [-4, 4)
        z_frac = b + g
        common = self.common(spec, iterations, g, z_frac)
        with mpmath.workdps(MP_DIGITS):
            start = self.inverse_gain(iterations) if spec.gain == "compensated" else mpmath.mpf(1)
            x_start = int(mpmath.nint(start * mpmath.mpf(2) ** xy_frac))
        check_width(iterations, xy_width)
        return SinhCoshDatapath(
            **common, angle_frac=out_frac, xy_width=xy_width, z_width=z_frac + 2, out_width=b,
            out_max=(1 << (b - 1)) - 1, in_frac=in_frac, out_frac=out_frac, x_start=x_start,
        )

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        return (Port("in_t", dp.data_width, True, fixed_doc(dp.data_width, dp.in_frac, True)),)

    def output_ports(self, dp: Datapath) -> tuple[Port, ...]:
        scaled = f"; raw gain: times A_n = 1/{dp.gain[:10]}" if dp.gain_mode == "raw" else ""
        doc = fixed_doc(dp.data_width, dp.out_frac, True) + scaled
        return (Port("out_cosh", dp.data_width, True, doc), Port("out_sinh", dp.data_width, True, doc))

    def describe(self, dp: Datapath) -> str:
        return (
            f"Hyperbolic cosine and sine of a {dp.data_width}-bit argument by hyperbolic rotation, "
            f"gain {dp.gain_mode}"
        )

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        assert isinstance(dp, SinhCoshDatapath)
        dtype = dtype_for(self.model_bits(dp))
        b = dp.data_width
        t = to_signed(as_ints(inputs["in_t"], b, dtype), b)
        z = t << (dp.z_frac - dp.in_frac)
        x = np.full(t.shape, dp.x_start, dtype=z.dtype)
        y = np.zeros_like(x)
        x, y, _ = iterate(dp, x, y, z, dtype)
        q_w = dp.out_width + 1
        return {
            "out_cosh": saturate(round_drop(x, dp.guard_bits, dp.rounding, q_w), dp.out_max),
            "out_sinh": saturate(round_drop(y, dp.guard_bits, dp.rounding, q_w), dp.out_max),
        }

    def corners(self, dp: Datapath) -> Inputs:
        dtype: Any = np.int64 if dp.data_width <= 62 else object
        return {"in_t": np.array(sorted(self.signed_corners(dp)), dtype=dtype)}

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        """Random values at every octave of |t|, both signs, and the ends of the format."""
        b = dp.data_width
        top, lo = (1 << (b - 1)) - 1, -(1 << (b - 1))
        values = signed_octaves(rng, b, per_octave)
        for j in range(64):
            values += [top - j, lo + j]
        return pack({"in_t": values}, {"in_t": b})

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        values, wide = self.values(dp, inputs)
        if wide:
            return {"out_cosh": self.each(dp, values, mpmath.cosh), "out_sinh": self.each(dp, values, mpmath.sinh)}  # type: ignore[arg-type]
        v = np.asarray(values)
        scale = 2.0**dp.out_frac
        return {"out_cosh": np.cosh(v) * scale, "out_sinh": np.sinh(v) * scale}

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        assert isinstance(dp, SinhCoshDatapath)
        W, ZW, B = dp.xy_width, dp.z_width, dp.data_width
        what = "1/A_n removes the gain" if dp.gain_mode == "compensated" else "1 (raw gain)"
        b.note(f"Hyperbolic rotation of (x0, 0) by t: x0 = {what}.")
        x0 = b.param("X_START", dp.x_start, W)
        x = b.wire("x_start", x0, of="xy")
        y = b.wire("y_start", Const(0, W), of="xy")
        in_t = b.sig("in_t")
        pad = dp.z_frac - dp.in_frac
        z = b.wire("z_start", Cat((Rep(ZW - B - pad, in_t[B - 1]), in_t, Const(0, pad))), of="z")
        return Start(x, y, z)

    def hw_outputs(self, b: Builder, dp: Datapath, final: Final, side: Mapping[str, Any]) -> None:
        drops = self.drops(dp)
        for port, value, kept, drop in (
            ("fin_out_cosh", final.x, final.x_kept, drops["x"]),
            ("fin_out_sinh", final.y, final.y_kept, drops["y"]),
        ):
            q = b.round_q(port, value, dp.xy_width, drop, kept)
            b.saturate(port, q, dp.out_max)


FUNCTION = SinhCosh()
