"""Bulk tests on Verilator with no cocotb in the loop: a generated C++ main clocks the harness.

The cocotb bulk bench wakes Python once per block, yet on Verilator its main loop still calls
VPI hooks at every time step, which held it to a small fraction of Verilator's own speed. Here
the harness variant (:func:`benchgen.harness.render_native_harness`) keeps the stream rules
(seeded idle gaps and stalls, tags, latency stamps, stray counts) in HDL, and a generated C++
``main`` (:func:`benchgen.harness.render_native_main`) runs its clock. One runner process serves a
whole run: Python writes commands and stimulus blocks to its standard input and reads the
counters and result words of each block from its standard output (the protocol is written at
the top of the generated ``bulk_main.cpp``). A thread keeps the next blocks queued in the pipe, so
the simulator runs while Python checks the block before.

The tests, seeds, stimulus and checks are those of the cocotb bulk bench
(:mod:`benchgen.bench.bulk_check`); results are the same JSON-lines records, each with the test's
wall time added as ``wall_seconds``.

The build goes to ``<build dir>/`` and is reused while the core sources, the generated harness
and main, the Verilator version and the flags stay the same (``build.stamp`` holds their hash).
"""

from __future__ import annotations

import gc
import hashlib
import json
import os
import queue
import subprocess
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO, Any

import numpy as np

from benchgen import __version__
from benchgen.bench.bulk_check import (
    FAULT_ENV,
    Block,
    BulkFunction,
    FaultError,
    Inputs,
    Segment,
    SegmentTally,
    Tally,
    check_block,
    check_full_rate,
    check_patterns,
    exhaustive_plan,
    full_rate_plan,
    gaps_count,
    gaps_plan,
    level,
    pack,
    parse_fault,
    unpack,
    with_tags,
)
from benchgen.bench.bulk_plan import BulkError, check_exhaustive
from benchgen.bench.scoreboard import CheckResult
from benchgen.design import Design
from benchgen.harness import (
    BulkLayout,
    bulk_layout,
    native_names,
    render_native_harness,
    render_native_main,
)
from benchgen.simulators import SimulatorInfo, simulator_env

__all__ = ["NATIVE_FLAGS", "NativeBuild", "NativeRun", "build_native", "run_native"]

NATIVE_FLAGS = ("-O3", "--x-assign", "fast", "--x-initial", "fast")
"""Verilator flags of the runner build. Every register the harness reads is written before it
matters, so fast X handling changes no result and spares the model its X bookkeeping."""

_COMMAND_END, _COMMAND_RESET, _COMMAND_BLOCK = 0, 1, 2
_REPLY_WORDS = 12
_QUEUE_BLOCKS = 3
"""Blocks the feeding thread may run ahead of the checks: enough to keep the runner busy."""


@dataclass(frozen=True)
class NativeBuild:
    """A built runner.

    Attributes:
        executable: The runner binary.
        seconds: Build wall time (0 when reused).
        reused: Whether the cached build was current.
    """

    executable: Path
    seconds: float
    reused: bool


@dataclass
class NativeRun:
    """What a native bulk run did.

    Attributes:
        build: The runner build.
        tests / failed: Tests run and failed.
        seconds: Wall time of the tests (build excluded).
        per_test: The records written, in order.
    """

    build: NativeBuild
    tests: int = 0
    failed: int = 0
    seconds: float = 0.0
    per_test: list[dict[str, Any]] = field(default_factory=list)


def _stamp(parts: list[tuple[str, str]]) -> str:
    h = hashlib.sha256()
    for name, text in parts:
        h.update(name.encode() + b"\0" + text.encode() + b"\0")
    return h.hexdigest()


