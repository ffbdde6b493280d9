"""What both bulk benches share: stimulus plans, word packing, the function's model, the checks.

Two engines run the bulk tests: cocotb driving the HDL harness (:mod:`benchgen.bench.bulk`, used
with Icarus) and a generated C++ main clocking a Verilator build of a harness variant
(:mod:`benchgen.bench.bulk_native`). Everything that decides *what* is checked lives here, with no
cocotb import, so both engines run the same tests with the same seeds and report the same
records.

Ports, stimulus, ideal values and which errors are judged come from :mod:`benchgen.functions`;
bit-true outputs from :func:`benchgen.model.evaluate_function`. No function is special-cased.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

from benchgen.bench.scoreboard import FIRST_MISMATCHES, CheckResult, write_csv_rows
from benchgen.design import Design
from benchgen.functions import (
    bench_corners,
    function_errors,
    function_of,
    ideal_outputs,
    input_ports,
    output_ports,
    random_inputs,
)
from benchgen.harness import BulkLayout
from benchgen.functions import evaluate as evaluate_function
from benchgen.model import to_signed

__all__ = [
    "DEFAULT_SAMPLES",
    "EXHAUSTIVE_MIN_CHUNK",
    "FAULT_ENV",
    "FIRST_COUNT_PROBLEMS",
    "GAP_PATTERNS",
    "IDLE_PATTERNS",
    "gap_patterns",
    "TABLE_MAX_BITS",
    "WORST_SAMPLES",
    "Block",
    "BulkFunction",
    "ErrorStats",
    "FaultError",
    "Segment",
    "SegmentTally",
    "Tally",
    "check_block",
    "check_full_rate",
    "check_patterns",
    "exhaustive_plan",
    "full_rate_plan",
    "gaps_count",
    "gaps_plan",
    "level",
    "pack",
    "parse_fault",
    "unpack",
    "with_tags",
]

FAULT_ENV = "BENCHGEN_BULK_FAULT"
DEFAULT_SAMPLES = 1_000_000
TABLE_MAX_BITS = 20
"""Input spaces up to this many bits get the model and the ideal tabulated once per run: a lookup
per sample then replaces the model's per-sample arithmetic, with the same bit-true answers."""

GAP_PATTERNS = ((0.0, 0.0), (0.5, 0.0), (0.0, 0.5), (0.3, 0.7))
"""(idle probability, stall probability) of the four segments of the gaps-and-stalls test, and of
the exhaustive test's four shares of the input space (the first one at full rate)."""

IDLE_PATTERNS = ((0.0, 0.0), (0.5, 0.0), (0.1, 0.0), (0.9, 0.0))
"""The same for a core that cannot be stalled (valid-only handshake, no ``out_ready``): idle
gaps of several densities alone."""


def gap_patterns(stalls: bool) -> tuple[tuple[float, float], ...]:
    """:data:`GAP_PATTERNS`, or :data:`IDLE_PATTERNS` for a core with no ``out_ready``."""
    return GAP_PATTERNS if stalls else IDLE_PATTERNS

EXHAUSTIVE_MIN_CHUNK = 256
"""Fewest samples in one exhaustive chunk. The input space is cut into chunks dealt to the four
patterns in turn. A chunk this long gives a pattern hundreds of clocks to apply its idle and
stall clocks, so the check that it did cannot fail by chance (at 0.3 the odds of no idle clock
in 256 are below 10^-39). A space of fewer than four chunks runs whole under every pattern,
repeated up to this many samples."""

WORST_SAMPLES = 4
"""Worst samples kept per output port (largest error against the ideal first)."""

FIRST_COUNT_PROBLEMS = 8
"""Blocks whose counts are wrong that are reported one by one; later ones are only counted, so a
core that loses samples in every block of a long run does not grow the report without limit."""

LEVEL_ONE = 1 << 16
"""A probability p is handed to the harness as the 16-bit level p * 65536."""

Inputs = dict[str, npt.NDArray[Any]]


class FaultError(ValueError):
    """A malformed ``BENCHGEN_BULK_FAULT`` value."""


