"""cocotb tests for a free-running core (an NCO with ``nco_mode = "free_running"``).

Such a core has no input stream: it takes a sample at every clock from reset (every clock at
which its clock enable is high), and its words are loaded through the ``load`` port. So the
stream bench (:mod:`benchgen.bench.core_tests`) does not apply; these tests drive ``load`` and
the words per clock and check every output bit against the free-running model,
:func:`benchgen.nco.run`, whose sample ``k`` is the ``k``-th enabled clock edge after the reset
(counting from 0) and whose loads are the edges at which ``load`` was high.

At each enabled edge the bench reads what the core shows at that edge (``out_valid`` and the
outputs, as the stream bench does), so sample ``k`` taken at enabled edge ``k + 1`` must show at
edge ``k + 1 + latency``: ``out_valid`` low before, high from then on. Between loads the word
inputs carry random other values, which the core must ignore. An edge with the clock enable
low is no edge for the core: the bench drives random ``load`` and words there and checks that
``out_valid`` and the outputs held.

Environment: as :mod:`benchgen.bench.core_tests` (``BENCHGEN_SAMPLES``: clocks of the load
test, ``BENCHGEN_RESULTS``, ``BENCHGEN_CSV``, ``BENCHGEN_TONE``).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import cocotb
import numpy as np
import numpy.typing as npt
from cocotb.clock import Clock
from cocotb.triggers import FallingEdge, RisingEdge, Timer
from cocotb.utils import get_sim_time

from benchgen.bench.core_tests import CLOCK_NS, TONE_CHANGE_SAMPLES, tone_plan, tone_record
from benchgen.bench.scoreboard import SAMPLES_ENV, CheckResult, compare, record, write_csv_rows
from benchgen.design import Design
from benchgen.functions import LOAD_PORT, function_errors, function_of, ideal_outputs
from benchgen.nco import Change, run
from benchgen.project import design_from_manifest, load_manifest

__all__ = ["bind", "test_loads_full_rate", "test_reset_mid_run", "test_tone"]

DEFAULT_SAMPLES = 4000
LOAD_CHANCE = 1 / 64
"""Chance of a load at each clock of the load test: a few dozen loads per few thousand clocks."""
FREQ_PORT, PHASE_PORT = "in_freq_word", "in_phase_offset"

_manifest_path: Path | None = None


def bind(manifest: Path) -> tuple[Any, Any, Any]:
    """Point the tests at a project's manifest and return them for the test module to expose."""
    global _manifest_path
    _manifest_path = Path(manifest)
    return test_loads_full_rate, test_reset_mid_run, test_tone


@dataclass
class Run:
    """What one stretch of clocks from a reset showed.

    Attributes:
        changes: The loads, as the model's changes (sample index, both words).
        taken: Samples taken (enabled edges out of reset).
        first_valid: The enabled edge (1 = the first) at which out_valid was first seen high,
            or 0 if it never was.
        outputs: Per output port, the values shown at each enabled edge with out_valid high.
        out_times: Simulation time (ns) of each of those edges.
        problems: What went wrong on the way (out_valid falling again, an output moving while
            the enable was low).
    """

    changes: list[Change] = field(default_factory=list)
    taken: int = 0
    first_valid: int = 0
    outputs: dict[str, list[int]] = field(default_factory=dict)
    out_times: list[int] = field(default_factory=list)
    problems: list[str] = field(default_factory=list)


