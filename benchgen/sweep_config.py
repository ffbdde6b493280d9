"""Sweep files: a base core, a matrix over its fields, simulators, exclusions and inclusions.

A sweep file is TOML::

    [sweep]
    name = "nco_depth_by_width"   # names the report and the JUnit suite
    simulators = ["icarus", "verilator"]
    samples = 4000                # random samples per point at full rate
    seed = 1                      # fixed, so a re-run reproduces every point (and the cache hits)

    [synth]                       # optional: resource and timing estimates
    targets = ["ice40", "ecp5"]
    place_and_route = true

    [base]                        # one core, exactly as in a core config file
    name = "nco"
    function = "sincos"
    iterations = 20

    [matrix]                      # every combination of these values is a point
    pipeline_depth = [1, 2, 4, 8, 16]
    data_width = [12, 16, 18]

    [[exclude]]                   # drop the points that match every key given
    pipeline_depth = 16
    data_width = 12

    [[include]]                   # add one more point: base values, then these
    architecture = "iterative"

Every point is validated (config and sizing, through the same code as ``benchgen generate``)
before any is run; all bad points are reported at once, each with its field and value.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from benchgen.config import FUNCTIONS as FUNCTION_NAMES, parse_config, read_toml
from benchgen.design import build_design
from benchgen.errors import BenchgenError, ConfigError, one_line, show_value
from benchgen.rtl import check_module_name
from benchgen.simulators import DEFAULT_SIMULATOR, SIMULATORS, VHDL_SIMULATORS

__all__ = [
    "SYNTH_TARGETS",
    "Point",
    "SweepError",
    "SweepSpec",
    "SynthSettings",
    "expand",
    "load_sweep",
    "parse_sweep",
]

SYNTH_TARGETS = ("ice40", "ecp5")
SIMULATOR_KEY = "simulator"
#: Every simulator a sweep may list: the Verilog ones and GHDL (for cores with VHDL).
ALL_SIMULATORS = (*SIMULATORS, *VHDL_SIMULATORS)
_SWEEP_KEYS = ("name", "simulators", "samples", "seed")
_SYNTH_KEYS = ("targets", "place_and_route", "clock_mhz")
_TOP_KEYS = ("sweep", "synth", "base", "matrix", "exclude", "include")
MAX_POINTS = 5000


class SweepError(BenchgenError):
    """A sweep file that cannot be run; the message names every bad point or field.

    Attributes:
        problems: One line per problem.
    """

    exit_status = 2

    def __init__(self, source: str, problems: list[str]) -> None:
        self.source = source
        self.problems = problems
        shown = problems[:12]
        more = f"\n  ... and {len(problems) - len(shown)} more" if len(problems) > len(shown) else ""
        head = f"{source}: " if source else ""
        super().__init__(f"{head}{len(problems)} problem(s) in the sweep:\n  " + "\n  ".join(shown) + more)


@dataclass(frozen=True)
class SynthSettings:
    """Which open-toolchain estimates to make for each core.

    Attributes:
        targets: Device families (``ice40``, ``ecp5``); empty means no estimates.
        place_and_route: Also place and route for an Fmax estimate.
        clock_mhz: Clock the placer aims at; the achieved Fmax is reported whether it meets it or not.
    """

    targets: tuple[str, ...] = ()
    place_and_route: bool = False
    clock_mhz: float = 100.0


@dataclass(frozen=True)
class Point:
    """One core on one simulator.

    Attributes:
        core: The full core config (base, then matrix or include values).
        simulator: Simulator name.
        axes: The values that vary across the sweep, for labels and plots.
        core_id: File-safe name of the core (shared by its simulators).
    """

    core: Mapping[str, Any]
    simulator: str
    axes: Mapping[str, Any]
    core_id: str

    @property
    def point_id(self) -> str:
        """File-safe, unique name of the point."""
        return f"{self.core_id}__{self.simulator}"

    @property
    def label(self) -> str:
        """Readable name, e.g. ``pipeline_depth=4 data_width=16 icarus``."""
        parts = [f"{k}={v}" for k, v in self.axes.items()]
        return " ".join([*parts, self.simulator])


@dataclass(frozen=True)
class SweepSpec:
    """A validated sweep file.

    Attributes:
        name: Sweep name.
        base: Base core config.
        matrix: Field -> values, in file order.
        exclude: Partial configs; a point matching all keys of one is dropped.
        include: Partial configs added as extra points.
        simulators: Simulators every point runs on.
        samples: Random samples per point.
        seed: Random seed of every point.
        synth: Estimate settings.
        source: Where the file came from (for messages).
    """

    name: str
    base: Mapping[str, Any]
    matrix: Mapping[str, tuple[Any, ...]]
    exclude: tuple[Mapping[str, Any], ...] = ()
    include: tuple[Mapping[str, Any], ...] = ()
    simulators: tuple[str, ...] = (DEFAULT_SIMULATOR,)
    samples: int = 4000
    seed: int = 1
    synth: SynthSettings = field(default_factory=SynthSettings)
    source: str = ""

    def as_dict(self) -> dict[str, Any]:
        """JSON form, also the input of :meth:`digest`."""
        return {
            "name": self.name,
            "base": dict(self.base),
            "matrix": {k: list(v) for k, v in self.matrix.items()},
            "exclude": [dict(e) for e in self.exclude],
            "include": [dict(i) for i in self.include],
            "simulators": list(self.simulators),
            "samples": self.samples,
            "seed": self.seed,
            "synth": {
                "targets": list(self.synth.targets),
                "place_and_route": self.synth.place_and_route,
                "clock_mhz": self.synth.clock_mhz,
            },
        }

    def digest(self) -> str:
        """Hash of the sweep's content: shards of one sweep share it, so merges can check it."""
        text = json.dumps(self.as_dict(), sort_keys=True)
        return hashlib.sha256(text.encode()).hexdigest()[:16]


