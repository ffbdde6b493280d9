"""exp: e^t as mantissa 2^exponent, by t = q ln 2 + r and hyperbolic rotation (Walther 1971)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import MP_DIGITS, Datapath, check_width, log_int_bits
from benchgen.functions.base import IDEAL_DPS, Inputs, Outputs, Port, fixed_doc, pack, signed_octaves
from benchgen.functions.hyperbolic import HyperbolicFunction
from benchgen.hwlib import Builder, Final, Start
from benchgen.model import as_ints, dtype_for, iterate, round_drop, to_signed
from benchgen.netlist import Add, And, Cat, Cmp, Const, Mul, Mux, Not, Rep, Slice
from benchgen.reference import errors_lsb
from benchgen.spec import CoreSpec

__all__ = ["Exp", "ExpDatapath", "exp_reduce"]


@dataclass(frozen=True, kw_only=True)
class ExpDatapath(Datapath):
    """An exp core's data path.

    Attributes:
        x_start: x's start value (x = y throughout), 1/A_n (raw: 1) at x's LSB.
        int_bits: L, the integer bits of the input (sign not counted).
        inv_ln2: 1/ln 2 at ``inv_ln2_shift - in_frac`` fraction bits (q's first guess).
        inv_ln2_shift: Fraction bits of the product t inv_ln2.
        ln2_const: ln 2 at ``z_frac`` fraction bits (the reduction t - q ln 2).
        exp_width: Bits of the exponent output.
    """

    x_start: int = 0
    int_bits: int = 0
    inv_ln2: int = 0
    inv_ln2_shift: int = 0
    ln2_const: int = 0
    exp_width: int = 0


def exp_reduce(dp: ExpDatapath, t: npt.NDArray[Any]) -> tuple[npt.NDArray[Any], npt.NDArray[Any]]:
    """t = q ln 2 + r with 0 <= r < ln 2: (q, r at ``z_frac`` fraction bits), as the hardware does.

    q starts as t 1/ln2 from a constant multiply (1/ln 2 at L + 2 fraction bits, within 1/8 of
    t / ln 2 over the whole input format), rounded half up: floor(t / ln 2) or one above, never
    below. Where the remainder t - q ln 2 is negative, q was one above: q - 1, remainder + ln 2.
    """
    prod = t * dp.inv_ln2
    drop = dp.inv_ln2_shift
    q = (prod >> drop) + ((prod & ((1 << drop) - 1)) >= (1 << (drop - 1))).astype(prod.dtype)
    rem = (t << (dp.z_frac - dp.in_frac)) - q * dp.ln2_const
    neg = rem < 0
    q = q - neg.astype(q.dtype)
    rem = rem + neg.astype(rem.dtype) * dp.ln2_const  # Python-int constant: exact on object arrays
    return q, rem


class Exp(HyperbolicFunction):
    """e^t = mantissa 2^exponent for every t of its format: t = q ln 2 + r, 0 <= r < ln 2;
    e^r from rotation of (1/A_n, 1/A_n, r) (x = y all the way, so only x is built); the
    exponent is q, or q + 1 where e^r rounds up to 2.0 (the mantissa is then 1.0)."""

    name: ClassVar[str] = "exp"
    mode: ClassVar[str] = "rotation"
    gain_applies: ClassVar[bool] = True
    input_name: ClassVar[str] = "in_t"
    summary: ClassVar[str] = "e^t as mantissa 2^exponent, for every t of its format (hyperbolic rotation)"

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> ExpDatapath:
        b, g = spec.data_width, guard_bits
        L = log_int_bits(b)
        in_frac, out_frac = b - 1 - L, b - 1
        xy_frac = out_frac + g
        xy_width = xy_frac + 4  # up to 1.21 e^1.24 = 4.2 on the way: [-8, 8)
        # z carries L + 2 more fraction bits than the output needs, so the reduction's q ln 2
        # (|q| < 2^(L+1)) stays within a quarter of an LSB of z's first b + g bits.
        z_frac = b + g + L + 2
        common = self.common(spec, iterations, g, z_frac)
        with mpmath.workdps(MP_DIGITS):
            ln2 = mpmath.log(2)
            start = self.inverse_gain(iterations) if spec.gain == "compensated" else mpmath.mpf(1)
            x_start = int(mpmath.nint(start * mpmath.mpf(2) ** xy_frac))
            # q's first guess: t (in_frac fraction bits) times 1/ln 2 at L + 2 fraction bits,
            # rounded: within 1/2 + 2^L 2^-(L+3) of t / ln 2, so floor(t / ln 2) or one above;
            # the remainder's sign then corrects it.
            shift = in_frac + L + 2
            q_lo = int(mpmath.floor(-(mpmath.mpf(2) ** L) / ln2))
            q_hi = int(mpmath.floor((mpmath.mpf(2) ** L - mpmath.mpf(2) ** -in_frac) / ln2))
            inv_ln2 = int(mpmath.nint(mpmath.mpf(2) ** (shift - in_frac) / ln2))
            ln2_const = int(mpmath.nint(ln2 * mpmath.mpf(2) ** z_frac))
        check_width(iterations, xy_width)
        return ExpDatapath(
            **common, angle_frac=out_frac, xy_width=xy_width, z_width=z_frac + 2, out_width=b,
            out_max=(1 << b) - 1, in_frac=in_frac, out_frac=out_frac, x_start=x_start, int_bits=L,
            inv_ln2=inv_ln2, inv_ln2_shift=shift, ln2_const=ln2_const,
            # q + 1 where the mantissa rounds up to 2.0
            exp_width=max((q_hi + 1).bit_length(), (-q_lo - 1).bit_length()) + 1,
        )

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        return (Port("in_t", dp.data_width, True, fixed_doc(dp.data_width, dp.in_frac, True)),)

    def output_ports(self, dp: Datapath) -> tuple[Port, ...]:
        assert isinstance(dp, ExpDatapath)
        scaled = f"; raw gain: times A_n = 1/{dp.gain[:10]}" if dp.gain_mode == "raw" else ""
        return (
            Port("out_mantissa", dp.data_width, False, fixed_doc(dp.data_width, dp.out_frac, False) + ", in [1, 2)" + scaled),
            Port("out_exponent", dp.exp_width, True, f"two's complement integer, {dp.exp_width} bits: e^t = mantissa 2^exponent"),
        )

    def describe(self, dp: Datapath) -> str:
        return (
            f"e^t of a {dp.data_width}-bit argument as mantissa and exponent (t = q ln 2 + r, hyperbolic "
            f"rotation), gain {dp.gain_mode}"
        )

    def header_notes(self, dp: Datapath) -> list[str]:
        return [
            f"rounding       {dp.rounding} where guard bits are dropped; a mantissa that rounds to 2.0 is 1.0 "
            "at the next exponent"
        ]

    def model_bits(self, dp: Datapath) -> int:
        assert isinstance(dp, ExpDatapath)
        b = dp.data_width
        # t 1/ln2 (|t| < 2^(b-1), the constant < 2^(L+3)); the remainder and q ln 2 (< 2^(L+1)
        # times ln 2 at z's fraction bits); the iterations.
        return max(b + dp.int_bits + 4, dp.z_frac + dp.int_bits + 4, dp.xy_width + 2)

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        assert isinstance(dp, ExpDatapath)
        b = dp.data_width
        dtype = dtype_for(self.model_bits(dp))
        t = to_signed(as_ints(inputs["in_t"], b, dtype), b)
        q, r = exp_reduce(dp, t)
        x = np.full(t.shape, dp.x_start, dtype=r.dtype)
        y = x.copy()
        x, _, _ = iterate(dp, x, y, r, dtype)
        m = round_drop(x, dp.guard_bits, dp.rounding, dp.xy_width - dp.guard_bits)
        # e^r just below 2 can round up to 2.0: that is mantissa 1.0 at the next exponent.
        carry = m > dp.out_max
        m = np.where(m < 0, 0, np.where(carry, 1 << (b - 1), m))
        return {"out_mantissa": m, "out_exponent": q + carry.astype(q.dtype)}

    def corners(self, dp: Datapath) -> Inputs:
        b = dp.data_width
        top, lo = (1 << (b - 1)) - 1, -(1 << (b - 1))
        codes = self.signed_corners(dp)
        # Multiples of ln 2 (where the exponent steps) and a code either side.
        scale = mpmath.mpf(2) ** dp.in_frac
        q = 0
        with mpmath.workdps(IDEAL_DPS):  # past 53 bits, default precision misses the step's code
            while True:
                v = int(mpmath.nint(q * mpmath.log(2) * scale))
                if v > top:
                    break
                codes.update({v - 1, v, v + 1, -v - 1, -v, -v + 1})
                q += 1
        dtype: Any = np.int64 if b <= 62 else object
        return {"in_t": np.array(sorted(c for c in codes if lo <= c <= top), dtype=dtype)}

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        """Random values at every octave of |t|, the ends of the format, and every exponent
        step (each multiple of ln 2) with 8 codes either side."""
        b = dp.data_width
        top, lo = (1 << (b - 1)) - 1, -(1 << (b - 1))
        values = signed_octaves(rng, b, per_octave)
        for j in range(64):
            values += [top - j, lo + j]
        with mpmath.workdps(IDEAL_DPS):
            scale = mpmath.mpf(2) ** dp.in_frac
            step = mpmath.log(2) * scale
            q = 0
            while q * step <= top + 8:
                centre = int(mpmath.nint(q * step))
                for j in range(-8, 9):
                    for v in (centre + j, -centre + j):
                        if lo <= v <= top:
                            values.append(v)
                q += 1
        return pack({"in_t": values}, {"in_t": b})

    def exponent(self, dp: Datapath, inputs: Inputs) -> npt.NDArray[np.int64]:
        """floor(t / ln 2): the exponent of e^t with its mantissa in [1, 2)."""
        values, wide = self.values(dp, inputs)
        if wide:
            with mpmath.workdps(IDEAL_DPS):
                return np.array([int(mpmath.floor(v / mpmath.log(2))) for v in values], dtype=np.int64)
        return np.floor(np.asarray(values) / np.log(2.0)).astype(np.int64)

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        values, wide = self.values(dp, inputs)
        if wide:
            with mpmath.workdps(IDEAL_DPS):  # ln 2 at 53 bits would put q ln 2 off by 2^15 LSB at 64 bits
                ln2 = mpmath.log(2)
            return {"out_mantissa": self.each(dp, values, lambda v: mpmath.exp(v - mpmath.floor(v / ln2) * ln2))}  # type: ignore[arg-type]
        v = np.asarray(values)
        q = np.floor(v / np.log(2.0))
        return {"out_mantissa": np.exp(v - q * np.log(2.0)) * 2.0**dp.out_frac}

    def judge(self, dp: Datapath, inputs: Inputs, outputs: Outputs, ideal: Outputs) -> dict[str, npt.NDArray[np.float64]]:
        """The mantissa in its own LSBs, at the exponent the core chose: where that differs
        from floor(t / ln 2) (possible only at a power-of-two boundary) the ideal mantissa is
        rescaled to it. The exponent is checked bit for bit against the model."""
        step = self.exponent(dp, inputs) - np.asarray(outputs["out_exponent"]).astype(np.int64)
        mant = ideal["out_mantissa"]
        if np.any(step):
            if mant.dtype == object:
                mant = np.array([m * mpmath.mpf(2) ** int(k) for m, k in zip(mant, step, strict=True)], dtype=object)
            else:
                mant = mant * np.exp2(step.astype(np.float64))
        return {"out_mantissa": errors_lsb(outputs["out_mantissa"], mant)}

    # ---------------------------------------------------------------- hardware

    def carries(self, dp: Datapath) -> tuple[bool, bool]:
        return False, True  # y equals x all the way (both start at 1/A_n)

    def final_values(self, dp: Datapath) -> tuple[bool, bool, bool]:
        return True, False, False

    def side_signals(self, dp: Datapath) -> list[tuple[str, int]]:
        assert isinstance(dp, ExpDatapath)
        return [("q", dp.exp_width)]

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        assert isinstance(dp, ExpDatapath)
        W, ZW, B = dp.xy_width, dp.z_width, dp.data_width
        s = dp.inv_ln2_shift
        qw = dp.exp_width + 1  # the first guess may be one above the largest exponent
        pw = s + qw
        # The remainder before correction lies in [-ln 2, ln 2): z's width holds it.
        t_bits = ZW - (dp.z_frac - dp.in_frac)
        assert t_bits <= B and pw > B and pw > dp.inv_ln2.bit_length()
        in_t = b.sig("in_t")
        b.note(
            "Range extension (Walther 1971): t = q ln 2 + r with 0 <= r < ln 2, so e^t = e^r 2^q.\n"
            "First guess of q: t times 1/ln 2, rounded half up: floor(t / ln 2) or one above."
        )
        inv = b.param("INV_LN2", dp.inv_ln2, pw)
        q_prod = b.wire("q_prod", Mul(Cat((Rep(pw - B, in_t[B - 1]), in_t)), inv))
        q_first = b.wire("q_first", b.scale_round("q_first", q_prod, s, qw))
        b.note(
            "The remainder t - q ln 2 lies in [-ln 2, ln 2) (only its low bits are formed): where it\n"
            "is negative the guess was one above, so q - 1 and the remainder + ln 2."
        )
        ln2 = b.param("LN2_Z", dp.ln2_const, ZW)
        t_low = b.wire("t_low", Cat((Slice(in_t, t_bits - 1, 0), Const(0, dp.z_frac - dp.in_frac))))
        q_ln2 = b.wire("q_ln2", Mul(Cat((Rep(ZW - qw, q_first[qw - 1]), q_first)), ln2))
        # Not `rem`: a VHDL reserved word; both printers keep the description's names.
        rem = b.wire("rem_first", Add(t_low, q_ln2, subtract=True))
        rem_neg = b.wire("rem_neg", rem[ZW - 1])
        ew = dp.exp_width
        in_q = b.wire("in_q", Add(Slice(q_first, ew - 1, 0), Cat((Const(0, ew - 1), rem_neg)), subtract=True))
        z = b.wire("z_start", Add(rem, Mux(rem_neg, ln2, Const(0, ZW))), of="z")
        what = "1/A_n removes the gain" if dp.gain_mode == "compensated" else "1 (raw gain)"
        b.note(f"e^r by hyperbolic rotation of (x0, x0) by r: x0 = {what}.")
        # Not X_START: VHDL ignores case, and the wire x_start below would hide it.
        x0 = b.param("X_INIT", dp.x_start, W)
        x = b.wire("x_start", x0, of="xy")
        return Start(x, None, z, {"q": in_q})

    def hw_outputs(self, b: Builder, dp: Datapath, final: Final, side: Mapping[str, Any]) -> None:
        assert isinstance(dp, ExpDatapath)
        W, B = dp.xy_width, dp.data_width
        drop = self.drops(dp)["x"]
        q = b.round_q("mant", final.x, W, drop, final.x_kept)
        qw = W - drop
        b.note(
            "e^r in [1, 2) (x never goes negative); a value that rounds up to 2.0 becomes mantissa 1.0\n"
            "at the next exponent"
        )
        neg = b.wire("mant_neg", q[qw - 1])
        carry = b.wire("mant_carry", And(Not(neg), Cmp("!=", Slice(q, qw - 2, B), Const(0, qw - 1 - B))))
        b.wire("fin_out_mantissa", Mux(neg, Const(0, B), Mux(carry, Const(1 << (B - 1), B), Slice(q, B - 1, 0))))
        ew = dp.exp_width
        b.wire("fin_out_exponent", Add(side["q"], Cat((Const(0, ew - 1), carry))))


FUNCTION = Exp()