class FreeRunningBench:
    """Drives and watches one free-running core; checks it against :func:`benchgen.nco.run`."""

    def __init__(self, dut: Any) -> None:
        if _manifest_path is None:
            raise RuntimeError("benchgen.bench.free_running.bind(manifest) was not called")
        self.manifest = load_manifest(_manifest_path.parent)
        self.design: Design = design_from_manifest(self.manifest)
        self.dp: Any = self.design.datapath
        if not function_of(self.dp).free_running(self.dp):
            raise RuntimeError(f"{self.design.spec.name} is not a free-running core: use benchgen.bench.core_tests")
        self.dut = dut
        ports = self.design.ports
        self.out_ports = [p.name for p in ports if p.direction == "out" and p.role == "data"]
        reset = next(p for p in ports if p.role == "reset")
        self.reset_handle = getattr(dut, reset.name)
        self.reset_level = 0 if reset.active_low else 1
        enable = next((p.name for p in ports if p.role == "enable"), "")
        self.enable_handle = getattr(dut, enable) if enable else None
        self.asynchronous_reset = self.design.spec.reset_style == "asynchronous"
        self.seed = int(os.environ.get("COCOTB_RANDOM_SEED", cocotb.RANDOM_SEED))
        self.samples = int(os.environ.get(SAMPLES_ENV, DEFAULT_SAMPLES))
        self.latency = self.design.timing.latency_cycles
        self.mask = (1 << self.dp.acc_width) - 1
        # Per edge whether the enable is high: a seeded pattern of prime length.
        pattern_rng = np.random.default_rng([self.seed, 99])
        self.enable_pattern = [bool(v) for v in pattern_rng.random(4091) >= 0.3] if enable else [True]
        self.edges = 0
        self.junk = np.random.default_rng([self.seed, 98])

    async def start(self) -> None:
        """Start the clock and reset the core."""
        Clock(self.dut.clk, CLOCK_NS, unit="ns").start()
        await self.reset()

    def rng(self, salt: int) -> np.random.Generator:
        """A generator per test, derived from the run's seed."""
        return np.random.default_rng([self.seed, salt])

    def _word(self) -> int:
        return int(self.junk.integers(0, self.mask, endpoint=True, dtype=np.uint64))

    def _drive(self, load: bool, fw: int | None = None, po: int | None = None) -> None:
        """Put ``load`` and the words on the inputs; random words where none is given."""
        self.dut.load.value = int(load)
        getattr(self.dut, FREQ_PORT).value = self._word() if fw is None else fw
        getattr(self.dut, PHASE_PORT).value = self._word() if po is None else po

    def _enabled_next(self) -> bool:
        if self.enable_handle is None:
            return True
        on = self.enable_pattern[self.edges % len(self.enable_pattern)]
        self.enable_handle.value = int(on)
        return on

    async def reset(self, cycles: int = 3, *, mid_clock: bool = False) -> bool | None:
        """Hold the reset for some clocks, with random loads and words meanwhile (a reset loads
        0 whatever ``load`` says). With ``mid_clock``: raise it between two edges and return
        whether ``out_valid`` had fallen 1 ns later (None if it was low already)."""
        cleared: bool | None = None
        if mid_clock:
            await FallingEdge(self.dut.clk)
            was_valid = bool(self.dut.out_valid.value)
            self.reset_handle.value = self.reset_level
            await Timer(1, unit="ns")
            cleared = None if not was_valid else not bool(self.dut.out_valid.value)
        else:
            self.reset_handle.value = self.reset_level
        for _ in range(cycles):
            self._drive(bool(self.junk.integers(0, 2)))
            self._enabled_next()
            await RisingEdge(self.dut.clk)
            self.edges += 1
        self.reset_handle.value = 1 - self.reset_level
        return cleared

    def _read(self) -> tuple[int, ...]:
        values = []
        for h in (self.dut.out_valid, *(getattr(self.dut, p) for p in self.out_ports)):
            try:
                values.append(int(h.value))
            except ValueError:
                values.append(-1)
        return tuple(values)

    async def run(self, clocks: int, loads: dict[int, tuple[int, int]]) -> Run:
        """Run ``clocks`` enabled clocks straight after a reset, loading at the given samples.

        Args:
            clocks: Enabled clock edges to run (samples taken).
            loads: Sample index -> (frequency word, phase offset) to load at that sample's edge.
        """
        dut = self.dut
        out = Run(outputs={p: [] for p in self.out_ports})
        handles = [getattr(dut, p) for p in self.out_ports]
        held: tuple[int, ...] | None = None
        edge = RisingEdge(dut.clk)
        enabled = self._enabled_next()
        k = 0  # the sample the next enabled edge takes

        def drive_for_edge() -> None:
            if enabled and k in loads:
                fw, po = loads[k]
                self._drive(True, fw, po)
            elif enabled:
                self._drive(False)
            else:
                self._drive(bool(self.junk.integers(0, 2)))  # no edge for the core: anything goes

        drive_for_edge()
        while k < clocks:
            await edge
            self.edges += 1
            if held is not None:
                now = self._read()
                if now != held and len(out.problems) < 10:
                    out.problems.append(f"clk_en low before edge {self.edges}, yet out_valid or an output changed")
                held = None
            if not enabled:
                held = self._read()
            else:
                if k in loads:
                    out.changes.append(Change(k, *loads[k]))
                k += 1
                out.taken = k
                valid = bool(dut.out_valid.value)
                if valid:
                    if not out.first_valid:
                        out.first_valid = k
                    out.out_times.append(int(get_sim_time("ns")))
                    for h, p in zip(handles, self.out_ports, strict=True):
                        out.outputs[p].append(h.value.to_signed())
                elif out.first_valid and len(out.problems) < 10:
                    out.problems.append(f"out_valid fell at enabled edge {k} after rising at {out.first_valid}")
            enabled = self._enabled_next()
            drive_for_edge()
        self.dut.load.value = 0
        if self.enable_handle is not None:
            self.enable_handle.value = 1
        return out

    def check(self, name: str, got: Run, result: CheckResult | None = None) -> CheckResult:
        """Compare a run with the free-running model from reset; check when out_valid rose."""
        result = result or CheckResult(test=name)
        result.problems.extend(got.problems)
        expected_first = 1 + self.latency
        if got.taken >= expected_first and got.first_valid != expected_first:
            result.problems.append(
                f"out_valid first rose at enabled edge {got.first_valid or 'never'}; with latency "
                f"{self.latency} the first sample shows at edge {expected_first}"
            )
        shown = len(got.outputs[self.out_ports[0]])
        if not shown:
            return result
        dp = self.dp
        model = run(dp.phase(), dp.core(), shown, changes=[c for c in got.changes if c.index < shown])
        expected = {"out_cos": model.cos, "out_sin": model.sin}
        outputs = {p: np.array(v, dtype=np.int64) for p, v in got.outputs.items()}
        # The words in force at each sample, as the streamed form's tokens: the ideal and the
        # judging read the same phase codes from them (benchgen.functions.nco.phase_of).
        dtype: Any = np.int64 if dp.acc_width <= 62 else object
        inputs = {
            FREQ_PORT: np.array([int(v) for v in model.path.freq_word], dtype=dtype),
            PHASE_PORT: np.array([int(v) for v in model.path.phase_offset], dtype=dtype),
        }
        ideal = ideal_outputs(dp, inputs)
        errors = function_errors(dp, inputs, outputs, ideal)
        compare(
            result, inputs=inputs, got=outputs, expected=expected, errors=errors,
            budget_lsb=self.design.spec.max_error_lsb, seed=self.seed,
        )  # fmt: skip
        if result.first_mismatches and "first_failure" not in result.extra:
            k = result.first_mismatches[0]["index"]
            if k < len(got.out_times):
                result.extra["first_failure"] = {"time_ns": got.out_times[k]}
        columns: dict[str, npt.NDArray[Any]] = dict(inputs)
        columns["load"] = np.isin(np.arange(shown), [c.index for c in got.changes]).astype(np.int64)
        columns.update(outputs)
        columns.update({f"model_{p}": expected[p] for p in self.out_ports})
        columns.update({f"ideal_{p}": np.asarray(ideal[p], dtype=np.float64) for p in ideal})
        columns.update({f"error_{p}": np.asarray(errors[p], dtype=np.float64) for p in errors})
        write_csv_rows(name, columns)
        return result

    def random_loads(self, rng: np.random.Generator, clocks: int) -> dict[int, tuple[int, int]]:
        """Loads of random words at random clocks (one at sample 0, so the tone starts at once)."""
        at = [0] + [int(k) for k in np.flatnonzero(rng.random(clocks) < LOAD_CHANCE) if k > 0]
        words = rng.integers(0, self.mask, size=(len(at), 2), endpoint=True, dtype=np.uint64)
        return {k: (int(w[0]), int(w[1])) for k, w in zip(at, words, strict=True)}

    def finish(self, result: CheckResult) -> None:
        """Record the result and fail the test on any problem."""
        record(result)
        assert not result.problems, "\n".join(result.problems)


