"""Build a generated project with the cocotb Python runner and run its bench.

The runner builds in ``DIR/build/<simulator>``; the bench writes one JSON line per test, which is
pooled here into the run's report.
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import secrets
import shutil
import sys
import tempfile
import time
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from benchgen.bench.bulk_plan import FULL_RATE_TESTS, bulk_plan, bulk_run_args
from benchgen.bench.scoreboard import CSV_ENV, RESULTS_ENV, SAMPLES_ENV
from benchgen.errors import BenchgenError
from benchgen.functions import function_of
from benchgen.harness import bulk_files, bulk_layout
from benchgen.project import ProjectError, design_from_manifest, load_manifest
from benchgen.simulators import SIMULATORS, VHDL_SIMULATORS, SimulatorMissing, find_simulator, simulator_env
from benchgen.waves import (
    CLOCK_NS,
    DEFAULT_LIMIT_MB,
    FAR_NS,
    WavesError,
    WavesPlan,
    estimate_bytes,
    estimate_clocks,
    no_window,
    signal_bits,
    too_large,
    waves_file,
    write_watcher,
)

__all__ = ["BULK_ENGINES", "SimError", "SimReport", "duration", "run_sim", "space_free_build_dir"]

BULK_ENGINES = ("auto", "native", "cocotb")


class SimError(BenchgenError):
    """The simulation could not run (as opposed to: it ran and found mismatches)."""

    exit_status = 3


@dataclass
class SimReport:
    """Outcome of one simulation run.

    Attributes:
        simulator: ``icarus`` or ``verilator``.
        simulator_version: Its version.
        toplevel: Core module name.
        seed: Seed of the run (reproduces it with ``--seed``).
        passed: Whether every test passed.
        tests: Tests run; failed: tests failed.
        samples: Output samples compared with the model, over all tests.
        mismatches: Samples that differed from the model in any bit.
        max_error_lsb / rms_error_lsb: Error against the ideal, pooled.
        error_budget_lsb: The budget from the manifest.
        latency_cycles: Latency measured at full rate (None if not measured).
        expected_latency_cycles: From the manifest.
        cycles_per_sample: Measured input spacing at full rate.
        expected_cycles_per_sample: From the manifest.
        sim_seconds: Wall time of the test run (build excluded).
        build_seconds: Wall time of the build.
        problems: What failed, with the first mismatches.
        log_file: The simulator's log.
        mode: ``per-clock``, ``bulk`` or ``bulk, exhaustive``.
        engine: What drove the bench: ``cocotb`` or ``C++ runner`` (Verilator bulk runs).
        over_budget: Judged output values whose error against the ideal is not below the
            budget, over all tests.
        worst_sample: The sample with the largest error against the ideal: its port, error,
            sample number and inputs (None when nothing was judged).
        waves_file: The waveform dump written, if any (:mod:`benchgen.waves`).
        waves_note: What the dump holds, or why none was written.
    """

    simulator: str
    simulator_version: str
    toplevel: str
    seed: int
    passed: bool = False
    tests: int = 0
    failed: int = 0
    samples: int = 0
    mismatches: int = 0
    max_error_lsb: float = 0.0
    rms_error_lsb: float = 0.0
    error_budget_lsb: float = 0.0
    latency_cycles: int | None = None
    expected_latency_cycles: int = 0
    cycles_per_sample: float | None = None
    expected_cycles_per_sample: int = 0
    sim_seconds: float = 0.0
    build_seconds: float = 0.0
    problems: list[str] = field(default_factory=list)
    per_test: list[dict[str, Any]] = field(default_factory=list)
    log_file: str = ""
    mode: str = "per-clock"
    engine: str = "cocotb"
    over_budget: int = 0
    worst_sample: dict[str, Any] | None = None
    waves_file: str = ""
    waves_note: str = ""

    def as_dict(self) -> dict[str, Any]:
        """JSON form (the keys of ``--json``)."""
        return {
            "simulator": self.simulator,
            "simulator_version": self.simulator_version,
            "mode": self.mode,
            "engine": self.engine,
            "toplevel": self.toplevel,
            "seed": self.seed,
            "passed": self.passed,
            "tests": self.tests,
            "failed": self.failed,
            "samples": self.samples,
            "mismatches": self.mismatches,
            "max_error_lsb": round(self.max_error_lsb, 6),
            "rms_error_lsb": round(self.rms_error_lsb, 6),
            "error_budget_lsb": self.error_budget_lsb,
            "over_budget": self.over_budget,
            "worst_sample": self.worst_sample,
            "latency_cycles": self.latency_cycles,
            "expected_latency_cycles": self.expected_latency_cycles,
            "cycles_per_sample": self.cycles_per_sample,
            "expected_cycles_per_sample": self.expected_cycles_per_sample,
            "sim_seconds": round(self.sim_seconds, 3),
            "build_seconds": round(self.build_seconds, 3),
            "problems": self.problems,
            "waves_file": self.waves_file or None,
            "waves_note": self.waves_note or None,
            "per_test": self.per_test,
        }

    def _worst_inputs(self) -> str:
        if not self.worst_sample:
            return "-"
        w = self.worst_sample
        inputs = ", ".join(f"{k}={v}" for k, v in w["inputs"].items() if k != "in_tag")
        return f"{inputs} ({w['port']}, {w['error_lsb']:.4f} LSB)"

    def rows(self) -> list[tuple[str, str]]:
        """The summary as (label, value) pairs: the terminal table and the HTML report show these."""
        lat = "-" if self.latency_cycles is None else str(self.latency_cycles)
        cps = "-" if self.cycles_per_sample is None else f"{self.cycles_per_sample:g}"
        return [
            ("core", self.toplevel),
            ("bench mode", f"{self.mode} ({self.engine})"),
            ("simulator", f"{self.simulator} {self.simulator_version}"),
            ("seed", str(self.seed)),
            ("tests passed", f"{self.tests - self.failed} of {self.tests}"),
            ("samples checked", str(self.samples)),
            ("mismatches vs model", str(self.mismatches)),
            ("worst error vs ideal", f"{self.max_error_lsb:.4f} LSB (budget {self.error_budget_lsb} LSB)"),
            ("  at input", self._worst_inputs()),
            ("samples over budget", str(self.over_budget)),
            ("RMS error vs ideal", f"{self.rms_error_lsb:.4f} LSB"),
            ("latency", f"{lat} clocks (manifest {self.expected_latency_cycles})"),
            ("cycles per sample", f"{cps} (manifest {self.expected_cycles_per_sample})"),
            ("build / sim time", f"{duration(self.build_seconds)} / {duration(self.sim_seconds)}"),
        ]

    def table(self) -> str:
        """A short human-readable summary."""
        verdict = "PASS" if self.passed else "FAIL"
        rows = self.rows()
        width = max(len(k) for k, _ in rows)
        lines = [f"  {k:<{width}}  {v}" for k, v in rows]
        out = "\n".join(lines) + f"\n  result: {verdict}"
        if self.problems:
            out += "\n\nProblems:\n" + "\n".join(f"- {p}" for p in self.problems)
        return out


def duration(seconds: float) -> str:
    """A wall time for people: milliseconds below a second, so a real 20 ms build (Icarus
    compiles a core to its bytecode that fast) does not read as "0.0 s", as if nothing ran."""
    if seconds >= 1.0:
        return f"{seconds:.1f} s"
    if seconds >= 0.0005:
        return f"{seconds * 1000:.0f} ms"
    return "under 1 ms"


@contextlib.contextmanager
def _env(values: dict[str, str]) -> Iterator[None]:
    saved = {k: os.environ.get(k) for k in values}
    os.environ.update(values)
    try:
        yield
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


@contextlib.contextmanager
def _sys_path(folder: Path) -> Iterator[None]:
    sys.path.insert(0, str(folder))
    try:
        yield
    finally:
        with contextlib.suppress(ValueError):
            sys.path.remove(str(folder))


def run_sim(
    project_dir: str | Path,
    *,
    simulator: str,
    samples: int = 20_000,
    seed: int | None = None,
    waves: bool = False,
    csv_path: str | Path | None = None,
    build_dir: str | Path | None = None,
    mode: str = "auto",
    exhaustive: bool = False,
    bulk_engine: str = "auto",
    waves_window: int | None = None,
    waves_limit_mb: float = DEFAULT_LIMIT_MB,
) -> SimReport:
    """Build and simulate a project; return what the bench measured.

    ``mode`` is ``per-clock`` (the cocotb stream bench), ``bulk`` (the HDL harness streams whole
    blocks; see :mod:`benchgen.bench.bulk`) or ``auto`` (bulk from :data:`BULK_FROM_SAMPLES`
    samples on, and for ``exhaustive``, which checks every input code).

    ``bulk_engine`` picks how a bulk run is driven: ``auto`` (a generated C++ runner on Verilator,
    see :mod:`benchgen.bench.bulk_native`, unless waves are asked for; cocotb on Icarus),
    ``native`` or ``cocotb``.

    ``waves`` dumps the whole run to ``<build folder>/<core>.fst`` (Icarus) or ``.vcd``
    (Verilator), refused before anything runs when the estimated size passes
    ``waves_limit_mb``; ``waves_window=N`` instead runs without waves and, if a sample differs
    from the model, reruns the same seed dumping only the N clocks either side of the first such
    sample (:mod:`benchgen.waves`). Where the dump went is ``report.waves_file``.

    Raises:
        SimError: if the simulator is missing or the run could not start.
        ProjectError: if the folder is not a (current) benchgen project.
    """
    if simulator not in SIMULATORS + VHDL_SIMULATORS:
        raise SimError(f"unknown simulator '{simulator}': use one of {', '.join(SIMULATORS + VHDL_SIMULATORS)}")
    if samples < 1:
        raise SimError(f"--samples {samples}: give a positive number of samples")
    bulk = bulk_plan(mode, samples, exhaustive)
    if bulk_engine not in BULK_ENGINES:
        raise SimError(f"bulk engine '{bulk_engine}': use one of {', '.join(BULK_ENGINES)}")
    if waves_window is not None:
        if waves_window < 1:
            raise WavesError(
                f"--waves-window {waves_window}: give a positive number of clocks, e.g. --waves-window 100"
            )
        waves = False  # the first run dumps nothing; a rerun dumps the window (below)
    native = bulk and simulator == "verilator" and (bulk_engine == "native" or (bulk_engine == "auto" and not waves))
    if native and waves:
        raise SimError("the native bulk runner records no waves; drop --waves or use the cocotb bulk engine")
    if bulk_engine == "native" and bulk and simulator != "verilator":
        raise SimError("the native bulk runner needs Verilator; use --simulator verilator")
    project = Path(project_dir).resolve()
    manifest = load_manifest(project)
    design = design_from_manifest(manifest)
    _check_language(manifest, simulator)
    if bulk and function_of(design.datapath).free_running(design.datapath):
        if mode != "auto" or exhaustive:
            raise SimError(
                f"--mode {mode}{' --exhaustive' if exhaustive else ''}: a free-running core has no input stream "
                "for the bulk harness to feed; use --mode per-clock (docs/nco.md)"
            )
        bulk = native = False  # auto: the per-clock bench, the only one a free-running core has
    if waves_window is not None and simulator in VHDL_SIMULATORS:
        raise no_window(simulator)
    if waves:
        # Before anything is built or simulated: a dump too large to keep must not cost a run.
        _check_waves_size(project, manifest, design, simulator, samples, bulk, exhaustive, waves_limit_mb)
    try:
        info = find_simulator(simulator)
    except SimulatorMissing as exc:
        raise SimError(str(exc)) from None

    top = manifest["toplevel"]
    folder = simulator + ("_native" if native else "_bulk" if bulk else "")
    build = Path(build_dir).resolve() if build_dir else project / "build" / folder
    if simulator == "verilator":
        build = space_free_build_dir(build)
    build.mkdir(parents=True, exist_ok=True)
    # The bench appends one line per test to its results file. Each run gets files of its own
    # (a fresh name), published under the usual names with os.replace when the run is over: a
    # second run in the same folder, at once or later, can then never add its lines to this one's.
    run_files = _RunFiles(build)
    results_jsonl = run_files.results_jsonl
    results_xml = run_files.results_xml
    csv_tmp = run_files.samples_csv
    log_file = build / "sim.log"
    if seed is None:
        seed = int(time.time()) % 1_000_000
    report = SimReport(
        simulator=simulator,
        simulator_version=info.version,
        toplevel=top,
        seed=seed,
        error_budget_lsb=design.spec.max_error_lsb,
        expected_latency_cycles=design.timing.latency_cycles,
        expected_cycles_per_sample=design.timing.cycles_per_sample,
        log_file=str(log_file),
    )
    plan = None
    if waves:
        plan = WavesPlan(path=waves_file(build, top, simulator))
        plan.path.unlink(missing_ok=True)  # an older run's dump must not pass for this one's
    with run_files:
        if native:
            report.mode = "bulk, exhaustive" if exhaustive else "bulk"
            report.engine = "C++ runner"
            csv_out = csv_tmp if csv_path else None
            _run_native(report, project, manifest, design, info, build, samples, exhaustive, results_jsonl, csv_out)
        else:
            _run_cocotb(report, project, manifest, info, build, samples, seed, plan, bulk, exhaustive,
                        results_jsonl, results_xml, csv_tmp if csv_path else None, log_file)
        _copy_csv(csv_tmp, csv_path)
    if plan is not None:
        report.waves_file = str(plan.path)
        report.waves_note = "the whole run"
    if waves_window is not None:
        _window_waves(report, project, manifest, info, build, samples, seed, bulk, exhaustive, waves_window)
    return report


def _check_waves_size(project: Path, manifest: dict[str, Any], design: Any, simulator: str, samples: int,
                      bulk: bool, exhaustive: bool, limit_mb: float) -> None:
    """Refuse, before anything runs, a whole-run dump estimated past ``limit_mb``."""
    from benchgen.functions import bench_corners, input_space_bits

    if simulator in VHDL_SIMULATORS:
        sources = [project / rel for rel in manifest["files"]["vhdl"]]
    else:
        sources = [project / rel for rel in manifest["files"]["rtl"]]
    if bulk:
        names = bulk_files(manifest)
        sources.append(project / (names.vhdl if simulator in VHDL_SIMULATORS else names.rtl))
    bits = signal_bits([p for p in sources if p.is_file()])
    corners = len(next(iter(bench_corners(design.datapath).values())))
    clocks = estimate_clocks(
        samples=samples, cycles_per_sample=design.timing.cycles_per_sample, latency=design.timing.latency_cycles,
        bulk=bulk, exhaustive=exhaustive, space_bits=input_space_bits(design.datapath), corners=corners,
    )
    size = estimate_bytes(clocks, bits, simulator)
    if size > limit_mb * 1e6:
        raise too_large(size, limit_mb, clocks, bits, fix_window=simulator not in VHDL_SIMULATORS)


def _window_waves(report: SimReport, project: Path, manifest: dict[str, Any], info: Any, build: Path, samples: int,
                  seed: int, bulk: bool, exhaustive: bool, clocks: int) -> None:
    """Rerun a failed run with the same seed, dumping only ``clocks`` clocks either side of the
    first sample that differed from the model (:mod:`benchgen.waves`)."""
    failures = [(t["test"], t["first_failure"]) for t in report.per_test if t.get("first_failure")]
    if not failures:
        report.waves_note = (
            "no waves written: no sample differed from the model"
            + (" (the run failed otherwise; --waves dumps the whole run)" if not report.passed else "")
        )
        return
    top = manifest["toplevel"]
    simulator = report.simulator
    window_build = build.with_name(build.name.replace("_native", "_bulk") + "_window")
    window_build.mkdir(parents=True, exist_ok=True)
    path = waves_file(window_build, top, simulator)
    path.unlink(missing_ok=True)
    test, where = failures[0]
    if "time_ns" in where:
        at = int(where["time_ns"])
    else:
        # Bulk: the block number over the whole run (the tests run one after another, each
        # counting its own blocks), then a rerun that stops where that output is taken.
        earlier = report.per_test[: [t["test"] for t in report.per_test].index(test)]
        block = sum(int(t.get("blocks", 0)) for t in earlier)
        found = window_build / "first_failure_time.txt"
        found.unlink(missing_ok=True)
        find = WavesPlan(path=path, start_ns=FAR_NS, find=(block + int(where["block"]), int(where["output"])),
                         found=found)
        _rerun(report, project, manifest, info, window_build, samples, seed, find, bulk, exhaustive)
        if not found.is_file():
            report.waves_note = (
                f"no waves written: the rerun did not reach the first failure (see {window_build / 'sim.log'})"
            )
            return
        # The watcher sees `received` step to k + 1 one edge after output k was handed over.
        at = int(found.read_text().split()[0]) - CLOCK_NS
    start = max(0, at - clocks * CLOCK_NS)
    plan = WavesPlan(path=path, start_ns=start, stop_ns=at + clocks * CLOCK_NS)
    _rerun(report, project, manifest, info, window_build, samples, seed, plan, bulk, exhaustive)
    if not path.is_file():
        report.waves_note = f"no waves written: the rerun wrote no dump (see {window_build / 'sim.log'})"
        return
    report.waves_file = str(path)
    report.waves_note = (f"{clocks} clocks either side of the first mismatch ({test}, output at {at} ns): "
                         f"{start} ns to {at + clocks * CLOCK_NS} ns")


def _rerun(report: SimReport, project: Path, manifest: dict[str, Any], info: Any, build: Path, samples: int,
           seed: int, plan: WavesPlan, bulk: bool, exhaustive: bool) -> None:
    """The run again, on the cocotb engine, with the watcher doing what ``plan`` says. Its
    verdicts are thrown away: the watcher ends it early on purpose."""
    scratch = SimReport(simulator=report.simulator, simulator_version=report.simulator_version,
                        toplevel=report.toplevel, seed=seed)
    with _RunFiles(build) as files:
        with contextlib.suppress(SimError, RuntimeError):
            _run_cocotb(scratch, project, manifest, info, build, samples, seed, plan, bulk, exhaustive,
                        files.results_jsonl, files.results_xml, None, build / "sim.log")


def _check_language(manifest: dict[str, Any], simulator: str) -> None:
    """Refuse a simulator whose language the project's core is not written in."""
    if simulator in VHDL_SIMULATORS and not manifest["files"].get("vhdl"):
        raise SimError(
            f"{simulator} simulates the VHDL core and this project has none: set "
            'hdl = ["verilog", "vhdl"] in config.toml and regenerate, or use --simulator verilator'
        )
    if simulator in SIMULATORS and not manifest["files"]["rtl"]:
        raise SimError(
            f'{simulator} simulates the Verilog core and this project has none (hdl = "vhdl"): use '
            '--simulator ghdl, or set hdl = ["verilog", "vhdl"] in config.toml and regenerate'
        )