class BulkFunction:
    """The core's function as the bulk bench sees it: ports, stimulus, model and ideal.

    The input space is the concatenation of the data inputs in port order, the first port in the
    most significant bits (the order :func:`benchgen.functions.sizing_inputs` enumerates in).
    """

    def __init__(self, design: Design) -> None:
        self.dp = design.datapath
        self._in = input_ports(self.dp)
        out = output_ports(self.dp)
        self.inputs = tuple(p.name for p in self._in)
        self.outputs = tuple(p.name for p in out)
        self.signed_outputs = tuple(p.name for p in out if p.signed)
        self.space_bits = sum(p.width for p in self._in)
        self._table: tuple[Inputs, Inputs] | None = None
        # A core with state from sample to sample (an NCO): the model carries it from block to
        # block, from the reset on (restart at each reset).
        self._fn = function_of(self.dp)
        self._state = self._fn.initial_state(self.dp)

    def restart(self) -> None:
        """The core was reset: a stateful model starts again from its reset state."""
        self._state = self._fn.initial_state(self.dp)

    @property
    def tabulated(self) -> bool:
        """Whether :meth:`predict` looks answers up instead of running the model."""
        return self._table is not None

    def corners(self) -> Inputs:
        """The function's boundary inputs and directed worst cases."""
        return bench_corners(self.dp)

    def random(self, rng: np.random.Generator, count: int) -> Inputs:
        """Uniform random codes on every input port."""
        return random_inputs(self.dp, rng, count)

    def enumerate(self, start: int, count: int) -> Inputs:
        """Input codes ``start .. start + count - 1`` of the input space, split into ports."""
        return self._split(np.arange(start, start + count, dtype=np.int64))

    def _split(self, codes: npt.NDArray[np.int64]) -> Inputs:
        out: Inputs = {}
        shift = self.space_bits
        for p in self._in:
            shift -= p.width
            v = (codes >> np.int64(shift)) & np.int64((1 << p.width) - 1)
            out[p.name] = to_signed(v, p.width) if p.signed else v
        return out

    def _code(self, inputs: Inputs) -> npt.NDArray[np.int64]:
        code = np.zeros(len(inputs[self.inputs[0]]), dtype=np.int64)
        for p in self._in:
            code <<= np.int64(p.width)
            code |= np.asarray(inputs[p.name], dtype=np.int64) & np.int64((1 << p.width) - 1)
        return code

    def tabulate(self) -> None:
        """Model and ideal over the whole input space, once (only for spaces of at most 2**20)."""
        if self.space_bits > TABLE_MAX_BITS or self._state is not None:
            return
        every = self.enumerate(0, 1 << self.space_bits)
        model_in: dict[str, npt.ArrayLike] = dict(every)
        self._table = (evaluate_function(self.dp, model_in), ideal_outputs(self.dp, every))

    def predict(self, inputs: Inputs) -> tuple[Inputs, Inputs]:
        """Bit-true outputs and ideal values for a block of inputs."""
        if self._table is not None:
            idx = self._code(inputs)
            model, ideal = self._table
            return {k: v[idx] for k, v in model.items()}, {k: v[idx] for k, v in ideal.items()}
        ins = {p: inputs[p] for p in self.inputs}
        if self._state is not None:
            model, ideal, self._state = self._fn.model_run(self.dp, ins, self._state)
            return model, ideal
        model_in: dict[str, npt.ArrayLike] = dict(ins)
        return evaluate_function(self.dp, model_in), ideal_outputs(self.dp, ins)

    def errors(self, inputs: Inputs, got: Inputs, ideal: Inputs) -> dict[str, npt.NDArray[np.float64]]:
        """Per output, the observed error in LSBs, NaN where the budget does not judge it."""
        ins = {p: inputs[p] for p in self.inputs}
        return function_errors(self.dp, ins, {p: got[p] for p in self.outputs}, ideal)