@cocotb.test()
async def test_loads_full_rate(dut: Any) -> None:
    """One sample per clock from reset, both words loaded at random clocks mid-record (random
    other words on the inputs between loads): every output bit against benchgen.nco.run, and
    out_valid rising exactly one latency after the first sample."""
    tb = FreeRunningBench(dut)
    await tb.start()
    clocks = tb.samples + tb.latency
    got = await tb.run(clocks, tb.random_loads(tb.rng(1), clocks))
    result = tb.check("loads_full_rate", got)
    result.latency_cycles = (tb.latency, tb.latency) if got.first_valid == 1 + tb.latency else None
    result.cycles_per_sample = 1.0
    shown = len(got.outputs[tb.out_ports[0]])
    if shown != clocks - tb.latency:
        result.problems.append(f"{shown} samples came out in {clocks} clocks; expected {clocks - tb.latency}")
    result.extra["loads"] = len(got.changes)
    tb.finish(result)


@cocotb.test()
async def test_reset_mid_run(dut: Any) -> None:
    """A reset in mid-run drops the samples in flight and restarts the accumulator, the words
    and the dither from their reset values; out_valid falls (at once for an asynchronous reset,
    at the next edge for a synchronous one) and rises again one latency after the restart."""
    tb = FreeRunningBench(dut)
    await tb.start()
    rng = tb.rng(3)
    result = CheckResult(test="reset_mid_run")
    first = 2 * tb.latency + 40
    tb.check("reset_mid_run", await tb.run(first, tb.random_loads(rng, first)), result)
    cleared = await tb.reset(cycles=2, mid_clock=True)
    if cleared is not None and cleared != tb.asynchronous_reset:
        style = "asynchronous" if tb.asynchronous_reset else "synchronous"
        seen = "fell before" if cleared else "had not fallen by"
        result.problems.append(f"out_valid {seen} the next clock edge after the reset rose; the reset should be {style}")
    second = tb.latency + 500
    tb.check("reset_mid_run", await tb.run(second, tb.random_loads(rng, second)), result)
    tb.finish(result)


@cocotb.test()
async def test_tone(dut: Any) -> None:
    """A steady tone loaded at the first clock, then a load of another word and offset: every
    output bit against the model; the steady part's spectrum (SFDR, SNR; IEEE Std 1241
    coherent sampling) is recorded beside the truncation theory's prediction."""
    tb = FreeRunningBench(dut)
    await tb.start()
    dp = tb.dp
    word, offset, n, cycles = tone_plan(dp)
    new_word, new_offset = (word * 3 + (1 << (dp.acc_width - 3))) & tb.mask, (offset + (1 << (dp.acc_width - 2))) & tb.mask
    clocks = n + TONE_CHANGE_SAMPLES + tb.latency
    got = await tb.run(clocks, {0: (word, offset), n: (new_word, new_offset)})
    result = tb.check("tone", got)
    shown = len(got.outputs["out_cos"])
    if shown < n:
        result.problems.append(f"tone: {shown} of {n} samples came out")
    elif cycles:
        cos = np.array(got.outputs["out_cos"][:n], dtype=np.float64)
        sin = np.array(got.outputs["out_sin"][:n], dtype=np.float64)
        result.extra["tone"] = tone_record(dp, cos + 1j * sin, word, offset, n, cycles)
    tb.finish(result)
