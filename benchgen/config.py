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

from benchgen.errors import ConfigError, show_value
from benchgen.functions import FUNCTION_NAMES, function_named, refused_fields
from benchgen.functions import FUNCTIONS as _FUNCTION_CLASSES
from benchgen.spec import (
    DEFAULT_HDL,
    DEFAULT_VLNV_LIBRARY,
    DEFAULT_VLNV_VENDOR,
    HANDSHAKES,
    HDLS,
    MAX_TABLE_HEAD,
    NCO_MODES,
    RESET_POLARITIES,
    RESET_STYLES,
    SHIFTED_TERMS,
    CoreSpec,
)
from benchgen.vhdl import RESERVED_WORDS as VHDL_RESERVED_WORDS

__all__ = [
    "ANGLE_UNITS",
    "ARCHITECTURES",
    "DEFAULT_VLNV_LIBRARY",
    "DEFAULT_VLNV_VENDOR",
    "FUNCTIONS",
    "GAIN_MODES",
    "MAX_NAME_LENGTH",
    "MAX_PORT_WIDTH",
    "MAX_WIDTH",
    "RESET_POLARITIES",
    "RESET_STYLES",
    "ROUNDING_MODES",
    "SYNONYMS",
    "CoreSpec",
    "load_config",
    "name_problem",
    "parse_config",
    "read_toml",
    "spec_to_dict",
    "suggest_name",
]

