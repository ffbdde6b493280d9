"""Bulk mode of the generated bench: millions of samples, or a whole input space, per launch.

The HDL harness (:mod:`benchgen.harness`) makes its own clock and streams one block of stimulus
into the core at full clock rate, so Python wakes once per block instead of once per clock. Per
block, Python writes the stimulus file, starts the block, and when it ends reads the result file
and compares whole arrays with the bit-true model in numpy. Every property of the per-clock bench
is kept: every sample is compared bit for bit (tags included), the first mismatches are reported
with their inputs and the seed, seeded idle gaps and output stalls can be switched on, the latency
and the input spacing are measured, and nothing may be lost or duplicated.

Results go to the same JSON-lines records as the per-clock bench
(:func:`benchgen.bench.scoreboard.record`), so ``benchgen sim`` pools them the same way.

Environment (set by ``benchgen sim``): ``BENCHGEN_SAMPLES`` (random samples),
``BENCHGEN_RESULTS`` (JSON-lines results), ``BENCHGEN_BULK_FAULT`` (bench self-test only:
``SAMPLE:PORT:BIT`` flips one result bit of one sample in the harness). The seed is cocotb's.
"""

from __future__ import annotations

import gc
import os
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import cocotb
import numpy as np
import numpy.typing as npt
from cocotb.triggers import Timer, ValueChange

from benchgen.bench.scoreboard import FIRST_MISMATCHES, CheckResult, record
from benchgen.design import Design, corner_angles
from benchgen.harness import BulkLayout, Slot, bulk_layout
from benchgen.model import sincos, to_signed
from benchgen.project import design_from_manifest, load_manifest
from benchgen.reference import ideal_sincos

__all__ = [
    "EXHAUSTIVE_MAX_BITS",
    "BulkBench",
    "bind",
    "test_bulk_exhaustive",
    "test_bulk_full_rate",
    "test_bulk_gaps_and_stalls",
]

SAMPLES_ENV = "BENCHGEN_SAMPLES"
FAULT_ENV = "BENCHGEN_BULK_FAULT"
DEFAULT_SAMPLES = 1_000_000
EXHAUSTIVE_MAX_BITS = 24
TABLE_MAX_BITS = 20
"""Input spaces up to this many bits get the model and the ideal tabulated once per run: a lookup
per sample then replaces the model's per-sample arithmetic, with the same bit-true answers."""

CLOCK_NS = 10
STIM_FILE = "bulk_stim.bin"
RESULT_FILE = "bulk_result.bin"
_LEVEL_ONE = 1 << 16

_manifest_path: Path | None = None


def bind(manifest: Path) -> tuple[Any, Any, Any]:
    """Point the bulk tests at a project's manifest and return them for the test module."""
    global _manifest_path
    _manifest_path = Path(manifest)
    return test_bulk_full_rate, test_bulk_gaps_and_stalls, test_bulk_exhaustive


class _SinCos:
    """What the bulk bench needs to know about a sine/cosine core."""

    inputs = ("in_angle",)
    signed_outputs = ("out_cos", "out_sin")

    def __init__(self, design: Design) -> None:
        self.dp = design.datapath
        self.space_bits = self.dp.angle_width
        self._tables: dict[str, npt.NDArray[Any]] | None = None

    def corners(self) -> dict[str, npt.NDArray[Any]]:
        return {"in_angle": corner_angles(self.space_bits)}

    def random(self, rng: np.random.Generator, count: int) -> dict[str, npt.NDArray[Any]]:
        return {"in_angle": rng.integers(0, 1 << self.space_bits, size=count, dtype=np.int64)}

    def enumerate(self, start: int, count: int) -> dict[str, npt.NDArray[Any]]:
        return {"in_angle": np.arange(start, start + count, dtype=np.int64)}

    def tabulate(self) -> None:
        """Model and ideal over the whole input space, once."""
        every = np.arange(1 << self.space_bits, dtype=np.int64)
        out = sincos(self.dp, every)
        cos, sin = ideal_sincos(self.dp, every)
        self._tables = {"out_cos": out.cos, "out_sin": out.sin, "ideal_cos": cos, "ideal_sin": sin}

    def predict(
        self, inputs: dict[str, npt.NDArray[Any]]
    ) -> tuple[dict[str, npt.NDArray[Any]], dict[str, npt.NDArray[np.float64]]]:
        """Bit-true outputs and ideal values for a block of inputs."""
        angles = inputs["in_angle"]
        if self._tables is not None:
            t = self._tables
            return (
                {"out_cos": t["out_cos"][angles], "out_sin": t["out_sin"][angles]},
                {"out_cos": t["ideal_cos"][angles], "out_sin": t["ideal_sin"][angles]},
            )
        out = sincos(self.dp, angles)
        cos, sin = ideal_sincos(self.dp, angles)
        return {"out_cos": out.cos, "out_sin": out.sin}, {"out_cos": cos, "out_sin": sin}