class _RunFiles:
    """The files one run's bench writes, under names no other run uses, published at the end.

    Inside the ``with`` block the bench writes ``.bench_results.<run>.jsonl`` (and the results
    XML and the sample CSV likewise); on leaving it, each is moved over its usual name
    (``bench_results.jsonl``, ``results.xml``, ``samples.csv``) by ``os.replace``, so a reader
    sees one whole run's file. A file the run did not write (or a run that ended in an error)
    removes the old one of that name, which belongs to an earlier run.
    """

    NAMES = ("bench_results.jsonl", "results.xml", "samples.csv")

    def __init__(self, build: Path) -> None:
        token = f"{os.getpid()}-{secrets.token_hex(4)}"
        self.finals = [build / n for n in self.NAMES]
        self.tmps = [build / f".{Path(n).stem}.{token}{Path(n).suffix}" for n in self.NAMES]
        self.results_jsonl, self.results_xml, self.samples_csv = self.tmps

    def __enter__(self) -> _RunFiles:
        return self

    def __exit__(self, exc_type: object, exc: object, tb: object) -> None:
        for tmp, final in zip(self.tmps, self.finals, strict=True):
            if exc_type is None and tmp.is_file():
                os.replace(tmp, final)
            else:
                tmp.unlink(missing_ok=True)
                final.unlink(missing_ok=True)


