"""Stream driver, monitor and in-order scoreboard for cores with a valid/ready handshake.

One coroutine per clock both drives and monitors (a single Python wake-up per clock keeps the
per-clock loop as cheap as cocotb allows). At each rising edge it reads the handshake signals as
the core saw them at that edge, records what moved, and sets the next inputs. Inputs follow the
stream rules: once ``in_valid`` is high with a sample, the sample stays until it is taken.

A core with a clock enable (``clk_en``) gets it at random from a seeded pattern. An edge with the
enable low is no edge for the core: nothing crosses a handshake there, clocks are counted in
enabled edges only (so latency and throughput read as without the enable), and the bench puts
other data, a random ``in_valid`` and a random ``out_ready`` on the inputs for it, then checks
that ``in_ready``, ``out_valid`` and every output held their values through it. A sample taken
at such an edge, or one given out, would break the order and count checks.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import numpy.typing as npt
from cocotb.triggers import FallingEdge, RisingEdge, Timer
from cocotb.utils import get_sim_time

__all__ = ["Capture", "StreamBench"]


@dataclass
class Capture:
    """What crossed the two handshakes during one run.

    Attributes:
        in_cycles: Clock count of each accepted input.
        in_values: Per input port name, the values accepted, in order.
        out_cycles: Clock count of each output taken.
        out_times: Simulation time (ns) of each output taken: where a waveform window is
            centred (:mod:`benchgen.waves`).
        out_values: Per output port name, the signed (or, for tags, unsigned) values taken.
        cycles: Clocks the run lasted.
        complete: Whether every input came back out.
    """

    in_cycles: list[int] = field(default_factory=list)
    in_values: dict[str, list[int]] = field(default_factory=dict)
    out_cycles: list[int] = field(default_factory=list)
    out_times: list[int] = field(default_factory=list)
    out_values: dict[str, list[int]] = field(default_factory=dict)
    cycles: int = 0
    complete: bool = False

    def outputs(self, name: str) -> npt.NDArray[Any]:
        """Values of one output port as an array (object dtype beyond 62 bits)."""
        vals = self.out_values.get(name, [])
        if vals and max(abs(v) for v in vals) >= 1 << 62:
            return np.array(vals, dtype=object)
        return np.array(vals, dtype=np.int64)


class StreamBench:
    """Drive a valid/ready core with samples and collect what comes out.

    Args:
        dut: The cocotb handle of the core.
        inputs: Input data port names (besides the handshake), e.g. ``("in_angle", "in_tag")``.
        outputs: Output data port names; ``signed`` lists those read as two's complement.
        signed: Output ports read as signed numbers.
        reset: The reset port's name.
        reset_active_low: Whether the reset acts while low.
        enable: The clock enable port's name, or empty for a core without one.
        enable_seed: Seed of the enable's random pattern and of what is driven while it is low.
        enable_low: Share of the clocks with the enable low.

    Attributes:
        problems: What moved at an edge with the enable low, one line each (at most 10).
    """

    def __init__(
        self,
        dut: Any,
        *,
        inputs: tuple[str, ...],
        outputs: tuple[str, ...],
        signed: tuple[str, ...] = (),
        reset: str = "rst",
        reset_active_low: bool = False,
        enable: str = "",
        enable_seed: int | list[int] = 0,
        enable_low: float = 0.3,
        in_ready: bool = True,
        out_ready: bool = True,
    ) -> None:
        self.dut = dut
        # A valid-only core has no out_ready (the sink takes every sample) and, pipelined, no
        # in_ready (it takes a sample at every edge where in_valid is high).
        self.has_in_ready = in_ready
        self.has_out_ready = out_ready
        self.inputs = inputs
        self.outputs = outputs
        self.signed = frozenset(signed)
        self.clk = dut.clk
        self.cycle = 0
        self.reset_handle = getattr(dut, reset)
        self.reset_level = 0 if reset_active_low else 1
        self.enable_handle = getattr(dut, enable) if enable else None
        self.rng = np.random.default_rng(enable_seed)
        # Per edge, whether the enable is high; a prime length, so it does not line up with the
        # tests' idle and stall patterns.
        self.enable_pattern = [bool(v) for v in self.rng.random(4091) >= enable_low] if enable else [True]
        self.edges = 0
        self.problems: list[str] = []
        # Resets so far: a core with state across samples (an NCO's accumulator) starts again
        # from its reset values after each.
        self.resets = 0

    def _enabled_next(self) -> bool:
        """Drive the enable for the next edge from the pattern; whether it is high."""
        if self.enable_handle is None:
            return True
        on = self.enable_pattern[self.edges % len(self.enable_pattern)]
        self.enable_handle.value = int(on)
        return on

    def _freeze_problem(self, text: str) -> None:
        if len(self.problems) < 10:
            self.problems.append(text)

    async def reset(self, cycles: int = 3, *, mid_clock: bool = False) -> bool | None:
        """Hold the reset active for some clocks with the inputs idle and the consumer ready.

        The clock enable goes on at random meanwhile: the reset acts whatever it is.

        Args:
            cycles: Rising edges the reset is held active for.
            mid_clock: Raise the reset between two rising edges (at a falling edge) instead of
                just after one, and read ``out_valid`` 1 ns later.

        Returns:
            With ``mid_clock``: whether ``out_valid`` was already low 1 ns after the reset rose,
            before any rising edge (an asynchronous reset clears it at once, a synchronous one
            only at the next edge); ``None`` if it was low before the reset.
        """
        dut = self.dut
        dut.in_valid.value = 0
        if self.has_out_ready:
            dut.out_ready.value = 1
        self.resets += 1
        cleared: bool | None = None
        if mid_clock:
            await FallingEdge(self.clk)
            was_valid = bool(dut.out_valid.value)
            self.reset_handle.value = self.reset_level
            await Timer(1, unit="ns")
            cleared = None if not was_valid else not bool(dut.out_valid.value)
        else:
            self.reset_handle.value = self.reset_level
        for _ in range(cycles):
            self._enabled_next()
            await RisingEdge(self.clk)
            self.edges += 1
            self.cycle += 1
        self.reset_handle.value = 1 - self.reset_level
        if self.enable_handle is not None:
            self.enable_handle.value = 1
        return cleared

    async def run(
        self,
        stimulus: dict[str, npt.NDArray[Any]],
        *,
        idle: npt.NDArray[np.bool_] | None = None,
        stall: npt.NDArray[np.bool_] | None = None,
        max_cycles: int | None = None,
        stop_after: int | None = None,
        withdraw: bool = False,
    ) -> Capture:
        """Send every sample of ``stimulus`` and collect the outputs.

        Args:
            stimulus: Per input port, the values to send (equal lengths).
            idle: Per clock, whether the source offers nothing (only when no sample is pending);
                cycled if shorter than the run.
            stall: Per clock, whether the consumer holds ``out_ready`` low; cycled likewise.
            max_cycles: Give up after this many clocks (the capture says incomplete).
            stop_after: Stop after this many clocks even if samples are still in flight
                (for a reset in mid-stream).
            withdraw: On an idle clock, take back a sample the core has not taken yet (drop
                ``in_valid`` and put other data on the inputs), offering it again later: the
                core must take a sample only at an edge where ``in_valid`` is high
                (docs/number_formats.md, the handshake contract).
        """
        dut = self.dut
        names = list(self.inputs)
        count = len(stimulus[names[0]])
        values = {n: [int(v) for v in stimulus[n]] for n in names}
        handles_in = [getattr(dut, n) for n in names]
        handles_out = [getattr(dut, n) for n in self.outputs]
        signed_out = [n in self.signed for n in self.outputs]
        in_valid = dut.in_valid
        in_ready = dut.in_ready if self.has_in_ready else None
        out_valid = dut.out_valid
        idle_pat = [bool(v) for v in idle] if idle is not None and len(idle) else [False]
        stall_pat = [bool(v) for v in stall] if stall is not None and len(stall) else [False]
        if not self.has_out_ready and any(stall_pat):
            raise ValueError("the core has no out_ready (valid-only handshake): it cannot be stalled")

        class _AlwaysReady:
            value = 1

        out_ready = dut.out_ready if self.has_out_ready else _AlwaysReady()
        limit = max_cycles if max_cycles is not None else 100 * (count + 64)

        cap = Capture(in_values={n: [] for n in names}, out_values={n: [] for n in self.outputs})
        out_lists = [cap.out_values[n] for n in self.outputs]
        sent = 0
        got = 0
        offering = False
        ready_driven = True
        clocks = 0

        def offer_next() -> bool:
            if sent >= count or idle_pat[clocks % len(idle_pat)]:
                in_valid.value = 0
                return False
            for h, n in zip(handles_in, names, strict=True):
                h.value = values[n][sent]
            in_valid.value = 1
            return True

        def snapshot() -> tuple[int, ...]:
            # What must hold through an edge with the enable low (X or Z read as -1).
            values = []
            for h in (*((in_ready,) if in_ready is not None else ()), out_valid, *handles_out):
                try:
                    values.append(int(h.value))
                except ValueError:
                    values.append(-1)
            return tuple(values)

        def drive_other() -> None:
            # For an edge the core must ignore: another sample's data, random valid and ready.
            junk = self.rng.integers(0, 2, size=2)
            for h, n in zip(handles_in, names, strict=True):
                h.value = values[n][(sent + count // 2) % count]
            in_valid.value = int(junk[0])
            out_ready.value = int(junk[1])

        def drive_real() -> None:
            if offering:
                for h, n in zip(handles_in, names, strict=True):
                    h.value = values[n][sent]
            in_valid.value = int(offering)
            out_ready.value = int(ready_driven)

        offering = offer_next()
        ready_driven = not stall_pat[0]
        out_ready.value = int(ready_driven)
        enabled = self._enabled_next()
        if not enabled:
            drive_other()
        held: tuple[int, ...] | None = None
        edge = RisingEdge(self.clk)
        while got < count:
            await edge
            self.edges += 1
            if held is not None:
                now = snapshot()
                if now != held:
                    self._freeze_problem(
                        f"clk_en low at edge {self.edges - 1} (after clock {self.cycle}), yet in_ready, "
                        f"out_valid or an output changed: {held} -> {now}"
                    )
                held = None
            if not enabled:
                # No edge for the core: nothing moved; the inputs are put back after it.
                held = snapshot()
                enabled = self._enabled_next()
                if enabled:
                    drive_real()
                else:
                    drive_other()
                continue
            self.cycle += 1
            clocks += 1
            # The handshake the core saw at this edge.
            if offering and (in_ready is None or in_ready.value):
                cap.in_cycles.append(self.cycle)
                for n in names:
                    cap.in_values[n].append(values[n][sent])
                sent += 1
                offering = False
            if ready_driven and out_valid.value:
                cap.out_cycles.append(self.cycle)
                cap.out_times.append(int(get_sim_time("ns")))
                for h, is_signed, lst in zip(handles_out, signed_out, out_lists, strict=True):
                    v = h.value
                    # One-bit ports read as a scalar Logic on some simulators: int() reads both.
                    lst.append(v.to_signed() if is_signed else int(v))
                got += 1
            if clocks >= limit or (stop_after is not None and clocks >= stop_after):
                break
            if offering and withdraw and idle_pat[clocks % len(idle_pat)]:
                in_valid.value = 0
                for h, n in zip(handles_in, names, strict=True):
                    h.value = values[n][(sent + count // 2) % count]  # another sample's data
                offering = False
            if not offering:
                offering = offer_next()
            ready_driven = not stall_pat[clocks % len(stall_pat)]
            out_ready.value = int(ready_driven)
            enabled = self._enabled_next()
            if not enabled:
                drive_other()
        in_valid.value = 0
        if self.enable_handle is not None:
            self.enable_handle.value = 1
        cap.cycles = clocks
        cap.complete = got == count and sent == count
        return cap

    async def fill(self, max_cycles: int) -> bool:
        """Hold the consumer off (and the enable high) until ``out_valid`` is high, so a sample
        waits at the output; whether one did within ``max_cycles`` clocks."""
        self.dut.in_valid.value = 0
        if self.has_out_ready:
            self.dut.out_ready.value = 0
        if self.enable_handle is not None:
            self.enable_handle.value = 1
        for _ in range(max_cycles):
            await RisingEdge(self.clk)
            self.edges += 1
            self.cycle += 1
            if self.dut.out_valid.value:
                return True
        return False

    async def idle_clocks(self, cycles: int) -> list[int]:
        """Let the core run with no input and the consumer ready; return out_valid per clock."""
        seen = []
        self.dut.in_valid.value = 0
        if self.has_out_ready:
            self.dut.out_ready.value = 1
        for _ in range(cycles):
            await RisingEdge(self.clk)
            self.edges += 1
            self.cycle += 1
            seen.append(int(self.dut.out_valid.value))
        return seen