_FUNCTIONS = {"sincos": _SinCos}


@dataclass
class Block:
    """What the harness reported for one block.

    Attributes:
        outputs: Per output port, the values taken (signed ports as signed numbers).
        sent / received: Input and output handshakes in the block.
        cycles: Clocks the block ran.
        lat_min / lat_max: Latency range over the block's samples, clocks.
        first_in / last_in: Clocks of the first and last input handshake.
        idle_count / stall_count: Clocks the source held back / the consumer stalled.
        loaded_bytes: Stimulus bytes the harness read.
    """

    outputs: dict[str, npt.NDArray[Any]]
    sent: int
    received: int
    cycles: int
    lat_min: int
    lat_max: int
    first_in: int
    last_in: int
    idle_count: int
    stall_count: int
    loaded_bytes: int


@dataclass
class _Tally:
    """Comparisons of one test, accumulated over blocks with global sample numbers."""

    result: CheckResult
    seed: int
    budget: float
    worst: dict[str, tuple[float, int, dict[str, int]]] = field(default_factory=dict)
    lat: tuple[int, int] | None = None
    span: int = 0
    gaps: int = 0

    def add(
        self,
        offset: int,
        inputs: dict[str, npt.NDArray[Any]],
        got: dict[str, npt.NDArray[Any]],
        expected: dict[str, npt.NDArray[Any]],
        ideal: dict[str, npt.NDArray[np.float64]],
    ) -> None:
        res = self.result
        n = len(next(iter(got.values())))
        res.samples += n
        bad = np.zeros(n, dtype=bool)
        for port, exp in expected.items():
            bad |= got[port] != exp[:n]
        count = int(np.count_nonzero(bad))
        if count:
            res.mismatches += count
            room = FIRST_MISMATCHES - len(res.first_mismatches)
            for k in np.flatnonzero(bad)[: max(room, 0)]:
                row: dict[str, Any] = {"index": offset + int(k)}
                row.update({p: int(v[k]) for p, v in inputs.items()})
                row.update({f"expected_{p}": int(v[k]) for p, v in expected.items()})
                row.update({f"got_{p}": int(v[k]) for p, v in got.items()})
                res.first_mismatches.append(row)
        for port, ref in ideal.items():
            err = got[port].astype(np.float64) - ref[:n]
            if not err.size:
                continue
            k = int(np.argmax(np.abs(err)))
            worst = float(abs(err[k]))
            res.sum_sq_error += float(np.dot(err, err))
            res.error_count += int(err.size)
            if worst > res.max_error_lsb:
                res.max_error_lsb = worst
            if worst > self.worst.get(port, (-1.0, 0, {}))[0]:
                self.worst[port] = (worst, offset + k, {p: int(v[k]) for p, v in inputs.items()})

    def timing(self, block: Block) -> None:
        if block.received:
            lo, hi = block.lat_min, block.lat_max
            self.lat = (lo, hi) if self.lat is None else (min(self.lat[0], lo), max(self.lat[1], hi))
        if block.sent > 1:
            self.span += block.last_in - block.first_in
            self.gaps += block.sent - 1

    def finish(self) -> CheckResult:
        res = self.result
        if res.mismatches:
            lines = "\n".join("  " + ", ".join(f"{a}={b}" for a, b in r.items()) for r in res.first_mismatches)
            res.problems.insert(
                0,
                f"{res.mismatches} of {res.samples} samples differ from the bit-true model "
                f"(seed {self.seed}); first ones:\n{lines}",
            )
        for port, (worst, k, inp) in sorted(self.worst.items()):
            if worst > self.budget:
                res.problems.append(
                    f"{port}: error {worst:.4f} LSB against the ideal exceeds the budget {self.budget} LSB "
                    f"at sample {k} (input " + ", ".join(f"{p}={v}" for p, v in inp.items()) + f"; seed {self.seed})"
                )
        if res.error_count:
            res.rms_error_lsb = float(np.sqrt(res.sum_sq_error / res.error_count))
        res.latency_cycles = self.lat
        res.cycles_per_sample = self.span / self.gaps if self.gaps else None
        return res


