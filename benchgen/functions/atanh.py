"""atanh: the inverse hyperbolic tangent, by hyperbolic vectoring from (1, u, 0) (Walther 1971)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import HYPERBOLIC_RANGE, MP_DIGITS, Datapath, check_width
from benchgen.functions.base import Inputs, Outputs, Port, fixed_doc, pack, signed_octaves
from benchgen.functions.hyperbolic import HyperbolicFunction
from benchgen.hwlib import Builder, Final, Start
from benchgen.model import as_ints, dtype_for, iterate, round_drop, saturate, to_signed
from benchgen.netlist import Cat, Cmp, Const, Mux, Neg
from benchgen.reference import errors_lsb
from benchgen.spec import CoreSpec

__all__ = ["Atanh", "AtanhDatapath", "atanh_domain"]


@dataclass(frozen=True, kw_only=True)
class AtanhDatapath(Datapath):
    """Attributes: x_start: 1 at x's LSB; domain_limit: the largest |u| code inside the domain."""

    x_start: int = 0
    domain_limit: int = 0


def atanh_domain(dp: AtanhDatapath, u: npt.NDArray[Any]) -> npt.NDArray[np.bool_]:
    """True where |u| <= tanh(1.1182) (the hyperbolic vectoring range), as the core decides it."""
    return np.abs(u) <= dp.domain_limit


