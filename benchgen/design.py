"""From a validated spec to a complete design: sizing, data path, timing and proven accuracy.

Sizing to a target: for ``iterations = "auto"`` and/or ``guard_bits = "auto"`` the sizer picks the
smallest number of iterations for which some guard-bit count up to 16 meets ``max_error_lsb``, then
the smallest guard-bit count for it. Each candidate is measured on the bit-true model against the
ideal: exhaustively when the angle space has at most 2**20 codes, otherwise on 10**6 seeded random
angles plus the corners. Explicit sizes are measured the same way and refused when they miss the
target, so no config yields a core silently worse than it asked for.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import MIN_Z_ONLY_ITERATIONS, Datapath, Timing, rotation_z_ranges, signed_width
from benchgen.config import MAX_ITERATIONS, MAX_PORT_WIDTH, CoreSpec
from benchgen.spec import DEFAULT_HDL, DEFAULT_VLNV_LIBRARY, DEFAULT_VLNV_VENDOR, RESET_POLARITIES, RESET_STYLES
from benchgen.errors import ConfigError
from benchgen.functions import (
    ANGLE_GUARD_FIELD,
    CorePort,
    EXHAUSTIVE_LIMIT_BITS,
    EXHAUSTIVE_SLOW_MODEL_BITS,
    RANDOM_SIZING_SAMPLES,
    SIZING_SEED,
    WIDE_SIZING_SAMPLES,
    Inputs,
    apply_gain,
    clocking_of,
    core_ports,
    core_timing,
    function_of,
    function_named,
    corner_inputs,
    directed_inputs,
    enumerate_inputs,
    function_errors,
    evaluate,
    ideal_outputs,
    input_ports,
    input_space_bits,
    table_head,
    int64_model,
    join_inputs,
    final_datapath,
    make_datapath,
    measure,
    output_ports,
    random_inputs,
    sizes_angle_guard,
)
from benchgen.model import to_signed
from benchgen.reference import ErrorStats

__all__ = [
    "EXHAUSTIVE_LIMIT_BITS",
    "MAX_AUTO_GUARD_BITS",
    "MAX_PORT_WIDTH",
    "Design",
    "Proof",
    "build_design",
    "clear_sizing_cache",
    "sizing_evidence",
]

MAX_AUTO_GUARD_BITS = 16


@dataclass(frozen=True, kw_only=True)
class Design:
    """A fully derived core.

    Attributes:
        spec: The validated configuration.
        datapath: Arithmetic: widths, constants, rounding.
        timing: Stage layout, latency and throughput.
        accuracy: Error of the bit-true model against the ideal over the proof's inputs.
        proof: How that accuracy was established (every input, or sampled and directed).
        auto_fields: Names of the fields the sizer chose.
    """

    spec: CoreSpec
    datapath: Datapath
    timing: Timing
    accuracy: ErrorStats
    proof: Proof
    auto_fields: tuple[str, ...]

    @property
    def accuracy_exhaustive(self) -> bool:
        """Whether the accuracy covers every input code."""
        return self.proof.exhaustive

    @property
    def ports(self) -> tuple[CorePort, ...]:
        """Every port of the core, in declaration order (:func:`benchgen.functions.core_ports`)."""
        return core_ports(
            self.datapath, self.spec.tag_width, clocking_of(self.spec), self.spec.handshake, self.spec.architecture
        )


# Inputs per chunk of an exhaustive check: a few tens of MB of intermediates.
CHECK_CHUNK = 1 << 18
# The search set: corners, directed worst cases and this many of the checked inputs; every
# failure a full check finds is added to it.
SEARCH_SAMPLES = 32768
SEARCH_SAMPLES_WIDE = 256
# Inputs kept from each failing full check (the worst ones) to reject later candidates cheaply.
COUNTEREXAMPLES = 64

Progress = Callable[[str], None]


@dataclass(frozen=True)
class Proof:
    """How the accuracy of a design was established.

    Attributes:
        method: ``exhaustive`` (every input code) or ``sampled`` (seeded random inputs plus the
            corners and the directed worst cases).
        inputs: How many inputs the worst error was taken over.
        random: Of those, seeded random inputs (0 when exhaustive).
        directed: Of those, corners and directed worst-case inputs (0 when exhaustive).
    """

    method: str
    inputs: int
    random: int = 0
    directed: int = 0

    @property
    def exhaustive(self) -> bool:
        """Whether every input code was checked."""
        return self.method == "exhaustive"

    def describe(self) -> str:
        """One phrase for reports: over what the worst error was measured."""
        if self.exhaustive:
            return f"every one of the {self.inputs} input codes"
        return (
            f"{self.inputs} inputs: {self.random} seeded random, {self.directed} corners and "
            "directed worst cases (the input space is too large to enumerate)"
        )

    def as_dict(self) -> dict[str, Any]:
        """JSON-ready form."""
        return {"method": self.method, "inputs": self.inputs, "random": self.random, "directed": self.directed}


class _Accumulator:
    """Running error statistics over chunks: counts, sum, sum of squares, the worst."""

    def __init__(self) -> None:
        self.samples = 0
        self.judged = 0
        self.total = 0.0
        self.squares = 0.0
        self.worst = 0.0

    def add(self, samples: int, errs: list[npt.NDArray[np.float64]]) -> None:
        """Count ``samples`` inputs and their errors (NaN: not judged, left out)."""
        self.samples += samples
        for raw in errs:
            e = raw[~np.isnan(raw)]
            if e.size:
                self.judged += e.size
                self.total += float(np.sum(e))
                self.squares += float(np.sum(e * e))
                self.worst = max(self.worst, float(np.max(np.abs(e))))

    def stats(self) -> ErrorStats:
        if not self.judged:
            return ErrorStats(self.samples, 0.0, 0.0, 0.0)
        return ErrorStats(
            self.samples, self.worst, float(np.sqrt(self.squares / self.judged)), self.total / self.judged
        )


def _take(inputs: Inputs, index: npt.NDArray[np.int64]) -> Inputs:
    return {k: np.asarray(v)[index] for k, v in inputs.items()}


class _Prover:
    """Checks candidate sizes of one arithmetic against its error budget.

    A candidate is first tried on a small search set; a failure there is a real failure (its
    inputs are real inputs), so the candidate is rejected at once. A candidate that passes is
    checked on the full set: every input of the space when it has at most 2**24 codes and the
    model runs on int64 (in chunks, stopping at the first chunk over budget), else the sampled
    set (seeded random inputs, corners, directed worst cases). The worst inputs of a failed full
    check join the search set, so the sizer never picks a size that check has not passed.
    """

    def __init__(self, spec: CoreSpec, progress: Progress | None) -> None:
        self.progress = progress
        probe = make_datapath(spec, MIN_Z_ONLY_ITERATIONS, MAX_AUTO_GUARD_BITS)
        try:
            cheapest: Datapath | None = make_datapath(spec, MIN_Z_ONLY_ITERATIONS, 0)
        except ConfigError:
            cheapest = None  # too narrow for three iterations without guard bits
        self.probe = probe
        bits = input_space_bits(probe)
        fast = int64_model(cheapest if cheapest is not None else probe)
        self.exhaustive = bits <= EXHAUSTIVE_SLOW_MODEL_BITS or (bits <= EXHAUSTIVE_LIMIT_BITS and fast)
        self.space = 1 << bits if self.exhaustive else 0
        fixed = join_inputs(corner_inputs(probe), directed_inputs(probe, seed=SIZING_SEED))
        self.fixed_count = len(next(iter(fixed.values())))
        limit = SEARCH_SAMPLES if fast else SEARCH_SAMPLES_WIDE
        if self.exhaustive:
            self.full: Inputs | None = None
            self.full_ideal: dict[str, npt.NDArray[Any]] | None = None
            step = max(1, self.space // limit)
            # A stride through the space that is not a power of two visits every port's codes.
            stride = step + 1 if step > 1 and step % 2 == 0 else step
            if self.space <= limit:
                sample = enumerate_inputs(probe, 0, self.space)
            else:
                sample = _strided(probe, self.space, stride, limit)
            self.random_count = 0
        else:
            rng = np.random.default_rng(SIZING_SEED)
            count = RANDOM_SIZING_SAMPLES if fast else WIDE_SIZING_SAMPLES
            rand = random_inputs(probe, rng, count)
            self.full = join_inputs(fixed, rand)
            # The gain-free ideal depends on the inputs only; a raw core's 1/K_n is applied
            # per candidate.
            self.full_ideal = ideal_outputs(probe, self.full, with_gain=False)
            self.random_count = count
            sample = _take(rand, np.arange(min(limit, count)))
        self.search = join_inputs(fixed, sample)
        self.search_ideal = ideal_outputs(probe, self.search, with_gain=False)

    def proof(self) -> Proof:
        """What a passing full check covers."""
        if self.exhaustive:
            return Proof("exhaustive", self.space)
        return Proof("sampled", self.fixed_count + self.random_count, self.random_count, self.fixed_count)

    def _say(self, text: str) -> None:
        if self.progress is not None:
            self.progress(text)

    def rejects(self, dp: Datapath, budget: float) -> bool:
        """Whether the search set already shows the candidate over budget."""
        return measure(dp, self.search, self.search_ideal).max_error_lsb >= budget

    def learn(self, inputs: Inputs) -> None:
        """Add failing inputs to the search set."""
        self.search = join_inputs(self.search, inputs)
        self.search_ideal = ideal_outputs(self.probe, self.search, with_gain=False)

    def worst(self, dp: Datapath) -> float:
        """The candidate's worst error over the full check (no early stop)."""
        stats = self.check(dp, float("inf"))
        assert stats is not None
        return stats.max_error_lsb

    def check(self, dp: Datapath, budget: float) -> ErrorStats | None:
        """The full check: the candidate's statistics if it meets the budget, else None (and
        its worst inputs are learned)."""
        label = f"{dp.iterations} iterations, {dp.guard_bits} guard bits"
        if not self.exhaustive:
            assert self.full is not None
            self._say(f"checking {label} on {len(next(iter(self.full.values())))} inputs")
            errs = _judged(dp, self.full, apply_gain(dp, self.full_ideal) if self.full_ideal else None)
            acc = _Accumulator()
            acc.add(len(next(iter(self.full.values()))), list(errs.values()))
            worst = _worst_rows(errs)
            if acc.worst >= budget:
                self.learn(_take(self.full, worst))
                return None
            return acc.stats()
        acc = _Accumulator()
        for start in range(0, self.space, CHECK_CHUNK):
            stop = min(self.space, start + CHECK_CHUNK)
            if start and start % (CHECK_CHUNK * 16) == 0:
                self._say(f"checking {label} on every input: {100 * start // self.space}%")
            inputs = enumerate_inputs(dp, start, stop)
            errs = _judged(dp, inputs, None)
            acc.add(stop - start, list(errs.values()))
            if acc.worst >= budget:
                self.learn(_take(inputs, _worst_rows(errs)))
                return None
        return acc.stats()


