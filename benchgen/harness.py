"""Generated HDL harnesses around an unchanged core, for volume verification.

Two harnesses share one layout of the core's data ports:

* the bulk harness (Verilog, and its VHDL-2008 twin for GHDL; simulation only): a top level with
  its own clock that streams a block of stimulus words from a file into the core at full clock
  rate, applies seeded idle gaps and output stalls, captures every output word and writes the
  block back to a file. cocotb only starts blocks and reads a few counters, so Python never runs
  once per clock.
* the native harness (Verilator only): a variant of the bulk harness with the same stream rules,
  whose clock, controls and stimulus/result words are ports, and a generated C++ ``main`` that
  clocks it, reading stimulus blocks from a command stream and writing results to a reply stream
  (:mod:`benchgen.bench.bulk_native`). Neither cocotb nor timing coroutines run per clock.
* the raw harness (C++, Verilator only): a ``main`` that clocks the core directly, one new input per
  clock; the ceiling of simulation speed on a machine, used by ``benchmarks/bulk_speed.py``.

Python decides every name, width, byte offset and expression; the templates only format.

Word layout: each data port gets its own byte-aligned slot of 1, 2, 4 or 8 bytes (every port is at
most 64 bits wide), slots follow one another from the least significant byte, and a word is padded
to whole 32-bit units. Stimulus files hold one word per sample, most significant byte first (the
order ``$fread`` fills a memory element in, IEEE 1364-2005 17.2.9); result files hold one word per
sample written with ``%u``, least significant byte first (checked on Icarus 11 and Verilator 5.048).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from benchgen import __version__
from benchgen.config import MAX_PORT_WIDTH
from benchgen.functions import CorePort, function_of
from benchgen.rtl import template_environment

if TYPE_CHECKING:
    from benchgen.design import Design

__all__ = [
    "DEFAULT_BLOCK",
    "BulkFiles",
    "BulkLayout",
    "Slot",
    "bulk_files",
    "bulk_layout",
    "bulk_project_files",
    "native_names",
    "render_bulk_harness",
    "render_native_harness",
    "render_native_main",
    "render_raw_harness",
    "render_vhdl_bulk_harness",
]

DEFAULT_BLOCK = 16384
"""Samples per block: large enough that the per-block Python work is small against the clocks."""

WATCHDOG_CLOCKS = 1 << 22
"""Clocks the harness waits for a block request before it ends the simulation: Python never lets
simulated time pass between blocks, so a long wait means the Python side is gone."""

PARK_CLOCKS = 1024
"""Clocks the VHDL harness's clock runs on with no block asked for before it parks (until cocotb
resets the harness or asks for a block). Python lets no simulated time pass between blocks, and a
core's stray outputs come within its latency, so they are still counted; a parked clock lets GHDL
end the simulation after the last test, which cocotb cannot make it do."""


@dataclass(frozen=True)
class Slot:
    """One data port's place in a packed word.

    Attributes:
        port: Core port name (``in_angle``, ``out_cos``, ...).
        width: Port width in bits.
        byte_offset: First byte of the slot, counted from the word's least significant byte.
        nbytes: Slot size in bytes (1, 2, 4 or 8).
    """

    port: str
    width: int
    byte_offset: int
    nbytes: int

    @property
    def lsb(self) -> int:
        """Bit position of the port's least significant bit in the word."""
        return 8 * self.byte_offset

    @property
    def msb(self) -> int:
        """Bit position of the port's most significant bit in the word."""
        return self.lsb + self.width - 1


@dataclass(frozen=True)
class BulkLayout:
    """Where each data port sits in the stimulus and result words of the bulk harness.

    Attributes:
        core: Core module name.
        module: Harness module name.
        block: Samples per block (a power of two).
        inputs: Input data ports: the function's in name order, the tag last.
        outputs: Output data ports: the function's in name order, the tag last.
        in_bytes: Bytes per stimulus word (a multiple of 4).
        out_bytes: Bytes per result word (a multiple of 4).
        controls: The core's reset and clock enable as the harness connects them: the
            harness's own ``rst`` (active high) drives the core's reset at its level, and a
            clock enable is held high (the per-clock bench is the one that toggles it).
        vhdl_controls: The same connections as VHDL-2008 port map associations.
        in_ready / out_ready: Whether the core has that port (a valid-only core has no
            ``out_ready``, and a pipelined one no ``in_ready`` either).
    """

    core: str
    module: str
    block: int
    inputs: tuple[Slot, ...]
    outputs: tuple[Slot, ...]
    in_bytes: int
    out_bytes: int
    controls: tuple[str, ...] = (".rst(rst)",)
    vhdl_controls: tuple[str, ...] = ("rst => rst",)
    in_ready: bool = True
    out_ready: bool = True

    @property
    def index_width(self) -> int:
        """Bits of a sample index that can also hold ``block`` itself."""
        return self.block.bit_length()


