"""An HDL-neutral description of a core: signals, expressions, registers and tables.

The core builder (:mod:`benchgen.hardware`) describes a core here, in Python, from the data
path and the function's module; printers (:mod:`benchgen.verilog`) turn the description into
text. Every expression has an exact width and every value is a plain bit vector (two's
complement where a comparison or a shift is signed), so a printer for another language needs
no knowledge of the algorithm, and :func:`evaluate` can run the description on numpy arrays to
check it against the bit-true model without a simulator.

Widths follow one rule everywhere: an arithmetic result has the width of its operands (which
must agree) and wraps, as a register of that width would.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt

__all__ = [
    "Add",
    "And",
    "Cat",
    "Clocking",
    "Cmp",
    "Assign",
    "Comment",
    "Const",
    "Decl",
    "Local",
    "Expr",
    "Module",
    "Mul",
    "Mux",
    "Neg",
    "Not",
    "Or",
    "Param",
    "Port",
    "Reg",
    "RegisterBlock",
    "Rep",
    "Shl",
    "Sig",
    "Slice",
    "Sra",
    "Table",
    "Wire",
    "Xor",
    "evaluate",
    "sign_extend",
    "zero_extend",
]


class Expr:
    """A bit-vector expression of a fixed width."""

    width: int

    def __getitem__(self, index: int | slice) -> Expr:
        if isinstance(index, slice):
            hi, lo = index.start, index.stop
            return Slice(self, hi, lo)
        return Slice(self, index, index)

    def children(self) -> tuple[Expr, ...]:
        """The operand expressions."""
        return ()


@dataclass(frozen=True, eq=False)
class Sig(Expr):
    """A named signal (a port, a wire, a register).

    Attributes:
        name: The name in the HDL text.
        width: Bits.
        width_name: A named width constant it is declared with (e.g. ``XY_W``), or empty.
        vector: Declared as a vector even when one bit wide (a data port, a tag), so that it
            keeps its shape whatever the width.
    """

    name: str
    width: int
    width_name: str = ""
    vector: bool = False


@dataclass(frozen=True, eq=False)
class Const(Expr):
    """A literal: ``value`` (any integer) taken modulo 2**width."""

    value: int
    width: int


@dataclass(frozen=True, eq=False)
class Param(Expr):
    """A named constant (a ``localparam``): printed by name, evaluated by value."""

    name: str
    value: int
    width: int
    comment: str = ""
    width_name: str = ""


@dataclass(frozen=True, eq=False)
class Slice(Expr):
    """Bits ``hi`` down to ``lo`` of ``of``."""

    of: Expr
    hi: int
    lo: int

    def __post_init__(self) -> None:
        if not 0 <= self.lo <= self.hi < self.of.width:
            raise ValueError(f"slice [{self.hi}:{self.lo}] of a {self.of.width}-bit value")

    @property
    def width(self) -> int:  # type: ignore[override]
        return self.hi - self.lo + 1

    def children(self) -> tuple[Expr, ...]:
        return (self.of,)


@dataclass(frozen=True, eq=False)
class Cat(Expr):
    """Concatenation, most significant part first."""

    parts: tuple[Expr, ...]

    @property
    def width(self) -> int:  # type: ignore[override]
        return sum(p.width for p in self.parts)

    def children(self) -> tuple[Expr, ...]:
        return self.parts


@dataclass(frozen=True, eq=False)
class Rep(Expr):
    """``count`` copies of a one-bit (or wider) value side by side."""

    count: int
    of: Expr

    @property
    def width(self) -> int:  # type: ignore[override]
        return self.count * self.of.width

    def children(self) -> tuple[Expr, ...]:
        return (self.of,)


@dataclass(frozen=True, eq=False)
class Not(Expr):
    """Bitwise complement."""

    of: Expr

    @property
    def width(self) -> int:  # type: ignore[override]
        return self.of.width

    def children(self) -> tuple[Expr, ...]:
        return (self.of,)


@dataclass(frozen=True, eq=False)
class _Binary(Expr):
    a: Expr
    b: Expr

    def __post_init__(self) -> None:
        if self.a.width != self.b.width:
            raise ValueError(f"{type(self).__name__} of {self.a.width} and {self.b.width} bits")

    @property
    def width(self) -> int:  # type: ignore[override]
        return self.a.width

    def children(self) -> tuple[Expr, ...]:
        return (self.a, self.b)


class And(_Binary):
    """Bitwise and."""


class Or(_Binary):
    """Bitwise or."""


class Xor(_Binary):
    """Bitwise exclusive or."""


@dataclass(frozen=True, eq=False)
class Add(Expr):
    """``a + b (+ carry)``, wrapping at the operands' width; ``carry`` is one bit or None.

    ``a - b`` is ``Add(a, Not(b), one)``; printers may print it as a subtraction.
    """

    a: Expr
    b: Expr
    carry: Expr | None = None
    subtract: bool = False
    """Print as ``a - b`` (then ``b`` is the subtrahend itself, not its complement)."""

    def __post_init__(self) -> None:
        if self.a.width != self.b.width:
            raise ValueError(f"Add of {self.a.width} and {self.b.width} bits")
        if self.carry is not None and (self.carry.width != 1 or self.subtract):
            raise ValueError("a carry-in is one bit, and only for an addition")

    @property
    def width(self) -> int:  # type: ignore[override]
        return self.a.width

    def children(self) -> tuple[Expr, ...]:
        return (self.a, self.b) if self.carry is None else (self.a, self.b, self.carry)


@dataclass(frozen=True, eq=False)
class Neg(Expr):
    """Two's complement negation (wraps: the most negative value stays)."""

    of: Expr

    @property
    def width(self) -> int:  # type: ignore[override]
        return self.of.width

    def children(self) -> tuple[Expr, ...]:
        return (self.of,)


