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

__all__ = ["Iteration", "render_core", "template_dir", "verilog_literal"]


def template_dir() -> Path:
    """Folder of the Jinja2 templates: ``rtl_templates/`` of a source checkout, else the package."""
    here = Path(__file__).resolve().parent.parent / "rtl_templates"
    if (here / "sincos_pipelined.v.j2").is_file():
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
    """One rotation iteration as the template writes it.

    Attributes:
        index: Iteration number i (shift by i).
        x_in, y_in, z_in: Names of the values entering the iteration.
        x_out, y_out, z_out: Names of the values leaving it (``z_out`` empty when no later
            iteration needs the angle).
        dir: Name of the direction wire (1: turn counter-clockwise).
        x_shift, y_shift: Expressions of x and y shifted right by i, sign-extended.
        atan: Angle constant expression.
        active: Expression that enables the iteration (iterative cores whose last clock has
            fewer iterations than the others), or empty.
        kept_only: Only the kept bits of x and y are needed (the last iteration of a pipelined
            core that truncates): the template writes the carry of the dropped bits instead of
            the dropped bits themselves.
    """

    index: int
    x_in: str
    y_in: str
    z_in: str
    x_out: str
    y_out: str
    z_out: str
    dir: str
    x_shift: str
    y_shift: str
    atan: str
    active: str = ""
    kept_only: bool = False


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
    kept_only: bool = False,
) -> Iteration:
    w = design.datapath.xy_width
    x_in, y_in, z_in = src
    if shift is None:
        x_shift = f"xs_{label}"
        y_shift = f"ys_{label}"
    else:
        x_shift = _sign_shift(x_in, shift, w)
        y_shift = _sign_shift(y_in, shift, w)
    return Iteration(
        index=i,
        x_in=x_in,
        y_in=y_in,
        z_in=z_in,
        x_out=dst[0],
        y_out=dst[1],
        z_out=dst[2],
        dir=f"dir_{label}",
        x_shift=x_shift,
        y_shift=y_shift,
        atan=atan,
        active=active,
        kept_only=kept_only,
    )


def _pipelined_context(design: Design) -> dict[str, Any]:
    dp = design.datapath
    n = dp.iterations
    stages = []
    src = ("x_start", "y_start", "z_start")
    for k, (first, end) in enumerate(design.timing.stages):
        last_stage = k == len(design.timing.stages) - 1
        iters = []
        for i in range(first, end):
            final = i == n - 1
            if i == end - 1:
                dst = (f"s{k}_x", f"s{k}_y", "" if final else f"s{k}_z")
            else:
                dst = (f"x_{i + 1}", f"y_{i + 1}", f"z_{i + 1}")
            iters.append(
                _iteration(
                    f"{i}",
                    i,
                    src,
                    dst,
                    design=design,
                    shift=i,
                    atan=f"ATAN_{i}",
                    kept_only=final and dp.rounding == "truncate" and dp.guard_bits > 0,
                )
            )
            src = dst
        stages.append({"index": k, "first": first, "end": end, "iterations": iters, "last": last_stage})
        src = (f"s{k}_x_reg", f"s{k}_y_reg", f"s{k}_z_reg")
    return {"stages": stages}


def _iterative_context(design: Design) -> dict[str, Any]:
    dp = design.datapath
    groups = design.timing.stages
    cycles = len(groups)
    per_cycle = groups[0][1] - groups[0][0]
    n = dp.iterations
    count_width = max(1, (cycles - 1).bit_length())
    shift_width = max(1, (n - 1).bit_length())
    iters = []
    tables = []
    src = ("x_reg", "y_reg", "z_reg")
    for j in range(per_cycle):
        dst = (f"x_{j + 1}", f"y_{j + 1}", f"z_{j + 1}")
        rows = []
        for c, (first, end) in enumerate(groups):
            i = first + j
            rows.append({"count": c, "shift": i if i < end else 0, "atan": dp.atan_table[i] if i < end else 0, "active": i < end})
        fixed = cycles == 1
        needs_active = not all(r["active"] for r in rows)
        final = fixed and j == per_cycle - 1
        if final:
            dst = (dst[0], dst[1], "")
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
                kept_only=final and dp.rounding == "truncate" and dp.guard_bits > 0,
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
        src = dst
    return {
        "group": iters,
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


def build_context(design: Design, *, config_text: str = "") -> dict[str, Any]:
    """Everything the templates print, decided here."""
    dp = design.datapath
    spec = design.spec
    pad = dp.z_width - dp.angle_width
    angle_low = f"in_angle[{dp.angle_width - 2}:0]"
    z_start = f"{{in_angle[{dp.angle_width - 2}], {angle_low}"
    z_start += f", {{{pad}{{1'b0}}}}}}" if pad else "}"
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
        "W": dp.xy_width,
        "ZW": dp.z_width,
        "B": dp.data_width,
        "A": dp.angle_width,
        "G": dp.guard_bits,
        "x_start_pos": verilog_literal(dp.x_start, dp.xy_width),
        "x_start_neg": verilog_literal(-dp.x_start, dp.xy_width),
        "z_half": verilog_literal(1 << (dp.z_width - 1), dp.z_width),
        "z_start": z_start,
        "atan": [verilog_literal(a, dp.z_width) for a in dp.atan_table],
        "out_max": verilog_literal(dp.output_max, dp.data_width),
        "out_min": verilog_literal(-dp.output_max, dp.data_width),
        "min_code": verilog_literal(1 << (dp.data_width - 1), dp.data_width),
        "round_half": verilog_literal(1 << (dp.guard_bits - 1), dp.guard_bits) if dp.guard_bits else "",
        "one_b": verilog_literal(0, dp.data_width),  # zero-extension prefix for a 1-bit increment
        "zero_w1": verilog_literal(0, dp.xy_width - 1),
        "zero_z1": verilog_literal(0, dp.z_width - 1),
        "zero_g": verilog_literal(0, dp.guard_bits) if dp.guard_bits else "",
        "ones_g": verilog_literal((1 << dp.guard_bits) - 1, dp.guard_bits) if dp.guard_bits else "",
    }
    if design.timing.architecture == "pipelined":
        ctx.update(_pipelined_context(design))
    else:
        ctx.update(_iterative_context(design))
    return ctx


def _environment() -> jinja2.Environment:
    env = jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(template_dir())),
        undefined=jinja2.StrictUndefined,
        keep_trailing_newline=True,
        trim_blocks=True,
        lstrip_blocks=True,
        autoescape=False,
    )
    return env


def render_core(design: Design, *, config_text: str = "") -> str:
    """The core's Verilog source."""
    name = f"{design.spec.function}_{design.timing.architecture}.v.j2"
    text = _environment().get_template(name).render(build_context(design, config_text=config_text))
    # One trailing newline, no trailing blanks: byte-stable output whatever the template spacing.
    lines = [line.rstrip() for line in text.splitlines()]
    while lines and not lines[-1]:
        lines.pop()
    return "\n".join(lines) + "\n"
