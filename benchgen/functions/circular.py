"""What the circular functions share: the angle port, the quadrant fold, the gain K_n.

sincos, rotate and atan2 each have a module of their own; this one holds their common data
path fields and the pieces two or three of them use: the angle formats and corners, the fold
of an input angle into the convergence range (model and hardware), and the multiplication of
input data by K_n that compensates the gain (model and hardware).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, ClassVar

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import (
    MP_DIGITS,
    RADIAN_INT_BITS,
    Datapath,
    atan_radians,
    atan_turns,
    check_width,
    circular_gain,
    csd_terms,
    pi_at,
)
from benchgen.functions.base import WIDE_ANGLE_BITS, WIDE_DATA_BITS, Function, below
from benchgen.hwlib import Builder
from benchgen.model import INT64_MODEL_BITS, to_signed
from benchgen.netlist import Add, Cat, Cmp, Const, Expr, Mul, Mux, Or, Rep, Sig, Slice, Xor
from benchgen.spec import CoreSpec

INT64_PRODUCT_BITS = 58
"""Widest gain-compensation product (data bits + 2 + the gain constant's fraction bits) the
int64 model forms, with a margin below int64's 63 for the rounding add; wider products run on
Python integers."""

__all__ = ["CircularDatapath", "CircularFunction"]


@dataclass(frozen=True, kw_only=True)
class CircularDatapath(Datapath):
    """A circular core's data path.

    Attributes:
        x_start: sincos: x's start value, amplitude times K_n (raw: the amplitude) at internal scale.
        k_const: rotate, atan2 compensated: K_n at ``k_frac`` fraction bits (0 when raw).
        k_frac: Fraction bits of ``k_const``.
        pi_const: Radians: pi at ``z_frac`` fraction bits (0 for turns).
        prenorm_max: The largest left shift an input normalisation applies (0: none).
        prenorm_width: Bits of that shift count.
    """

    x_start: int = 0
    k_const: int = 0
    k_frac: int = 0
    pi_const: int = 0
    prenorm_max: int = 0
    prenorm_width: int = 0


class CircularFunction(Function):
    """Base of the circular functions (Walther 1971's circular coordinates)."""

    coordinates: ClassVar[str] = "circular"
    angle_ports: ClassVar[bool] = True
    gain_applies: ClassVar[bool] = True

    # ---------------------------------------------------------------- data path

    def circular_datapath(
        self,
        spec: CoreSpec,
        iterations: int,
        guard_bits: int,
        *,
        xy_width: int,
        out_width: int,
        out_max: int,
        z_frac: int,
        angle_guard_bits: int | None = None,
        x_start: int = 0,
        k_frac: int = 0,
        prenorm: bool = False,
    ) -> CircularDatapath:
        """The data path of a circular core whose widths the function module chose."""
        a, b = spec.angle_width, spec.data_width
        radians = spec.angle_unit == "radians"
        angle_frac = a - RADIAN_INT_BITS if radians else a
        z_width = z_frac + RADIAN_INT_BITS if radians else z_frac
        check_width(iterations, xy_width)
        gain = circular_gain(iterations)
        k_const = 0
        if k_frac:
            with mpmath.workdps(MP_DIGITS):
                k_const = int(mpmath.nint(gain * mpmath.mpf(2) ** k_frac))
        table = tuple(atan_radians(i, z_frac) if radians else atan_turns(i, z_frac) for i in range(iterations))
        return CircularDatapath(
            function=self.name,
            coordinates="circular",
            mode=self.mode,
            angle_unit=spec.angle_unit,
            gain_mode=spec.gain,
            angle_width=a,
            angle_frac=angle_frac,
            data_width=b,
            iterations=iterations,
            guard_bits=guard_bits,
            rounding=spec.rounding,
            xy_width=xy_width,
            z_width=z_width,
            z_frac=z_frac,
            amplitude=(1 << (b - 1)) - 1,
            x_start=x_start,
            k_const=k_const,
            k_frac=k_frac,
            pi_const=pi_at(z_frac) if radians else 0,
            angle_guard_bits=angle_guard_bits,
            atan_table=table,
            gain=mpmath.nstr(gain, 20),
            out_width=out_width,
            out_max=out_max,
            shifts=tuple(range(iterations)),
            prenorm_max=b - 2 if prenorm else 0,
            prenorm_width=(b - 2).bit_length() if prenorm else 0,
            rounded_shifts="shifted_terms" in self.options and self.rounds_shifts(spec),
            table_head=spec.table_head if "table_head" in self.options else None,
        )

    def rounds_shifts(self, spec: CoreSpec) -> bool:
        """Whether the core rounds its shifted terms (:attr:`Datapath.rounded_shifts`).

        As ``shifted_terms`` says; unset, as ``rounding`` treats the bits the core drops: a core
        that rounds its outputs rounds its shifted terms too (half up, through each adder's
        carry-in: one XOR per adder, no adder bits), which reaches 1 LSB at 16 bits with x and
        y one bit narrower (docs/hardware.md step 6); a truncating core, the cheapest by choice,
        floors both. An iterative core, whose shift varies by clock, shifts by one less and then
        by a fixed one, so the bit below the shift is the bit that falls off (docs/hardware.md
        step 7). :meth:`circular_datapath` asks it for the functions that offer ``shifted_terms``."""
        if spec.shifted_terms is not None:
            return spec.shifted_terms == "rounded"
        return spec.rounding != "truncate"

    @staticmethod
    def angle_guard(spec: CoreSpec, guard_bits: int) -> int:
        """z's guard bits where the angle is an input: the config's ``angle_guard_bits`` (set,
        or picked by the sizer), else x and y's ``guard_bits``."""
        return guard_bits if spec.angle_guard_bits is None else spec.angle_guard_bits

    @staticmethod
    def angle_z_frac(spec: CoreSpec, guard_bits: int) -> int:
        """Fraction bits of z when the angle is an input: one output LSB is 1/amplitude rad,
        about 2^-(b-1) rad or 2^-(b + 1.65) turn, so b (radians) or b + 2 (turns) fraction
        bits plus z's guard bits (:meth:`angle_guard`) resolve it as finely as the output."""
        zg = CircularFunction.angle_guard(spec, guard_bits)
        if spec.angle_unit == "radians":
            return max(spec.angle_width - RADIAN_INT_BITS, spec.data_width + zg)
        return max(spec.angle_width, spec.data_width + 2 + zg)

    # ---------------------------------------------------------------- documents

    def angle_doc(self, dp: Datapath) -> str:
        """The angle port's format."""
        if dp.radians:
            return f"radians, signed fixed point, {dp.angle_width} bits with {dp.angle_frac} fraction bits, [-4, 4) rad"
        return f"binary angle, {dp.angle_width} bits, 2^{dp.angle_width} codes per turn"

    def atan_comment(self, dp: Datapath, i: int) -> str:
        """The comment beside iteration i's angle constant."""
        return f"atan(2^-{i}) in {'radians' if dp.radians else 'turns'}"

    def header_gain(self, dp: Datapath) -> str:
        """The RTL header's gain line."""
        how = (
            "removed by scaling the inputs" if dp.gain_mode == "compensated" else "left in: outputs are 1/K times the exact result"
        )
        return f"Gain: {dp.gain_mode} (K = {dp.gain}, {how})."

    def model_bits(self, dp: Datapath) -> int:
        return max(dp.xy_width, dp.z_width, dp.angle_width) + 2

    def int64_model(self, dp: Datapath) -> bool:
        if dp.data_width > WIDE_DATA_BITS or dp.angle_width > WIDE_ANGLE_BITS:
            return False
        # The gain multiply's product (the widest intermediate) must stay inside int64 with
        # room for the rounding add and the sign.
        product = dp.data_width + 2 + dp.k_frac if dp.k_frac else 0  # type: ignore[attr-defined]
        return product <= INT64_PRODUCT_BITS

    # ---------------------------------------------------------------- stimulus

    @staticmethod
    def angle_corners(width: int, radians: bool, frac: int) -> list[int]:
        """Quadrant and octant edges with a code either side, and the ends of the range."""
        full = 1 << width
        codes: set[int] = set()
        if radians:
            for num, den in ((0, 1), (1, 2), (-1, 2), (1, 1), (-1, 1), (1, 4), (-1, 4)):
                v = int(mpmath.nint(mpmath.pi * num / den * 2**frac))
                codes.update({v - 1, v, v + 1})
            codes.update({-(full // 2), full // 2 - 1})  # the ends of [-4, 4)
            return sorted(c for c in codes if -(full // 2) <= c < full // 2)
        for k in range(8):
            edge = k * full // 8
            codes.update({(edge - 1) % full, edge % full, (edge + 1) % full})
        codes.add(full // 2)  # the most negative code, read as signed: -1/2 turn
        codes.add(full - 1)
        return sorted(to_signed(np.array([c], dtype=object), width)[0] if width > 62 else c for c in codes)

    @staticmethod
    def corner_vectors(data_width: int) -> list[tuple[int, int]]:
        """Full-scale and unit vectors on the axes and diagonals, the most negative codes."""
        m = (1 << (data_width - 1)) - 1
        lo = -(1 << (data_width - 1))
        return [(m, 0), (0, m), (-m, 0), (0, -m), (m, m), (-m, m), (m, -m), (-m, -m), (lo, lo), (lo, 0), (0, lo),
                (lo, m), (m, lo), (1, 0), (0, 1), (-1, 0), (0, -1), (1, 1), (-1, -1), (-1, 1), (1, -1),
                (lo, -1), (lo, 1), (0, 0), (m, 1), (m, -1)]  # fmt: skip

    @staticmethod
    def angles_near_octants(dp: Datapath) -> list[int]:
        """Every sixteenth of a turn and 8 codes either side."""
        a = dp.angle_width
        full = 1 << a
        out = []
        for k in range(16):
            edge = k * full // 16
            for j in range(-8, 9):
                v = (edge + j) % full
                out.append(v - full if dp.radians and v >= full // 2 else v)
        if dp.radians:
            out = [v for v in out if -(full // 2) <= v < full // 2]
        return out

    @staticmethod
    def random_angle(dp: Datapath, rng: np.random.Generator) -> int:
        """A uniform random angle code."""
        v = below(rng, 1 << dp.angle_width)
        return v - (1 << dp.angle_width) if dp.radians and v >= 1 << (dp.angle_width - 1) else v

    @staticmethod
    def directed_vectors(dp: Datapath, rng: np.random.Generator, per_octave: int) -> list[tuple[int, int]]:
        """Short vectors of every length, random ones per octave of their length, the axes and
        diagonals at each octave, and the corners of the square."""
        b = dp.data_width
        top = (1 << (b - 1)) - 1
        lo = -(1 << (b - 1))
        from benchgen.functions.base import octave

        vectors: list[tuple[int, int]] = []
        small = min(8, top)
        vectors += [(x, y) for x in range(-small, small + 1) for y in range(-small, small + 1)]
        for bits in range(1, b):
            for _ in range(per_octave):
                big = octave(rng, bits)
                other = below(rng, big + 1)
                x, y = (big, other) if rng.integers(0, 2) else (other, big)
                x = -x if rng.integers(0, 2) else x
                y = -y if rng.integers(0, 2) else y
                vectors.append((max(x, lo), max(y, lo)))
            v = octave(rng, bits)
            for sx, sy in ((1, 1), (1, -1), (-1, 1), (-1, -1)):  # diagonals
                vectors.append((sx * v, sy * v))
            for j in range(-3, 4):  # near the axes
                vectors += [(v, j), (-v, j), (j, v), (j, -v)]
        vectors += [(lo, lo), (lo, 0), (0, lo), (lo, top), (top, lo), (top, top), (lo, -1), (-1, lo)]
        return vectors

    # ---------------------------------------------------------------- model pieces

    @staticmethod
    def fold(dp: CircularDatapath, codes: npt.NDArray[Any]) -> tuple[npt.NDArray[Any], npt.NDArray[Any]]:
        """Quadrant fold of an angle port value: (z at internal scale, True where the vector
        turns by pi).

        Turns: angles in the left half-plane (top two bits 01 or 10) are turned by half a turn
        (flip the MSB). Radians: angles beyond +-pi/2 move by -+pi (the port spans [-4, 4) rad,
        so what is left is within +-pi/2). Either way the rest is inside the +-99.88 degree
        convergence range (Walther 1971), and the vector starts negated instead.
        """
        n_bits = dp.angle_width
        if dp.radians:
            theta = to_signed(codes, n_bits) << (dp.z_frac - dp.angle_frac)
            half_pi = dp.pi_const >> 1
            over = theta > half_pi
            under = theta < -half_pi
            z = np.where(over, theta - dp.pi_const, np.where(under, theta + dp.pi_const, theta))
            return z, over | under
        fold = (((codes >> (n_bits - 1)) ^ (codes >> (n_bits - 2))) & 1).astype(bool)
        folded = codes ^ (fold.astype(codes.dtype) << (n_bits - 1))
        z = to_signed(folded, n_bits) << (dp.z_width - n_bits)
        return z, fold

    def z_start_range(self, dp: Datapath) -> tuple[int, int] | None:
        """A rotation starts from the folded angle (sincos, rotate)."""
        return self.fold_range(dp) if dp.mode == "rotation" else None  # type: ignore[arg-type]

    @staticmethod
    def fold_range(dp: CircularDatapath) -> tuple[int, int]:
        """Bounds of z after :meth:`fold`, over every angle code (z codes)."""
        a, zw = dp.angle_width, dp.z_width
        if not dp.radians:
            # the folded angle's top two bits are equal: within [-1/4, 1/4) turn
            return -(1 << (zw - 2)), (1 << (zw - 2)) - (1 << (zw - a))
        pad = dp.z_frac - dp.angle_frac
        top, bottom = ((1 << (a - 1)) - 1) << pad, -(1 << (a - 1)) << pad
        half_pi, pi = dp.pi_const >> 1, dp.pi_const
        # kept within +-pi/2; above it moved down by pi, below it up by pi
        lo = min(-half_pi, half_pi + 1 - pi, bottom + pi)
        hi = max(half_pi, top - pi, -half_pi - 1 + pi)
        return lo, hi

    @staticmethod
    def prescale(dp: CircularDatapath, values: npt.NDArray[Any]) -> npt.NDArray[Any]:
        """Input data at internal scale: times K_n with the guard bits (compensated), or
        shifted (raw).

        The product's dropped bits round half up, read from all of them, as the hardware does.
        A product too wide for int64 is formed on Python integers and the rounded value (x's
        width) comes back to int64.
        """
        if dp.gain_mode == "raw":
            return values << dp.guard_bits
        drop = dp.k_frac - dp.guard_bits
        product_bits = dp.data_width + 1 + dp.k_frac + 1
        wide = values.dtype != object and product_bits > INT64_MODEL_BITS
        product = (values.astype(object) if wide else values) * dp.k_const
        scaled = (product >> drop) + ((product & ((1 << drop) - 1)) >= (1 << (drop - 1))).astype(product.dtype)
        return scaled.astype(np.int64) if wide else scaled

    # ---------------------------------------------------------------- hardware pieces

    angle_signal: ClassVar[str] = "in_angle"
    """The signal the fold reads: the angle port, or a wire that forms the angle (an NCO's
    truncated phase)."""

    def hw_fold(self, b: Builder, dp: CircularDatapath, angle: Sig | None = None) -> tuple[Sig, Sig]:
        """The fold of the angle (``angle``, default the signal :attr:`angle_signal`):
        (``in_fold``, ``z_start``)."""
        angle = b.sig(self.angle_signal) if angle is None else angle
        A, ZW = dp.angle_width, dp.z_width
        if dp.radians:
            b.note(
                "Fold: an angle beyond +-pi/2 moves by -+pi and the vector starts negated instead, so\n"
                "what remains is within +-pi/2, inside the +-99.88 degree convergence range."
            )
            pi = b.param("PI", dp.pi_const, ZW)
            neg_pi = b.param("NEG_PI", -dp.pi_const, ZW)
            half_pi = b.param("HALF_PI", dp.pi_const >> 1, ZW)
            neg_half_pi = b.param("NEG_HALF_PI", -(dp.pi_const >> 1), ZW)
            pad = dp.z_frac - dp.angle_frac
            theta = b.wire("theta", b.pad(angle, pad))
            over = b.wire("fold_over", Cmp(">", theta, half_pi, signed=True))
            under = b.wire("fold_under", Cmp("<", theta, neg_half_pi, signed=True))
            fold = b.wire("in_fold", Or(over, under))
            z = b.wire("z_start", Mux(over, Add(theta, neg_pi), Mux(under, Add(theta, pi), theta)), of="z")
            return fold, z
        b.note(
            "Quadrant fold: an angle in the left half-plane (top two bits differ) is turned by half a\n"
            "turn, which flips its MSB and leaves the top two bits equal, and the vector starts\n"
            "negated instead. What remains is within +-1/4 turn, inside the +-99.88 degree\n"
            "convergence range."
        )
        fold = b.wire("in_fold", Xor(angle[A - 1], angle[A - 2]))
        pad = ZW - A
        z = b.wire("z_start", b.pad(Cat((angle[A - 2], Slice(angle, A - 2, 0))), pad), of="z")
        return fold, z

    @staticmethod
    def prescale_levels(dp: CircularDatapath) -> int:
        """Adder levels of the staged multiply by K_n: its signed digits and the rounding's
        half-LSB summed pairwise."""
        terms = len(csd_terms(dp.k_const)) + 1
        return (terms - 1).bit_length()

    def prescale_front(self, dp: Datapath, input_stage: bool = False) -> int:
        """Register stages of the input logic in a pipeline: one after the input's own logic
        (fold or turn, prenormalisation) and one after each adder level of the multiply by K_n
        where compensated; a raw core's input logic shares the first iteration's clock unless
        ``input_stage`` (logic as long as an iteration of its own, such as a normaliser)."""
        assert isinstance(dp, CircularDatapath)
        if dp.gain_mode == "compensated":
            return 1 + self.prescale_levels(dp)
        return 1 if input_stage else 0

    def hw_prescale_staged(
        self,
        b: Builder,
        dp: CircularDatapath,
        srcs: dict[str, Sig],
        carry: dict[str, Expr],
        *,
        input_stage: bool = False,
    ) -> tuple[dict[str, Sig], dict[str, Sig]]:
        """``x_start`` and ``y_start`` from the (b+1)-bit ``srcs`` (``x_src``, ``y_src``), times
        K_n where compensated, and ``carry`` (values the logic after them reads), passed
        through the same register stages.

        In a pipeline the multiply is a tree of adders over the signed digits of K_n (plus the
        rounding's half LSB as one more term), one adder level per register stage, so no path
        is longer than one adder: the exact product as one multiplier forms it, rounded half up
        as before. Elsewhere (iterative cores) it is the same arithmetic in one clock.
        """
        compensated = dp.gain_mode == "compensated"
        if b.front is None or not (compensated or input_stage):
            starts = {
                "x_start": self.hw_prescale(b, dp, "x_start", srcs["x_src"]),
                "y_start": self.hw_prescale(b, dp, "y_start", srcs["y_src"]),
            }
            return starts, {n: v if isinstance(v, Sig) else b.wire(n, v) for n, v in carry.items()}
        b.note("The inputs, as the input logic leaves them, and what travels with them are registered.")
        regs = b.stage({"x_turned": srcs["x_src"], "y_turned": srcs["y_src"], **carry})
        carried = {n: regs[n] for n in carry}
        if not compensated:
            starts = {
                "x_start": self.hw_prescale(b, dp, "x_start", regs["x_turned"]),
                "y_start": self.hw_prescale(b, dp, "y_start", regs["y_turned"]),
            }
            return starts, carried
        B, G = dp.data_width, dp.guard_bits
        kw = dp.k_frac + 1
        pw = (B + 1) + kw
        drop = dp.k_frac - G
        terms = csd_terms(dp.k_const)
        b.note(
            f"Times K at {G} guard bits: K's {len(terms)} signed digits ("
            + " ".join(f"{'+' if sgn > 0 else '-'}2^{sh - dp.k_frac}" for sh, sgn in terms)
            + f"),\nplus half an LSB of the {drop} dropped bits (round half up), summed pairwise, one adder\n"
            "level per register stage: the exact product, rounded as one multiplier would."
        )
        items: dict[str, list[tuple[int, Expr]]] = {}
        for c in ("x", "y"):
            src = regs[f"{c}_turned"]
            shifted: list[tuple[int, Expr]] = []
            for sh, sgn in terms:
                # src times 2^sh, sign-extended to the product's width (kw - sh >= 1 copies)
                parts: tuple[Expr, ...] = (Rep(pw - B - 1 - sh, src[B]), src) + ((Const(0, sh),) if sh else ())
                shifted.append((sgn, Cat(parts)))
            shifted.append((1, Const(1 << (drop - 1), pw)))
            items[c] = shifted
        level = 0
        while len(items["x"]) > 1:
            level += 1
            last = len(items["x"]) == 2  # this level forms the product
            staged: dict[str, Expr] = {}
            for c in ("x", "y"):
                new: list[tuple[int, Expr]] = []
                row = items[c]
                for j in range(0, len(row) - 1, 2):
                    (s1, e1), (s2, e2) = row[j], row[j + 1]
                    if s1 == s2:
                        total, sign = Add(e1, e2), s1
                    elif s1 > 0:
                        total, sign = Add(e1, e2, subtract=True), 1
                    else:
                        total, sign = Add(e2, e1, subtract=True), 1
                    # the product's dropped bits only carry into the kept ones
                    new.append((sign, b.wire(f"{c}_k{level}_{j // 2}", total, carry_only=drop if last else 0)))
                if len(row) % 2:
                    new.append(row[-1])
                items[c] = new
            for c in ("x", "y"):
                if last:
                    sign, total = items[c][0]
                    assert sign > 0, "K is positive: the tree ends with a sum, not a negated one"
                    assert isinstance(total, Sig)
                    staged[f"{c}_start"] = Slice(total, pw - 1, drop)
                else:
                    for j, (sign, e) in enumerate(items[c]):
                        staged[f"{c}_k{level}_{j}_t"] = e
            regs = b.stage({**staged, **carried})
            carried = {n: regs[n] for n in carry}
            if not last:
                for c in ("x", "y"):
                    items[c] = [(sign, regs[f"{c}_k{level}_{j}_t"]) for j, (sign, _) in enumerate(items[c])]
        return {"x_start": regs["x_start"], "y_start": regs["y_start"]}, carried

    def hw_prescale(self, b: Builder, dp: CircularDatapath, name: str, src: Sig) -> Sig:
        """``name``: the (b+1)-bit ``src`` at internal scale, times K_n when compensated."""
        B, G, W = dp.data_width, dp.guard_bits, dp.xy_width
        if dp.gain_mode == "compensated":
            kw = dp.k_frac + 1
            pw = (B + 1) + kw
            drop = dp.k_frac - G
            assert pw - drop == W, "the prescaled value must fill the internal width"
            b.note(f"{name}: times K = {dp.gain[:12]} at {G} guard bits; the {drop} dropped bits round half up.")
            product = b.wire(
                f"{name}_prod", Mul(Cat((Rep(pw - B - 1, src[B]), src)), Cat((Const(0, pw - kw), Const(dp.k_const, kw))))
            )
            return b.wire(name, b.scale_round(name, product, drop, W), of="xy")
        b.note(f"{name}: the raw input at internal scale (the gain stays in the result).")
        ext = W - G - (B + 1)
        parts: list[Expr] = ([Rep(ext, src[B])] if ext > 0 else []) + [src] + ([Const(0, G)] if G else [])
        return b.wire(name, Cat(tuple(parts)), of="xy")
