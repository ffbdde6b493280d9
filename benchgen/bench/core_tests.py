"""cocotb tests for a generated core (any function).

A generated project's test module calls :func:`bind` with its manifest and exposes the returned
tests; everything else lives here, so all projects share one bench.

Environment (set by ``benchgen sim``): ``BENCHGEN_SAMPLES`` (random samples at full rate,
default 20000), ``BENCHGEN_RESULTS`` (JSON-lines file for per-test results), ``BENCHGEN_CSV``
(per-sample CSV). The seed is cocotb's ``COCOTB_RANDOM_SEED``.
"""

from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

import cocotb
import numpy as np
import numpy.typing as npt
from cocotb.clock import Clock

from benchgen.bench.scoreboard import SAMPLES_ENV, CheckResult, compare, record, write_csv_rows
from benchgen.bench.stream import Capture, StreamBench
from benchgen.design import Design
from benchgen.nco_theory import coherent_word, dithered_spur_dbc, truncation_period
from benchgen.spectrum import measure_tone
from benchgen.functions import bench_corners, function_errors, function_of, ideal_outputs, random_inputs
from benchgen.functions import evaluate as evaluate_function
from benchgen.project import design_from_manifest, load_manifest

__all__ = [
    "TONE_ENV",
    "bind",
    "bind_tone",
    "test_corners",
    "test_gaps_and_stalls",
    "test_random_full_rate",
    "test_reset_mid_stream",
    "test_tone",
    "tone_plan",
    "tone_record",
]

DEFAULT_SAMPLES = 20_000
CLOCK_NS = 10
TONE_ENV = "BENCHGEN_TONE"
"""A stateful core's tone test: JSON ``{"freq_word", "phase_offset", "samples", "cycles"}``
(every key optional; ``cycles``: carrier cycles per record, a whole number for a coherent word,
measured through a window otherwise)."""
DEFAULT_TONE_SAMPLES = 4096
TONE_CHANGE_SAMPLES = 256

_manifest_path: Path | None = None


def bind(manifest: Path) -> tuple[Any, Any, Any, Any]:
    """Point the tests at a project's manifest and return them for the test module to expose."""
    global _manifest_path
    _manifest_path = Path(manifest)
    return test_corners, test_random_full_rate, test_gaps_and_stalls, test_reset_mid_stream


def bind_tone(manifest: Path) -> Any:
    """The tone test of a core that holds state from sample to sample (an NCO), for its test
    module to expose beside the four of :func:`bind`."""
    global _manifest_path
    _manifest_path = Path(manifest)
    return test_tone


