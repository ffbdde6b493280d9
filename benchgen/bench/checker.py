"""Bench pieces for a user's own cocotb test of a bigger design that holds a generated core.

A :class:`StreamDriver` offers samples on a valid/ready input (the core's, or the user's own
stream in front of it); a :class:`StreamMonitor` records what crosses a valid/ready handshake
and drives nothing; a :class:`CoreChecker`, bound to a project's manifest, watches the core's
own two handshakes wherever the core sits in the design and checks every sample that comes out,
in order: bit for bit against the bit-true model, within the error budget against the ideal,
never sooner than the manifest's latency, tags unchanged, nothing lost, nothing extra. A reset
the core sees drops the samples in flight, as the core does.

The shape follows cocotb's matrix multiplier example: monitors and a model joined in one
checker with ``start()``, ``stop()`` and ``reset()``. docs/api.md shows them at work around a
core inside a user's wrapper module; tests/test_api.py runs that example on both simulators.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path
from typing import Any

import cocotb
import numpy as np
import numpy.typing as npt
from cocotb.triggers import ReadOnly, RisingEdge

from benchgen.bench.scoreboard import CheckResult, compare
from benchgen.design import Design
from benchgen.functions import function_errors, function_of, ideal_outputs
from benchgen.functions import evaluate as evaluate_function
from benchgen.project import MANIFEST_NAME, ProjectError, design_from_manifest, load_manifest

__all__ = ["CoreChecker", "StreamDriver", "StreamMonitor"]

# The checker compares in blocks of this many samples (numpy does the comparing), so a long run
# holds only one block of transfers in memory.
_BLOCK = 4096


def _high(handle: Any) -> bool:
    """Whether a one-bit signal is 1 (X or Z, as before a reset, is not)."""
    try:
        return bool(handle.value)
    except ValueError:
        return False


def _read(handle: Any, signed: bool) -> int:
    """A port's value as an integer; ValueError if it holds X or Z."""
    value = handle.value
    # One-bit ports read as a scalar Logic on some simulators: int() reads both.
    return value.to_signed() if signed else int(value)


class StreamMonitor:
    """Records every transfer on one valid/ready handshake; drives nothing.

    A transfer is a rising clock edge at which ``valid`` and ``ready`` are both high. They and
    the data are read once the design has settled before that edge (in cocotb's read-only
    phase after the edge before), so what is read is what the design takes at the edge, on
    Icarus and on Verilator alike, for ports deep inside the design too. Inputs must therefore
    change only at rising edges (as cocotb drivers, and :class:`StreamDriver`, write them).

    Args:
        clk: The clock handle.
        valid: The handshake's valid handle.
        ready: Its ready handle, or ``None`` for a stream without back-pressure.
        data: The data handles to record, by the name each value is kept under.
        signed: Names (keys of ``data``) read as two's complement.
        name: What the stream is called in messages.

    Attributes:
        values: Per name, the values of the transfers recorded and not yet taken.
        cycles: The clock count of each of those transfers (edges since :meth:`start`).
        problems: Transfers whose data held X or Z, one line each.
    """

    def __init__(
        self,
        clk: Any,
        valid: Any,
        ready: Any | None,
        data: Mapping[str, Any],
        *,
        signed: tuple[str, ...] = (),
        name: str = "stream",
    ) -> None:
        self.clk = clk
        self.valid = valid
        self.ready = ready
        self.data = dict(data)
        self.signed = frozenset(signed)
        self.name = name
        self.values: dict[str, list[int]] = {key: [] for key in self.data}
        self.cycles: list[int] = []
        self.problems: list[str] = []
        self.cycle = 0
        self._task: Any = None

    def __len__(self) -> int:
        return len(self.cycles)

    def start(self) -> None:
        """Start recording (on every rising edge from now on)."""
        if self._task is None:
            self._task = cocotb.start_soon(self._run())

    def stop(self) -> None:
        """Stop recording; what was recorded stays."""
        if self._task is not None:
            self._task.cancel()
            self._task = None

    def clear(self) -> None:
        """Forget the transfers recorded so far."""
        for values in self.values.values():
            values.clear()
        self.cycles.clear()

    def take(self, count: int) -> tuple[list[int], dict[str, list[int]]]:
        """Remove and return the first ``count`` transfers: their cycles and their values."""
        cycles = self.cycles[:count]
        del self.cycles[:count]
        values = {}
        for key, lst in self.values.items():
            values[key] = lst[:count]
            del lst[:count]
        return cycles, values

    async def _run(self) -> None:
        edge, settled = RisingEdge(self.clk), ReadOnly()
        while True:
            await edge
            await settled
            self.sample()

    def sample(self) -> bool:
        """Count one clock and record a transfer if there is one; True if there was.

        Call it in the read-only phase after a rising edge (``await ReadOnly()``), from a
        coroutine of your own, instead of :meth:`start` (a checker watching two streams does
        so, with one wake-up per clock): the values then are the settled ones the design will
        see at the next rising edge, on every simulator.
        """
        self.cycle += 1
        if not (_high(self.valid) and (self.ready is None or _high(self.ready))):
            return False
        row = {}
        for key, handle in self.data.items():
            try:
                row[key] = _read(handle, key in self.signed)
            except ValueError:
                self.problems.append(
                    f"{self.name}: {key} held {handle.value} (not 0/1) when a sample moved at "
                    f"clock {self.cycle}"
                )
                row[key] = 0
        for key, value in row.items():
            self.values[key].append(value)
        self.cycles.append(self.cycle)
        return True


