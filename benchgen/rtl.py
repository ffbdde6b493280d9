"""Verilog generation: Python decides every name, width and constant; the templates only format.

The context passed to the templates is built from the :class:`~benchgen.design.Design` alone, so
the RTL and the bit-true model share one source of truth. Output is byte-identical for the same
config: no timestamps, no absolute paths, sorted iteration everywhere.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, replace
from functools import cache
from importlib import resources
from pathlib import Path
from typing import Any

import jinja2

from benchgen import __version__
from benchgen.config import MAX_NAME_LENGTH, name_problem
from benchgen.design import Design
from benchgen.errors import ConfigError
from benchgen.functions import input_ports, output_ports, small_vector_limit

__all__ = [
    "MAX_HEADER_LINE",
    "Iteration",
    "build_context",
    "check_module_name",
    "header_lines",
    "render_core",
    "template_dir",
    "template_environment",
    "verilog_literal",
]

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


def template_dir() -> Path:
    """Folder of the Jinja2 templates: ``rtl_templates/`` of a source checkout, else the package."""
    here = Path(__file__).resolve().parent.parent / "rtl_templates"
    if (here / "core_pipelined.v.j2").is_file():
        return here
    return Path(str(resources.files("benchgen.rtl_templates")))


def verilog_literal(value: int, width: int) -> str:
    """A sized hexadecimal literal of ``value`` in two's complement (wide values stay exact)."""
    mask = (1 << width) - 1
    digits = max(1, -(-width // 4))
    return f"{width}'h{value & mask:0{digits}x}"


def _sign_shift(name: str, shift: int, width: int) -> str:
    """``name >>> shift`` written as an explicit sign extension, so no signedness rules apply."""
    if shift == 0:
        return name
    if shift >= width:
        return f"{{{width}{{{name}[{width - 1}]}}}}"
    return f"{{{{{shift}{{{name}[{width - 1}]}}}}, {name}[{width - 1}:{shift}]}}"


@dataclass(frozen=True)
class Iteration:
    """One iteration as the template writes it.

    Attributes:
        index: Iteration number i (shift by i) or sub-iteration j of an iterative core.
        x_in, y_in, z_in: Names of the values entering the iteration.
        x_out, y_out, z_out: Names of the values leaving it; empty when nothing needs them.
        dir: Name of the direction wire (1: turn counter-clockwise).
        dir_expr: What sets it: z >= 0 (rotation) or y < 0 (vectoring), as a comparison that
            reads every bit.
        x_shift, y_shift: Expressions of x and y shifted right by i, sign-extended.
        atan: Angle constant expression.
        active: Expression that enables the iteration (iterative cores whose last clock has
            fewer iterations than the others), or empty.
        kept_x, kept_y, kept_z: Bits dropped by truncation after this iteration (the last one of
            a pipelined core): only the kept bits are formed, plus the carry of the dropped
            bits, so no formed bit goes unused. 0 when the full value is formed.
        shift: The iteration's right shift, or None where it comes from a table (iterative
            cores with more than one clock per sample).
    """

    index: int
    x_in: str
    y_in: str
    z_in: str
    x_out: str
    y_out: str
    z_out: str
    dir: str
    dir_expr: str
    x_shift: str
    y_shift: str
    atan: str
    active: str = ""
    kept_x: int = 0
    kept_y: int = 0
    kept_z: int = 0
    shift: int | None = None


def _drops(design: Design) -> dict[str, int]:
    """Bits each coordinate's final value loses to output rounding, by coordinate.

    ln and sqrt round a value derived from z or x (2z - e ln 2; x shifted back by the
    normalisation), so their final z or x is formed whole.
    """
    dp = design.datapath
    if dp.function == "ln":
        return {"x": 0, "y": 0, "z": 0}
    if dp.function == "sqrt":
        # Truncation: floor(x 2^-k 2^-g) = floor(x 2^-g) 2^-k, so the final x drops g bits first.
        return {"x": dp.guard_bits, "y": 0, "z": 0}
    if dp.function == "atanh":
        return {"x": 0, "y": 0, "z": dp.z_frac - dp.out_frac}
    if dp.mode == "vectoring":
        return {"x": dp.guard_bits, "y": 0, "z": dp.z_frac - dp.angle_frac}
    return {"x": dp.guard_bits, "y": dp.guard_bits, "z": 0}


def _final_outputs(design: Design) -> tuple[bool, bool, bool]:
    """Which of x, y, z the last iteration must form."""
    return {
        "mul": (False, True, False),
        "div": (False, False, True),
        "atan2": (True, False, True),
        "exp": (True, False, False),
        "atanh": (False, False, True),
        "ln": (False, False, True),
        "sqrt": (True, False, False),
    }.get(design.datapath.function, (True, True, False))


def _z_only_vectoring(design: Design) -> bool:
    """Vectoring whose result is z alone: the last iteration reads y's sign and z, so the x
    formed just before it has no reader."""
    dp = design.datapath
    return dp.mode == "vectoring" and not _final_outputs(design)[0]


def _carries(function: str) -> tuple[bool, bool]:
    """Whether the core carries y and z at all: exp keeps only x (y equals x all the way, as
    both start at 1/A_n), sqrt never reads z."""
    return function != "exp", function != "sqrt"


def _sign_shift_part(name: str, shift: int, width: int, low: int) -> str:
    """x >>> shift, where ``name`` holds only bits [width-1:low] of x (low <= shift)."""
    if low == 0:
        return _sign_shift(name, shift, width)
    top = width - 1 - low
    return f"{{{{{shift}{{{name}[{top}]}}}}, {name}[{top}:{shift - low}]}}"


def _iteration(
    label: str,
    i: int,
    src: tuple[str, str, str],
    dst: tuple[str, str, str],
    *,
    design: Design,
    shift: int | None,
    atan: str,
    active: str = "",
    final: bool = False,
    truncate_final: bool = False,
    x_low: int = 0,
    skip_x: bool = False,
    x_keep_low: int = 0,
) -> Iteration:
    dp = design.datapath
    w = dp.xy_width
    x_in, y_in, z_in = src
    x_out, y_out, z_out = dst
    if final:
        need = _final_outputs(design)
        x_out, y_out, z_out = (n if keep else "" for n, keep in zip(dst, need, strict=True))
    has_y, has_z = _carries(dp.function)
    if skip_x:
        x_out = ""
    if not has_y:
        y_out = ""
    if not has_z:
        z_out = ""
    kept = {"x": x_keep_low, "y": 0, "z": 0}
    if final and truncate_final:
        kept = {k: v for k, v in _drops(design).items()}
        kept = {k: (v if (k != "y" or y_out) and (k != "z" or z_out) and (k != "x" or x_out) else 0) for k, v in kept.items()}
    dir_expr = f"({y_in} >= Y_HALF)" if dp.mode == "vectoring" else f"({z_in} < Z_HALF)"
    if dp.coordinates == "linear":
        x_out = ""  # x is held: every iteration reads the same value
    x_shift = f"xs_{label}" if shift is None else _sign_shift_part(x_in, shift, w, x_low)
    y_shift = f"ys_{label}" if shift is None else _sign_shift(y_in, shift, w)
    if not has_y:
        y_shift = x_shift  # exp: y is x
    return Iteration(
        index=i,
        x_in=x_in,
        y_in=y_in,
        z_in=z_in,
        x_out=x_out,
        y_out=y_out,
        z_out=z_out,
        dir=f"dir_{label}",
        dir_expr=dir_expr,
        x_shift=x_shift,
        y_shift=y_shift,
        atan=atan,
        active=active,
        kept_x=kept["x"],
        kept_y=kept["y"],
        kept_z=kept["z"],
        shift=shift,
    )


def _pipelined_context(design: Design) -> dict[str, Any]:
    dp = design.datapath
    n = dp.iterations
    w = dp.xy_width
    truncating = dp.rounding == "truncate"
    linear = dp.coordinates == "linear"
    stages = []
    src = ("x_start", "y_start", "z_start")
    x_low = 0  # bits of x below this are not held (linear coordinates only)
    z_only = _z_only_vectoring(design)
    bounds = design.timing.stages
    for k, (first, end) in enumerate(bounds):
        iters = []
        for i in range(first, end):
            final = i == n - 1
            if i == end - 1:
                dst = (f"s{k}_x", f"s{k}_y", f"s{k}_z")
            else:
                dst = (f"x_{i + 1}", f"y_{i + 1}", f"z_{i + 1}")
            # z-only vectoring: iteration n-2 reads x only shifted by s_{n-2}, so iteration n-3
            # forms just those bits of x (plus the carry of the rest).
            keep_low = dp.shifts[n - 2] if z_only and not linear and i == n - 3 else 0
            it = _iteration(
                f"{i}", i, src, dst, design=design, shift=dp.shifts[i], atan=f"ATAN_{i}", final=final,
                truncate_final=truncating, x_low=x_low, skip_x=z_only and i == n - 2, x_keep_low=keep_low,
            )
            iters.append(it)
            if keep_low:
                src = (f"{dst[0]}_kept", dst[1], dst[2])
                x_low = keep_low
            else:
                src = (src[0] if linear else dst[0], dst[1], dst[2])
        stage: dict[str, Any] = {
            "index": k, "first": first, "end": end, "iterations": iters, "last": k == len(bounds) - 1,
            "x_reg_width": w, "x_reg_src": f"s{k}_x",
        }
        if linear and k + 1 < len(bounds):
            # x is held: the next stages shift it by at least their first index, so only the
            # bits from there up travel on; and a last stage that holds only the final
            # vectoring iteration (which forms z alone) needs no x at all.
            next_low = bounds[k + 1][0]
            if dp.mode == "vectoring" and next_low == n - 1:
                stage["x_reg_width"] = 0
            else:
                stage["x_reg_width"] = w - next_low
            top = w - 1 - x_low
            stage["x_reg_src"] = src[0] if next_low == x_low else f"{src[0]}[{top}:{next_low - x_low}]"
            x_low = next_low
        elif z_only and k + 1 < len(bounds) and bounds[k + 1][0] == n - 1:
            stage["x_reg_width"] = 0  # the last stage holds only the final iteration: no x read
        elif x_low and k + 1 < len(bounds):
            stage["x_reg_width"] = w - x_low  # the kept bits of x (z-only vectoring)
            stage["x_reg_src"] = src[0]
        stages.append(stage)
        src = (f"s{k}_x_reg", f"s{k}_y_reg", f"s{k}_z_reg")
    last = stages[-1]["iterations"][-1]
    return {"stages": stages, "final": last}


def _iterative_context(design: Design) -> dict[str, Any]:
    dp = design.datapath
    groups = design.timing.stages
    cycles = len(groups)
    per_cycle = groups[0][1] - groups[0][0]
    n = dp.iterations
    count_width = max(1, (cycles - 1).bit_length())
    shift_width = max(1, max(dp.shifts).bit_length())
    truncating = dp.rounding == "truncate"
    iters = []
    tables = []
    x_low = 0  # bits of x below this are not formed (z-only vectoring, one clock per sample)
    src = ("x_reg", "y_reg", "z_reg")
    for j in range(per_cycle):
        dst = (f"x_{j + 1}", f"y_{j + 1}", f"z_{j + 1}")
        rows = []
        for c, (first, end) in enumerate(groups):
            i = first + j
            rows.append(
                {
                    "count": c,
                    "shift": dp.shifts[i] if i < end else 0,
                    "atan": dp.atan_table[i] if i < end else 0,
                    "active": i < end,
                }
            )
        fixed = cycles == 1
        needs_active = not all(r["active"] for r in rows)
        z_only = fixed and _z_only_vectoring(design) and dp.coordinates != "linear"
        keep_low = dp.shifts[n - 2] if z_only and j == n - 3 else 0
        # With one clock per sample the group output feeds only the rounding, like a pipeline's
        # last stage; with more it also feeds the registers, which need every value.
        final = fixed and j == per_cycle - 1
        iters.append(
            _iteration(
                f"j{j}",
                j,
                src,
                dst,
                design=design,
                shift=dp.shifts[j] if fixed else None,
                atan=f"ATAN_{j}" if fixed else f"atan_j{j}",
                active=f"active_j{j}" if needs_active else "",
                final=final,
                truncate_final=truncating,
                skip_x=fixed and _z_only_vectoring(design) and j == n - 2,
                x_keep_low=keep_low,
                x_low=x_low,
            )
        )
        if not fixed:
            tables.append(
                {
                    "j": j,
                    "rows": [
                        {
                            "count": verilog_literal(r["count"], count_width),
                            "shift": verilog_literal(r["shift"], shift_width),
                            "atan": verilog_literal(r["atan"], dp.z_width),
                            "active": "1'b1" if r["active"] else "1'b0",
                        }
                        for r in rows
                    ],
                    "needs_active": needs_active,
                }
            )
        if keep_low:
            src = (f"{dst[0]}_kept", dst[1], dst[2])
            x_low = keep_low
        else:
            src = (src[0] if dp.coordinates == "linear" else dst[0], dst[1], dst[2])
    return {
        "group": iters,
        "final": iters[-1],
        "tables": tables,
        "cycles": cycles,
        "per_cycle": per_cycle,
        "count_width": count_width,
        "shift_width": shift_width,
        "count_last": verilog_literal(cycles - 1, count_width),
        "count_one": verilog_literal(1, count_width),
        "count_zero": verilog_literal(0, count_width),
        "group_out": src,
    }


def _side_signals(design: Design) -> list[dict[str, Any]]:
    """Per-sample values that travel beside x, y, z from the input logic to the output logic."""
    dp = design.datapath
    if dp.function == "atan2":
        zero = {"name": "zero", "width": 1, "src": "in_zero"}
        if dp.prenorm_max:
            return [zero, {"name": "shift", "width": dp.prenorm_width, "src": "in_shift"}]
        return [zero]
    if dp.function in ("div", "atanh"):
        return [{"name": "bad", "width": 1, "src": "in_bad"}]
    if dp.function == "ln":
        return [{"name": "bad", "width": 1, "src": "in_bad"}, {"name": "lz", "width": dp.lz_width, "src": "in_lz"}]
    if dp.function == "sqrt":
        return [
            {"name": "zero", "width": 1, "src": "in_zero"},
            {"name": "half", "width": dp.norm_max.bit_length(), "src": "in_half"},
        ]
    if dp.function == "exp":
        return [{"name": "q", "width": dp.exp_width, "src": "in_q"}]
    return []


def _hyperbolic_context(dp: Any) -> dict[str, Any]:
    """Constants of the hyperbolic functions' input and output logic."""
    b = dp.data_width
    w = dp.xy_width
    g = dp.guard_bits
    lit = verilog_literal
    ctx: dict[str, Any] = {}
    if dp.function in ("sinhcosh", "exp", "atanh"):
        ctx["x_start"] = lit(dp.x_start, w)
    if dp.function == "sinhcosh":
        pad = dp.z_frac - dp.in_frac
        ctx["t_z"] = {"ext": dp.z_width - b - pad, "pad": lit(0, pad)}
    if dp.function == "exp":
        s = dp.inv_ln2_shift
        qw = dp.exp_width + 1  # the first guess may be one above the largest exponent
        pw = s + qw
        inv_w = dp.inv_ln2.bit_length()
        # The remainder before correction lies in [-ln 2, ln 2): z's width holds it.
        rw = dp.z_width
        t_bits = rw - (dp.z_frac - dp.in_frac)
        assert t_bits <= b and pw > b and pw > inv_w
        ctx["exp"] = {
            "qw": qw, "pw": pw, "s": s,
            "inv": lit(dp.inv_ln2, pw),
            "half": lit(1 << (s - 1), s),
            "t_ext": pw - b,
            "t_low": t_bits,
            "t_pad": lit(0, dp.z_frac - dp.in_frac),
            "ln2_z": lit(dp.ln2_const, dp.z_width),
            "q_ext": rw - qw,
            "ew": dp.exp_width,
        }
    if dp.function == "atanh":
        ctx["limit"] = lit(dp.domain_limit, b + 1)
    if dp.function in ("ln", "sqrt"):
        lzw = dp.lz_width
        if dp.function == "ln":
            # Leading zeros: the index of the first 1 from the top (b - 1 when none).
            terms = [(f"in_w[{b - 1 - k}]", lit(k, lzw)) for k in range(b - 1)]
            ctx["lz_expr"] = " : ".join(f"{c} ? {v}" for c, v in terms) + (" : " if terms else "") + lit(b - 1, lzw)
            rw = dp.z_frac + dp.int_bits + 2
            ctx["ln"] = {
                "rw": rw,
                "lzw": lzw,
                "rows": [(lit(e, lzw), lit(v, rw), e) for e, v in enumerate(dp.ln2_table)],
                "full": len(dp.ln2_table) == 1 << lzw,
                "z_ext": rw - dp.z_width - 1,
            }
        else:
            # Half the even normalising shift: the first pair of bits from the top with a 1.
            hw = dp.norm_max.bit_length()
            terms = []
            for k in range(dp.norm_max):
                hi, lo = b - 1 - 2 * k, b - 2 - 2 * k
                cond = f"(in_w[{hi}] | in_w[{lo}])" if lo >= 0 else f"in_w[{hi}]"
                terms.append((cond, lit(k, hw)))
            ctx["half_expr"] = " : ".join(f"{c} ? {v}" for c, v in terms) + (" : " if terms else "") + lit(dp.norm_max, hw)
            nm = dp.norm_max
            sq: dict[str, Any] = {"hw": hw, "nm": nm, "quarter": lit(dp.quarter, w), "pad_nm": lit(0, nm)}
            if dp.k_frac:
                kw = dp.k_frac + 1
                pw = b + kw
                drop = dp.k_frac - g
                sq["scale"] = {
                    "k": lit(dp.k_const, pw), "pw": pw, "drop": drop, "half": lit(1 << (drop - 1), drop),
                    "p_w": pw - drop, "inc_pad": lit(0, pw - drop - 1), "ext": w - (pw - drop),
                }
                assert w > pw - drop
            else:
                sq["scale"] = None
                sq["ext"] = w - b - g
            ctx["sq"] = sq
    return ctx


def build_context(design: Design, *, config_text: str = "") -> dict[str, Any]:
    """Everything the templates print, decided here."""
    dp = design.datapath
    spec = design.spec
    b = dp.data_width
    g = dp.guard_bits
    w = dp.xy_width
    ctx: dict[str, Any] = {
        "version": __version__,
        "name": spec.name,
        "spec": spec,
        "dp": dp,
        "timing": design.timing,
        "accuracy": design.accuracy,
        "proof_lines": _wrap("measured over " + design.proof.describe() + ".", 92),
        "small_vector": small_vector_limit(dp),
        "config_lines": header_lines(config_text),
        "tag": spec.tag_width > 0,
        "tag_width": spec.tag_width,
        "inputs": input_ports(dp),
        "outputs": output_ports(dp),
        "side": _side_signals(design),
        "W": w,
        "ZW": dp.z_width,
        "B": b,
        "A": dp.angle_width,
        "G": g,
        "lit": verilog_literal,
        "z_half": verilog_literal(1 << (dp.z_width - 1), dp.z_width),
        "y_half": verilog_literal(1 << (w - 1), w),
        "atan": [verilog_literal(a, dp.z_width) for a in dp.atan_table],
        "drops": _drops(design),
    }
    ctx["prenorm"] = None
    if dp.prenorm_max:
        sw = dp.prenorm_width

        def leading_zero_encoder(bits: str) -> str:
            # bits holds bits B-2 down to 1 of the value: the index of the first 1 from the top,
            # B - 2 when there is none (bit 0 alone, or nothing, below the sign).
            terms = [f"{bits}[{b - 3 - k}] ? {verilog_literal(k, sw)}" for k in range(b - 2)]
            return " : ".join(terms + [verilog_literal(b - 2, sw)])

        ctx["prenorm"] = {"sw": sw, "sm": dp.prenorm_max, "expr": leading_zero_encoder}
    has_y, has_z = _carries(dp.function)
    ctx["has_y"] = has_y
    ctx["has_z"] = has_z
    if dp.coordinates == "hyperbolic":
        ctx |= _hyperbolic_context(dp)
    # Input logic constants.
    if dp.function == "sincos":
        ctx["x_start_pos"] = verilog_literal(dp.x_start, w)
        ctx["x_start_neg"] = verilog_literal(-dp.x_start, w)
    if dp.coordinates == "hyperbolic":
        pass
    elif dp.radians:
        pad = dp.z_frac - dp.angle_frac
        ctx["theta"] = f"{{in_angle, {verilog_literal(0, pad)}}}" if pad else "in_angle"
        ctx["pi"] = verilog_literal(dp.pi_const, dp.z_width)
        ctx["neg_pi"] = verilog_literal(-dp.pi_const, dp.z_width)
        ctx["half_pi"] = verilog_literal(dp.pi_const >> 1, dp.z_width)
        ctx["neg_half_pi"] = verilog_literal(-(dp.pi_const >> 1), dp.z_width)
    else:
        pad = dp.z_width - dp.angle_width
        low = f"in_angle[{dp.angle_width - 2}:0]"
        ctx["z_fold"] = f"{{in_angle[{dp.angle_width - 2}], {low}" + (f", {verilog_literal(0, pad)}}}" if pad else "}")
    if dp.function in ("rotate", "atan2"):
        if dp.gain_mode == "compensated":
            kw = dp.k_frac + 1
            pw = (b + 1) + kw
            drop = dp.k_frac - g
            ctx["scale"] = {
                "k": verilog_literal(dp.k_const, kw),
                "kw": kw,
                "pw": pw,
                "drop": drop,
                "half": verilog_literal(1 << (drop - 1), drop),
                "k_pad": verilog_literal(0, pw - kw),
                "inc_pad": verilog_literal(0, pw - drop - 1),
            }
            assert pw - drop == w, "the prescaled value must fill the internal width"
        else:
            ctx["scale"] = None
            ctx["raw_ext"] = w - g - (b + 1)  # sign bits above the (b+1)-bit input, below x_start's top
    return ctx | (_pipelined_context(design) if design.timing.architecture == "pipelined" else _iterative_context(design))


def _wrap(text: str, width: int) -> list[str]:
    """Words of ``text`` in lines of at most ``width`` characters (for header comments)."""
    lines: list[str] = []
    for word in text.split():
        if lines and len(lines[-1]) + 1 + len(word) <= width:
            lines[-1] += " " + word
        else:
            lines.append(word)
    return lines


@cache
def template_environment() -> jinja2.Environment:
    """The one Jinja2 environment of every generated file: strict, no autoescape, stable spacing.

    Made once per process, so each template is compiled once (compiling is most of a render's
    time; the loader still reloads a template whose file changed)."""
    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(template_dir())),
        undefined=jinja2.StrictUndefined,
        keep_trailing_newline=True,
        trim_blocks=True,
        lstrip_blocks=True,
        autoescape=False,
    )


