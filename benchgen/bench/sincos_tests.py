"""cocotb tests for a generated sine/cosine core.

A generated project's test module calls :func:`bind` with its manifest and exposes the returned
tests; everything else lives here, so all projects share one bench.

Environment (set by ``benchgen sim``): ``BENCHGEN_SAMPLES`` (random samples at full rate,
default 20000), ``BENCHGEN_RESULTS`` (JSON-lines file for per-test results), ``BENCHGEN_CSV``
(per-sample CSV). The seed is cocotb's ``COCOTB_RANDOM_SEED``.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import cocotb
import numpy as np
import numpy.typing as npt
from cocotb.clock import Clock

from benchgen.bench.scoreboard import CheckResult, compare, record, write_csv_rows
from benchgen.bench.stream import Capture, StreamBench
from benchgen.design import Design, corner_angles
from benchgen.model import sincos
from benchgen.project import design_from_manifest, load_manifest
from benchgen.reference import ideal_sincos

__all__ = [
    "bind",
    "test_corners",
    "test_gaps_and_stalls",
    "test_random_full_rate",
    "test_reset_mid_stream",
]

SAMPLES_ENV = "BENCHGEN_SAMPLES"
DEFAULT_SAMPLES = 20_000
CLOCK_NS = 10

_manifest_path: Path | None = None


def bind(manifest: Path) -> tuple[Any, Any, Any, Any]:
    """Point the tests at a project's manifest and return them for the test module to expose."""
    global _manifest_path
    _manifest_path = Path(manifest)
    return test_corners, test_random_full_rate, test_gaps_and_stalls, test_reset_mid_stream


class SinCosBench:
    """The bench of one sine/cosine core: stream driver/monitor, model and checks."""

    def __init__(self, dut: Any) -> None:
        if _manifest_path is None:
            raise RuntimeError("benchgen.bench.sincos_tests.bind(manifest) was not called")
        self.manifest = load_manifest(_manifest_path.parent)
        self.design: Design = design_from_manifest(self.manifest)
        self.dut = dut
        self.tag_width = self.design.spec.tag_width
        inputs = ("in_angle", "in_tag") if self.tag_width else ("in_angle",)
        outputs = ("out_cos", "out_sin", "out_tag") if self.tag_width else ("out_cos", "out_sin")
        self.stream = StreamBench(dut, inputs=inputs, outputs=outputs, signed=("out_cos", "out_sin"))
        # The run's seed as given to the runner (cocotb re-derives RANDOM_SEED per test).
        self.seed = int(os.environ.get("COCOTB_RANDOM_SEED", cocotb.RANDOM_SEED))
        self.samples = int(os.environ.get(SAMPLES_ENV, DEFAULT_SAMPLES))
        self.angle_width = self.design.datapath.angle_width

    async def start(self) -> None:
        """Start the clock and reset the core."""
        Clock(self.dut.clk, CLOCK_NS, unit="ns").start()
        await self.stream.reset()

    def rng(self, salt: int) -> np.random.Generator:
        """A generator per test, derived from the run's seed."""
        return np.random.default_rng([self.seed, salt])

    def random_angles(self, rng: np.random.Generator, count: int) -> npt.NDArray[Any]:
        """Uniform random angle codes over the whole turn."""
        if self.angle_width <= 62:
            return rng.integers(0, 1 << self.angle_width, size=count, dtype=np.int64)
        hi = rng.integers(0, 1 << 62, size=count, dtype=np.int64)
        lo = rng.integers(0, 1 << (self.angle_width - 62), size=count, dtype=np.int64)
        return np.array([(int(h) << (self.angle_width - 62)) | int(lo_) for h, lo_ in zip(hi, lo, strict=True)], dtype=object)

    def stimulus(self, angles: npt.NDArray[Any]) -> dict[str, npt.NDArray[Any]]:
        """Input port values for the angles; tags count up and wrap."""
        stim = {"in_angle": angles}
        if self.tag_width:
            stim["in_tag"] = np.arange(len(angles), dtype=np.int64) % (1 << min(self.tag_width, 62))
        return stim

    def check(self, name: str, cap: Capture, result: CheckResult | None = None) -> CheckResult:
        """Compare a capture with the model and the ideal; check order and tags."""
        result = result or CheckResult(test=name)
        dp = self.design.datapath
        angles = np.array(cap.in_values["in_angle"], dtype=np.int64 if self.angle_width <= 62 else object)
        n = min(len(angles), len(cap.out_cycles))
        model = sincos(dp, angles)
        ideal_cos, ideal_sin = ideal_sincos(dp, angles)
        got = {"out_cos": cap.outputs("out_cos"), "out_sin": cap.outputs("out_sin")}
        expected = {"out_cos": model.cos, "out_sin": model.sin}
        inputs = {"in_angle": angles}
        if self.tag_width:
            got["out_tag"] = cap.outputs("out_tag")
            expected["out_tag"] = np.array(cap.in_values["in_tag"], dtype=got["out_tag"].dtype)
            inputs["in_tag"] = expected["out_tag"]
        compare(
            result,
            inputs=inputs,
            got=got,
            expected=expected,
            ideal={"out_cos": ideal_cos, "out_sin": ideal_sin},
            budget_lsb=self.design.spec.max_error_lsb,
            seed=self.seed,
        )
        write_csv_rows(
            name,
            {
                "in_angle": angles[:n],
                "out_cos": got["out_cos"][:n],
                "out_sin": got["out_sin"][:n],
                "model_cos": model.cos[:n],
                "model_sin": model.sin[:n],
                "ideal_cos": ideal_cos[:n],
                "ideal_sin": ideal_sin[:n],
            },
        )
        return result

    def latencies(self, cap: Capture) -> npt.NDArray[np.int64]:
        """Clocks from each input handshake to its output handshake."""
        n = min(len(cap.in_cycles), len(cap.out_cycles))
        return np.array(cap.out_cycles[:n], dtype=np.int64) - np.array(cap.in_cycles[:n], dtype=np.int64)

    def finish(self, result: CheckResult) -> None:
        """Record the result and fail the test on any problem."""
        record(result)
        assert not result.problems, "\n".join(result.problems)


