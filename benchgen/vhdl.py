"""Print a netlist description (:mod:`benchgen.netlist`) as VHDL-2008.

The second printer of the same description as :mod:`benchgen.verilog`: Python turns each
statement into its text here, and the template ``module.vhd.j2`` only lays the pieces out
(header, libraries, entity, constants, declarations, body). Only ``ieee.std_logic_1164`` and
``ieee.numeric_std`` are used.

Types. Ports are ``std_logic`` (one-bit control) and ``std_logic_vector`` (data, tags), so the
entity drops into any design; inside, every value wider than one bit is ``unsigned``, whose
``+``, ``-`` and ``*`` keep the operands' width and wrap, as every netlist expression does;
one-bit values are ``std_logic``. A signed compare or an arithmetic shift converts to
``signed`` on the spot. A one-bit signal the description calls a vector (``[0:0]`` in
Verilog) is ``unsigned(0 downto 0)`` or ``std_logic_vector(0 downto 0)`` and is read and
written through its bit 0.

VHDL has no conditional operator inside an expression (``when ... else`` is a whole
assignment), so a select inside an expression calls a two-line function ``choose``, declared
in the architecture only where a core uses it; a select that is the whole value is printed as
``when ... else``. Literals are VHDL-2008 sized bit strings (``19x"1193f"``), exact at any width.
"""

from __future__ import annotations

from dataclasses import dataclass

from benchgen.netlist import (
    Add,
    Chain,
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
)

__all__ = ["RESERVED_WORDS", "literal", "module_parts"]

# IEEE 1076-2008 reserved words (clause 15.10; listed from memory), plus VHDL-2019's `private`
# and `view`. VHDL compares identifiers without case.
RESERVED_WORDS = frozenset(
    """
    abs access after alias all and architecture array assert assume assume_guarantee attribute
    begin block body buffer bus case component configuration constant context cover default
    disconnect downto else elsif end entity exit fairness file for force function generate
    generic group guarded if impure in inertial inout is label library linkage literal loop map
    mod nand new next nor not null of on open or others out package parameter port postponed
    private procedure process property protected pure range record register reject release rem
    report restrict restrict_guarantee return rol ror select sequence severity shared signal sla
    sll sra srl strong subtype then to transport type unaffected units until use variable view
    vmode vprop vunit wait when while with xnor xor
    """.split()
)
# Names this printer's text uses from ieee and std, and its own: a signal of one of these
# names would hide it.
_LIBRARY_NAMES = frozenset(
    "choose choose_one choose_sel choose_zero ieee natural numeric_std resize rising_edge rtl "
    "shift_left shift_right signed std "
    "std_logic std_logic_1164 std_logic_vector to_integer unsigned work".split()
)


INDENT = "    "

_BIT, _UNS, _LIT = "bit", "unsigned", "literal"
# netlist comparison -> (boolean operator for a condition, VHDL-2008 matching operator for a value)
_CMP = {
    "==": ("=", "?="),
    "!=": ("/=", "?/="),
    "<": ("<", "?<"),
    "<=": ("<=", "?<="),
    ">": (">", "?>"),
    ">=": (">=", "?>="),
}

_CHOOSE_VECTOR = (
    "function choose(choose_sel : std_logic; choose_one, choose_zero : unsigned) return unsigned is",
    "begin",
    "    if choose_sel = '1' then",
    "        return choose_one;",
    "    end if;",
    "    return choose_zero;",
    "end function;",
)
_CHOOSE_BIT = tuple(line.replace("unsigned", "std_logic") for line in _CHOOSE_VECTOR)