class Atanh(HyperbolicFunction):
    """atanh u for |u| <= tanh(1.1181730) = 0.806932 (mpmath): vectoring from (1, u, 0), z
    collects atanh u. Beyond the range the iterations cannot reach the angle: the sample is
    flagged and its result forced to 0 (no range extension)."""

    name: ClassVar[str] = "atanh"
    mode: ClassVar[str] = "vectoring"
    min_iterations: ClassVar[int] = 3
    input_name: ClassVar[str] = "in_u"
    summary: ClassVar[str] = "atanh u for abs(u) <= tanh 1.1182 = 0.806932, flagged beyond (hyperbolic vectoring)"

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> AtanhDatapath:
        b, g = spec.data_width, guard_bits
        in_frac, out_frac = b - 1, b - 2
        xy_frac = in_frac + g
        z_frac = out_frac + g
        common = self.common(spec, iterations, g, z_frac)
        with mpmath.workdps(MP_DIGITS):
            limit = mpmath.tanh(mpmath.mpf(HYPERBOLIC_RANGE))
            domain_limit = int(mpmath.floor(limit * mpmath.mpf(2) ** in_frac))
        xy_width = xy_frac + 3
        check_width(iterations, xy_width)
        return AtanhDatapath(
            **common, angle_frac=out_frac, xy_width=xy_width, z_width=z_frac + 3, out_width=b,
            out_max=(1 << (b - 1)) - 1, in_frac=in_frac, out_frac=out_frac, x_start=1 << xy_frac,
            domain_limit=domain_limit,
        )

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        return (Port("in_u", dp.data_width, True, fixed_doc(dp.data_width, dp.in_frac, True)),)

    def output_ports(self, dp: Datapath) -> tuple[Port, ...]:
        assert isinstance(dp, AtanhDatapath)
        b = dp.data_width
        return (
            Port("out_atanh", b, True, fixed_doc(b, dp.out_frac, True) + "; 0 when flagged"),
            Port("out_domain_error", 1, False, f"1 when |u| > {dp.domain_limit} / 2^{dp.in_frac} (beyond tanh 1.1182, the hyperbolic range)"),
        )

    def describe(self, dp: Datapath) -> str:
        return f"Inverse hyperbolic tangent of a {dp.data_width}-bit fraction by hyperbolic vectoring, with a domain flag"

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        assert isinstance(dp, AtanhDatapath)
        dtype = dtype_for(self.model_bits(dp))
        b = dp.data_width
        u = to_signed(as_ints(inputs["in_u"], b, dtype), b)
        ok = atanh_domain(dp, u)
        x = np.full(u.shape, dp.x_start, dtype=u.dtype)
        y = u << dp.guard_bits
        z = np.zeros_like(x)
        _, _, z = iterate(dp, x, y, z, dtype)
        q = saturate(round_drop(z, dp.z_frac - dp.out_frac, dp.rounding, dp.out_width + 1), dp.out_max)
        return {"out_atanh": np.where(ok, q, 0), "out_domain_error": (~ok).astype(q.dtype)}

    def corners(self, dp: Datapath) -> Inputs:
        assert isinstance(dp, AtanhDatapath)
        b = dp.data_width
        top, lo = (1 << (b - 1)) - 1, -(1 << (b - 1))
        codes = self.signed_corners(dp)
        for v in (dp.domain_limit, -dp.domain_limit):
            codes.update({v - 1, v, v + 1})
        dtype: Any = np.int64 if b <= 62 else object
        return {"in_u": np.array(sorted(c for c in codes if lo <= c <= top), dtype=dtype)}

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        """Random values at every octave of |u|, the ends of the format, and the domain edge
        with 64 codes either side."""
        assert isinstance(dp, AtanhDatapath)
        b = dp.data_width
        top, lo = (1 << (b - 1)) - 1, -(1 << (b - 1))
        values = signed_octaves(rng, b, per_octave)
        for j in range(64):
            values += [top - j, lo + j]
        for j in range(-64, 65):
            for v in (dp.domain_limit + j, -dp.domain_limit + j):
                if lo <= v <= top:
                    values.append(v)
        return pack({"in_u": values}, {"in_u": b})

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        values, wide = self.values(dp, inputs)
        if wide:
            return {"out_atanh": self.each(dp, values, lambda v: mpmath.atanh(v) if abs(v) < 1 else mpmath.mpf(0))}  # type: ignore[arg-type]
        v = np.asarray(values)
        inside = np.abs(v) < 1
        return {"out_atanh": np.where(inside, np.arctanh(np.where(inside, v, 0.0)), 0.0) * 2.0**dp.out_frac}

    def judge(self, dp: Datapath, inputs: Inputs, outputs: Outputs, ideal: Outputs) -> dict[str, npt.NDArray[np.float64]]:
        """Inside the domain only (beyond it the sample must carry the flag and a 0 result,
        bit for bit as the model)."""
        assert isinstance(dp, AtanhDatapath)
        err = errors_lsb(outputs["out_atanh"], ideal["out_atanh"])
        if dp.data_width <= 62:
            inside = atanh_domain(dp, to_signed(np.asarray(inputs["in_u"]).astype(np.int64), dp.data_width))
        else:
            inside = np.asarray(outputs["out_domain_error"]) == 0
        return {"out_atanh": np.where(inside, err, np.nan)}

    def final_values(self, dp: Datapath) -> tuple[bool, bool, bool]:
        return False, False, True

    def drops(self, dp: Datapath) -> dict[str, int]:
        return {"x": 0, "y": 0, "z": dp.z_frac - dp.out_frac}

    def side_signals(self, dp: Datapath) -> list[tuple[str, int]]:
        return [("bad", 1)]

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        assert isinstance(dp, AtanhDatapath)
        W, ZW, B = dp.xy_width, dp.z_width, dp.data_width
        b.note(
            "Hyperbolic vectoring of (1, u): z collects atanh(u). Beyond |u| <= tanh(1.1182) the\n"
            "iterations cannot reach the angle (Walther 1971): the sample is flagged, its result 0."
        )
        x0 = b.param("X_START", dp.x_start, W)
        in_u = b.sig("in_u")
        u_ext = b.wire("u_ext", Cat((in_u[B - 1], in_u)))
        u_abs = b.wire("u_abs", Mux(u_ext[B], Neg(u_ext), u_ext))
        bad = b.wire("in_bad", Cmp(">", u_abs, Const(dp.domain_limit, B + 1)))
        x = b.wire("x_start", x0, of="xy")
        y = b.wire("y_start", b.internal(in_u, W), of="xy")
        z = b.wire("z_start", Const(0, ZW), of="z")
        return Start(x, y, z, {"bad": bad})

    def hw_outputs(self, b: Builder, dp: Datapath, final: Final, side: Mapping[str, Any]) -> None:
        B = dp.data_width
        drop = self.drops(dp)["z"]
        q = b.round_q("atanh", final.z, dp.z_width, drop, final.z_kept)
        value = b.saturate("atanh", q, dp.out_max)
        b.wire("fin_out_atanh", Mux(side["bad"], Const(0, B), value))
        b.wire("fin_out_domain_error", side["bad"], vector=True)


FUNCTION = Atanh()