FUNCTIONS = FUNCTION_NAMES
GAIN_MODES = ("compensated", "raw")
ANGLE_UNITS = ("turns", "radians")
MIN_RADIAN_ANGLE_WIDTH = 6
ARCHITECTURES = ("pipelined", "iterative")
ROUNDING_MODES = ("truncate", "half_up", "half_even")
# Trade names an engineer may write for a value, by field: the "did you mean" hint ranks by
# meaning first and by spelling only where no synonym is known ("atan" is close in spelling to
# "atanh", but an engineer who writes it means the two-argument arctangent). A function's own
# trade names live in its module (``Function.synonyms``), where its name may be written.
SYNONYMS: dict[str, dict[str, str]] = {
    "function": {s: f.name for f in _FUNCTION_CLASSES for s in f.synonyms},
    "rounding": {
        "round_half_even": "half_even", "rne": "half_even", "convergent": "half_even",
        "bankers": "half_even", "floor": "truncate", "trunc": "truncate", "round_half_up": "half_up",
    },
    "architecture": {
        "pipeline": "pipelined", "pipelined_core": "pipelined", "unrolled": "pipelined",
        "iteration": "iterative", "iterate": "iterative", "sequential": "iterative", "folded": "iterative",
    },
    "nco_mode": {
        "free": "free_running", "freerunning": "free_running", "free_run": "free_running",
        "continuous": "free_running", "stream": "streamed", "streaming": "streamed", "tokens": "streamed",
    },
}
MIN_ANGLE_WIDTH = 3
MIN_DATA_WIDTH = 3
MAX_PORT_WIDTH = 64
"""Widest port of a core: the bulk harness packs each port into a slot of at most 8 bytes, and its
C++ runner moves ports as 64-bit integers (benchgen/harness.py)."""
MAX_WIDTH = MAX_PORT_WIDTH
"""Widest ``data_width`` and ``angle_width``: each is the width of a port."""
MAX_TAG_WIDTH = MAX_PORT_WIDTH
MAX_ITERATIONS = 96
# The vendor and library parts of the FuseSoC name (VLNV) of the core file every project holds
# (benchgen/fusesoc.py). FuseSoC 2.4's own rule for each part is [A-Za-z0-9_.-]* (its vlnv.py);
# ours also wants a letter or digit first (a leading '-' or '.' reads as an option or a hidden
# file) and a bounded length.
MAX_VLNV_PART = 64
_VLNV_PART = re.compile(r"[A-Za-z0-9][A-Za-z0-9_.-]*")

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
# VHDL's reserved words (one list, the VHDL printer's): VHDL compares identifiers without case.
_VHDL_KEYWORDS = VHDL_RESERVED_WORDS
# Names that a simulator, or a library it loads, already defines:
# - std: SystemVerilog's built-in package (IEEE 1800-2017 26.7); Verilator 5.048 ships it as
#   `package std` (include/verilated_std.sv) and refuses a module of that name as a duplicate.
# - TOP: Verilator 5.048 refuses it ("conflicts with Verilator top-level internals").
# - cocotb_iverilog_dump: the module cocotb 2.1's runner adds to an Icarus build for waves.
# - benchgen_waves, benchgen_waves_root: the modules benchgen adds to a build for waves
#   (benchgen.waves).
# Without case: VHDL's libraries std, ieee and work, which every VHDL design sees; and the
# Windows device names con, prn, aux, nul, com1-9, lpt1-9, which no file may carry, extension
# or not (Microsoft, "Naming Files, Paths, and Namespaces"; from memory), since the project's
# files are named after the core.
_TOOL_NAMES = frozenset({"std", "TOP", "cocotb_iverilog_dump", "benchgen_waves", "benchgen_waves_root"})
# Verilator 5.048 reads a comment that starts with "verilator" or "synopsys" as a directive and
# stops with BADVLTPRAGMA on "// verilator_core: ..." (checked here; "Verilator" too).
_DIRECTIVE_PREFIXES = ("verilator", "synopsys")
_CASELESS_NAMES = frozenset(
    {"std", "ieee", "work", "con", "prn", "aux", "nul"}
    | {f"com{k}" for k in range(1, 10)}
    | {f"lpt{k}" for k in range(1, 10)}
)
# A VHDL basic identifier (IEEE 1076-2008 15.4.2): a letter, then letters and digits with single
# underscores between them (no leading, trailing or double underscore). Every Verilog tool takes
# it as it is, and Verilator keeps it unchanged in its C++ names (it spells "__" as "___05F").
_IDENTIFIER = re.compile(r"[A-Za-z](?:_?[A-Za-z0-9])*")
# Verilator replaces identifiers of 128 characters or more by a hash (VName::maxLength(128) in its
# V3Options.cpp: "Linux filename limits 256; leave half for prefix"), after which cocotb cannot
# find the top level by name and the native bulk runner cannot include its model's header. The
# longest module name benchgen derives from the core's is the native bulk harness's,
# NAME_bulk_native, 12 characters more, so a name may have 127 - 12 = 115. Measured with
# Verilator 5.048: a 127-character core passes per-clock, 128 fails; a 115-character one passes
# both bulk engines, 116 fails the native one (122 passes the cocotb one, 123 fails it). Icarus
# and VHDL set no limit.
MAX_NAME_LENGTH = 127 - len("_bulk_native")
_NAME_RULE = (
    "letters, digits and single underscores, starting with a letter and not ending with '_' "
    f"(an identifier in Verilog and VHDL alike), at most {MAX_NAME_LENGTH} characters"
)


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
    "angle_guard_bits",
    "rounding",
    "tag_width",
    "max_error_lsb",
    "gain",
    "angle_unit",
    "prenormalise",
    "vlnv_vendor",
    "vlnv_library",
    "hdl",
    "reset_style",
    "reset_polarity",
    "clock_enable",
    "handshake",
    "shifted_terms",
    "table_head",
    "acc_width",
    "dither_width",
    "lfsr_width",
    "lfsr_seed",
    "sfdr_dbc",
    "snr_db",
    "nco_mode",
)
# Fields left out of the manifest's config at their default, so a project that does not set
# them keeps the manifest it had before they existed (same config, same bytes).
_QUIET_DEFAULTS: dict[str, object] = {
    "hdl": DEFAULT_HDL,
    "reset_style": RESET_STYLES[0],
    "reset_polarity": RESET_POLARITIES[0],
    "clock_enable": False,
    "handshake": "ready_valid",
    "nco_mode": NCO_MODES[0],
}


def spec_to_dict(spec: CoreSpec) -> dict[str, Any]:
    """The spec as config-file values (``auto`` for sized fields; fields the function does not
    use, and absent ones, dropped)."""
    unused = set(refused_fields(function_named(spec.function)))
    out: dict[str, Any] = {}
    for key, value in asdict(spec).items():
        if key in unused or key not in _FIELDS:  # target_picks: the sizer's, not the user's
            continue
        if value is None:
            if key in ("iterations", "guard_bits"):  # angle_guard_bits: left out, as before it existed
                out[key] = "auto"
            continue
        if key in _QUIET_DEFAULTS and value == _QUIET_DEFAULTS[key]:
            continue  # the manifest stays as it was before the field existed
        if key == "hdl":
            value = value[0] if len(value) == 1 else list(value)
        out[key] = value
    return out


