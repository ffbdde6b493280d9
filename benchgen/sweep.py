"""Run a sweep: every point simulated (and estimated) in parallel, cached, resumable, shardable.

Work is split into tasks: one *sim* task per point (a core on a simulator) and, when estimates
are asked for, one *synth* task per distinct core and device family. Each task generates its own
project in its own folder, so tasks never share a build directory.

Two stores make re-runs cheap, for different reasons:

* **Resume** (``OUT/results/``): each finished task's result is written the moment it arrives. A
  task whose result is there, with the same task key (its config, simulator, bench settings and a
  fingerprint of benchgen's code), is not run again. An interrupted sweep restarted with the same
  command picks up where it stopped. Tasks that could not run (``error``) are retried.
* **Cache** (``--cache DIR``, default ``$BENCHGEN_CACHE_DIR`` or ``~/.cache/benchgen``): keyed by a
  hash of the *generated sources* plus the simulator and its version, the samples and seed, and
  the bench code (or, for estimates, the tool versions and device). A new output folder, another
  sweep that contains the same core, or a benchgen change that leaves the Verilog alone all hit it.

One sweep at a time writes an output folder (:func:`lock_folder`); a second is refused at once.
Everything read back (cache entries, ``OUT/results``) must fit the schemas of
:mod:`benchgen.sweep_records`: a bad cache entry is a miss and is rewritten, a bad result file is
run again. Files are written whole or not at all (a private temporary file, then ``os.replace``).

Engines: a local process pool (``--jobs``, default the CPU count; ``--jobs 1`` runs in this
process), or a Dask ``distributed`` cluster (``--cluster ADDRESS``, or ``--cluster local`` to start
a ``LocalCluster`` with ``--jobs`` workers). Workers need benchgen and the simulators installed; the
results travel back to this process, which alone writes ``OUT``.
"""

from __future__ import annotations

import ast
import concurrent.futures as cf
import contextlib
import hashlib
import json
import multiprocessing
import os
import shutil
import tempfile
import time
from collections.abc import Callable, Iterable, Iterator
from dataclasses import asdict, dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any, TextIO

from benchgen import __version__
from benchgen.errors import BenchgenError
from benchgen.sweep_analysis import analyse_models
from benchgen.sweep_records import (
    MODEL_ANALYSIS_FILE,
    RESULTS_DIR,
    SWEEP_FILE,
    RecordError,
    check_cache_entry,
    check_result,
    read_json_record,
    read_result,
    read_sweep_file,
)
from benchgen.sweep_config import (
    Point,
    SweepError,
    SweepSpec,
    SynthSettings,
    expand,
    parse_sweep,
)

__all__ = [
    "SweepBusy",
    "SweepOutcome",
    "Task",
    "default_cache_dir",
    "execute_task",
    "import_closure",
    "lock_folder",
    "make_tasks",
    "merge_shards",
    "parse_shard",
    "run_sweep",
    "write_model_analysis",
]

CACHE_ENV = "BENCHGEN_CACHE_DIR"
WORK_DIR = "work"
LOCK_FILE = ".benchgen.lock"
FIRST_MISMATCHES = 8


def default_cache_dir() -> Path:
    """``$BENCHGEN_CACHE_DIR``, else ``$XDG_CACHE_HOME/benchgen``, else ``~/.cache/benchgen``."""
    if os.environ.get(CACHE_ENV):
        return Path(os.environ[CACHE_ENV])
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "benchgen"


def _sha(data: bytes | str) -> str:
    return hashlib.sha256(data.encode() if isinstance(data, str) else data).hexdigest()


def _files_digest(root: Path, paths: Iterable[Path]) -> str:
    h = hashlib.sha256()
    for p in sorted(paths):
        # The path inside the tree, not the bare name: bench/__init__.py is not __init__.py.
        h.update(p.relative_to(root).as_posix().encode() if p.is_relative_to(root) else p.name.encode())
        h.update(b"\0")
        h.update(p.read_bytes())
    return h.hexdigest()


#: Where the code that decides a simulation's verdict starts: the runner, and every bench module
#: (the generated bench imports them inside the simulator).
BENCH_ROOTS = ("benchgen.sim", "benchgen.bench.*")
#: A task's result also depends on project generation (through the API's core design, which
#: also writes the config's TOML text) and the estimate flow.
TASK_ROOTS = (*BENCH_ROOTS, "benchgen.api", "benchgen.project", "benchgen.synth")