@dataclass(frozen=True, eq=False)
class Mul(Expr):
    """Unsigned product of ``a`` and ``b`` (of equal width), wrapping at that width."""

    a: Expr
    b: Expr

    def __post_init__(self) -> None:
        if self.a.width != self.b.width:
            raise ValueError(f"Mul of {self.a.width} and {self.b.width} bits")

    @property
    def width(self) -> int:  # type: ignore[override]
        return self.a.width

    def children(self) -> tuple[Expr, ...]:
        return (self.a, self.b)


@dataclass(frozen=True, eq=False)
class Mux(Expr):
    """``sel ? a : b`` (``sel`` is one bit)."""

    sel: Expr
    a: Expr
    b: Expr

    def __post_init__(self) -> None:
        if self.sel.width != 1 or self.a.width != self.b.width:
            raise ValueError(f"Mux with a {self.sel.width}-bit select, {self.a.width} and {self.b.width} bits")

    @property
    def width(self) -> int:  # type: ignore[override]
        return self.a.width

    def children(self) -> tuple[Expr, ...]:
        return (self.sel, self.a, self.b)


_CMP_OPS = ("==", "!=", "<", "<=", ">", ">=")


@dataclass(frozen=True, eq=False)
class Cmp(Expr):
    """A one-bit comparison; ``signed`` reads both operands as two's complement."""

    op: str
    a: Expr
    b: Expr
    signed: bool = False

    def __post_init__(self) -> None:
        if self.op not in _CMP_OPS or self.a.width != self.b.width:
            raise ValueError(f"Cmp {self.op} of {self.a.width} and {self.b.width} bits")

    @property
    def width(self) -> int:  # type: ignore[override]
        return 1

    def children(self) -> tuple[Expr, ...]:
        return (self.a, self.b)


@dataclass(frozen=True, eq=False)
class Shl(Expr):
    """Left shift by a variable amount (an unsigned expression), keeping the width."""

    of: Expr
    amount: Expr

    @property
    def width(self) -> int:  # type: ignore[override]
        return self.of.width

    def children(self) -> tuple[Expr, ...]:
        return (self.of, self.amount)


@dataclass(frozen=True, eq=False)
class Sra(Expr):
    """Arithmetic right shift by a variable amount (an unsigned expression)."""

    of: Expr
    amount: Expr

    @property
    def width(self) -> int:  # type: ignore[override]
        return self.of.width

    def children(self) -> tuple[Expr, ...]:
        return (self.of, self.amount)


def sign_extend(e: Expr, width: int) -> Expr:
    """``e`` read as two's complement, widened to ``width`` bits (copies of its top bit)."""
    extra = width - e.width
    if extra < 0:
        raise ValueError(f"cannot sign-extend {e.width} bits to {width}")
    if extra == 0:
        return e
    top = e[e.width - 1] if e.width > 1 else e
    return Cat((Rep(extra, top), e))