@cocotb.test()
async def test_corners(dut: Any) -> None:
    """0, every quadrant and octant boundary and one code either side, the most negative code."""
    tb = SinCosBench(dut)
    await tb.start()
    corners = corner_angles(tb.angle_width)
    cap = await tb.stream.run(tb.stimulus(corners))
    result = tb.check("corners", cap)
    if not cap.complete:
        result.problems.append(f"corner run did not finish: {len(cap.out_cycles)} of {len(corners)} out")
    tb.finish(result)


@cocotb.test()
async def test_random_full_rate(dut: Any) -> None:
    """Random angles offered every clock with out_ready high: checks, latency and throughput."""
    tb = SinCosBench(dut)
    await tb.start()
    angles = tb.random_angles(tb.rng(1), tb.samples)
    cap = await tb.stream.run(tb.stimulus(angles))
    result = tb.check("random_full_rate", cap)
    timing = tb.design.timing
    lat = tb.latencies(cap)
    if lat.size:
        result.latency_cycles = (int(lat.min()), int(lat.max()))
        if result.latency_cycles != (timing.latency_cycles, timing.latency_cycles):
            result.problems.append(
                f"latency {result.latency_cycles[0]}..{result.latency_cycles[1]} clocks, "
                f"manifest says {timing.latency_cycles}"
            )
    if len(cap.in_cycles) > 1:
        spacing = (cap.in_cycles[-1] - cap.in_cycles[0]) / (len(cap.in_cycles) - 1)
        result.cycles_per_sample = spacing
        if spacing != timing.cycles_per_sample:
            result.problems.append(
                f"one sample every {spacing:.3f} clocks at full rate, manifest says {timing.cycles_per_sample}"
            )
    if not cap.complete:
        result.problems.append(f"stream did not finish: {len(cap.out_cycles)} of {len(angles)} out")
    tb.finish(result)


@cocotb.test()
async def test_gaps_and_stalls(dut: Any) -> None:
    """Random idle gaps at the input crossed with random output stalls: order, count, tags."""
    tb = SinCosBench(dut)
    await tb.start()
    rng = tb.rng(2)
    result = CheckResult(test="gaps_and_stalls")
    count = max(1000, tb.samples // 4)
    # Four pause patterns: none/none, idle only, stall only, both, at varied densities.
    for k, (p_idle, p_stall) in enumerate(((0.0, 0.0), (0.5, 0.0), (0.0, 0.5), (0.3, 0.7))):
        angles = tb.random_angles(rng, count // 4)
        idle = rng.random(4099) < p_idle
        stall = rng.random(4093) < p_stall
        cap = await tb.stream.run(tb.stimulus(angles), idle=idle, stall=stall)
        tb.check("gaps_and_stalls", cap, result)
        if not cap.complete:
            result.problems.append(
                f"pattern {k}: {len(cap.out_cycles)} of {len(angles)} samples came out"
            )
        lat = tb.latencies(cap)
        if lat.size and int(lat.min()) < tb.design.timing.latency_cycles:
            result.problems.append(f"pattern {k}: a sample came out after {int(lat.min())} clocks")
    tb.finish(result)


@cocotb.test()
async def test_reset_mid_stream(dut: Any) -> None:
    """A reset with samples in flight drops them; nothing stale comes out; the next stream is exact."""
    tb = SinCosBench(dut)
    await tb.start()
    rng = tb.rng(3)
    result = CheckResult(test="reset_mid_stream")
    latency = tb.design.timing.latency_cycles
    angles = tb.random_angles(rng, 200)
    # Stop while samples are in flight, with output stalls so the buffer is busy too.
    stop = max(3, latency // 2 + 20)
    cap = await tb.stream.run(tb.stimulus(angles), stall=rng.random(97) < 0.3, stop_after=stop)
    # What came out before the reset must still be right.
    done = len(cap.out_cycles)
    if done:
        head = Capture(
            in_cycles=cap.in_cycles[:done],
            in_values={k: v[:done] for k, v in cap.in_values.items()},
            out_cycles=cap.out_cycles,
            out_values=cap.out_values,
        )
        tb.check("reset_mid_stream", head, result)
    if len(cap.in_cycles) <= done:
        result.problems.append("the reset found no sample in flight; the test needs a longer stream")
    await tb.stream.reset(cycles=2)
    stale = await tb.stream.idle_clocks(latency + 4)
    if any(stale):
        result.problems.append(f"out_valid rose after the reset with no input: {stale}")
    angles = tb.random_angles(rng, 500)
    cap = await tb.stream.run(tb.stimulus(angles), idle=rng.random(31) < 0.2, stall=rng.random(37) < 0.2)
    tb.check("reset_mid_stream", cap, result)
    if not cap.complete:
        result.problems.append(f"after the reset: {len(cap.out_cycles)} of {len(angles)} samples came out")
    tb.finish(result)