def with_tags(stim: Inputs, tag_width: int, rng: np.random.Generator) -> Inputs:
    """Add random tags, so a swapped, lost or repeated sample shows in the tag too."""
    if not tag_width:
        return stim
    n = len(next(iter(stim.values())))
    return {**stim, "in_tag": rng.integers(0, 1 << min(tag_width, 62), size=n, dtype=np.int64)}


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
        extra_count: Outputs no input asked for, since the last reset.
    """

    outputs: Inputs
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
    extra_count: int = 0


@dataclass
class Segment:
    """Blocks run under one idle/stall pattern.

    Attributes:
        label: Prefix of this segment's problems ("" for plain random blocks).
        blocks: Makes the stimulus blocks (tags not yet added), on demand.
        idle / stall: Probabilities of an idle source clock / a stalled consumer clock.
        pattern_check: Whether the test checks that the pattern was applied.
        timed: Whether the segment's latency and input spacing count in the test's timing
            figures (the exhaustive test times only its full-rate share, which the manifest's
            latency and rate are checked against).
    """

    label: str
    blocks: Callable[[], Iterator[Inputs]]
    idle: float = 0.0
    stall: float = 0.0
    pattern_check: bool = False
    timed: bool = True


def _blocks(make: Callable[[int, int], Inputs], total: int, block: int) -> Callable[[], Iterator[Inputs]]:
    def gen() -> Iterator[Inputs]:
        start = 0
        while start < total:
            count = min(block, total - start)
            yield make(start, count)
            start += count

    return gen


def full_rate_plan(fn: BulkFunction, rng: np.random.Generator, samples: int, block: int) -> list[Segment]:
    """``bulk_full_rate``: the corners, then ``samples`` random inputs offered every clock."""
    corners = fn.corners()
    return [
        Segment("corners: ", lambda: iter([corners])),
        Segment("", _blocks(lambda _s, c: fn.random(rng, c), samples, block)),
    ]


def gaps_count(samples: int) -> int:
    """Samples of the gaps-and-stalls test for a run of ``samples``: a quarter, at least 4000."""
    return max(4000, samples // 4)


def gaps_plan(
    fn: BulkFunction, rng: np.random.Generator, samples: int, block: int, *, stalls: bool = True
) -> list[Segment]:
    """``bulk_gaps_and_stalls``: a quarter of the samples under each of :func:`gap_patterns`
    (``stalls``: whether the core has an ``out_ready`` to stall)."""
    patterns = gap_patterns(stalls)
    per = gaps_count(samples) // len(patterns)
    return [
        Segment(
            f"pattern {k} (idle {idle}, stall {stall}): ",
            _blocks(lambda _s, c: fn.random(rng, c), per, block),
            idle=idle,
            stall=stall,
            pattern_check=True,
        )
        for k, (idle, stall) in enumerate(patterns)
    ]


def _chunks(make: Callable[[int, int], Inputs], starts: range, chunk: int) -> Callable[[], Iterator[Inputs]]:
    def gen() -> Iterator[Inputs]:
        for start in starts:
            yield make(start, chunk)

    return gen


def exhaustive_plan(fn: BulkFunction, block: int, *, stalls: bool = True) -> list[Segment]:
    """``bulk_exhaustive``: every input code, a share of them under each of :func:`gap_patterns`
    (``stalls``: whether the core has an ``out_ready`` to stall).

    A core that loses, repeats or reorders samples only when its consumer stalls (or its source
    idles) passes a run at full rate, so the space is cut into chunks of at least
    :data:`EXHAUSTIVE_MIN_CHUNK` codes dealt to the four patterns in turn: every code is checked
    once, a quarter of them at full rate (the latency and input spacing measured against the
    manifest) and the rest under idle gaps, output stalls, or both, spread over the whole space.
    A space too small for four chunks runs whole under every pattern, repeated up to
    :data:`EXHAUSTIVE_MIN_CHUNK` samples, so each pattern has the clocks to show itself.
    """
    patterns = gap_patterns(stalls)
    total = 1 << fn.space_bits
    if total < len(patterns) * EXHAUSTIVE_MIN_CHUNK:
        count = total * -(-EXHAUSTIVE_MIN_CHUNK // total)

        def cycled(start: int, n: int) -> Inputs:
            return fn._split(np.arange(start, start + n, dtype=np.int64) % total)

        shares = [_blocks(cycled, count, block) for _ in patterns]
    else:
        # Sixteen chunks or more, so each pattern's share spans the whole space.
        chunk = max(EXHAUSTIVE_MIN_CHUNK, min(block, total // (4 * len(patterns))))
        step = len(patterns) * chunk
        shares = [_chunks(fn.enumerate, range(k * chunk, total, step), chunk) for k in range(len(patterns))]
    return [
        Segment(
            f"pattern {k} (idle {idle}, stall {stall}): ",
            share,
            idle=idle,
            stall=stall,
            pattern_check=True,
            timed=not (idle or stall),
        )
        for k, ((idle, stall), share) in enumerate(zip(patterns, shares, strict=True))
    ]


class ErrorStats:
    """Running error statistics of one output port, in memory that does not grow with the samples.

    Keeps the number of judged samples, the sum and the sum of squares of their errors (for the
    bias and the RMS), the largest magnitude, and the :data:`WORST_SAMPLES` worst samples: largest
    magnitude first, the earlier sample first among equal ones, each with its global sample
    number and inputs. Fed block by block, it gives what one pass over all the samples at once
    would (``tests/test_bulk.py`` checks it against that).
    """

    def __init__(self, keep: int = WORST_SAMPLES, budget: float = float("inf")) -> None:
        self.keep = keep
        self.budget = budget
        self.over = 0
        """Judged samples whose error is not below the budget."""
        self.count = 0
        self.total = 0.0
        self.total_sq = 0.0
        self.max = 0.0
        self.worst: list[tuple[float, int, dict[str, int]]] = []
        """(magnitude, sample number, inputs), worst first; at most ``keep`` entries."""

    def add(self, offset: int, err: npt.NDArray[np.float64], inputs: Inputs) -> None:
        """Fold in one block's errors (NaN: not judged); ``offset`` numbers its first sample."""
        judged = ~np.isnan(err)
        count = int(np.count_nonzero(judged))
        if not count:
            return
        ok = err[judged]
        self.count += count
        self.over += int(np.count_nonzero(np.abs(ok) >= self.budget))
        self.total += float(np.sum(ok))
        self.total_sq += float(np.sum(ok**2))
        mag = np.where(judged, np.abs(err), -1.0)
        top = float(np.max(mag))
        self.max = max(self.max, top)
        if len(self.worst) >= self.keep and top <= self.worst[-1][0]:
            return  # nothing here beats the kept ones (an equal one comes later, so it ranks after)
        if len(mag) > self.keep:
            # The block's own top `keep` in linear time: all above the keep-th largest value,
            # then the earliest of those equal to it.
            kth = np.partition(mag, len(mag) - self.keep)[len(mag) - self.keep]
            above = np.flatnonzero(mag > kth)
            picks = np.concatenate([above, np.flatnonzero(mag == kth)[: self.keep - len(above)]])
        else:
            picks = np.arange(len(mag))
        found = [
            (float(mag[k]), offset + int(k), {p: int(v[k]) for p, v in inputs.items()}) for k in picks if mag[k] >= 0
        ]
        self.worst = sorted(self.worst + found, key=lambda w: (-w[0], w[1]))[: self.keep]

    @property
    def mean(self) -> float:
        """Mean signed error (the bias), LSBs."""
        return self.total / self.count if self.count else 0.0

    @property
    def rms(self) -> float:
        """RMS error, LSBs."""
        return float(np.sqrt(self.total_sq / self.count)) if self.count else 0.0

    def as_dict(self) -> dict[str, Any]:
        """JSON form for the test's record."""
        return {
            "error_count": self.count,
            "over_budget": self.over,
            "max_error_lsb": self.max,
            "rms_error_lsb": self.rms,
            "mean_error_lsb": self.mean,
            "worst": [{"index": k, "error_lsb": m, **inp} for m, k, inp in self.worst],
        }


