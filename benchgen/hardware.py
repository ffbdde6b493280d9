"""Assemble a core's description: ports, input logic, iterations, output logic, buffer.

The iterations, their arrangement in register stages (pipelined) or in clocks (iterative),
the handshake and the output buffer are the same for every function; the function's module
(benchgen.functions) describes its input logic (start values and the values that travel with
the sample) and its output logic (rounding, saturation, undoing a normalisation). The result
is a :class:`benchgen.netlist.Module` that printers turn into text (benchgen.verilog).
"""

from __future__ import annotations

from dataclasses import dataclass

from benchgen import __version__
from benchgen.algorithm import rotation_z_ranges, signed_width
from benchgen.design import Design
from benchgen.functions import LOAD_PORT, clocking_of, function_of, table_head
from benchgen.hwlib import Builder, Final, Start, sign_shift
from benchgen.model import shifted_term
from benchgen.netlist import (
    Add,
    And,
    Assign,
    Cat,
    Cmp,
    Const,
    Decl,
    Expr,
    Module,
    Mux,
    Not,
    Or,
    Reg,
    RegisterBlock,
    Sig,
    Slice,
    Sra,
    Table,
    Xor,
)

__all__ = ["build_core", "header_lines", "MAX_HEADER_LINE"]

MAX_HEADER_LINE = 200
"""Characters of a config line copied into the RTL header; a longer line is cut there. Icarus
Verilog 11 stops with "input buffer overflow" on a line of about 16 KiB (16,382 bytes passed,
16,383 failed, measured here); config.toml in the project keeps every line whole."""

def header_lines(config_text: str) -> list[str]:
    """The config text as the RTL header shows it: no byte-order mark, no trailing blanks, long
    lines cut to :data:`MAX_HEADER_LINE` characters."""
    out = []
    for raw in config_text.lstrip("\ufeff").strip().splitlines():
        line = raw.rstrip()
        if len(line) > MAX_HEADER_LINE:
            line = f"{line[:MAX_HEADER_LINE]} [cut: {len(line) - MAX_HEADER_LINE} more characters in config.toml]"
        out.append(line)
    return out


def _wrap(text: str, width: int) -> list[str]:
    """Words of ``text`` in lines of at most ``width`` characters."""
    lines: list[str] = []
    for word in text.split():
        if lines and len(lines[-1]) + 1 + len(word) <= width:
            lines[-1] += " " + word
        else:
            lines.append(word)
    return lines


@dataclass(frozen=True)
class _Step:
    """One iteration as the core forms it.

    Attributes:
        label: Suffix of its names (the iteration number, or ``j<k>`` in an iterative core).
        index: The number printed in its comment.
        shift: Its right shift, or None where it comes from a table (iterative cores with
            more than one clock per sample: then ``xs_<label>``/``ys_<label>`` hold the
            shifted values).
        atan: Its angle constant.
        active: Enables the iteration (iterative cores whose last clock does fewer), or None.
    """

    label: str
    index: int
    shift: int | None
    atan: Expr
    active: Expr | None = None


