"""Simulate the hand-written reference cores over every angle and measure their error.

Each core in this folder is run on Icarus Verilog with a plain Verilog testbench (no Python in
the loop) that feeds all 65,536 angles, as fast as the core takes them, and writes every result
to a file. The results are compared with numpy's 32767 cos(2 pi k / 65536) and 32767 sin(...)
(float64, far finer than the 16-bit outputs). The script prints, per core, the worst and RMS
error in output LSBs (RMS over both outputs), the latency and the clocks per sample, and checks
them against what the core's header comment states; it exits with status 1 on a disagreement.

    python benchmarks/hand_cores/check_hand_cores.py [--keep DIR]

tests/test_hand_cores.py runs the same check.
"""

from __future__ import annotations

import argparse
import re
import shutil
import subprocess
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ANGLES = 1 << 16
AMPLITUDE = 32767


@dataclass(frozen=True)
class HandCore:
    """One hand-written core.

    Attributes:
        name: Module name (and file stem).
        has_in_ready: Whether the core has an ``in_ready`` output the testbench must obey.
        latency: Clocks from the rising edge that takes an angle to the first rising edge at
            which its result is on the outputs with ``out_valid`` high (benchgen's manifests count
            latency the same way, handshake to handshake).
        cycles_per_sample: Clocks between results when angles are offered back to back.
    """

    name: str
    has_in_ready: bool
    latency: int
    cycles_per_sample: int

    @property
    def path(self) -> Path:
        """The Verilog file."""
        return HERE / f"{self.name}.v"


CORES = (
    HandCore("hand_sincos_pipelined", has_in_ready=False, latency=16, cycles_per_sample=1),
    HandCore("hand_sincos_iterative", has_in_ready=True, latency=17, cycles_per_sample=16),
)


@dataclass(frozen=True)
class Measured:
    """What one simulation over every angle showed.

    Attributes:
        cos: ``out_cos`` for angle codes 0 .. 65535, in order.
        sin: ``out_sin`` likewise.
        latencies: Every distinct latency seen, in clocks.
        cycles_per_sample: Every distinct gap between consecutive results, in clocks.
    """

    cos: np.ndarray
    sin: np.ndarray
    latencies: tuple[int, ...]
    cycles_per_sample: tuple[int, ...]

    def errors(self) -> tuple[float, float]:
        """Worst and RMS error against numpy's ideal, in output LSBs (both outputs together)."""
        theta = 2.0 * np.pi * np.arange(ANGLES) / ANGLES
        diff = np.concatenate([self.cos - AMPLITUDE * np.cos(theta), self.sin - AMPLITUDE * np.sin(theta)])
        return float(np.max(np.abs(diff))), float(np.sqrt(np.mean(diff**2)))


def _testbench(core: HandCore) -> str:
    """A testbench that offers angle codes 0 .. 65535 in order and logs every result.

    Inputs change and outputs are read at the falling edge, so nothing races the core's rising
    edge; reset is held for the first three clocks. ``take`` remembers whether the angle on the inputs was taken at the rising edge
    between two falling edges.
    """
    ready = "in_ready" if core.has_in_ready else "1'b1"
    ready_port = "        .in_ready(in_ready),\n" if core.has_in_ready else ""
    return f"""`timescale 1ns / 1ps
module tb;
    reg clk = 1'b0;
    reg rst = 1'b1;
    reg in_valid = 1'b0;
    reg [15:0] in_angle = 16'd0;
    wire in_ready;
    wire out_valid;
    wire [15:0] out_cos;
    wire [15:0] out_sin;
    integer f;
    integer cycle = 0;
    integer sent = 0;
    integer got = 0;
    reg take = 1'b0;

    {core.name} dut (
        .clk(clk),
        .rst(rst),
        .in_valid(in_valid),
{ready_port}        .in_angle(in_angle),
        .out_valid(out_valid),
        .out_cos(out_cos),
        .out_sin(out_sin)
    );
    {"" if core.has_in_ready else "assign in_ready = 1'b1;"}

    always #5 clk = ~clk;

    // One block does all the driving and logging, so nothing in the testbench races itself.
    always @(negedge clk) begin
        cycle = cycle + 1;
        if (cycle == 1) f = $fopen("results.txt", "w");
        if (cycle == 4) begin
            rst = 1'b0;
            in_valid = 1'b1;
        end
        if (out_valid) begin
            // read by the next rising edge
            $fdisplay(f, "o %0d %0d %0d", cycle + 1, $signed(out_cos), $signed(out_sin));
            got = got + 1;
            if (got == {ANGLES}) begin
                $fclose(f);
                $finish;
            end
        end
        if (take) begin
            sent = sent + 1;
            if (sent == {ANGLES}) in_valid = 1'b0;
            else in_angle = in_angle + 16'd1;
        end
        take = in_valid & {ready};
        if (take) $fdisplay(f, "i %0d", cycle + 1);
    end

    initial begin
        #{ANGLES * (core.cycles_per_sample + 1) * 10 + 100000};
        $display("TIMEOUT: %0d results", got);
        $finish;
    end
endmodule
"""