class CoreBench:
    """The bench of one generated core: stream driver/monitor, model, ideal and checks."""

    def __init__(self, dut: Any) -> None:
        if _manifest_path is None:
            raise RuntimeError("benchgen.bench.core_tests.bind(manifest) was not called")
        self.manifest = load_manifest(_manifest_path.parent)
        self.design: Design = design_from_manifest(self.manifest)
        self.dp = self.design.datapath
        self.dut = dut
        self.tag_width = self.design.spec.tag_width
        # Each stream's words: the function's data ports and the tag.
        ins = [p for p in self.design.ports if p.direction == "in" and p.payload]
        outs = [p for p in self.design.ports if p.direction == "out" and p.payload]
        self.in_ports = [p.name for p in ins if p.role == "data"]
        self.out_ports = [p.name for p in outs if p.role == "data"]
        # The run's seed as given to the runner (cocotb re-derives RANDOM_SEED per test).
        self.seed = int(os.environ.get("COCOTB_RANDOM_SEED", cocotb.RANDOM_SEED))
        reset = next(p for p in self.design.ports if p.role == "reset")
        enable = next((p.name for p in self.design.ports if p.role == "enable"), "")
        self.asynchronous_reset = self.design.spec.reset_style == "asynchronous"
        self.stream = StreamBench(
            dut,
            inputs=tuple(p.name for p in ins),
            outputs=tuple(p.name for p in outs),
            signed=tuple(p.name for p in outs if p.signed),
            reset=reset.name,
            reset_active_low=reset.active_low,
            enable=enable,
            enable_seed=[self.seed, 99],
            in_ready=any(p.name == "in_ready" for p in self.design.ports),
            out_ready=any(p.name == "out_ready" for p in self.design.ports),
        )
        self.samples = int(os.environ.get(SAMPLES_ENV, DEFAULT_SAMPLES))
        # A core with state from sample to sample (an NCO's phase accumulator): its model runs
        # over every sample taken since the last reset, not over one capture alone.
        self.stateful = function_of(self.dp).phase_front(self.dp) is not None
        self._history: dict[str, npt.NDArray[Any]] = {}
        self._history_resets = -1

    async def start(self) -> None:
        """Start the clock and reset the core."""
        Clock(self.dut.clk, CLOCK_NS, unit="ns").start()
        await self.stream.reset()

    def rng(self, salt: int) -> np.random.Generator:
        """A generator per test, derived from the run's seed."""
        return np.random.default_rng([self.seed, salt])

    def random(self, rng: np.random.Generator, count: int) -> dict[str, npt.NDArray[Any]]:
        """Uniform random codes on every input port, tags counting up."""
        return self.with_tags(random_inputs(self.dp, rng, count))

    def corners(self) -> dict[str, npt.NDArray[Any]]:
        """The function's corner inputs and directed worst cases, tags counting up."""
        return self.with_tags(bench_corners(self.dp))

    def with_tags(self, stim: dict[str, npt.NDArray[Any]]) -> dict[str, npt.NDArray[Any]]:
        """Add counting tags (they wrap) when the core has a tag."""
        if self.tag_width:
            count = len(next(iter(stim.values())))
            stim = {**stim, "in_tag": np.arange(count, dtype=np.int64) % (1 << min(self.tag_width, 62))}
        return stim

    def _inputs_of(self, cap: Capture, count: int | None = None) -> dict[str, npt.NDArray[Any]]:
        out = {}
        for name in self.in_ports:
            vals = cap.in_values[name][:count] if count is not None else cap.in_values[name]
            wide = vals and max(abs(int(v)) for v in vals) >= 1 << 62
            out[name] = np.array(vals, dtype=object if wide else np.int64)
        return out

    def _since_reset(self, inputs: dict[str, npt.NDArray[Any]]) -> tuple[dict[str, npt.NDArray[Any]], int]:
        """The inputs the model runs on for a capture, and how many of them came before it.

        A stateless core: the capture's own. A stateful one: every sample taken since the last
        reset, this capture's last (the capture is remembered for the next check).
        """
        if not self.stateful:
            return inputs, 0
        if self._history_resets != self.stream.resets:
            self._history = {k: v[:0] for k, v in inputs.items()}
            self._history_resets = self.stream.resets
        before = len(next(iter(self._history.values())))
        dtype = {k: object if v.dtype == object or self._history[k].dtype == object else np.int64 for k, v in inputs.items()}
        full = {k: np.concatenate([self._history[k].astype(dtype[k]), v.astype(dtype[k])]) for k, v in inputs.items()}
        self._history = full
        return full, before

    def check(self, name: str, cap: Capture, result: CheckResult | None = None) -> CheckResult:
        """Compare a capture with the model and the ideal; check order and tags."""
        result = result or CheckResult(test=name)
        inputs = self._inputs_of(cap)
        n = min(len(cap.in_cycles), len(cap.out_cycles))
        model_inputs, before = self._since_reset(inputs)
        expected = {k: v[before:] for k, v in evaluate_function(self.dp, model_inputs).items()}
        got = {p: cap.outputs(p) for p in self.out_ports}
        shown = dict(inputs)
        if self.tag_width:
            got["out_tag"] = cap.outputs("out_tag")
            expected["out_tag"] = np.array(cap.in_values["in_tag"], dtype=got["out_tag"].dtype)
            shown["in_tag"] = expected["out_tag"]
        short = {k: v[:n] for k, v in inputs.items()}
        ideal = {k: v[before : before + n] for k, v in ideal_outputs(self.dp, {k: v[: before + n] for k, v in model_inputs.items()}).items()}
        errors = function_errors(self.dp, short, {p: got[p][:n] for p in self.out_ports}, ideal)
        shown_before = len(result.first_mismatches)
        compare(
            result,
            inputs=shown,
            got=got,
            expected=expected,
            errors=errors,
            budget_lsb=self.design.spec.max_error_lsb,
            seed=self.seed,
        )
        if len(result.first_mismatches) > shown_before and "first_failure" not in result.extra:
            # Where `benchgen sim --waves-window` centres its dump: the first mismatching output.
            k = result.first_mismatches[shown_before]["index"]
            if k < len(cap.out_times):
                result.extra["first_failure"] = {"time_ns": cap.out_times[k]}
        columns: dict[str, npt.NDArray[Any]] = {k: v[:n] for k, v in inputs.items()}
        columns.update({p: got[p][:n] for p in self.out_ports})
        columns.update({f"model_{p}": expected[p][:n] for p in self.out_ports})
        columns.update({f"ideal_{p}": np.asarray(ideal[p][:n], dtype=np.float64) for p in ideal})
        columns.update({f"error_{p}": np.asarray(errors[p][:n], dtype=np.float64) for p in errors})
        write_csv_rows(name, columns)
        return result

    def latencies(self, cap: Capture) -> npt.NDArray[np.int64]:
        """Clocks from each input handshake to its output handshake."""
        n = min(len(cap.in_cycles), len(cap.out_cycles))
        return np.array(cap.out_cycles[:n], dtype=np.int64) - np.array(cap.in_cycles[:n], dtype=np.int64)

    def finish(self, result: CheckResult) -> None:
        """Record the result and fail the test on any problem (the stream's own among them:
        something that moved while the clock enable was low)."""
        result.problems.extend(self.stream.problems)
        record(result)
        assert not result.problems, "\n".join(result.problems)