def build_native(
    project: Path, manifest: dict[str, Any], layout: BulkLayout, info: SimulatorInfo, build_dir: Path
) -> NativeBuild:
    """Build the runner for a project, or reuse the build in ``build_dir`` if it is current.

    Raises:
        BulkError: if Verilator fails; the message names the build log.
    """
    module, binary = native_names(layout)
    harness = render_native_harness(layout)
    main = render_native_main(layout)
    sources = [project / rel for rel in manifest["files"]["rtl"]]
    jobs = str(max(1, min(4, os.cpu_count() or 1)))
    parts = [("benchgen", __version__), ("verilator", info.version), ("flags", " ".join(NATIVE_FLAGS))]
    parts += [(p.name, p.read_text()) for p in sources]
    parts += [("harness", harness), ("main", main)]
    key = _stamp(parts)
    build_dir.mkdir(parents=True, exist_ok=True)
    exe = build_dir / "obj" / binary
    stamp = build_dir / "build.stamp"
    if exe.is_file() and stamp.is_file() and stamp.read_text() == key:
        return NativeBuild(exe, 0.0, True)
    stamp.unlink(missing_ok=True)
    (build_dir / f"{module}.v").write_text(harness)
    (build_dir / "bulk_main.cpp").write_text(main)
    cmd = [
        str(info.executable), "--cc", "--exe", "--build", "-j", jobs, *NATIVE_FLAGS,
        "--top-module", module, "-Mdir", str(build_dir / "obj"), "-o", binary,
        *(str(p) for p in sources), str(build_dir / f"{module}.v"), str(build_dir / "bulk_main.cpp"),
    ]  # fmt: skip
    log = build_dir / "build.log"
    t0 = time.perf_counter()
    with simulator_env(info), log.open("w") as fh:
        proc = subprocess.run(cmd, stdout=fh, stderr=subprocess.STDOUT, check=False)
    seconds = time.perf_counter() - t0
    if proc.returncode != 0 or not exe.is_file():
        tail = "\n".join(log.read_text(errors="replace").splitlines()[-15:])
        raise BulkError(f"Verilator could not build the bulk runner for {layout.core}; see {log}:\n{tail}")
    stamp.write_text(key)
    return NativeBuild(exe, seconds, False)


class _RunnerGone(Exception):
    """The runner process ended or stopped answering mid-run."""


class _Session:
    """One runner process, fed by a thread, read by the checks."""

    def __init__(self, exe: Path, log: IO[bytes], layout: BulkLayout) -> None:
        self.layout = layout
        self.proc = subprocess.Popen([str(exe)], stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=log)
        assert self.proc.stdin is not None and self.proc.stdout is not None
        self.stdin = self.proc.stdin
        self.stdout = self.proc.stdout
        self.broken = False
        """Set when the command and reply streams are out of step; the runner is then killed."""

    def send(self, data: bytes) -> None:
        self.stdin.write(data)
        self.stdin.flush()

    def reset(self, seeds: tuple[int, int]) -> None:
        self.send(np.array([_COMMAND_RESET, *seeds], dtype="<u4").tobytes())

    def block(self, stim: Inputs, *, idle: float, stall: float, fault: tuple[int, int] | None) -> None:
        layout = self.layout
        n = len(next(iter(stim.values())))
        index, mask = fault if fault is not None else (0, 0)
        head = np.array(
            [_COMMAND_BLOCK, n, min(0xFFFFFFFF, 100 * (n + 64)), level(idle), level(stall), index, int(fault is not None)],
            dtype="<u4",
        ).tobytes()
        self.send(head + mask.to_bytes(layout.out_bytes, "little") + pack(layout, stim, n, big_endian=False))

    def reply(self, signed: tuple[str, ...]) -> Block:
        head = self.stdout.read(4 * _REPLY_WORDS)
        if len(head) != 4 * _REPLY_WORDS:
            raise _RunnerGone("the runner ended before it answered a block")
        w = np.frombuffer(head, dtype="<u4").astype(np.int64)
        received = int(w[3])
        raw = self.stdout.read(received * self.layout.out_bytes)
        if len(raw) != received * self.layout.out_bytes:
            raise _RunnerGone("the runner ended in the middle of a block's results")
        return Block(
            outputs=unpack(self.layout, np.frombuffer(raw, dtype=np.uint8), signed),
            loaded_bytes=int(w[1]),
            sent=int(w[2]),
            received=received,
            cycles=int(w[4]),
            lat_min=int(w[5]),
            lat_max=int(w[6]),
            first_in=int(w[7]),
            last_in=int(w[8]),
            idle_count=int(w[9]),
            stall_count=int(w[10]),
            extra_count=int(w[11]),
        )

    def close(self, *, kill: bool = False) -> int:
        """End the runner: politely after a clean run, at once when it is out of step."""
        self.broken = self.broken or kill
        if self.broken:
            self.proc.kill()
        else:
            try:
                self.send(np.array([_COMMAND_END], dtype="<u4").tobytes())
            except (BrokenPipeError, OSError, ValueError):
                pass
        for pipe in (self.stdin, self.stdout):
            try:
                pipe.close()
            except (BrokenPipeError, OSError, ValueError):
                pass
        try:
            return self.proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            return self.proc.wait()


