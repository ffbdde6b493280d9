"""From a validated spec to a complete design: sizing, data path, timing and proven accuracy.

Sizing to a target: for ``iterations = "auto"`` and/or ``guard_bits = "auto"`` the sizer picks the
smallest number of iterations for which some guard-bit count up to 16 meets ``max_error_lsb``, then
the smallest guard-bit count for it. Each candidate is measured on the bit-true model against the
ideal: exhaustively when the angle space has at most 2**20 codes, otherwise on 10**6 seeded random
angles plus the corners. Explicit sizes are measured the same way and refused when they miss the
target, so no config yields a core silently worse than it asked for.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import cache

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import MIN_Z_ONLY_ITERATIONS, Datapath, Timing, make_datapath, make_timing
from benchgen.config import MAX_ITERATIONS, CoreSpec
from benchgen.errors import ConfigError
from benchgen.functions import ideal_outputs, input_ports, measure, output_ports, sizing_inputs
from benchgen.model import sincos
from benchgen.reference import ErrorStats, error_stats, ideal_sincos

__all__ = [
    "EXHAUSTIVE_LIMIT_BITS",
    "MAX_AUTO_GUARD_BITS",
    "MAX_PORT_WIDTH",
    "Design",
    "build_design",
    "corner_angles",
    "evaluate",
    "sizing_angles",
]

EXHAUSTIVE_LIMIT_BITS = 20
MAX_PORT_WIDTH = 64
"""Widest data port: the bulk harness packs each port into a slot of at most 8 bytes, and its C++
runner moves ports as 64-bit integers (benchgen/harness.py)."""
RANDOM_SIZING_SAMPLES = 1_000_000
WIDE_SIZING_SAMPLES = 4096
MAX_AUTO_GUARD_BITS = 16
_SIZING_SEED = 20261202
_PREFILTER = 32768
_PREFILTER_WIDE = 256


@dataclass(frozen=True, kw_only=True)
class Design:
    """A fully derived core.

    Attributes:
        spec: The validated configuration.
        datapath: Arithmetic: widths, constants, rounding.
        timing: Stage layout, latency and throughput.
        accuracy: Error of the bit-true model against the ideal over the sizing set.
        accuracy_exhaustive: Whether that set was every input code.
        auto_fields: Names of the fields the sizer chose.
    """

    spec: CoreSpec
    datapath: Datapath
    timing: Timing
    accuracy: ErrorStats
    accuracy_exhaustive: bool
    auto_fields: tuple[str, ...]


def corner_angles(angle_width: int) -> npt.NDArray[np.int64] | npt.NDArray[np.object_]:
    """0, every quadrant and octant boundary and one code either side, and the most negative code."""
    full = 1 << angle_width
    codes: set[int] = set()
    for k in range(8):
        edge = k * full // 8
        codes.update({(edge - 1) % full, edge % full, (edge + 1) % full})
    codes.add(full // 2)  # the most negative code, read as signed: -1/2 turn
    codes.add(full - 1)
    out = sorted(codes)
    return np.array(out, dtype=np.int64 if angle_width <= 62 else object)


def sizing_angles(angle_width: int, data_width: int) -> tuple[npt.NDArray[np.int64] | npt.NDArray[np.object_], bool]:
    """The angles a design is measured on, and whether they are the whole input space."""
    if angle_width <= EXHAUSTIVE_LIMIT_BITS:
        return np.arange(1 << angle_width, dtype=np.int64), True
    rng = np.random.default_rng(_SIZING_SEED)
    # Beyond these widths the model runs on Python integers (exact but about 100x slower), so
    # the random set shrinks; the manifest says how many angles the accuracy was measured on.
    fast = data_width <= 40 and angle_width <= 56
    count = RANDOM_SIZING_SAMPLES if fast else WIDE_SIZING_SAMPLES
    corners = corner_angles(angle_width)
    if angle_width <= 62:
        rand = rng.integers(0, 1 << angle_width, size=count, dtype=np.int64)
        return np.concatenate([corners, rand]), False
    rand_obj = [int(v) for v in rng.integers(0, 1 << 62, size=count, dtype=np.int64)]
    rand_obj = [(v << (angle_width - 62)) | (v & ((1 << (angle_width - 62)) - 1)) for v in rand_obj]
    return np.array(list(corners) + rand_obj, dtype=object), False


def evaluate(dp: Datapath, angles: npt.ArrayLike, ideal: tuple[np.ndarray, np.ndarray] | None = None) -> ErrorStats:
    """Error of the bit-true model of ``dp`` against the ideal over ``angles``.

    Args:
        dp: The data path to measure.
        angles: Input angle codes.
        ideal: The ideal (cos, sin) for these angles and this amplitude, if already computed.
    """
    out = sincos(dp, angles)
    ideal_cos, ideal_sin = ideal if ideal is not None else ideal_sincos(dp, angles)
    return error_stats([out.cos, out.sin], [ideal_cos, ideal_sin])


@dataclass(frozen=True)
class _SizingSet:
    inputs: dict[str, np.ndarray]
    ideal: dict[str, np.ndarray] | None
    subset: dict[str, np.ndarray]
    subset_ideal: dict[str, np.ndarray] | None
    exhaustive: bool


def _sizing_set(spec: CoreSpec) -> _SizingSet:
    # Only the fields that shape the ports and the ideal matter; the rest share one set.
    return _sizing_set_for(spec.function, spec.angle_width, spec.data_width, spec.angle_unit, spec.gain)


@cache
def _sizing_set_for(function: str, angle_width: int, data_width: int, angle_unit: str, gain: str) -> _SizingSet:
    probe_spec = CoreSpec(
        name="probe", function=function, angle_width=angle_width, data_width=data_width, angle_unit=angle_unit, gain=gain
    )
    probe = make_datapath(probe_spec, MIN_Z_ONLY_ITERATIONS, MAX_AUTO_GUARD_BITS)
    try:
        cheapest = make_datapath(probe_spec, MIN_Z_ONLY_ITERATIONS, 0)
    except ConfigError:
        cheapest = None  # too narrow for three iterations without guard bits
    inputs, exhaustive = sizing_inputs(probe, cheapest=cheapest)
    count = len(next(iter(inputs.values())))
    limit = min(_PREFILTER, count // 8) if data_width <= 40 and angle_width <= 56 else _PREFILTER_WIDE
    step = max(1, count // limit)
    subset = {k: v[::step] for k, v in inputs.items()}
    # The gain-free ideal depends on the inputs only, not on the size being tried; a raw
    # core's growth 1/K_n is applied per candidate.
    return _SizingSet(
        inputs=inputs,
        ideal=ideal_outputs(probe, inputs, with_gain=False),
        subset=subset,
        subset_ideal=ideal_outputs(probe, subset, with_gain=False),
        exhaustive=exhaustive,
    )


def _meets(spec: CoreSpec, n: int, g: int) -> tuple[bool, ErrorStats | None]:
    try:
        dp = make_datapath(spec, n, g)
    except ConfigError:
        return False, None  # more iterations than this width holds
    sset = _sizing_set(spec)
    # The subset's worst error is a lower bound of the full set's: a failing subset rejects
    # the candidate cheaply; a passing one is confirmed on the full set.
    if measure(dp, sset.subset, sset.subset_ideal).max_error_lsb >= spec.max_error_lsb:
        return False, None
    stats = measure(dp, sset.inputs, sset.ideal)
    return stats.max_error_lsb < spec.max_error_lsb, stats


def _best_guard(spec: CoreSpec, n: int) -> tuple[int, ErrorStats] | None:
    g_range = [spec.guard_bits] if spec.guard_bits is not None else range(MAX_AUTO_GUARD_BITS + 1)
    for g in g_range:
        ok, stats = _meets(spec, n, g)
        if ok and stats is not None:
            return g, stats
    return None


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
    if not np.isfinite(error):
        return None
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


@cache
def _size(spec: CoreSpec) -> tuple[int, int, ErrorStats]:
    """Smallest iterations, then smallest guard bits, meeting the target (fields fixed by the spec stay).

    Raises:
        ConfigError: if no size meets the target, with a fix (``suggestion``) that is accepted:
            either tried here, or a budget above an error measured inside the search space.
    """
    if spec.iterations is not None:
        # Iterations that no allowed guard-bit count can hold are refused with the width message,
        # and a count the width does hold as the fix.
        g_top = spec.guard_bits if spec.guard_bits is not None else MAX_AUTO_GUARD_BITS
        try:
            make_datapath(spec, spec.iterations, g_top)
        except ConfigError as exc:
            raise _fit_iterations(spec, g_top, exc) from None
        found = _best_guard(spec, spec.iterations)
        if found is not None:
            return spec.iterations, found[0], found[1]
    else:
        # Start near the answer (about data_width iterations) and walk: down while the target is
        # still met, else up until it is. Every count below the answer is thus shown to fail.
        # The start is a count the data path can hold with the most guard bits allowed, so
        # that a narrow path (a linear z of few fraction bits) is searched below it too.
        g_top = spec.guard_bits if spec.guard_bits is not None else MAX_AUTO_GUARD_BITS
        n = max(1, min(spec.data_width - 2, _largest_n(spec, g_top) or 1))
        found = _best_guard(spec, n)
        if found is not None:
            while n > 1:
                lower = _best_guard(spec, n - 1)
                if lower is None:
                    break
                n, found = n - 1, lower
            return n, found[0], found[1]
        for n in range(n + 1, MAX_ITERATIONS + 1):
            found = _best_guard(spec, n)
            if found is not None:
                return n, found[0], found[1]
    raise _missed_budget(spec)


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


def _missed_budget(spec: CoreSpec) -> ConfigError:
    """No size meets ``max_error_lsb``: say how close the largest size gets, and what is accepted."""
    g = spec.guard_bits if spec.guard_bits is not None else MAX_AUTO_GUARD_BITS
    n = spec.iterations if spec.iterations is not None else _largest_n(spec, g)
    achieved = float("inf")
    if n is not None:
        sset = _sizing_set(spec)
        achieved = measure(make_datapath(spec, n, g), sset.inputs, sset.ideal).max_error_lsb
    # (n, g) lies inside the search space the sizer walked, and the sizer's measure of it is this
    # one, so any budget above `achieved` is met there: the budget fix needs no second run.
    budget = _budget_above(max(achieved, spec.max_error_lsb))
    fixes: list[tuple[str, dict[str, object]]] = []
    fixed = [f for f in ("iterations", "guard_bits") if getattr(spec, f) is not None]
    for fields in [[f] for f in fixed] + ([fixed] if len(fixed) == 2 else []):
        change: dict[str, object] = {f: "auto" for f in fields}
        if _accepted(spec, change):
            text = " and ".join(f'{f} = "auto"' for f in fields)
            fixes.append((f"set {text}", change))
            break
    if budget is not None:
        fixes.append((f"set max_error_lsb = {budget:.2f} to accept this accuracy", {"max_error_lsb": budget}))
    field, value = (fixed[0], getattr(spec, fixed[0])) if fixed else ("max_error_lsb", spec.max_error_lsb)
    where = f" ({n} iterations, {g} guard bits)" if n is not None else ""
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


def build_design(spec: CoreSpec) -> Design:
    """Size (where ``auto``) and derive everything about a core.

    Raises:
        ConfigError: if the sizes cannot meet the error target, or the architecture does not fit
            the iteration count.
    """
    _check_port_widths(spec)
    # The size depends on the arithmetic alone: cores that differ only in name, architecture
    # or tag share one sizing run.
    arithmetic = replace(spec, name="core", architecture="pipelined", pipeline_depth=None, iterations_per_cycle=None, tag_width=0)
    n, g, stats = _size(arithmetic)
    dp = make_datapath(spec, n, g)
    try:
        timing: Timing = make_timing(spec, n)
    except ConfigError as exc:  # more stages than iterations: as many as there are is accepted
        raise ConfigError(exc.field, exc.value, exc.allowed, exc.fix, suggestion={exc.field: n}) from None
    exhaustive = _sizing_set(spec).exhaustive
    auto = tuple(f for f, v in (("iterations", spec.iterations), ("guard_bits", spec.guard_bits)) if v is None)
    return Design(
        spec=spec,
        datapath=dp,
        timing=timing,
        accuracy=stats,
        accuracy_exhaustive=exhaustive,
        auto_fields=auto,
    )