def _strided(dp: Datapath, space: int, stride: int, count: int) -> Inputs:
    index = (np.arange(count, dtype=np.int64) * stride) % space
    ports = input_ports(dp)
    shift = sum(p.width for p in ports)
    out: Inputs = {}
    for p in ports:
        shift -= p.width
        codes = (index >> shift) & ((1 << p.width) - 1)
        out[p.name] = to_signed(codes, p.width) if p.signed else codes
    return out


def _judged(dp: Datapath, inputs: Inputs, ideal: dict[str, npt.NDArray[Any]] | None) -> dict[str, npt.NDArray[np.float64]]:
    """Per output, the errors in LSBs; NaN where a sample is not judged."""
    outputs = evaluate(dp, inputs)
    return function_errors(dp, inputs, outputs, ideal)


def _worst_rows(errs: dict[str, npt.NDArray[np.float64]]) -> npt.NDArray[np.int64]:
    """Indices of the inputs with the largest errors over every output."""
    worst = np.max(np.nan_to_num(np.abs(np.stack(list(errs.values()))), nan=0.0), axis=0)
    k = min(COUNTEREXAMPLES, worst.size)
    return np.argpartition(worst, worst.size - k)[worst.size - k :].astype(np.int64)


def _prover(spec: CoreSpec, progress: Progress | None) -> _Prover:
    # Only the fields that shape the ports and the judging matter; cores that differ in the
    # rest (budget, rounding, sizes) share one prover, and so the inputs it has learned.
    key = (spec.function, spec.angle_width, spec.data_width, spec.angle_unit, spec.gain, spec.prenormalise)
    found = _PROVERS.pop(key, None)
    if found is None:
        found = _Prover(spec, progress)
    _PROVERS[key] = found  # most recently used last
    while len(_PROVERS) > _PROVERS_KEPT:
        del _PROVERS[next(iter(_PROVERS))]  # a sampled prover holds ~50 MB of inputs and ideals
    found.progress = progress
    return found


