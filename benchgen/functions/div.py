"""div: num / den, normalised, by linear vectoring (Walther 1971)."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, ClassVar

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath, check_z_only
from benchgen.functions.base import Inputs, Outputs, Port, octave, below, pack
from benchgen.functions.linear import EXACT_FLOAT_LINEAR_BITS, LinearDatapath, LinearFunction
from benchgen.hwlib import Builder, Final, Start
from benchgen.model import as_ints, dtype_for, iterate, redundant_sign_bits, round_drop, saturate, to_signed, wrap
from benchgen.netlist import Cat, Cmp, Const, Mux, Neg, Or, Rep, Shl, Slice, Xor
from benchgen.reference import errors_lsb
from benchgen.spec import CoreSpec

__all__ = ["Div", "div_domain"]


def div_domain(num: npt.NDArray[Any], den: npt.NDArray[Any]) -> npt.NDArray[np.bool_]:
    """True where num / den is inside the linear vectoring range: den != 0 and |num| < 2 |den|."""
    return (den != 0) & (np.abs(num) < 2 * np.abs(den))


class Div(LinearFunction):
    """num / den: num and den shifted left together by den's redundant sign bits (range
    extension: the quotient is unchanged, |den| lands in [1/2, 1]), then linear vectoring from
    (|den|, num negated with den, 0): y is driven to 0 and z collects num / den. Outside
    |num / den| < 2 the sample is flagged and its quotient forced to 0."""

    name: ClassVar[str] = "div"
    mode: ClassVar[str] = "vectoring"
    min_iterations: ClassVar[int] = 3
    output_frac_bits: ClassVar[int] = 2
    z_integer_bits: ClassVar[int] = 3  # the quotient, |z| < 4 on the way
    summary: ClassVar[str] = "num / den, normalised, flagged outside abs(num / den) < 2 (linear vectoring)"
    synonyms: ClassVar[tuple[str, ...]] = ("divide",)

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> LinearDatapath:
        dp = self.linear_datapath(spec, iterations, guard_bits, out_width=spec.data_width, prenorm=True)
        check_z_only(self.name, iterations)
        return dp

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        return self.fraction_ports(dp, ("in_num", "in_den"))

    def output_ports(self, dp: Datapath) -> tuple[Port, ...]:
        b = dp.data_width
        return (
            Port("out_quotient", b, True, f"two's complement, {b} bits with {b - 2} fraction bits, [-2, 2); 0 when flagged"),
            Port("out_domain_error", 1, False, "1 when den = 0 or |num / den| >= 2 (outside the linear range)"),
        )

    def describe(self, dp: Datapath) -> str:
        return f"Quotient of two {dp.data_width}-bit fractions by linear vectoring, with a domain flag"

    def header_notes(self, dp: Datapath) -> list[str]:
        return [
            f"rounding       {dp.rounding} where guard bits are dropped",
            "num and den are normalised by den's redundant sign bits: the budget holds for every pair",
            f"in the domain; a quotient between {dp.out_max} and 2^{dp.data_width - 2} LSBs saturates to +-{dp.out_max}",
        ]

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        """The domain flag, the normalisation, the vectoring, the quotient rounded, saturated
        and forced to 0 where flagged."""
        dtype = dtype_for(self.model_bits(dp))
        b, g = dp.data_width, dp.guard_bits
        num = to_signed(as_ints(inputs["in_num"], b, dtype), b)
        den = to_signed(as_ints(inputs["in_den"], b, dtype), b)
        ok = div_domain(num, den)
        shift = redundant_sign_bits((den,), b).astype(den.dtype)
        # In the domain |num| < 2 |den|, so the shifted num fits b + 1 bits; outside it the
        # register wraps (the quotient is flagged and forced to 0 there).
        num = wrap(num << shift, b + 1)
        den = den << shift
        neg = den < 0
        x = np.where(neg, -den, den) << g
        y = wrap(np.where(neg, -num, num), b + 1) << g
        z = np.zeros_like(x)
        _, _, z = iterate(dp, x, y, z, dtype)
        q = saturate(round_drop(z, g, dp.rounding, b + 1), dp.out_max)
        return {"out_quotient": np.where(ok, q, 0), "out_domain_error": (~ok).astype(q.dtype)}

    def corners(self, dp: Datapath) -> Inputs:
        return self.corner_pairs(dp, ("in_num", "in_den"))

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        """Every pair with |den| <= 16 inside the domain; random pairs at every octave of
        |den|; quotients near +-2 and +-1 at each octave; the most negative denominator."""
        b = dp.data_width
        top, lo = (1 << (b - 1)) - 1, -(1 << (b - 1))
        cols: dict[str, list[int]] = {"in_num": [], "in_den": []}

        def add(num: int, den: int) -> None:
            cols["in_num"].append(num)
            cols["in_den"].append(den)

        small = min(16, top)
        for den in range(-small, small + 1):
            if den == 0:
                continue
            for num in range(-2 * abs(den) + 1, 2 * abs(den)):
                if lo <= num <= top:
                    add(num, den)
        for bits in range(1, b):
            for _ in range(per_octave):
                mag = octave(rng, bits)
                den = -mag if rng.integers(0, 2) else mag
                span = min(2 * mag - 1, top)
                num = below(rng, 2 * span + 1) - span
                add(max(num, lo), den)
            mag = octave(rng, bits)
            for j in range(1, 5):  # quotients near +-2 and +-1
                for num in (2 * mag - j, -(2 * mag - j), mag - j + 2, -(mag - j + 2)):
                    if lo <= num <= top:
                        add(num, mag)
                        add(num, -mag)
        for num in (lo, lo + 1, top, -top, 1, -1, 0):
            add(num, lo)
        return pack(cols, {"in_num": b, "in_den": b})

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        num = np.asarray(inputs["in_num"], dtype=np.float64)
        den = np.asarray(inputs["in_den"], dtype=np.float64)
        with np.errstate(divide="ignore", invalid="ignore"):
            q = np.where(den != 0, num / np.where(den != 0, den, 1.0), 0.0)
        return {"out_quotient": q * 2.0 ** (dp.data_width - 2)}

    def judge(self, dp: Datapath, inputs: Inputs, outputs: Outputs, ideal: Outputs) -> dict[str, npt.NDArray[np.float64]]:
        """Every pair inside the domain. A quotient between the format's largest value
        (2 - 2^-(b-2)) and 2 saturates to it by design: it is judged against the ideal clamped
        to the format. Wider than 26 bits the error is formed exactly on integers."""
        b = dp.data_width
        num = np.asarray(inputs["in_num"]).astype(np.int64)
        den = np.asarray(inputs["in_den"]).astype(np.int64)
        inside = div_domain(num, den)
        if b > EXACT_FLOAT_LINEAR_BITS:
            err = self._exact_errors(dp, inputs, outputs)
        else:
            clamped = np.clip(np.asarray(ideal["out_quotient"], dtype=np.float64), -dp.out_max, dp.out_max)
            err = errors_lsb(outputs["out_quotient"], clamped)
        return {"out_quotient": np.where(inside, err, np.nan)}

    def _exact_errors(self, dp: Datapath, inputs: Inputs, outputs: Outputs) -> npt.NDArray[np.float64]:
        b = dp.data_width
        num, den = self.exact_ints(inputs["in_num"], b), self.exact_ints(inputs["in_den"], b)
        got = self.output_ints(outputs, "out_quotient")
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

    # ---------------------------------------------------------------- hardware

    def final_values(self, dp: Datapath) -> tuple[bool, bool, bool]:
        return False, False, True

    def drops(self, dp: Datapath) -> dict[str, int]:
        return {"x": dp.guard_bits, "y": 0, "z": dp.z_frac - dp.angle_frac}

    def side_signals(self, dp: Datapath) -> list[tuple[str, int]]:
        return [("bad", 1)]

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        assert isinstance(dp, LinearDatapath)
        W, ZW, B = dp.xy_width, dp.z_width, dp.data_width
        b.note(
            "Linear vectoring: x holds |den|, y starts at num (negated with den) and is driven to 0\n"
            "while z collects num / den. Outside |num| < 2 |den| (the linear range, Walther 1971) the\n"
            "sample is flagged and its quotient forced to 0."
        )
        in_num, in_den = b.sig("in_num"), b.sig("in_den")
        neg = b.wire("in_neg", in_den[B - 1])
        den_ext = b.wire("den_ext", Cat((in_den[B - 1], in_den)))
        num_ext = b.wire("num_ext", Cat((in_num[B - 1], in_num)))
        den_abs = b.wire("den_abs", Mux(neg, Neg(den_ext), den_ext))
        num_abs = b.wire("num_abs", Mux(num_ext[B], Neg(num_ext), num_ext))
        bad = b.wire(
            "in_bad",
            Or(Cmp("==", den_abs, Const(0, B + 1)), Cmp(">=", Cat((Const(0, 1), num_abs)), Cat((den_abs, Const(0, 1))))),
        )
        b.note(
            "Range extension: num and den shift left together by den's redundant sign bits, which\n"
            "leaves the quotient as it is and brings |den| into [1/2, 1], so a small denominator is\n"
            f"divided as finely as a large one. In the domain the shifted num fits {B + 1} bits."
        )
        bits = b.wire(
            "den_bits", Xor(Slice(in_den, B - 2, 1), Rep(B - 2, in_den[B - 1])),
            "den's bits below the sign, less its LSB (read only when all above are 0)",
        )
        shift = b.leading_zeros("in_shift", bits, B - 3, B - 2, dp.prenorm_width, B - 2)
        den_norm = b.wire("den_norm", Shl(den_ext, shift))
        num_norm = b.wire("num_norm", Shl(num_ext, shift))
        den_norm_abs = b.wire("den_norm_abs", Mux(neg, Neg(den_norm), den_norm))
        num_turned = b.wire("num_turned", Mux(neg, Neg(num_norm), num_norm))
        x = b.wire("x_start", b.internal(den_norm_abs, W), of="xy")
        y = b.wire("y_start", b.internal(num_turned, W), of="xy")
        z = b.wire("z_start", Const(0, ZW), of="z")
        return Start(x, y, z, {"bad": bad})

    def hw_outputs(self, b: Builder, dp: Datapath, final: Final, side: Mapping[str, Any]) -> None:
        B = dp.data_width
        drop = self.drops(dp)["z"]
        q = b.round_q("quotient", final.z, dp.z_width, drop, final.z_kept)
        quotient = b.saturate("quotient", q, dp.out_max)
        b.wire("fin_out_quotient", Mux(side["bad"], Const(0, B), quotient))
        b.wire("fin_out_domain_error", side["bad"], vector=True)


FUNCTION = Div()
