"""The functions, one module each, and what the rest of benchgen asks of any of them.

The registry below is the one list of functions: adding a function is a new module with one
:class:`~benchgen.functions.base.Function` subclass, a line here, its tests and its docs. The
helpers that follow answer for any core by asking its function's class: its data path, ports,
model, stimulus, ideal and judging.
"""

from __future__ import annotations

import functools

from collections.abc import Mapping
from dataclasses import replace
from typing import Any

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath, Timing, make_timing
from benchgen.functions import atan2, atanh, div, exp, ln, mul, nco, rotate, sincos, sinhcosh, sqrt
from benchgen.functions.base import LOAD_PORT, CorePort, Function, Inputs, Outputs, Port, uniform
from benchgen.model import to_signed
from benchgen.netlist import Clocking
from benchgen.reference import ErrorStats, error_stats
from benchgen.spec import CoreSpec

__all__ = [
    "EXHAUSTIVE_LIMIT_BITS",
    "EXHAUSTIVE_SLOW_MODEL_BITS",
    "FUNCTIONS",
    "FUNCTION_NAMES",
    "LOAD_PORT",
    "RANDOM_SIZING_SAMPLES",
    "WIDE_SIZING_SAMPLES",
    "CorePort",
    "Function",
    "Inputs",
    "Outputs",
    "Port",
    "apply_gain",
    "bench_corners",
    "clocking_of",
    "corner_inputs",
    "core_ports",
    "directed_inputs",
    "enumerate_inputs",
    "evaluate",
    "function_errors",
    "function_named",
    "front_stages",
    "core_timing",
    "table_head",
    "TABLE_HEAD_ITERATIONS",
    "ITERATIVE_TABLE_HEAD_ITERATIONS",
    "function_of",
    "ideal_outputs",
    "input_ports",
    "input_space_bits",
    "int64_model",
    "join_inputs",
    "final_datapath",
    "sizes_angle_guard",
    "ANGLE_GUARD_FIELD",
    "make_datapath",
    "measure",
    "output_ports",
    "random_inputs",
    "refused_fields",
    "sizing_inputs",
]

FUNCTIONS: tuple[Function, ...] = (
    sincos.FUNCTION,
    rotate.FUNCTION,
    atan2.FUNCTION,
    mul.FUNCTION,
    div.FUNCTION,
    sinhcosh.FUNCTION,
    exp.FUNCTION,
    atanh.FUNCTION,
    ln.FUNCTION,
    sqrt.FUNCTION,
    nco.FUNCTION,
)
"""Every function, in the order the docs list them."""

FUNCTION_NAMES: tuple[str, ...] = tuple(f.name for f in FUNCTIONS)
_BY_NAME = {f.name: f for f in FUNCTIONS}

# Every input is checked when the input space has at most 2**24 codes and the model runs on
# int64 (a few seconds a pass, in chunks), or at most 2**20 codes on any model.
EXHAUSTIVE_LIMIT_BITS = 24
EXHAUSTIVE_SLOW_MODEL_BITS = 20
RANDOM_SIZING_SAMPLES = 1_000_000
WIDE_SIZING_SAMPLES = 4096
SIZING_SEED = 20261202
BENCH_DIRECTED_SEED = 1241
BENCH_DIRECTED_PER_OCTAVE = 8


def function_named(name: str) -> Function:
    """The function of that name (names come from a validated config).

    Raises:
        KeyError: for a name that is not in the registry.
    """
    return _BY_NAME[name]


def function_of(dp: Datapath) -> Function:
    """The function a data path was built for."""
    return _BY_NAME[dp.function]


def front_stages(spec: CoreSpec, dp: Datapath) -> int:
    """Register stages of the input logic before the first iteration: the function's own count
    (:meth:`Function.front_stages`) in a pipeline, none in an iterative core (whose input logic
    loads a register of its own)."""
    return function_of(dp).front_stages(dp) if spec.architecture == "pipelined" else 0