def literal(value: int, width: int) -> str:
    """A literal of ``value`` in two's complement: ``'1'`` for one bit, else a sized VHDL-2008
    hexadecimal bit string (``19x"1193f"``; the unused top bits of its last digit are zero)."""
    if width == 1:
        return f"'{value & 1}'"
    digits = max(1, -(-width // 4))
    return f'{width}x"{value & ((1 << width) - 1):0{digits}x}"'


@dataclass(frozen=True)
class _Text:
    """A printed expression: its text, its VHDL type and whether it needs no parentheses."""

    text: str
    kind: str  # _BIT (std_logic), _UNS (unsigned) or _LIT (a bit string, typed by its context)
    simple: bool


class _Printer:
    """Prints one module's expressions and statements (knows its ports' directions)."""

    def __init__(self, module: Module) -> None:
        self.inputs = {p.sig.name for p in module.ports if p.direction == "in"}
        self.outputs = {p.sig.name for p in module.ports if p.direction == "out"}
        self.uses_choose: set[str] = set()
        self.names = _vhdl_names(module)
        self.clocking = module.clocking

    def n(self, name: str) -> str:
        """The VHDL spelling of a name of the description (see :func:`_vhdl_names`)."""
        return self.names.get(name, name)

    # ------------------------------------------------------------------ expressions

    def expr(self, e: Expr) -> _Text:  # noqa: C901 - one case per node kind
        """The VHDL text of an expression; every one-bit expression is a ``std_logic``."""
        if e.width == 1:
            return self.bit(e)
        if isinstance(e, Sig | Param):
            if e.name in self.inputs:
                return _Text(f"unsigned({e.name})", _UNS, True)
            return _Text(self.n(e.name), _UNS, True)
        if isinstance(e, Const):
            return _Text(literal(e.value, e.width), _LIT, True)
        if isinstance(e, Slice):
            of = self._named(e)
            if e.lo == 0 and e.hi == e.of.width - 1:
                return self.expr(e.of)
            text = f"{self.n(of.name)}({e.hi} downto {e.lo})"
            return _Text(f"unsigned({text})" if of.name in self.inputs else text, _UNS, True)
        if isinstance(e, Cat):
            if len(e.parts) == 1:
                return self.expr(e.parts[0])
            parts = [self.operand(p) for p in e.parts]
            joined = " & ".join(p.text for p in parts)
            if any(p.kind == _UNS for p in parts):
                return _Text(joined, _UNS, False)
            return _Text(f"unsigned'({joined})", _UNS, True)  # no typed part: name the type
        if isinstance(e, Rep):
            if e.of.width == 1:
                return _Text(f"unsigned'({e.count - 1} downto 0 => {self.bit(e.of).text})", _UNS, True)
            one = self.typed(e.of)
            return _Text(" & ".join([one] * e.count), _UNS, False)
        if isinstance(e, Not):
            return _Text(f"not {self.typed(e.of)}", _UNS, False)
        if isinstance(e, And | Or | Xor):
            op = {And: "and", Or: "or", Xor: "xor"}[type(e)]
            return _Text(f"{self.typed(e.a)} {op} {self.operand(e.b).text}", _UNS, False)
        if isinstance(e, Add):
            text = f"{self.typed(e.a)} {'-' if e.subtract else '+'} {self.operand(e.b).text}"
            if e.carry is not None:
                text += f" + {self.bit_operand(e.carry)}"  # numeric_std-2008: unsigned + std_ulogic
            return _Text(text, _UNS, False)
        if isinstance(e, Neg):
            return _Text(f"0 - {self.typed(e.of)}", _UNS, False)
        if isinstance(e, Mul):
            # numeric_std's product has the sum of the widths; the description's wraps at one.
            return _Text(f"resize({self.typed(e.a)} * {self.typed(e.b)}, {e.width})", _UNS, True)
        if isinstance(e, Mux):
            self.uses_choose.add(_UNS)
            return _Text(f"choose({self.bit(e.sel).text}, {self.expr(e.a).text}, {self.expr(e.b).text})", _UNS, True)
        if isinstance(e, Shl):
            return _Text(f"shift_left({self.unsigned(e.of)}, to_integer({self.unsigned(e.amount)}))", _UNS, True)
        if isinstance(e, Sra):
            text = f"shift_right({self.signed(e.of)}, to_integer({self.unsigned(e.amount)}))"
            return _Text(f"unsigned({text})", _UNS, True)
        raise TypeError(f"cannot print {type(e).__name__}")  # pragma: no cover

    def bit(self, e: Expr) -> _Text:  # noqa: C901 - one case per node kind
        """A one-bit expression as ``std_logic``."""
        if isinstance(e, Sig | Param):
            vector = e.width_name != "" or (isinstance(e, Sig) and e.vector)
            return _Text(f"{self.n(e.name)}(0)" if vector else self.n(e.name), _BIT, True)
        if isinstance(e, Const):
            return _Text(literal(e.value, 1), _BIT, True)
        if isinstance(e, Slice):
            of = self._named(e)
            if of.width == 1:
                return self.bit(of)
            return _Text(f"{self.n(of.name)}({e.hi})", _BIT, True)
        if isinstance(e, Cat | Rep):
            return self.bit(e.parts[0] if isinstance(e, Cat) else e.of)
        if isinstance(e, Not):
            return _Text(f"not {self.bit_operand(e.of)}", _BIT, False)
        if isinstance(e, And | Or | Xor):
            op = {And: "and", Or: "or", Xor: "xor"}[type(e)]
            return _Text(f"{self.bit_operand(e.a)} {op} {self.bit_operand(e.b)}", _BIT, False)
        if isinstance(e, Add):
            # One bit wraps: the sum is the exclusive or of the operands and the carry.
            terms = [e.a, e.b] + ([e.carry] if e.carry is not None else [])
            return _Text(" xor ".join(self.bit_operand(t) for t in terms), _BIT, False)
        if isinstance(e, Neg | Sra):
            return self.bit(e.of)  # -b = b modulo 2; the sign bit shifted in is the bit itself
        if isinstance(e, Mul):
            return _Text(f"{self.bit_operand(e.a)} and {self.bit_operand(e.b)}", _BIT, False)
        if isinstance(e, Shl):
            zero = literal(0, e.amount.width) if e.amount.width > 1 else "'0'"
            amount = self.unsigned(e.amount) if e.amount.width > 1 else self.bit(e.amount).text
            return _Text(f"{self.bit_operand(e.of)} and ({amount} ?= {zero})", _BIT, False)
        if isinstance(e, Mux):
            self.uses_choose.add(_BIT)
            return _Text(f"choose({self.bit(e.sel).text}, {self.bit(e.a).text}, {self.bit(e.b).text})", _BIT, True)
        if isinstance(e, Cmp):
            a, b = self.compared(e)
            return _Text(f"{a} {_CMP[e.op][1]} {b}", _BIT, False)
        raise TypeError(f"cannot print {type(e).__name__}")  # pragma: no cover

    def _named(self, e: Slice) -> Sig | Param:
        if not isinstance(e.of, Sig | Param):
            raise ValueError("VHDL slices a named signal only; give the expression a wire first")
        return e.of

    def operand(self, e: Expr) -> _Text:
        """An expression inside a larger one: parenthesised unless it is a name, a literal or a call."""
        t = self.expr(e)
        return t if t.simple else _Text(f"({t.text})", t.kind, True)

    def bit_operand(self, e: Expr) -> str:
        t = self.bit(e)
        return t.text if t.simple else f"({t.text})"

    def typed(self, e: Expr) -> str:
        """An operand whose type must be plain from itself (a bare bit string is not)."""
        t = self.operand(e)
        return f"unsigned'({t.text})" if t.kind == _LIT else t.text

    def unsigned(self, e: Expr) -> str:
        """``e`` as an ``unsigned`` operand, one bit wide ones included."""
        if e.width == 1:
            return f"unsigned'(0 => {self.bit(e).text})"
        return self.typed(e)

    def signed(self, e: Expr) -> str:
        """``e``'s bits read as ``signed``."""
        if e.width == 1:
            return f"signed'(0 => {self.bit(e).text})"
        t = self.expr(e)
        return f"signed'({t.text})" if t.kind == _LIT else f"signed({t.text})"

    def compared(self, e: Cmp) -> tuple[str, str]:
        if e.signed:
            return self.signed(e.a), self.signed(e.b)
        if e.a.width == 1:
            return self.bit_operand(e.a), self.bit_operand(e.b)
        return self.typed(e.a), self.operand(e.b).text

    def condition(self, e: Expr) -> str:
        """A one-bit expression as a VHDL condition (a boolean)."""
        if isinstance(e, Cmp):
            a, b = self.compared(e)
            return f"{a} {_CMP[e.op][0]} {b}"
        return f"{self.bit_operand(e)} = '1'"

    # ------------------------------------------------------------------ assignments

    def target(self, sig: Sig) -> str:
        """The name an assignment writes: bit 0 of a one-bit vector."""
        name = self.n(sig.name)
        return f"{name}(0)" if sig.width == 1 and (sig.vector or sig.width_name) else name

    def value(self, sig: Sig, e: Expr) -> str:
        """``e`` in the type of ``sig`` (a ``std_logic_vector`` output port converts)."""
        if sig.width == 1:
            return self.bit(e).text
        t = self.expr(e)
        if sig.name in self.outputs and t.kind == _UNS:
            return f"std_logic_vector({t.text})"
        return t.text

    def assignment(self, sig: Sig, e: Expr, depth: int, comment: str = "") -> list[str]:
        """``sig <= e;`` with a select (or a compare) that is the whole value as ``when ... else``."""
        pad, head = INDENT * depth, f"{self.target(sig)} <= "
        note = f"  -- {comment}" if comment else ""
        if isinstance(e, Cmp) and sig.width == 1:
            return [f"{pad}{head}'1' when {self.condition(e)} else '0';{note}"]
        branches: list[tuple[str, str]] = []
        while isinstance(e, Mux):
            branches.append((self.value(sig, e.a), self.condition(e.sel)))
            e = e.b
        last = self.value(sig, e)
        if not branches:
            return [f"{pad}{head}{last};{note}"]
        if len(branches) == 1:
            value, cond = branches[0]
            return [f"{pad}{head}{value} when {cond} else {last};{note}"]
        # A chain (a priority encoder, say) reads best one choice per line.
        lines = [f"{pad}{head}{branches[0][0]} when {branches[0][1]} else"]
        lines += [f"{pad}{' ' * len(head)}{value} when {cond} else" for value, cond in branches[1:]]
        lines.append(f"{pad}{' ' * len(head)}{last};{note}")
        return lines


    def type_of(self, sig: Sig | Param) -> str:
        """The declared type of an internal signal or constant."""
        return _type(sig, self.n(sig.width_name))

    def constant_line(self, p: Param) -> str:
        value = literal(p.value, p.width)
        if p.width == 1 and self.type_of(p) != "std_logic":
            value = f'"{p.value & 1}"'
        return f"{INDENT}constant {self.n(p.name)} : {self.type_of(p)} := {value};{_comment(p.comment)}"


def _vhdl_names(module: Module) -> dict[str, str]:
    """New spellings for names that VHDL, which ignores case, would read as one already declared.

    The description may hold a constant ``X_START`` and a signal ``x_start`` (two names in
    Verilog, one in VHDL), or a signal named with a VHDL reserved word (``rem``): the later
    one, or the reserved one, gets ``_c`` (a constant, VHDL's usual suffix) or
    ``_s`` added, and digits if that is taken too. Names that do not clash are kept, so the
    VHDL and the Verilog of a core read side by side.
    """
    order: list[tuple[str, str]] = [(p.sig.name, "_s") for p in module.ports]
    order += [(name, "_c") for name, _, _ in module.widths]
    order += [(p.name, "_c") for p in module.params]
    for st in module.body:
        if isinstance(st, Local):
            order.append((st.param.name, "_c"))
        elif isinstance(st, Wire | Reg | Decl):
            order.append((st.sig.name, "_s"))
    taken = {name.lower() for name, _ in order} | RESERVED_WORDS | _LIBRARY_NAMES | {module.name.lower()}
    seen = set(RESERVED_WORDS | _LIBRARY_NAMES) | {module.name.lower()}
    ports = {p.sig.name for p in module.ports}
    out: dict[str, str] = {}
    for name, suffix in order:
        if name in ports and name.lower() in seen:
            raise ValueError(f"port {name} is a reserved word of VHDL, or clashes without case")
        if name.lower() not in seen:
            seen.add(name.lower())
            continue
        new, k = f"{name}{suffix}", 2
        while new.lower() in taken:
            new, k = f"{name}{suffix}{k}", k + 1
        taken.add(new.lower())
        out[name] = new
    return out


def _type(sig: Sig | Param, width_name: str) -> str:
    """The declared type of an internal signal or constant."""
    if sig.width == 1 and not width_name and not (isinstance(sig, Sig) and sig.vector):
        return "std_logic"
    return f"unsigned({width_name} - 1 downto 0)" if width_name else f"unsigned({sig.width - 1} downto 0)"


def _comment(text: str) -> str:
    return f"  -- {text}" if text else ""


def _comment_lines(text: str, depth: int = 1) -> list[str]:
    if not text:
        return [""]
    return [INDENT * depth + "-- " + line if line else "" for line in text.split("\n")]


def _block_lines(pr: _Printer, block: RegisterBlock) -> list[str]:
    """A clocked process. A synchronous reset is written last, so it wins over every update; an
    asynchronous one comes first, outside the clock edge. The clock enable, where there is one,
    wraps the updates only: the reset acts whatever it is."""
    ck = pr.clocking
    label = f"p_{pr.n(block.registers()[0].name)}"
    active = f"{ck.reset} = '{ck.reset_level}'"
    asynchronous = bool(block.reset) and ck.asynchronous
    if asynchronous:
        reset = {reg.name for reg, _ in block.reset}
        left = [reg.name for reg in block.registers() if reg.name not in reset]
        if left:  # it would load only while the reset is inactive: an enable on the reset
            raise ValueError(f"registers {left} share a block with an asynchronous reset but are not reset")
    lines = [f"{INDENT}{label} : process (clk{', ' + ck.reset if asynchronous else ''})", f"{INDENT}begin"]
    if asynchronous:
        lines.append(f"{INDENT * 2}if {active} then")
        for reg, value in block.reset:
            lines += pr.assignment(reg, value, 3)
        lines.append(f"{INDENT * 2}elsif rising_edge(clk) then")
    else:
        lines.append(f"{INDENT * 2}if rising_edge(clk) then")
    depth = 3
    if ck.enable:
        lines.append(f"{INDENT * 3}if {ck.enable} = '1' then")
        depth = 4
    for chain in block.updates:
        lines += _chain_lines(pr, chain, depth)
    if ck.enable:
        lines.append(f"{INDENT * 3}end if;")
    if block.reset and not asynchronous:
        lines.append(f"{INDENT * 3}if {active} then")
        for reg, value in block.reset:
            lines += pr.assignment(reg, value, 4)
        lines.append(f"{INDENT * 3}end if;")
    lines += [f"{INDENT * 2}end if;", f"{INDENT}end process;"]
    return lines


def _chain_lines(pr: _Printer, chain: Chain, depth: int) -> list[str]:
    """One priority chain: ``if a then ... elsif b then ... else ... end if;``."""
    pad = INDENT * depth
    if chain and chain[0][0] is None:  # always loads (whatever follows is never chosen)
        return [line for reg, value in chain[0][1] for line in pr.assignment(reg, value, depth)]
    lines: list[str] = []
    for k, (enable, pairs) in enumerate(chain):
        if enable is None:
            lines.append(f"{pad}else")
        else:
            lines.append(f"{pad}{'if' if k == 0 else 'elsif'} {pr.condition(enable)} then")
        for reg, value in pairs:
            lines += pr.assignment(reg, value, depth + 1)
        if enable is None:
            break
    lines.append(f"{pad}end if;")
    return lines


def _table_lines(pr: _Printer, table: Table) -> list[str]:
    if not isinstance(table.select, Sig):
        raise ValueError("a VHDL case selects on a named signal only; give the expression a wire first")
    select = pr.bit(table.select).text if table.select.width == 1 else pr.n(table.select.name)
    if table.select.name in pr.inputs and table.select.width > 1:
        raise ValueError("a VHDL case selects on an internal signal; give the port a wire first")
    lines = [
        f"{INDENT}p_{pr.n(table.sigs[0].name)} : process (all)",
        f"{INDENT}begin",
        f"{INDENT * 2}case {select} is",
    ]

    def row(values: tuple[int, ...] | None) -> str:
        out = []
        for sig, v in zip(table.sigs, values if values is not None else [None] * len(table.sigs), strict=True):
            if v is None:  # a code no row has: unreachable, so the value does not matter
                text = "'X'" if sig.width == 1 else "(others => 'X')"
                out.append(f"{pr.target(sig)} <= {text};")
            else:
                out.append(f"{pr.target(sig)} <= {literal(v, sig.width)};")
        return " ".join(out)

    for code, values, note in table.rows:
        lines.append(f"{INDENT * 3}when {literal(code, table.select.width)} => {row(values)}{_comment(note)}")
    lines.append(f"{INDENT * 3}when others => {row(table.default)}")
    lines += [f"{INDENT * 2}end case;", f"{INDENT}end process;"]
    return lines


def module_parts(module: Module) -> dict[str, object]:
    """Everything ``module.vhd.j2`` prints, as text: the template only lays it out."""
    pr = _Printer(module)
    width = max((len(p.sig.name) for p in module.ports), default=0)
    ports: list[str] = []
    last = len(module.ports) - 1
    for k, port in enumerate(module.ports):
        if port.group:
            ports.append(f"{INDENT * 2}-- {port.group}")
        sig = port.sig
        kind = "std_logic" if sig.width == 1 and not sig.vector else f"std_logic_vector({sig.width - 1} downto 0)"
        direction = "in " if port.direction == "in" else "out"
        ports.append(f"{INDENT * 2}{sig.name:<{width}} : {direction} {kind}{';' if k < last else ''}")
    constants = [
        f"{INDENT}constant {pr.n(name)} : natural := {value};{_comment(note)}" for name, value, note in module.widths
    ]
    params = [pr.constant_line(p) for p in module.params]
    declarations: list[str] = []
    body: list[str] = []
    for st in module.body:
        if isinstance(st, Comment):
            body += _comment_lines(st.text)
            if st.text.startswith("----"):  # stage banners also divide the declarations
                declarations += [""] + _comment_lines(st.text)
        elif isinstance(st, Local):
            declarations.append(pr.constant_line(st.param))
        elif isinstance(st, Wire):
            declarations.append(f"{INDENT}signal {pr.n(st.sig.name)} : {pr.type_of(st.sig)};")
            body += pr.assignment(st.sig, st.expr, 1, st.comment)
        elif isinstance(st, Reg | Decl):
            declarations.append(f"{INDENT}signal {pr.n(st.sig.name)} : {pr.type_of(st.sig)};{_comment(st.comment)}")
        elif isinstance(st, Assign):
            body += pr.assignment(st.sig, st.expr, 1)
        elif isinstance(st, RegisterBlock):
            body += _block_lines(pr, st)
        elif isinstance(st, Table):
            body += _table_lines(pr, st)
        else:  # pragma: no cover
            raise TypeError(f"cannot print {type(st).__name__}")
    functions: list[str] = []
    if pr.uses_choose:
        functions.append(
            f"{INDENT}-- choose(s, a, b) is s ? a : b inside an expression (when ... else is a whole assignment only)"
        )
        for kind, text in ((_UNS, _CHOOSE_VECTOR), (_BIT, _CHOOSE_BIT)):
            if kind in pr.uses_choose:
                functions += [INDENT + line for line in text] + [""]
    return {
        "name": module.name,
        "header": module.header,
        "ports": ports,
        "constants": constants,
        "params": params,
        "functions": functions,
        "declarations": declarations,
        "body": body,
    }