def _module_file(pkg: Path, name: str) -> Path | None:
    """The file of module ``name`` (``benchgen.x.y``) in the package folder ``pkg``, if it is there."""
    parts = name.split(".")
    if parts[0] != pkg.name:
        return None
    base = pkg.joinpath(*parts[1:])
    for candidate in (base.with_suffix(".py"), base / "__init__.py"):
        if candidate.is_file():
            return candidate
    return None


def _module_name(pkg: Path, path: Path) -> str:
    rel = path.relative_to(pkg.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def import_closure(pkg: Path, roots: Iterable[str]) -> set[Path]:
    """Every module file of the package ``pkg`` that the ``roots`` import, directly or not.

    Imports are read from the source (``import`` and ``from ... import`` anywhere, function
    bodies included, since benchgen imports lazily), so the set is exact for a static import
    graph; benchgen has no dynamic imports. A root ending in ``.*`` stands for every module of
    that subpackage. The packages that hold a module (their ``__init__.py``) run on import, so
    they count too.
    """
    todo: list[str] = []
    for root in roots:
        if root.endswith(".*"):
            sub = pkg.joinpath(*root[:-2].split(".")[1:])
            todo += [_module_name(pkg, p) for p in sorted(sub.glob("*.py"))]
        else:
            todo.append(root)
    seen: set[Path] = set()
    while todo:
        name = todo.pop()
        parts = name.split(".")
        for k in range(1, len(parts) + 1):
            path = _module_file(pkg, ".".join(parts[:k]))
            if path is None or path in seen:
                continue
            seen.add(path)
            tree = ast.parse(path.read_bytes(), filename=str(path))
            here = _module_name(pkg, path).split(".")
            package = here if path.name == "__init__.py" else here[:-1]
            for node in ast.walk(tree):
                if isinstance(node, ast.Import):
                    todo += [a.name for a in node.names]
                elif isinstance(node, ast.ImportFrom):
                    mod = node.module or ""
                    if node.level:  # relative: counted from this module's package
                        mod = ".".join([*package[: len(package) - node.level + 1], *([mod] if mod else [])])
                    todo.append(mod)
                    todo += [f"{mod}.{a.name}" for a in node.names]  # from pkg import submodule
    return seen


_FINGERPRINTS: dict[str, str] = {}


def code_fingerprint(kind: str) -> str:
    """Hash of the benchgen code a task's result depends on.

    ``bench``: every benchgen module the simulation runner and the bench import (the judging in
    functions.py, the model, the reference, ...), found by :func:`import_closure` so that no
    module can be left out of a hand-kept list; part of the simulation cache key. ``all``: the
    same closure from the task's other steps too (project generation, estimates), for the resume
    key. Both add the templates (the bulk harness and the native runner are rendered at run
    time). The report, sweep and CLI fronts are not in either closure: they do not change a result.
    """
    if kind not in _FINGERPRINTS:
        from benchgen.rtl import template_dir

        pkg = Path(str(resources.files("benchgen")))
        files = import_closure(pkg, BENCH_ROOTS if kind == "bench" else TASK_ROOTS)
        templates = template_dir()
        digest = _sha(_files_digest(pkg, files) + _files_digest(templates, templates.glob("*.j2")))
        _FINGERPRINTS[kind] = digest[:16]
    return _FINGERPRINTS[kind]


@dataclass(frozen=True)
class Task:
    """One unit of work: simulate a point, or estimate a core on one device family.

    Attributes:
        kind: ``sim`` or ``synth``.
        task_id: File-safe unique name (point id, or core id and target).
        core: The core config.
        label: Readable name for progress lines and reports.
        simulator: For ``sim`` tasks.
        target: For ``synth`` tasks.
        samples: Random samples (``sim``).
        seed: Seed (``sim``).
        synth: Estimate settings (``synth``).
    """

    kind: str
    task_id: str
    core: dict[str, Any]
    label: str
    simulator: str = ""
    target: str = ""
    samples: int = 0
    seed: int = 0
    synth: SynthSettings = field(default_factory=SynthSettings)

    @property
    def key(self) -> str:
        """Resume key: what the task is, and the benchgen code that would run it."""
        data = asdict(self)
        data.pop("label")
        data["benchgen"] = [__version__, code_fingerprint("all")]
        return _sha(json.dumps(data, sort_keys=True))[:24]


def make_tasks(spec: SweepSpec, points: list[Point]) -> list[Task]:
    """Sim tasks for every point, then synth tasks for every distinct core and target."""
    tasks = [
        Task(kind="sim", task_id=p.point_id, core=dict(p.core), label=p.label, simulator=p.simulator,
             samples=spec.samples, seed=spec.seed)
        for p in points
    ]
    cores: dict[str, Point] = {}
    for p in points:
        cores.setdefault(p.core_id, p)
    for core_id, p in cores.items():
        core_label = " ".join(f"{k}={v}" for k, v in p.axes.items()) or core_id
        for target in spec.synth.targets:
            tasks.append(Task(kind="synth", task_id=f"{core_id}__{target}", core=dict(p.core),
                              label=f"{core_label} {target}", target=target, synth=spec.synth))
    return tasks


def parse_shard(text: str | None) -> tuple[int, int] | None:
    """``"i/N"`` (1 <= i <= N) to ``(i, N)``.

    Raises:
        SweepError: for anything else.
    """
    if text is None:
        return None
    try:
        i_text, n_text = text.split("/")
        i, n = int(i_text), int(n_text)
    except ValueError:
        i = n = 0
    if not 1 <= i <= n:
        raise SweepError("", [f"--shard {text!r} is not valid: give i/N with 1 <= i <= N. Fix: e.g. --shard 2/4"])
    return i, n


def select_shard(tasks: list[Task], shard: tuple[int, int] | None) -> list[Task]:
    """The tasks of shard ``i`` of ``N``: round robin within each kind, so shards balance."""
    if shard is None:
        return tasks
    i, n = shard
    out = []
    counters: dict[str, int] = {}
    for t in tasks:
        k = counters.get(t.kind, 0)
        counters[t.kind] = k + 1
        if k % n == i - 1:
            out.append(t)
    return out


# ----------------------------------------------------------------------------- task execution


def _write_json(path: Path, data: Any) -> None:
    """Write ``data`` so that a reader sees the old file or the whole new one, never a part.

    The text goes to a temporary file of its own in the same folder (a unique name, so two
    processes or threads writing one key never share it), then ``os.replace`` swaps it in. Two
    writers of the same cache key both write a whole entry; the last one stays.
    """
    path.parent.mkdir(parents=True, exist_ok=True)
    text = json.dumps(data, indent=1, sort_keys=True) + "\n"
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)  # an interrupt or a full disk leaves no stray temporary file
        raise