def _bad(where: str, key: str, value: Any, allowed: str, fix: str) -> SweepError:
    return SweepError(where, [f"[{one_line(key, 80)}] = {show_value(value)} is not valid: {allowed}. Fix: {fix}"])


def _scalar(value: Any) -> bool:
    return isinstance(value, str | int | float | bool)


def _file_safe(text: str) -> str:
    """``text`` as a sweep name: runs of other characters become '_' (``"sweep"`` if none is left)."""
    return re.sub(r"[^A-Za-z0-9_.-]+", "_", text).strip("_.-")[:100] or "sweep"


def parse_sweep(raw: Mapping[str, Any], *, source: str = "") -> SweepSpec:
    """Check the shape of a sweep file's tables (the points are checked by :func:`expand`).

    Raises:
        SweepError: naming the table, the key, the value and the fix.
    """
    for key in raw:
        if key not in _TOP_KEYS:
            raise _bad(source, key, raw[key], "not a sweep table; use " + ", ".join(_TOP_KEYS),
                       f"remove '{key}', or move it under [base] if it is a core field")
    sweep = raw.get("sweep", {})
    if not isinstance(sweep, Mapping):
        raise _bad(source, "sweep", sweep, "a table", "write it as a [sweep] section")
    for key in sweep:
        if key not in _SWEEP_KEYS:
            raise _bad(source, f"sweep.{key}", sweep[key], "known keys are " + ", ".join(_SWEEP_KEYS),
                       f"remove '{key}' (core fields belong in [base] or [matrix])")
    if "name" in sweep:
        name = sweep["name"]
        if not isinstance(name, str) or not re.fullmatch(r"[A-Za-z0-9_.-]{1,100}", name):
            better = _file_safe(name if isinstance(name, str) else "")
            raise _bad(source, "sweep.name", name, "1 to 100 letters, digits, '_', '-', '.'", f'name = "{better}"')
    else:
        # Not written: named after the file, made file-safe ("my core.toml" -> "my_core").
        name = _file_safe(Path(source).stem if source else "")
    sims = sweep.get("simulators", [_default_simulator(raw.get("base"))])
    if isinstance(sims, str):
        sims = [sims]
    if not isinstance(sims, list) or not sims or any(s not in ALL_SIMULATORS for s in sims):
        raise _bad(source, "sweep.simulators", sims, "a non-empty list from " + ", ".join(ALL_SIMULATORS),
                   'e.g. simulators = ["icarus", "verilator"]')
    if len(set(sims)) != len(sims):
        raise _bad(source, "sweep.simulators", sims, "each simulator once", "remove the repeated name")
    samples = sweep.get("samples", 4000)
    if isinstance(samples, bool) or not isinstance(samples, int) or not 1 <= samples <= 100_000_000:
        raise _bad(source, "sweep.samples", samples, "a whole number from 1 to 1e8", "e.g. samples = 4000")
    seed = sweep.get("seed", 1)
    if isinstance(seed, bool) or not isinstance(seed, int) or not 0 <= seed < 2**31:
        raise _bad(source, "sweep.seed", seed, "a whole number from 0 to 2**31-1",
                   "e.g. seed = 1 (a fixed seed lets an unchanged sweep hit the cache)")

    synth_raw = raw.get("synth", {})
    if not isinstance(synth_raw, Mapping):
        raise _bad(source, "synth", synth_raw, "a table", "write it as a [synth] section")
    for key in synth_raw:
        if key not in _SYNTH_KEYS:
            raise _bad(source, f"synth.{key}", synth_raw[key], "known keys are " + ", ".join(_SYNTH_KEYS),
                       f"remove '{key}'")
    targets = synth_raw.get("targets", [])
    if isinstance(targets, str):
        targets = [targets]
    if not isinstance(targets, list) or any(t not in SYNTH_TARGETS for t in targets):
        raise _bad(source, "synth.targets", targets, "a list from " + ", ".join(SYNTH_TARGETS),
                   'e.g. targets = ["ice40", "ecp5"], or [] for no estimates')
    pnr = synth_raw.get("place_and_route", False)
    if not isinstance(pnr, bool):
        raise _bad(source, "synth.place_and_route", pnr, "true or false", "write place_and_route = true")
    clock = synth_raw.get("clock_mhz", 100.0)
    if isinstance(clock, bool) or not isinstance(clock, int | float) or not 1 <= clock <= 2000:
        raise _bad(source, "synth.clock_mhz", clock, "a number of MHz from 1 to 2000", "e.g. clock_mhz = 100")

    base = raw.get("base")
    if not isinstance(base, Mapping) or not base:
        raise _bad(source, "base", base, "a table holding one core config",
                   f'add a [base] section with at least name = "..." and function = "{FUNCTION_NAMES[0]}"')
    if SIMULATOR_KEY in base:
        raise _bad(source, "base.simulator", base[SIMULATOR_KEY], "not a core field",
                   "list simulators under [sweep] simulators = [...]")
    matrix_raw = raw.get("matrix", {})
    if not isinstance(matrix_raw, Mapping):
        raise _bad(source, "matrix", matrix_raw, "a table of field = [values]", "e.g. pipeline_depth = [1, 2, 4]")
    matrix: dict[str, tuple[Any, ...]] = {}
    for key, values in matrix_raw.items():
        if key == SIMULATOR_KEY:
            raise _bad(source, "matrix.simulator", values, "simulators are not a core field",
                       "list them under [sweep] simulators = [...]")
        if not isinstance(values, list) or not values or not all(_scalar(v) for v in values):
            raise _bad(source, f"matrix.{key}", values, "a non-empty list of values",
                       f"write {key} = [value1, value2]")
        if len(set(map(repr, values))) != len(values):
            raise _bad(source, f"matrix.{key}", values, "each value once", "remove the repeated value")
        matrix[key] = tuple(values)

    def tables(key: str) -> tuple[dict[str, Any], ...]:
        items = raw.get(key, [])
        if not isinstance(items, list) or not all(isinstance(i, Mapping) and i for i in items):
            raise _bad(source, key, items, f"a list of [[{key}]] tables, each with at least one key",
                       f"write [[{key}]] followed by field = value lines")
        for item in items:
            for k, v in item.items():
                if not _scalar(v):
                    raise _bad(source, f"{key}.{k}", v, "a single value", f"give one value per [[{key}]] table")
        return tuple(dict(i) for i in items)

    return SweepSpec(
        name=name,
        base=dict(base),
        matrix=matrix,
        exclude=tables("exclude"),
        include=tables("include"),
        simulators=tuple(sims),
        samples=samples,
        seed=seed,
        synth=SynthSettings(targets=tuple(dict.fromkeys(targets)), place_and_route=pnr, clock_mhz=float(clock)),
        source=source,
    )


