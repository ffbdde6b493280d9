"""Core configuration: a TOML file read into a frozen, validated :class:`CoreSpec`.

Everything is checked before anything is generated: a bad value raises :class:`ConfigError`
naming the field, the value, the allowed range and the fix.
"""

from __future__ import annotations

import difflib
import re
import tomllib
from collections.abc import Mapping
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

from benchgen.errors import ConfigError

__all__ = [
    "ANGLE_UNITS",
    "ARCHITECTURES",
    "FUNCTIONS",
    "GAIN_MODES",
    "MAX_WIDTH",
    "ROUNDING_MODES",
    "CoreSpec",
    "load_config",
    "parse_config",
]

FUNCTIONS = ("sincos", "rotate", "atan2", "mul", "div", "sinhcosh", "exp", "atanh", "ln", "sqrt")
LINEAR_FUNCTIONS = ("mul", "div")
HYPERBOLIC_FUNCTIONS = ("sinhcosh", "exp", "atanh", "ln", "sqrt")
# Functions whose ports carry no angle (angle_width and angle_unit do not apply).
ANGLE_FREE_FUNCTIONS = LINEAR_FUNCTIONS + HYPERBOLIC_FUNCTIONS
# Functions whose result carries no gain (gain does not apply).
GAIN_FREE_FUNCTIONS = LINEAR_FUNCTIONS + ("atanh", "ln")
GAIN_MODES = ("compensated", "raw")
ANGLE_UNITS = ("turns", "radians")
MIN_RADIAN_ANGLE_WIDTH = 6
ARCHITECTURES = ("pipelined", "iterative")
ROUNDING_MODES = ("truncate", "half_up", "half_even")
MIN_ANGLE_WIDTH = 3
MIN_DATA_WIDTH = 3
MAX_WIDTH = 64
MAX_TAG_WIDTH = 64
MAX_ITERATIONS = 96

# IEEE 1364-2005 reserved words, plus the IEEE 1800-2017 ones, because Verilator parses
# Verilog files as SystemVerilog by default and a module called `logic` would break there.
_VERILOG_KEYWORDS = frozenset(
    """
    always and assign automatic begin buf bufif0 bufif1 case casex casez cell cmos config
    deassign default defparam design disable edge else end endcase endconfig endfunction
    endgenerate endmodule endprimitive endspecify endtable endtask event for force forever
    fork function generate genvar highz0 highz1 if ifnone incdir include initial inout input
    instance integer join large liblist library localparam macromodule medium module nand
    negedge nmos nor noshowcancelled not notif0 notif1 or output parameter pmos posedge
    primitive pull0 pull1 pulldown pullup pulsestyle_ondetect pulsestyle_onevent rcmos real
    realtime reg release repeat rnmos rpmos rtran rtranif0 rtranif1 scalared showcancelled
    signed small specify specparam strong0 strong1 supply0 supply1 table task time tran
    tranif0 tranif1 tri tri0 tri1 triand trior trireg unsigned use uwire vectored wait wand
    weak0 weak1 while wire wor xnor xor
    alias always_comb always_ff always_latch assert assume before bind bins binsof bit break
    byte chandle checker class clocking const constraint context continue cover covergroup
    coverpoint cross dist do endchecker endclass endclocking endgroup endinterface endpackage
    endprogram endproperty endsequence enum eventually expect export extends extern final
    first_match foreach forkjoin global iff ignore_bins illegal_bins implements implies import
    inside int interconnect interface intersect join_any join_none let local logic longint
    matches modport nettype new null package packed priority program property protected pure
    rand randc randcase randsequence ref restrict return s_always s_eventually s_nexttime
    s_until s_until_with sequence shortint shortreal soft solve static string strong struct
    super sync_accept_on sync_reject_on tagged this throughout timeprecision timeunit type
    typedef union unique unique0 until until_with untyped var virtual void wait_order weak
    wildcard with within accept_on reject_on nexttime
    """.split()
)
_IDENTIFIER = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")


