"""sqrt: the square root of a normalised fraction, by hyperbolic vectoring (Walther 1971)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import MP_DIGITS, Datapath, check_width
from benchgen.functions.base import Inputs, Outputs, Port, fixed_doc
from benchgen.functions.hyperbolic import HyperbolicFunction, normalising_directed, power_of_two_corners
from benchgen.hwlib import Builder, Final, Start
from benchgen.model import INT64_MODEL_BITS, dtype_for, iterate, leading_zeros, round_drop, unsigned
from benchgen.netlist import Add, Cat, Cmp, Const, Expr, Mul, Mux, Or, Shl, Slice, Sra
from benchgen.spec import CoreSpec

__all__ = ["Sqrt", "SqrtDatapath"]


@dataclass(frozen=True, kw_only=True)
class SqrtDatapath(Datapath):
    """A sqrt core's data path.

    Attributes:
        k_const: Compensated: 1/A_n at ``k_frac`` fraction bits (0 when raw).
        k_frac: Fraction bits of ``k_const``.
        quarter: The start offset 1/4 (times 1/A_n when compensated) at internal scale.
        lz_width: Bits of the leading-zero count.
        norm_max: The largest output shift (half the largest even normalising shift).
    """

    k_const: int = 0
    k_frac: int = 0
    quarter: int = 0
    lz_width: int = 0
    norm_max: int = 0


class Sqrt(HyperbolicFunction):
    """sqrt w for w in [0, 1): w = m 2^-2k with m in [1/4, 1) (an even normalising shift);
    vectoring from (m + 1/4, m - 1/4) ends with x = A_n sqrt(m), 1/A_n applied on the way in
    when compensated; sqrt w = sqrt(m) 2^-k, shifted back with every bit kept, rounded once."""

    name: ClassVar[str] = "sqrt"
    mode: ClassVar[str] = "vectoring"
    gain_applies: ClassVar[bool] = True
    input_name: ClassVar[str] = "in_w"
    input_signed: ClassVar[bool] = False
    compensation: ClassVar[str] = "removed by scaling the input"
    summary: ClassVar[str] = "sqrt w for w in [0, 1), or an integer square root (hyperbolic vectoring)"

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> SqrtDatapath:
        b, g = spec.data_width, guard_bits
        in_frac = out_frac = b
        xy_frac = in_frac + g
        xy_width = xy_frac + 3  # x starts at (m + 1/4) / A_n < 1.51
        z_frac = xy_frac
        common = self.common(spec, iterations, g, z_frac)
        compensated = spec.gain == "compensated"
        k_const = k_frac = 0
        with mpmath.workdps(MP_DIGITS):
            inv_a = self.inverse_gain(iterations)
            if compensated:
                k_frac = b + g + 2
                k_const = int(mpmath.nint(inv_a * mpmath.mpf(2) ** k_frac))
            quarter = (inv_a if compensated else mpmath.mpf(1)) / 4
            quarter_code = int(mpmath.nint(quarter * mpmath.mpf(2) ** xy_frac))
        check_width(iterations, xy_width)
        return SqrtDatapath(
            **common, angle_frac=out_frac, xy_width=xy_width, z_width=z_frac + 2, out_width=b,
            out_max=(1 << b) - 1, in_frac=in_frac, out_frac=out_frac, k_const=k_const, k_frac=k_frac,
            quarter=quarter_code, lz_width=max(1, (b - 1).bit_length()), norm_max=(b - 1) // 2,
        )

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        return (Port("in_w", dp.data_width, False, fixed_doc(dp.data_width, dp.in_frac, False)),)

    def output_ports(self, dp: Datapath) -> tuple[Port, ...]:
        scaled = f"; raw gain: times A_n = 1/{dp.gain[:10]}" if dp.gain_mode == "raw" else ""
        return (Port("out_sqrt", dp.data_width, False, fixed_doc(dp.data_width, dp.out_frac, False) + scaled),)

    def describe(self, dp: Datapath) -> str:
        return (
            f"Square root of a {dp.data_width}-bit unsigned fraction (normalised, hyperbolic vectoring), "
            f"gain {dp.gain_mode}"
        )

    def header_notes(self, dp: Datapath) -> list[str]:
        return [f"rounding       {dp.rounding} where guard bits are dropped; outputs clamp to [0, {dp.out_max}]"]

    def model_bits(self, dp: Datapath) -> int:
        assert isinstance(dp, SqrtDatapath)
        # The 1/A_n product is formed on Python integers where it is wider (see model()).
        return max(dp.xy_width + dp.norm_max, dp.z_width) + 2

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        assert isinstance(dp, SqrtDatapath)
        b, g = dp.data_width, dp.guard_bits
        dtype = dtype_for(self.model_bits(dp))
        w = unsigned(inputs["in_w"], b, dtype)
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
        wide_x = (x << dp.norm_max) >> half.astype(x.dtype)
        q = round_drop(wide_x, g + dp.norm_max, dp.rounding, dp.xy_width - g)
        q = np.where(q < 0, 0, np.where(q > dp.out_max, dp.out_max, q))
        return {"out_sqrt": np.where(w == 0, 0, q)}

    def corners(self, dp: Datapath) -> Inputs:
        return {"in_w": np.array(power_of_two_corners(dp.data_width), dtype=np.int64 if dp.data_width <= 62 else object)}

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        return normalising_directed(dp, rng, per_octave)

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        values, wide = self.values(dp, inputs)
        if wide:
            return {"out_sqrt": self.each(dp, values, mpmath.sqrt)}  # type: ignore[arg-type]
        return {"out_sqrt": np.sqrt(np.asarray(values)) * 2.0**dp.out_frac}

    # ---------------------------------------------------------------- hardware

    def carries(self, dp: Datapath) -> tuple[bool, bool]:
        return True, False  # z is never read: the result is x

    def final_values(self, dp: Datapath) -> tuple[bool, bool, bool]:
        return True, False, False

    def drops(self, dp: Datapath) -> dict[str, int]:
        # Truncation: floor(x 2^-k 2^-g) = floor(x 2^-g) 2^-k, so the final x drops g bits first.
        return {"x": dp.guard_bits, "y": 0, "z": 0}

    def side_signals(self, dp: Datapath) -> list[tuple[str, int]]:
        assert isinstance(dp, SqrtDatapath)
        return [("zero", 1), ("half", dp.norm_max.bit_length())]

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        assert isinstance(dp, SqrtDatapath)
        W, B, G = dp.xy_width, dp.data_width, dp.guard_bits
        b.note(
            "Normalise by an even shift 2k: m = w 2^2k in [1/4, 1), then hyperbolic vectoring of\n"
            "(m + 1/4, m - 1/4) gives x = A_n sqrt(m) (Walther 1971); sqrt(w) = sqrt(m) 2^-k."
        )
        in_w = b.sig("in_w")
        zero = b.wire("in_zero", Cmp("==", in_w, Const(0, B)))
        # Half the even normalising shift: the first pair of bits from the top with a 1.
        hw = dp.norm_max.bit_length()
        half_value: Expr = Const(dp.norm_max, hw)
        for k in reversed(range(dp.norm_max)):
            hi, lo = B - 1 - 2 * k, B - 2 - 2 * k
            cond = Or(in_w[hi], in_w[lo]) if lo >= 0 else in_w[hi]
            half_value = Mux(cond, Const(k, hw), half_value)
        half = b.wire("in_half", half_value)
        m = b.wire("in_m", Shl(in_w, Cat((half, Const(0, 1)))))
        if dp.k_frac:
            kw = dp.k_frac + 1
            pw = B + kw
            drop = dp.k_frac - G
            p_w = pw - drop
            assert W > p_w
            b.note(f"m times 1/A_n = {dp.gain[:12]} at {G} guard bits; the {drop} dropped bits round half up.")
            prod = b.wire("m_prod", Mul(Cat((Const(0, pw - B), m)), Const(dp.k_const, pw)))
            scaled = b.wire("m_scaled", b.scale_round("m_scaled", prod, drop, p_w))
            wide = b.wire("m_wide", Cat((Const(0, W - p_w), scaled)))
        else:
            wide = b.wire("m_wide", Cat((Const(0, W - B - G), m) + ((Const(0, G),) if G else ())))
        quarter = b.param("QUARTER", dp.quarter, W, "1/4" + (" times 1/A_n" if dp.k_frac else ""))
        x = b.wire("x_start", Add(wide, quarter), of="xy")
        y = b.wire("y_start", Add(wide, quarter, subtract=True), of="xy")
        return Start(x, y, None, {"zero": zero, "half": half})

    def hw_outputs(self, b: Builder, dp: Datapath, final: Final, side: Mapping[str, Any]) -> None:
        assert isinstance(dp, SqrtDatapath)
        W, G, B, nm = dp.xy_width, dp.guard_bits, dp.data_width, dp.norm_max
        b.note("undo the normalisation: shift right by k with every bit kept, then round once")
        if dp.rounding == "truncate":
            b.note("truncation: floor(x 2^-g 2^-k) = floor(floor(x 2^-g) 2^-k)")
            top = final.x_kept if final.x_kept is not None else Slice(final.x, W - 1, G)  # type: ignore[arg-type]
            q = b.wire("sq_q", Sra(top, side["half"]))
        else:
            assert final.x is not None
            wide = b.wire("sq_wide", Sra(b.pad(final.x, nm), side["half"]))
            q = b.round_q("sq", wide, W + nm, G + nm)
        value = b.clamp("sq_value", q, dp.out_max, B)
        b.wire("fin_out_sqrt", Mux(side["zero"], Const(0, B), value))


FUNCTION = Sqrt()