def _run_cocotb(
    report: SimReport,
    project: Path,
    manifest: dict[str, Any],
    info: Any,
    build: Path,
    samples: int,
    seed: int,
    plan: WavesPlan | None,
    bulk: bool,
    exhaustive: bool,
    results_jsonl: Path,
    results_xml: Path,
    csv_tmp: Path | None,
    log_file: Path,
) -> None:
    from cocotb_tools.check_results import get_results
    from cocotb_tools.runner import get_runner

    top = manifest["toplevel"]
    simulator = report.simulator
    sources = [project / rel for rel in manifest["files"]["rtl"]]
    build_args: list[str] = []
    test_args: list[str] = []
    run_options: list[str] = []
    if simulator in VHDL_SIMULATORS:
        sources = [project / rel for rel in manifest["files"]["vhdl"]]
        # Analysis and elaboration both need the standard the library was built with.
        build_args, test_args = list(info.build_args), list(info.build_args)
        # numeric_std's warnings only from the first clock on: at time 0 the inputs are still
        # undriven and it warns of every 'U' it compares. A run option, so after the unit name,
        # where the runner puts plusargs.
        run_options = ["--ieee-asserts=disable-at-0"]
    test_module, hdl_top, testcase = manifest["files"]["test_module"], top, None
    if bulk:
        sources, test_module, hdl_top, build_args, testcase = bulk_run_args(project, manifest, info.name, exhaustive)
        report.mode = "bulk, exhaustive" if exhaustive else "bulk"
    bench_env = {SAMPLES_ENV: str(samples), RESULTS_ENV: str(results_jsonl)}
    if csv_tmp:
        bench_env[CSV_ENV] = str(csv_tmp)
    plusargs: list[str] = []
    if plan is not None and simulator in VHDL_SIMULATORS:
        # GHDL dumps the whole run itself, to the file its run option names (no watcher: VHDL
        # cannot start a dump mid-run, so a window is refused before the run).
        run_options = [*run_options, f"--wave={plan.path}"]
    elif plan is not None:
        index_width = bulk_layout(top, design_from_manifest(manifest).ports).index_width if bulk else 1
        watcher, watcher_args = write_watcher(build, simulator, hdl_top, bulk=bulk, index_width=index_width)
        sources = [*sources, watcher]
        build_args = [*build_args, *watcher_args]
        plusargs = plan.plusargs()
    # Verilator compiles tracing in when built with waves (the watcher then opens the dump);
    # Icarus needs vvp's -fst at run time, which the runner adds for a test with waves.
    build_waves = plan is not None and simulator == "verilator"
    test_waves = plan is not None and simulator == "icarus"
    with simulator_env(info), _env(bench_env), _sys_path(project / "bench"):
        runner = get_runner(simulator)
        t0 = time.perf_counter()
        try:
            runner.build(
                sources=sources,
                hdl_toplevel=hdl_top,
                build_args=build_args,
                build_dir=build,
                always=True,
                timescale=("1ns", "1ps"),
                waves=build_waves,
                log_file=build / "build.log",
            )
        except (SystemExit, Exception) as exc:  # the runner exits on a failed build
            raise SimError(
                f"{simulator} could not build {top} ({exc}); see {build / 'build.log'}"
            ) from None
        t1 = time.perf_counter()
        try:
            runner.test(
                test_module=test_module,
                testcase=testcase,
                hdl_toplevel=hdl_top,
                build_dir=build,
                test_dir=build,
                seed=seed,
                waves=test_waves,
                test_args=test_args,
                plusargs=[*run_options, *plusargs],
                results_xml=str(results_xml),
                timescale=("1ns", "1ps"),
                log_file=log_file,
            )
        except SystemExit:
            pass  # under pytest the runner exits on a failing test; results.xml still tells
        t2 = time.perf_counter()
    report.build_seconds = t1 - t0
    report.sim_seconds = t2 - t1
    if not results_xml.is_file():
        raise SimError(f"the simulation wrote no results; see {log_file}")
    tests, failed = get_results(results_xml)
    report.tests, report.failed = tests, failed
    per_test = []
    if results_jsonl.is_file():
        per_test = [json.loads(line) for line in results_jsonl.read_text().splitlines() if line.strip()]
    report.per_test = per_test
    _pool(report, per_test)
    if tests == 0:
        report.problems.append("no test ran")
    if len(per_test) < tests:
        report.problems.append(
            f"{tests - len(per_test)} test(s) ended before reporting (an exception or timeout); see {log_file}"
        )
    report.passed = tests > 0 and failed == 0 and report.mismatches == 0 and not report.problems