@dataclass(frozen=True, kw_only=True)
class CoreSpec:
    """One core, as the user asked for it (``None`` means ``auto`` or "not applicable").

    Attributes:
        name: Verilog module name.
        function: Which function the core computes (``sincos``, ``rotate``, ``atan2``, ``mul``,
            ``div``, ``sinhcosh``, ``exp``, ``atanh``, ``ln``, ``sqrt``).
        architecture: ``pipelined`` or ``iterative``.
        pipeline_depth: Register stages of a pipelined core; ``None`` means one per iteration.
        iterations_per_cycle: Iterations an iterative core performs per clock.
        angle_width: Bits of the binary angle input (2**angle_width codes per turn).
        data_width: Bits of each signed output.
        iterations: Rotation iterations, or ``None`` for auto sizing.
        guard_bits: Extra fraction bits inside the data path, or ``None`` for auto sizing.
        rounding: How the guard bits are dropped at the output.
        tag_width: Width of the user tag carried with each sample; 0 means no tag ports.
        max_error_lsb: Worst error the core may have against the ideal, in output LSBs.
        gain: ``compensated`` (the core removes the rotation gain) or ``raw`` (left in, stated
            in the manifest).
        angle_unit: ``turns`` (binary angle) or ``radians`` (signed fixed point, 3 integer bits).
        prenormalise: atan2: shift (x, y) left by their common redundant sign bits before
            vectoring, so the angle meets the budget for every non-zero vector (``False``
            keeps the smaller core whose angle is judged only for long vectors).
    """

    name: str
    function: str = "sincos"
    architecture: str = "pipelined"
    pipeline_depth: int | None = None
    iterations_per_cycle: int | None = None
    angle_width: int = 16
    data_width: int = 16
    iterations: int | None = None
    guard_bits: int | None = None
    rounding: str = "half_even"
    tag_width: int = 0
    max_error_lsb: float = 1.0
    gain: str = "compensated"
    angle_unit: str = "turns"
    prenormalise: bool = True

    def to_dict(self) -> dict[str, Any]:
        """The spec as config-file values (``auto`` for sized fields, absent fields dropped)."""
        out: dict[str, Any] = {}
        unused: tuple[str, ...] = ()
        if self.function in ANGLE_FREE_FUNCTIONS:
            unused += ("angle_width", "angle_unit")
        if self.function in GAIN_FREE_FUNCTIONS:
            unused += ("gain",)
        if self.function != "atan2":
            unused += ("prenormalise",)
        for key, value in asdict(self).items():
            if key in unused:
                continue
            if value is None:
                if key in ("iterations", "guard_bits"):
                    out[key] = "auto"
                continue
            out[key] = value
        return out


_FIELDS: tuple[str, ...] = (
    "name",
    "function",
    "architecture",
    "pipeline_depth",
    "iterations_per_cycle",
    "angle_width",
    "data_width",
    "iterations",
    "guard_bits",
    "rounding",
    "tag_width",
    "max_error_lsb",
    "gain",
    "angle_unit",
    "prenormalise",
)


def _closest(word: str, choices: tuple[str, ...] | list[str]) -> str:
    near = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.5)
    return f" (did you mean '{near[0]}'?)" if near else ""


def _int_field(
    raw: Mapping[str, Any], key: str, lo: int, hi: int, *, auto: bool = False
) -> int | None:
    value = raw[key]
    if auto and value == "auto":
        return None
    allowed = f"a whole number from {lo} to {hi}" + (' or "auto"' if auto else "")
    if isinstance(value, bool) or not isinstance(value, int):
        kind = type(value).__name__
        fix = f"write {key} = {lo}" + (' or "auto"' if auto else "") + f" (it is a {kind} now)"
        raise ConfigError(key, value, allowed, fix)
    if not lo <= value <= hi:
        nearest = min(max(value, lo), hi)
        raise ConfigError(key, value, allowed, f"set {key} = {nearest} or another value in range")
    return value


def _choice_field(raw: Mapping[str, Any], key: str, choices: tuple[str, ...]) -> str:
    value = raw[key]
    allowed = "one of " + ", ".join(f'"{c}"' for c in choices)
    if not isinstance(value, str):
        raise ConfigError(key, value, allowed, f'write it as a quoted string, e.g. {key} = "{choices[0]}"')
    if value not in choices:
        near = difflib.get_close_matches(value, list(choices), n=1, cutoff=0.4)
        hint = near[0] if near else choices[0]
        raise ConfigError(key, value, allowed, f'use {key} = "{hint}"')
    return value