_PROVERS: dict[tuple[Any, ...], _Prover] = {}
_PROVERS_KEPT = 8


def clear_sizing_cache() -> None:
    """Forget every sizing result and search set (benchmarks time sizing from scratch)."""
    _PROVERS.clear()
    _SIZES.clear()


def iteration_bits(dp: Datapath) -> int:
    """Bits of one iteration's adders at full width: x and y (xy_width each) and z (z_width),
    less what the function does not carry (exp has no y, a result in x alone needs no z, linear
    coordinates hold x)."""
    has_y, has_z = function_of(dp).carries(dp)
    per = (0 if dp.coordinates == "linear" else dp.xy_width) + (dp.xy_width if has_y else 0)
    return per + (dp.z_width if has_z else 0)


def adder_bits(dp: Datapath) -> int:
    """The bits of a pipeline's adders, every iteration's summed: the sizing's cost of a
    pipelined core.

    z counts at the width each iteration forms where the pipeline narrows it (a rotation whose
    function states z's start range: :func:`benchgen.algorithm.rotation_z_ranges`), else at
    full width. The adders are most of a core's logic cells and their carry chains set its
    clock, so fewer adder bits is a smaller core and a faster one. (The spare sign bit of z
    that splits the directions' fanout, :meth:`benchgen.hardware._Core.split_directions`, is
    left out: about one bit per iteration, it could only move a choice between sizes whose
    counts differ by a bit or two.)
    """
    fn = function_of(dp)
    has_y, has_z = fn.carries(dp)
    xy = (0 if dp.coordinates == "linear" else dp.xy_width) + (dp.xy_width if has_y else 0)
    total = dp.iterations * xy
    if has_z:
        start = fn.z_start_range(dp) if dp.mode == "rotation" else None
        if start is None:
            total += dp.iterations * dp.z_width
        else:
            ranges = rotation_z_ranges(dp, start)[1 : dp.iterations]  # the last forms no z
            total += sum(min(dp.z_width, signed_width(*r)) for r in ranges)
    return total