def _closest(word: str, choices: tuple[str, ...] | list[str]) -> str:
    near = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.5)
    return f" (did you mean '{near[0]}'?)" if near else ""


def _int_field(
    raw: Mapping[str, Any], key: str, lo: int, hi: int, *, auto: bool = False, default: int | None = None
) -> int | None:
    """A whole-number field.

    The fix offered for a bad value is one the later checks accept too: "auto" where the field
    takes it (a count picked by hand can still miss the error budget), else the number a
    wrongly typed value plainly means, else ``default`` (``None``: remove the line, for a field
    whose absence means one stage per iteration or one iteration per clock).
    """
    value = raw[key]
    if auto and value == "auto":
        return None
    allowed = f"a whole number from {lo} to {hi}" + (' or "auto"' if auto else "")
    wrong_type = isinstance(value, bool) or not isinstance(value, int)
    if not wrong_type and lo <= value <= hi:
        return value
    guess: Any
    if auto:
        guess = "auto"
    elif wrong_type:
        whole = _whole(value)
        guess = default if whole is None or default is None else min(max(whole, lo), hi)
    else:
        nearest = min(max(value, lo), hi)
        guess = nearest if default is not None or value < lo else None
    if guess is None:
        fix = f"remove {key}, or give a whole number from {lo} to {hi}"
    else:
        fix = f"set {key} = " + (f'"{guess}"' if isinstance(guess, str) else str(guess))
    if wrong_type:
        fix += f" (it is a {type(value).__name__} now)"
    raise ConfigError(key, value, allowed, fix, suggestion={key: guess})


def _whole(value: Any) -> int | None:
    """The whole number a wrongly typed value plainly means ("16", 16.0), if any."""
    if isinstance(value, float) and value.is_integer():
        return int(value)
    if isinstance(value, str) and re.fullmatch(r"\s*[+-]?[0-9]{1,6}\s*", value):
        return int(value)
    return None


def _choice_field(raw: Mapping[str, Any], key: str, choices: tuple[str, ...]) -> str:
    value = raw[key]
    allowed = "one of " + ", ".join(f'"{c}"' for c in choices)
    if not isinstance(value, str):
        raise ConfigError(
            key,
            value,
            allowed,
            f'write it as a quoted string, e.g. {key} = "{choices[0]}"',
            suggestion={key: choices[0]},
        )
    if value not in choices:
        hint = _meant(key, value, choices)
        raise ConfigError(key, value, allowed, f'use {key} = "{hint}"', suggestion={key: hint})
    return value


def _meant(key: str, value: str, choices: tuple[str, ...]) -> str:
    """The choice a wrong value most likely means: by meaning (the case and separators of the
    value aside, then :data:`SYNONYMS`), else by spelling, else the first choice."""
    plain = re.sub(r"[\s-]+", "_", value.strip().lower()).replace("'", "")
    if plain in choices:
        return plain
    synonyms = SYNONYMS.get(key, {})
    if plain in synonyms:
        return synonyms[plain]
    near = difflib.get_close_matches(plain, list(choices) + list(synonyms), n=1, cutoff=0.4)
    if near:
        return synonyms.get(near[0], near[0])
    return choices[0]


def _vlnv_field(raw: Mapping[str, Any], key: str, default: str) -> str:
    """A part of the core's FuseSoC name; the fix offered is the value with its bad characters
    replaced, which this check then accepts."""
    if key not in raw:
        return default
    value = raw[key]
    allowed = (
        "letters, digits, '.', '-' and '_', starting with a letter or digit, at most "
        f"{MAX_VLNV_PART} characters (a part of FuseSoC's vendor:library:name:version)"
    )
    if not isinstance(value, str):
        raise ConfigError(
            key, value, allowed, f'write it as a quoted string, e.g. {key} = "{default}"', suggestion={key: default}
        )
    if _VLNV_PART.fullmatch(value) and len(value) <= MAX_VLNV_PART:
        return value
    cleaned = re.sub(r"[^A-Za-z0-9_.-]+", "_", value).lstrip("_.-")[:MAX_VLNV_PART] or default
    raise ConfigError(key, value, allowed, f'use {key} = "{cleaned}"', suggestion={key: cleaned})