#: Iterations a sine/cosine pipeline forms x and y for from a table (:func:`table_head`): 3
#: makes a 4-input function of the fold and three directions, one LUT4 per bit.
TABLE_HEAD_ITERATIONS = 3
#: The same for an iterative core, whose table sits in the clock that loads a sample: there
#: each direction but the first waits for a z adder, so 2 puts one carry chain in that clock
#: (z after the head is one of two sums picked by the last direction) and 3 would put two,
#: making the load path the core's longest (docs/hardware.md step 4).
ITERATIVE_TABLE_HEAD_ITERATIONS = 2


def table_head(dp: Datapath, architecture: str) -> int:
    """How many first iterations a core forms x and y for from a table (0: none).

    In rotation mode z alone decides every direction, so when the start vector is one of two
    constants (the sine/cosine fold) the x and y after iteration h are a function of h + 1 bits:
    the fold and the first h directions. The table holds what those iterations compute, in their
    own arithmetic, so every bit is the same (tests/test_netlist.py evaluates every input of
    small cores). A pipeline puts it in place of h stages' adders; an iterative core forms it in
    the clock that loads a sample, so the sample needs fewer clocks of iteration.

    The config's ``table_head`` sets h (at most iterations - 2); unset, the architecture's
    default below. The trade is the user's: in an iterative core at the hand-written core's size
    (16 iterations, 4 guard bits, truncation) the 2-iteration head costs 49 iCE40 LUT4 (379
    against 330) for 2 clocks fewer per sample (HX8K 6.27 against 5.65 Msps, median of 3 seeds;
    docs/hardware.md step 7), where the 1-LSB core pays 11 for the same 2 clocks.
    """
    fn = function_of(dp)
    if not (fn.start_table and dp.mode == "rotation" and dp.coordinates == "circular"):
        return 0
    if dp.table_head is not None:
        return max(0, min(dp.table_head, dp.iterations - 2))
    if architecture == "iterative" and fn.phase_front(dp) is not None:
        # An iterative NCO's load clock already holds the phase sum's carry chains: the head's z
        # adder after them made it the longest path (16/16, 32-bit accumulator, 3 dither bits,
        # iCE40 HX8K median of 3 seeds: 15 clocks at 59.1 MHz, 3.94 Msps, against 17 clocks at
        # 74.2 MHz, 4.37 Msps, without the head).
        return 0
    h = TABLE_HEAD_ITERATIONS if architecture == "pipelined" else ITERATIVE_TABLE_HEAD_ITERATIONS
    return max(0, min(h, dp.iterations - 2))


def core_timing(spec: CoreSpec, dp: Datapath) -> Timing:
    """The core's timing: its iterations spread over stages or clocks, with the input logic's
    own register stages and (iterative) the iterations its load clock forms by table."""
    head = table_head(dp, spec.architecture) if spec.architecture == "iterative" else 0
    return make_timing(spec, dp.iterations, front_stages(spec, dp), head)


def refused_fields(fn: Function) -> dict[str, str]:
    """Config fields that do not apply to ``fn``, each with why (the config refuses them)."""
    out: dict[str, str] = {}
    if not fn.angle_ports:
        why = fn.no_angle_reason()
        out["angle_width"] = why
        out["angle_unit"] = why
    if not fn.gain_applies:
        out["gain"] = fn.no_gain_reason()
    for other in FUNCTIONS:
        for option in other.options:
            if option not in fn.options:
                owners = [f.name for f in FUNCTIONS if option in f.options]
                out.setdefault(option, "only used by function = " + " or ".join(f'"{o}"' for o in owners))
    return out


ANGLE_GUARD_FIELD = "angle_guard_bits"
"""The config field of z's own guard bits, listed in the options of the functions that take it."""


def sizes_angle_guard(spec: CoreSpec) -> bool:
    """Whether the function takes ``angle_guard_bits`` (z's guard bits apart from x and y's)."""
    return ANGLE_GUARD_FIELD in function_named(spec.function).options


