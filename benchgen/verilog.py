"""Print a netlist description (:mod:`benchgen.netlist`) as Verilog-2005.

Python turns each statement into its text here; the template ``module.v.j2`` only lays the
pieces out (header, ports, constants, body). Literals carry explicit widths, so wide values
stay exact; output is byte-identical for the same description.
"""

from __future__ import annotations

from benchgen.netlist import (
    Add,
    And,
    Cat,
    Clocking,
    Cmp,
    Comment,
    Assign,
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

__all__ = ["expr_text", "literal", "module_parts", "range_text", "statement_lines"]

INDENT = "    "


def literal(value: int, width: int) -> str:
    """A sized hexadecimal literal of ``value`` in two's complement (wide values stay exact)."""
    mask = (1 << width) - 1
    if width == 1:
        return f"1'b{value & 1}"
    digits = max(1, -(-width // 4))
    return f"{width}'h{value & mask:0{digits}x}"


def range_text(sig: Sig) -> str:
    """The declaration range of a signal, with a space after it: ``[24:0] ``, or empty for one bit."""
    if sig.width_name:
        return f"[{sig.width_name}-1:0] "
    return f"[{sig.width - 1}:0] " if sig.width > 1 or sig.vector else ""


def _simple(e: Expr) -> bool:
    """Printed without parentheses inside a larger expression."""
    return isinstance(e, Sig | Const | Param | Slice | Cat | Rep) or (isinstance(e, Not) and _simple(e.of))


def _operand(e: Expr) -> str:
    text = expr_text(e)
    return text if _simple(e) or isinstance(e, Cmp) else f"({text})"


def expr_text(e: Expr) -> str:  # noqa: C901 - one case per node kind
    """The Verilog text of an expression."""
    if isinstance(e, Sig | Param):
        return e.name
    if isinstance(e, Const):
        return literal(e.value, e.width)
    if isinstance(e, Slice):
        if not isinstance(e.of, Sig | Param):
            raise ValueError("Verilog slices a named signal only; give the expression a wire first")
        if e.lo == 0 and e.hi == e.of.width - 1:
            return e.of.name
        return f"{e.of.name}[{e.hi}]" if e.hi == e.lo else f"{e.of.name}[{e.hi}:{e.lo}]"
    if isinstance(e, Cat):
        return "{" + ", ".join(expr_text(p) for p in e.parts) + "}"
    if isinstance(e, Rep):
        return "{" + f"{e.count}" + "{" + expr_text(e.of) + "}}"
    if isinstance(e, Not):
        return "~" + _operand(e.of)
    if isinstance(e, And | Or | Xor):
        op = {And: "&", Or: "|", Xor: "^"}[type(e)]
        return f"{_operand(e.a)} {op} {_operand(e.b)}"
    if isinstance(e, Add):
        if e.subtract:
            return f"{_operand(e.a)} - {_operand(e.b)}"
        text = f"{_operand(e.a)} + {_operand(e.b)}"
        if e.carry is not None:
            # the carry-in at the sum's width (a one-bit sum takes it as it is: no zero-width pad)
            text += " + " + (_operand(e.carry) if e.width == 1 else "{" + literal(0, e.width - 1) + ", " + expr_text(e.carry) + "}")
        return text
    if isinstance(e, Neg):
        return "-" + _operand(e.of)
    if isinstance(e, Mul):
        return f"{_operand(e.a)} * {_operand(e.b)}"
    if isinstance(e, Mux):
        return f"{_operand(e.sel)} ? {_branch(e.a)} : {_branch(e.b)}"
    if isinstance(e, Cmp):
        if e.signed:
            return f"$signed({expr_text(e.a)}) {e.op} $signed({expr_text(e.b)})"
        return f"({_operand(e.a)} {e.op} {_operand(e.b)})"
    if isinstance(e, Shl):
        return f"{_operand(e.of)} << {_operand(e.amount)}"
    if isinstance(e, Sra):
        return f"$signed({expr_text(e.of)}) >>> {_operand(e.amount)}"
    raise TypeError(f"cannot print {type(e).__name__}")  # pragma: no cover


def _branch(e: Expr) -> str:
    # A nested mux reads as a chain: a ? x : b ? y : z.
    return expr_text(e) if isinstance(e, Mux) else _operand(e)


def _comment(text: str) -> str:
    return f"  // {text}" if text else ""


def statement_lines(st: object, clocking: Clocking | None = None) -> list[str]:
    """The lines of one statement, indented for a module body (register blocks reset and
    enabled as ``clocking`` says: the module's, by default a synchronous active-high ``rst``)."""
    if isinstance(st, Comment):
        return [INDENT + "// " + line if line else "" for line in st.text.split("\n")] if st.text else [""]
    if isinstance(st, Wire):
        line = f"{INDENT}wire {range_text(st.sig)}{st.sig.name} = {expr_text(st.expr)};{_comment(st.comment)}"
        if st.carry_only:
            # the low bits only carry into the kept ones: tell the linter they go unread on purpose
            return [f"{INDENT}/* verilator lint_off UNUSEDSIGNAL */", line, f"{INDENT}/* verilator lint_on UNUSEDSIGNAL */"]
        return [line]
    if isinstance(st, Reg):
        return [f"{INDENT}reg {range_text(st.sig)}{st.sig.name};{_comment(st.comment)}"]
    if isinstance(st, Decl):
        return [f"{INDENT}wire {range_text(st.sig)}{st.sig.name};{_comment(st.comment)}"]
    if isinstance(st, Assign):
        return [f"{INDENT}assign {st.sig.name} = {expr_text(st.expr)};"]
    if isinstance(st, Local):
        return [_param_line(st.param)]
    if isinstance(st, RegisterBlock):
        return _block_lines(st, clocking or Clocking())
    if isinstance(st, Table):
        return _table_lines(st)
    raise TypeError(f"cannot print {type(st).__name__}")  # pragma: no cover


def _assigns(pairs: tuple[tuple[Sig, Expr], ...], depth: int) -> list[str]:
    return [f"{INDENT * depth}{reg.name} <= {expr_text(value)};" for reg, value in pairs]


def _chain_lines(chain: tuple[tuple[Expr | None, tuple[tuple[Sig, Expr], ...]], ...], depth: int, first: str) -> list[str]:
    """One priority chain: ``if (a) ... else if (b) ...``; ``first`` is "if" or "end else if"."""
    lines: list[str] = []
    pad = INDENT * depth
    for k, (enable, pairs) in enumerate(chain):
        if enable is None:
            if k == 0:
                lines += _assigns(pairs, depth)
                continue
            lines.append(f"{pad}end else begin")
        else:
            head = first if k == 0 else "end else if"
            lines.append(f"{pad}{head} ({expr_text(enable)}) begin")
        lines += _assigns(pairs, depth + 1)
    if chain and chain[-1][0] is not None or len(chain) > 1:
        lines.append(f"{pad}end")
    return lines


def _block_lines(block: RegisterBlock, clocking: Clocking) -> list[str]:
    """One clocked block: the module's reset (its style and level) wins over everything, the
    clock enable, where there is one, gates every update."""
    reset = f"!{clocking.reset}" if clocking.active_low else clocking.reset
    if block.reset and clocking.asynchronous:
        _check_all_reset(block)
        edge = "negedge" if clocking.active_low else "posedge"
        lines = [f"{INDENT}always @(posedge clk or {edge} {clocking.reset}) begin"]
    else:
        lines = [f"{INDENT}always @(posedge clk) begin"]
    chains = block.updates
    if block.reset:
        lines.append(f"{INDENT * 2}if ({reset}) begin")
        lines += _assigns(block.reset, 3)
        if clocking.enable:
            lines.append(f"{INDENT * 2}end else if ({clocking.enable}) begin")
            for chain in chains:
                lines += _chain_lines(chain, 3, "if")
            lines.append(f"{INDENT * 2}end")
        elif len(chains) == 1 and chains[0] and chains[0][0][0] is not None:
            # if (rst) ... end else if (en) ...: the usual form of one enabled chain
            lines += _chain_lines(chains[0], 2, "end else if")
        else:
            lines.append(f"{INDENT * 2}end else begin")
            for chain in chains:
                lines += _chain_lines(chain, 3, "if")
            lines.append(f"{INDENT * 2}end")
    elif clocking.enable:
        lines.append(f"{INDENT * 2}if ({clocking.enable}) begin")
        for chain in chains:
            lines += _chain_lines(chain, 3, "if")
        lines.append(f"{INDENT * 2}end")
    else:
        for chain in chains:
            lines += _chain_lines(chain, 2, "if")
    lines.append(f"{INDENT}end")
    return lines


def _check_all_reset(block: RegisterBlock) -> None:
    """An asynchronous reset resets every register of its block: a register left out would
    load only while the reset is inactive, which synthesis builds as an enable on the reset."""
    reset = {reg.name for reg, _ in block.reset}
    left = [reg.name for reg in block.registers() if reg.name not in reset]
    if left:
        raise ValueError(f"registers {left} share a block with an asynchronous reset but are not reset")


def _table_lines(table: Table) -> list[str]:
    lines = [f"{INDENT}always @* begin", f"{INDENT * 2}case ({expr_text(table.select)})"]
    for code, values, note in table.rows:
        lines.append(f"{INDENT * 3}{literal(code, table.select.width)}: {_row(table.sigs, values)}{_comment(note)}")
    if table.default is not None:
        lines.append(f"{INDENT * 3}default: {_row(table.sigs, table.default)}")
    lines += [f"{INDENT * 2}endcase", f"{INDENT}end"]
    return lines


def _row(sigs: tuple[Sig, ...], values: tuple[int, ...]) -> str:
    if len(sigs) == 1:
        return f"{sigs[0].name} = {literal(values[0], sigs[0].width)};"
    return "begin " + " ".join(f"{s.name} = {literal(v, s.width)};" for s, v in zip(sigs, values, strict=True)) + " end"


def _param_line(p: Param) -> str:
    size = f"{p.width_name}-1" if p.width_name else f"{p.width - 1}"
    return f"{INDENT}localparam [{size}:0] {p.name} = {literal(p.value, p.width)};{_comment(p.comment)}"


def module_parts(module: Module) -> dict[str, object]:
    """Everything ``module.v.j2`` prints, as text: the template only lays it out."""
    ports = []
    last = len(module.ports) - 1
    for k, port in enumerate(module.ports):
        if port.group:
            ports.append(f"{INDENT}// {port.group}")
        kind = "input  wire" if port.direction == "in" else "output wire"
        comma = "," if k < last else ""
        ports.append(f"{INDENT}{kind} {range_text(port.sig)}{port.sig.name}{comma}")
    constants = [f"{INDENT}localparam {name} = {value};{_comment(note)}" for name, value, note in module.widths]
    params = [_param_line(p) for p in module.params]
    body: list[str] = []
    for st in module.body:
        body += statement_lines(st, module.clocking)
    return {"name": module.name, "header": module.header, "ports": ports, "constants": constants, "params": params, "body": body}
