"""From a validated spec to a complete design: sizing, data path, timing and proven accuracy.

Sizing to a target: for ``iterations = "auto"`` and/or ``guard_bits = "auto"`` the sizer picks the
smallest number of iterations for which some guard-bit count up to 16 meets ``max_error_lsb``, then
the smallest guard-bit count for it. Each candidate is measured on the bit-true model against the
ideal: exhaustively when the angle space has at most 2**20 codes, otherwise on 10**6 seeded random
angles plus the corners. Explicit sizes are measured the same way and refused when they miss the
target, so no config yields a core silently worse than it asked for.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath, Timing, make_datapath, make_timing
from benchgen.config import CoreSpec
from benchgen.errors import ConfigError
from benchgen.model import sincos
from benchgen.reference import ErrorStats, error_stats, ideal_sincos

__all__ = [
    "EXHAUSTIVE_LIMIT_BITS",
    "MAX_AUTO_GUARD_BITS",
    "Design",
    "build_design",
    "corner_angles",
    "evaluate",
    "sizing_angles",
]

EXHAUSTIVE_LIMIT_BITS = 20
RANDOM_SIZING_SAMPLES = 1_000_000
WIDE_SIZING_SAMPLES = 4096
MAX_AUTO_GUARD_BITS = 16
_SIZING_SEED = 20261202
_PREFILTER = 4096


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
    count = RANDOM_SIZING_SAMPLES if data_width <= 40 else WIDE_SIZING_SAMPLES
    corners = corner_angles(angle_width)
    if angle_width <= 62:
        rand = rng.integers(0, 1 << angle_width, size=count, dtype=np.int64)
        return np.concatenate([corners, rand]), False
    rand_obj = [int(v) for v in rng.integers(0, 1 << 62, size=count, dtype=np.int64)]
    rand_obj = [(v << (angle_width - 62)) | (v & ((1 << (angle_width - 62)) - 1)) for v in rand_obj]
    return np.array(list(corners) + rand_obj, dtype=object), False


def evaluate(dp: Datapath, angles: npt.ArrayLike) -> ErrorStats:
    """Error of the bit-true model of ``dp`` against the ideal over ``angles``."""
    out = sincos(dp, angles)
    ideal_cos, ideal_sin = ideal_sincos(dp, angles)
    return error_stats([out.cos, out.sin], [ideal_cos, ideal_sin])


@cache
def _sizing_set(angle_width: int, data_width: int) -> tuple[np.ndarray, np.ndarray, bool]:
    angles, exhaustive = sizing_angles(angle_width, data_width)
    step = max(1, len(angles) // _PREFILTER)
    return angles, angles[::step], exhaustive


def _meets(spec: CoreSpec, n: int, g: int) -> tuple[bool, Datapath | None, ErrorStats | None]:
    if n > spec.data_width + g + 1:
        return False, None, None
    dp = make_datapath(spec, n, g)
    angles, subset, _ = _sizing_set(spec.angle_width, spec.data_width)
    # The subset's worst error is a lower bound of the full set's: a failing subset rejects
    # the candidate cheaply; a passing one is confirmed on the full set.
    if evaluate(dp, subset).max_error_lsb > spec.max_error_lsb:
        return False, dp, None
    stats = evaluate(dp, angles)
    return stats.max_error_lsb <= spec.max_error_lsb, dp, stats


@cache
def _size(spec: CoreSpec) -> tuple[int, int, ErrorStats]:
    """Smallest iterations, then smallest guard bits, meeting the target (fields fixed by the spec stay)."""
    from benchgen.config import MAX_ITERATIONS

    n_range = [spec.iterations] if spec.iterations is not None else range(1, MAX_ITERATIONS + 1)
    g_range = [spec.guard_bits] if spec.guard_bits is not None else range(0, MAX_AUTO_GUARD_BITS + 1)
    for n in n_range:
        for g in g_range:
            ok, _dp, stats = _meets(spec, n, g)
            if ok and stats is not None:
                return n, g, stats
    # Nothing met the target: say which field to change.
    best_n = spec.iterations if spec.iterations is not None else MAX_ITERATIONS
    best_g = spec.guard_bits if spec.guard_bits is not None else MAX_AUTO_GUARD_BITS
    best_g = max(best_g, 0)
    if best_n > spec.data_width + best_g + 1:
        best_n = spec.data_width + best_g + 1
    angles, _, _ = _sizing_set(spec.angle_width, spec.data_width)
    achieved = evaluate(make_datapath(spec, best_n, best_g), angles).max_error_lsb
    if spec.iterations is not None and spec.guard_bits is not None:
        field, value = "iterations", spec.iterations
        fix = (
            f'raise iterations/guard_bits (or set both to "auto"), or set max_error_lsb = '
            f"{np.ceil(achieved * 100) / 100:.2f} to accept this accuracy"
        )
    elif spec.iterations is not None:
        field, value = "iterations", spec.iterations
        fix = f'set iterations = "auto" or a larger number, or max_error_lsb >= {np.ceil(achieved * 100) / 100:.2f}'
    elif spec.guard_bits is not None:
        field, value = "guard_bits", spec.guard_bits
        fix = f'set guard_bits = "auto" or a larger number, or max_error_lsb >= {np.ceil(achieved * 100) / 100:.2f}'
    else:
        field, value = "max_error_lsb", spec.max_error_lsb
        fix = f"raise max_error_lsb to {np.ceil(achieved * 100) / 100:.2f} or more, or widen angle_width"
    raise ConfigError(
        field,
        value,
        f"the core must meet max_error_lsb = {spec.max_error_lsb} against the ideal; "
        f"the best this allows is {achieved:.3f} LSB",
        fix,
    )


def build_design(spec: CoreSpec) -> Design:
    """Size (where ``auto``) and derive everything about a core.

    Raises:
        ConfigError: if the sizes cannot meet the error target, or the architecture does not fit
            the iteration count.
    """
    n, g, stats = _size(spec)
    dp = make_datapath(spec, n, g)
    timing: Timing = make_timing(spec, n)
    _, _, exhaustive = _sizing_set(spec.angle_width, spec.data_width)
    auto = tuple(f for f, v in (("iterations", spec.iterations), ("guard_bits", spec.guard_bits)) if v is None)
    return Design(
        spec=spec,
        datapath=dp,
        timing=timing,
        accuracy=stats,
        accuracy_exhaustive=exhaustive,
        auto_fields=auto,
    )