class StreamDriver:
    """Offers samples on a valid/ready input, in order, by the stream rules.

    Once ``valid`` is high with a sample, the sample stays on the data handles until it is
    taken (an edge at which ``ready`` is high); between samples the source may pause.

    Args:
        clk: The clock handle.
        valid: The valid handle to drive.
        ready: The ready handle to watch, or ``None`` for an input that takes a sample at every
            edge where valid is high (a valid-only pipelined core).
        data: The data handles to drive, by the name of the values :meth:`send` takes.
    """

    def __init__(self, clk: Any, valid: Any, ready: Any | None, data: Mapping[str, Any]) -> None:
        self.clk = clk
        self.valid = valid
        self.ready = ready
        self.data = dict(data)
        self.sent = 0
        valid.value = 0

    async def send(
        self,
        samples: Mapping[str, npt.ArrayLike],
        *,
        idle: float = 0.0,
        rng: np.random.Generator | None = None,
    ) -> None:
        """Offer every sample and return once the last one is taken.

        Args:
            samples: Per data name, the values to send (equal lengths).
            idle: Chance that the source pauses for a clock before offering the next sample.
            rng: Random source for the pauses (default: one seeded by cocotb's seed).
        """
        keys = list(self.data)
        if sorted(samples) != sorted(keys):
            raise ValueError(f"send() needs values for {', '.join(keys)}; got {', '.join(map(str, samples))}")
        columns = {key: [int(v) for v in np.asarray(samples[key]).reshape(-1)] for key in keys}
        count = len(columns[keys[0]])
        if any(len(col) != count for col in columns.values()):
            raise ValueError("send() needs the same number of values for every data name")
        rng = rng if rng is not None else np.random.default_rng(cocotb.RANDOM_SEED)
        pauses = rng.random(count) < idle if idle > 0 else np.zeros(count, dtype=bool)
        edge, settled = RisingEdge(self.clk), ReadOnly()
        for k in range(count):
            if pauses[k]:
                self.valid.value = 0
                await edge
            for key in keys:
                self.data[key].value = columns[key][k]
            self.valid.value = 1
            while True:
                # ready as the design settles with this sample offered: what the next edge sees
                # (a ready that depends on valid included).
                await settled
                taken = self.ready is None or bool(self.ready.value)
                await edge
                if taken:
                    break
            self.sent += 1
        self.valid.value = 0