def _read_cache(path: Path | None, kind: str) -> dict[str, Any] | None:
    """A cache entry that fits its schema, else ``None``: a bad entry is a miss, and is rewritten."""
    if path is None:
        return None
    try:
        return check_cache_entry(read_json_record(path), kind)
    except (FileNotFoundError, RecordError):
        return None


def _generate_point_project(core: dict[str, Any], folder: Path) -> tuple[Path, dict[str, Any]]:
    """Design the core and write its project; return the project folder and the design summary.

    The API designs the core and writes its config as TOML (the one writer benchgen has); the
    summary comes from the design in memory, not from the manifest read back from disk.
    """
    from benchgen.api import design_core
    from benchgen.project import write_project

    core_design = design_core(core)
    project = folder / "project"
    write_project(core_design.design, core_design.config_text, project)
    return project, _design_summary(core_design.manifest())


def _source_digest(project: Path, parts: Iterable[str]) -> str:
    files: list[Path] = []
    for part in parts:
        p = project / part
        files.extend(sorted(q for q in p.rglob("*") if q.is_file()) if p.is_dir() else [p])
    h = hashlib.sha256()
    for f in files:
        h.update(str(f.relative_to(project)).encode())
        h.update(f.read_bytes())
    return h.hexdigest()


def _design_summary(manifest: dict[str, Any]) -> dict[str, Any]:
    """What a result records of a core's design: the manifest's fields the report reads."""
    return {
        "toplevel": manifest["toplevel"],
        "function": manifest["function"],
        "config": manifest["config"],
        "derived": manifest["derived"],
        "error_budget": manifest["error_budget"],
        "rtl": manifest["files"]["rtl"],
        # Output widths: the report puts each core's worst error on one scale (dB of full scale).
        "ports": manifest["ports"],
    }


def _first_mismatches(report: dict[str, Any]) -> list[dict[str, Any]]:
    rows: list[dict[str, Any]] = []
    for test in report.get("per_test", []):
        for row in test.get("first_mismatches", []):
            rows.append({"test": test["test"], **row})
    return rows[:FIRST_MISMATCHES]


