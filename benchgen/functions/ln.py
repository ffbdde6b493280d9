"""ln: the natural logarithm of a normalised fraction, by hyperbolic vectoring (Walther 1971)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import MP_DIGITS, Datapath, check_width, log_int_bits
from benchgen.functions.base import Inputs, Outputs, Port, fixed_doc
from benchgen.functions.hyperbolic import HyperbolicFunction, normalising_directed, power_of_two_corners
from benchgen.hwlib import Builder, Final, Start
from benchgen.model import dtype_for, iterate, leading_zeros, round_drop, saturate, unsigned
from benchgen.netlist import Add, Cat, Cmp, Const, Mux, Not, Reg, Rep, Shl, Sig, Table
from benchgen.reference import errors_lsb
from benchgen.spec import CoreSpec

__all__ = ["Ln", "LnDatapath"]


@dataclass(frozen=True, kw_only=True)
class LnDatapath(Datapath):
    """An ln core's data path.

    Attributes:
        int_bits: L, the integer bits of the output (sign not counted).
        lz_width: Bits of the normalising shift e.
        ln2_table: e ln 2 at ``z_frac`` fraction bits for each normalising shift e.
    """

    int_bits: int = 0
    lz_width: int = 0
    ln2_table: tuple[int, ...] = ()


class Ln(HyperbolicFunction):
    """ln w for w in (0, 1): w = m 2^-e with m in [1/2, 1) (e the leading zeros); vectoring
    from (m + 1, m - 1, 0) gives z = atanh((m - 1)/(m + 1)) = ln(m) / 2; ln w = 2 z - e ln 2.
    w = 0 is flagged."""

    name: ClassVar[str] = "ln"
    mode: ClassVar[str] = "vectoring"
    min_iterations: ClassVar[int] = 3
    input_name: ClassVar[str] = "in_w"
    input_signed: ClassVar[bool] = False
    summary: ClassVar[str] = "ln w for w in (0, 1), normalised by leading zeros; w = 0 flagged (hyperbolic vectoring)"
    synonyms: ClassVar[tuple[str, ...]] = ("log",)

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> LnDatapath:
        b, g = spec.data_width, guard_bits
        L = log_int_bits(b)
        in_frac, out_frac = b, b - 1 - L
        xy_frac = in_frac + g
        xy_width = xy_frac + 3  # x starts at m + 1 < 2
        z_frac = out_frac + g + 1  # ln m is 2 z: one more bit
        common = self.common(spec, iterations, g, z_frac)
        with mpmath.workdps(MP_DIGITS):
            ln2 = mpmath.log(2)
            table = tuple(int(mpmath.nint(e * ln2 * mpmath.mpf(2) ** z_frac)) for e in range(b))
        check_width(iterations, xy_width)
        return LnDatapath(
            **common, angle_frac=out_frac, xy_width=xy_width, z_width=z_frac + 2, out_width=b,
            out_max=(1 << (b - 1)) - 1, in_frac=in_frac, out_frac=out_frac, int_bits=L,
            lz_width=max(1, (b - 1).bit_length()), ln2_table=table,
        )

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        return (Port("in_w", dp.data_width, False, fixed_doc(dp.data_width, dp.in_frac, False)),)

    def output_ports(self, dp: Datapath) -> tuple[Port, ...]:
        b = dp.data_width
        return (
            Port("out_ln", b, True, fixed_doc(b, dp.out_frac, True) + "; 0 when flagged"),
            Port("out_domain_error", 1, False, "1 when w = 0"),
        )

    def describe(self, dp: Datapath) -> str:
        return (
            f"Natural logarithm of a {dp.data_width}-bit unsigned fraction (normalised, hyperbolic vectoring), "
            "with a domain flag"
        )

    def model_bits(self, dp: Datapath) -> int:
        assert isinstance(dp, LnDatapath)
        return max(dp.xy_width, dp.z_width + dp.int_bits) + 3

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        assert isinstance(dp, LnDatapath)
        b = dp.data_width
        dtype = dtype_for(self.model_bits(dp))
        w = unsigned(inputs["in_w"], b, dtype)
        e = leading_zeros(w, b)
        m = (w << e.astype(w.dtype)) & ((1 << b) - 1)
        one = 1 << b
        x = (m + one) << dp.guard_bits
        y = (m - one) << dp.guard_bits
        z = np.zeros_like(x)
        _, _, z = iterate(dp, x, y, z, dtype)
        table = np.array(dp.ln2_table, dtype=z.dtype)
        res = (z << 1) - table[e]
        q = saturate(round_drop(res, dp.z_frac - dp.out_frac, dp.rounding, dp.out_width + 1), dp.out_max)
        bad = w == 0
        return {"out_ln": np.where(bad, 0, q), "out_domain_error": bad.astype(q.dtype)}

    def corners(self, dp: Datapath) -> Inputs:
        return {"in_w": np.array(power_of_two_corners(dp.data_width), dtype=np.int64 if dp.data_width <= 62 else object)}

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        return normalising_directed(dp, rng, per_octave)

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        values, wide = self.values(dp, inputs)
        if wide:
            return {"out_ln": self.each(dp, values, lambda v: mpmath.log(v) if v > 0 else mpmath.mpf(0))}  # type: ignore[arg-type]
        v = np.asarray(values)
        with np.errstate(divide="ignore", invalid="ignore"):
            return {"out_ln": np.where(v > 0, np.log(np.where(v > 0, v, 1.0)), 0.0) * 2.0**dp.out_frac}

    def judge(self, dp: Datapath, inputs: Inputs, outputs: Outputs, ideal: Outputs) -> dict[str, npt.NDArray[np.float64]]:
        """Every w but 0 (flagged, a 0 result, bit for bit as the model)."""
        w = np.asarray(inputs["in_w"])
        return {"out_ln": np.where(w != 0, errors_lsb(outputs["out_ln"], ideal["out_ln"]), np.nan)}

    # ---------------------------------------------------------------- hardware

    def final_values(self, dp: Datapath) -> tuple[bool, bool, bool]:
        return False, False, True

    def drops(self, dp: Datapath) -> dict[str, int]:
        # ln rounds 2 z - e ln 2, formed from the whole of z.
        return {"x": 0, "y": 0, "z": 0}

    def side_signals(self, dp: Datapath) -> list[tuple[str, int]]:
        assert isinstance(dp, LnDatapath)
        return [("bad", 1), ("lz", dp.lz_width)]

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        assert isinstance(dp, LnDatapath)
        W, ZW, B, G = dp.xy_width, dp.z_width, dp.data_width, dp.guard_bits
        b.note(
            "Normalise: w = m 2^-e with m in [1/2, 1) (e = leading zeros), then hyperbolic vectoring\n"
            "of (m + 1, m - 1) gives z = atanh((m - 1)/(m + 1)) = ln(m) / 2 (Walther 1971)."
        )
        in_w = b.sig("in_w")
        bad = b.wire("in_bad", Cmp("==", in_w, Const(0, B)))
        # Leading zeros: the index of the first 1 from the top (b - 1 when none).
        lz = b.leading_zeros("in_lz", in_w, B - 1, B - 1, dp.lz_width, B - 1)
        m = b.wire("in_m", Shl(in_w, lz))
        low = (Const(0, G),) if G else ()
        x = b.wire("x_start", Cat((Const(1, W - B - G), m) + low), of="xy")
        y = b.wire("y_start", Cat((Const(-1, W - B - G), m) + low), of="xy")
        z = b.wire("z_start", Const(0, ZW), of="z")
        return Start(x, y, z, {"bad": bad, "lz": lz})

    def hw_outputs(self, b: Builder, dp: Datapath, final: Final, side: Mapping[str, Any]) -> None:
        assert isinstance(dp, LnDatapath) and final.z is not None
        ZW, B = dp.z_width, dp.data_width
        rw = dp.z_frac + dp.int_bits + 2
        lzw = dp.lz_width
        b.note(f"ln w = 2 z - e ln 2, e ln 2 from a table of the {len(dp.ln2_table)} normalising shifts")
        e_ln2 = b.known(Sig("e_ln2", rw))
        b.m.add(Reg(e_ln2))
        full = len(dp.ln2_table) == 1 << lzw
        rows = tuple((e, (v,), f"{e} ln 2") for e, v in enumerate(dp.ln2_table))
        b.m.add(Table((e_ln2,), side["lz"], rows, None if full else (0,)))
        twice = b.wire("ln_twice", Cat((Rep(rw - ZW - 1, final.z[ZW - 1]), final.z, Const(0, 1))))
        drop = dp.z_frac - dp.out_frac
        if dp.rounding == "truncate":
            b.note("truncation: only the kept bits of 2 z - e ln 2 are formed, plus the carry of the rest")
            neg = b.wire("neg_e_ln2", Not(e_ln2))
            kept = b.kept_add("ln_sum", twice, neg, Const(1, 1), rw, drop)
            q = b.round_q("ln", None, rw, drop, kept)
        else:
            total = b.wire("ln_sum", Add(twice, e_ln2, subtract=True))
            q = b.round_q("ln", total, rw, drop)
        value = b.saturate("ln", q, dp.out_max)
        b.wire("fin_out_ln", Mux(side["bad"], Const(0, B), value))
        b.wire("fin_out_domain_error", side["bad"], vector=True)


FUNCTION = Ln()