def _pack(layout: BulkLayout, slots: tuple[Slot, ...], values: dict[str, npt.NDArray[Any]], n: int) -> bytes:
    """Stimulus words, most significant byte first (the order $fread fills a memory word in)."""
    buf = np.zeros((n, layout.in_bytes), dtype=np.uint8)
    for slot in slots:
        v = np.ascontiguousarray(values[slot.port], dtype=np.int64).astype(np.uint64)
        if slot.width < 64:
            v &= np.uint64((1 << slot.width) - 1)
        raw = v.astype("<u8").view(np.uint8).reshape(n, 8)
        buf[:, slot.byte_offset : slot.byte_offset + slot.nbytes] = raw[:, : slot.nbytes]
    return buf[:, ::-1].tobytes()


def _unpack(
    layout: BulkLayout, raw: npt.NDArray[np.uint8], signed: tuple[str, ...]
) -> dict[str, npt.NDArray[Any]]:
    """Result words (least significant byte first) split into ports."""
    words = raw.reshape(-1, layout.out_bytes)
    out: dict[str, npt.NDArray[Any]] = {}
    for slot in layout.outputs:
        part = np.ascontiguousarray(words[:, slot.byte_offset : slot.byte_offset + slot.nbytes])
        v = part.view(f"<u{slot.nbytes}").ravel().astype(np.uint64)
        if slot.width < 64:
            v &= np.uint64((1 << slot.width) - 1)
        if slot.port in signed:
            out[slot.port] = to_signed(v.view(np.int64), slot.width) if slot.width < 64 else v.view(np.int64)
        else:
            out[slot.port] = v.astype(np.int64) if slot.width < 63 else v
    return out