@dataclass
class SegmentTally:
    """What a segment's blocks add up to: counts only, so no block outlives its own check.

    Attributes:
        blocks: Blocks seen.
        idle_count / stall_count: Idle and stalled clocks over the blocks.
        lat_min: Smallest latency of any sample that came out, or None.
        extra_count: The harness's stray count after the last block (counted since the reset).
    """

    blocks: int = 0
    idle_count: int = 0
    stall_count: int = 0
    lat_min: int | None = None
    extra_count: int = 0

    def add(self, block: Block) -> None:
        """Fold one block's counters in."""
        self.blocks += 1
        self.idle_count += block.idle_count
        self.stall_count += block.stall_count
        if block.received:
            self.lat_min = block.lat_min if self.lat_min is None else min(self.lat_min, block.lat_min)
        self.extra_count = block.extra_count


@dataclass
class Tally:
    """Comparisons of one test, accumulated over blocks with global sample numbers.

    Each block is compared as it arrives and dropped: the tally keeps counts, the error statistics
    of each port (:class:`ErrorStats`), the first :data:`FIRST_MISMATCHES` mismatches and the first
    :data:`FIRST_COUNT_PROBLEMS` blocks whose counts were wrong, so its memory is the same after a
    thousand samples or a trillion. With ``csv`` set, every sample is appended to that file as its
    block is checked (the only per-sample output, and it goes to disk).
    """

    result: CheckResult
    seed: int
    budget: float
    errors: dict[str, ErrorStats] = field(default_factory=dict)
    lat: tuple[int, int] | None = None
    span: int = 0
    gaps: int = 0
    offered: int = 0
    """Samples offered so far: the global number of the next block's first sample."""
    count_problems: int = 0
    """Blocks whose sample or byte counts were wrong."""
    csv: Path | None = None
    blocks: int = 0
    """Blocks checked so far: the number of the next one within the test."""

    def add(self, offset: int, inputs: Inputs, got: Inputs, expected: Inputs, errors: dict[str, Any]) -> None:
        """Compare one block bit for bit, and its errors (NaN: not judged) against the budget."""
        res = self.result
        n = len(next(iter(got.values())))
        res.samples += n
        bad = np.zeros(n, dtype=bool)
        for port, exp in expected.items():
            bad |= np.asarray(got[port] != exp[:n], dtype=bool)
        count = int(np.count_nonzero(bad))
        if count:
            if "first_failure" not in res.extra:
                # Where `benchgen sim --waves-window` centres its dump: the block and the
                # output within it (benchgen.waves finds its clock in a rerun).
                res.extra["first_failure"] = {"block": self.blocks, "output": int(np.flatnonzero(bad)[0])}
            res.mismatches += count
            room = FIRST_MISMATCHES - len(res.first_mismatches)
            for k in np.flatnonzero(bad)[: max(room, 0)]:
                row: dict[str, Any] = {"index": offset + int(k)}
                row.update({p: int(v[k]) for p, v in inputs.items()})
                row.update({f"expected_{p}": int(v[k]) for p, v in expected.items()})
                row.update({f"got_{p}": int(v[k]) for p, v in got.items()})
                res.first_mismatches.append(row)
        for port, all_err in errors.items():
            stats = self.errors.setdefault(port, ErrorStats(budget=self.budget))
            stats.add(offset, np.asarray(all_err[:n], dtype=np.float64), inputs)

    def count_problem(self, text: str) -> None:
        """Report a block whose counts are wrong; after the first few, only count them."""
        self.count_problems += 1
        if self.count_problems <= FIRST_COUNT_PROBLEMS:
            self.result.problems.append(text)

    def timing(self, block: Block) -> None:
        """Fold one block's latency range and input spacing in."""
        if block.received:
            lo, hi = block.lat_min, block.lat_max
            self.lat = (lo, hi) if self.lat is None else (min(self.lat[0], lo), max(self.lat[1], hi))
        if block.sent > 1:
            self.span += block.last_in - block.first_in
            self.gaps += block.sent - 1

    def finish(self) -> CheckResult:
        """Turn the tally into the test's record, with problems for people to read."""
        res = self.result
        if res.mismatches:
            lines = "\n".join("  " + ", ".join(f"{a}={b}" for a, b in r.items()) for r in res.first_mismatches)
            res.problems.insert(
                0,
                f"{res.mismatches} of {res.samples} samples differ from the bit-true model "
                f"(seed {self.seed}, rerun with --seed {self.seed}); first ones:\n{lines}",
            )
        if self.count_problems > FIRST_COUNT_PROBLEMS:
            res.problems.append(
                f"... and {self.count_problems - FIRST_COUNT_PROBLEMS} more block(s) whose sample counts were wrong"
            )
        judged = {port: stats for port, stats in sorted(self.errors.items()) if stats.count}
        for port, stats in judged.items():
            worst, k, inp = stats.worst[0]
            # Same rule as the per-clock bench: the error must stay strictly below the budget.
            if worst >= self.budget:
                res.problems.append(
                    f"{port}: {stats.over} of {stats.count} judged samples are not below the budget "
                    f"{self.budget} LSB; the worst, {worst:.4f} LSB, at sample {k} (input "
                    + ", ".join(f"{p}={v}" for p, v in inp.items())
                    + f"; seed {self.seed})"
                )
        res.extra["over_budget"] = sum(s.over for s in judged.values())
        worst_port = max(judged, key=lambda p: judged[p].worst[0][0], default=None)
        if worst_port is not None:
            w, k, inp = judged[worst_port].worst[0]
            res.extra["worst_sample"] = {"port": worst_port, "error_lsb": w, "index": k, "inputs": inp}
        res.sum_sq_error = sum(s.total_sq for s in judged.values())
        res.error_count = sum(s.count for s in judged.values())
        res.max_error_lsb = max((s.max for s in judged.values()), default=0.0)
        if res.error_count:
            res.rms_error_lsb = float(np.sqrt(res.sum_sq_error / res.error_count))
        res.extra["error_by_port"] = {port: stats.as_dict() for port, stats in judged.items()}
        res.extra["blocks"] = self.blocks
        res.latency_cycles = self.lat
        res.cycles_per_sample = self.span / self.gaps if self.gaps else None
        return res