def zero_extend(e: Expr, width: int) -> Expr:
    """``e`` widened to ``width`` bits with zeros on top."""
    extra = width - e.width
    if extra < 0:
        raise ValueError(f"cannot zero-extend {e.width} bits to {width}")
    return e if extra == 0 else Cat((Const(0, extra), e))


# ----------------------------------------------------------------------------- statements


@dataclass(frozen=True)
class Comment:
    """A comment line (or lines) in the body; an empty text prints a blank line."""

    text: str = ""


@dataclass(frozen=True)
class Wire:
    """A combinational signal: ``sig`` is ``expr``."""

    sig: Sig
    expr: Expr
    comment: str = ""
    carry_only: int = 0
    """How many of its low bits no one reads: they are formed only for the carry they pass
    up (a rounding's full-width add); printers tell linters so."""

    def __post_init__(self) -> None:
        if self.sig.width != self.expr.width:
            raise ValueError(f"wire {self.sig.name} of {self.sig.width} bits from {self.expr.width} bits")


@dataclass(frozen=True)
class Decl:
    """A wire declared now and driven later by an :class:`Assign`."""

    sig: Sig
    comment: str = ""


@dataclass(frozen=True)
class Assign:
    """A continuous assignment to a declared wire or an output port."""

    sig: Sig
    expr: Expr

    def __post_init__(self) -> None:
        if self.sig.width != self.expr.width:
            raise ValueError(f"assign {self.sig.name} of {self.sig.width} bits from {self.expr.width} bits")


@dataclass(frozen=True)
class Local:
    """A named constant declared at this point of the body."""

    param: Param


@dataclass(frozen=True)
class Reg:
    """A register's declaration (its updates are in a :class:`RegisterBlock`)."""

    sig: Sig
    comment: str = ""


Chain = tuple[tuple[Expr | None, tuple[tuple[Sig, Expr], ...]], ...]


@dataclass(frozen=True)
class RegisterBlock:
    """Registers that load on the rising clock edge.

    Attributes:
        updates: Independent priority chains. Each chain is (enable, [(register, next value),
            ...]) in priority order: the first enable that is high selects its values; an
            enable of None is always high. Registers not named under the chosen enable keep
            their value.
        reset: (register, value) pairs loaded while the reset is active (this takes precedence
            over every update, and over the clock enable): control state only; the data path
            is never reset. The module's :class:`Clocking` says how the reset and enable act.
    """

    updates: tuple[Chain, ...]
    reset: tuple[tuple[Sig, Expr], ...] = ()

    def registers(self) -> list[Sig]:
        """Every register this block assigns, in order of first appearance."""
        seen: dict[str, Sig] = {}
        for reg, _ in self.reset:
            seen.setdefault(reg.name, reg)
        for chain in self.updates:
            for _, pairs in chain:
                for reg, _ in pairs:
                    seen.setdefault(reg.name, reg)
        return list(seen.values())


@dataclass(frozen=True)
class Table:
    """A lookup table: ``sigs`` take the values of the row whose code ``select`` matches.

    Attributes:
        sigs: The signals set by the table.
        select: The selecting expression.
        rows: (code, values, comment) per row, values in the order of ``sigs``.
        default: Values for codes with no row (None when the rows cover every code).
    """

    sigs: tuple[Sig, ...]
    select: Expr
    rows: tuple[tuple[int, tuple[int, ...], str], ...]
    default: tuple[int, ...] | None = None


@dataclass(frozen=True)
class Port:
    """A port of the module."""

    sig: Sig
    direction: str  # "in" or "out"
    group: str = ""
    """A comment line printed before the first port of each group."""


Statement = Comment | Wire | Decl | Assign | Local | Reg | RegisterBlock | Table


