"""atan2: angle and magnitude of a vector, by circular vectoring (Walther 1971)."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, ClassVar

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath
from benchgen.functions.base import IDEAL_DPS, Inputs, Outputs, Port, pack
from benchgen.functions.circular import CircularDatapath, CircularFunction
from benchgen.hwlib import Builder, Final, Start
from benchgen.model import as_ints, dtype_for, iterate, redundant_sign_bits, round_drop, round_shift, to_signed
from benchgen.netlist import Cat, Const, Expr, Mux, Neg, Not, Or, Rep, Shl, Slice, Sra, Xor, And, Cmp
from benchgen.reference import FLOAT64_MAX_DATA_WIDTH, errors_lsb
from benchgen.spec import CoreSpec

__all__ = ["Atan2", "small_vector_limit"]


def small_vector_limit(dp: Datapath) -> int:
    """The angle budget holds for vectors at least this long.

    1 (every vector but the zero vector) for a prenormalised core; 1/16 of full scale for one
    built with ``prenormalise = false``, whose short vectors carry too few significant bits
    for a fine angle (see docs/error_analysis.md).
    """
    if getattr(dp, "prenorm_max", 0):
        return 1
    return 1 << max(0, dp.data_width - 5)


class Atan2(CircularFunction):
    """Angle and magnitude of (x, y), all four quadrants: the optional prenormalisation, the
    turn by half a turn of a vector with x < 0 (Walther 1971's pre-rotation by pi), the inputs
    times K_n (compensated), circular vectoring; z collects the angle, x the magnitude."""

    name: ClassVar[str] = "atan2"
    mode: ClassVar[str] = "vectoring"
    options: ClassVar[tuple[str, ...]] = ("prenormalise",)
    summary: ClassVar[str] = "angle and magnitude of a vector, all four quadrants (circular vectoring)"
    synonyms: ClassVar[tuple[str, ...]] = ("atan", "arctan", "arctan2", "phase", "magnitude", "hypot")
    unscaled_outputs: ClassVar[frozenset[str]] = frozenset({"out_angle"})

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> CircularDatapath:
        b, g = spec.data_width, guard_bits
        radians = spec.angle_unit == "radians"
        angle_frac = spec.angle_width - 3 if radians else spec.angle_width
        out_width = b + 1  # the magnitude: up to sqrt(2) 2^(b-1), or 2.33 2^(b-1) raw
        return self.circular_datapath(
            spec, iterations, g, xy_width=b + g + 2, out_width=out_width, out_max=(1 << out_width) - 1,
            # The angle is an output: resolve it to its port's LSB plus the guard bits.
            z_frac=angle_frac + g,
            k_frac=b + g + 2 if spec.gain == "compensated" else 0,
            prenorm=spec.prenormalise,
        )

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        b = dp.data_width
        data = f"two's complement, {b} bits"
        return (Port("in_x", b, True, data), Port("in_y", b, True, data))

    def output_ports(self, dp: Datapath) -> tuple[Port, ...]:
        scale = "input scale" if dp.gain_mode == "compensated" else f"input scale times 1/K = 1/{dp.gain[:10]}"
        return (
            Port("out_angle", dp.angle_width, True, self.angle_doc(dp) + (" (wraps)" if not dp.radians else "")),
            Port("out_magnitude", dp.out_width, False, f"unsigned, {dp.out_width} bits, {scale}"),
        )

    def describe(self, dp: Datapath) -> str:
        return (
            f"Angle ({dp.angle_unit}, {dp.angle_width} bits) and magnitude of a {dp.data_width}-bit vector, "
            f"gain {dp.gain_mode}"
        )

    def header_notes(self, dp: Datapath) -> list[str]:
        notes = [
            f"rounding       {dp.rounding} where guard bits are dropped",
            "the zero vector gives out_angle = 0 and out_magnitude = 0",
        ]
        if getattr(dp, "prenorm_max", 0):
            notes.append("(x, y) are prenormalised: the angle budget holds for every non-zero vector")
        else:
            notes.append(f"not prenormalised: the angle budget holds only for vectors at least {small_vector_limit(dp)} long")
        return notes

    def manifest_extras(self, dp: Datapath) -> dict[str, Any]:
        return {"atan2_angle_budget_min_magnitude": small_vector_limit(dp)}

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        """The prenormalisation, the turn of x < 0 by half a turn, the inputs times K_n, the
        vectoring, the angle rounded, the magnitude shifted back and rounded once."""
        assert isinstance(dp, CircularDatapath)
        dtype = dtype_for(self.model_bits(dp))
        b = dp.data_width
        x = to_signed(as_ints(inputs["in_x"], b, dtype), b)
        y = to_signed(as_ints(inputs["in_y"], b, dtype), b)
        zero = (x == 0) & (y == 0)
        shift = None
        if dp.prenorm_max:
            shift = redundant_sign_bits((x, y), b)
            shift_t = shift.astype(x.dtype)
            x = x << shift_t
            y = y << shift_t
        neg = x < 0
        if dp.radians:
            turn = np.where(y >= 0, dp.pi_const, -dp.pi_const)
        else:
            turn = np.full(x.shape, -(1 << (dp.z_width - 1)))  # half a turn; z wraps at a whole turn
        z = np.where(neg, turn, 0).astype(dtype)
        xv = np.where(neg, -x, x)
        yv = np.where(neg, -y, y)
        x_n, _, z_n = iterate(dp, self.prescale(dp, xv), self.prescale(dp, yv), z, dtype)
        angle = round_drop(z_n, dp.z_frac - dp.angle_frac, dp.rounding, dp.angle_width)
        angle = np.where(zero, 0, angle)
        if shift is None:
            mag = round_drop(x_n, dp.guard_bits, dp.rounding, dp.out_width + 1)
        else:
            mag = round_shift(x_n, shift + dp.guard_bits, dp.rounding)
        mag = np.where(mag < 0, 0, np.where(mag > dp.out_max, dp.out_max, mag))
        return {"out_angle": angle, "out_magnitude": mag}

    def corners(self, dp: Datapath) -> Inputs:
        dtype: Any = np.int64 if max(dp.angle_width, dp.data_width) <= 62 else object
        xs, ys = zip(*self.corner_vectors(dp.data_width), strict=True)
        return {"in_x": np.array(xs, dtype=dtype), "in_y": np.array(ys, dtype=dtype)}

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        """Short vectors of every length, random ones at each octave of their length, the
        axes and diagonals at each octave, the corners of the square."""
        vectors = self.directed_vectors(dp, rng, per_octave)
        return pack({"in_x": [v[0] for v in vectors], "in_y": [v[1] for v in vectors]},
                    {"in_x": dp.data_width, "in_y": dp.data_width})  # fmt: skip

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        if dp.data_width > FLOAT64_MAX_DATA_WIDTH or dp.angle_width > FLOAT64_MAX_DATA_WIDTH:
            return self._ideal_wide(dp, inputs)
        x = np.asarray(inputs["in_x"], dtype=np.float64)
        y = np.asarray(inputs["in_y"], dtype=np.float64)
        theta = np.arctan2(y, x)
        angle = theta * 2.0**dp.angle_frac if dp.radians else theta / (2 * np.pi) * 2.0**dp.angle_width
        return {"out_angle": angle, "out_magnitude": np.hypot(x, y)}

    def _ideal_wide(self, dp: Datapath, inputs: Inputs) -> Outputs:
        """Past float64's precision: mpmath at 40 digits."""
        b = dp.data_width
        half, mask = 1 << (b - 1), (1 << b) - 1
        xs = [((int(v) + half) & mask) - half for v in np.asarray(inputs["in_x"]).ravel()]
        ys = [((int(v) + half) & mask) - half for v in np.asarray(inputs["in_y"]).ravel()]
        angles, mags = [], []
        with mpmath.workdps(IDEAL_DPS):
            for x, y in zip(xs, ys, strict=True):
                theta = mpmath.atan2(y, x)
                angles.append(
                    theta * mpmath.mpf(2) ** dp.angle_frac if dp.radians else theta / (2 * mpmath.pi) * mpmath.mpf(2) ** dp.angle_width
                )
                mags.append(mpmath.hypot(x, y))
        return {"out_angle": np.array(angles, dtype=object), "out_magnitude": np.array(mags, dtype=object)}

    def judge(self, dp: Datapath, inputs: Inputs, outputs: Outputs, ideal: Outputs) -> dict[str, npt.NDArray[np.float64]]:
        """Angles wrap (turns), and are judged only for vectors at least
        :func:`small_vector_limit` long; the zero vector's angle is defined as 0 and not judged."""
        errs = {name: errors_lsb(outputs[name], ideal[name]) for name in ideal}
        e = errs["out_angle"]
        if not dp.radians:
            # A binary angle wraps: an error past half a turn is the same angle the other way.
            # Formed exactly: (e + full/2) % full in float64 would round a small error away
            # once the angle is wider than about 52 bits.
            ideal_angle = np.asarray(ideal["out_angle"])
            full = 1 << dp.angle_width
            if ideal_angle.dtype == object:
                with mpmath.workdps(IDEAL_DPS):
                    diffs = []
                    for o, i in zip(np.asarray(outputs["out_angle"]).ravel(), ideal_angle.ravel(), strict=True):
                        d = mpmath.mpf(int(o)) - i
                        d = d - full * mpmath.nint(d / full)
                        diffs.append(float(d))
                e = np.array(diffs, dtype=np.float64).reshape(e.shape)
            else:
                e = np.where(np.abs(e) > full / 2, e - np.sign(e) * float(full), e)
        x = np.asarray(inputs["in_x"], dtype=np.float64)
        y = np.asarray(inputs["in_y"], dtype=np.float64)
        errs["out_angle"] = np.where(np.hypot(x, y) >= small_vector_limit(dp), e, np.nan)
        return errs

    # ---------------------------------------------------------------- hardware

    def final_values(self, dp: Datapath) -> tuple[bool, bool, bool]:
        return True, False, True

    def side_signals(self, dp: Datapath) -> list[tuple[str, int]]:
        sides = [("zero", 1)]
        if getattr(dp, "prenorm_max", 0):
            sides.append(("shift", dp.prenorm_width))  # type: ignore[attr-defined]
        return sides

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        assert isinstance(dp, CircularDatapath)
        B, ZW = dp.data_width, dp.z_width
        b.note(
            "A vector with x < 0 is turned by half a turn first (Walther 1971) and the angle starts\n"
            "there. The zero vector is flagged: its angle is defined as 0."
        )
        in_x, in_y = b.sig("in_x"), b.sig("in_y")
        neg = b.wire("in_neg", in_x[B - 1])
        zero = b.wire("in_zero", And(Cmp("==", in_x, Const(0, B)), Cmp("==", in_y, Const(0, B))))
        side: dict[str, Expr] = {"zero": zero}
        if dp.prenorm_max:
            b.note(
                "Prenormalise: x and y shift left together by their common redundant sign bits, which\n"
                "leaves the angle as it is and puts the longer of the two in the top half of the format,\n"
                "so a short vector's angle is resolved as finely as a long one's. The magnitude is\n"
                "shifted back at the output."
            )
            below_sign = B - 2  # bits B-2 .. 1: bit 0 alone is what is left when all are 0
            bits = b.wire(
                "xy_bits",
                Or(Xor(Slice(in_x, B - 2, 1), Rep(below_sign, in_x[B - 1])), Xor(Slice(in_y, B - 2, 1), Rep(below_sign, in_y[B - 1]))),
                "the bits below the sign that differ from it, in x or y (their LSBs are never read)",
            )
            shift = b.leading_zeros("in_shift", bits, B - 3, B - 2, dp.prenorm_width, B - 2)
            side["shift"] = shift
            x_ext = b.wire("x_in_ext", Shl(Cat((in_x[B - 1], in_x)), shift))
            y_ext = b.wire("y_in_ext", Shl(Cat((in_y[B - 1], in_y)), shift))
        else:
            x_ext = b.wire("x_in_ext", Cat((in_x[B - 1], in_x)))
            y_ext = b.wire("y_in_ext", Cat((in_y[B - 1], in_y)))
        x_turned = b.wire("x_turned", Mux(neg, Neg(x_ext), x_ext))
        y_turned = b.wire("y_turned", Mux(neg, Neg(y_ext), y_ext))
        if dp.radians:
            z = b.wire("z_start", Mux(Not(neg), Const(0, ZW), Mux(in_y[B - 1], Const(-dp.pi_const, ZW), Const(dp.pi_const, ZW))), of="z")
        else:
            z = b.wire("z_start", Mux(neg, Const(1 << (ZW - 1), ZW), Const(0, ZW)), of="z")
        # the normaliser (a leading-sign count and two shifters) gets a clock of its own
        starts, carried = self.hw_prescale_staged(
            b, dp, {"x_src": x_turned, "y_src": y_turned}, {"z_start": z, **side}, input_stage=bool(dp.prenorm_max)
        )
        return Start(starts["x_start"], starts["y_start"], carried["z_start"], {k: carried[k] for k in side})

    def front_stages(self, dp: Datapath) -> int:
        assert isinstance(dp, CircularDatapath)
        return self.prescale_front(dp, input_stage=bool(dp.prenorm_max))

    def hw_outputs(self, b: Builder, dp: Datapath, final: Final, side: Mapping[str, Any]) -> None:
        W, G, A = dp.xy_width, dp.guard_bits, dp.angle_width
        drops = self.drops(dp)
        q = b.round_q("fin_out_angle", final.z, dp.z_width, drops["z"], final.z_kept)
        b.wire("fin_out_angle", Mux(side["zero"], Const(0, A), q))
        prenorm = getattr(dp, "prenorm_max", 0)
        if prenorm:
            b.note("undo the prenormalisation: shift right by it with every bit kept, then round once")
            if dp.rounding == "truncate":
                b.note("truncation: floor(x 2^-g 2^-s) = floor(floor(x 2^-g) 2^-s)")
                top = final.x_kept if final.x_kept is not None else Slice(final.x, W - 1, G)  # type: ignore[arg-type]
                mq = b.wire("fin_out_magnitude_q", Sra(top, side["shift"]))
            else:
                assert final.x is not None
                wide = b.wire("mag_wide", Sra(b.pad(final.x, prenorm), side["shift"]))
                mq = b.round_q("fin_out_magnitude", wide, W + prenorm, G + prenorm)
            qw = W - G
        else:
            mq = b.round_q("fin_out_magnitude", final.x, W, drops["x"], final.x_kept)
            qw = W - drops["x"]
        b.note("the magnitude is never negative; the clamp only reads the sign bit")
        b.wire("fin_out_magnitude", Mux(mq[qw - 1], Const(0, qw - 1), Slice(mq, qw - 2, 0)))


FUNCTION = Atan2()