def check_block(
    tally: Tally, fn: BulkFunction, stim: Inputs, block: Block, where: str, in_bytes: int, *, timed: bool = True
) -> None:
    """Counts of one block, then its samples against the model and the ideal.

    ``timed``: whether the block's latency and input spacing count in the test's timing figures.
    """
    n = len(next(iter(stim.values())))
    if block.loaded_bytes != n * in_bytes:
        tally.count_problem(f"{where}: the harness read {block.loaded_bytes} stimulus bytes, expected {n * in_bytes}")
    if block.sent != n or block.received != n:
        tally.count_problem(
            f"{where}: {block.sent} of {n} samples went in and {block.received} came out "
            f"in {block.cycles} clocks (seed {tally.seed})"
        )
    got = block.outputs
    m = min(n, len(next(iter(got.values()))))
    inputs = {p: v[:m] for p, v in stim.items()}
    expected, ideal = fn.predict(inputs)
    got = {p: v[:m] for p, v in got.items()}
    if "in_tag" in stim:
        expected["out_tag"] = inputs["in_tag"]
    errors = fn.errors(inputs, got, ideal)
    tally.add(tally.offered, inputs, got, expected, errors)
    if tally.csv is not None:
        columns: dict[str, npt.NDArray[Any]] = {p: inputs[p] for p in fn.inputs}
        columns.update({p: got[p] for p in fn.outputs})
        columns.update({f"model_{p}": expected[p] for p in fn.outputs})
        columns.update({f"ideal_{p}": np.asarray(v, dtype=np.float64) for p, v in ideal.items()})
        columns.update({f"error_{p}": np.asarray(v, dtype=np.float64) for p, v in errors.items()})
        write_csv_rows(tally.result.test, columns, tally.csv)
    if timed:
        tally.timing(block)
    tally.offered += n
    tally.blocks += 1