def sizing_cost(spec: CoreSpec, dp: Datapath) -> tuple[int, ...]:
    """What sizing minimises (compared as a tuple; ties to fewer iterations, the shorter latency).

    Pipelined: the adder bits (:func:`adder_bits`). Iterative: first the clocks per sample
    (throughput), then the adder bits of one clock's iterations (area), since the same adders
    serve every clock.
    """
    if spec.architecture == "pipelined":
        return adder_bits(dp), dp.iterations
    looped = dp.iterations - table_head(dp, "iterative")  # the head's iterations come from a table
    per_cycle = min(spec.iterations_per_cycle or 1, looped)
    cycles = -(-looped // per_cycle)
    return cycles, per_cycle * iteration_bits(dp), dp.iterations


def _size(spec: CoreSpec, progress: Progress | None = None) -> _Sized:
    """The (iterations, guard bits, angle guard bits) of least :func:`sizing_cost` that meet the
    target over the full check (fields fixed by the spec stay). The angle guard bits (z's, where
    the function sizes them apart: :func:`benchgen.functions.sizes_angle_guard`) are ``None``
    where z follows the guard bits.

    Raises:
        ConfigError: if no size meets the target, with a fix (``suggestion``) that is accepted:
            either tried here, or a budget above an error measured inside the search space.
    """
    cached = _SIZES.get(spec)
    if cached is not None:
        return cached
    prover = _prover(spec, progress)
    budget = spec.max_error_lsb
    g_top = spec.guard_bits if spec.guard_bits is not None else MAX_AUTO_GUARD_BITS
    g_range = [spec.guard_bits] if spec.guard_bits is not None else list(range(MAX_AUTO_GUARD_BITS + 1))
    # z's guard bits: searched on their own where the function sizes them apart and the spec
    # leaves them auto; else one value (None: the spec's, or the guard bits).
    zg_range: list[int | None] = (
        list(range(MAX_AUTO_GUARD_BITS + 1))
        if sizes_angle_guard(spec) and spec.angle_guard_bits is None
        else [None]
    )

    def candidate(n: int, g: int, zg: int | None) -> Datapath | None:
        try:
            return make_datapath(spec, n, g, zg)
        except ConfigError:
            return None  # more iterations than this width holds

    def passes_search(n: int) -> bool:
        # z at its most guard bits: the fewest iterations any z width allows
        return any(
            dp is not None and not prover.rejects(dp, budget)
            for dp in (candidate(n, g, zg_range[-1]) for g in g_range)
        )

    if spec.iterations is not None:
        # Iterations that no allowed guard-bit count can hold are refused with the width
        # message, and a count the width does hold as the fix.
        try:
            make_datapath(spec, spec.iterations, g_top)
        except ConfigError as exc:
            raise _fit_iterations(spec, g_top, exc) from None
        n_range = [spec.iterations]
    else:
        # The fewest iterations the search set allows (a lower bound: below it every guard-bit
        # count fails on real inputs). Start near the answer, about data_width iterations, at a
        # count the data path holds with the most guard bits allowed (a linear z of few
        # fraction bits holds fewer), and walk down while the search set is met, else up.
        n = max(1, min(spec.data_width - 2, _largest_n(spec, g_top) or 1))
        if passes_search(n):
            while n > 1 and passes_search(n - 1):
                n -= 1
        else:
            while n < MAX_ITERATIONS and not passes_search(n):
                n += 1
        n_range = list(range(n, MAX_ITERATIONS + 1))
    # cost, size, its check's statistics and what that check covered (inputs learned from later
    # candidates' failures were not part of it)
    best: tuple[tuple[int, ...], _Sized] | None = None
    for n in n_range:
        # The cost grows with iterations, guard bits and z's guard bits: past the first size
        # that passes, a count (and at a count, a guard-bit count) is worth trying only while
        # its cheapest data path (the fewest bits that fit) costs less than the best so far.
        cheapest = next((dp for dp in (candidate(n, g, zg_range[0]) for g in g_range) if dp is not None), None)
        if best is not None and (cheapest is None or sizing_cost(spec, cheapest) >= best[0]):
            break
        for g in g_range:
            floor = candidate(n, g, zg_range[0])
            if floor is None:
                continue
            if best is not None and sizing_cost(spec, floor) >= best[0]:
                break  # more guard bits only cost more
            for zg in zg_range:
                dp = candidate(n, g, zg)
                if dp is None:
                    continue
                if best is not None and sizing_cost(spec, dp) >= best[0]:
                    break  # more z bits only cost more
                if prover.rejects(dp, budget):
                    continue
                stats = prover.check(dp, budget)
                if stats is not None:
                    best = (sizing_cost(spec, dp), _Sized(n, g, zg, stats, prover.proof()))
                    break  # the fewest z guard bits at this (n, g)
    if best is None:
        raise _missed_budget(spec, prover)
    _SIZES[spec] = best[1]
    return best[1]


@dataclass(frozen=True)
class _Sized:
    """What sizing picked: the size and its check."""

    iterations: int
    guard_bits: int
    angle_guard_bits: int | None
    stats: ErrorStats
    proof: Proof


_SIZES: dict[CoreSpec, _Sized] = {}


def _feasible(spec: CoreSpec, n: int, g: int) -> bool:
    try:
        make_datapath(spec, n, g)
    except ConfigError:
        return False
    return True


def _largest_n(spec: CoreSpec, g: int) -> int | None:
    """The most iterations a data path with ``g`` guard bits holds (``None``: no count fits)."""
    return next((n for n in range(MAX_ITERATIONS, 0, -1) if _feasible(spec, n, g)), None)


def _budget_above(error: float) -> float | None:
    """The smallest budget with two decimals that ``error`` stays strictly below, if allowed."""
    if not np.isfinite(error) or error >= 1e6:
        return None  # past the largest budget allowed (and where 0.01 steps vanish in a float)
    budget = float(f"{np.floor(error * 100) / 100 + 0.01:.2f}")
    while budget <= error:  # float rounding can leave it at or below the error
        budget = float(f"{budget + 0.01:.2f}")
    budget = max(budget, 0.5)
    return budget if budget <= 1e6 else None


def _as_toml(value: object) -> str:
    return f'"{value}"' if isinstance(value, str) else f"{value}"


def _changed(spec: CoreSpec, change: dict[str, object]) -> CoreSpec:
    values = {k: (None if v == "auto" else v) for k, v in change.items()}
    return replace(spec, **values)  # type: ignore[arg-type]


def _accepted(spec: CoreSpec, change: dict[str, object]) -> bool:
    """Whether the sizer accepts ``spec`` with ``change`` applied (tried, not guessed)."""
    try:
        _size(_changed(spec, change))
    except ConfigError:
        return False
    return True


def _fit_iterations(spec: CoreSpec, g: int, exc: ConfigError) -> ConfigError:
    """The width refusal of fixed iterations, with a count that fits as the fix (and a budget
    that this count then meets, where it misses the one set)."""
    top = _largest_n(spec, g)
    fits = [n for n in range(1, (top or 0) + 1) if _feasible(spec, n, g)]
    if not fits:
        return exc
    n = min(fits, key=lambda k: abs(k - (spec.iterations or 0)))
    change: dict[str, object] = {"iterations": n}
    try:
        _size(_changed(spec, change))
    except ConfigError as more:
        if more.suggestion is None:
            return exc
        change |= more.suggestion
    fix = " and ".join(f"{k} = {_as_toml(v)}" for k, v in change.items())
    return ConfigError(exc.field, exc.value, exc.allowed, f"set {fix}", suggestion=change)


def _missed_budget(spec: CoreSpec, prover: _Prover) -> ConfigError:
    """No size meets ``max_error_lsb``: say how close the largest size gets, and what is accepted."""
    g = spec.guard_bits if spec.guard_bits is not None else MAX_AUTO_GUARD_BITS
    n = spec.iterations if spec.iterations is not None else _largest_n(spec, g)
    zg = MAX_AUTO_GUARD_BITS if sizes_angle_guard(spec) and spec.angle_guard_bits is None else None
    achieved = float("inf")
    where = ""
    if n is not None:
        largest = make_datapath(spec, n, g, zg)
        achieved = prover.worst(largest)
        z_guard = "" if largest.angle_guard_bits in (None, g) else f", {largest.angle_guard_bits} for z"
        where = f" ({n} iterations, {g} guard bits{z_guard})"
    # (n, g) lies inside the search space the sizer walks, and this is the full check's measure
    # of it, so any budget above `achieved` is met there: the budget fix needs no second run.
    budget = _budget_above(max(achieved, spec.max_error_lsb))
    fixes: list[tuple[str, dict[str, object]]] = []
    sized = ("iterations", "guard_bits", ANGLE_GUARD_FIELD) if sizes_angle_guard(spec) else ("iterations", "guard_bits")
    fixed = [f for f in sized if getattr(spec, f) is not None]
    for fields in [[f] for f in fixed] + ([fixed] if len(fixed) >= 2 else []):
        change: dict[str, object] = {f: "auto" for f in fields}
        if _accepted(spec, change):
            text = " and ".join(f'{f} = "auto"' for f in fields)
            fixes.append((f"set {text}", change))
            break
    if budget is not None:
        fixes.append((f"set max_error_lsb = {budget:.2f} to accept this accuracy", {"max_error_lsb": budget}))
    field, value = (fixed[0], getattr(spec, fixed[0])) if fixed else ("max_error_lsb", spec.max_error_lsb)
    return ConfigError(
        field,
        value,
        f"the worst error against the ideal must stay below max_error_lsb = {spec.max_error_lsb}; "
        f"the best these sizes reach is {achieved:.4f} LSB{where}",
        # No fix without proof: past a budget of 1e6 only a different core can help.
        ", or ".join(text for text, _ in fixes) if fixes else "no allowed budget is met; change data_width or the function",
        suggestion=fixes[0][1] if fixes else None,
    )


def _check_port_widths(spec: CoreSpec) -> None:
    """Refuse, before any sizing, a core with a port wider than :data:`MAX_PORT_WIDTH`: some
    outputs are wider than data_width (a product or a magnitude needs a bit more, a raw gain one
    or two), so a 64-bit data_width does not fit every function."""
    probe = make_datapath(spec, MIN_Z_ONLY_ITERATIONS, MAX_AUTO_GUARD_BITS)
    widest = max(input_ports(probe) + output_ports(probe), key=lambda port: port.width)
    if widest.width <= MAX_PORT_WIDTH:
        return
    extra = widest.width - spec.data_width
    fits = MAX_PORT_WIDTH - extra
    raise ConfigError(
        "data_width",
        spec.data_width,
        f"at most {fits} here: port {widest.name} is data_width + {extra} bits, and ports are at "
        f"most {MAX_PORT_WIDTH} bits wide",
        f"set data_width = {fits}",
        suggestion={"data_width": fits},
    )


def _arithmetic(spec: CoreSpec) -> CoreSpec:
    """The spec with every field that does not change the sizing set to one value: cores that
    differ only in name, pipeline depth, tag, handshake, reset, enable or language share one
    sizing run. The architecture stays (:func:`sizing_cost` weighs a pipeline and an iterative
    core apart), and an iterative core's iterations per clock."""
    spec = function_named(spec.function).sizing_spec(spec)
    return replace(
        spec, name="core", pipeline_depth=None, tag_width=0, handshake="ready_valid", hdl=DEFAULT_HDL,
        vlnv_vendor=DEFAULT_VLNV_VENDOR, vlnv_library=DEFAULT_VLNV_LIBRARY,
        reset_style=RESET_STYLES[0], reset_polarity=RESET_POLARITIES[0], clock_enable=False,
        iterations_per_cycle=(spec.iterations_per_cycle or 1) if spec.architecture == "iterative" else None,
    )


def sizing_evidence(spec: CoreSpec) -> Inputs:
    """The inputs the sizer tried smaller sizes on (corners, directed worst cases, a slice of
    the checked inputs, and the worst inputs of every failed full check): each size it
    rejected exceeds the budget on some of them. For tests and reports of the sizing proof."""
    arithmetic = _arithmetic(spec)
    _size(arithmetic)
    return dict(_prover(arithmetic, None).search)


def build_design(spec: CoreSpec, *, progress: Progress | None = None) -> Design:
    """Size (where ``auto``) and derive everything about a core.

    Args:
        spec: The validated configuration.
        progress: Called with a short line now and then while a long check runs.

    Raises:
        ConfigError: if the sizes cannot meet the error target, or the architecture does not fit
            the iteration count.
    """
    # A target of the function's own (the NCO's spectrum) picks widths first: each candidate
    # is sized here like any core.
    def candidate(s: CoreSpec) -> Datapath:
        return build_design(s, progress=progress).datapath

    spec = function_named(spec.function).resolve_spec(spec, candidate)
    _check_port_widths(spec)
    sized = _size(_arithmetic(spec), progress)
    n = sized.iterations
    dp = final_datapath(spec, n, sized.guard_bits, sized.angle_guard_bits)
    try:
        timing: Timing = core_timing(spec, dp)
    except ConfigError as exc:  # more stages than iterations: as many as there are is accepted
        raise ConfigError(exc.field, exc.value, exc.allowed, exc.fix, suggestion={exc.field: n}) from None
    sized_fields = [("iterations", spec.iterations), ("guard_bits", spec.guard_bits)]
    if sizes_angle_guard(spec):
        sized_fields.append((ANGLE_GUARD_FIELD, spec.angle_guard_bits))
    auto = tuple(f for f, v in sized_fields if v is None)
    return Design(
        spec=spec,
        datapath=dp,
        timing=timing,
        accuracy=sized.stats,
        proof=sized.proof,
        auto_fields=auto,
    )