def _run_sim_task(task: Task, folder: Path, cache: Path | None) -> dict[str, Any]:
    from benchgen.sim import run_sim
    from benchgen.simulators import SimulatorMissing, find_simulator

    project, design = _generate_point_project(task.core, folder)
    try:
        version = find_simulator(task.simulator).version
    except SimulatorMissing as exc:
        return {"status": "error", "error": str(exc), "design": design}
    source = _source_digest(project, ["rtl", "bench", "manifest.json"])
    cache_key = _sha(json.dumps([source, task.simulator, version, task.samples, task.seed,
                                 code_fingerprint("bench")]))
    cache_file = cache / "sim" / f"{cache_key[:32]}.json" if cache else None
    hit = _read_cache(cache_file, "sim")
    if hit is not None and hit["source_hash"] == source[:16] and hit["sim"]["simulator"] == task.simulator:
        return {**hit, "design": design, "cached": True}
    report = run_sim(project, simulator=task.simulator, samples=task.samples, seed=task.seed,
                     build_dir=folder / "build").as_dict()
    mismatches = _first_mismatches(report)
    report.pop("per_test", None)
    result = {
        "status": "passed" if report["passed"] else "failed",
        "source_hash": source[:16],
        "sim": report,
        "first_mismatches": mismatches,
    }
    _write_cache(cache_file, "sim", result)
    return {**result, "design": design, "cached": False}


def _write_cache(path: Path | None, kind: str, entry: dict[str, Any]) -> None:
    """Store an entry only if it fits the schema a later read will hold it to."""
    if path is None:
        return
    try:
        check_cache_entry(entry, kind)
    except RecordError:
        return  # never cache what would be refused; the sweep reports the bad result itself
    _write_json(path, entry)


#: Said of every estimate of a core that has VHDL (the report's estimate notes).
VERILOG_TWIN_NOTE = "estimated from the Verilog of the same core description (the bundled Yosys reads no VHDL)"


def _verilog_for_estimate(project: Path, design: dict[str, Any], folder: Path) -> tuple[Path, list[str], bool]:
    """Where the Verilog to estimate is: the project's own, or, for a VHDL-only core, its twin.

    Both printers print one description (docs/vhdl.md), so the Verilog of a VHDL core has the
    same stages, registers and arithmetic; the bundled Yosys reads no VHDL, so estimates always
    read Verilog. Returns the folder the files are relative to, the files, and whether the core
    has VHDL (its estimate then says where the figures come from).
    """
    from benchgen.project import design_from_manifest, load_manifest
    from benchgen.rtl import render_core

    manifest = load_manifest(project)
    has_vhdl = bool(manifest["files"].get("vhdl"))
    if design["rtl"]:
        return project, list(design["rtl"]), has_vhdl
    twin = folder / "verilog_twin"
    rel = f"rtl/{design['toplevel']}.v"
    (twin / "rtl").mkdir(parents=True, exist_ok=True)
    config_text = (project / "config.toml").read_text(encoding="utf-8")
    (twin / rel).write_text(render_core(design_from_manifest(manifest), config_text=config_text), encoding="utf-8")
    return twin, [rel], has_vhdl


def _run_synth_task(task: Task, folder: Path, cache: Path | None) -> dict[str, Any]:
    from benchgen.synth import DEVICES, estimate, tool_versions

    project, design = _generate_point_project(task.core, folder)
    root, rtl, has_vhdl = _verilog_for_estimate(project, design, folder)
    source = _source_digest(root, rtl)
    settings = task.synth
    tools = tool_versions(task.target, settings.place_and_route)
    device = DEVICES[task.target]
    cache_key = _sha(json.dumps([source, design["toplevel"], task.target, device.synth_command, device.pnr_args,
                                 settings.place_and_route, settings.clock_mhz, tools]))
    cache_file = cache / "synth" / f"{cache_key[:32]}.json" if cache else None
    hit = _read_cache(cache_file, "synth")
    if hit is not None and hit["source_hash"] == source[:16] and hit["estimate"]["target"] == task.target:
        return {**hit, "design": design, "cached": True}
    from benchgen.project import design_from_manifest, load_manifest

    # The wrapper registers the ports the design lists (not ones parsed back out of the text).
    ports = design_from_manifest(load_manifest(project)).ports
    est = estimate([root / r for r in rtl], design["toplevel"], task.target, folder / "synth",
                   ports=ports, place_and_route=settings.place_and_route, clock_mhz=settings.clock_mhz)
    estimate_dict = est.as_dict()
    if has_vhdl:
        estimate_dict["note"] = "; ".join(n for n in (VERILOG_TWIN_NOTE, estimate_dict.get("note")) if n)
    result = {"status": "ok", "source_hash": source[:16], "estimate": estimate_dict}
    _write_cache(cache_file, "synth", result)
    return {**result, "design": design, "cached": False}