def simulate(core: HandCore, work: Path) -> Measured:
    """Run ``core`` over every angle on Icarus in ``work``.

    Raises:
        RuntimeError: if Icarus is missing, fails, or the run ends short.
    """
    if shutil.which("iverilog") is None or shutil.which("vvp") is None:
        raise RuntimeError("Icarus Verilog (iverilog, vvp) not found: apt-get install iverilog")
    work.mkdir(parents=True, exist_ok=True)
    (work / "tb.v").write_text(_testbench(core))
    subprocess.run(["iverilog", "-g2005", "-Wall", "-o", "sim.vvp", "tb.v", str(core.path)],
                   cwd=work, check=True, capture_output=True, text=True)
    run = subprocess.run(["vvp", "-n", "sim.vvp"], cwd=work, check=True, capture_output=True, text=True)
    if "TIMEOUT" in run.stdout:
        raise RuntimeError(f"{core.name}: {run.stdout.strip()}")
    taken: list[int] = []
    results: list[tuple[int, int, int]] = []
    for line in (work / "results.txt").read_text().splitlines():
        kind, *nums = line.split()
        if kind == "i":
            taken.append(int(nums[0]))
        else:
            results.append((int(nums[0]), int(nums[1]), int(nums[2])))
    if len(results) != ANGLES or len(taken) != ANGLES:
        raise RuntimeError(f"{core.name}: {len(taken)} angles taken, {len(results)} results")
    out = np.array(results, dtype=np.int64)
    return Measured(
        cos=out[:, 1],
        sin=out[:, 2],
        latencies=tuple(sorted({o - i for i, o in zip(taken, out[:, 0].tolist(), strict=True)})),
        cycles_per_sample=tuple(sorted(set(np.diff(out[:, 0]).tolist()))),
    )


_STATED = re.compile(r"all 65536 angles.*?:\s*([0-9.]+) LSB \(RMS ([0-9.]+) LSB\)", re.DOTALL)


def stated_errors(path: Path) -> tuple[float, float]:
    """The worst and RMS error a core's header comment states."""
    m = _STATED.search(path.read_text())
    if not m:
        raise RuntimeError(f"{path.name}: no 'worst error ... all 65536 angles ...: X LSB (RMS Y LSB)' line")
    return float(m.group(1)), float(m.group(2))


def check(core: HandCore, work: Path) -> list[str]:
    """Simulate ``core`` and list every way it disagrees with its header and its timing."""
    measured = simulate(core, work)
    worst, rms = measured.errors()
    problems = []
    stated = stated_errors(core.path)
    if (round(worst, 4), round(rms, 4)) != stated:
        problems.append(f"{core.name}: measured {worst:.4f} / RMS {rms:.4f} LSB, header states {stated[0]} / {stated[1]}")
    if measured.latencies != (core.latency,):
        problems.append(f"{core.name}: latencies {measured.latencies}, expected {core.latency}")
    if measured.cycles_per_sample != (core.cycles_per_sample,):
        problems.append(f"{core.name}: clocks per sample {measured.cycles_per_sample}, expected {core.cycles_per_sample}")
    print(f"{core.name}: worst error {worst:.4f} LSB, RMS {rms:.4f} LSB over all {ANGLES} angles; "
          f"latency {measured.latencies} clocks, {measured.cycles_per_sample} clocks per sample")
    return problems


def main(argv: list[str] | None = None) -> int:
    """Check every hand core; 0 when all agree with their headers."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--keep", type=Path, help="simulate in this folder and keep it")
    args = parser.parse_args(argv)
    root = args.keep or Path(tempfile.mkdtemp(prefix="hand_cores_"))
    try:
        problems = [p for core in CORES for p in check(core, root / core.name)]
    finally:
        if args.keep is None:
            shutil.rmtree(root, ignore_errors=True)
    for p in problems:
        print("MISMATCH " + p)
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