def name_problem(value: str) -> str | None:
    """Why ``value`` cannot name a core (a phrase for the message), or ``None`` if it can."""
    if not _IDENTIFIER.fullmatch(value):
        return "not such a name"
    if len(value) > MAX_NAME_LENGTH:
        return f"{len(value)} characters"
    if value in _VERILOG_KEYWORDS:
        return f"'{value}' is a reserved word of Verilog or SystemVerilog"
    if value.lower() in _VHDL_KEYWORDS:
        return f"'{value}' is a reserved word of VHDL, which ignores case"
    if value in _TOOL_NAMES or value.lower() in _CASELESS_NAMES:
        return f"'{value}' is a reserved word of a simulator, library or file system"
    if value.lower().startswith(_DIRECTIVE_PREFIXES):
        return "a comment starting with it is a Verilator directive, and every generated file starts with // NAME:"
    return None


def suggest_name(value: object) -> str:
    """A name close to ``value`` that :func:`name_problem` accepts, for the fix.

    It always contains "core", which no port, signal or constant inside a generated core does
    (tests/test_cli_errors.py checks this over every function and architecture), so it cannot
    clash with the core's own names either (see :func:`benchgen.rtl.check_module_name`).
    """
    text = value if isinstance(value, str) else ""
    cleaned = re.sub(r"[^A-Za-z0-9]+", "_", text).strip("_")
    if not cleaned or not cleaned[0].isalpha():
        cleaned = f"core_{cleaned}".rstrip("_")
    if "core" not in cleaned or name_problem(cleaned) is not None:
        cleaned = f"{cleaned[: MAX_NAME_LENGTH - 5].rstrip('_')}_core"
    if name_problem(cleaned) is not None:  # a word that may not start a name: put one before it
        cleaned = f"core_{cleaned[: MAX_NAME_LENGTH - 5]}"
    return cleaned if name_problem(cleaned) is None else "nco_core"


def _check_name(value: Any) -> str:
    if not isinstance(value, str):
        raise ConfigError(
            "name",
            value,
            _NAME_RULE,
            'write it as a quoted string, e.g. name = "nco_core"',
            suggestion={"name": "nco_core"},
        )
    problem = name_problem(value)
    if problem is not None:
        better = suggest_name(value)
        raise ConfigError(
            "name", value, f"{_NAME_RULE}, not a reserved word ({problem})", f'use name = "{better}"',
            suggestion={"name": better},
        )  # fmt: skip
    return value


def _toml(value: str | list[str]) -> str:
    """A string or a list of strings as TOML writes it."""
    return f'"{value}"' if isinstance(value, str) else "[" + ", ".join(f'"{x}"' for x in value) + "]"