def _check_name(value: Any) -> str:
    allowed = "a Verilog identifier (letters, digits, _; not starting with a digit) that is not a keyword"
    if not isinstance(value, str):
        raise ConfigError("name", value, allowed, 'write it as a quoted string, e.g. name = "nco_core"')
    if not _IDENTIFIER.match(value):
        cleaned = re.sub(r"[^A-Za-z0-9_]", "_", value) or "core"
        if cleaned[0].isdigit():
            cleaned = "core_" + cleaned
        raise ConfigError("name", value, allowed, f'use a plain identifier such as name = "{cleaned}"')
    if value in _VERILOG_KEYWORDS:
        raise ConfigError(
            "name", value, allowed + f" ('{value}' is a reserved word)", f'pick another, e.g. name = "{value}_core"'
        )
    if len(value) > 128:
        raise ConfigError("name", value, allowed + " of at most 128 characters", "shorten it")
    return value


def parse_config(raw: Mapping[str, Any]) -> CoreSpec:
    """Validate a mapping of config values and return the frozen spec.

    Raises:
        ConfigError: on the first field that is missing, unknown, of the wrong type or out of range.
    """
    unknown = sorted(k for k in raw if k not in _FIELDS)
    if unknown:
        key = unknown[0]
        raise ConfigError(
            key,
            raw[key],
            "not a known field; known fields are " + ", ".join(_FIELDS),
            f"remove '{key}' or correct its spelling{_closest(key, _FIELDS)}",
        )
    if "name" not in raw:
        raise ConfigError("name", "(missing)", "required", 'add a line such as name = "nco_core"')
    if "function" not in raw:
        raise ConfigError(
            "function", "(missing)", "required", 'add function = "sincos" (or one of rotate, atan2, mul, div, sinhcosh, exp, atanh, ln, sqrt)'
        )
    name = _check_name(raw["name"])
    function = _choice_field(raw, "function", FUNCTIONS)
    arch = _choice_field(raw, "architecture", ARCHITECTURES) if "architecture" in raw else "pipelined"
    angle_width = (
        _int_field(raw, "angle_width", MIN_ANGLE_WIDTH, MAX_WIDTH) if "angle_width" in raw else 16
    )
    data_width = _int_field(raw, "data_width", MIN_DATA_WIDTH, MAX_WIDTH) if "data_width" in raw else 16
    iterations = _int_field(raw, "iterations", 1, MAX_ITERATIONS, auto=True) if "iterations" in raw else None
    guard_bits = _int_field(raw, "guard_bits", 0, 16, auto=True) if "guard_bits" in raw else None
    rounding = _choice_field(raw, "rounding", ROUNDING_MODES) if "rounding" in raw else "half_even"
    tag_width = _int_field(raw, "tag_width", 0, MAX_TAG_WIDTH) if "tag_width" in raw else 0
    gain = _choice_field(raw, "gain", GAIN_MODES) if "gain" in raw else "compensated"
    angle_unit = _choice_field(raw, "angle_unit", ANGLE_UNITS) if "angle_unit" in raw else "turns"
    if function in ANGLE_FREE_FUNCTIONS:
        # No angle port (and, for some, no gain): a value set here would mislead.
        for key in ("angle_width", "angle_unit", "gain"):
            if key == "gain" and function not in GAIN_FREE_FUNCTIONS:
                continue
            if key in raw:
                why = (
                    "linear coordinates have no angle and no gain"
                    if function in LINEAR_FUNCTIONS
                    else "its ports carry no angle" if key != "gain"
                    else "its result is the angle z, which the gain does not scale"
                )
                raise ConfigError(key, raw[key], f'not used by function = "{function}" ({why})', f"remove {key}")
        angle_width = data_width
    if angle_unit == "radians" and angle_width < MIN_RADIAN_ANGLE_WIDTH:
        raise ConfigError(
            "angle_width",
            angle_width,
            f"at least {MIN_RADIAN_ANGLE_WIDTH} with angle_unit = \"radians\" (3 integer bits and "
            "3 fraction bits at the least)",
            f"set angle_width = {MIN_RADIAN_ANGLE_WIDTH} or more",
        )
    assert angle_width is not None and data_width is not None and tag_width is not None
    prenormalise = True
    if "prenormalise" in raw:
        value = raw["prenormalise"]
        if function != "atan2":
            raise ConfigError(
                "prenormalise",
                value,
                'only used by function = "atan2" (div always normalises its operands)',
                "remove prenormalise",
            )
        if not isinstance(value, bool):
            raise ConfigError(
                "prenormalise", value, "true or false", "write prenormalise = true or prenormalise = false (no quotes)"
            )
        prenormalise = value

    max_error = raw.get("max_error_lsb", 1.0)
    if isinstance(max_error, bool) or not isinstance(max_error, int | float):
        raise ConfigError(
            "max_error_lsb", max_error, "a number of output LSBs from 0.5 to 1e6", "write e.g. max_error_lsb = 1.0"
        )
    if not 0.5 <= float(max_error) <= 1e6:
        raise ConfigError(
            "max_error_lsb",
            max_error,
            "a number from 0.5 to 1e6 (below 0.5 LSB no rounded output can be that close)",
            "set max_error_lsb = 1.0 or larger",
        )

    depth: int | None = None
    per_cycle: int | None = None
    if arch == "pipelined":
        if "iterations_per_cycle" in raw:
            raise ConfigError(
                "iterations_per_cycle",
                raw["iterations_per_cycle"],
                'only used when architecture = "iterative"',
                'remove it, or set architecture = "iterative"',
            )
        if "pipeline_depth" in raw:
            depth = _int_field(raw, "pipeline_depth", 1, MAX_ITERATIONS)
    else:
        if "pipeline_depth" in raw:
            raise ConfigError(
                "pipeline_depth",
                raw["pipeline_depth"],
                'only used when architecture = "pipelined"',
                'remove it, or set architecture = "pipelined"',
            )
        per_cycle = (
            _int_field(raw, "iterations_per_cycle", 1, MAX_ITERATIONS) if "iterations_per_cycle" in raw else 1
        )

    if iterations is not None:
        if depth is not None and depth > iterations:
            raise ConfigError(
                "pipeline_depth",
                depth,
                f"from 1 to iterations ({iterations}): one register stage per iteration at most",
                f"set pipeline_depth to at most {iterations}",
            )
        if per_cycle is not None and per_cycle > iterations:
            raise ConfigError(
                "iterations_per_cycle",
                per_cycle,
                f"from 1 to iterations ({iterations})",
                f"set iterations_per_cycle to at most {iterations}",
            )

    return CoreSpec(
        name=name,
        function=function,
        architecture=arch,
        pipeline_depth=depth,
        iterations_per_cycle=per_cycle,
        angle_width=angle_width,
        data_width=data_width,
        iterations=iterations,
        guard_bits=guard_bits,
        rounding=rounding,
        tag_width=tag_width,
        max_error_lsb=float(max_error),
        gain=gain,
        angle_unit=angle_unit,
        prenormalise=prenormalise,
    )


def load_config(path: str | Path) -> CoreSpec:
    """Read and validate a TOML config file.

    Raises:
        ConfigError: if the file is missing, is not TOML, or holds a bad value (the error names
            the file).
    """
    path = Path(path)
    source = str(path)
    if not path.is_file():
        what = "is a folder" if path.is_dir() else "does not exist"
        raise ConfigError(
            "", f"config file '{path}' {what}", "a TOML file describing one core is needed",
            "check the path, or start from one of the examples in sim_projects/*/config.toml",
        )
    try:
        raw = tomllib.loads(path.read_text(encoding="utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise ConfigError(
            "", f"config file is not valid TOML ({exc})", "TOML syntax (key = value, strings in quotes)",
            "correct the line named above",
        ).with_source(source) from None
    try:
        return parse_config(raw)
    except ConfigError as exc:
        raise exc.with_source(source) from None