def make_datapath(spec: CoreSpec, iterations: int, guard_bits: int, angle_guard_bits: int | None = None) -> Datapath:
    """The data path of a core at a size: ``iterations``, ``guard_bits`` and, where the function
    sizes z's guard bits apart (:func:`sizes_angle_guard`), ``angle_guard_bits`` (``None``: the
    spec's, and where the spec leaves them auto, ``guard_bits``).

    Raises:
        ConfigError: if the iterations do not fit the internal width.
    """
    if angle_guard_bits is not None and sizes_angle_guard(spec):
        spec = replace(spec, angle_guard_bits=angle_guard_bits)
    return function_named(spec.function).datapath(spec, iterations, guard_bits)


@functools.lru_cache(maxsize=64)
def _proved(dp: Datapath) -> Datapath:
    return function_of(dp).proved_range(dp)


def final_datapath(
    spec: CoreSpec, iterations: int, guard_bits: int, angle_guard_bits: int | None = None
) -> Datapath:
    """The data path of the core that is shipped at a size: :func:`make_datapath`, then without
    the logic that evaluating every input proves idle (a function's ``proved_range``: today the
    sine/cosine core's saturation and x/y headroom bit, up to 2^20 angle codes).

    Sizing judges candidates with :func:`make_datapath`; the narrower data path computes the
    same bits on every input, so the accuracy proven there holds for it.
    """
    return _proved(make_datapath(spec, iterations, guard_bits, angle_guard_bits))


def input_ports(dp: Datapath) -> tuple[Port, ...]:
    """Data inputs, in port order."""
    return function_of(dp).input_ports(dp)


def output_ports(dp: Datapath) -> tuple[Port, ...]:
    """Data outputs, in port order."""
    return function_of(dp).output_ports(dp)


RESET_PORT = "rst"
"""The reset port of an active-high reset."""
RESET_N_PORT = "rst_n"
"""The reset port of an active-low reset (the usual ``_n`` suffix of a low-active signal)."""
ENABLE_PORT = "clk_en"
"""The clock enable port, where the config asks for one."""



def clocking_of(spec: CoreSpec) -> Clocking:
    """How a core's registers are reset and enabled, from its config: the port names and the
    reset's style and level (docs/config.md, "Reset and clock enable")."""
    low = spec.reset_polarity == "active_low"
    return Clocking(
        reset=RESET_N_PORT if low else RESET_PORT,
        asynchronous=spec.reset_style == "asynchronous",
        active_low=low,
        enable=ENABLE_PORT if spec.clock_enable else "",
    )


def core_ports(
    dp: Datapath,
    tag_width: int,
    clocking: Clocking | None = None,
    handshake: str = "ready_valid",
    architecture: str = "pipelined",
) -> tuple[CorePort, ...]:
    """Every port of the core, in the order its module declares them.

    The function's data ports (:func:`input_ports`, :func:`output_ports`) with the ports the
    hardware adds around them: clock, reset (named by ``clocking``, ``rst`` by default), the
    clock enable where ``clocking`` has one, each stream's valid and ready, and the tag that
    travels with each sample when ``tag_width`` is not 0. A ``valid_only`` handshake has no
    ``out_ready``, and a pipelined core then takes a sample every clock, so no ``in_ready``.
    """
    clocking = clocking or Clocking()
    enable = [CorePort(clocking.enable, 1, "in", "enable")] if clocking.enable else []

    def data(ports: tuple[Port, ...], direction: str) -> list[CorePort]:
        return [CorePort(p.name, p.width, direction, "data", p.signed, p.doc) for p in ports]

    if function_of(dp).free_running(dp):
        # No input stream (no in_valid, in_ready or tag) and no out_ready: one sample per clock
        # from reset, the data inputs loaded at an edge where LOAD_PORT is high.
        return (
            CorePort("clk", 1, "in", "clock"),
            CorePort(clocking.reset, 1, "in", "reset", active_low=clocking.active_low),
            *enable,
            CorePort(LOAD_PORT, 1, "in", "load"),
            *data(input_ports(dp), "in"),
            CorePort("out_valid", 1, "out", "handshake"),
            *data(output_ports(dp), "out"),
        )

    tag_in = [CorePort("in_tag", tag_width, "in", "tag")] if tag_width else []
    tag_out = [CorePort("out_tag", tag_width, "out", "tag")] if tag_width else []
    ready_valid = handshake == "ready_valid"
    in_ready = [CorePort("in_ready", 1, "out", "handshake")] if ready_valid or architecture != "pipelined" else []
    out_ready = [CorePort("out_ready", 1, "in", "handshake")] if ready_valid else []
    return (
        CorePort("clk", 1, "in", "clock"),
        CorePort(clocking.reset, 1, "in", "reset", active_low=clocking.active_low),
        *enable,
        CorePort("in_valid", 1, "in", "handshake"),
        *in_ready,
        *data(input_ports(dp), "in"),
        *tag_in,
        CorePort("out_valid", 1, "out", "handshake"),
        *out_ready,
        *data(output_ports(dp), "out"),
        *tag_out,
    )