def load_sweep(path: str | Path) -> SweepSpec:
    """Read a sweep file.

    Raises:
        SweepError: if the file is missing, not TOML or badly shaped.
    """
    path = Path(path)
    try:
        raw = read_toml(path, what="sweep file", example="sim_projects/sweeps/")
    except ConfigError as exc:  # missing, unreadable, not TOML, nested too deeply
        raise SweepError(str(path), [f"{one_line(str(exc.value))}: {exc.allowed}. Fix: {exc.fix}"]) from None
    if "base" not in raw and "name" in raw and "function" in raw:
        # A plain core config is a sweep of one point: one report format for one run or many.
        raw = {"base": raw}
    return parse_sweep(raw, source=str(path))


def _slug(value: Any) -> str:
    text = str(value).lower() if isinstance(value, bool) else str(value)
    return re.sub(r"[^A-Za-z0-9._]+", "-", text).strip("-") or "x"


def _matches(selector: Mapping[str, Any], core: Mapping[str, Any], simulator: str) -> bool:
    for key, want in selector.items():
        have = simulator if key == SIMULATOR_KEY else core.get(key)
        if have != want:
            return False
    return True


def expand(spec: SweepSpec, *, validate: bool = True) -> list[Point]:
    """Every point of the sweep, in a fixed order, each validated before any is run.

    Order: matrix combinations in file order (the last key varies fastest), then includes;
    simulators vary fastest of all. Exclusions apply to matrix points and includes alike.

    Raises:
        SweepError: listing each point whose config or sizing is refused, with field and value.
    """
    axes_keys = list(spec.matrix)
    cores: list[tuple[dict[str, Any], dict[str, Any]]] = []
    for combo in itertools.product(*spec.matrix.values()):
        axes = dict(zip(axes_keys, combo, strict=True))
        cores.append(({**spec.base, **axes}, axes))
    for k, extra in enumerate(spec.include):
        # An include names its own axes; keys it shares with the matrix keep their plot columns.
        cores.append(({**spec.base, **extra}, {"include": k + 1, **extra}))
    points: list[Point] = []
    seen: set[str] = set()
    for core, axes in cores:
        core_id = "_".join(f"{_slug(k)}-{_slug(v)}" for k, v in axes.items()) or "base"
        for sim in spec.simulators:
            if any(_matches(sel, core, sim) for sel in spec.exclude):
                continue
            point = Point(core=core, simulator=sim, axes=axes, core_id=core_id)
            if point.point_id in seen:
                continue
            seen.add(point.point_id)
            points.append(point)
    where = spec.source
    if not points:
        raise SweepError(where, ["the exclusions remove every point; loosen an [[exclude]] table"])
    if len(points) > MAX_POINTS:
        raise SweepError(where, [f"{len(points)} points is more than {MAX_POINTS}; split the sweep"])
    if validate:
        problems = validate_points(points)
        if problems:
            raise SweepError(where, problems)
    return points


