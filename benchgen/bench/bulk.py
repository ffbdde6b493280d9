"""Bulk mode of the generated bench: millions of samples, or a whole input space, per launch.

The HDL harness (:mod:`benchgen.harness`) makes its own clock and streams one block of stimulus
into the core at full clock rate, so Python wakes once per block instead of once per clock. Per
block, Python writes the stimulus file, starts the block, and when it ends reads the result file
and compares whole arrays with the bit-true model in numpy. Every property of the per-clock bench
is kept: every sample is compared bit for bit (tags included), the first mismatches are reported
with their inputs and the seed, seeded idle gaps and output stalls can be switched on, the latency
and the input spacing are measured, and nothing may be lost or duplicated.

This is the engine for Icarus and for GHDL (whose harness is the VHDL-2008 twin of the Verilog one,
with the same signals, stream rules and files), and for Verilator with ``--timing`` when forced;
Verilator normally runs the same tests with no cocotb at all (:mod:`benchgen.bench.bulk_native`).
What is checked lives in :mod:`benchgen.bench.bulk_check`, shared by both engines.

Results go to the same JSON-lines records as the per-clock bench
(:func:`benchgen.bench.scoreboard.record`), so ``benchgen sim`` pools them the same way.

Environment (set by ``benchgen sim``): ``BENCHGEN_SAMPLES`` (random samples),
``BENCHGEN_RESULTS`` (JSON-lines results), ``BENCHGEN_CSV`` (one row per sample, appended
block by block), ``BENCHGEN_BULK_FAULT`` (bench self-test only:
``SAMPLE:PORT:BIT`` flips one result bit of one sample in the harness). The seed is cocotb's.
"""

from __future__ import annotations

import gc
import os
from pathlib import Path
from typing import Any

import cocotb
import numpy as np
from cocotb.triggers import Timer, ValueChange

from benchgen.bench.bulk_check import (
    DEFAULT_SAMPLES,
    FAULT_ENV,
    Block,
    BulkFunction,
    Inputs,
    Segment,
    SegmentTally,
    Tally,
    check_block,
    check_full_rate,
    check_patterns,
    exhaustive_plan,
    full_rate_plan,
    gaps_count,
    gaps_plan,
    level,
    pack,
    parse_fault,
    unpack,
    with_tags,
)
from benchgen.bench.bulk_plan import EXHAUSTIVE_MAX_BITS
from benchgen.bench.scoreboard import CSV_ENV, SAMPLES_ENV, CheckResult, record
from benchgen.design import Design
from benchgen.harness import bulk_layout
from benchgen.project import design_from_manifest, load_manifest

__all__ = [
    "EXHAUSTIVE_MAX_BITS",
    "BulkBench",
    "bind",
    "test_bulk_exhaustive",
    "test_bulk_full_rate",
    "test_bulk_gaps_and_stalls",
]

CLOCK_NS = 10
STIM_FILE = "bulk_stim.bin"
RESULT_FILE = "bulk_result.bin"

_manifest_path: Path | None = None


def bind(manifest: Path) -> tuple[Any, Any, Any]:
    """Point the bulk tests at a project's manifest and return them for the test module."""
    global _manifest_path
    _manifest_path = Path(manifest)
    return test_bulk_full_rate, test_bulk_gaps_and_stalls, test_bulk_exhaustive


