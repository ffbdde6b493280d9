"""rotate: a vector (x, y) turned by an angle, by circular rotation (Walther 1971)."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, ClassVar

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath
from benchgen.functions.base import IDEAL_DPS, Inputs, Outputs, Port
from benchgen.functions.circular import CircularDatapath, CircularFunction
from benchgen.hwlib import Builder, Final, Start
from benchgen.model import as_ints, dtype_for, iterate, round_drop, saturate, to_signed
from benchgen.netlist import Cat, Mux, Neg
from benchgen.reference import FLOAT64_MAX_DATA_WIDTH
from benchgen.spec import CoreSpec

__all__ = ["Rotate"]


class Rotate(CircularFunction):
    """(x, y) turned counter-clockwise by the angle: the quadrant fold (the vector negated
    where the angle moves by half a turn), the inputs times K_n (compensated), circular
    rotation."""

    name: ClassVar[str] = "rotate"
    mode: ClassVar[str] = "rotation"
    summary: ClassVar[str] = "a vector (x, y) turned by an angle (circular rotation)"
    options: ClassVar[tuple[str, ...]] = ("angle_guard_bits", "shifted_terms")

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> CircularDatapath:
        b, g = spec.data_width, guard_bits
        # A full-scale corner input has magnitude sqrt(2) 2^(b-1); a raw rotation grows it by
        # 1.6468 more (Andraka 1998): 2.33 2^(b-1) < 2^(b+1), so two integer bits on top.
        out_width = b + 1 if spec.gain == "compensated" else b + 2
        # The rounded value carries one bit above the output for the saturation to read.
        return self.circular_datapath(
            spec, iterations, g, xy_width=out_width + 1 + g, out_width=out_width,
            out_max=(1 << (out_width - 1)) - 1, z_frac=self.angle_z_frac(spec, g),
            angle_guard_bits=self.angle_guard(spec, g),
            k_frac=b + g + 2 if spec.gain == "compensated" else 0,
        )

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        b = dp.data_width
        data = f"two's complement, {b} bits"
        return (
            Port("in_x", b, True, data),
            Port("in_y", b, True, data),
            Port("in_angle", dp.angle_width, dp.radians, self.angle_doc(dp)),
        )

    def output_ports(self, dp: Datapath) -> tuple[Port, ...]:
        scale = "input scale" if dp.gain_mode == "compensated" else f"input scale times 1/K = 1/{dp.gain[:10]}"
        doc = f"two's complement, {dp.out_width} bits, {scale}"
        return (Port("out_x", dp.out_width, True, doc), Port("out_y", dp.out_width, True, doc))

    def describe(self, dp: Datapath) -> str:
        return (
            f"Rotation of a {dp.data_width}-bit vector by a {dp.angle_width}-bit angle ({dp.angle_unit}), "
            f"gain {dp.gain_mode}"
        )

    def model_bits(self, dp: Datapath) -> int:
        return max(dp.xy_width, dp.z_width, dp.angle_width) + 2

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        """The fold, the inputs times K_n, the rotation, rounding and saturation."""
        assert isinstance(dp, CircularDatapath)
        dtype = dtype_for(self.model_bits(dp))
        b = dp.data_width
        x = to_signed(as_ints(inputs["in_x"], b, dtype), b)
        y = to_signed(as_ints(inputs["in_y"], b, dtype), b)
        codes = as_ints(inputs["in_angle"], dp.angle_width, dtype) & ((1 << dp.angle_width) - 1)
        z, fold = self.fold(dp, codes)
        x = np.where(fold, -x, x)
        y = np.where(fold, -y, y)
        if dtype == object:
            x, y, z = x.astype(object), y.astype(object), z.astype(object)
        x, y, _ = iterate(dp, self.prescale(dp, x), self.prescale(dp, y), z, dtype)
        q_w = dp.out_width + 1
        return {
            "out_x": saturate(round_drop(x, dp.guard_bits, dp.rounding, q_w), dp.out_max),
            "out_y": saturate(round_drop(y, dp.guard_bits, dp.rounding, q_w), dp.out_max),
        }

    def corners(self, dp: Datapath) -> Inputs:
        dtype: Any = np.int64 if max(dp.angle_width, dp.data_width) <= 62 else object
        angles = self.angle_corners(dp.angle_width, dp.radians, dp.angle_frac)
        vectors = self.corner_vectors(dp.data_width)
        m = (1 << (dp.data_width - 1)) - 1
        lo = -(1 << (dp.data_width - 1))
        xs, ys, zs = [], [], []
        for k, a in enumerate(angles):
            for vx, vy in (vectors[k % len(vectors)], (m, m), (lo, lo)):
                xs.append(vx)
                ys.append(vy)
                zs.append(a)
        return {"in_x": np.array(xs, dtype=dtype), "in_y": np.array(ys, dtype=dtype), "in_angle": np.array(zs, dtype=dtype)}

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        """The directed vectors (short ones at every octave, axes, diagonals, corners), each at
        an angle near an octant edge and at a random angle."""
        vectors = self.directed_vectors(dp, rng, per_octave)
        angles = self.angles_near_octants(dp)
        cols: dict[str, list[int]] = {"in_x": [], "in_y": [], "in_angle": []}
        for k, (x, y) in enumerate(vectors):
            for a in (angles[k % len(angles)], self.random_angle(dp, rng)):
                cols["in_x"].append(x)
                cols["in_y"].append(y)
                cols["in_angle"].append(a)
        from benchgen.functions.base import pack

        return pack(cols, {"in_x": dp.data_width, "in_y": dp.data_width, "in_angle": dp.angle_width})

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        if dp.data_width > FLOAT64_MAX_DATA_WIDTH or dp.angle_width > FLOAT64_MAX_DATA_WIDTH:
            return self._ideal_wide(dp, inputs)
        x = np.asarray(inputs["in_x"], dtype=np.float64)
        y = np.asarray(inputs["in_y"], dtype=np.float64)
        signed = to_signed(np.asarray(inputs["in_angle"]).astype(np.int64), dp.angle_width).astype(np.float64)
        t = signed / 2.0**dp.angle_frac if dp.radians else signed * (2.0 * np.pi / 2.0**dp.angle_width)
        c, s = np.cos(t), np.sin(t)
        return {"out_x": x * c - y * s, "out_y": x * s + y * c}

    def _ideal_wide(self, dp: Datapath, inputs: Inputs) -> Outputs:
        """Past float64's precision: mpmath at 40 digits (a 60-bit product in float64 is off by
        up to 2^(60-53) LSB)."""
        b, a = dp.data_width, dp.angle_width

        def signed(values: npt.ArrayLike, width: int) -> list[int]:
            half, mask = 1 << (width - 1), (1 << width) - 1
            return [((int(v) + half) & mask) - half for v in np.asarray(values).ravel()]

        xs, ys = signed(inputs["in_x"], b), signed(inputs["in_y"], b)
        codes = signed(inputs["in_angle"], a) if dp.radians else [int(v) & ((1 << a) - 1) for v in np.asarray(inputs["in_angle"]).ravel()]
        out_x, out_y = [], []
        with mpmath.workdps(IDEAL_DPS):
            for x, y, c in zip(xs, ys, codes, strict=True):
                t = c / mpmath.mpf(2) ** dp.angle_frac if dp.radians else 2 * mpmath.pi * c / mpmath.mpf(2) ** a
                cos, sin = mpmath.cos(t), mpmath.sin(t)
                out_x.append(x * cos - y * sin)
                out_y.append(x * sin + y * cos)
        return {"out_x": np.array(out_x, dtype=object), "out_y": np.array(out_y, dtype=object)}

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        assert isinstance(dp, CircularDatapath)
        B = dp.data_width
        fold, z = self.hw_fold(b, dp)
        in_x, in_y = b.sig("in_x"), b.sig("in_y")
        x_ext = b.wire("x_in_ext", Cat((in_x[B - 1], in_x)))
        y_ext = b.wire("y_in_ext", Cat((in_y[B - 1], in_y)))
        x_folded = b.wire("x_folded", Mux(fold, Neg(x_ext), x_ext))
        y_folded = b.wire("y_folded", Mux(fold, Neg(y_ext), y_ext))
        starts, carried = self.hw_prescale_staged(b, dp, {"x_src": x_folded, "y_src": y_folded}, {"z_start": z})
        return Start(starts["x_start"], starts["y_start"], carried["z_start"])

    def front_stages(self, dp: Datapath) -> int:
        return self.prescale_front(dp)

    def hw_outputs(self, b: Builder, dp: Datapath, final: Final, side: Mapping[str, Any]) -> None:
        drops = self.drops(dp)
        for port, value, kept, drop in (
            ("fin_out_x", final.x, final.x_kept, drops["x"]),
            ("fin_out_y", final.y, final.y_kept, drops["y"]),
        ):
            q = b.round_q(port, value, dp.xy_width, drop, kept)
            b.saturate(port, q, dp.out_max)


FUNCTION = Rotate()