def execute_task(task: Task, work_root: str, cache_dir: str | None) -> dict[str, Any]:
    """Run one task in ``work_root/<task_id>`` and return its result (never raises).

    A task that cannot run returns ``status = "error"`` with the reason, so one bad point never
    stops the others.
    """
    t0 = time.perf_counter()
    folder = Path(work_root) / task.task_id
    cache = Path(cache_dir) if cache_dir else None
    try:
        if task.kind == "sim":
            result = _run_sim_task(task, folder, cache)
        else:
            result = _run_synth_task(task, folder, cache)
    except BenchgenError as exc:
        result = {"status": "error", "error": str(exc)}
    except Exception as exc:  # noqa: BLE001 - a worker must report, not die, so the sweep goes on
        result = {"status": "error", "error": f"{type(exc).__name__}: {exc}"}
    result.update(kind=task.kind, task_id=task.task_id, key=task.key, label=task.label,
                  seconds=round(time.perf_counter() - t0, 3))
    return result


# ----------------------------------------------------------------------------- engines


Runner = Callable[[Task, str, "str | None"], dict[str, Any]]
Done = Iterator[tuple[Task, Any]]  # each task with what its runner returned, as they finish


def _serial(tasks: list[Task], fn: Runner, work: str, cache: str | None) -> Done:
    for t in tasks:
        yield t, fn(t, work, cache)


def _pool(tasks: list[Task], fn: Runner, work: str, cache: str | None, jobs: int) -> Done:
    # spawn, not fork: the parent may hold threads (progress output, Dask), and a forked child
    # of a threaded parent can deadlock.
    ctx = multiprocessing.get_context("spawn")
    pool = cf.ProcessPoolExecutor(max_workers=jobs, mp_context=ctx)
    try:
        futures = {pool.submit(fn, t, work, cache): t for t in tasks}
        for fut in cf.as_completed(futures):
            yield futures[fut], fut.result()
    finally:
        pool.shutdown(wait=False, cancel_futures=True)


def _dask(tasks: list[Task], fn: Runner, work: str, cache: str | None, address: str,
          jobs: int) -> Done:
    try:
        from distributed import Client, LocalCluster, as_completed
    except ImportError:
        raise SweepError("", ["--cluster needs Dask's 'distributed' package: pip install distributed"]) from None
    cluster = None
    if address == "local":
        cluster = LocalCluster(n_workers=jobs, threads_per_worker=1, processes=True, dashboard_address=None)
        client = Client(cluster)
    else:
        try:
            client = Client(address, timeout="30s")
        except OSError as exc:
            raise SweepError("", [(f"--cluster {address!r}: cannot reach the scheduler ({exc}). "
                                   "Fix: give the scheduler's tcp://host:port, or --cluster local")]) from None
    try:
        # pure=False: two identical tasks in two sweeps must both run (the cache dedups them).
        futures = {client.submit(fn, t, work, cache, pure=False, key=f"benchgen-{t.task_id}-{os.getpid()}"): t
                   for t in tasks}
        for fut in as_completed(list(futures)):
            yield futures[fut], fut.result()
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


# ----------------------------------------------------------------------------- progress