class BulkBench:
    """The bulk bench of one core: harness control, model and checks."""

    def __init__(self, dut: Any) -> None:
        if _manifest_path is None:
            raise RuntimeError("benchgen.bench.bulk.bind(manifest) was not called")
        self.manifest = load_manifest(_manifest_path.parent)
        self.design: Design = design_from_manifest(self.manifest)
        self.layout = bulk_layout(self.manifest)
        function = self.design.spec.function
        if function not in _FUNCTIONS:
            raise RuntimeError(f"the bulk bench does not know function '{function}' yet")
        self.function = _FUNCTIONS[function](self.design)
        self.dut = dut
        # The run's seed as given to `benchgen sim --seed` (cocotb 2 derives RANDOM_SEED from it
        # per test, which would not reproduce the run when fed back).
        self.seed = int(os.environ.get("COCOTB_RANDOM_SEED", cocotb.RANDOM_SEED))
        self.samples = int(os.environ.get(SAMPLES_ENV, DEFAULT_SAMPLES))
        self.tag_width = self.design.spec.tag_width
        self.fault = self._parse_fault(os.environ.get(FAULT_ENV, ""))
        self.done = 0
        self._streams = 0
        self.work = Path.cwd()

    def _parse_fault(self, text: str) -> tuple[int, int] | None:
        if not text:
            return None
        sample, port, bit = text.split(":")
        slot = next(s for s in self.layout.outputs if s.port == port)
        return int(sample), 1 << (slot.lsb + int(bit))

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

    def with_tags(self, stim: dict[str, npt.NDArray[Any]], rng: np.random.Generator) -> dict[str, npt.NDArray[Any]]:
        """Add random tags, so a swapped, lost or repeated sample shows in the tag too."""
        if self.tag_width:
            n = len(next(iter(stim.values())))
            hi = 1 << min(self.tag_width, 62)
            stim = {**stim, "in_tag": rng.integers(0, hi, size=n, dtype=np.int64)}
        return stim

    async def run_block(self, stim: dict[str, npt.NDArray[Any]], *, idle: float, stall: float) -> Block:
        """Stream one block through the core and return what came out."""
        dut = self.dut
        layout = self.layout
        n = len(next(iter(stim.values())))
        (self.work / STIM_FILE).write_bytes(_pack(layout, layout.inputs, stim, n))
        result_path = self.work / RESULT_FILE
        result_path.unlink(missing_ok=True)
        dut.block_len.value = n
        dut.max_cycles.value = min(0xFFFFFFFF, 100 * (n + 64))
        dut.idle_level.value = min(_LEVEL_ONE - 1, round(idle * _LEVEL_ONE))
        dut.stall_level.value = min(_LEVEL_ONE - 1, round(stall * _LEVEL_ONE))
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
            outputs=_unpack(layout, raw, self.function.signed_outputs),
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

    async def stream(
        self,
        tally: _Tally,
        blocks: Iterator[dict[str, npt.NDArray[Any]]],
        *,
        idle: float = 0.0,
        stall: float = 0.0,
        label: str = "",
    ) -> list[Block]:
        """Run every block and check it; problems name the block and the pattern."""
        seen = []
        offset = tally.result.samples
        self._streams += 1
        rng = self.rng(100 + self._streams)
        # Large arrays come and go every block; the cyclic collector finds nothing in them.
        gc.disable()
        try:
            for stim in blocks:
                stim = self.with_tags(stim, rng)
                n = len(next(iter(stim.values())))
                block = await self.run_block(stim, idle=idle, stall=stall)
                seen.append(block)
                where = f"{label}samples {offset}..{offset + n - 1}"
                if block.loaded_bytes != n * self.layout.in_bytes:
                    tally.result.problems.append(
                        f"{where}: the harness read {block.loaded_bytes} stimulus bytes, "
                        f"expected {n * self.layout.in_bytes}"
                    )
                if block.sent != n or block.received != n:
                    tally.result.problems.append(
                        f"{where}: {block.sent} of {n} samples went in and {block.received} came out "
                        f"in {block.cycles} clocks (seed {self.seed})"
                    )
                got = block.outputs
                m = min(n, len(next(iter(got.values()))))
                inputs = {p: v[:m] for p, v in stim.items()}
                expected, ideal = self.function.predict({p: stim[p][:m] for p in self.function.inputs})
                if self.tag_width:
                    expected["out_tag"] = stim["in_tag"][:m]
                tally.add(offset, inputs, {p: v[:m] for p, v in got.items()}, expected, ideal)
                tally.timing(block)
                offset += n
        finally:
            gc.enable()
        extra = int(self.dut.extra_count.value)
        if extra:
            tally.result.problems.append(f"{label}{extra} output(s) came out that no input asked for")
        return seen

    def blocks_of(self, make: Any, total: int) -> Iterator[dict[str, npt.NDArray[Any]]]:
        """Blocks of at most the harness's capacity, made on demand by ``make(start, count)``."""
        start = 0
        while start < total:
            count = min(self.layout.block, total - start)
            yield make(start, count)
            start += count

    def check_full_rate(self, tally: _Tally) -> None:
        """Latency and input spacing at full rate must match the manifest."""
        res = tally.result
        timing = self.design.timing
        if res.latency_cycles and res.latency_cycles != (timing.latency_cycles, timing.latency_cycles):
            res.problems.append(
                f"latency {res.latency_cycles[0]}..{res.latency_cycles[1]} clocks, "
                f"manifest says {timing.latency_cycles}"
            )
        if res.cycles_per_sample is not None and res.cycles_per_sample != timing.cycles_per_sample:
            res.problems.append(
                f"one sample every {res.cycles_per_sample:.3f} clocks at full rate, "
                f"manifest says {timing.cycles_per_sample}"
            )

    def finish(self, result: CheckResult) -> None:
        """Record the result and fail the test on any problem."""
        record(result)
        assert not result.problems, "\n".join(result.problems)

    def tally(self, name: str) -> _Tally:
        return _Tally(CheckResult(test=name), self.seed, self.design.spec.max_error_lsb)

    def prepare(self, total: int) -> None:
        """Tabulate the model when the input space is small against the samples to check."""
        bits = self.function.space_bits
        if bits <= TABLE_MAX_BITS and (1 << bits) <= 4 * total:
            self.function.tabulate()


