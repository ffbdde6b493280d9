"""Verilog for a core: its description (benchgen.hardware) printed by benchgen.verilog.

Output is byte-identical for the same config: no timestamps, no absolute paths, the same order
every time. The one Jinja2 environment of every generated file lives here too.
"""

from __future__ import annotations

from dataclasses import replace
from functools import cache
from importlib import resources
from pathlib import Path

import jinja2

from benchgen.config import MAX_NAME_LENGTH, name_problem
from benchgen.design import Design
from benchgen.errors import ConfigError
from benchgen.hardware import MAX_HEADER_LINE, build_core, header_lines
from benchgen.netlist import Module, declared
from benchgen.verilog import literal, module_parts
from benchgen.vhdl import module_parts as vhdl_module_parts

__all__ = [
    "MAX_HEADER_LINE",
    "check_module_name",
    "header_lines",
    "render_core",
    "render_module",
    "render_vhdl_core",
    "render_vhdl_module",
    "template_dir",
    "template_environment",
    "tidy_text",
    "verilog_literal",
]

verilog_literal = literal
"""A sized hexadecimal literal of a value in two's complement (the printer's own)."""


def template_dir() -> Path:
    """Folder of the Jinja2 templates: ``rtl_templates/`` of a source checkout, else the package."""
    here = Path(__file__).resolve().parent.parent / "rtl_templates"
    if (here / "module.v.j2").is_file():
        return here
    return Path(str(resources.files("benchgen.rtl_templates")))


@cache
def template_environment() -> jinja2.Environment:
    """The one Jinja2 environment of every generated file: strict, no autoescape, stable spacing.

    Built once per process: every template it loads stays compiled in its cache.
    """
    return jinja2.Environment(
        loader=jinja2.FileSystemLoader(str(template_dir())),
        undefined=jinja2.StrictUndefined,
        keep_trailing_newline=True,
        trim_blocks=True,
        lstrip_blocks=True,
        autoescape=False,
    )


def render_module(module: Module) -> str:
    """A described module as Verilog-2005 text."""
    return _tidy(template_environment().get_template("module.v.j2").render(module_parts(module)))


def render_vhdl_module(module: Module) -> str:
    """A described module as VHDL-2008 text (the same description as :func:`render_module`)."""
    return _tidy(template_environment().get_template("module.vhd.j2").render(vhdl_module_parts(module)))


def _tidy(text: str) -> str:
    # One trailing newline, no trailing blanks, no runs of blank lines: byte-stable output
    # whatever the spacing of the description.
    lines: list[str] = []
    for line in (raw.rstrip() for raw in text.splitlines()):
        if line or (lines and lines[-1]):
            lines.append(line)
    while lines and not lines[-1]:
        lines.pop()
    return "\n".join(lines) + "\n"


tidy_text = _tidy
"""Generated text made byte-stable: one trailing newline, no trailing blanks, no blank runs."""


def render_core(design: Design, *, config_text: str = "") -> str:
    """The core's Verilog source."""
    return render_module(build_core(design, config_text=config_text))


def render_vhdl_core(design: Design, *, config_text: str = "") -> str:
    """The core's VHDL-2008 source, printed from the same description as its Verilog."""
    return render_vhdl_module(build_core(design, config_text=config_text))


def check_module_name(design: Design) -> None:
    """Refuse a core name that is also the name of a port, signal or constant inside the core.

    Such a core is legal Verilog, but ``verilator -Wall`` warns that the inner declaration hides
    the module (VARHIDDEN, e.g. for a core named ``advance`` or ``clk``), and the generated RTL
    must lint clean. Which names the core uses depends on the function and the architecture, so
    the core's description is read, not a fixed list.

    Raises:
        ConfigError: naming a close name that is free (tried the same way) as the fix.
    """
    name = design.spec.name
    if not _clashes(name, design):
        return
    for suffix in ("core", "top", "unit", "cordic"):
        better = f"{name[: MAX_NAME_LENGTH - len(suffix) - 1]}_{suffix}"
        if name_problem(better) is None and not _clashes(better, replace(design, spec=replace(design.spec, name=better))):
            break
    else:  # pragma: no cover - four suffixes all taken inside one core
        better = "nco_core"
    raise ConfigError(
        "name",
        name,
        "a name that no port, signal or constant inside the core also has (the inner one would "
        "hide the module: verilator -Wall, VARHIDDEN; in VHDL, in any case: ghdl -Whide)",
        f'use name = "{better}"',
        suggestion={"name": better},
    )


def _clashes(name: str, design: Design) -> bool:
    """Whether a name inside the core is the core's name: in any case where the core is also
    VHDL, which ignores case (ghdl -Whide: a port ``clk`` hides an entity ``CLK``)."""
    inner = _inner_names(design)
    if "vhdl" in design.spec.hdl:
        return name.lower() in {n.lower() for n in inner}
    return name in inner


def _inner_names(design: Design) -> set[str]:
    module = build_core(design)
    return {s.name for s in declared(module)} | {p.name for p in module.params}