def _copy_csv(written: Path, wanted: str | Path | None) -> None:
    # Copied in chunks, then the build folder's copy dropped: a bulk run's CSV can be far larger
    # than memory, and two copies of it needlessly fill a disk.
    if wanted and written.is_file():
        shutil.copyfile(written, wanted)
        written.unlink()


def space_free_build_dir(build: Path) -> Path:
    """``build``, or where to build instead when its path holds a space.

    Verilator's make files stop in such a folder (its include/verilated.mk: "GNU Make cannot
    build in directories containing spaces"), while Verilator itself reads sources from one.
    The build then goes to a folder under the system's temporary folder named after ``build``'s
    path, so a re-run of the same project finds its earlier build there.

    Raises:
        ProjectError: if the temporary folder's path holds a space too.
    """
    if not any(c.isspace() for c in str(build)):
        return build
    key = hashlib.sha256(str(build).encode()).hexdigest()[:16]
    elsewhere = Path(tempfile.gettempdir()).resolve() / "benchgen-build" / key / build.name
    if any(c.isspace() for c in str(elsewhere)):
        raise ProjectError(
            f"Verilator cannot build in '{build}' (GNU make refuses a path with a space) nor in the "
            f"temporary folder '{tempfile.gettempdir()}'; move the project to a path without "
            "spaces, set TMPDIR to one, or use --simulator icarus"
        )
    return elsewhere