@cocotb.test()
async def test_bulk_full_rate(dut: Any) -> None:
    """Corners, then BENCHGEN_SAMPLES random inputs offered every clock with the consumer ready."""
    tb = BulkBench(dut)
    tb.prepare(tb.samples)
    await tb.start(1)
    rng = tb.rng(1)
    tally = tb.tally("bulk_full_rate")
    corners = tb.function.corners()
    await tb.stream(tally, iter([corners]), label="corners: ")
    await tb.stream(tally, tb.blocks_of(lambda _s, c: tb.function.random(rng, c), tb.samples))
    tally.finish()
    tb.check_full_rate(tally)
    tb.finish(tally.result)


@cocotb.test()
async def test_bulk_gaps_and_stalls(dut: Any) -> None:
    """Seeded idle gaps crossed with seeded output stalls: nothing lost, duplicated or reordered."""
    tb = BulkBench(dut)
    count = max(4000, tb.samples // 4)
    tb.prepare(count)
    await tb.start(2)
    rng = tb.rng(2)
    tally = tb.tally("bulk_gaps_and_stalls")
    latency = tb.design.timing.latency_cycles
    for k, (p_idle, p_stall) in enumerate(((0.0, 0.0), (0.5, 0.0), (0.0, 0.5), (0.3, 0.7))):
        label = f"pattern {k} (idle {p_idle}, stall {p_stall}): "
        blocks = await tb.stream(
            tally,
            tb.blocks_of(lambda _s, c: tb.function.random(rng, c), count // 4),
            idle=p_idle,
            stall=p_stall,
            label=label,
        )
        idles = sum(b.idle_count for b in blocks)
        stalls = sum(b.stall_count for b in blocks)
        if (idles > 0) != (p_idle > 0) or (stalls > 0) != (p_stall > 0):
            tally.result.problems.append(f"{label}the harness applied {idles} idle and {stalls} stall clocks")
        lo = min((b.lat_min for b in blocks if b.received), default=latency)
        if lo < latency:
            tally.result.problems.append(f"{label}a sample came out after {lo} clocks")
    tally.finish()
    tb.finish(tally.result)


@cocotb.test()
async def test_bulk_exhaustive(dut: Any) -> None:
    """Every input code once, in order, at full rate."""
    tb = BulkBench(dut)
    bits = tb.function.space_bits
    assert bits <= EXHAUSTIVE_MAX_BITS, f"{2**bits} inputs are too many for an exhaustive run"
    tb.prepare(1 << bits)
    await tb.start(3)
    tally = tb.tally("bulk_exhaustive")
    await tb.stream(tally, tb.blocks_of(tb.function.enumerate, 1 << bits))
    tally.finish()
    tb.check_full_rate(tally)
    tb.finish(tally.result)