@dataclass(frozen=True)
class Clocking:
    """How every register block of a module is reset and enabled (one choice for the module).

    Attributes:
        reset: Name of the reset input.
        asynchronous: The reset acts at once, not at the next rising clock edge.
        active_low: The reset acts while its input is low.
        enable: Name of the clock enable input, or empty for none. While it is low every
            register holds, as if the clock had no edge; the reset acts whatever it is.
    """

    reset: str = "rst"
    asynchronous: bool = False
    active_low: bool = False
    enable: str = ""

    @property
    def reset_level(self) -> int:
        """The level of the reset input that resets."""
        return 0 if self.active_low else 1

    def describe(self) -> list[str]:
        """The reset and enable as the core's header states them, one sentence a line."""
        when = "asynchronous" if self.asynchronous else "synchronous"
        level = "active low" if self.active_low else "active high"
        lines = [f"{self.reset} is {when} and {level}; it clears the control state, not the data path."]
        if self.enable:
            lines.append(
                f"{self.enable} is a clock enable: while it is low every register holds (outputs, out_valid"
            )
            lines.append(f"and in_ready too) and no sample moves; {self.reset} acts whatever {self.enable} is.")
        return lines


@dataclass
class Module:
    """A whole core: ports, named constants, and the body in the order it is printed.

    Attributes:
        name: Module name.
        header: Lines of the descriptive header comment.
        ports: Ports in order.
        widths: Named width constants (name, value, comment) declared first.
        params: Named constants, in order.
        body: Statements in order.
        clocking: How every register block is reset and enabled.
    """

    name: str
    header: list[str] = field(default_factory=list)
    ports: list[Port] = field(default_factory=list)
    widths: list[tuple[str, int, str]] = field(default_factory=list)
    params: list[Param] = field(default_factory=list)
    body: list[Statement] = field(default_factory=list)
    clocking: Clocking = field(default_factory=Clocking)

    def add(self, *statements: Statement) -> None:
        """Append statements to the body."""
        self.body.extend(statements)

    def wire(
        self, name: str, expr: Expr, comment: str = "", width_name: str = "", *, vector: bool = False, carry_only: int = 0
    ) -> Sig:
        """Declare and append a wire holding ``expr``; return its signal (``carry_only``: as
        :attr:`Wire.carry_only`)."""
        sig = Sig(name, expr.width, width_name, vector)
        self.body.append(Wire(sig, expr, comment, carry_only))
        return sig

    def param(
        self, name: str, value: int, width: int, comment: str = "", *, here: bool = False, width_name: str = ""
    ) -> Param:
        """Declare a named constant (with the other constants, or ``here`` in the body)."""
        p = Param(name, value, width, comment, width_name)
        if here:
            self.body.append(Local(p))
        else:
            self.params.append(p)
        return p

    def port(self, name: str, width: int, direction: str, group: str = "", *, vector: bool = False) -> Sig:
        """Add a port; return its signal."""
        sig = Sig(name, width, vector=vector)
        self.ports.append(Port(sig, direction, group))
        return sig


# ----------------------------------------------------------------------------- evaluation


def _walk(e: Expr) -> Iterator[Expr]:
    yield e
    for c in e.children():
        yield from _walk(c)


def _mask(width: int) -> int:
    return (1 << width) - 1


class _Values:
    """Unsigned values of signals on arrays (int64 while they fit, else Python integers)."""

    def __init__(self, n: int) -> None:
        self.n = n
        self.values: dict[str, npt.NDArray[Any]] = {}

    def arr(self, value: int, width: int) -> npt.NDArray[Any]:
        dtype: Any = np.int64 if width <= 62 else object
        return np.full(self.n, value & _mask(width), dtype=dtype)


def _fits(width: int) -> bool:
    return width <= 62


def _as(values: npt.NDArray[Any], width: int) -> npt.NDArray[Any]:
    """The same numbers in the representation a ``width``-bit value uses."""
    if _fits(width):
        return values.astype(np.int64) if values.dtype != np.int64 else values
    return values.astype(object) if values.dtype != object else values


def _signed(values: npt.NDArray[Any], width: int) -> npt.NDArray[Any]:
    half = 1 << (width - 1)
    return ((values + half) & _mask(width)) - half


