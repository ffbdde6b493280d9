"""Building blocks of the cores' hardware, described with :mod:`benchgen.netlist`.

:class:`Builder` holds the module being described and the few names every piece shares (the
internal widths, the guard bits, the rounding); its methods add the pieces the function
modules compose: rounding, saturation and clamping, an add whose low bits only pass a carry,
sign extension and shifts, a constant multiplier with its rounding. Nothing here knows a
function: the function modules (benchgen.functions) and the core assembler
(benchgen.hardware) decide what to build.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

from benchgen.algorithm import Datapath
from benchgen.netlist import (
    Add,
    And,
    Cat,
    Cmp,
    Comment,
    Const,
    Expr,
    Module,
    Mux,
    Not,
    Or,
    Param,
    Rep,
    Sig,
    Slice,
    Wire,
)

__all__ = ["Builder", "Final", "Start", "sign_shift"]


@dataclass
class Start:
    """What the input logic hands the iterations: the start values (x, y, z) and the values
    that travel with the sample (name -> the signal that forms it).

    A start vector that is one of a few constants (sine/cosine: (+-x_start, 0) by the fold)
    may instead be given as the bit that picks it (``select``) and the constant vectors
    (``vectors[select]``), with ``x`` and ``y`` None: when the builder asked for that
    (:attr:`Builder.start_table`), the core forms the first iterations' x and y from a table (a
    pipeline in place of their stages, an iterative core in the clock that loads a sample).
    """

    x: Expr | None
    y: Expr | None
    z: Expr | None
    side: dict[str, Expr] = field(default_factory=dict)
    select: Expr | None = None
    vectors: tuple[tuple[int, int], ...] = ()


@dataclass
class Final:
    """What the last iteration formed, for the output logic.

    Attributes:
        x, y, z: The last values formed whole (None where not formed whole).
        x_kept, y_kept, z_kept: Where a truncating core formed only the top bits of that value
            (the low bits that truncation drops are never formed), those bits; else None.
    """

    x: Sig | None = None
    y: Sig | None = None
    z: Sig | None = None
    x_kept: Sig | None = None
    y_kept: Sig | None = None
    z_kept: Sig | None = None


def sign_shift(value: Sig, shift: int, width: int, low: int = 0) -> Expr:
    """``value >>> shift`` as an explicit sign extension, so no signedness rules apply.

    ``value`` holds bits [width-1:low] of the number (low <= shift; 0: all of it).
    """
    if low:
        top = width - 1 - low
        return Cat((Rep(shift, value[top]), Slice(value, top, shift - low)))
    if shift == 0:
        return value
    if shift >= width:
        return Rep(width, value[width - 1])
    return Cat((Rep(shift, value[width - 1]), Slice(value, width - 1, shift)))


class Builder:
    """The module being described, and what every piece of it shares."""

    def __init__(self, module: Module, dp: Datapath) -> None:
        self.m = module
        self.dp = dp
        self.W = dp.xy_width
        self.ZW = dp.z_width
        self.B = dp.data_width
        self.G = dp.guard_bits
        self.rounding = dp.rounding
        self.signals: dict[str, Sig] = {}
        self.params: dict[str, Param] = {}
        self.front: Callable[[dict[str, Expr]], dict[str, Sig]] | None = None
        self.start_table = False
        """Set by a pipeline that forms its first iterations' x and y from a table: a function
        whose start vector is one of a few constants hands back the select and the vectors
        (:class:`Start`) instead of forming the vector."""
        """Set by a pipeline while the function's input logic is built: registers values at a
        stage boundary of that logic (:meth:`stage`)."""

    # ------------------------------------------------------------------- declaring

    def sig(self, name: str) -> Sig:
        """A signal declared earlier, by name."""
        return self.signals[name]

    def width_name(self, of: str, width: int) -> str:
        """The named width constant a value of x/y (``of="xy"``) or z (``of="z"``) is declared
        with: XY_W or Z_W, declared in the module on first use; empty when ``width`` is not that
        full width (a value with some low bits dropped keeps a plain range)."""
        name, full, note = {
            "xy": ("XY_W", self.W, f"x and y: data bits plus {self.G} guard bits"),
            "z": ("Z_W", self.ZW, f"z: {self.dp.z_frac} fraction bits"),
        }[of]
        if width != full:
            return ""
        if all(w[0] != name for w in self.m.widths):
            self.m.widths.append((name, full, note))
        return name

    def wire(
        self, name: str, expr: Expr, comment: str = "", *, vector: bool = False, of: str = "", carry_only: int = 0
    ) -> Sig:
        """Declare a wire holding ``expr`` (``vector``: declared with a range even at one bit;
        ``of``: "xy" or "z" for a value of x/y or z, declared with its named width;
        ``carry_only``: its low bits that no one reads, formed for their carry alone)."""
        width_name = self.width_name(of, expr.width) if of else ""
        sig = self.m.wire(name, expr, comment, width_name, vector=vector, carry_only=carry_only)
        self.signals[name] = sig
        return sig

    def reg(self, name: str, width: int, *, vector: bool = False, of: str = "") -> Sig:
        """A register's signal (declared by the caller with a Reg statement), with its named
        width when it holds a value of x/y or z (``of``)."""
        return self.known(Sig(name, width, self.width_name(of, width) if of else "", vector))

    def note(self, text: str = "") -> None:
        """A comment (lines split on newlines); an empty text is a blank line."""
        self.m.add(Comment(text))

    def param(self, name: str, value: int, width: int, comment: str = "", *, here: bool = True, of: str = "") -> Param:
        """A named constant, declared at this point of the body (or with the others); ``of``
        as for :meth:`wire`."""
        p = self.m.param(name, value, width, comment, here=here, width_name=self.width_name(of, width) if of else "")
        self.params[name] = p
        return p

    def p(self, name: str) -> Param:
        """A named constant declared earlier."""
        return self.params[name]

    def known(self, sig: Sig) -> Sig:
        """Record a signal declared elsewhere (a port, a register)."""
        self.signals[sig.name] = sig
        return sig

    def stage(self, values: dict[str, Expr]) -> dict[str, Sig]:
        """A register stage boundary inside the input logic: in a pipeline, every value the
        logic after it reads (name -> value) is registered there (with the sample's valid and
        tag); elsewhere the values pass as wires. Returns the signals to read after it."""
        if self.front is not None:
            return self.front(values)
        return {n: v if isinstance(v, Sig) else self.wire(n, v) for n, v in values.items()}

    # ------------------------------------------------------------------- arithmetic pieces

    def kept_add(self, out: str, a: Sig, t: Sig, cin: Expr, width: int, drop: int) -> Sig:
        """``a + t + cin`` of which only bits [width-1:drop] are read: one full-width add
        (``<out>_full``) whose low bits only pass their carry up (as in :meth:`round_q`, the
        carry chain is the fast path; a separate add of the low bits and a compare feeding the
        kept bits' carry-in made a longer one). Returns ``<out>_kept``."""
        full = self.wire(f"{out}_full", Add(a, t, cin), f"bits {drop - 1}..0 only carry", carry_only=drop)
        return self.wire(f"{out}_kept", Slice(full, width - 1, drop))

    def round_q(self, out: str, src: Sig | None, width: int, drop: int, kept: Sig | None = None) -> Sig:
        """``<out>_q``: ``src`` (``width`` bits) with ``drop`` low bits dropped by the rounding.

        ``kept``: the value formed without those low bits already (a truncating core).
        """
        self.note(f"{out}: drop {drop} bit(s), {self.rounding}")
        if kept is not None:
            return self.wire(f"{out}_q", kept)
        assert src is not None
        if drop == 0:
            return self.wire(f"{out}_q", src)
        top = Slice(src, width - 1, drop)
        if self.rounding == "truncate":
            return self.wire(f"{out}_q", top)
        # One full-width add whose low bits only carry into the kept ones: q = (src + bias +
        # tie) >> drop, with bias = half (half up) or half - 1 plus the kept LSB (half even: a
        # tie then carries exactly when the kept value is odd). Written as a short add of the
        # fraction plus a compare feeding the kept bits' carry-in, the same results synthesised
        # to a longer path (docs/hardware.md, item 6 of issue 10): the carry chain of one adder
        # is the fastest path an FPGA offers.
        half = 1 << (drop - 1)
        if self.rounding == "half_up":
            total = Add(src, Const(half, width))
        else:
            total = Add(src, Const(half - 1, width), src[drop])
        biased = self.wire(f"{out}_biased", total, f"{self.rounding}: bias below the kept bits", carry_only=drop)
        return self.wire(f"{out}_q", Slice(biased, width - 1, drop))

    def saturate(self, out: str, q: Sig, limit: int) -> Sig:
        """``out``: the rounded ``q`` (one bit wider than the result) saturated to +-``limit``."""
        qw = q.width
        self.note(f"saturate to +-{limit}")
        over = self.wire(f"{out}_over", And(Not(q[qw - 1]), q[qw - 2]))
        most_negative = Cmp("==", Slice(q, qw - 2, 0), Const(1 << (qw - 2), qw - 1))
        under = self.wire(f"{out}_under", And(q[qw - 1], Or(Not(q[qw - 2]), most_negative)))
        body = Slice(q, qw - 2, 0)
        return self.wire(out, Mux(over, Const(limit, qw - 1), Mux(under, Const(-limit, qw - 1), body)))

    def most_negative_up(self, out: str, q: Sig) -> Sig:
        """``out``: ``q`` with its most negative code moved up by one, the only code of a
        symmetric range (+-(2^(w-1) - 1)) that ``q`` can leave: setting the LSB where ``q`` is
        that code, one gate after the compare."""
        w = q.width
        self.note(f"the code -{1 << (w - 1)} becomes -{(1 << (w - 1)) - 1}: the only one beyond the symmetric range")
        low = self.wire(f"{out}_min", Cmp("==", q, Const(1 << (w - 1), w)))
        return self.wire(out, Cat((Slice(q, w - 1, 1), Or(q[0], low))) if w > 1 else Or(q[0], low))

    def clamp(self, out: str, src: Sig, limit: int, bits: int) -> Sig:
        """``out``: the never-negative ``src`` clamped to [0, ``limit``] (``bits`` wide)."""
        qw = src.width
        self.note(f"clamp to [0, {limit}]: the value is never negative; rounding can reach the top")
        neg = self.wire(f"{out}_neg", src[qw - 1])
        over = self.wire(f"{out}_over", And(Not(neg), Cmp("!=", Slice(src, qw - 2, bits), Const(0, qw - 1 - bits))))
        return self.wire(out, Mux(neg, Const(0, bits), Mux(over, Const(limit, bits), Slice(src, bits - 1, 0))))

    def scale_round(self, name: str, product: Sig, drop: int, keep_width: int) -> Expr:
        """The top of ``product`` above ``drop`` bits, rounded half up from all of them, as
        ``keep_width`` bits."""
        pw = product.width
        # one add of half an LSB across the whole product (as in round_q), then the top bits
        biased = Add(product, Const(1 << (drop - 1), pw))
        assert keep_width == pw - drop
        return Slice(self.wire(f"{name}_biased", biased, carry_only=drop), pw - 1, drop)

    def extend(self, e: Expr, width: int) -> Expr:
        """``e`` sign-extended to ``width`` bits (``{{k{e[top]}}, e}``)."""
        if e.width == width:
            return e
        top = e[e.width - 1]
        return Cat((Rep(width - e.width, top), e))

    def internal(self, value: Sig, width: int) -> Expr:
        """A signed input ``value`` at internal scale in ``width`` bits: sign-extended above,
        the guard bits (zeros) below."""
        top = value.width - 1
        ext = width - value.width - self.G
        return Cat((Rep(ext, value[top]), value) + ((Const(0, self.G),) if self.G else ()))

    def pad(self, e: Expr, low: int) -> Expr:
        """``e`` with ``low`` zero bits appended below (one flat concatenation)."""
        if not low:
            return e
        parts = e.parts if isinstance(e, Cat) else (e,)
        return Cat((*parts, Const(0, low)))

    def leading_zeros(self, name: str, bits: Sig, first: int, count: int, width: int, none: int) -> Sig:
        """``name``: the index of the first 1 among ``bits[first]``, ``bits[first-1]``, ...
        (``count`` bits), as a ``width``-bit code; ``none`` when all are 0."""
        value: Expr = Const(none, width)
        for k in reversed(range(count)):
            value = Mux(bits[first - k], Const(k, width), value)
        return self.wire(name, value)

    def any_of(self, *conds: Expr) -> Expr:
        """The or of one-bit conditions."""
        out = conds[0]
        for c in conds[1:]:
            out = Or(out, c)
        return out

    def done(self) -> list[Wire]:
        """Every wire declared so far (for checks)."""
        return [st for st in self.m.body if isinstance(st, Wire)]