@cocotb.test()
async def test_corners(dut: Any) -> None:
    """0, every quadrant and octant boundary and one code either side, the most negative code."""
    tb = CoreBench(dut)
    await tb.start()
    corners = tb.corners()
    count = len(next(iter(corners.values())))
    cap = await tb.stream.run(corners)
    result = tb.check("corners", cap)
    if not cap.complete:
        result.problems.append(f"corner run did not finish: {len(cap.out_cycles)} of {count} out")
    tb.finish(result)


@cocotb.test()
async def test_random_full_rate(dut: Any) -> None:
    """Random angles offered every clock with out_ready high: checks, latency and throughput."""
    tb = CoreBench(dut)
    await tb.start()
    cap = await tb.stream.run(tb.random(tb.rng(1), tb.samples))
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
        result.problems.append(f"stream did not finish: {len(cap.out_cycles)} of {tb.samples} out")
    tb.finish(result)


@cocotb.test()
async def test_gaps_and_stalls(dut: Any) -> None:
    """Random idle gaps at the input crossed with random output stalls: order, count, tags."""
    tb = CoreBench(dut)
    await tb.start()
    rng = tb.rng(2)
    result = CheckResult(test="gaps_and_stalls")
    count = max(1000, tb.samples // 4)
    # Four pause patterns: none/none, idle only, stall only, both, at varied densities; a core
    # with no out_ready (valid-only handshake) cannot be stalled: idle gaps alone then.
    patterns = ((0.0, 0.0), (0.5, 0.0), (0.0, 0.5), (0.3, 0.7))
    if not tb.stream.has_out_ready:
        patterns = ((0.0, 0.0), (0.5, 0.0), (0.1, 0.0), (0.9, 0.0))
    for k, (p_idle, p_stall) in enumerate(patterns):
        idle = rng.random(4099) < p_idle
        stall = rng.random(4093) < p_stall
        cap = await tb.stream.run(tb.random(rng, count // 4), idle=idle, stall=stall, withdraw=True)
        tb.check("gaps_and_stalls", cap, result)
        if not cap.complete:
            result.problems.append(f"pattern {k}: {len(cap.out_cycles)} of {count // 4} samples came out")
        lat = tb.latencies(cap)
        if lat.size and int(lat.min()) < tb.design.timing.latency_cycles:
            result.problems.append(f"pattern {k}: a sample came out after {int(lat.min())} clocks")
    tb.finish(result)


@cocotb.test()
async def test_reset_mid_stream(dut: Any) -> None:
    """A reset with samples in flight drops them; nothing stale comes out; the next stream is exact."""
    tb = CoreBench(dut)
    await tb.start()
    rng = tb.rng(3)
    result = CheckResult(test="reset_mid_stream")
    latency = tb.design.timing.latency_cycles
    # Stop while samples are in flight, with output stalls so the buffer is busy too.
    stop = max(3, latency // 2 + 20)
    stalls = tb.stream.has_out_ready
    cap = await tb.stream.run(tb.random(rng, 200), stall=(rng.random(97) < 0.3) & stalls, stop_after=stop)
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
    # Let a sample wait at the output, then raise the reset between two edges: an asynchronous
    # reset drops out_valid at once, a synchronous one only at the next edge.
    if not await tb.stream.fill(latency + 4):
        result.problems.append(f"no sample reached the output within {latency + 4} clocks of stopping the stream")
    cleared = await tb.stream.reset(cycles=2, mid_clock=True)
    style = "asynchronous" if tb.asynchronous_reset else "synchronous"
    if cleared is not None and cleared != tb.asynchronous_reset:
        seen = "fell before" if cleared else "had not fallen by"
        result.problems.append(
            f"out_valid {seen} the next clock edge after the reset rose; the reset should be {style}"
        )
    stale = await tb.stream.idle_clocks(latency + 4)
    if any(stale):
        result.problems.append(f"out_valid rose after the reset with no input: {stale}")
    cap = await tb.stream.run(tb.random(rng, 500), idle=rng.random(31) < 0.2, stall=(rng.random(37) < 0.2) & stalls)
    tb.check("reset_mid_stream", cap, result)
    if not cap.complete:
        result.problems.append(f"after the reset: {len(cap.out_cycles)} of 500 samples came out")
    tb.finish(result)


def tone_plan(dp: Any) -> tuple[int, int, int, float]:
    """``(freq_word, phase_offset, samples, cycles)`` of the tone test, from ``BENCHGEN_TONE``
    or by default a coherent word with an odd cycle count near a seventh of the record.
    ``cycles`` is the carrier's frequency in cycles per record (an integer for a coherent word;
    otherwise the spectrum is measured through a window, benchgen.spectrum.measure_tone; 0: no
    spectrum)."""
    given = json.loads(os.environ.get(TONE_ENV) or "{}")
    n = int(given.get("samples", DEFAULT_TONE_SAMPLES))
    if "freq_word" in given:
        cycles = float(given.get("cycles", 0))
        return int(given["freq_word"]), int(given.get("phase_offset", 0)), n, int(cycles) if cycles.is_integer() else cycles
    cycles = (n // 7) | 1
    return coherent_word(dp.acc_width, n, cycles), int(given.get("phase_offset", 0)), n, cycles


@cocotb.test()
async def test_tone(dut: Any) -> None:
    """A steady tone from reset, then a change of frequency word and phase offset: every output
    bit against the model; the steady part's spectrum (SFDR, SNR; IEEE Std 1241 coherent
    sampling) is recorded beside the truncation theory's prediction."""
    tb = CoreBench(dut)
    await tb.start()
    dp: Any = tb.dp
    word, offset, n, cycles = tone_plan(dp)
    a = dp.acc_width
    mask = (1 << a) - 1
    dtype: Any = np.int64 if a <= 62 else object
    # The change: another coherent word a quarter turn on, for the samples after the record.
    new_word, new_offset = (word * 3 + (1 << (a - 3))) & mask, (offset + (1 << (a - 2))) & mask
    stim = {
        "in_freq_word": np.array([word] * n + [new_word] * TONE_CHANGE_SAMPLES, dtype=dtype),
        "in_phase_offset": np.array([offset] * n + [new_offset] * TONE_CHANGE_SAMPLES, dtype=dtype),
    }
    cap = await tb.stream.run(tb.with_tags(stim))
    result = tb.check("tone", cap)
    if not cap.complete:
        result.problems.append(f"tone: {len(cap.out_cycles)} of {n + TONE_CHANGE_SAMPLES} samples came out")
    elif cycles:
        cos = cap.outputs("out_cos")[:n].astype(np.float64)
        sin = cap.outputs("out_sin")[:n].astype(np.float64)
        result.extra["tone"] = tone_record(dp, cos + 1j * sin, word, offset, n, cycles)
    tb.finish(result)


def tone_record(dp: Any, tone: npt.NDArray[np.complex128], word: int, offset: int, n: int, cycles: float) -> dict[str, Any]:
    """The tone test's record of a steady record ``cos + j sin``: its spectrum (SFDR, SNR;
    benchgen.spectrum.measure_tone) beside the truncation theory's prediction for the word."""
    m = measure_tone(tone, cycles)
    period = truncation_period(word, dp.acc_width, dp.angle_width)
    return {
        "freq_word": word,
        "phase_offset": offset,
        "samples": n,
        "cycles": cycles,
        "window": m.window,
        "truncation_period": period,
        "sfdr_dbc": round(m.sfdr_db, 4),
        "snr_db": round(m.snr_db, 4),
        "noise_floor_dbc": round(m.noise_floor_dbc, 4) if np.isfinite(m.noise_floor_dbc) else None,
        "spur_bin": m.spur_bin,
        # first-order truncation spur of this word (Nicholas and Samueli 1987; with dither,
        # docs/nco.md); None where none is predicted (an exact word, or one the dither covers)
        "predicted_spur_dbc": _finite(dithered_spur_dbc(period, dp.angle_width, dp.dither_width)) if period > 1 else None,
    }


def _finite(value: float) -> float | None:
    return round(value, 4) if np.isfinite(value) else None
