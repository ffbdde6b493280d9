"""Print a netlist description (:mod:`benchgen.netlist`) as a bit-true C99 function.

The third printer of the one core description, beside :mod:`benchgen.verilog` and
:mod:`benchgen.vhdl`. It prints the function one sample goes through, not the clocked core:
every register passes the value that loads it (its first update), as
:func:`benchgen.netlist.evaluate` runs the description, so latency and handshake vanish and
what is left is the map from input codes to output codes. Only the data outputs' cone is
printed (the handshake, valid bits and the output buffer's control have no reader there).

Values. Every signal of at most 64 bits is a ``uint64_t`` holding its unsigned code (two's
complement read only where a compare or a shift is signed), masked to its width after each
operation, so C's wrap at 2**64 reduces to the netlist's wrap at the signal's width. Wider
signals (a 64-bit core's internal width, a constant multiplier's product) are a small struct
of 64-bit limbs, ``bg_wide``, with helper functions printed into the file only when the core
has such a signal; nothing is ever silently truncated. Shifts by a variable amount go through
helpers that give the netlist's answer for any amount (C leaves a shift by 64 or more
undefined). Only ``stdint.h`` is needed; no signed overflow and no implementation-defined
conversion occurs (the output converts to a signed type by arithmetic, not a cast).

A description with a register that feeds itself (an iterative core that takes several clocks
per sample) is not one pass; :func:`feeds_back` finds that, and the caller prints the
pipelined twin of the same data path instead (benchgen.cmodel).
"""

from __future__ import annotations

from dataclasses import dataclass, field

from benchgen.netlist import (
    Add,
    And,
    Assign,
    Cat,
    Cmp,
    Comment,
    Const,
    Decl,
    Expr,
    Local,
    Module,
    Mul,
    Mux,
    Neg,
    Not,
    Or,
    Param,
    Reg,
    RegisterBlock,
    Rep,
    Shl,
    Sig,
    Slice,
    Sra,
    Table,
    Wire,
    Xor,
    signals_used,
)

__all__ = ["C_KEYWORDS", "CPort", "c_comment", "c_type", "feeds_back", "function_parts"]

INDENT = "    "
LIMB = 64

# ISO/IEC 9899:1999 clause 6.4.1 keywords, and C11's, and C++'s that a C++ build of a test
# bench would trip on (listed from memory).
C_KEYWORDS = frozenset(
    """auto break case char const continue default do double else enum extern float for goto if
    inline int long register restrict return short signed sizeof static struct switch typedef union
    unsigned void volatile while _Bool _Complex _Imaginary _Alignas _Alignof _Atomic _Generic
    _Noreturn _Static_assert _Thread_local bool true false class delete new this template typename
    namespace operator private protected public virtual friend try catch throw using""".split()
)


@dataclass(frozen=True)
class CPort:
    """A data port of the C function.

    Attributes:
        name: The port's name (the C parameter's name).
        width: Bits of its code.
        signed: Whether the code is two's complement.
    """

    name: str
    width: int
    signed: bool


def c_type(width: int, signed: bool) -> str:
    """The narrowest exact-width ``stdint.h`` type that holds a ``width``-bit code."""
    for bits in (8, 16, 32, 64):
        if width <= bits:
            return f"{'int' if signed else 'uint'}{bits}_t"
    raise ValueError(f"a {width}-bit port has no C integer type (ports are at most 64 bits)")


def c_comment(text: str) -> str:
    """``text`` made safe inside a ``/* */`` comment: no comment ends or starts in it, and no
    trigraph (C99 reads ``??/`` as a backslash, gcc -Wall warns of any that counts)."""
    text = text.replace("*/", "* /").replace("/*", "/ *")
    while "??" in text:
        text = text.replace("??", "?\\?")
    return text


def _names_read(exprs: list[Expr]) -> set[str]:
    """Names of the signals and named constants the expressions read."""
    out: set[str] = set()
    todo = list(exprs)
    while todo:
        e = todo.pop()
        if isinstance(e, Sig | Param):
            out.add(e.name)
        todo.extend(e.children())
    return out


def _mask(width: int) -> int:
    return (1 << width) - 1