def check_patterns(tally: Tally, segment: Segment, seen: SegmentTally, latency: int) -> None:
    """The idle/stall pattern was applied as asked, and no sample came out early."""
    if not segment.pattern_check:
        return
    idles, stalls = seen.idle_count, seen.stall_count
    if (idles > 0) != (segment.idle > 0) or (stalls > 0) != (segment.stall > 0):
        tally.result.problems.append(f"{segment.label}the harness applied {idles} idle and {stalls} stall clocks")
    lo = latency if seen.lat_min is None else seen.lat_min
    if lo < latency:
        tally.result.problems.append(f"{segment.label}a sample came out after {lo} clocks")


def check_full_rate(res: CheckResult, design: Design) -> None:
    """Latency and input spacing at full rate must match the manifest."""
    timing = design.timing
    if res.latency_cycles and res.latency_cycles != (timing.latency_cycles, timing.latency_cycles):
        res.problems.append(
            f"latency {res.latency_cycles[0]}..{res.latency_cycles[1]} clocks, manifest says {timing.latency_cycles}"
        )
    if res.cycles_per_sample is not None and res.cycles_per_sample != timing.cycles_per_sample:
        res.problems.append(
            f"one sample every {res.cycles_per_sample:.3f} clocks at full rate, "
            f"manifest says {timing.cycles_per_sample}"
        )