@dataclass
class _Test:
    name: str
    salt: int
    plan: list[Segment]
    full_rate: bool
    prepare_total: int


class _NativeBench:
    def __init__(
        self,
        design: Design,
        layout: BulkLayout,
        seed: int,
        fault: tuple[int, int] | None,
        log: Path,
        csv: Path | None = None,
    ) -> None:
        self.log = log
        self.csv = csv
        self.design = design
        self.layout = layout
        self.seed = seed
        self.fault = fault
        self.function = BulkFunction(design)
        self.tag_width = design.spec.tag_width

    def rng(self, salt: int) -> np.random.Generator:
        # The same derivation as the cocotb bulk bench, so a seed means the same stimulus there.
        return np.random.default_rng([self.seed, salt])

    def _feed(self, session: _Session, test: _Test, out: queue.Queue[Any], stop: threading.Event) -> None:
        """Send the reset and every block of a test; queue each block's stimulus for the checks."""

        def hand_over(item: Any) -> bool:
            while not stop.is_set():
                try:
                    out.put(item, timeout=0.1)
                    return True
                except queue.Full:
                    continue
            return False

        try:
            seeds = self.rng(1000 + test.salt).integers(1, 1 << 32, size=2, dtype=np.uint64)
            session.reset((int(seeds[0]), int(seeds[1])))
            done = 0
            for k, segment in enumerate(test.plan):
                tags = self.rng(100 + k + 1)
                for raw in segment.blocks():
                    stim = with_tags(raw, self.tag_width, tags)
                    n = len(next(iter(stim.values())))
                    fault = None
                    if self.fault is not None and done <= self.fault[0] < done + n:
                        fault = (self.fault[0] - done, self.fault[1])
                    if not hand_over((k, stim)):
                        return
                    session.block(stim, idle=segment.idle, stall=segment.stall, fault=fault)
                    done += n
            hand_over(None)
        except BaseException as exc:  # noqa: BLE001 -- handed to the checking thread, which reports it
            hand_over(exc)

    def run_test(self, session: _Session, test: _Test) -> CheckResult:
        tally = Tally(CheckResult(test=test.name), self.seed, self.design.spec.max_error_lsb, csv=self.csv)
        self.function.restart()  # the feeder resets the core before its first block
        if (1 << self.function.space_bits) <= 4 * test.prepare_total:
            self.function.tabulate()
        pending: queue.Queue[Any] = queue.Queue(maxsize=_QUEUE_BLOCKS)
        stop = threading.Event()
        feeder = threading.Thread(target=self._feed, args=(session, test, pending, stop), daemon=True)
        feeder.start()
        # Counts per segment only: each block is checked as it arrives and then dropped, so memory
        # stays flat however many samples the test runs.
        seen = [SegmentTally() for _ in test.plan]
        signed = self.function.signed_outputs
        try:
            while (item := pending.get()) is not None:
                if isinstance(item, BaseException):
                    raise _RunnerGone(f"feeding the runner failed: {item!r}")
                k, stim = item
                n = len(next(iter(stim.values())))
                block = session.reply(signed)
                seen[k].add(block)
                where = f"{test.plan[k].label}samples {tally.offered}..{tally.offered + n - 1}"
                check_block(tally, self.function, stim, block, where, self.layout.in_bytes, timed=test.plan[k].timed)
        except _RunnerGone as exc:
            session.broken = True
            tally.result.problems.append(f"{exc} (seed {self.seed}); see {self.log}")
            return tally.finish()
        except BaseException:
            session.broken = True
            raise
        finally:
            stop.set()
            if session.broken:
                # A feeder stuck writing to a runner nobody reads from is freed by ending it.
                session.close(kill=True)
            feeder.join(timeout=5)
        extra_before = 0
        for segment, counts in zip(test.plan, seen, strict=True):
            check_patterns(tally, segment, counts, self.design.timing.latency_cycles)
            if counts.blocks:
                # The harness counts strays since the reset; report each segment's own.
                extra = counts.extra_count - extra_before
                extra_before = counts.extra_count
                if extra:
                    tally.result.problems.append(f"{segment.label}{extra} output(s) came out that no input asked for")
        result = tally.finish()
        if test.full_rate:
            check_full_rate(result, self.design)
        return result