class BulkBench:
    """The bulk bench of one core under cocotb: harness control, model and checks."""

    def __init__(self, dut: Any) -> None:
        if _manifest_path is None:
            raise RuntimeError("benchgen.bench.bulk.bind(manifest) was not called")
        self.manifest = load_manifest(_manifest_path.parent)
        self.design: Design = design_from_manifest(self.manifest)
        self.layout = bulk_layout(self.design.spec.name, self.design.ports)
        self.function = BulkFunction(self.design)
        self.dut = dut
        # The run's seed as given to `benchgen sim --seed` (cocotb 2 derives RANDOM_SEED from it
        # per test, which would not reproduce the run when fed back).
        self.seed = int(os.environ.get("COCOTB_RANDOM_SEED", cocotb.RANDOM_SEED))
        self.samples = int(os.environ.get(SAMPLES_ENV, DEFAULT_SAMPLES))
        self.tag_width = self.design.spec.tag_width
        self.fault = parse_fault(os.environ.get(FAULT_ENV, ""), self.layout)
        self.done = 0
        self._extra = 0
        self.function.restart()
        self._streams = 0
        self.work = Path.cwd()

    def rng(self, salt: int) -> np.random.Generator:
        """A generator per test, derived from the run's seed."""
        return np.random.default_rng([self.seed, salt])

    async def start(self, salt: int) -> None:
        """Seed the idle and stall patterns, reset the core and the harness."""
        seeds = self.rng(1000 + salt).integers(1, 1 << 32, size=2, dtype=np.uint64)
        dut = self.dut
        dut.idle_seed.value = int(seeds[0])
        dut.stall_seed.value = int(seeds[1])
        dut.fault_mask.value = 0
        dut.rst.value = 1
        await Timer(4 * CLOCK_NS, unit="ns")
        dut.rst.value = 0
        await Timer(CLOCK_NS, unit="ns")
        self.done = 0
        self._extra = 0

    async def run_block(self, stim: Inputs, *, idle: float, stall: float) -> Block:
        """Stream one block through the core and return what came out."""
        dut = self.dut
        layout = self.layout
        n = len(next(iter(stim.values())))
        (self.work / STIM_FILE).write_bytes(pack(layout, stim, n, big_endian=True))
        result_path = self.work / RESULT_FILE
        result_path.unlink(missing_ok=True)
        dut.block_len.value = n
        dut.max_cycles.value = min(0xFFFFFFFF, 100 * (n + 64))
        dut.idle_level.value = level(idle)
        dut.stall_level.value = level(stall)
        if self.fault is not None and self.done <= self.fault[0] < self.done + n:
            dut.fault_index.value = self.fault[0] - self.done
            dut.fault_mask.value = self.fault[1]
        else:
            dut.fault_mask.value = 0
        request = (int(dut.block_ack.value) + 1) & 0xFF
        dut.block_req.value = request
        await ValueChange(dut.block_ack)
        raw = np.fromfile(result_path, dtype=np.uint8) if result_path.is_file() else np.zeros(0, np.uint8)
        self.done += n
        return Block(
            outputs=unpack(layout, raw, self.function.signed_outputs),
            sent=int(dut.sent.value),
            received=int(dut.received.value),
            cycles=int(dut.cycle.value),
            lat_min=int(dut.lat_min.value),
            lat_max=int(dut.lat_max.value),
            first_in=int(dut.first_in.value),
            last_in=int(dut.last_in.value),
            idle_count=int(dut.idle_count.value),
            stall_count=int(dut.stall_count.value),
            loaded_bytes=int(dut.loaded_bytes.value),
        )

    async def run(self, tally: Tally, plan: list[Segment]) -> None:
        """Run every segment's blocks and check each as it arrives; no block is kept."""
        latency = self.design.timing.latency_cycles
        # Large arrays come and go every block; the cyclic collector finds nothing in them.
        gc.disable()
        try:
            for segment in plan:
                self._streams += 1
                tags = self.rng(100 + self._streams)
                seen = SegmentTally()
                for raw_stim in segment.blocks():
                    stim = with_tags(raw_stim, self.tag_width, tags)
                    n = len(next(iter(stim.values())))
                    where = f"{segment.label}samples {tally.offered}..{tally.offered + n - 1}"
                    block = await self.run_block(stim, idle=segment.idle, stall=segment.stall)
                    seen.add(block)
                    check_block(tally, self.function, stim, block, where, self.layout.in_bytes, timed=segment.timed)
                check_patterns(tally, segment, seen, latency)
                # The harness counts strays since the reset; report each segment's own.
                extra = int(self.dut.extra_count.value) - self._extra
                self._extra += extra
                if extra:
                    tally.result.problems.append(f"{segment.label}{extra} output(s) came out that no input asked for")
        finally:
            gc.enable()

    def tally(self, name: str) -> Tally:
        """An empty tally for one test; every sample also goes to the CSV when one is asked for."""
        csv = os.environ.get(CSV_ENV)
        return Tally(CheckResult(test=name), self.seed, self.design.spec.max_error_lsb, csv=Path(csv) if csv else None)

    def prepare(self, total: int) -> None:
        """Tabulate the model when the input space is small against the samples to check."""
        if (1 << self.function.space_bits) <= 4 * total:
            self.function.tabulate()

    def finish(self, tally: Tally, *, full_rate: bool) -> None:
        """Record the result and fail the test on any problem."""
        result = tally.finish()
        if full_rate:
            check_full_rate(result, self.design)
        record(result)
        assert not result.problems, "\n".join(result.problems)


@cocotb.test()
async def test_bulk_full_rate(dut: Any) -> None:
    """Corners, then BENCHGEN_SAMPLES random inputs offered every clock with the consumer ready."""
    tb = BulkBench(dut)
    tb.prepare(tb.samples)
    await tb.start(1)
    tally = tb.tally("bulk_full_rate")
    await tb.run(tally, full_rate_plan(tb.function, tb.rng(1), tb.samples, tb.layout.block))
    tb.finish(tally, full_rate=True)


@cocotb.test()
async def test_bulk_gaps_and_stalls(dut: Any) -> None:
    """Seeded idle gaps crossed with seeded output stalls: nothing lost, duplicated or reordered."""
    tb = BulkBench(dut)
    tb.prepare(gaps_count(tb.samples))
    await tb.start(2)
    tally = tb.tally("bulk_gaps_and_stalls")
    await tb.run(tally, gaps_plan(tb.function, tb.rng(2), tb.samples, tb.layout.block, stalls=tb.layout.out_ready))
    tb.finish(tally, full_rate=False)


@cocotb.test()
async def test_bulk_exhaustive(dut: Any) -> None:
    """Every input code once: a quarter at full rate, the rest under idle gaps and output stalls."""
    tb = BulkBench(dut)
    bits = tb.function.space_bits
    assert bits <= EXHAUSTIVE_MAX_BITS, f"{2**bits} inputs are too many for an exhaustive run"
    tb.prepare(1 << bits)
    await tb.start(3)
    tally = tb.tally("bulk_exhaustive")
    await tb.run(tally, exhaustive_plan(tb.function, tb.layout.block, stalls=tb.layout.out_ready))
    tb.finish(tally, full_rate=True)