def level(probability: float) -> int:
    """A probability as the harness's 16-bit level."""
    return min(LEVEL_ONE - 1, round(probability * LEVEL_ONE))


def parse_fault(text: str, layout: BulkLayout) -> tuple[int, int] | None:
    """``SAMPLE:PORT:BIT`` as (sample, mask over the result word); None for an empty value.

    Raises:
        FaultError: naming the part that is wrong and the form expected.
    """
    if not text:
        return None
    parts = text.split(":")
    form = f"{FAULT_ENV}={text!r}: use SAMPLE:PORT:BIT, e.g. 1234:out_sin:0"
    if len(parts) != 3 or not parts[0].isdigit() or not parts[2].isdigit():
        raise FaultError(form)
    slot = next((s for s in layout.outputs if s.port == parts[1]), None)
    if slot is None:
        raise FaultError(f"{form}; PORT must be one of {', '.join(s.port for s in layout.outputs)}")
    bit = int(parts[2])
    if bit >= slot.width:
        raise FaultError(f"{form}; {slot.port} has bits 0..{slot.width - 1}")
    return int(parts[0]), 1 << (slot.lsb + bit)


def _as_u64(values: npt.NDArray[Any], width: int) -> npt.NDArray[np.uint64]:
    arr = np.asarray(values)
    mask = (1 << width) - 1
    if arr.dtype == object:
        return np.array([int(v) & mask for v in arr], dtype=np.uint64)
    v = np.ascontiguousarray(arr, dtype=np.int64).astype(np.uint64)
    if width < 64:
        v &= np.uint64(mask)
    return v


def pack(layout: BulkLayout, values: Inputs, n: int, *, big_endian: bool) -> bytes:
    """Stimulus words, each port in its slot.

    Args:
        layout: The word layout.
        values: Per input port (tag included), ``n`` values.
        n: Samples.
        big_endian: Most significant byte first (what ``$fread`` fills a memory word in), else
            least significant byte first (what the native C++ main copies into its ports).
    """
    buf = np.zeros((n, layout.in_bytes), dtype=np.uint8)
    for slot in layout.inputs:
        raw = _as_u64(values[slot.port], slot.width).astype("<u8").view(np.uint8).reshape(n, 8)
        buf[:, slot.byte_offset : slot.byte_offset + slot.nbytes] = raw[:, : slot.nbytes]
    return (buf[:, ::-1] if big_endian else buf).tobytes()


def unpack(layout: BulkLayout, raw: npt.NDArray[np.uint8], signed: tuple[str, ...]) -> Inputs:
    """Result words (least significant byte first) split into ports."""
    words = raw.reshape(-1, layout.out_bytes)
    out: Inputs = {}
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