def _slot_bytes(width: int) -> int:
    if width > MAX_PORT_WIDTH:
        raise ValueError(f"port of {width} bits is wider than the {MAX_PORT_WIDTH} bits a slot holds")
    return next(size for size in (1, 2, 4, 8) if width <= 8 * size)


def _slots(ports: list[CorePort]) -> tuple[tuple[Slot, ...], int]:
    slots = []
    offset = 0
    for p in ports:
        size = _slot_bytes(p.width)
        slots.append(Slot(port=p.name, width=p.width, byte_offset=offset, nbytes=size))
        offset += size
    return tuple(slots), -(-offset // 4) * 4


def _ordered(ports: Sequence[CorePort], direction: str) -> list[CorePort]:
    # The function's data ports in name order, the tag last: the order every harness so far was
    # generated with (the words' layout is part of the generated files).
    data = sorted((p for p in ports if p.direction == direction and p.role == "data"), key=lambda p: p.name)
    return data + [p for p in ports if p.direction == direction and p.role == "tag"]


def bulk_layout(core: str, ports: Sequence[CorePort], *, block: int = DEFAULT_BLOCK) -> BulkLayout:
    """The word layout of a core's bulk harness.

    Args:
        core: The core's module name.
        ports: The core's ports (:attr:`benchgen.design.Design.ports`); the data and tag ports
            get slots.
        block: Samples per block; a power of two from 16 to 2**20.

    Raises:
        ValueError: for a block size out of range or a port wider than 64 bits.
    """
    if block < 16 or block > 1 << 20 or block & (block - 1):
        raise ValueError(f"block size {block}: use a power of two from 16 to 1048576")
    inputs, in_bytes = _slots(_ordered(ports, "in"))
    outputs, out_bytes = _slots(_ordered(ports, "out"))
    controls: list[str] = []
    vhdl_controls: list[str] = []
    for p in ports:
        if p.role == "reset":
            controls.append(f".{p.name}({'~rst' if p.active_low else 'rst'})")
            # An expression as an actual is VHDL-2008 (IEEE 1076-2008 6.5.6.3).
            vhdl_controls.append(f"{p.name} => {'not rst' if p.active_low else 'rst'}")
        elif p.role == "enable":
            controls.append(f".{p.name}(1'b1)")
            vhdl_controls.append(f"{p.name} => '1'")
    return BulkLayout(
        core=core,
        module=f"{core}_bulk",
        block=block,
        inputs=inputs,
        outputs=outputs,
        in_bytes=in_bytes,
        out_bytes=out_bytes,
        controls=tuple(controls),
        vhdl_controls=tuple(vhdl_controls),
        in_ready=any(p.name == "in_ready" for p in ports),
        out_ready=any(p.name == "out_ready" for p in ports),
    )


def _result_word(layout: BulkLayout) -> str:
    """The concatenation that packs the core's outputs into a result word, MSB first."""
    parts: list[str] = []
    top = 8 * layout.out_bytes
    for slot in reversed(layout.outputs):
        end = slot.lsb + 8 * slot.nbytes
        if top > end:
            parts.append(f"{top - end}'d0")
        if 8 * slot.nbytes > slot.width:
            parts.append(f"{8 * slot.nbytes - slot.width}'d0")
        parts.append(f"core_{slot.port}")
        top = slot.lsb
    return "{" + ", ".join(parts) + "}"


def _clean(text: str) -> str:
    lines = [line.rstrip() for line in text.splitlines()]
    while lines and not lines[-1]:
        lines.pop()
    return "\n".join(lines) + "\n"


def render_bulk_harness(layout: BulkLayout) -> str:
    """Verilog of the bulk harness module (simulation only; Icarus, and Verilator with --timing)."""
    iw = layout.index_width
    ctx = {
        "version": __version__,
        "L": layout,
        "IN_W": 8 * layout.in_bytes,
        "OUT_W": 8 * layout.out_bytes,
        "IW": iw,
        "AW": iw - 1,
        "result_word": _result_word(layout),
        "index_one": f"{iw}'d1",
        "index_zero": f"{iw}'d0",
        "watchdog": f"32'd{WATCHDOG_CLOCKS}",
        "count_pad": 32 - iw,
    }
    return _clean(template_environment().get_template("bulk_harness.v.j2").render(ctx))


def render_vhdl_bulk_harness(layout: BulkLayout) -> str:
    """VHDL-2008 of the bulk harness entity (simulation only; GHDL): the Verilog one's twin."""
    iw = layout.index_width
    ctx = {
        "version": __version__,
        "L": layout,
        "IN_W": 8 * layout.in_bytes,
        "OUT_W": 8 * layout.out_bytes,
        "IW": iw,
        "park_after": PARK_CLOCKS,
        "vhdl_controls": layout.vhdl_controls,
    }
    return _clean(template_environment().get_template("bulk_harness.vhd.j2").render(ctx))


def native_names(layout: BulkLayout) -> tuple[str, str]:
    """Module name of the native harness and file name of its runner binary."""
    return f"{layout.core}_bulk_native", f"{layout.core}_bulk_run"


def render_native_harness(layout: BulkLayout) -> str:
    """Verilog of the native harness: the bulk harness's stream rules, driven by a C++ main."""
    iw = layout.index_width
    ctx = {
        "version": __version__,
        "L": layout,
        "module": native_names(layout)[0],
        "OUT_W": 8 * layout.out_bytes,
        "IW": iw,
        "AW": iw - 1,
        "result_word": _result_word(layout),
        "index_one": f"{iw}'d1",
        "index_zero": f"{iw}'d0",
    }
    return _clean(template_environment().get_template("bulk_native.v.j2").render(ctx))


def render_native_main(layout: BulkLayout) -> str:
    """C++ ``main`` that clocks the native harness and serves blocks over a command stream."""
    module, binary = native_names(layout)
    ctx = {
        "version": __version__,
        "L": layout,
        "module": module,
        "binary": binary,
        # A slot holds whole bytes; the port takes only its own bits (Verilator expects clean
        # inputs, with nothing above a port's width).
        "masks": {s.port: f"0x{(1 << s.width) - 1:x}ULL" for s in layout.inputs},
    }
    return _clean(template_environment().get_template("bulk_main.cpp.j2").render(ctx))


def render_raw_harness(layout: BulkLayout, *, angle_port: str = "in_angle") -> str:
    """C++ ``main`` that clocks the core alone in Verilator, one new input per clock.

    It takes the clock count as its first argument and prints clocks per second and a checksum of
    the outputs (so the compiler cannot drop the model's work).
    """
    ctx = {"L": layout, "angle_port": angle_port}
    return _clean(template_environment().get_template("bulk_raw_main.cpp.j2").render(ctx))


@dataclass(frozen=True)
class BulkFiles:
    """Where a project keeps its bulk harness and bulk test module.

    Attributes:
        rtl: Harness source, relative to the project folder.
        toplevel: Harness module name (the simulation's top level in bulk mode).
        vhdl: The VHDL harness (entity ``toplevel``), in projects with a VHDL core.
        test_module: cocotb test module name (in the project's ``bench/`` folder).
    """

    rtl: str
    toplevel: str
    test_module: str
    vhdl: str = ""


def bulk_files(manifest: dict[str, Any]) -> BulkFiles:
    """Names of a project's bulk files, derived from its top level name."""
    return _bulk_files(str(manifest["toplevel"]))


def _bulk_files(core: str) -> BulkFiles:
    return BulkFiles(
        rtl=f"rtl/{core}_bulk.v",
        toplevel=f"{core}_bulk",
        test_module=f"test_{core}_bulk",
        vhdl=f"rtl/{core}_bulk.vhd",
    )


_BULK_TEST_MODULE = '''"""Bulk cocotb tests for {core}: the checks live in benchgen.bench.bulk (generated file)."""

from pathlib import Path

from benchgen.bench.bulk import bind

MANIFEST = Path(__file__).resolve().parent.parent / "manifest.json"

test_bulk_full_rate, test_bulk_gaps_and_stalls, test_bulk_exhaustive = bind(MANIFEST)
'''


def bulk_project_files(design: Design) -> dict[str, str]:
    """The bulk harness in each language the project has, and the one thin test module that
    drives either, by path relative to the project folder."""
    core = design.spec.name
    if function_of(design.datapath).free_running(design.datapath):
        return {}  # no input stream for the harness to feed (benchgen sim refuses bulk runs)
    names = _bulk_files(core)
    layout = bulk_layout(core, design.ports)
    files = {f"bench/{names.test_module}.py": _BULK_TEST_MODULE.format(core=core)}
    if "verilog" in design.spec.hdl:
        files[names.rtl] = render_bulk_harness(layout)
    if "vhdl" in design.spec.hdl:
        files[names.vhdl] = render_vhdl_bulk_harness(layout)
    return files