def evaluate(dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
    """The bit-true model's outputs, by output port name."""
    return function_of(dp).model(dp, inputs)


def int64_model(dp: Datapath) -> bool:
    """Whether the bit-true model of ``dp`` runs on int64 (else on Python integers, ~100x slower)."""
    return function_of(dp).int64_model(dp)


# ----------------------------------------------------------------------------- stimulus


def corner_inputs(dp: Datapath) -> Inputs:
    """The function's boundary inputs."""
    return function_of(dp).corners(dp)


def directed_inputs(dp: Datapath, *, seed: int, per_octave: int = 64) -> Inputs:
    """Inputs aimed at the function's worst regions, which uniform random samples rarely hit.

    Short vectors and small denominators at every octave of their length (where the error of
    an unnormalised core grows), the axes and diagonals, quotients near the edge of the range,
    every normalising shift of ln and sqrt (each power of two and its neighbours), every
    exponent step of exp (multiples of ln 2), the atanh domain edge, the angle octants. The
    sizer adds these to its random set; a test draws a larger set with another seed.

    Args:
        dp: The data path.
        seed: Seed of the random parts.
        per_octave: Random inputs drawn per octave of magnitude.
    """
    return function_of(dp).directed(dp, np.random.default_rng(seed), per_octave)


def bench_corners(dp: Datapath) -> Inputs:
    """What a bench's corner test sends: the corners, then a small directed worst-case set
    (a seed of its own and 8 random inputs per octave), so the RTL is checked where each
    function is worst, not only where the model was sized."""
    return join_inputs(corner_inputs(dp), directed_inputs(dp, seed=BENCH_DIRECTED_SEED, per_octave=BENCH_DIRECTED_PER_OCTAVE))


def random_inputs(dp: Datapath, rng: np.random.Generator, count: int) -> Inputs:
    """Uniform random codes on every input port."""
    return {p.name: uniform(rng, p.width, count, p.signed) for p in input_ports(dp)}


def input_space_bits(dp: Datapath) -> int:
    """log2 of the number of input codes: the sum of the data input widths."""
    return sum(p.width for p in input_ports(dp))


def enumerate_inputs(dp: Datapath, start: int, stop: int) -> Inputs:
    """The inputs with flat index ``start`` to ``stop - 1`` of the whole input space.

    The flat index is the concatenation of the port codes, the first port most significant;
    signed ports are given as signed values.
    """
    ports = input_ports(dp)
    index = np.arange(start, stop, dtype=np.int64)
    shift = sum(p.width for p in ports)
    out: Inputs = {}
    for p in ports:
        shift -= p.width
        codes = (index >> shift) & ((1 << p.width) - 1)
        out[p.name] = to_signed(codes, p.width) if p.signed else codes
    return out


def join_inputs(*parts: Inputs) -> Inputs:
    """Input sets one after the other (same ports)."""
    names = list(parts[0])
    dtype: Any = object if any(np.asarray(p[n]).dtype == object for p in parts for n in names) else np.int64
    return {n: np.concatenate([np.asarray(p[n]).astype(dtype) for p in parts]) for n in names}


def sizing_inputs(dp: Datapath, *, cheapest: Datapath | None = None) -> tuple[Inputs, bool]:
    """A set of inputs to measure a design on, and whether it is the whole input space.

    The whole space when it has at most 2**20 points (:func:`enumerate_inputs`); otherwise
    10**6 seeded random inputs (4096 where the model runs on Python integers) after the corners
    and the directed worst cases (:func:`directed_inputs`). The sizer itself goes further:
    it checks every input of spaces up to 2**24 codes in chunks (benchgen.design).

    Args:
        dp: The data path (its ports and formats shape the inputs).
        cheapest: The same core at zero guard bits, if the caller has it: the set is large
            when the model runs on int64 there, as it does for the sizes the sizer settles on
            (a candidate with more guard bits may run on Python integers, slower but exact).
    """
    total_bits = input_space_bits(dp)
    if total_bits <= EXHAUSTIVE_SLOW_MODEL_BITS:
        return enumerate_inputs(dp, 0, 1 << total_bits), True
    # Deciding at zero guard bits, not at the most the sizer tries: a 24-bit sqrt judged at 16
    # guard bits was sized on 4096 samples and missed 1.25 LSB errors at 1.5e-4 of its inputs.
    fast = int64_model(cheapest if cheapest is not None else dp)
    count = RANDOM_SIZING_SAMPLES if fast else WIDE_SIZING_SAMPLES
    rng = np.random.default_rng(SIZING_SEED)
    fixed = join_inputs(corner_inputs(dp), directed_inputs(dp, seed=SIZING_SEED))
    return join_inputs(fixed, random_inputs(dp, rng, count)), False


# ----------------------------------------------------------------------------- ideal and judging


def apply_gain(dp: Datapath, ideal: Outputs) -> Outputs:
    """Scale a gain-free ideal by a raw core's growth (the data outputs only)."""
    return function_of(dp).apply_gain(dp, ideal)


def ideal_outputs(dp: Datapath, inputs: Inputs, *, with_gain: bool = True) -> Outputs:
    """The exact answer for each judged output (float64 or mpmath values).

    Args:
        dp: The data path.
        inputs: Input values by port.
        with_gain: Include a raw core's growth (False gives the gain-free answer, which does
            not depend on the iteration count).
    """
    fn = function_of(dp)
    ideal = fn.ideal(dp, inputs)
    return fn.apply_gain(dp, ideal) if with_gain else ideal


def function_errors(
    dp: Datapath, inputs: Inputs, outputs: Outputs, ideal: Outputs | None = None
) -> dict[str, npt.NDArray[np.float64]]:
    """Per judged output, the error against the ideal in that output's LSBs; NaN where the
    function leaves the output undefined (each function's module says where)."""
    ideal = ideal if ideal is not None else ideal_outputs(dp, inputs)
    return function_of(dp).judge(dp, inputs, outputs, ideal)


def measure(dp: Datapath, inputs: Inputs, ideal_unit: Outputs | None = None) -> ErrorStats:
    """Pooled error of the bit-true model against the ideal over the inputs.

    Args:
        dp: The data path.
        inputs: Input values by port.
        ideal_unit: The gain-free ideal (``ideal_outputs(..., with_gain=False)``), if computed.
    """
    ideal = apply_gain(dp, ideal_unit) if ideal_unit is not None else None
    outputs = evaluate(dp, inputs)
    errs = [e[~np.isnan(e)] for e in function_errors(dp, inputs, outputs, ideal).values()]
    stats = error_stats(errs, [np.zeros_like(e) for e in errs])
    n = len(next(iter(inputs.values())))
    return ErrorStats(n, stats.max_error_lsb, stats.rms_error_lsb, stats.bias_lsb)