class _Core:
    """Builds one core: the generic structure around the function's logic."""

    def __init__(self, design: Design, config_text: str) -> None:
        self.design = design
        self.dp = dp = design.datapath
        self.fn = function_of(dp)
        self.module = Module(name=design.spec.name, clocking=clocking_of(design.spec))
        self.b = Builder(self.module, dp)
        self.config_text = config_text
        self.has_y, self.has_z = self.fn.carries(dp)
        self.final_needs = self.fn.final_values(dp)
        self.tag = design.spec.tag_width > 0
        self.truncating = dp.rounding == "truncate"
        self.valid_only = design.spec.handshake == "valid_only"
        self.free_running = self.fn.free_running(self.dp)
        # an iterative core with clocks to spare between results: one output register, no skid
        # buffer (set by iterative())
        self.single_output = False
        # z narrowed stage by stage: the width of z formed by each iteration (None: full width)
        self.z_widths: list[int] | None = None
        # the iterations whose z in carries one sign copy more than its range needs, so that
        # x's and y's directions read different bits (see split_directions)
        self.split_dirs: set[int] = set()
        start = self.fn.z_start_range(dp)
        if design.timing.architecture == "pipelined" and self.has_z and dp.mode == "rotation" and start is not None:
            ranges = rotation_z_ranges(dp, start)
            self.z_widths = [min(dp.z_width, signed_width(*r)) for r in ranges[1:]]
            self.split_dirs = self.split_directions(ranges)
            for j in self.split_dirs:
                self.z_widths[j - 1] += 1
        self.b.width_name("xy", dp.xy_width)  # declared first, whatever uses it first

    def split_directions(self, ranges: list[tuple[int, int]]) -> set[int]:
        """The iterations (of a pipelined rotation that narrows z) whose x and y directions read
        two different copies of z's sign.

        An iteration's direction drives every bit of its x, y and z add/subtract: about 2W + ZW
        loads on one net, the longest wire of the stage (ECP5 critical path: the direction's
        fanout into the x adder's operand logic, docs/hardware.md step 7). The z before such an
        iteration is formed one bit wider than its range needs, so its top two bits are equal
        sign copies from two different adder outputs, which synthesis cannot merge; x and z
        read the top bit, y the one below, and each net carries half the loads. Only where the
        wider z is exact: its range fits z's full width (no wrap-around), and the iteration
        forms both x and y (not the table head's, whose directions only pick a table entry).
        """
        dp = self.dp
        if not self.has_y or dp.coordinates == "linear":
            return set()
        head = self.table_head()
        n = dp.iterations
        both_final = self.final_needs[0] and self.final_needs[1]
        out = set()
        for j in range(max(head, 1), n):
            if j == n - 1 and not both_final:
                continue
            if signed_width(*ranges[j]) < dp.z_width:
                out.add(j)
        return out

    def angle_name(self, i: int) -> str:
        """The name of iteration i's angle constant: atan(2^-s) in circular coordinates,
        atanh(2^-s) in hyperbolic ones, the step 2^-s in linear ones."""
        prefix = {"circular": "ATAN", "hyperbolic": "ATANH", "linear": "STEP"}[self.dp.coordinates]
        return f"{prefix}_{i}"

    def angle(self, i: int) -> Expr:
        """Iteration i's angle constant (a zero where the core builds no z)."""
        name = self.angle_name(i)
        return self.b.p(name) if self.has_z and name in self.b.params else Const(0, self.dp.z_width)

    # ------------------------------------------------------------------ header and ports

    def header(self) -> None:
        dp, design, fn = self.dp, self.design, self.fn
        timing = design.timing
        arch = timing.describe()
        lines = [
            f"{design.spec.name}: {dp.function}, {arch}",
            "",
            f"Generated by benchgen {__version__}. Do not edit: change the config and regenerate.",
            "Arithmetic: shift-and-add rotation (CORDIC; Volder 1959, Walther 1971),",
            f"{dp.coordinates} coordinates, {dp.mode} mode, {dp.iterations} iterations, {dp.guard_text()}.",
        ]
        if dp.coordinates == "hyperbolic":
            lines.append(f"Shifts: {', '.join(str(s) for s in dp.shifts)} (4, 13, 40, ... done twice: Walther 1971).")
        if dp.rounded_shifts:
            lines.append("Shifted terms rounded half up: the bit below each shift enters its adder's carry-in.")
        gain = fn.header_gain(dp)
        if gain:
            lines.append(gain)
        lines += ["", "Ports (formats)"]
        for p in fn.input_ports(dp) + fn.output_ports(dp):
            lines.append(f"  {p.name:<14s} {p.doc}")
        lines += [f"  {note}" for note in fn.header_notes(dp)]
        circular = f" of a {'radian' if dp.radians else 'turn'}" if dp.coordinates == "circular" else ""
        lines.append(
            f"Internal widths: x, y {dp.xy_width} bits ({dp.guard_bits} guard bits); "
            f"z {dp.z_width} bits ({dp.z_frac} fraction bits{circular})."
        )
        if not self.has_y:
            lines.append("y equals x at every step (both start at the same value), so only x is built.")
        if not self.has_z:
            lines.append("z is not needed (the result is x), so it is not built.")
        acc = design.accuracy
        lines.append(
            f"Worst error against the ideal, bit-true model: {acc.max_error_lsb:.4f} LSB (RMS {acc.rms_error_lsb:.4f} LSB),"
        )
        lines += _wrap("measured over " + design.proof.describe() + ".", 92)
        lines += [
            f"Timing: latency {timing.latency_cycles} clocks from "
            + ("the clock that takes a sample to the clock it shows" if self.free_running else "input handshake to output handshake")
            + ", one",
            f"sample every {timing.cycles_per_sample} clock(s) at full rate.",
            *self.handshake_lines(),
            *self.module.clocking.describe(),
        ]
        config = header_lines(self.config_text)
        if config:
            lines += ["", "Config:"] + [f"  {line}" for line in config]
        self.module.header = lines

    def handshake_lines(self) -> list[str]:
        if self.free_running:
            return [
                "No input stream: a sample is taken at every clock from reset (every enabled clock). The",
                "sink takes every sample: out_valid rises when the first leaves the pipeline and stays",
                "high; load at a clock edge loads the words on the data inputs.",
            ]
        if not self.valid_only:
            return ["Handshake: a sample moves when valid and ready are both high at a rising clock edge."]
        lines = ["Handshake: valid only. The sink takes every sample: out_valid is high for one clock per"]
        if self.design.timing.architecture == "pipelined":
            lines.append("result; a sample is taken at every rising edge where in_valid is high.")
        else:
            lines.append("result; a sample is taken when in_valid and in_ready are both high at a rising edge.")
        lines.append("The outputs hold the last result until the next one.")
        return lines

    def ports(self) -> None:
        """Declare the ports the design lists (the one port description, Design.ports)."""
        m, b = self.module, self.b
        groups = {"in_valid": "input stream", "out_valid": "output stream", LOAD_PORT: "words, loaded on load"}
        for p in self.design.ports:
            b.known(m.port(p.name, p.width, p.direction, groups.get(p.name, ""), vector=p.payload))

    def constants(self, with_table: bool, first: int = 0) -> None:
        """The core's named constants; ``with_table``: the angle constants of iterations
        ``first`` on (an iterative core's load clock declares its own)."""
        dp, b = self.dp, self.b
        if dp.mode == "vectoring":
            b.param("Y_HALF", 1 << (dp.xy_width - 1), dp.xy_width, "codes at or above this are y < 0", here=True, of="xy")
        elif self.z_widths is None:
            b.param("Z_HALF", 1 << (dp.z_width - 1), dp.z_width, "codes below this are angles >= 0", here=True, of="z")
        if with_table and self.has_z:
            b.note()
            if self.z_widths is not None:
                b.note(
                    "z narrows stage by stage: after iteration i it is within about +-atan(2^-i), so its top\n"
                    "bits are copies of its sign and are not formed (bounds over every input); each angle\n"
                    "constant has the width of the z its iteration forms."
                )
                if self.split_dirs:
                    b.note(
                        "Where z feeds x and y adders it keeps one sign copy more: x's and z's direction\n"
                        "reads the top bit, y's (dir_y_*) the one below, so each drives half the loads."
                    )
            count = dp.iterations if dp.mode == "vectoring" else dp.iterations - 1
            for i in range(first, count):
                width = dp.z_width if self.z_widths is None else self.z_widths[i]
                b.param(self.angle_name(i), dp.atan_table[i], width, self.fn.atan_comment(dp, i), here=True, of="z")

    # ------------------------------------------------------------------ iterations

    def iteration(
        self,
        step: _Step,
        src: tuple[Sig, Sig | None, Sig | None],
        dst: tuple[str, str, str],
        *,
        final: bool = False,
        x_low: int = 0,
        skip_x: bool = False,
        x_keep_low: int = 0,
        z_alone: bool = False,
    ) -> tuple[Sig | None, Sig | None, Sig | None, Final]:
        """One iteration; returns the values it formed for the next one (x, y, z; x's kept bits
        where only those are formed) and, as a :class:`Final`, what the output logic reads.
        ``z_alone``: only the direction and z (the table head forms x and y later)."""
        dp, b, W, ZW = self.dp, self.b, self.b.W, self.b.ZW
        x_in, y_in, z_in = src
        x_out, y_out, z_out = dst
        if final:
            x_out, y_out, z_out = (n if keep else "" for n, keep in zip(dst, self.final_needs, strict=True))
        if z_alone:
            x_out = y_out = ""
        if skip_x:
            x_out = ""
        if not self.has_y:
            y_out = ""
        if not self.has_z:
            z_out = ""
        kept = {"x": x_keep_low, "y": 0, "z": 0}
        if final and self.truncating:
            drops = self.fn.drops(dp)
            kept = {"x": drops["x"] if x_out else 0, "y": drops["y"] if y_out else 0, "z": drops["z"] if z_out else 0}
        if dp.coordinates == "linear":
            x_out = ""  # x is held: every iteration reads the same value
        label = step.label
        what = "y < 0" if dp.mode == "vectoring" else "the remaining angle is >= 0"
        shift_note = ""
        if dp.coordinates == "hyperbolic":
            shift_note = f" (shift {step.shift if step.shift is not None else 'from the table'})"
        b.note(f"iteration {step.index}{shift_note}: turn counter-clockwise when {what}")
        if dp.mode == "vectoring":
            assert y_in is not None
            d = b.wire(f"dir_{label}", Cmp(">=", y_in, b.p("Y_HALF")))
        else:
            assert z_in is not None
            if self.z_widths is not None:
                # z >= 0 at z_in's own width (the compare reads every bit of it, and reduces to
                # the sign bit in synthesis)
                d = b.wire(f"dir_{label}", Cmp("<", z_in, Const(1 << (z_in.width - 1), z_in.width)))
            else:
                d = b.wire(f"dir_{label}", Cmp("<", z_in, b.p("Z_HALF")))
        d_y: Expr = d  # y's direction: the same bit, or its own copy (split_directions)
        if step.index in self.split_dirs:
            assert z_in is not None
            w = z_in.width - 1
            d_y = b.wire(f"dir_y_{label}", Cmp("<", Slice(z_in, w - 1, 0), Const(1 << (w - 1), w)))
        # x and y shifted by the iteration's shift (formed only where a value reads them).
        xs: Expr | None = None
        ys: Expr | None = None
        if step.shift is None:
            if y_out:
                xs = b.sig(f"xs_{label}")
            if x_out:
                ys = b.sig(f"ys_{label}") if self.has_y else b.sig(f"xs_{label}")
        else:
            # Each shifted value gets a wire of its own: the update reads it twice (added or
            # subtracted), and the text stays one short line per value.
            def shifted(name: str, value: Sig, low: int = 0) -> Expr:
                e = sign_shift(value, step.shift, W, low)  # type: ignore[arg-type]
                if isinstance(e, Sig):
                    return e
                return b.wire(f"{name}_{label}", e, f"{name[0]} >>> {step.shift}", of="xy")

            if y_out or (x_out and not self.has_y):
                xs = shifted("xs", x_in, x_low)
            if x_out:
                # exp carries no y: y is x all the way
                ys = shifted("ys", y_in) if self.has_y and y_in is not None else xs
        hyperbolic = dp.coordinates == "hyperbolic"
        # The carry-ins: 1 where the term is subtracted (a - t = a + ~t + 1). Where the shifted
        # terms are rounded half up (dp.rounded_shifts), the bit just below the shift joins
        # them: a + t + r, or a - t - r = a + ~t + ~r, so the carry-in is (subtract) XOR r and
        # rounding costs no adder.
        x_cin: Expr = Not(d) if hyperbolic else d
        y_cin: Expr = Not(d_y)
        if dp.rounded_shifts and step.shift is None:
            # the shifter formed the rounding bits beside the terms (shifter)
            assert self.has_y, "rounded shifts: functions that carry y"
            if ys is not None:
                x_cin = Xor(x_cin, b.sig(f"yr_{label}"))
            if xs is not None:
                y_cin = Xor(y_cin, b.sig(f"xr_{label}"))
        elif dp.rounded_shifts and step.shift:
            assert not x_low, "rounded shifts: fixed shifts of whole values"
            assert self.has_y, "rounded shifts: functions that carry y"
            if ys is not None and y_in is not None:
                x_cin = Xor(x_cin, y_in[step.shift - 1])
            if xs is not None:
                y_cin = Xor(y_cin, x_in[step.shift - 1])
        out = Final()
        nxt: list[Sig | None] = [None, None, None]
        if x_out:
            if kept["x"]:
                t = b.wire(f"tx_{step.index}", Mux(d, ys, Not(ys)) if hyperbolic else Mux(d, Not(ys), ys))
                out.x_kept = nxt[0] = b.kept_add(x_out, x_in, t, x_cin, W, kept["x"])
            else:
                new = Add(x_in, Mux(d, ys, Not(ys)), x_cin) if hyperbolic else Add(x_in, Mux(d, Not(ys), ys), x_cin)
                out.x = nxt[0] = b.wire(x_out, Mux(step.active, new, x_in) if step.active is not None else new, of="xy")
        if y_out:
            assert y_in is not None
            if kept["y"]:
                t = b.wire(f"ty_{step.index}", Mux(d_y, xs, Not(xs)))
                out.y_kept = nxt[1] = b.kept_add(y_out, y_in, t, y_cin, W, kept["y"])
            else:
                new = Add(y_in, Mux(d_y, xs, Not(xs)), y_cin)
                out.y = nxt[1] = b.wire(y_out, Mux(step.active, new, y_in) if step.active is not None else new, of="xy")
        if z_out:
            assert z_in is not None
            if kept["z"]:
                t = b.wire(f"tz_{step.index}", Mux(d, Not(step.atan), step.atan))
                out.z_kept = nxt[2] = b.kept_add(z_out, z_in, t, d, ZW, kept["z"])
            elif self.z_widths is not None:
                # the narrower z this iteration forms: what it drops of z_in are sign copies
                width = step.atan.width
                z_src = Slice(z_in, width - 1, 0) if z_in.width > width else b.extend(z_in, width)
                out.z = nxt[2] = b.wire(z_out, Add(z_src, Mux(d, Not(step.atan), step.atan), d), of="z")
            else:
                new = Add(z_in, Mux(d, Not(step.atan), step.atan), d)
                out.z = nxt[2] = b.wire(z_out, Mux(step.active, new, z_in) if step.active is not None else new, of="z")
        return nxt[0], nxt[1], nxt[2], out

    def z_only_vectoring(self) -> bool:
        """Vectoring whose result is z alone: the last iteration reads y's sign and z, so the x
        formed just before it has no reader."""
        return self.dp.mode == "vectoring" and not self.final_needs[0]

    # ------------------------------------------------------------------ output stage

    def output_register(
        self,
        final: Final,
        side: dict[str, Expr],
        valid: Expr,
        tag: Expr | None,
        advance: Expr | None,
        release: Expr | None = None,
    ) -> tuple[Final, dict[str, Expr], Expr, Expr | None]:
        """Register what the last iteration formed (and what travels with it), so rounding and
        saturation start from a register instead of sharing a clock with an iteration's adder.
        ``release``: where the register loads only when empty (``advance``), the condition
        that empties it. Returns the registered values in the same shape."""
        b, m = self.b, self.module
        b.note()
        b.note(
            "---- output register: the last iteration's values, held so that rounding and\n"
            "saturation have a clock of their own ----"
        )
        valid_reg = b.known(Sig("o_valid_reg", 1))
        m.add(Reg(valid_reg))
        loads: list[tuple[Sig, Expr]] = []
        held = Final()
        for field in ("x", "y", "z", "x_kept", "y_kept", "z_kept"):
            value = getattr(final, field)
            if value is None:
                continue
            reg = b.reg(f"o_{field}_reg", value.width, of="z" if field.startswith("z") else "xy")
            m.add(Reg(reg))
            loads.append((reg, value))
            setattr(held, field, reg)
        tag_reg: Expr | None = None
        if tag is not None:
            tag_reg = b.reg("o_tag_reg", self.design.spec.tag_width, vector=True)
            m.add(Reg(tag_reg))  # type: ignore[arg-type]
            loads.append((tag_reg, tag))  # type: ignore[arg-type]
        side_regs: dict[str, Expr] = {}
        for name, width in self.fn.side_signals(self.dp):
            reg = b.reg(f"o_{name}_reg", width, vector=True)
            m.add(Reg(reg))
            loads.append((reg, side[name]))
            side_regs[name] = reg
        b.note()
        chain: list = [(advance, ((valid_reg, valid),))]
        if release is not None:
            chain.append((release, ((valid_reg, Const(0, 1)),)))
        m.add(RegisterBlock(updates=(tuple(chain),), reset=((valid_reg, Const(0, 1)),)))
        b.note()
        m.add(RegisterBlock(updates=(((advance, tuple(loads)),),)))
        return held, side_regs, valid_reg, tag_reg

    def output_view(self, formed: Final) -> Final:
        """What the output logic reads of values an iteration formed whole (an iterative core's
        last clock forms every value for the next clock too): the values the function's result
        needs, and of a truncating core only the bits truncation keeps."""
        drops = self.fn.drops(self.dp) if self.truncating else {"x": 0, "y": 0, "z": 0}
        out = Final()
        for field, needed in zip(("x", "y", "z"), self.final_needs, strict=True):
            value = getattr(formed, field)
            if not needed or value is None:
                continue
            if drops[field]:
                setattr(out, f"{field}_kept", Slice(value, value.width - 1, drops[field]))
            else:
                setattr(out, field, value)
        return out

    def output_stage(self, final: Final, side: dict[str, Expr], fin_valid: Expr, fin_tag: Expr | None) -> None:
        b = self.b
        b.note()
        one = self.valid_only or self.single_output
        b.note(f"---- output: rounding, saturation, {'register' if one else 'buffer'} ----")
        self.fn.hw_outputs(b, self.dp, final, side)
        if "fin_valid" not in b.signals:
            b.wire("fin_valid", fin_valid)
        if fin_tag is not None:
            b.wire("fin_tag", fin_tag, vector=True)
        b.note()
        if one:
            self.output_single()
        else:
            self.output_buffer()

    def output_single(self) -> None:
        """One output register, loaded with each result.

        Valid only: the sink takes every sample, so the register loads each result as it comes.
        Ready/valid (an iterative core with two or more clocks per sample): a result arrives at
        most every other clock, so the register need not take one while it is being emptied:
        it loads when it is free or the consumer takes its sample (``o_to_out``), and the held
        result waits in ``o_*_reg`` (the core stalls in its last clock) until then."""
        b, m = self.b, self.module
        if self.valid_only:
            b.note(
                "Output register: the sink takes every sample, so no buffer; out_valid is high for one\n"
                "clock per result, and the outputs hold it until the next one."
            )
        else:
            b.note(
                "Output register: loaded when it is free or the consumer takes its sample now; a result\n"
                "that finds it full waits in the output register of iteration values until then."
            )
        out_valid = b.known(Sig("out_valid_reg", 1))
        m.add(Reg(out_valid))
        ports = [(p.name, p.width) for p in self.design.ports if p.direction == "out" and p.payload]
        regs: dict[str, Sig] = {}
        for name, width in ports:
            regs[name] = b.known(Sig(f"{name}_reg", width, vector=True))
            m.add(Reg(regs[name]))
        b.note()
        fin_valid = b.sig("fin_valid")
        load: Expr = fin_valid
        valid_chain: tuple = ((None, ((out_valid, fin_valid),)),)
        if not self.valid_only:
            out_ready = b.sig("out_ready")
            out_free = b.wire("out_free", Or(out_ready, Not(out_valid)))
            load = b.sig("o_to_out")
            m.add(Assign(load, And(fin_valid, out_free)))  # type: ignore[arg-type]
            b.note()
            valid_chain = ((load, ((out_valid, Const(1, 1)),)), (out_ready, ((out_valid, Const(0, 1)),)))
        m.add(RegisterBlock(updates=(valid_chain,), reset=((out_valid, Const(0, 1)),)))
        b.note()
        fin = {name: b.sig("fin_tag" if name == "out_tag" else f"fin_{name}") for name, _ in ports}
        m.add(RegisterBlock(updates=(((load, tuple((regs[n], fin[n]) for n, _ in ports)),),)))
        b.note()
        m.add(Assign(b.sig("out_valid"), out_valid))
        for name, _ in ports:
            m.add(Assign(b.sig(name), regs[name]))

    def output_buffer(self) -> None:
        b, m = self.b, self.module
        b.note(
            "Output buffer with two entries. out_ready reaches only this buffer and ready_reg; the\n"
            "core advances while ready_reg is high. When the consumer stalls, the sample already on\n"
            "its way lands in the spare entry, and ready_reg falls for the next clock."
        )
        ready = b.known(Sig("ready_reg", 1))
        out_valid = b.known(Sig("out_valid_reg", 1))
        spare_valid = b.known(Sig("spare_valid_reg", 1))
        m.add(Reg(ready), Reg(out_valid), Reg(spare_valid))
        ports = [(p.name, p.width) for p in self.design.ports if p.direction == "out" and p.payload]
        regs: dict[str, tuple[Sig, Sig]] = {}
        for name, width in ports:
            short = "tag" if name == "out_tag" else name
            main = b.known(Sig(f"{name}_reg", width, vector=True))
            spare = b.known(Sig(f"spare_{short}_reg", width, vector=True))
            m.add(Reg(main), Reg(spare))
            regs[name] = (main, spare)
        b.note()
        out_ready, fin_valid = b.sig("out_ready"), b.sig("fin_valid")
        out_free = b.wire("out_free", Or(out_ready, Not(out_valid)))
        take_to_out = b.wire("take_to_out", And(ready, out_free))
        take_to_spare = b.wire("take_to_spare", And(ready, Not(out_free)))
        spare_to_out = b.wire("spare_to_out", And(Not(ready), out_ready))
        b.note(
            "Ready next clock if the consumer takes a sample now, or if the spare entry is empty and\n"
            "the output register and the arriving sample are not both occupied."
        )
        ready_next = b.wire("ready_next", Or(out_ready, And(Not(spare_valid), Or(Not(out_valid), Not(fin_valid)))))
        b.note()
        m.add(
            RegisterBlock(
                updates=(
                    ((None, ((ready, ready_next),)),),
                    ((take_to_out, ((out_valid, fin_valid),)), (spare_to_out, ((out_valid, spare_valid),))),
                    ((take_to_spare, ((spare_valid, fin_valid),)), (spare_to_out, ((spare_valid, Const(0, 1)),))),
                ),
                reset=((ready, Const(0, 1)), (out_valid, Const(0, 1)), (spare_valid, Const(0, 1))),
            )
        )
        b.note()
        fin = {name: b.sig("fin_tag" if name == "out_tag" else f"fin_{name}") for name, _ in ports}
        # The output register loads in either case, and which source it loads is ready_reg
        # alone (take_to_out has it high, spare_to_out low): one enable and a two-input mux per
        # bit, where an if / else-if on the two conditions synthesised to a three-way choice
        # (ECP5: 32 LUT4 and 32 PFUMX more for a 16/16 sincos; docs/hardware.md).
        # (The spare entry's block comes first: the output register's mux reads it.)
        load_out = b.wire("load_out", Or(take_to_out, spare_to_out))
        m.add(RegisterBlock(updates=(((take_to_spare, tuple((regs[n][1], fin[n]) for n, _ in ports)),),)))
        m.add(
            RegisterBlock(
                updates=(((load_out, tuple((regs[n][0], Mux(ready, fin[n], regs[n][1])) for n, _ in ports)),),)
            )
        )
        b.note()
        m.add(Assign(b.sig("out_valid"), out_valid))
        for name, _ in ports:
            m.add(Assign(b.sig(name), regs[name][0]))

    # ------------------------------------------------------------------ NCO front stage

    def phase_front(self, take: Expr | None) -> None:
        """The phase accumulator in front of the iterations, for a function that has one
        (:meth:`benchgen.functions.base.Function.phase_front`; docs/nco.md, the checklist).

        The sample taken at a clock edge (``take``; None: every edge, a free-running core)
        reads ``acc_reg + offset + dither`` and keeps the top bits (the function's input logic
        reads them by name); the same edge loads ``acc_reg + freq`` and advances the dither LFSR
        by its D-step map. Reset loads 0 and the seed. A free-running core's words come from
        ``fw_reg``/``po_reg``, or from the ports in the clock of a load (which also loads them).
        The accumulator feeds itself, so the transparent evaluator (netlist.evaluate) takes
        ``acc_reg`` and ``lfsr_reg`` as given values.
        """
        front = self.fn.phase_front(self.dp)
        if front is None:
            return
        b, m = self.b, self.module
        a, p, d, width = front.acc_width, front.angle_width, front.dither_width, front.lfsr_width
        drop = a - p
        b.note()
        b.note(
            f"---- phase accumulator: {a} bits, the top {p} kept (floor)"
            + (f", {d} dither bits just below them ----" if d else " ----")
        )
        acc = b.known(Sig("acc_reg", a, vector=True))
        m.add(Reg(acc))
        freq: Expr = b.sig(front.freq_port)
        offset: Expr = b.sig(front.phase_port)
        word_loads: tuple[tuple[Sig, Expr], ...] = ()
        if front.load_port:
            # Free-running: the words live in registers of their own; a load acts through the
            # select in its own clock (the new offset moves this sample, the new word the next).
            load = b.sig(front.load_port)
            fw_reg = b.known(Sig("fw_reg", a, vector=True))
            po_reg = b.known(Sig("po_reg", a, vector=True))
            m.add(Reg(fw_reg), Reg(po_reg))
            freq = b.wire("fw", Mux(load, freq, fw_reg), "the word in force: the port's in the clock of a load")
            offset = b.wire("po", Mux(load, offset, po_reg), "the offset in force, likewise")
            word_loads = ((fw_reg, b.sig(front.freq_port)), (po_reg, b.sig(front.phase_port)))
        take_sig = b.wire("take", take, "a sample is taken at this edge") if take is not None else None
        total: Expr = Add(acc, offset)
        loads: list[tuple[Sig, Expr]] = [(acc, b.wire("acc_next", Add(acc, freq), "the word acts from the next sample"))]
        reset: list[tuple[Sig, Expr]] = [(acc, Const(0, a))]
        if d:
            lfsr = b.known(Sig("lfsr_reg", width, vector=True))
            m.add(Reg(lfsr))
            below = [Const(0, drop - d)] if drop > d else []
            dither = b.wire("dither", Cat((Const(0, p), Slice(lfsr, d - 1, 0), *below)), f"low {d} LFSR bits, weight 2^{drop - d}")
            total = Add(total, dither)
            b.note(f"the LFSR ({width} bits, XOR feedback, shifting left) advanced by {d} step(s): one XOR per term")
            bits: list[Expr] = []
            for j in reversed(range(width)):
                terms = [i for i, image in enumerate(front.lfsr_leap) if image >> j & 1]
                e: Expr = Slice(lfsr, terms[0], terms[0])
                for i in terms[1:]:
                    e = Xor(e, Slice(lfsr, i, i))
                bits.append(e)
            loads.append((lfsr, b.wire("lfsr_next", Cat(tuple(bits)) if width > 1 else bits[0])))
            reset.append((lfsr, Const(front.lfsr_seed, width)))
        phase = b.wire("phase", total, "modulo 2^" + str(a), carry_only=drop)
        b.wire(front.angle, Slice(phase, a - 1, drop) if drop else phase, "the core's angle", vector=True)
        b.note()
        if word_loads:
            m.add(RegisterBlock(updates=(((load, word_loads),),), reset=tuple((r, Const(0, a)) for r, _ in word_loads)))
            b.note()
        m.add(RegisterBlock(updates=(((take_sig, tuple(loads)),),), reset=tuple(reset)))
        b.note()

    # ------------------------------------------------------------------ pipelined

    def pipelined(self) -> None:
        dp, b, W, m = self.dp, self.b, self.b.W, self.module
        n = dp.iterations
        linear = dp.coordinates == "linear"
        z_only = self.z_only_vectoring()
        bounds = self.design.timing.stages
        self.constants(with_table=True)
        b.note()
        advance: Sig | None = None
        if self.valid_only:
            b.note("The pipeline moves at every clock: the sink takes every sample.")
        else:
            b.note("The pipeline advances while the output buffer can take a sample.")
            advance = b.known(Sig("advance", 1))
            m.add(Decl(advance), Assign(b.sig("in_ready"), advance))
        # A free-running core has no input stream: a sample is taken at every clock from reset.
        in_valid: Expr | None = None if self.free_running else b.sig("in_valid")
        self.phase_front(in_valid if advance is None or in_valid is None else And(in_valid, advance))
        b.note()
        # The input logic's own register stages (a split constant multiplier, an NCO's phase
        # code): the sample's valid and tag travel beside them.
        self.front_valid: Expr = Const(1, 1) if in_valid is None else in_valid
        self.front_tag: Expr | None = b.sig("in_tag") if self.tag else None
        self.front_count = 0
        b.front = lambda values: self.front_stage(values, advance)
        head = self.table_head()
        b.start_table = head > 0
        start = self.fn.hw_inputs(b, dp)
        b.start_table = False
        b.front = None
        head_bits: list[Expr] = []
        if head:
            assert start.select is not None and len(start.vectors) == 2
            head_bits.append(start.select)
        if self.front_count != self.design.timing.front:
            raise AssertionError(
                f"the input logic took {self.front_count} register stage(s); its timing says {self.design.timing.front}"
            )
        src: tuple[Sig, Sig | None, Sig | None] = (start.x, start.y, start.z)  # type: ignore[assignment]
        x_low = 0
        valid_prev: Expr = self.front_valid
        tag_prev: Expr | None = self.front_tag
        side_prev: dict[str, Expr] = dict(start.side)
        final = Final()
        for k, (first, end) in enumerate(bounds):
            b.note()
            what = f"iteration {first}" if end - first == 1 else f"iterations {first} to {end - 1}"
            b.note(f"---- stage {k}: {what} ----")
            for i in range(first, end):
                dst = (f"s{k}_x", f"s{k}_y", f"s{k}_z") if i == end - 1 else (f"x_{i + 1}", f"y_{i + 1}", f"z_{i + 1}")
                # z-only vectoring: iteration n-2 reads x only shifted by s_{n-2}, so iteration
                # n-3 forms just those bits of x (plus the carry of the rest).
                keep_low = dp.shifts[n - 2] if z_only and not linear and i == n - 3 else 0
                fx, fy, fz, final = self.iteration(
                    _Step(f"{i}", i, dp.shifts[i], self.angle(i)), src, dst,
                    final=i == n - 1, x_low=x_low, skip_x=z_only and i == n - 2, x_keep_low=keep_low,
                    z_alone=i < head,
                )
                if i < head:
                    head_bits.append(b.sig(f"dir_{i}"))
                    if i == head - 1:
                        tx, ty = self.head_table(start.vectors, head_bits, dst)
                        src = (tx, ty, fz)
                    else:
                        src = (None, None, fz)
                    continue
                if keep_low:
                    assert fx is not None
                    src = (fx, fy, fz)
                    x_low = keep_low
                else:
                    src = (src[0] if linear else fx, fy, fz)  # type: ignore[assignment]
            if k == len(bounds) - 1:
                break
            x_reg_width, x_reg_src = W, src[0]
            in_head = src[0] is None and head > 0  # the fold and directions travel, not x and y
            if in_head:
                x_reg_width = 0
            elif linear:
                # x is held: the next stages shift it by at least their first index, so only the
                # bits from there up travel on; a last stage that holds only the final vectoring
                # iteration (which forms z alone) needs no x at all.
                next_low = bounds[k + 1][0]
                x_reg_width = 0 if dp.mode == "vectoring" and next_low == n - 1 else W - next_low
                if next_low != x_low:
                    x_reg_src = Slice(src[0], W - 1 - x_low, next_low - x_low)  # type: ignore[assignment]
                x_low = next_low
            elif z_only and bounds[k + 1][0] == n - 1:
                x_reg_width = 0  # the last stage holds only the final iteration: no x read
            elif x_low:
                x_reg_width = W - x_low  # the kept bits of x (z-only vectoring)
            b.note()
            valid = b.known(Sig(f"s{k}_valid_reg", 1))
            m.add(Reg(valid))
            loads: list[tuple[Sig, Expr]] = []
            new_src: list[Sig | None] = [src[0], None, None]
            if x_reg_width:
                xr = b.reg(f"s{k}_x_reg", x_reg_width, of="xy")
                m.add(Reg(xr))
                loads.append((xr, x_reg_src))  # type: ignore[arg-type]
                new_src[0] = xr
            if self.has_y and not in_head:
                yr = b.reg(f"s{k}_y_reg", W, of="xy")
                m.add(Reg(yr))
                loads.append((yr, src[1]))  # type: ignore[arg-type]
                new_src[1] = yr
            if in_head:
                held: list[Expr] = []
                for j, bit in enumerate(head_bits):
                    r = b.known(Sig(f"s{k}_fold_reg" if j == 0 else f"s{k}_dir{j - 1}_reg", 1))
                    m.add(Reg(r))
                    loads.append((r, bit))
                    held.append(r)
                head_bits = held
            if self.has_z:
                zr = b.reg(f"s{k}_z_reg", src[2].width, of="z")  # type: ignore[union-attr]
                m.add(Reg(zr))
                loads.append((zr, src[2]))  # type: ignore[arg-type]
                new_src[2] = zr
            tag_reg = None
            if self.tag:
                tag_reg = b.known(Sig(f"s{k}_tag_reg", self.design.spec.tag_width, vector=True))
                m.add(Reg(tag_reg))
                loads.append((tag_reg, tag_prev))  # type: ignore[arg-type]
            side_regs: dict[str, Expr] = {}
            for name, width in self.fn.side_signals(dp):
                r = b.known(Sig(f"s{k}_{name}_reg", width, vector=True))
                m.add(Reg(r))
                loads.append((r, side_prev[name]))
                side_regs[name] = r
            b.note()
            m.add(RegisterBlock(updates=(((advance, ((valid, valid_prev),)),),), reset=((valid, Const(0, 1)),)))
            b.note()
            m.add(RegisterBlock(updates=(((advance, tuple(loads)),),)))
            valid_prev, tag_prev, side_prev = valid, tag_reg, side_regs
            src = (new_src[0], new_src[1], new_src[2])  # type: ignore[assignment]
        final, side_prev, valid_prev, tag_prev = self.output_register(final, side_prev, valid_prev, tag_prev, advance)
        self.output_stage(final, side_prev, valid_prev, tag_prev)
        if advance is not None:
            m.add(Assign(advance, b.sig("ready_reg")))

    def table_head(self) -> int:
        """How many first iterations this core forms x and y for from a table (0: none;
        :func:`benchgen.functions.table_head`)."""
        return table_head(self.dp, self.design.timing.architecture)

    def head_table(self, vectors: tuple[tuple[int, int], ...], bits: list[Expr], dst: tuple[str, str, str]) -> tuple[Sig, Sig]:
        """x and y after the head's iterations, picked by the fold and its directions."""
        dp, b, W = self.dp, self.b, self.b.W
        h = len(bits) - 1
        mask = (1 << W) - 1
        xs: list[int] = []
        ys: list[int] = []
        for code in range(1 << (h + 1)):
            x, y = vectors[code & 1]
            for i in range(h):
                s, r = dp.shifts[i], dp.rounded_shifts
                tx, ty = shifted_term(x, s, r), shifted_term(y, s, r)
                # counter-clockwise (the direction bit set, z >= 0): x - y/2^s, y + x/2^s
                if code >> (i + 1) & 1:
                    x, y = x - ty, y + tx
                else:
                    x, y = x + ty, y - tx
            xs.append(x & mask)
            ys.append(y & mask)

        def tree(values: list[int], j: int) -> Expr:
            if len(set(values)) == 1:
                return Const(values[0], W)
            ones = [v for c, v in enumerate(values) if c >> j & 1]
            zeros = [v for c, v in enumerate(values) if not c >> j & 1]
            return Mux(bits[j], tree(ones, j - 1), tree(zeros, j - 1))

        b.note(
            f"x and y after iteration {h - 1} depend only on the fold and the directions of iterations\n"
            f"0 to {h - 1} (z alone decides them): read from a table of the {1 << (h + 1)} cases, computed\n"
            "with the iterations' own arithmetic, instead of adding."
        )
        # tree() reads bit j of the case index as bits[j]: fold first, then each direction
        tx = b.wire(dst[0], tree(xs, h), of="xy")
        ty = b.wire(dst[1], tree(ys, h), of="xy")
        return tx, ty

    def front_stage(self, values: dict[str, Expr], advance: Sig | None) -> dict[str, Sig]:
        """One register stage of the input logic: ``values`` (name -> value), the sample's valid
        and tag, loaded together while the pipeline advances."""
        b, m, k = self.b, self.module, self.front_count
        self.front_count += 1
        b.note()
        b.note(f"---- input stage {k} ----")
        valid = b.known(Sig(f"f{k}_valid_reg", 1))
        m.add(Reg(valid))
        loads: list[tuple[Sig, Expr]] = []
        out: dict[str, Sig] = {}
        for name, value in values.items():
            reg = b.known(Sig(f"f{k}_{name}_reg", value.width, vector=value.width > 1 or isinstance(value, Slice)))
            m.add(Reg(reg))
            loads.append((reg, value))
            out[name] = reg
        if self.front_tag is not None:
            tag = b.known(Sig(f"f{k}_tag_reg", self.design.spec.tag_width, vector=True))
            m.add(Reg(tag))
            loads.append((tag, self.front_tag))
            self.front_tag = tag
        b.note()
        m.add(RegisterBlock(updates=(((advance, ((valid, self.front_valid),)),),), reset=((valid, Const(0, 1)),)))
        b.note()
        m.add(RegisterBlock(updates=(((advance, tuple(loads)),),)))
        self.front_valid = valid
        return out

    # ------------------------------------------------------------------ iterative

    def iterative(self) -> None:
        dp, b, W, m = self.dp, self.b, self.b.W, self.module
        groups = self.design.timing.stages
        cycles = len(groups)
        per_cycle = groups[0][1] - groups[0][0]
        n = dp.iterations
        head = groups[0][0]  # the first iterations, formed by table in the clock that loads
        fixed = cycles == 1
        count_width = max(1, (cycles - 1).bit_length())
        shift_width = max(1, max(dp.shifts).bit_length())
        # Where the looped iterations' shifts run on by one (no repeated shift) and a clock does
        # a power of two of them, iteration j of clock c shifts by base + j + c * per_cycle: a
        # fixed shift, then one by the count's own bits, with no table between count and shifter.
        looped = dp.shifts[head:]
        by_count = (
            not fixed
            and per_cycle & (per_cycle - 1) == 0
            and all(s == looped[0] + k for k, s in enumerate(looped))
        )
        # One result every `cycles` >= 2 clocks: one output register is enough (output_single).
        self.single_output = not self.valid_only and not fixed
        self.constants(with_table=fixed, first=head)
        self.phase_front(And(b.sig("in_valid"), b.sig("in_ready")))
        b.note()
        b.start_table = head > 0
        start = self.fn.hw_inputs(b, dp)
        b.start_table = False
        if head:
            start = self.load_head(start, head)
        b.note()
        b.note(
            (f"One sample at a time: load the start values (iterations 0 to {head - 1} included), then\n"
             if head else "One sample at a time: load the start values, then\n")
            + f"{cycles} clock(s) of {per_cycle} iteration(s); the last clock hands the values to the output\n"
            "register, and the clock after rounds them into the output."
        )
        busy = b.known(Sig("busy_reg", 1))
        m.add(Reg(busy))
        count = None
        if cycles > 1:
            count = b.known(Sig("count_reg", count_width, vector=True))
            m.add(Reg(count))
            last = b.wire("last", Cmp("==", count, Const(cycles - 1, count_width)))
        else:
            last = b.wire("last", Const(1, 1))
        x_reg = b.reg("x_reg", W, of="xy")
        m.add(Reg(x_reg))
        y_reg = z_reg = tag_reg = None
        if self.has_y:
            y_reg = b.reg("y_reg", W, of="xy")
            m.add(Reg(y_reg))
        if self.has_z:
            z_reg = b.reg("z_reg", dp.z_width, of="z")
            m.add(Reg(z_reg))
        if self.tag:
            tag_reg = b.known(Sig("tag_reg", self.design.spec.tag_width, vector=True))
            m.add(Reg(tag_reg))
        side_regs: dict[str, Expr] = {}
        for name, width in self.fn.side_signals(dp):
            r = b.known(Sig(f"{name}_reg", width, vector=True))
            m.add(Reg(r))
            side_regs[name] = r
        b.note()
        accept = b.known(Sig("accept", 1))
        m.add(Decl(accept))
        done = b.wire("done", And(busy, last))
        ready: Sig | None = None
        o_to_out: Sig | None = None
        if not self.valid_only:
            # the iterations hand a result over while the output side can take it (always,
            # under the valid-only handshake)
            ready = b.known(Sig("advance", 1))
            m.add(Decl(ready))
        if self.single_output:
            o_to_out = b.known(Sig("o_to_out", 1))
            m.add(Decl(o_to_out, "the held result moves to the output register"))
        amount: Sig | None = None
        if by_count:
            assert count is not None
            low = (per_cycle - 1).bit_length()
            b.note()
            amount = (
                b.wire("count_shift", Cat((count, Const(0, low))), f"count * {per_cycle}: the shift added by the clock")
                if low else count
            )
        steps: list[_Step] = []
        for j in range(per_cycle):
            rows = []
            for c, (first, end) in enumerate(groups):
                i = first + j
                rows.append((c, dp.shifts[i] if i < end else 0, dp.atan_table[i] if i < end else 0, i < end))
            needs_active = not all(r[3] for r in rows)
            if fixed:
                steps.append(_Step(f"j{j}", head + j, dp.shifts[head + j], self.angle(head + j)))
                continue
            assert count is not None
            sigs = []
            if not by_count:
                sigs.append(b.known(Sig(f"shift_j{j}", shift_width)))
            if self.has_z:
                sigs.append(b.reg(f"atan_j{j}", dp.z_width, of="z"))
            if needs_active:
                sigs.append(b.known(Sig(f"active_j{j}", 1)))
            if sigs:
                held = ([] if by_count else ["shift"]) + (["angle constant"] if self.has_z else [])
                held += ["whether it runs"] if needs_active else []
                b.note()
                what = held[0] if len(held) == 1 else f"{', '.join(held[:-1])} and {held[-1]}"
                b.note(f"iteration {j} of each clock: its {what}")
                for sig in sigs:
                    m.add(Reg(sig))

                def values(r: tuple[int, int, int, bool], needs_active: bool = needs_active) -> tuple[int, ...]:
                    vals = [] if by_count else [r[1]]
                    if self.has_z:
                        vals.append(r[2])
                    if needs_active:
                        vals.append(int(r[3]))
                    return tuple(vals)

                default = list(values(rows[0]))
                if needs_active:
                    default[-1] = 0
                m.add(Table(tuple(sigs), count, tuple((r[0], values(r), "") for r in rows), tuple(default)))
            steps.append(
                _Step(
                    f"j{j}", j, None,
                    b.sig(f"atan_j{j}") if self.has_z else Const(0, dp.z_width),
                    b.sig(f"active_j{j}") if needs_active else None,
                )
            )
        src: tuple[Sig, Sig | None, Sig | None] = (x_reg, y_reg, z_reg)
        x_low = 0
        final = Final()
        z_only_x = fixed and self.z_only_vectoring()
        for j, step in enumerate(steps):
            i = head + j
            dst = (f"x_{j + 1}", f"y_{j + 1}", f"z_{j + 1}")
            keep_low = dp.shifts[n - 2] if z_only_x and dp.coordinates != "linear" and i == n - 3 else 0
            b.note()
            if not fixed:
                names = [("xs", src[0])]
                if dp.coordinates != "linear" and self.has_y:
                    assert src[1] is not None
                    names.append(("ys", src[1]))
                for name, value in names:
                    self.shifter(name, value, j, looped[0] + j if by_count else None, amount)
            fx, fy, fz, final = self.iteration(
                step, src, dst,
                final=fixed and j == per_cycle - 1, x_low=x_low,
                skip_x=z_only_x and i == n - 2, x_keep_low=keep_low,
            )
            if keep_low:
                assert fx is not None
                src = (fx, fy, fz)
                x_low = keep_low
            else:
                src = (src[0] if dp.coordinates == "linear" else fx, fy, fz)  # type: ignore[assignment]
        if not fixed:
            final = self.output_view(final)
        held, held_side, held_valid, held_tag = self.output_register(final, side_regs, done, tag_reg, ready, o_to_out)
        self.output_stage(held, held_side, held_valid, held_tag)
        in_ready, in_valid = b.sig("in_ready"), b.sig("in_valid")
        b.note()
        b.note("A new sample is taken when idle, or in the clock that hands the current one over.")
        m.add(Assign(in_ready, Or(Not(busy), last if ready is None else And(last, ready))))
        m.add(Assign(accept, And(in_valid, in_ready)))
        b.note()
        control: list = [
            ((accept, ((busy, Const(1, 1)),)), (done if ready is None else And(done, ready), ((busy, Const(0, 1)),))),
        ]
        reset: list[tuple[Sig, Expr]] = [(busy, Const(0, 1))]
        if count is not None:
            control.append(
                ((accept, ((count, Const(0, count_width)),)),
                 (And(busy, Not(last)), ((count, Add(count, Const(1, count_width))),)))
            )
            reset.append((count, Const(0, count_width)))
        m.add(RegisterBlock(updates=tuple(control), reset=tuple(reset)))
        b.note()
        loads: list[tuple[Sig, Expr]] = [(x_reg, start.x)]  # type: ignore[list-item]
        if y_reg is not None:
            loads.append((y_reg, start.y))  # type: ignore[arg-type]
        if z_reg is not None:
            loads.append((z_reg, start.z))  # type: ignore[arg-type]
        if tag_reg is not None:
            loads.append((tag_reg, b.sig("in_tag")))
        for name, _ in self.fn.side_signals(dp):
            loads.append((side_regs[name], start.side[name]))  # type: ignore[arg-type]
        chain: list = [(accept, tuple(loads))]
        if cycles > 1:
            back: list[tuple[Sig, Expr]] = [(x_reg, src[0])]  # type: ignore[list-item]
            if y_reg is not None:
                back.append((y_reg, src[1]))  # type: ignore[arg-type]
            if z_reg is not None:
                back.append((z_reg, src[2]))  # type: ignore[arg-type]
            chain.append((And(busy, Not(last)), tuple(back)))
        m.add(RegisterBlock(updates=(tuple(chain),)))
        if ready is not None:
            b.note()
            if self.single_output:
                # the held result leaves for the output register in the clock after it lands
                # (results come at most every other clock): load it only when it is empty
                m.add(Assign(ready, Not(b.sig("o_valid_reg"))))
            else:
                m.add(Assign(ready, b.sig("ready_reg")))

    def shifter(self, name: str, value: Sig, j: int, base: int | None, amount: Sig | None) -> None:
        """An iterative core's shifted term ``{name}_j{j}`` = value >>> s for the clock's shift s,
        and where the terms are rounded (``dp.rounded_shifts``) its rounding bit
        ``{name[0]}r_j{j}`` = bit s - 1 of value (0 where s = 0).

        ``base``: the fixed part of s where the count adds the rest (``amount``), shifted as
        wiring ahead of the shifter; else None (s from the clock's table, ``shift_j{j}``).
        Rounded, the shifter shifts by s - 1 and a fixed 1 follows, so the bit below the shift
        is the bit it drops and no second shifter is needed (:func:`benchgen.model.shifted_term`);
        a shift that can be 0 shifts the value with a zero below it (one bit wider), which is
        the same thing."""
        b, W = self.b, self.b.W
        back = 1 if self.dp.rounded_shifts else 0  # shift by s - back, then by back
        wide: Expr = value
        if base is not None and base >= back:
            wide = sign_shift(value, base - back, W)
            if not isinstance(wide, Sig):
                wide = b.wire(f"{name[0]}p_j{j}", wide, f"{name[0]} >>> {base - back}", of="xy")
        elif back:
            wide = Cat((value, Const(0, 1)))
        assert base is None or amount is not None, "a count-added shift needs the count"
        by: Expr = b.sig(f"shift_j{j}") if base is None else amount  # type: ignore[assignment]
        if not back:
            b.wire(f"{name}_j{j}", Sra(wide, by), of="xy")
            return
        w = b.wire(f"{name[0]}w_j{j}", Sra(wide, by), f"{name[0]} >>> (shift - 1)")
        term = sign_shift(w, 1, W) if w.width == W else Slice(w, W, 1)
        b.wire(f"{name}_j{j}", term, f"{name[0]} >>> shift", of="xy")
        b.wire(f"{name[0]}r_j{j}", w[0], "the bit below the shift: the rounding bit")

    def load_head(self, start: Start, head: int) -> Start:
        """The first ``head`` iterations in the clock that loads a sample: z steps by the angle
        constants, and x and y come from the table of the fold and the directions
        (:meth:`head_table`), so the looped clocks start at iteration ``head``.

        Only the directions chain (each reads the z before it); z after the head is the start
        z plus a sum of constants picked by them, formed as two sums beside the last direction's
        adder and chosen by it, so ``head - 1`` carry chains, not ``head``, sit between the input
        and the registers: one for the two-iteration head (HX8K 67 -> 80 MHz for a 16/16
        sincos, docs/hardware.md)."""
        dp, b, ZW = self.dp, self.b, self.b.ZW
        assert start.select is not None and start.z is not None and len(start.vectors) == 2
        z0: Expr = start.z
        z: Expr = z0
        bits: list[Expr] = [start.select]
        atans: list[int] = []
        for i in range(head):
            atans.append(dp.atan_table[i])
            b.note(f"iteration {i}, in the load clock: turn counter-clockwise when the remaining angle is >= 0")
            d = b.wire(f"dir_h{i}", Cmp("<", z, b.p("Z_HALF")))
            bits.append(d)
            if i < head - 1 or head == 1:
                atan = b.param(self.angle_name(i), atans[i], dp.z_width, self.fn.atan_comment(dp, i), here=True, of="z")
                z = b.wire(f"z_h{i + 1}", Add(z, Mux(d, Not(atan), atan), d), of="z")
        if head > 1:
            mask = (1 << ZW) - 1

            def step_sum(last: int, j: int, taken: int) -> Expr:
                """The head's constant steps summed (mod 2^ZW) for the last direction ``last``:
                a tree over the earlier directions, from ``j`` down (``taken``: their bits)."""
                if j < 0:
                    dirs = [taken >> i & 1 for i in range(head - 1)] + [last]
                    return Const(sum(-a if di else a for a, di in zip(atans, dirs, strict=True)) & mask, ZW)
                return Mux(bits[j + 1], step_sum(last, j - 1, taken | 1 << j), step_sum(last, j - 1, taken))

            b.note(
                f"z after iteration {head - 1}: the start z plus the head's steps, both sums for the last\n"
                "direction formed beside it and picked by it"
            )
            last = head - 1
            z_cw = b.wire(f"z_h{head}_cw", Add(z0, step_sum(0, head - 2, 0)), f"if iteration {last} turns clockwise (adds its angle)", of="z")
            z_ccw = b.wire(f"z_h{head}_ccw", Add(z0, step_sum(1, head - 2, 0)), "if it turns counter-clockwise (subtracts it)", of="z")
            z = b.wire(f"z_h{head}", Mux(bits[head], z_ccw, z_cw), of="z")
        b.note()
        x, y = self.head_table(start.vectors, bits, ("x_start", "y_start", ""))
        return Start(x, y, z, side=dict(start.side))


def build_core(design: Design, *, config_text: str = "") -> Module:
    """The core's description, from the design alone (and the config text for its header)."""
    core = _Core(design, config_text)
    core.header()
    core.ports()
    if design.timing.architecture == "pipelined":
        core.pipelined()
    else:
        core.iterative()
    return core.module