def _hdl_field(raw: Mapping[str, Any]) -> tuple[str, ...]:
    """The output languages: one name, or a list of distinct names, from :data:`HDLS`."""
    if "hdl" not in raw:
        return DEFAULT_HDL
    value = raw["hdl"]
    allowed = '"verilog", "vhdl" or ["verilog", "vhdl"]'
    items = value if isinstance(value, list) else [value]
    if not items or not all(isinstance(v, str) for v in items):
        raise ConfigError("hdl", value, allowed, 'write hdl = "verilog", hdl = "vhdl" or hdl = ["verilog", "vhdl"]',
                          suggestion={"hdl": "verilog"})
    for v in items:
        if v not in HDLS:
            near = difflib.get_close_matches(v.lower(), list(HDLS), n=1, cutoff=0.4)
            hint = near[0] if near else HDLS[0]
            fixed = [hint if x == v else x for x in items]
            fix_value = fixed[0] if not isinstance(value, list) else sorted(set(fixed), key=HDLS.index)
            raise ConfigError("hdl", value, allowed, f"use hdl = {_toml(fix_value)}", suggestion={"hdl": fix_value})
    if len(set(items)) != len(items):
        unique = sorted(set(items), key=HDLS.index)
        fix_value = unique[0] if len(unique) == 1 else unique
        raise ConfigError("hdl", value, f"{allowed}, each language once", f"use hdl = {_toml(fix_value)}",
                          suggestion={"hdl": fix_value})
    return tuple(sorted(items, key=HDLS.index))


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
            f"remove {show_value(key)} or correct its spelling{_closest(key, _FIELDS)}",
            suggestion={key: None},
        )
    if "name" not in raw:
        raise ConfigError(
            "name", "(missing)", "required", 'add a line such as name = "nco_core"', suggestion={"name": "nco_core"}
        )
    if "function" not in raw:
        raise ConfigError(
            "function",
            "(missing)",
            "required",
            f'add function = "{FUNCTION_NAMES[0]}" (or one of {", ".join(FUNCTION_NAMES[1:])})',
            suggestion={"function": FUNCTION_NAMES[0]},
        )
    name = _check_name(raw["name"])
    function = _choice_field(raw, "function", FUNCTIONS)
    arch = _choice_field(raw, "architecture", ARCHITECTURES) if "architecture" in raw else "pipelined"
    angle_width = (
        _int_field(raw, "angle_width", MIN_ANGLE_WIDTH, MAX_WIDTH, default=16) if "angle_width" in raw else 16
    )
    data_width = (
        _int_field(raw, "data_width", MIN_DATA_WIDTH, MAX_WIDTH, default=16) if "data_width" in raw else 16
    )
    iterations = _int_field(raw, "iterations", 1, MAX_ITERATIONS, auto=True) if "iterations" in raw else None
    guard_bits = _int_field(raw, "guard_bits", 0, 16, auto=True) if "guard_bits" in raw else None
    angle_guard_bits = (
        _int_field(raw, "angle_guard_bits", 0, 16, auto=True) if "angle_guard_bits" in raw else None
    )
    rounding = _choice_field(raw, "rounding", ROUNDING_MODES) if "rounding" in raw else "half_even"
    tag_width = _int_field(raw, "tag_width", 0, MAX_TAG_WIDTH, default=0) if "tag_width" in raw else 0
    gain = _choice_field(raw, "gain", GAIN_MODES) if "gain" in raw else "compensated"
    angle_unit = _choice_field(raw, "angle_unit", ANGLE_UNITS) if "angle_unit" in raw else "turns"
    nco_mode = _choice_field(raw, "nco_mode", NCO_MODES) if "nco_mode" in raw else NCO_MODES[0]
    # A free-running NCO has no input stream and no out_ready: the sink takes every sample.
    quiet_handshake = "valid_only" if nco_mode == "free_running" else "ready_valid"
    handshake = _choice_field(raw, "handshake", HANDSHAKES) if "handshake" in raw else quiet_handshake
    terms = _choice_field(raw, "shifted_terms", (*SHIFTED_TERMS, "auto")) if "shifted_terms" in raw else "auto"
    shifted_terms = None if terms == "auto" else terms
    table_head = _int_field(raw, "table_head", 0, MAX_TABLE_HEAD, auto=True) if "table_head" in raw else None
    fn = function_named(function)
    for key, why in refused_fields(fn).items():
        # A field the function does not use: a value set here would mislead.
        if key in raw:
            raise ConfigError(
                key, raw[key], f'not used by function = "{function}" ({why})', f"remove {key}",
                suggestion={key: None},
            )  # fmt: skip
    if not fn.angle_ports:
        angle_width = data_width
    if angle_unit == "radians" and angle_width < MIN_RADIAN_ANGLE_WIDTH:
        raise ConfigError(
            "angle_width",
            angle_width,
            f"at least {MIN_RADIAN_ANGLE_WIDTH} with angle_unit = \"radians\" (3 integer bits and "
            "3 fraction bits at the least)",
            f"set angle_width = {MIN_RADIAN_ANGLE_WIDTH} or more",
            suggestion={"angle_width": MIN_RADIAN_ANGLE_WIDTH},
        )
    assert angle_width is not None and data_width is not None and tag_width is not None
    prenormalise = True
    if "prenormalise" in raw:
        value = raw["prenormalise"]
        if not isinstance(value, bool):
            raise ConfigError(
                "prenormalise", value, "true or false", "write prenormalise = true or prenormalise = false (no quotes)",
                suggestion={"prenormalise": True},
            )  # fmt: skip
        prenormalise = value
    reset_style = _choice_field(raw, "reset_style", RESET_STYLES) if "reset_style" in raw else RESET_STYLES[0]
    reset_polarity = (
        _choice_field(raw, "reset_polarity", RESET_POLARITIES) if "reset_polarity" in raw else RESET_POLARITIES[0]
    )
    clock_enable = False
    if "clock_enable" in raw:
        value = raw["clock_enable"]
        if not isinstance(value, bool):
            # The value a wrongly typed one plainly means: "true" or a nonzero number is on.
            fix = value.strip().lower() == "true" if isinstance(value, str) else isinstance(value, int) and value != 0
            raise ConfigError(
                "clock_enable", value, "true or false",
                f"write clock_enable = {'true' if fix else 'false'} (no quotes)",
                suggestion={"clock_enable": fix},
            )  # fmt: skip
        clock_enable = value

    vlnv_vendor = _vlnv_field(raw, "vlnv_vendor", DEFAULT_VLNV_VENDOR)
    vlnv_library = _vlnv_field(raw, "vlnv_library", DEFAULT_VLNV_LIBRARY)
    hdl = _hdl_field(raw)

    max_error = raw.get("max_error_lsb", 1.0)
    if isinstance(max_error, bool) or not isinstance(max_error, int | float):
        raise ConfigError(
            "max_error_lsb",
            max_error,
            "a number of output LSBs from 0.5 to 1e6",
            "write e.g. max_error_lsb = 1.0",
            suggestion={"max_error_lsb": 1.0},
        )
    if not 0.5 <= float(max_error) <= 1e6:
        # nan compares false both ways: it lands here and gets the usual budget.
        nearest = 1e6 if float(max_error) > 1e6 else 1.0
        raise ConfigError(
            "max_error_lsb",
            max_error,
            "a number from 0.5 to 1e6 (below 0.5 LSB no rounded output can be that close)",
            f"set max_error_lsb = {nearest:g}" + (" or less" if nearest > 1 else " or larger"),
            suggestion={"max_error_lsb": nearest},
        )

    depth: int | None = None
    per_cycle: int | None = None
    if arch == "pipelined":
        if "iterations_per_cycle" in raw:
            raise ConfigError(
                "iterations_per_cycle",
                raw["iterations_per_cycle"],
                'only used when architecture = "iterative"',
                'remove iterations_per_cycle, or set architecture = "iterative"',
                suggestion={"iterations_per_cycle": None},
            )
        if "pipeline_depth" in raw:
            depth = _int_field(raw, "pipeline_depth", 1, MAX_ITERATIONS, default=None)
    else:
        if "pipeline_depth" in raw:
            raise ConfigError(
                "pipeline_depth",
                raw["pipeline_depth"],
                'only used when architecture = "pipelined"',
                'remove pipeline_depth, or set architecture = "pipelined"',
                suggestion={"pipeline_depth": None},
            )
        per_cycle = (
            _int_field(raw, "iterations_per_cycle", 1, MAX_ITERATIONS)
            if "iterations_per_cycle" in raw
            else 1
        )

    if iterations is not None:
        if depth is not None and depth > iterations:
            raise ConfigError(
                "pipeline_depth",
                depth,
                f"from 1 to iterations ({iterations}): one register stage per iteration at most",
                f"set pipeline_depth to at most {iterations}",
                suggestion={"pipeline_depth": iterations},
            )
        if per_cycle is not None and per_cycle > iterations:
            raise ConfigError(
                "iterations_per_cycle",
                per_cycle,
                f"from 1 to iterations ({iterations})",
                f"set iterations_per_cycle to at most {iterations}",
                suggestion={"iterations_per_cycle": iterations},
            )

    # The NCO's fields (the function refuses them elsewhere; its validate checks how they fit).
    acc_width = _int_field(raw, "acc_width", 3, 64, default=32) if "acc_width" in raw else 32
    dither_width = _int_field(raw, "dither_width", 0, 64, default=0) if "dither_width" in raw else 0
    lfsr_width = _int_field(raw, "lfsr_width", 3, 64, default=32) if "lfsr_width" in raw else None
    lfsr_seed = _int_field(raw, "lfsr_seed", 1, (1 << 63) - 1, default=1) if "lfsr_seed" in raw else None
    # The NCO's spectral target: the widths it is to pick are those the config leaves out.
    sfdr_dbc = _decibel_field(raw, "sfdr_dbc") if "sfdr_dbc" in raw else None
    snr_db = _decibel_field(raw, "snr_db") if "snr_db" in raw else None
    picks = (
        tuple(k for k in ("angle_width", "data_width") if k not in raw)
        if sfdr_dbc is not None or snr_db is not None
        else ()
    )

    spec = CoreSpec(
        name=name,
        function=function,
        architecture=arch,
        pipeline_depth=depth,
        iterations_per_cycle=per_cycle,
        angle_width=angle_width,
        data_width=data_width,
        iterations=iterations,
        guard_bits=guard_bits,
        angle_guard_bits=angle_guard_bits,
        rounding=rounding,
        tag_width=tag_width,
        max_error_lsb=float(max_error),
        gain=gain,
        angle_unit=angle_unit,
        prenormalise=prenormalise,
        vlnv_vendor=vlnv_vendor,
        vlnv_library=vlnv_library,
        hdl=hdl,
        reset_style=reset_style,
        reset_polarity=reset_polarity,
        clock_enable=clock_enable,
        handshake=handshake,
        shifted_terms=shifted_terms,
        table_head=table_head,
        acc_width=acc_width if acc_width is not None else 32,
        dither_width=dither_width if dither_width is not None else 0,
        lfsr_width=lfsr_width,
        lfsr_seed=lfsr_seed,
        sfdr_dbc=sfdr_dbc,
        snr_db=snr_db,
        nco_mode=nco_mode,
        target_picks=picks,
    )
    fn.validate(spec)
    return spec