class Progress:
    """Points done, failed and left, with an estimate of the time left.

    On a terminal one line is redrawn; elsewhere (CI logs) one line is printed per finished task.
    """

    def __init__(self, total: int, resumed: int, stream: TextIO | None) -> None:
        self.total = total
        self.done = resumed
        self.failed = 0
        self.resumed = resumed
        self.stream = stream
        self.start = time.perf_counter()
        self.tty = bool(stream and stream.isatty())

    def eta(self) -> str:
        ran = self.done - self.resumed
        left = self.total - self.done
        if ran == 0 or left == 0:
            return "--"
        seconds = (time.perf_counter() - self.start) / ran * left
        return f"{int(seconds // 60)}m{int(seconds % 60):02d}s"

    def line(self) -> str:
        width = 24
        filled = int(width * self.done / max(self.total, 1))
        bar = "#" * filled + "." * (width - filled)
        return (f"[{bar}] {self.done}/{self.total} done, {self.failed} failed, "
                f"{self.total - self.done} left, ETA {self.eta()}")

    def update(self, result: dict[str, Any]) -> None:
        self.done += 1
        if result["status"] in ("failed", "error"):
            self.failed += 1
        if not self.stream:
            return
        if self.tty:
            self.stream.write("\r" + self.line() + "\x1b[K")
        else:
            tag = "cached" if result.get("cached") else f"{result['seconds']:.1f} s"
            self.stream.write(f"{self.line()}  {result['status']}: {result['label']} ({tag})\n")
        self.stream.flush()

    def close(self) -> None:
        if self.stream and self.tty:
            self.stream.write("\n")
            self.stream.flush()


# ----------------------------------------------------------------------------- the sweep


@dataclass
class SweepOutcome:
    """What a sweep run did.

    Attributes:
        out_dir: Output folder.
        tasks: Tasks of this run (after sharding).
        results: Result of each task, by task id.
        ran: Tasks executed in this run (the rest came from earlier runs: resumed).
        wall_seconds: Wall time of the run.
    """

    out_dir: Path
    tasks: list[Task]
    results: dict[str, dict[str, Any]]
    ran: int
    wall_seconds: float

    @property
    def failed(self) -> list[str]:
        """Task ids that failed verification, could not run, or have no result."""
        return [t.task_id for t in self.tasks
                if self.results.get(t.task_id, {}).get("status") not in ("passed", "ok")]

    @property
    def exit_status(self) -> int:
        """0 when every point passed and every estimate was made; 1 otherwise."""
        return 1 if self.failed else 0


class SweepBusy(BenchgenError):
    """The output folder is held by another running sweep (or cannot be locked at all)."""

    exit_status = 2


def _lock_holder(path: Path) -> str:
    try:
        text = path.read_text(encoding="utf-8", errors="replace").strip()
    except OSError:
        text = ""
    return text if text.isdigit() else "unknown"


@contextlib.contextmanager
def lock_folder(folder: Path, *, fix: str = "wait for it or choose another -o") -> Iterator[None]:
    """Hold ``folder`` for one sweep (or report) for the whole block; refuse at once if it is held.

    The lock is an advisory ``flock`` on ``folder/.benchgen.lock``, which also names the pid of
    the holder. The kernel drops the lock when its process ends in any way (Ctrl-C, SIGKILL, a
    crash), so a killed run never leaves a stale lock behind. The file itself is left in place:
    removing it would let two later runs lock two different files.

    Raises:
        SweepBusy: if another process holds the folder.
    """
    import fcntl  # POSIX only; benchgen's simulators and CI run on Linux and macOS

    path = folder / LOCK_FILE
    try:
        folder.mkdir(parents=True, exist_ok=True)
        fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
    except OSError as exc:
        raise SweepBusy(f"cannot lock output folder '{folder}' ({exc.strerror or exc}); "
                        "give a folder you can write to with -o") from None
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise SweepBusy(
                f"output folder '{folder}' is in use by another sweep (pid {_lock_holder(path)}); {fix}"
            ) from None
        os.ftruncate(fd, 0)
        os.write(fd, f"{os.getpid()}\n".encode())
        yield
    finally:
        os.close(fd)  # closing the descriptor releases the lock


def load_results(out_dir: Path, tasks: list[Task],
                 notes: Callable[[str], None] | None = None) -> dict[str, dict[str, Any]]:
    """Results already in ``out_dir`` that are still valid for these tasks (resume).

    A result file that does not fit its schema is ignored (its task runs again and the file is
    rewritten); ``notes`` is told so in one line naming the file and the fault.
    """
    found: dict[str, dict[str, Any]] = {}
    for t in tasks:
        try:
            data = read_result(out_dir, t.kind, t.task_id)
        except RecordError as exc:
            if notes:
                notes(f"ignored {exc}; running {t.label} again")
            continue
        if data and data["key"] == t.key and data["status"] != "error":
            found[t.task_id] = data
    return found


