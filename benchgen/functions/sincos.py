"""sincos: cosine and sine of an angle, by circular rotation from (K_n A, 0, t) (Walther 1971)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import replace
from typing import Any, ClassVar

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import MP_DIGITS, Datapath
from benchgen.functions.base import Inputs, Outputs, Port, octave, pack
from benchgen.functions.circular import CircularDatapath, CircularFunction
from benchgen.hwlib import Builder, Final, Start
from benchgen.model import BLOCK, dtype_for, iterate, round_drop, saturate, to_signed
from benchgen.netlist import Const, Mux, Sig
from benchgen.reference import FLOAT64_MAX_DATA_WIDTH
from benchgen.spec import CoreSpec

__all__ = ["SinCos", "ideal_sincos"]


def ideal_sincos(
    dp: Datapath, angles: npt.ArrayLike, *, use_mpmath: bool = False, dps: int = 40
) -> tuple[npt.NDArray[Any], npt.NDArray[Any]]:
    """amplitude * cos and amplitude * sin of angle codes (float64, or mpmath past 40 bits).

    A binary angle k / 2**N is exact in float64 (N <= 53) or within 2**-53 relative; 2 pi k / 2**N
    then carries at most about 2**-51 rad of error, and numpy's sin/cos add about one ulp, so the
    float64 ideal is off by less than 2**-51 * 2**39 < 1e-3 output LSB up to 40-bit outputs.

    Args:
        dp: The core's data path (for the angle width and amplitude).
        angles: Angle codes, taken modulo 2**angle_width.
        use_mpmath: Force the mpmath path (``dps`` decimal digits).
        dps: mpmath precision.
    """
    raw = np.asarray(angles)
    n_bits = dp.angle_width
    if use_mpmath or dp.data_width > FLOAT64_MAX_DATA_WIDTH:
        codes = [int(a) % (1 << n_bits) for a in raw.ravel()]
        cos = np.empty(len(codes), dtype=object)
        sin = np.empty(len(codes), dtype=object)
        with mpmath.workdps(dps):
            scale = 1 / mpmath.mpf(2) ** dp.angle_frac if dp.radians else 2 * mpmath.pi / mpmath.mpf(2) ** n_bits
            amp = mpmath.mpf(dp.amplitude)
            for k, code in enumerate(codes):
                signed = code - (1 << n_bits) if code >> (n_bits - 1) else code
                t = signed * scale
                cos[k] = amp * mpmath.cos(t)
                sin[k] = amp * mpmath.sin(t)
        return cos.reshape(raw.shape), sin.reshape(raw.shape)
    if raw.dtype == object:
        raw = np.array([int(a) % (1 << n_bits) for a in raw.ravel()], dtype=np.uint64).reshape(raw.shape)
    codes_arr = raw.astype(np.int64) & np.int64((1 << n_bits) - 1) if n_bits < 64 else raw.astype(np.uint64)
    signed_arr = to_signed(codes_arr.astype(np.int64), n_bits) if n_bits < 64 else codes_arr.astype(np.int64)
    scale_f = 1.0 / 2.0**dp.angle_frac if dp.radians else 2.0 * np.pi / 2.0**n_bits
    t_arr = signed_arr.astype(np.float64) * scale_f
    return dp.amplitude * np.cos(t_arr), dp.amplitude * np.sin(t_arr)


#: Angle widths up to which :meth:`SinCos.proved_range` evaluates every code (2^20 codes take
#: about a second; the sizer's exhaustive proof reaches the same width on a slow model).
RANGE_PROOF_BITS = 20


class SinCos(CircularFunction):
    """Cosine and sine of a binary or radian angle: the quadrant fold, then circular rotation
    of (K_n A, 0) by what remains (A the amplitude; raw: of (A, 0), the gain left in)."""

    name: ClassVar[str] = "sincos"
    mode: ClassVar[str] = "rotation"
    summary: ClassVar[str] = "cosine and sine of a binary or radian angle (circular rotation)"
    synonyms: ClassVar[tuple[str, ...]] = ("sin", "cos", "sine", "cosine")
    start_table: ClassVar[bool] = True
    spectral: ClassVar[bool] = True
    options: ClassVar[tuple[str, ...]] = ("angle_guard_bits", "shifted_terms", "table_head")

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> CircularDatapath:
        b, g = spec.data_width, guard_bits
        amplitude = (1 << (b - 1)) - 1
        if spec.gain == "raw":
            # x starts at the amplitude, and the outputs carry 1/K = 1.6468 (Andraka 1998) on
            # top of it, up to 1.65 2^(b-1): one more output bit, and one bit of headroom.
            out_width = b + 1
            xy_width = out_width + g + 1
            out_max = (1 << (out_width - 1)) - 1
        else:
            # Outputs of amplitude 2^(b-1)-1 and one bit of headroom.
            xy_width, out_width, out_max = b + g + 1, b, amplitude
        from benchgen.algorithm import circular_gain

        with mpmath.workdps(MP_DIGITS):
            start = circular_gain(iterations) if spec.gain == "compensated" else mpmath.mpf(1)
            x_start = int(mpmath.nint(start * amplitude * mpmath.mpf(2) ** g))
        return self.circular_datapath(
            spec, iterations, guard_bits, xy_width=xy_width, out_width=out_width, out_max=out_max,
            z_frac=self.angle_z_frac(spec, guard_bits), angle_guard_bits=self.angle_guard(spec, guard_bits),
            x_start=x_start,
        )

    # ---------------------------------------------------------------- ports and documents

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        return (Port("in_angle", dp.angle_width, dp.radians, self.angle_doc(dp)),)

    def output_ports(self, dp: Datapath) -> tuple[Port, ...]:
        doc = f"two's complement, {dp.out_width} bits, amplitude {dp.amplitude}"
        if dp.gain_mode == "raw":
            doc += f" times 1/K = 1/{dp.gain[:10]} (raw gain)"
        return (Port("out_cos", dp.out_width, True, doc), Port("out_sin", dp.out_width, True, doc))

    def describe(self, dp: Datapath) -> str:
        return f"Sine and cosine of a {dp.angle_width}-bit angle ({dp.angle_unit}), {dp.data_width}-bit outputs"

    def gain_label(self, dp: Datapath) -> str:
        if dp.gain_mode == "compensated":
            return f"gain K (iterations {dp.iterations}; removed by the start value)"
        return super().gain_label(dp)

    def header_gain(self, dp: Datapath) -> str:
        how = "removed by the start value" if dp.gain_mode == "compensated" else "left in: outputs are 1/K times the amplitude"
        return f"Gain: {dp.gain_mode} (K = {dp.gain}, {how})."

    def header_notes(self, dp: Datapath) -> list[str]:
        if not dp.xy_narrowed:
            return [f"rounding       {dp.rounding} where guard bits are dropped; data outputs saturate to +-{dp.out_max}"]
        n = 1 << dp.angle_width
        if not dp.saturates:
            return [
                f"rounding       {dp.rounding} where guard bits are dropped; no saturation: over every one of the",
                f"               {n} angle codes (evaluated when generated) the outputs stay within +-{dp.out_max}",
                f"               and x, y within {dp.xy_width} bits",
            ]
        return [
            f"rounding       {dp.rounding} where guard bits are dropped; x, y stay within {dp.xy_width} bits over every one",
            f"               of the {n} angle codes (evaluated when generated), so only the code -{dp.out_max + 1}",
            f"               can leave +-{dp.out_max}: it moves to -{dp.out_max}",
        ]

    # ---------------------------------------------------------------- range proof

    def proved_range(self, dp: Datapath) -> Datapath:
        """Without x/y's headroom bit, and without saturation, where no angle code needs them.

        Every angle code is run through the model's own iterations (int64, unwrapped) and the
        extremes of x and y after every iteration are kept, with the rounded outputs. x and y
        lose their headroom bit (``xy_narrowed``) only if, for every code, they fit
        ``xy_width - 1`` bits after every iteration (no register wraps) and the rounding add of
        the last values (plus at most half an output LSB) stays below the top of that width;
        the rounded output then fits ``out_width`` bits, and saturation can meet only the most
        negative code. Saturation is dropped too (``saturates = False``) if no code rounds
        beyond ``+-out_max``. Either way the core computes the same bits as the wide one on
        every input (tests/test_range_proof.py holds the models equal on every code).
        """
        assert isinstance(dp, CircularDatapath)
        if (
            dp.xy_narrowed
            or not dp.saturates
            or dp.angle_width > RANGE_PROOF_BITS
            or dp.iterations > dp.xy_width - 1
            or dp.out_max != (1 << (dp.out_width - 1)) - 1
            or dtype_for(self.model_bits(dp)) == object  # the visitor runs on the int64 path
        ):
            return dp
        limit = 1 << (dp.xy_width - 2)  # the narrower width's signed range: -limit .. limit - 1
        drop = self.drops(dp)["x"]
        slack = (1 << (drop - 1)) if drop and dp.rounding != "truncate" else 0
        low, high = 0, 0

        def each(_i: int, x: npt.NDArray[Any], y: npt.NDArray[Any]) -> None:
            nonlocal low, high
            low = min(low, int(x.min()), int(y.min()))
            high = max(high, int(x.max()), int(y.max()))

        out_w = dp.out_width + 1
        beyond = False  # a rounded output beyond +-out_max
        for lo in range(0, 1 << dp.angle_width, BLOCK):
            codes = np.arange(lo, min(lo + BLOCK, 1 << dp.angle_width), dtype=np.int64)
            z, fold = self.fold(dp, codes)
            x = np.where(fold, np.int64(-dp.x_start), np.int64(dp.x_start))
            x, y, _ = iterate(dp, x, np.zeros_like(x), z, np.int64, each=each)
            if low < -limit or high + slack >= limit:
                return dp
            for v in (x, y):
                q = round_drop(v, dp.guard_bits, dp.rounding, out_w)
                beyond = beyond or int(q.min()) < -dp.out_max or int(q.max()) > dp.out_max
        return replace(dp, xy_width=dp.xy_width - 1, xy_narrowed=True, saturates=beyond)

    # ---------------------------------------------------------------- model

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        """The quadrant fold, the rotation from (+-x_start, 0), rounding and saturation."""
        assert isinstance(dp, CircularDatapath)
        n_bits = dp.angle_width
        raw = np.asarray(inputs["in_angle"])
        dtype = dtype_for(self.model_bits(dp))
        if dtype == object or raw.dtype == object:
            codes = np.array([int(a) % (1 << n_bits) for a in raw.ravel()], dtype=object).reshape(raw.shape)
            dtype = object
        else:
            codes = raw.astype(np.int64) & np.int64((1 << n_bits) - 1)
        z, fold = self.fold(dp, codes)
        if dtype == object:
            x = np.array([-dp.x_start if f else dp.x_start for f in np.asarray(fold).ravel()], dtype=object).reshape(codes.shape)
        else:
            x = np.where(fold, np.int64(-dp.x_start), np.int64(dp.x_start))
        y = np.zeros_like(x)
        if dtype == object:
            z = z.astype(object)
        x, y, _ = iterate(dp, x, y, z, dtype)
        out: Outputs = {}
        for port, v in (("out_cos", x), ("out_sin", y)):
            q = round_drop(v, dp.guard_bits, dp.rounding, dp.out_width + 1)
            # without saturation only where every code was shown to stay in range (proved_range)
            out[port] = saturate(q, dp.out_max) if dp.saturates else q
        return out

    def tone(self, dp: Datapath, angles: npt.NDArray[Any]) -> npt.NDArray[Any]:
        """The sine output for the angle codes."""
        return self.model(dp, {"in_angle": angles})["out_sin"]

    # ---------------------------------------------------------------- stimulus

    def corners(self, dp: Datapath) -> Inputs:
        dtype: Any = np.int64 if max(dp.angle_width, dp.data_width) <= 62 else object
        return {"in_angle": np.array(self.angle_corners(dp.angle_width, dp.radians, dp.angle_frac), dtype=dtype)}

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        """Angles near every sixteenth of a turn, and small angles of either sign at every
        octave of their size."""
        angles = list(self.angles_near_octants(dp))
        for bits in range(1, dp.angle_width):
            for _ in range(per_octave):
                v = octave(rng, bits)
                angles.append(v)
                angles.append(-v if dp.radians else (1 << dp.angle_width) - v)
        return pack({"in_angle": angles}, {"in_angle": dp.angle_width})

    # ---------------------------------------------------------------- ideal

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        cos, sin = ideal_sincos(dp, inputs["in_angle"])
        return {"out_cos": cos, "out_sin": sin}

    # ---------------------------------------------------------------- hardware

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        return self.hw_start(b, dp)

    def hw_start(self, b: Builder, dp: Datapath, angle: Sig | None = None) -> Start:
        """The fold of ``angle`` (the angle port when None) and the start vector (+-x_start, 0);
        or, where the pipeline asks for it (:attr:`Builder.start_table`), the fold and the two
        vectors for its table."""
        assert isinstance(dp, CircularDatapath)
        W = dp.xy_width
        if b.start_table:
            fold, z = self.hw_fold(b, dp, angle)
            return Start(None, None, z, select=fold, vectors=((dp.x_start, 0), (-dp.x_start, 0)))
        what = " times K" if dp.gain_mode == "compensated" else " (raw gain)"
        pos = b.param("X_START_POS", dp.x_start, W, f"amplitude{what}, {dp.guard_bits} guard bits")
        neg = b.param("X_START_NEG", -dp.x_start, W, "the same, negated (fold)")
        fold, z = self.hw_fold(b, dp, angle)
        x = b.wire("x_start", Mux(fold, neg, pos), of="xy")
        y = b.wire("y_start", Const(0, W), of="xy")
        return Start(x, y, z)

    def hw_outputs(self, b: Builder, dp: Datapath, final: Final, side: Mapping[str, Any]) -> None:
        drops = self.drops(dp)
        for port, value, kept, drop in (
            ("fin_out_cos", final.x, final.x_kept, drops["x"]),
            ("fin_out_sin", final.y, final.y_kept, drops["y"]),
        ):
            q = b.round_q(port, value, dp.xy_width, drop, kept)
            if not dp.xy_narrowed:
                b.saturate(port, q, dp.out_max)
            elif dp.saturates:
                b.most_negative_up(port, q)
            else:
                assert q.width == dp.out_width
                b.wire(port, q, "no saturation: every angle code stays within range (header)")


FUNCTION = SinCos()