def render_core(design: Design, *, config_text: str = "") -> str:
    """The core's Verilog source."""
    name = f"core_{design.timing.architecture}.v.j2"
    text = template_environment().get_template(name).render(build_context(design, config_text=config_text))
    # One trailing newline, no trailing blanks, no runs of blank lines: byte-stable output
    # whatever the template spacing.
    lines: list[str] = []
    for line in (raw.rstrip() for raw in text.splitlines()):
        if line or (lines and lines[-1]):
            lines.append(line)
    while lines and not lines[-1]:
        lines.pop()
    return "\n".join(lines) + "\n"


_COMMENT_OR_STRING = re.compile(r"//[^\n]*|/\*.*?\*/|\"(?:\\.|[^\"\\])*\"", re.DOTALL)
_TOKEN = re.compile(r"[A-Za-z_][A-Za-z0-9_$]*")


def _name_uses(verilog: str, name: str) -> int:
    """How often ``name`` appears as an identifier in Verilog text, comments and strings aside."""
    return sum(1 for t in _TOKEN.findall(_COMMENT_OR_STRING.sub(" ", verilog)) if t == name)


def check_module_name(design: Design) -> None:
    """Refuse a core name that is also the name of a port, signal or constant inside the core.

    Such a core is legal Verilog, but ``verilator -Wall`` warns that the inner declaration hides
    the module (VARHIDDEN, e.g. for a core named ``advance`` or ``clk``), and the generated RTL
    must lint clean. Which names the core uses depends on the function and the architecture, so
    the rendered core is read, not a fixed list.

    Raises:
        ConfigError: naming a close name that is free (tried the same way) as the fix.
    """
    name = design.spec.name
    if _name_uses(render_core(design), name) <= 1:  # the module declaration itself
        return
    for suffix in ("core", "top", "unit", "cordic"):
        better = f"{name[: MAX_NAME_LENGTH - len(suffix) - 1]}_{suffix}"
        if name_problem(better) is None:
            trial = replace(design, spec=replace(design.spec, name=better))
            if _name_uses(render_core(trial), better) <= 1:
                break
    else:  # pragma: no cover - four suffixes all taken inside one core
        better = "nco_core"
    raise ConfigError(
        "name",
        name,
        "a name that no port, signal or constant inside the core also has (the inner one would "
        "hide the module: verilator -Wall, VARHIDDEN)",
        f'use name = "{better}"',
        suggestion={"name": better},
    )