def _checked_result(task: Task, result: Any) -> dict[str, Any]:
    """A task's result as it will be saved; one that does not fit the schema becomes an error."""
    try:
        data = check_result(result, task.kind)
        if (data["task_id"], data["key"]) != (task.task_id, task.key):
            raise RecordError(f"it names task {data['task_id']!r} with key {data['key']!r}")
        return data
    except RecordError as exc:
        seconds = result.get("seconds") if isinstance(result, dict) else None
        return {"kind": task.kind, "task_id": task.task_id, "key": task.key, "label": task.label,
                "seconds": seconds if isinstance(seconds, float) and seconds >= 0 else 0.0,
                "status": "error", "error": f"the task returned an invalid result ({exc})"}


def write_sweep_file(out_dir: Path, spec: SweepSpec, points: list[Point], tasks: list[Task],
                     shard: tuple[int, int] | None) -> None:
    """Record what the folder holds, so a report (or a merge of shards) can be rebuilt from it."""
    _write_json(out_dir / SWEEP_FILE, {
        "benchgen_version": __version__,
        "spec": spec.as_dict(),
        "digest": spec.digest(),
        "shard": list(shard) if shard else None,
        "points": [{"point_id": p.point_id, "core_id": p.core_id, "label": p.label, "simulator": p.simulator,
                    "axes": dict(p.axes), "core": dict(p.core)} for p in points],
        "tasks": [{"kind": t.kind, "task_id": t.task_id, "label": t.label} for t in tasks],
    })


def write_model_analysis(out_dir: Path, spec: SweepSpec, points: list[Point]) -> None:
    """Measure what the bit-true model says about the sweep's cores, for its report.

    Once per sweep, from its points alone (:mod:`benchgen.sweep_analysis`): the report draws it
    and runs nothing. Written before any task runs, so an interrupted sweep or a shard has it.
    """
    cores: dict[str, dict[str, Any]] = {}
    for p in points:
        cores.setdefault(p.core_id, dict(p.core))
    _write_json(out_dir / MODEL_ANALYSIS_FILE, {"digest": spec.digest(), **analyse_models(cores.items())})


def run_sweep(
    spec: SweepSpec,
    out_dir: str | Path,
    *,
    jobs: int | None = None,
    cluster: str | None = None,
    shard: tuple[int, int] | None = None,
    cache_dir: str | Path | None = None,
    use_cache: bool = True,
    progress: TextIO | None = None,
    on_result: Callable[[dict[str, Any]], None] | None = None,
    runner: Runner | None = None,
    notes: TextIO | None = None,
) -> SweepOutcome:
    """Validate and run a sweep, saving every result and the model analysis in ``out_dir``.

    The report is not written here: :mod:`benchgen.sweep_cli` runs the sweep, then writes the
    report from what the folder holds (:func:`benchgen.report.write_reports`).

    Args:
        spec: The sweep.
        out_dir: Output folder (created; earlier results in it are resumed).
        jobs: Parallel workers (default: CPU count).
        cluster: Dask scheduler address, or ``"local"`` for a ``LocalCluster``; ``None`` for the pool.
        shard: ``(i, N)`` to run only shard i of N.
        cache_dir: Build/estimate cache (default :func:`default_cache_dir`).
        use_cache: ``False`` to neither read nor write the cache.
        progress: Stream for the progress bar (``None``: silent).
        on_result: Called with each new result after it is saved.
        runner: Replaces :func:`execute_task` (tests run without simulators this way).
        notes: Stream for one-line notes (a result file ignored as invalid); ``None``: silent.

    A result that does not fit its schema (:mod:`benchgen.sweep_records`) is saved as an
    ``error`` result naming the fault, so it is retried on the next run.

    Raises:
        SweepError: if any point is invalid (nothing runs then).
        SweepBusy: if another sweep is writing to ``out_dir`` (nothing runs then).
        KeyboardInterrupt: if interrupted; the results so far are saved and resume on the next run.
    """
    t0 = time.perf_counter()
    points = expand(spec)
    tasks = select_shard(make_tasks(spec, points), shard)
    out = Path(out_dir).resolve()
    if out.exists() and not out.is_dir():
        raise SweepError("", [f"output '{out}' is a file: give a folder with -o"])
    if out.is_dir() and any(p.name != LOCK_FILE for p in out.iterdir()) and not (out / SWEEP_FILE).is_file():
        raise SweepError("", [f"output folder '{out}' is not empty and holds no sweep; choose a new folder with -o"])

    def note(line: str) -> None:
        if notes:
            notes.write(line + "\n")
            notes.flush()

    # One run at a time per folder: two runs would share work/<task>/ build folders and each
    # other's result files.
    with lock_folder(out):
        write_sweep_file(out, spec, points, tasks, shard)
        write_model_analysis(out, spec, points)
        results = load_results(out, tasks, note)
        todo = [t for t in tasks if t.task_id not in results]
        # Longest first, so the last task to finish is a short one and the workers stay busy.
        cost = {"synth": 0, "sim": 1}
        todo.sort(key=lambda t: (cost[t.kind], t.simulator != "verilator"))
        cache = None if not use_cache else str(Path(cache_dir) if cache_dir else default_cache_dir())
        work = str(out / WORK_DIR)
        fn = runner or execute_task
        n_jobs = jobs or os.cpu_count() or 1
        bar = Progress(len(tasks), len(results), progress)
        if cluster:
            stream = _dask(todo, fn, work, cache, cluster, n_jobs)
        elif n_jobs == 1 or len(todo) <= 1:
            stream = _serial(todo, fn, work, cache)
        else:
            stream = _pool(todo, fn, work, cache, min(n_jobs, len(todo)))
        ran = 0
        try:
            for task, raw in stream:
                result = _checked_result(task, raw)
                _write_json(out / RESULTS_DIR / result["kind"] / f"{result['task_id']}.json", result)
                results[result["task_id"]] = result
                ran += 1
                bar.update(result)
                if on_result:
                    on_result(result)
        except KeyboardInterrupt:
            bar.close()
            if progress:
                progress.write(f"interrupted: {len(results)} of {len(tasks)} tasks saved in {out}; "
                               "run the same command again to resume\n")
            raise
        finally:
            close = getattr(stream, "close", None)
            if close:
                close()
        bar.close()
    return SweepOutcome(out_dir=out, tasks=tasks, results=results, ran=ran, wall_seconds=time.perf_counter() - t0)