def _run_native(
    report: SimReport,
    project: Path,
    manifest: dict[str, Any],
    design: Any,
    info: Any,
    build: Path,
    samples: int,
    exhaustive: bool,
    results_jsonl: Path,
    csv: Path | None,
) -> None:
    from benchgen.bench.bulk_native import run_native

    run = run_native(
        project, manifest, design, info, build,
        samples=samples, seed=report.seed, exhaustive=exhaustive, results=results_jsonl,
        log_file=Path(report.log_file), csv=csv,
    )  # fmt: skip
    report.build_seconds = run.build.seconds
    report.sim_seconds = run.seconds
    report.tests, report.failed = run.tests, run.failed
    report.per_test = run.per_test
    _pool(report, run.per_test)
    if run.tests == 0:
        report.problems.append("no test ran")
    report.passed = run.tests > 0 and run.failed == 0 and report.mismatches == 0 and not report.problems


def _pool(report: SimReport, per_test: list[dict[str, Any]]) -> None:
    sum_sq = 0.0
    count = 0
    for t in per_test:
        report.samples += t["samples"]
        report.mismatches += t["mismatches"]
        report.max_error_lsb = max(report.max_error_lsb, t["max_error_lsb"])
        sum_sq += t["sum_sq_error"]
        count += t["error_count"]
        report.problems.extend(f"{t['test']}: {p}" for p in t["problems"])
        report.over_budget += int(t.get("over_budget", 0))
        w = t.get("worst_sample")
        if w and (report.worst_sample is None or w["error_lsb"] > report.worst_sample["error_lsb"]):
            report.worst_sample = {**w, "test": t["test"]}
        if t["test"] in FULL_RATE_TESTS:
            if t["latency_cycles"]:
                lo, hi = t["latency_cycles"]
                report.latency_cycles = lo if lo == hi else None
                if lo != hi:
                    report.problems.append(f"latency varied from {lo} to {hi} clocks at full rate")
                else:
                    report.latency_cycles = lo
            report.cycles_per_sample = t["cycles_per_sample"]
    if count:
        report.rms_error_lsb = (sum_sq / count) ** 0.5