def _decibel_field(raw: Mapping[str, Any], key: str) -> float:
    """A required level in dB: a positive, finite number (the function checks its upper limit)."""
    value = raw[key]
    if isinstance(value, bool) or not isinstance(value, int | float) or not 0 < float(value) < float("inf"):
        raise ConfigError(
            key, value, "a positive number of dB, e.g. 72.0", f"set {key} = 72.0", suggestion={key: 72.0}
        )
    return float(value)


def load_config(path: str | Path) -> CoreSpec:
    """Read and validate a TOML config file (UTF-8, with or without a byte-order mark).

    Raises:
        ConfigError: if the file is missing, unreadable, not TOML, or holds a bad value (the
            error names the file).
    """
    path = Path(path)
    raw = read_toml(path, what="config file", example="sim_projects/*/config.toml")
    try:
        return parse_config(raw)
    except ConfigError as exc:
        raise exc.with_source(str(path)) from None


def read_toml(path: Path, *, what: str, example: str) -> dict[str, Any]:
    """The tables of a TOML file, or a :class:`ConfigError` saying why there are none.

    A UTF-8 byte-order mark, which some editors write, is dropped (TOML 1.0 has no rule for it
    and ``tomllib`` refuses it as an invalid statement).
    """
    source = str(path)
    try:
        is_file, is_dir = path.is_file(), path.is_dir()
    except (OSError, ValueError):  # e.g. a name too long for the file system
        is_file = is_dir = False
    if not is_file:
        state = "is a folder" if is_dir else "does not exist"
        raise ConfigError(
            "", f"{what} '{path}' {state}", "a TOML file is needed",
            f"check the path, or start from one of the examples in {example}",
        )  # fmt: skip
    try:
        text = path.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ConfigError(
            "", f"{what} is not UTF-8 text (byte {exc.start}: {exc.reason})", "a UTF-8 TOML file",
            "save it as UTF-8 text",
        ).with_source(source) from None  # fmt: skip
    except OSError as exc:
        raise ConfigError(
            "", f"{what} cannot be read ({exc.strerror or exc})", "a readable file",
            "check the file's permissions",
        ).with_source(source) from None  # fmt: skip
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(
            "", f"{what} is not valid TOML ({exc})", "TOML syntax (key = value, strings in quotes)",
            "correct the line named above",
        ).with_source(source) from None  # fmt: skip
    except RecursionError:
        raise ConfigError(
            "", f"{what} nests arrays or tables too deeply to read", "a flat TOML file (key = value lines)",
            "remove the nested arrays or tables",
        ).with_source(source) from None  # fmt: skip
    except ValueError as exc:  # e.g. an integer of more digits than Python converts (4300)
        raise ConfigError(
            "", f"{what} holds a value that cannot be read ({exc})", "TOML values of sensible size",
            "shorten the long number",
        ).with_source(source) from None  # fmt: skip