def _eval(e: Expr, env: _Values) -> npt.NDArray[Any]:  # noqa: C901 - one case per node kind
    w = e.width
    if isinstance(e, Sig):
        return env.values[e.name]
    if isinstance(e, Const | Param):
        return env.arr(e.value, w)
    if isinstance(e, Slice):
        v = _as(_eval(e.of, env), max(e.of.width, w))
        return _as((v >> e.lo) & _mask(w), w)
    if isinstance(e, Cat):
        acc = _as(np.zeros(env.n, dtype=np.int64), w)
        for part in e.parts:
            acc = (acc << part.width) | _as(_eval(part, env), w)
        return acc
    if isinstance(e, Rep):
        one = _as(_eval(e.of, env), w)
        acc = _as(np.zeros(env.n, dtype=np.int64), w)
        for _ in range(e.count):
            acc = (acc << e.of.width) | one
        return acc
    if isinstance(e, Not):
        return _as(_eval(e.of, env), w) ^ _mask(w)
    if isinstance(e, And | Or | Xor):
        a, b = _as(_eval(e.a, env), w), _as(_eval(e.b, env), w)
        return a & b if isinstance(e, And) else a | b if isinstance(e, Or) else a ^ b
    if isinstance(e, Add):
        wide = w + 2
        a, b = _as(_eval(e.a, env), wide), _as(_eval(e.b, env), wide)
        total = a - b if e.subtract else a + b
        if e.carry is not None:
            total = total + _as(_eval(e.carry, env), wide)
        return _as(total & _mask(w), w)
    if isinstance(e, Neg):
        return _as((-_as(_eval(e.of, env), w + 2)) & _mask(w), w)
    if isinstance(e, Mul):
        a, b = _as(_eval(e.a, env), 2 * w + 2), _as(_eval(e.b, env), 2 * w + 2)
        return _as((a * b) & _mask(w), w)
    if isinstance(e, Mux):
        sel = _eval(e.sel, env).astype(bool) if e.sel.width <= 62 else _eval(e.sel, env) != 0
        return np.where(sel, _as(_eval(e.a, env), w), _as(_eval(e.b, env), w))
    if isinstance(e, Cmp):
        a, b = _eval(e.a, env), _eval(e.b, env)
        if e.signed:
            a, b = _signed(_as(a, e.a.width), e.a.width), _signed(_as(b, e.b.width), e.b.width)
        op = {"==": np.equal, "!=": np.not_equal, "<": np.less, "<=": np.less_equal,
              ">": np.greater, ">=": np.greater_equal}[e.op]
        return op(a, b).astype(np.int64)
    if isinstance(e, Shl | Sra):
        v = _as(_eval(e.of, env), w)
        amount = _eval(e.amount, env)
        if _fits(w):
            amount = amount.astype(np.int64)
            if isinstance(e, Shl):  # an int64 shift wraps mod 2^64; the mask keeps the low w bits
                return (v << amount) & _mask(w)
            return (_signed(v, w) >> amount) & _mask(w)
        if isinstance(e, Shl):
            return np.array([(int(x) << int(s)) & _mask(w) for x, s in zip(v, amount, strict=True)], dtype=object)
        signed = _signed(v, w)
        return np.array([(int(x) >> int(s)) & _mask(w) for x, s in zip(signed, amount, strict=True)], dtype=object)
    raise TypeError(f"cannot evaluate {type(e).__name__}")  # pragma: no cover