class CoreChecker:
    """Checks a generated core inside a bigger design against its bit-true model and budget.

    It watches the core's own ports (give the handle of the core's instance, e.g.
    ``dut.u_nco``), so it checks the core wherever the design feeds it from and whatever the
    design does with its outputs. Every output sample is paired, in order, with the input the
    core accepted for it and must equal the model's output bit for bit, lie within the error
    budget of the ideal, come out no sooner than the manifest's latency and carry its tag. A
    clock edge at which the core's reset is active drops the samples in flight, as the core does.

    Args:
        core: The handle of the core instance (its ports carry the manifest's names).
        manifest: The project's ``manifest.json``, or the project folder.
        clk: The core's clock (default: the instance's ``clk``).
        reset: The core's reset (default: the instance's reset port, ``rst`` or ``rst_n`` as
            the manifest says); ``None`` and no such port: resets are not watched (call
            :meth:`reset` after one).
        reset_active_high: Whether the reset is active when high (default: as the core's
            reset is, high for ``rst``, low for ``rst_n``).
        enable: The core's clock enable, for a core that has one (default: the instance's
            ``clk_en``): an edge at which it is low is no edge for the core, so nothing moves
            and no clock is counted there.
        ports: Handles to use instead of the instance's, by the core's port name (say, the
            wrapper's own ports where they are wired straight to the core's).

    Raises:
        ProjectError: if the manifest cannot be read or does not match this benchgen, or the
            core is free-running (no input stream to pair its outputs with).
    """

    def __init__(
        self,
        core: Any,
        manifest: str | Path,
        *,
        clk: Any | None = None,
        reset: Any | None = None,
        reset_active_high: bool | None = None,
        enable: Any | None = None,
        ports: Mapping[str, Any] | None = None,
    ) -> None:
        folder = Path(manifest)
        if folder.name == MANIFEST_NAME:
            folder = folder.parent
        self.manifest = load_manifest(folder)
        self.design: Design = design_from_manifest(self.manifest)
        dp = self.design.datapath
        if function_of(dp).free_running(dp):
            raise ProjectError(
                f"{self.manifest['toplevel']} is a free-running core (no input stream for the checker to pair "
                "outputs with); check it against benchgen.nco.run as benchgen.bench.free_running does"
            )
        found = dict(ports or {})

        def handle(name: str) -> Any:
            return found[name] if name in found else getattr(core, name)

        self.clk = clk if clk is not None else handle("clk")
        ports = self.design.ports
        reset_port = next(p for p in ports if p.role == "reset")
        if reset is None:
            reset = handle(reset_port.name)
        self.reset_handle = reset
        self.reset_active_high = not reset_port.active_low if reset_active_high is None else reset_active_high
        enable_port = next((p for p in ports if p.role == "enable"), None)
        if enable is None and enable_port is not None:
            enable = handle(enable_port.name)
        self.enable_handle = enable
        # Each stream's words: the function's data ports and the tag.
        ins = [p for p in ports if p.direction == "in" and p.payload]
        outs = [p for p in ports if p.direction == "out" and p.payload]
        self.in_ports = [p.name for p in ins if p.role == "data"]
        self.out_ports = [p.name for p in outs if p.role == "data"]
        self.tagged = any(p.role == "tag" for p in ins)
        names = {p.name for p in ports}

        def ready(name: str) -> Any | None:
            # a valid-only core has no out_ready (and, pipelined, no in_ready): always ready
            return handle(name) if name in names or name in found else None

        self.inputs = StreamMonitor(
            self.clk, handle("in_valid"), ready("in_ready"), {p.name: handle(p.name) for p in ins},
            signed=tuple(p.name for p in ins if p.signed), name="core input",
        )  # fmt: skip
        self.outputs = StreamMonitor(
            self.clk, handle("out_valid"), ready("out_ready"), {p.name: handle(p.name) for p in outs},
            signed=tuple(p.name for p in outs if p.signed), name="core output",
        )  # fmt: skip
        self.seed = int(cocotb.RANDOM_SEED)
        self.result = CheckResult(test=f"{self.manifest['toplevel']} in its design")
        self.dropped = 0
        self._latency: tuple[int, int] | None = None
        self._task: Any = None

    @property
    def in_flight(self) -> int:
        """Samples the core has accepted that have not come out yet."""
        return len(self.inputs) - len(self.outputs)

    def start(self) -> None:
        """Start watching the core (on every rising edge from now on)."""
        if self._task is None:
            self._task = cocotb.start_soon(self._run())

    def stop(self, *, check: bool = True) -> CheckResult:
        """Stop watching, check what is left and return the result.

        A sample still in flight is a problem (``await drain()`` first), as is a sample that
        came out with none in flight.

        Args:
            check: Raise ``AssertionError`` with every problem, one per line, if there is any.
        """
        if self._task is not None:
            self._task.cancel()
            self._task = None
        self._compare()
        if self.in_flight > 0:
            self.result.problems.append(
                f"{self.in_flight} sample(s) went into the core and had not come out when the "
                "checker stopped (await checker.drain() before stop())"
            )
        self.result.latency_cycles = self._latency
        self.result.extra["dropped_by_reset"] = self.dropped
        if check and self.result.problems:
            raise AssertionError("\n".join(self.result.problems))
        return self.result

    def reset(self) -> None:
        """Forget the samples in flight and start a fresh result (after a reset of the core
        that the checker does not watch, or between parts of a test)."""
        self.dropped += max(0, self.in_flight)
        self.inputs.clear()
        self.outputs.clear()
        self.result = CheckResult(test=self.result.test)
        self._latency = None

    async def drain(self, max_cycles: int | None = None) -> bool:
        """Wait until every sample the core accepted has come out.

        Args:
            max_cycles: Give up after this many clocks (default: the latency plus 1000); the
                samples still in flight are then a problem at :meth:`stop`.

        Returns:
            Whether everything came out.
        """
        limit = max_cycles if max_cycles is not None else self.design.timing.latency_cycles + 1000
        edge = RisingEdge(self.clk)
        for _ in range(limit):
            if self.in_flight <= 0:
                return True
            await edge
        return self.in_flight <= 0

    async def _run(self) -> None:
        edge, settled = RisingEdge(self.clk), ReadOnly()
        while True:
            await edge
            await settled  # the values the core takes at the next edge (StreamMonitor.sample)
            if self.reset_handle is not None and self._in_reset():
                self.inputs.cycle += 1
                self.outputs.cycle += 1
                self._compare()  # what came out before the reset is judged
                self.dropped += max(0, self.in_flight)
                self.inputs.clear()
                self.outputs.clear()
                continue
            if self.enable_handle is not None and not _high(self.enable_handle):
                continue  # the clock enable is low at the coming edge: no edge for the core
            self.inputs.sample()
            if self.outputs.sample() and len(self.outputs) > len(self.inputs):
                self.result.problems.append(
                    f"a sample came out of the core at clock {self.outputs.cycle} with none in flight"
                )
                self.outputs.take(len(self.outputs) - len(self.inputs))
            if len(self.outputs) >= _BLOCK:
                self._compare()

    def _in_reset(self) -> bool:
        """Whether the core's reset is active (an X or Z reset, before the design drives it,
        counts as active: nothing the core holds then is a sample)."""
        try:
            return bool(self.reset_handle.value) == self.reset_active_high
        except ValueError:
            return True

    def _array(self, values: list[int]) -> npt.NDArray[Any]:
        wide = values and max(abs(v) for v in values) >= 1 << 62
        return np.array(values, dtype=object if wide else np.int64)

    def _compare(self) -> None:
        """Judge every output recorded so far against the input it came from."""
        for monitor in (self.inputs, self.outputs):
            self.result.problems.extend(monitor.problems)
            monitor.problems.clear()
        count = len(self.outputs)
        if count == 0:
            return
        in_cycles, in_values = self.inputs.take(count)
        out_cycles, out_values = self.outputs.take(count)
        dp = self.design.datapath
        inputs = {name: self._array(in_values[name]) for name in self.in_ports}
        got = {name: self._array(out_values[name]) for name in self.out_ports}
        expected = evaluate_function(dp, inputs)
        ideal = ideal_outputs(dp, inputs)
        errors = function_errors(dp, inputs, got, ideal)
        shown = dict(inputs)
        if self.tagged:
            got["out_tag"] = self._array(out_values["out_tag"])
            expected = {**expected, "out_tag": self._array(in_values["in_tag"])}
            shown["in_tag"] = expected["out_tag"]
        compare(
            self.result, inputs=shown, got=got, expected=expected, errors=errors,
            budget_lsb=self.design.spec.max_error_lsb, seed=self.seed,
        )  # fmt: skip
        latency = np.array(out_cycles, dtype=np.int64) - np.array(in_cycles, dtype=np.int64)
        low, high = int(latency.min()), int(latency.max())
        if self._latency is not None:
            low, high = min(low, self._latency[0]), max(high, self._latency[1])
        self._latency = (low, high)
        least = self.design.timing.latency_cycles
        if int(latency.min()) < least:
            k = int(np.argmin(latency))
            self.result.problems.append(
                f"a sample came out {int(latency[k])} clocks after it went in (at clock {out_cycles[k]}); "
                f"the manifest's latency is {least}"
            )