def _u64(value: int) -> str:
    return f"UINT64_C(0x{value:x})" if value > 9 else f"UINT64_C({value})"


def _limbs(width: int) -> int:
    return -(-width // LIMB)


# ----------------------------------------------------------------------------- the cone


def _definitions(module: Module) -> dict[str, list[Expr]]:
    """What each signal's value reads, over every way it is set (all updates of a register,
    its enables aside: an enable decides when a register loads, not what it holds)."""
    reads: dict[str, list[Expr]] = {}
    for st in module.body:
        if isinstance(st, Wire | Assign):
            reads.setdefault(st.sig.name, []).append(st.expr)
        elif isinstance(st, Table):
            for sig in st.sigs:
                reads.setdefault(sig.name, []).append(st.select)
        elif isinstance(st, RegisterBlock):
            for chain in st.updates:
                for _, pairs in chain:
                    for reg, value in pairs:
                        reads.setdefault(reg.name, []).append(value)
    return reads


def feeds_back(module: Module, outputs: list[str]) -> bool:
    """Whether a value the outputs read depends on itself through a register (a core that
    iterates one sample over several clocks): then one pass of the description is not the
    core's function."""
    reads = _definitions(module)
    state: dict[str, int] = {}  # 1 on the current path, 2 finished

    def visit(name: str) -> bool:
        mark = state.get(name)
        if mark == 1:
            return True
        if mark == 2:
            return False
        state[name] = 1
        for expr in reads.get(name, []):
            if any(visit(n) for n in sorted(signals_used([expr]))):
                return True
        state[name] = 2
        return False

    return any(visit(name) for name in outputs)


def _first_updates(module: Module) -> dict[str, Expr]:
    """The value each register loads first: what it passes on when registers are transparent."""
    first: dict[str, Expr] = {}
    for st in module.body:
        if isinstance(st, RegisterBlock):
            for chain in st.updates:
                for _, pairs in chain:
                    for reg, value in pairs:
                        first.setdefault(reg.name, value)
    return first


# ----------------------------------------------------------------------------- expressions


@dataclass
class _Printer:
    """Turns expressions into C text: ``uint64_t`` at up to 64 bits, ``bg_wide`` beyond."""

    names: dict[str, str]
    limbs: int
    helpers: set[str] = field(default_factory=set)

    def name(self, sig: Sig | Param) -> str:
        return self.names.get(sig.name, sig.name)

    def use(self, helper: str) -> str:
        self.helpers.add(helper)
        return helper

    def expr(self, e: Expr) -> str:
        """C text of ``e``: its code, masked to its width."""
        return self.wide(e) if e.width > LIMB else self.narrow(e)

    def as_wide(self, e: Expr) -> str:
        """``e`` (any width) as a ``bg_wide``."""
        return self.wide(e) if e.width > LIMB else f"{self.use('bgw_u64')}({self.narrow(e)})"

    def masked(self, text: str, width: int) -> str:
        return text if width == LIMB else f"({text}) & {_u64(_mask(width))}"

    # ------------------------------------------------------------ up to 64 bits

    def narrow(self, e: Expr) -> str:  # noqa: C901 - one case per node kind
        w = e.width
        if isinstance(e, Sig | Param):
            return self.name(e)
        if isinstance(e, Const):
            return _u64(e.value & _mask(w))
        if isinstance(e, Slice):
            if e.of.width > LIMB:
                return f"{self.use('bgw_bits')}({self.wide(e.of)}, {e.lo}u, {w}u)"
            text = self.narrow(e.of)
            if e.lo:
                text = f"({text} >> {e.lo})"
            return text if e.hi == e.of.width - 1 else f"({text} & {_u64(_mask(w))})"
        if isinstance(e, Cat):
            text = self.narrow(e.parts[0])
            for part in e.parts[1:]:
                text = f"(({text} << {part.width}) | {self.narrow(part)})"
            return text
        if isinstance(e, Rep):
            if e.of.width == 1:
                return f"({self.narrow(e.of)} ? {_u64(_mask(w))} : UINT64_C(0))"
            return self.narrow(Cat(tuple(e.of for _ in range(e.count))))
        if isinstance(e, Not):
            return f"({self.masked('~' + self.narrow(e.of), w)})"
        if isinstance(e, And | Or | Xor):
            op = {And: "&", Or: "|", Xor: "^"}[type(e)]
            return f"({self.narrow(e.a)} {op} {self.narrow(e.b)})"
        if isinstance(e, Add):
            if e.subtract:
                text = f"{self.narrow(e.a)} - {self.narrow(e.b)}"
            else:
                text = f"{self.narrow(e.a)} + {self.narrow(e.b)}"
                if e.carry is not None:
                    text += f" + {self.narrow(e.carry)}"
            return f"({self.masked(text, w)})"
        if isinstance(e, Neg):
            return f"({self.masked('UINT64_C(0) - ' + self.narrow(e.of), w)})"
        if isinstance(e, Mul):
            return f"({self.masked(self.narrow(e.a) + ' * ' + self.narrow(e.b), w)})"
        if isinstance(e, Mux):
            return f"({self.narrow(e.sel)} ? {self.narrow(e.a)} : {self.narrow(e.b)})"
        if isinstance(e, Cmp):
            return self.compare(e)
        if isinstance(e, Shl | Sra):
            helper = self.use("bg_shl" if isinstance(e, Shl) else "bg_sra")
            return f"{helper}({self.narrow(e.of)}, {self.narrow(e.amount)}, {w}u)"
        raise TypeError(f"cannot print {type(e).__name__}")  # pragma: no cover

    def compare(self, e: Cmp) -> str:
        w = e.a.width
        if w > LIMB:
            helper = self.use("bgw_cmp")
            return f"(uint64_t)({helper}({self.wide(e.a)}, {self.wide(e.b)}, {w}u, {int(e.signed)}) {e.op} 0)"
        a, b = self.narrow(e.a), self.narrow(e.b)
        if e.signed:
            # Two's complement order is the unsigned order with the sign bit flipped.
            half = _u64(1 << (w - 1))
            a, b = f"({a} ^ {half})", f"({b} ^ {half})"
        return f"(uint64_t)({a} {e.op} {b})"

    # ------------------------------------------------------------ wider than 64 bits

    def wide(self, e: Expr) -> str:  # noqa: C901 - one case per node kind
        w = e.width
        if isinstance(e, Sig | Param):
            return self.name(e)
        if isinstance(e, Const):
            return self.wide_literal(e.value & _mask(w))
        if isinstance(e, Slice):
            return f"{self.use('bgw_slice')}({self.wide(e.of)}, {e.lo}u, {w}u)"
        if isinstance(e, Cat):
            text = self.as_wide(e.parts[0])
            for part in e.parts[1:]:
                text = f"{self.use('bgw_or')}({self.use('bgw_shl')}({text}, {part.width}u, {w}u), {self.as_wide(part)})"
            return text
        if isinstance(e, Rep):
            if e.of.width == 1:
                return f"{self.use('bgw_fill')}({self.narrow(e.of)}, {w}u)"
            return self.wide(Cat(tuple(e.of for _ in range(e.count))))
        if isinstance(e, Not):
            return f"{self.use('bgw_not')}({self.wide(e.of)}, {w}u)"
        if isinstance(e, And | Or | Xor):
            helper = self.use({And: "bgw_and", Or: "bgw_or", Xor: "bgw_xor"}[type(e)])
            return f"{helper}({self.wide(e.a)}, {self.wide(e.b)})"
        if isinstance(e, Add):
            if e.subtract:
                return f"{self.use('bgw_sub')}({self.wide(e.a)}, {self.wide(e.b)}, {w}u)"
            carry = self.narrow(e.carry) if e.carry is not None else "UINT64_C(0)"
            return f"{self.use('bgw_add')}({self.wide(e.a)}, {self.wide(e.b)}, {carry}, {w}u)"
        if isinstance(e, Neg):
            return f"{self.use('bgw_sub')}({self.wide_literal(0)}, {self.wide(e.of)}, {w}u)"
        if isinstance(e, Mul):
            return f"{self.use('bgw_mul')}({self.wide(e.a)}, {self.wide(e.b)}, {w}u)"
        if isinstance(e, Mux):
            return f"({self.narrow(e.sel)} ? {self.wide(e.a)} : {self.wide(e.b)})"
        if isinstance(e, Shl | Sra):
            if e.amount.width > LIMB:
                raise ValueError("a shift amount of more than 64 bits")
            helper = self.use("bgw_shl" if isinstance(e, Shl) else "bgw_sra")
            return f"{helper}({self.wide(e.of)}, {self.narrow(e.amount)}, {w}u)"
        raise TypeError(f"cannot print {type(e).__name__}")  # pragma: no cover

    def wide_literal(self, value: int) -> str:
        return "((bg_wide)" + self.wide_init(value) + ")"

    def wide_init(self, value: int) -> str:
        limbs = [(value >> (LIMB * k)) & _mask(LIMB) for k in range(self.limbs)]
        return "{{" + ", ".join(_u64(v) for v in limbs) + "}}"


# ----------------------------------------------------------------------------- helpers

# The helper functions, in the order they are printed; each names the ones it calls. N is
# the core's limb count (BG_LIMBS). Everything is unsigned arithmetic on uint64_t.
_HELPERS: list[tuple[str, tuple[str, ...], str]] = [
    ("bg_mask", (), """\
/* The low w bits set (w from 1 to 64). */
static uint64_t bg_mask(unsigned w)
{
    return w >= 64u ? ~UINT64_C(0) : (UINT64_C(1) << w) - 1u;
}"""),
    ("bg_shl", ("bg_mask",), """\
/* v << s in w bits, for any s (C leaves a shift by 64 or more undefined). */
static uint64_t bg_shl(uint64_t v, uint64_t s, unsigned w)
{
    return s >= w ? UINT64_C(0) : (v << s) & bg_mask(w);
}"""),
    ("bg_sra", ("bg_mask",), """\
/* v (two's complement, w bits) shifted right by s, copies of the sign bit coming in. */
static uint64_t bg_sra(uint64_t v, uint64_t s, unsigned w)
{
    const uint64_t m = bg_mask(w);
    const uint64_t neg = (v >> (w - 1u)) & 1u;
    if (s >= w)
        return neg ? m : UINT64_C(0);
    return (v >> s) | (neg ? m & ~(m >> s) : UINT64_C(0));
}"""),
    ("bgw_trim", (), """\
/* a with every bit from w up cleared. */
static bg_wide bgw_trim(bg_wide a, unsigned w)
{
    unsigned k;
    for (k = 0; k < BG_LIMBS; k++) {
        if (64u * k >= w)
            a.limb[k] = 0;
        else if (w - 64u * k < 64u)
            a.limb[k] &= (UINT64_C(1) << (w - 64u * k)) - 1u;
    }
    return a;
}"""),
    ("bgw_u64", (), """\
static bg_wide bgw_u64(uint64_t v)
{
    bg_wide r = {{0}};
    r.limb[0] = v;
    return r;
}"""),
    ("bgw_shr", (), """\
/* a >> s, zeros coming in. */
static bg_wide bgw_shr(bg_wide a, uint64_t s)
{
    bg_wide r = {{0}};
    unsigned q, b, k;
    if (s >= 64u * BG_LIMBS)
        return r;
    q = (unsigned)(s / 64u);
    b = (unsigned)(s % 64u);
    for (k = 0; k + q < BG_LIMBS; k++) {
        r.limb[k] = a.limb[k + q] >> b;
        if (b && k + q + 1u < BG_LIMBS)
            r.limb[k] |= a.limb[k + q + 1u] << (64u - b);
    }
    return r;
}"""),
    ("bgw_shl", ("bgw_trim",), """\
/* a << s in w bits. */
static bg_wide bgw_shl(bg_wide a, uint64_t s, unsigned w)
{
    bg_wide r = {{0}};
    unsigned q, b, k;
    if (s >= w)
        return r;
    q = (unsigned)(s / 64u);
    b = (unsigned)(s % 64u);
    for (k = q; k < BG_LIMBS; k++) {
        r.limb[k] = a.limb[k - q] << b;
        if (b && k > q)
            r.limb[k] |= a.limb[k - q - 1u] >> (64u - b);
    }
    return bgw_trim(r, w);
}"""),
    ("bgw_slice", ("bgw_shr", "bgw_trim"), """\
/* Bits lo to lo + w - 1 of a. */
static bg_wide bgw_slice(bg_wide a, unsigned lo, unsigned w)
{
    return bgw_trim(bgw_shr(a, lo), w);
}"""),
    ("bgw_bits", ("bgw_shr", "bgw_trim"), """\
/* Bits lo to lo + w - 1 of a (w at most 64). */
static uint64_t bgw_bits(bg_wide a, unsigned lo, unsigned w)
{
    return bgw_trim(bgw_shr(a, lo), w).limb[0];
}"""),
    ("bgw_fill", ("bgw_trim",), """\
/* w copies of the bit b. */
static bg_wide bgw_fill(uint64_t b, unsigned w)
{
    bg_wide r;
    unsigned k;
    for (k = 0; k < BG_LIMBS; k++)
        r.limb[k] = b ? ~UINT64_C(0) : UINT64_C(0);
    return bgw_trim(r, w);
}"""),
    ("bgw_not", ("bgw_trim",), """\
static bg_wide bgw_not(bg_wide a, unsigned w)
{
    unsigned k;
    for (k = 0; k < BG_LIMBS; k++)
        a.limb[k] = ~a.limb[k];
    return bgw_trim(a, w);
}"""),
    ("bgw_and", (), """\
static bg_wide bgw_and(bg_wide a, bg_wide b)
{
    unsigned k;
    for (k = 0; k < BG_LIMBS; k++)
        a.limb[k] &= b.limb[k];
    return a;
}"""),
    ("bgw_or", (), """\
static bg_wide bgw_or(bg_wide a, bg_wide b)
{
    unsigned k;
    for (k = 0; k < BG_LIMBS; k++)
        a.limb[k] |= b.limb[k];
    return a;
}"""),
    ("bgw_xor", (), """\
static bg_wide bgw_xor(bg_wide a, bg_wide b)
{
    unsigned k;
    for (k = 0; k < BG_LIMBS; k++)
        a.limb[k] ^= b.limb[k];
    return a;
}"""),
    ("bgw_add", ("bgw_trim",), """\
/* a + b + c (c is 0 or 1) in w bits. */
static bg_wide bgw_add(bg_wide a, bg_wide b, uint64_t c, unsigned w)
{
    bg_wide r;
    unsigned k;
    for (k = 0; k < BG_LIMBS; k++) {
        const uint64_t s = a.limb[k] + b.limb[k];
        const uint64_t t = s + c;
        c = (uint64_t)(s < a.limb[k]) | (uint64_t)(t < s);
        r.limb[k] = t;
    }
    return bgw_trim(r, w);
}"""),
    ("bgw_sub", ("bgw_add", "bgw_not"), """\
/* a - b in w bits: a + ~b + 1. */
static bg_wide bgw_sub(bg_wide a, bg_wide b, unsigned w)
{
    return bgw_add(a, bgw_not(b, 64u * BG_LIMBS), UINT64_C(1), w);
}"""),
    ("bg_mul64", (), """\
/* The 128-bit product of two 64-bit values, from 32-bit halves. */
static void bg_mul64(uint64_t a, uint64_t b, uint64_t *hi, uint64_t *lo)
{
    const uint64_t lo32 = UINT64_C(0xffffffff);
    const uint64_t a0 = a & lo32, a1 = a >> 32, b0 = b & lo32, b1 = b >> 32;
    const uint64_t p00 = a0 * b0, p01 = a0 * b1, p10 = a1 * b0, p11 = a1 * b1;
    const uint64_t mid = (p00 >> 32) + (p01 & lo32) + (p10 & lo32);
    *lo = (mid << 32) | (p00 & lo32);
    *hi = p11 + (p01 >> 32) + (p10 >> 32) + (mid >> 32);
}"""),
    ("bgw_mul", ("bg_mul64", "bgw_trim"), """\
/* The low w bits of a * b. */
static bg_wide bgw_mul(bg_wide a, bg_wide b, unsigned w)
{
    bg_wide r = {{0}};
    unsigned i, j;
    for (i = 0; i < BG_LIMBS; i++) {
        uint64_t carry = 0;
        for (j = 0; i + j < BG_LIMBS; j++) {
            uint64_t hi, lo;
            bg_mul64(a.limb[i], b.limb[j], &hi, &lo);
            lo += carry;
            hi += (uint64_t)(lo < carry);
            r.limb[i + j] += lo;
            hi += (uint64_t)(r.limb[i + j] < lo);
            carry = hi;
        }
    }
    return bgw_trim(r, w);
}"""),
    ("bgw_sra", ("bgw_shr", "bgw_shl", "bgw_fill", "bgw_or", "bgw_trim"), """\
/* a (two's complement, w bits) shifted right by s, copies of the sign bit coming in. */
static bg_wide bgw_sra(bg_wide a, uint64_t s, unsigned w)
{
    const uint64_t neg = (a.limb[(w - 1u) / 64u] >> ((w - 1u) % 64u)) & 1u;
    if (s >= w)
        return bgw_fill(neg, w);
    return bgw_or(bgw_shr(a, s), bgw_shl(bgw_fill(neg, (unsigned)s), w - (unsigned)s, w));
}"""),
    ("bgw_cmp", (), """\
/* -1, 0 or 1 as a is below, equal to or above b (w bits; read as two's complement if sgn). */
static int bgw_cmp(bg_wide a, bg_wide b, unsigned w, int sgn)
{
    unsigned k;
    if (sgn) {
        /* Two's complement order is the unsigned order with the sign bit flipped. */
        a.limb[(w - 1u) / 64u] ^= UINT64_C(1) << ((w - 1u) % 64u);
        b.limb[(w - 1u) / 64u] ^= UINT64_C(1) << ((w - 1u) % 64u);
    }
    for (k = BG_LIMBS; k-- > 0;) {
        if (a.limb[k] != b.limb[k])
            return a.limb[k] < b.limb[k] ? -1 : 1;
    }
    return 0;
}"""),
    ("bg_signed", (), """\
/* The w-bit two's complement code v as a number (no implementation-defined conversion). */
static int64_t bg_signed(uint64_t v, unsigned w)
{
    const uint64_t half = UINT64_C(1) << (w - 1u);
    if (v & half)
        return -(int64_t)(((half << 1) - v - 1u) & (~UINT64_C(0) >> 1)) - 1;
    return (int64_t)v;
}"""),
]
_HELPER_NEEDS = {name: needs for name, needs, _ in _HELPERS}


def _helper_texts(used: set[str]) -> list[str]:
    wanted: set[str] = set()
    todo = list(used)
    while todo:
        name = todo.pop()
        if name not in wanted:
            wanted.add(name)
            todo.extend(_HELPER_NEEDS[name])
    return [text for name, _, text in _HELPERS if name in wanted]


# ----------------------------------------------------------------------------- the function


def function_parts(module: Module, function: str, inputs: list[CPort], outputs: list[CPort]) -> dict[str, object]:
    """Everything the C templates print for one core, as text: the template only lays it out.

    Args:
        module: A feed-forward description (:func:`feeds_back` is False for ``outputs``).
        function: The C function's name.
        inputs: The data input ports, in order (the other inputs of the module keep the value
            :func:`benchgen.netlist.evaluate` gives them: 0 for ``rst``, 1 for a one-bit input).
        outputs: The data output ports, in order.

    Returns:
        ``prototype`` (the declaration without its semicolon), ``wide`` (whether ``bg_wide``
        is needed) and ``limbs``, ``constants``, ``helpers`` (blocks of lines) and ``body``
        (the function's statements, indented).

    Raises:
        ValueError: if the outputs' values depend on themselves, or a name of the description
            is not a usable C name.
    """
    out_names = [p.name for p in outputs]
    if feeds_back(module, out_names):
        raise ValueError("the description iterates a register on itself; print its pipelined twin")
    first = _first_updates(module)
    wires: dict[str, Expr] = {}
    tables: dict[str, Table] = {}
    for st in module.body:
        if isinstance(st, Wire | Assign):
            wires[st.sig.name] = st.expr
        elif isinstance(st, Table):
            for sig in st.sigs:
                tables[sig.name] = st
    params = {p.name: p for p in module.params}
    params.update({st.param.name: st.param for st in module.body if isinstance(st, Local)})
    port_sigs = {p.sig.name: p.sig for p in module.ports}
    data_in = {p.name for p in inputs}

    # The cone of the outputs: every signal their values read, registers passing their first update.
    def reads(name: str) -> list[Expr]:
        if name in wires:
            return [wires[name]]
        if name in first:
            return [first[name]]
        if name in tables:
            return [tables[name].select]
        return []

    needed: set[str] = set()
    todo = list(out_names)
    while todo:
        name = todo.pop()
        if name in needed:
            continue
        needed.add(name)
        todo.extend(_names_read(reads(name)))

    widest = max([s.width for s in _all_sigs(module) if s.name in needed] + [p.width for p in params.values() if p.name in needed] + [1])
    limbs = _limbs(widest)
    names = {p.name: f"{p.name}_bits" for p in inputs + outputs}
    printer = _Printer(names, limbs)
    _check_names(needed, function, inputs + outputs)

    # Constants the cone reads, at file scope in the order they are declared.
    constants: list[str] = []
    for p in list(module.params) + [st.param for st in module.body if isinstance(st, Local)]:
        if p.name not in needed:
            continue
        note = f" /* {c_comment(p.comment)} */" if p.comment else ""
        if p.width > LIMB:
            constants.append(f"static const bg_wide {p.name} = {printer.wide_init(p.value & _mask(p.width))};{note}")
        else:
            constants.append(f"static const uint64_t {p.name} = {_u64(p.value & _mask(p.width))};{note}")

    body: list[str] = []
    for p in inputs:
        body.append(f"{INDENT}const uint64_t {names[p.name]} = (uint64_t){p.name} & {_u64(_mask(p.width))};")
    widths = _width_of(module)
    fixed: set[str] = set()
    for name in sorted(needed):
        sig = port_sigs.get(name)
        if sig is not None and name not in data_in and name not in wires:
            # A control input read on the data path: the value the evaluator gives it.
            value = 0 if name == "rst" or sig.width != 1 else 1
        elif sig is None and name not in wires and name not in first and name not in tables and name not in params:
            # A control register that is never loaded with data reads as 1, as in the evaluator.
            value = 1
        else:
            continue
        if widths[name] > LIMB:  # pragma: no cover - control values are narrow
            raise ValueError(f"a {widths[name]}-bit control value {name}")
        body.append(f"{INDENT}const uint64_t {name} = {_u64(value)};")
        fixed.add(name)

    # Statements in body order, each once all it reads is there (a few passes, as the evaluator).
    done = {p.name for p in inputs} | fixed | set(params)
    pending = [st for st in module.body if _defines(st, needed)]
    comments: dict[int, list[str]] = _comments_before(module.body)
    first_pass = True
    # Each target of a statement is defined once what it reads is there: a register block's
    # targets may read one another (the output buffer's ready_reg reads its valid bits).
    while pending:
        left = []
        progress = False
        for st in pending:
            targets = [t for t in _targets(st, first) if t in needed and t not in done]
            ready = [t for t in targets if all(n in done for n in signals_used(reads(t)))]
            if first_pass and ready:
                body += comments.get(id(st), [])
            for target in ready:
                body += _define(printer, target, st, first, widths=widths)
                done.add(target)
                progress = True
            if len(ready) < len(targets):
                left.append(st)
        if left and not progress:  # pragma: no cover - feeds_back rules this out
            raise ValueError("the description has an undriven signal")
        pending, first_pass = left, False

    for p in outputs:
        value = names[p.name]
        if p.signed:
            printer.use("bg_signed")
            body.append(f"{INDENT}*{p.name} = ({c_type(p.width, True)})bg_signed({value}, {p.width}u);")
        else:
            body.append(f"{INDENT}*{p.name} = ({c_type(p.width, False)}){value};")

    args = [f"{c_type(p.width, p.signed)} {p.name}" for p in inputs]
    args += [f"{c_type(p.width, p.signed)} *{p.name}" for p in outputs]
    return {
        "prototype": f"void {function}({', '.join(args)})",
        "wide": limbs > 1,
        "limbs": limbs,
        "constants": constants,
        "helpers": _helper_texts(printer.helpers),
        "body": body,
    }


def _all_sigs(module: Module) -> list[Sig]:
    out = [p.sig for p in module.ports]
    for st in module.body:
        if isinstance(st, Wire | Reg | Decl):
            out.append(st.sig)
        elif isinstance(st, Table):
            out.extend(st.sigs)
    return out


def _width_of(module: Module) -> dict[str, int]:
    return {s.name: s.width for s in _all_sigs(module)}


def _defines(st: object, needed: set[str]) -> bool:
    if isinstance(st, Wire | Assign):
        return st.sig.name in needed
    if isinstance(st, Table):
        return any(s.name in needed for s in st.sigs)
    if isinstance(st, RegisterBlock):
        return any(r.name in needed for r in st.registers())
    return False


def _targets(st: object, first: dict[str, Expr]) -> list[str]:
    if isinstance(st, Wire | Assign):
        return [st.sig.name]
    if isinstance(st, Table):
        return [s.name for s in st.sigs]
    if isinstance(st, RegisterBlock):
        return [r.name for r in st.registers() if r.name in first]
    return []


def _comments_before(body: list[object]) -> dict[int, list[str]]:
    """The comment lines just before each statement (as the RTL shows them), by the statement's id."""
    out: dict[int, list[str]] = {}
    run: list[str] = []
    for st in body:
        if isinstance(st, Comment):
            run += [f"{INDENT}/* {c_comment(line)} */" if line else "" for line in st.text.split("\n")] if st.text else [""]
            continue
        if isinstance(st, Local | Reg | Decl):
            continue
        out[id(st)] = run
        run = []
    return out


def _define(printer: _Printer, target: str, st: object, first: dict[str, Expr], *, widths: dict[str, int]) -> list[str]:
    """The C lines that give ``target`` its value."""
    width = widths[target]
    ctype = "bg_wide" if width > LIMB else "uint64_t"
    name = printer.names.get(target, target)
    if isinstance(st, Wire | Assign):
        note = f" /* {c_comment(st.comment)} */" if isinstance(st, Wire) and st.comment else ""
        return [f"{INDENT}const {ctype} {name} = {printer.expr(st.expr)};{note}"]
    if isinstance(st, RegisterBlock):
        return [f"{INDENT}const {ctype} {name} = {printer.expr(first[target])};  /* register, passed through */"]
    assert isinstance(st, Table)
    if st.select.width > LIMB:
        raise ValueError("a table selected by more than 64 bits")
    k = [s.name for s in st.sigs].index(target)

    def value(v: int) -> str:
        v &= _mask(width)
        return printer.wide_literal(v) if width > LIMB else _u64(v)

    lines = [f"{INDENT}{ctype} {name} = {value(st.default[k] if st.default is not None else 0)};"]
    lines.append(f"{INDENT}switch ({printer.narrow(st.select)}) {{")
    for code, values, note in st.rows:
        comment = f" /* {c_comment(note)} */" if note else ""
        lines.append(f"{INDENT}case {_u64(code)}: {name} = {value(values[k])}; break;{comment}")
    lines.append(f"{INDENT}default: break;")
    lines.append(f"{INDENT}}}")
    return lines


def _check_names(names: set[str], function: str, ports: list[CPort]) -> None:
    """Every C name the function declares must be free: not a keyword, not a helper's."""
    reserved = C_KEYWORDS | {name for name, _, _ in _HELPERS} | {"bg_wide", "BG_LIMBS", function}
    mapped = {f"{p.name}_bits" for p in ports}
    if mapped & names:
        raise ValueError(f"C names {sorted(mapped & names)} are taken by the description")
    taken = names | mapped | {p.name for p in ports}
    bad = sorted(n for n in taken if n in reserved or n.startswith(("bg_", "bgw_")))
    if bad:
        raise ValueError(f"C names {bad} are taken by C or the model's helpers")
