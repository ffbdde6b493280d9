"""A core as the user asked for it: the frozen record the config is read into.

It sits below everything (the function modules size and describe a core from it); reading and
checking a config file is benchgen.config's job.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "HANDSHAKES",
    "NCO_MODES",
    "DEFAULT_HDL",
    "DEFAULT_VLNV_LIBRARY",
    "DEFAULT_VLNV_VENDOR",
    "HDLS",
    "RESET_POLARITIES",
    "RESET_STYLES",
    "SHIFTED_TERMS",
    "MAX_TABLE_HEAD",
    "CoreSpec",
]

DEFAULT_VLNV_VENDOR = "benchgen"
"""Vendor part of a core's FuseSoC name, unless the config sets ``vlnv_vendor``."""
DEFAULT_VLNV_LIBRARY = "cores"
"""Library part of a core's FuseSoC name, unless the config sets ``vlnv_library``."""
HDLS = ("verilog", "vhdl")
"""The languages a core is written in: Verilog-2005 (``rtl/NAME.v``), VHDL-2008 (``rtl/NAME.vhd``)."""
DEFAULT_HDL = ("verilog",)
"""The languages of a core whose config sets no ``hdl``."""
#: Stream handshakes: ``ready_valid`` (both streams; the consumer may stall the core) and
#: ``valid_only`` (no ``out_ready``: for a sink that takes every sample; no output skid buffer,
#: and a pipelined core, which then takes a sample every clock, has no ``in_ready`` either).
HANDSHAKES = ("ready_valid", "valid_only")
#: How each iteration forms y / 2^i and x / 2^i: ``rounded`` half up (the bit below the shift
#: through the adder's carry-in) or ``floored`` (the arithmetic shift alone). Unset, a
#: sincos, rotate or NCO (pipelined or iterative) rounds them where ``rounding`` rounds the outputs (docs/config.md).
SHIFTED_TERMS = ("rounded", "floored")
#: The most first iterations a table may stand for (the table has 2^(h + 1) entries).
MAX_TABLE_HEAD = 4
#: How an NCO takes its words: ``streamed`` (one sample per accepted input token, the token
#: carrying both words) or ``free_running`` (no input stream: one sample per clock from reset,
#: the words loaded through a ``load`` port; docs/nco.md).
NCO_MODES = ("streamed", "free_running")
RESET_STYLES = ("synchronous", "asynchronous")
"""When the reset acts: at a rising clock edge, or at once (the first is the default)."""
RESET_POLARITIES = ("active_high", "active_low")
"""The reset level that resets: high (port ``rst``, the default) or low (port ``rst_n``)."""


@dataclass(frozen=True, kw_only=True)
class CoreSpec:
    """One core, as the user asked for it (``None`` means ``auto`` or "not applicable").

    Attributes:
        name: Verilog module name.
        function: Which function the core computes (a name in the registry,
            benchgen.functions).
        architecture: ``pipelined`` or ``iterative``.
        pipeline_depth: Register stages of a pipelined core; ``None`` means one per iteration.
        iterations_per_cycle: Iterations an iterative core performs per clock.
        angle_width: Bits of the binary angle input (2**angle_width codes per turn).
        data_width: Bits of each signed output.
        iterations: Rotation iterations, or ``None`` for auto sizing.
        guard_bits: Extra fraction bits inside the data path, or ``None`` for auto sizing.
        angle_guard_bits: Where the function offers it (an angle input: its module lists
            ``angle_guard_bits`` in its options): the guard bits of the internal angle z, sized
            apart from x and y's; ``None`` for auto sizing.
        rounding: How the guard bits are dropped at the output.
        tag_width: Width of the user tag carried with each sample; 0 means no tag ports.
        max_error_lsb: Worst error the core may have against the ideal, in output LSBs.
        gain: ``compensated`` (the core removes the rotation gain) or ``raw`` (left in, stated
            in the manifest).
        angle_unit: ``turns`` (binary angle) or ``radians`` (signed fixed point, 3 integer bits).
        prenormalise: Where the function offers it (its module lists ``prenormalise`` in its
            options): shift the inputs left by their common redundant sign bits before the
            iterations (``False`` keeps the smaller core without the normaliser).
        vlnv_vendor: Vendor part of the core's FuseSoC name ``vendor:library:name:version``.
        vlnv_library: Library part of that name.
        hdl: The languages the core is written in, in the order of :data:`HDLS` (``verilog``,
            ``vhdl`` or both).
        reset_style: ``synchronous`` (the reset acts at a rising clock edge) or
            ``asynchronous`` (at once, whatever the clock).
        reset_polarity: ``active_high`` (port ``rst``) or ``active_low`` (port ``rst_n``).
        clock_enable: Add a ``clk_en`` input: while it is low every register of the core holds
            (a clock edge with ``clk_en`` low is no edge for the core).
        handshake: One of :data:`HANDSHAKES`.
        shifted_terms: Where the function offers it (sincos, rotate, nco): one of
            :data:`SHIFTED_TERMS`, or ``None`` to follow ``rounding``.
        table_head: Where the function offers it (sincos, nco): how many first iterations
            the core reads from a table of the fold and their directions instead of adding
            (0 to :data:`MAX_TABLE_HEAD`), or ``None`` for the architecture's default
            (:func:`benchgen.functions.table_head`).
        acc_width: NCO (function ``nco``): bits of the phase accumulator and its words.
        dither_width: NCO: phase dither bits below the kept phase LSB (0: none).
        lfsr_width: NCO: length of the dither LFSR (``None``: ``max(32, dither_width)``).
        lfsr_seed: NCO: the dither LFSR's state after reset (``None``: all ones).
        sfdr_dbc: NCO: required SFDR of the quadrature output in dBc (``None``: none); with
            ``snr_db``, the spectral target the sizer picks the widths for (docs/nco.md).
        snr_db: NCO: required SNR in dB (``None``: none).
        nco_mode: NCO: one of :data:`NCO_MODES`.
        target_picks: Not a config field: the widths (``angle_width``, ``data_width``) the
            config left for the spectral target to pick; the sizer fills them in and empties this.
    """

    name: str
    function: str
    architecture: str = "pipelined"
    pipeline_depth: int | None = None
    iterations_per_cycle: int | None = None
    angle_width: int = 16
    data_width: int = 16
    iterations: int | None = None
    guard_bits: int | None = None
    angle_guard_bits: int | None = None
    rounding: str = "half_even"
    tag_width: int = 0
    max_error_lsb: float = 1.0
    gain: str = "compensated"
    angle_unit: str = "turns"
    prenormalise: bool = True
    vlnv_vendor: str = DEFAULT_VLNV_VENDOR
    vlnv_library: str = DEFAULT_VLNV_LIBRARY
    hdl: tuple[str, ...] = DEFAULT_HDL
    reset_style: str = RESET_STYLES[0]
    reset_polarity: str = RESET_POLARITIES[0]
    clock_enable: bool = False
    handshake: str = "ready_valid"
    shifted_terms: str | None = None
    table_head: int | None = None
    acc_width: int = 32
    dither_width: int = 0
    lfsr_width: int | None = None
    lfsr_seed: int | None = None
    sfdr_dbc: float | None = None
    snr_db: float | None = None
    nco_mode: str = NCO_MODES[0]
    target_picks: tuple[str, ...] = ()