def run_native(
    project: Path,
    manifest: dict[str, Any],
    design: Design,
    info: SimulatorInfo,
    build_dir: Path,
    *,
    samples: int,
    seed: int,
    exhaustive: bool,
    results: Path,
    log_file: Path,
    csv: Path | None = None,
) -> NativeRun:
    """Build (or reuse) the runner and run the bulk tests: full rate and gaps/stalls, or exhaustive.

    Each test appends one JSON line to ``results`` (the record of
    :class:`benchgen.bench.scoreboard.CheckResult` plus ``wall_seconds``). With ``csv``, every
    sample is appended to that file, one row each, as its block is checked.

    Raises:
        BulkError: for a bad ``BENCHGEN_BULK_FAULT``, an input space too large for an exhaustive
            run, or a failed build.
    """
    layout = bulk_layout(design.spec.name, design.ports)
    try:
        fault = parse_fault(os.environ.get(FAULT_ENV, ""), layout)
    except FaultError as exc:
        raise BulkError(str(exc)) from None
    bench = _NativeBench(design, layout, seed, fault, log_file, csv)
    fn = bench.function
    if exhaustive:
        check_exhaustive(fn.space_bits)
    build = build_native(project, manifest, layout, info, build_dir)
    run = NativeRun(build=build)
    if exhaustive:
        tests = [_Test("bulk_exhaustive", 3, exhaustive_plan(fn, layout.block, stalls=layout.out_ready), True, 1 << fn.space_bits)]
    else:
        tests = [
            _Test("bulk_full_rate", 1, full_rate_plan(fn, bench.rng(1), samples, layout.block), True, samples),
            _Test(
                "bulk_gaps_and_stalls", 2, gaps_plan(fn, bench.rng(2), samples, layout.block, stalls=layout.out_ready), False,
                gaps_count(samples),
            ),
        ]  # fmt: skip
    t_all = time.perf_counter()
    with log_file.open("wb") as log:
        log.write(f"benchgen bulk runner {build.executable} (seed {seed})\n".encode())
        log.flush()
        session = _Session(build.executable, log, layout)
        # Large arrays come and go every block; the cyclic collector finds nothing in them.
        gc.disable()
        try:
            for test in tests:
                if session.broken:
                    break
                t0 = time.perf_counter()
                result = bench.run_test(session, test)
                line = {**result.as_dict(), "wall_seconds": round(time.perf_counter() - t0, 6)}
                with results.open("a", encoding="utf-8") as fh:
                    fh.write(json.dumps(line) + "\n")
                run.per_test.append(line)
                run.tests += 1
                run.failed += bool(result.problems or result.mismatches)
                log.write(f"{test.name}: {result.samples} samples, {result.mismatches} mismatches\n".encode())
        finally:
            gc.enable()
            status = session.close()
        if status != 0:
            log.write(f"runner exit status {status}\n".encode())
    run.seconds = time.perf_counter() - t_all
    return run
