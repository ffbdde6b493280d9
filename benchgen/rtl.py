"""Verilog generation: Python decides every name, width and constant; the templates only format.

The context passed to the templates is built from the :class:`~benchgen.design.Design` alone, so
the RTL and the bit-true model share one source of truth. Output is byte-identical for the same
config: no timestamps, no absolute paths, sorted iteration everywhere.
"""

from __future__ import annotations

from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Any

import jinja2

from benchgen import __version__
from benchgen.design import Design
from benchgen.functions import input_ports, output_ports

__all__ = ["Iteration", "build_context", "render_core", "template_dir", "template_environment", "verilog_literal"]


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


def _drops(design: Design) -> dict[str, int]:
    """Bits each coordinate's final value loses to output rounding, by coordinate."""
    dp = design.datapath
    if dp.mode == "vectoring":
        return {"x": dp.guard_bits, "y": 0, "z": dp.z_frac - dp.angle_frac}
    return {"x": dp.guard_bits, "y": dp.guard_bits, "z": 0}


def _final_outputs(design: Design) -> tuple[bool, bool, bool]:
    """Which of x, y, z the last iteration must form."""
    return {
        "mul": (False, True, False),
        "div": (False, False, True),
        "atan2": (True, False, True),
    }.get(design.datapath.function, (True, True, False))


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
) -> Iteration:
    dp = design.datapath
    w = dp.xy_width
    x_in, y_in, z_in = src
    x_out, y_out, z_out = dst
    if final:
        need = _final_outputs(design)
        x_out, y_out, z_out = (n if keep else "" for n, keep in zip(dst, need, strict=True))
    kept = {"x": 0, "y": 0, "z": 0}
    if final and truncate_final:
        kept = {k: v for k, v in _drops(design).items()}
        kept = {k: (v if (k != "y" or y_out) and (k != "z" or z_out) else 0) for k, v in kept.items()}
    dir_expr = f"({y_in} >= Y_HALF)" if dp.mode == "vectoring" else f"({z_in} < Z_HALF)"
    if dp.coordinates == "linear":
        x_out = ""  # x is held: every iteration reads the same value
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
        x_shift=f"xs_{label}" if shift is None else _sign_shift_part(x_in, shift, w, x_low),
        y_shift=f"ys_{label}" if shift is None else _sign_shift(y_in, shift, w),
        atan=atan,
        active=active,
        kept_x=kept["x"],
        kept_y=kept["y"],
        kept_z=kept["z"],
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
    bounds = design.timing.stages
    for k, (first, end) in enumerate(bounds):
        iters = []
        for i in range(first, end):
            final = i == n - 1
            if i == end - 1:
                dst = (f"s{k}_x", f"s{k}_y", f"s{k}_z")
            else:
                dst = (f"x_{i + 1}", f"y_{i + 1}", f"z_{i + 1}")
            it = _iteration(
                f"{i}", i, src, dst, design=design, shift=i, atan=f"ATAN_{i}", final=final,
                truncate_final=truncating, x_low=x_low,
            )
            iters.append(it)
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
    shift_width = max(1, (n - 1).bit_length())
    truncating = dp.rounding == "truncate"
    iters = []
    tables = []
    src = ("x_reg", "y_reg", "z_reg")
    for j in range(per_cycle):
        dst = (f"x_{j + 1}", f"y_{j + 1}", f"z_{j + 1}")
        rows = []
        for c, (first, end) in enumerate(groups):
            i = first + j
            rows.append(
                {
                    "count": c,
                    "shift": i if i < end else 0,
                    "atan": dp.atan_table[i] if i < end else 0,
                    "active": i < end,
                }
            )
        fixed = cycles == 1
        needs_active = not all(r["active"] for r in rows)
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
                shift=j if fixed else None,
                atan=f"ATAN_{j}" if fixed else f"atan_j{j}",
                active=f"active_j{j}" if needs_active else "",
                final=final,
                truncate_final=truncating,
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
    if design.datapath.function == "atan2":
        return [{"name": "zero", "width": 1, "src": "in_zero"}]
    if design.datapath.function == "div":
        return [{"name": "bad", "width": 1, "src": "in_bad"}]
    return []


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
        "config_lines": [line.rstrip() for line in config_text.strip().splitlines()],
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
    # Input logic constants.
    if dp.function == "sincos":
        ctx["x_start_pos"] = verilog_literal(dp.x_start, w)
        ctx["x_start_neg"] = verilog_literal(-dp.x_start, w)
    if dp.radians:
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


def template_environment() -> jinja2.Environment:
    """The one Jinja2 environment of every generated file: strict, no autoescape, stable spacing."""
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