def evaluate(module: Module, inputs: dict[str, npt.ArrayLike], *, transparent: bool = True) -> dict[str, npt.NDArray[Any]]:
    """Run a feed-forward description on arrays: every register passes its first update through.

    For a pipelined core this is the function the pipeline computes (each stage's registers
    load what the stage before formed); it is how the bit-true model is checked against the
    description without a simulator. Iterative cores (registers that feed themselves) cannot
    be evaluated this way.

    Args:
        module: The description.
        inputs: Unsigned (or signed: they are taken modulo 2**width) values per input port;
            control inputs that are absent are inactive (the reset) or 1 (every other one-bit
            input, the clock enable among them). A name that is not an input port names a
            register (or wire) of the body, which then holds the given values instead of what
            loads it: how a register that feeds itself (an NCO's accumulator) is evaluated,
            given its value at each sample.
        transparent: Must be True (the only mode).

    Returns:
        Unsigned values of every output port, by name.
    """
    if not transparent:  # pragma: no cover - kept explicit for readers
        raise ValueError("only the transparent evaluation exists")
    n = len(np.asarray(next(iter(inputs.values()))))
    env = _Values(n)
    for port in module.ports:
        if port.direction != "in":
            continue
        raw = inputs.get(port.sig.name)
        if raw is None:
            if port.sig.name == module.clocking.reset:
                default = 1 - module.clocking.reset_level
            else:
                default = 1 if port.sig.width == 1 else 0
            env.values[port.sig.name] = env.arr(default, port.sig.width)
        else:
            values = np.asarray(raw)
            mask = _mask(port.sig.width)
            env.values[port.sig.name] = _as(
                np.array([int(v) & mask for v in values], dtype=object) if values.dtype == object else values & mask,
                port.sig.width,
            )
    for p in module.params:
        env.values[p.name] = env.arr(p.value, p.width)
    ports = {port.sig.name for port in module.ports}
    given = {sig.name: sig for sig in declared(module) if sig.name in inputs and sig.name not in ports}
    unknown = sorted(set(inputs) - ports - set(given))
    if unknown:
        raise ValueError(f"no signal named {unknown[0]} in the description")
    for name, sig in given.items():
        values = np.asarray(inputs[name])
        mask = _mask(sig.width)
        env.values[name] = _as(
            np.array([int(v) & mask for v in values], dtype=object) if values.dtype == object else values & mask, sig.width
        )
    for st in module.body:
        if isinstance(st, Local):
            env.values[st.param.name] = env.arr(st.param.value, st.param.width)
    pending: list[Statement] = [st for st in module.body if not (isinstance(st, Wire | Assign) and st.sig.name in given)]
    done: set[str] = set(env.values)
    # Statements are printed in dependency order except where a register feeds back; a few
    # passes settle a feed-forward description.
    for _ in range(len(pending) + 1):
        if not pending:
            break
        left: list[Statement] = []
        for st in pending:
            if isinstance(st, Comment | Decl | Local | Reg):
                continue
            if isinstance(st, Wire | Assign):
                if _ready(st.expr, done):
                    env.values[st.sig.name] = _eval(st.expr, env)
                    done.add(st.sig.name)
                else:
                    left.append(st)
            elif isinstance(st, RegisterBlock):
                if not _register_block(st, env, done):
                    left.append(st)
            elif isinstance(st, Table):
                if _ready(st.select, done):
                    sel = _eval(st.select, env)
                    for k, sig in enumerate(st.sigs):
                        out = env.arr(st.default[k] if st.default is not None else 0, sig.width)
                        for code, values, _ in st.rows:
                            out = np.where(sel == code, values[k] & _mask(sig.width), out)
                        env.values[sig.name] = _as(out, sig.width)
                        done.add(sig.name)
                else:
                    left.append(st)
        if len(left) == len(pending):
            names = [getattr(getattr(s, "sig", None), "name", type(s).__name__) for s in left[:5]]
            raise ValueError(f"the description has a loop or an undriven signal near {names}")
        pending = left
    return {p.sig.name: env.values[p.sig.name] for p in module.ports if p.direction == "out"}


def _ready(e: Expr, done: set[str]) -> bool:
    return all(x.name in done for x in _walk(e) if isinstance(x, Sig))


def _register_block(block: RegisterBlock, env: _Values, done: set[str]) -> bool:
    """Transparent registers: each takes the value of its first update (what loads it)."""
    first: dict[str, tuple[Sig, Expr]] = {}
    for chain in block.updates:
        for _, pairs in chain:
            for reg, value in pairs:
                first.setdefault(reg.name, (reg, value))
    for reg in block.registers():
        if reg.name not in first:
            # Control-only registers (valid bits) read as 1: the sample is always there.
            env.values[reg.name] = env.arr(1, reg.width)
            done.add(reg.name)
    ready = [(reg, value) for reg, value in first.values() if reg.name not in done and _ready(value, done)]
    for reg, value in ready:
        env.values[reg.name] = _eval(value, env)
        done.add(reg.name)
    return all(reg.name in done for reg, _ in first.values())


def signals_used(exprs: Iterable[Expr]) -> set[str]:
    """Names of every signal the expressions read."""
    return {x.name for e in exprs for x in _walk(e) if isinstance(x, Sig)}


def declared(module: Module) -> Sequence[Sig]:
    """Every signal the module declares (ports, wires, registers, table outputs)."""
    out: list[Sig] = [p.sig for p in module.ports]
    for st in module.body:
        if isinstance(st, Wire | Reg | Decl):
            out.append(st.sig)
        elif isinstance(st, Local):
            out.append(Sig(st.param.name, st.param.width))
        elif isinstance(st, Table):
            out.extend(st.sigs)
    return out