def validate_points(points: list[Point]) -> list[str]:
    """Check every distinct core as ``benchgen generate`` would, and that each point's simulator
    reads a language the core is written in; one line per refused point."""
    by_core: dict[str, Point] = {}
    for p in points:
        by_core.setdefault(p.core_id, p)
    problems: list[str] = []
    languages: dict[str, tuple[str, ...]] = {}
    for core_id, p in by_core.items():
        label = " ".join(f"{k}={v}" for k, v in p.axes.items()) or core_id
        try:
            spec = parse_config(p.core)
            check_module_name(build_design(spec))
            languages[core_id] = spec.hdl
        except ConfigError as exc:
            problems.append(
                f"point {label}: field '{one_line(exc.field, 80)}' = {show_value(exc.value)}: "
                f"{one_line(exc.allowed, 600)}. Fix: {one_line(exc.fix, 600)}"
            )
    for p in points:
        hdl = languages.get(p.core_id)
        if hdl is None:
            continue
        reads = "vhdl" if p.simulator in VHDL_SIMULATORS else "verilog"
        if reads not in hdl:
            label = " ".join(f"{k}={v}" for k, v in p.axes.items()) or p.core_id
            shown = json.dumps(hdl[0] if len(hdl) == 1 else list(hdl))
            language, other = ("VHDL", "icarus or verilator") if reads == "vhdl" else ("Verilog", "ghdl")
            problems.append(
                f"point {label} on {p.simulator}: {p.simulator} simulates the {language} core and hdl = {shown} "
                f'has none. Fix: set hdl = ["verilog", "vhdl"] in [base], or list {other} under [sweep] '
                "simulators instead"
            )
    return problems


def _default_simulator(base: Any) -> str:
    """Verilator, unless the base core is VHDL only (a plain core config run as a sweep)."""
    hdl = base.get("hdl") if isinstance(base, Mapping) else None
    return VHDL_SIMULATORS[0] if hdl in ("vhdl", ["vhdl"]) else DEFAULT_SIMULATOR