def merge_shards(shard_dirs: list[Path], out_dir: Path, notes: TextIO | None = None) -> list[Path]:
    """Join the results of a sweep's shards into one folder (its report can then be written there).

    Only result files that fit their schema are copied; each one left out is named in one line
    on ``notes``, and its task then shows as without a result.

    Raises:
        SweepError: if the folders are not shards of one sweep.
    """
    digests = set()
    base: dict[str, Any] | None = None
    for d in shard_dirs:
        try:
            data = read_sweep_file(d)
        except FileNotFoundError:
            raise SweepError("", [f"'{d}' holds no {SWEEP_FILE}: give folders written by 'benchgen sweep -o'"]) from None
        except RecordError as exc:
            raise SweepError("", [f"{exc}: give folders written by 'benchgen sweep -o'"]) from None
        digests.add(data["digest"])
        base = base or data
    if len(digests) > 1 or base is None:
        raise SweepError("", [("the folders come from different sweeps (their sweep digests differ); "
                               "merge only shards of one sweep file")])
    out_dir.mkdir(parents=True, exist_ok=True)
    for d in shard_dirs:
        for kind in ("sim", "synth"):
            for f in sorted((d / RESULTS_DIR / kind).glob("*.json")):
                target = out_dir / RESULTS_DIR / kind / f.name
                if f.resolve() == target.resolve():
                    continue
                try:
                    if read_result(d, kind, f.stem) is None:
                        continue
                except RecordError as exc:
                    if notes:
                        notes.write(f"ignored {exc} (shard folder {d})\n")
                    continue
                target.parent.mkdir(parents=True, exist_ok=True)
                shutil.copyfile(f, target)
    # The full task list is rebuilt from the spec, so a shard that never ran shows as missing.
    spec = parse_sweep(_spec_to_raw(base["spec"]))
    points = expand(spec, validate=False)
    tasks = make_tasks(spec, points)
    write_sweep_file(out_dir, spec, points, tasks, None)
    write_model_analysis(out_dir, spec, points)
    return [out_dir / SWEEP_FILE, out_dir / MODEL_ANALYSIS_FILE]


def _spec_to_raw(d: dict[str, Any]) -> dict[str, Any]:
    raw: dict[str, Any] = {
        "sweep": {"name": d["name"], "simulators": d["simulators"], "samples": d["samples"], "seed": d["seed"]},
        "synth": d["synth"],
        "base": d["base"],
        "matrix": d["matrix"],
    }
    if d["exclude"]:
        raw["exclude"] = d["exclude"]
    if d["include"]:
        raw["include"] = d["include"]
    return raw
