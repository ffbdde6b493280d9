"""A sweep's output folder, its cache and its result files under concurrency and corruption.

* Two sweeps into one folder: the second is refused at once (exit 2), a killed holder leaves no
  stale lock, and one run's bench results can never be appended to another's.
* Cache entries and result files are checked against their schema: a bad one is a miss (run
  again, rewritten), never copied into ``OUT/results``, and ``report render`` names it in one line.
* The code fingerprint of the simulation cache covers every benchgen module the bench imports.

Simulation is faked (a stand-in runner, or a stand-in ``run_sim``) except in one real test of two
concurrent ``benchgen sweep`` processes.
"""

from __future__ import annotations

import io
import json
import os
import shutil
import signal
import subprocess
import sys
import threading
import time
from modulefinder import ModuleFinder
from pathlib import Path
from typing import Any

import pytest

import benchgen.sim
import benchgen.simulators
from benchgen.cli import main
from benchgen.errors import BenchgenError
from benchgen.sim import SimReport
from benchgen.simulators import SimulatorInfo
from benchgen.sweep import execute_task, make_tasks
from benchgen.sweep_config import expand, parse_sweep
from tests.conftest import require_simulator
from tests.test_sweep import CALLS, fake_runner, run_and_report, sweep_raw

REPO = Path(__file__).resolve().parent.parent
QUICK = ("json",)


def small_spec(depths: list[int] | None = None) -> Any:
    return parse_sweep(sweep_raw(matrix={"pipeline_depth": depths or [1, 2]}, sweep={"simulators": ["icarus"]}))


@pytest.fixture(autouse=True)
def _reset_calls() -> None:
    CALLS.clear()


# ----------------------------------------------------------------------------- one sweep per folder


def test_second_sweep_into_a_busy_folder_is_refused_at_once(tmp_path: Path) -> None:
    """While one sweep runs, another into the same folder must not run a single task."""
    spec = small_spec()
    out = tmp_path / "out"
    refused: list[BenchgenError] = []
    inner_calls: list[int] = []

    def runner(task: Any, work: str, cache: str | None) -> dict[str, Any]:
        if not refused and not inner_calls:
            before = len(CALLS)
            try:
                run_and_report(spec, out, jobs=1, runner=fake_runner, use_cache=False, formats=QUICK)
            except BenchgenError as exc:
                refused.append(exc)
            inner_calls.append(len(CALLS) - before)
        return fake_runner(task, work, cache)

    outcome = run_and_report(spec, out, jobs=1, runner=runner, use_cache=False, formats=QUICK)
    assert inner_calls == [0], "the second sweep ran tasks in a folder another sweep was writing"
    (exc,) = refused
    assert exc.exit_status == 2
    assert str(exc) == (f"output folder '{out.resolve()}' is in use by another sweep (pid {os.getpid()}); "
                        "wait for it or choose another -o")
    assert outcome.exit_status == 0
    for r in outcome.results.values():
        assert r["sim"]["samples"] == 100  # counted once
    # The lock went with the first sweep: the folder can be used again at once.
    assert run_and_report(spec, out, jobs=1, runner=fake_runner, use_cache=False, formats=QUICK).exit_status == 0


LOCK_HOLDER = """
import sys, time
from pathlib import Path
from benchgen.sweep import lock_folder
with lock_folder(Path(sys.argv[1])):
    print("locked", flush=True)
    time.sleep(120)
"""


def test_a_killed_sweep_leaves_no_stale_lock(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "out"
    spec = small_spec([1])
    run_and_report(spec, out, jobs=1, runner=fake_runner, use_cache=False, formats=QUICK)
    holder = subprocess.Popen([sys.executable, "-c", LOCK_HOLDER, str(out)], stdout=subprocess.PIPE, text=True)
    try:
        assert holder.stdout is not None and holder.stdout.readline().strip() == "locked"
        with pytest.raises(BenchgenError) as info:
            run_and_report(spec, out, jobs=1, runner=fake_runner, use_cache=False, formats=QUICK)
        assert f"(pid {holder.pid})" in str(info.value) and info.value.exit_status == 2
        # report render must not write report files under a running sweep either
        assert main(["report", "render", str(out), "--formats", "csv"]) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and "in use by another sweep" in err and "Traceback" not in err
    finally:
        holder.send_signal(signal.SIGKILL)
        holder.wait()
    outcome = run_and_report(spec, out, jobs=1, runner=fake_runner, use_cache=False, formats=QUICK)
    assert outcome.exit_status == 0


TINY_SWEEP = """
[sweep]
name = "concurrent"
simulators = ["icarus"]
samples = 200
seed = 3
[base]
name = "tiny_nco"
function = "sincos"
angle_width = 10
data_width = 8
iterations = 10
guard_bits = 4
max_error_lsb = 1.5
[matrix]
pipeline_depth = [2]
"""


@pytest.mark.sim
def test_two_real_sweeps_into_one_folder_do_not_double_count(tmp_path: Path) -> None:
    """The reported failure: two `benchgen sweep -o X` at once both passed with doubled samples."""
    require_simulator("icarus")
    sweep_file = tmp_path / "s.toml"
    sweep_file.write_text(TINY_SWEEP)
    out = tmp_path / "X"
    env = {**os.environ, "BENCHGEN_CACHE_DIR": str(tmp_path / "cache"), "PYTHONPATH": str(REPO)}
    cmd = [sys.executable, "-m", "benchgen.cli", "sweep", str(sweep_file), "-o", str(out), "-j1", "-q",
           "--formats", "json"]
    first = subprocess.Popen(cmd, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 60
    while not (out / "sweep.json").is_file() and first.poll() is None and time.monotonic() < deadline:
        time.sleep(0.05)
    second = subprocess.run(cmd, env=env, capture_output=True, text=True, timeout=300)
    first_out, first_err = first.communicate(timeout=300)
    assert first.returncode == 0, first_err
    assert second.returncode == 2, second.stdout + second.stderr
    assert second.stderr.strip().count("\n") == 0
    assert f"is in use by another sweep (pid {first.pid})" in second.stderr
    (result_file,) = (out / "results" / "sim").glob("*.json")
    sim = json.loads(result_file.read_text())["sim"]
    lines = [json.loads(x) for x in (out / "work" / result_file.stem / "build" / "bench_results.jsonl")
             .read_text().splitlines()]
    assert len(lines) == sim["tests"]  # one line per test of one run
    assert sum(x["samples"] for x in lines) == sim["samples"]


# ----------------------------------------------------------------------------- one run's bench results


def test_bench_results_of_overlapping_runs_are_never_mixed(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Two runs in one build folder each count only their own per-test lines.

    The stand-in runner starts a second run of the same project in the same build folder while
    the first one is under way, as a second process would.
    """
    import cocotb_tools.runner

    from benchgen.bench.scoreboard import CheckResult, record
    from benchgen.project import generate_project
    from tests.conftest import write_config

    project = tmp_path / "proj"
    generate_project(write_config(tmp_path / "c.toml", dict(sweep_raw()["base"])), project)
    build = tmp_path / "build"
    depth = {"n": 0}
    inner: list[SimReport] = []

    class FakeRunner:
        def build(self, **kw: Any) -> None:
            pass

        def test(self, *, results_xml: str, **kw: Any) -> None:
            depth["n"] += 1
            if depth["n"] == 1:  # the other run starts, runs and ends inside this one
                inner.append(benchgen.sim.run_sim(project, simulator="icarus", samples=10, seed=1,
                                                  build_dir=build, mode="per-clock"))
            record(CheckResult(test="t", samples=10))
            Path(results_xml).write_text('<testsuites><testsuite tests="1" failures="0" errors="0"/></testsuites>')

    monkeypatch.setattr(cocotb_tools.runner, "get_runner", lambda name: FakeRunner())
    monkeypatch.setattr(benchgen.sim, "find_simulator",
                        lambda name: SimulatorInfo(name=name, executable=Path("/x"), version="9"))
    outer = benchgen.sim.run_sim(project, simulator="icarus", samples=10, seed=1, build_dir=build, mode="per-clock")
    assert (inner[0].tests, inner[0].samples) == (1, 10)
    assert (outer.tests, outer.samples) == (1, 10), "one run counted another run's results"
    published = (build / "bench_results.jsonl").read_text().splitlines()
    assert len(published) == 1  # the last run's file, whole
    assert not list(build.glob(".*")), "a run left its private files behind"


def test_cache_writes_from_many_writers_of_one_key_are_whole(tmp_path: Path) -> None:
    """Writers of one key at once (threads of a Dask worker, processes sharing a cache) never clash."""
    from benchgen.sweep import _write_json

    target = tmp_path / "cache" / "sim" / "k.json"
    errors: list[BaseException] = []
    seen: list[Any] = []
    entry = {"status": "passed", "rows": list(range(2000))}

    def writer() -> None:
        try:
            for _ in range(40):
                _write_json(target, entry)
        except BaseException as exc:  # noqa: BLE001 - collected and asserted below
            errors.append(exc)

    def reader() -> None:
        for _ in range(200):
            if target.is_file():
                seen.append(json.loads(target.read_text()))

    threads = [threading.Thread(target=writer) for _ in range(6)] + [threading.Thread(target=reader)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors, errors[0]
    assert all(s == entry for s in seen)  # a reader never saw half a file
    assert json.loads(target.read_text()) == entry
    assert sorted(p.name for p in target.parent.iterdir()) == ["k.json"]  # no temporary file left


# ----------------------------------------------------------------------------- bad cache entries


def _fake_sim(monkeypatch: pytest.MonkeyPatch) -> list[str]:
    """Replace the simulator run with a fixed, plausible pass; return the list of runs made."""
    runs: list[str] = []

    def run_sim(project: Path, **kw: Any) -> SimReport:
        runs.append(str(project))
        return SimReport(simulator=kw["simulator"], simulator_version="9", toplevel="tiny", seed=kw["seed"],
                         passed=True, tests=4, samples=1935, max_error_lsb=0.75, rms_error_lsb=0.3,
                         error_budget_lsb=1.5, latency_cycles=2, expected_latency_cycles=2,
                         cycles_per_sample=1.0, expected_cycles_per_sample=1)

    monkeypatch.setattr(benchgen.sim, "run_sim", run_sim)
    monkeypatch.setattr(benchgen.simulators, "find_simulator",
                        lambda name: SimulatorInfo(name=name, executable=Path("/x"), version="9"))
    return runs


def _edit(good: bytes, change: Any) -> bytes:
    data = json.loads(good)
    change(data)
    return json.dumps(data).encode()


def _set(path: str, value: Any) -> Any:
    def change(data: dict[str, Any]) -> None:
        *head, last = path.split(".")
        for k in head:
            data = data[k]
        data[last] = value
    return change


def _drop(key: str) -> Any:
    return lambda data: data.pop(key)


BAD_CACHE = {
    "empty object": lambda good: b"{}",
    "a list": lambda good: b"[1, 2]",
    "a string": lambda good: b'"passed"',
    "empty file": lambda good: b"",
    "truncated JSON": lambda good: good[: len(good) // 2],
    "not UTF-8": lambda good: b"\xff\xfe" + good,
    "missing sim": lambda good: _edit(good, _drop("sim")),
    "samples as text": lambda good: _edit(good, _set("sim.samples", "1935")),
    "tests as a boolean": lambda good: _edit(good, _set("sim.tests", True)),
    "unknown status": lambda good: _edit(good, _set("status", "passd")),
    "unknown key": lambda good: _edit(good, _set("verdict", "ok")),
    "NaN error": lambda good: good.replace(b'"max_error_lsb": 0.75', b'"max_error_lsb": NaN'),
    "passed with mismatches": lambda good: _edit(good, _set("sim.mismatches", 5)),
    "passed with no samples": lambda good: _edit(good, _set("sim.samples", 0)),
    "passed over the budget": lambda good: _edit(good, _set("sim.max_error_lsb", 9.0)),
    "passed but sim failed": lambda good: _edit(good, _set("sim.passed", False)),
}


@pytest.mark.parametrize("bad", list(BAD_CACHE))
def test_a_bad_cache_entry_is_a_miss_and_is_rewritten(bad: str, tmp_path: Path,
                                                      monkeypatch: pytest.MonkeyPatch) -> None:
    runs = _fake_sim(monkeypatch)
    spec = small_spec([2])
    task = make_tasks(spec, expand(spec))[0]
    cache = tmp_path / "cache"
    first = execute_task(task, str(tmp_path / "w1"), str(cache))
    (entry,) = (cache / "sim").glob("*.json")
    good = entry.read_bytes()
    assert first["status"] == "passed" and len(runs) == 1
    entry.write_bytes(BAD_CACHE[bad](good))

    again = execute_task(task, str(tmp_path / "w2"), str(cache))
    assert len(runs) == 2, "the bad entry was taken for a hit"
    assert again["cached"] is False and again["status"] == "passed" and again["sim"]["mismatches"] == 0
    assert entry.read_bytes() == good  # rewritten whole
    third = execute_task(task, str(tmp_path / "w3"), str(cache))
    assert third["cached"] is True and len(runs) == 2


def test_a_poisoned_cache_entry_never_reaches_the_output_folder(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                                                capsys: pytest.CaptureFixture[str]) -> None:
    """The reported failure: a cache file holding {} was copied into OUT/results and broke the report."""
    runs = _fake_sim(monkeypatch)
    spec = small_spec([2])
    cache = tmp_path / "cache"
    run_and_report(spec, tmp_path / "o1", jobs=1, cache_dir=cache, formats=QUICK)
    (entry,) = (cache / "sim").glob("*.json")
    entry.write_text("{}")
    outcome = run_and_report(spec, tmp_path / "o2", jobs=1, cache_dir=cache, formats=QUICK)
    assert len(runs) == 2
    (result,) = outcome.results.values()
    assert result["status"] == "passed" and result["cached"] is False and result["sim"]["samples"] == 1935
    assert main(["report", "render", str(tmp_path / "o2"), "--formats", "csv"]) == 0
    assert "Traceback" not in capsys.readouterr().err


def test_a_result_that_does_not_fit_the_schema_is_saved_as_an_error(tmp_path: Path) -> None:
    """A worker's result is checked before it is saved: a 'pass' with mismatches is not a pass."""
    spec = small_spec([1])

    def lying(task: Any, work: str, cache: str | None) -> dict[str, Any]:
        result = fake_runner(task, work, cache)
        result["sim"]["mismatches"] = 5
        return result

    outcome = run_and_report(spec, tmp_path / "o", jobs=1, runner=lying, use_cache=False, formats=QUICK)
    (saved,) = (tmp_path / "o" / "results" / "sim").glob("*.json")
    record = json.loads(saved.read_text())
    assert record["status"] == "error"
    assert "passed = true, yet mismatches = 5" in record["error"]
    assert outcome.exit_status == 1
    # an error is retried on the next run
    assert run_and_report(spec, tmp_path / "o", jobs=1, runner=fake_runner, use_cache=False, formats=QUICK).exit_status == 0


# ----------------------------------------------------------------------------- bad result files


BAD_RESULT = {
    "a list": (lambda good: b"[1, 2]", "not a JSON object"),
    "a string": (lambda good: b'"passed"', "not a JSON object"),
    "empty object": (lambda good: b"{}", "status: missing"),
    "no status": (lambda good: _edit(good, _drop("status")), "status: missing"),
    "truncated JSON": (lambda good: good[:100], "is not JSON"),
    "not UTF-8": (lambda good: good.replace(b'"label"', b'"lab\xe9l"'), "is not UTF-8 text"),
    "samples as text": (lambda good: _edit(good, _set("sim.samples", "100")), "sim.samples"),
    "passed with mismatches": (lambda good: _edit(good, _set("sim.mismatches", 5)),
                               "passed = true, yet mismatches = 5"),
    "passed with no samples": (lambda good: _edit(good, _set("sim.samples", 0)), "passed = true, yet samples = 0"),
    "another task's record": (lambda good: _edit(good, _set("task_id", "other")), "task_id"),
    "a synth record": (lambda good: _edit(good, _set("kind", "synth")), "kind"),
    "no design": (lambda good: _edit(good, _drop("design")), "design: missing"),
    "design without latency": (lambda good: _edit(good, lambda d: d["design"]["derived"].pop("latency_cycles")),
                               "design.derived.latency_cycles: missing"),
}


@pytest.fixture(scope="module")
def finished(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("finished") / "out"
    run_and_report(small_spec([1, 2]), out, jobs=1, runner=fake_runner, use_cache=False, formats=QUICK)
    return out


@pytest.mark.parametrize("bad", list(BAD_RESULT))
def test_report_render_names_a_bad_result_file_and_goes_on(bad: str, finished: Path, tmp_path: Path,
                                                           capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "out"
    shutil.copytree(finished, out)
    victim = sorted((out / "results" / "sim").glob("*.json"))[0]
    make, needle = BAD_RESULT[bad]
    victim.write_bytes(make(victim.read_bytes()))
    capsys.readouterr()
    status = main(["report", "render", str(out), "--formats", "csv,json"])
    captured = capsys.readouterr()
    assert status == 1  # a point without a result, as for a task that never ran
    assert "Traceback" not in captured.err
    (line,) = captured.err.splitlines()
    assert line.startswith(f"benchgen: ignored results/sim/{victim.name}: ") and needle in line, line
    rows = {r["point_id"]: r for r in json.loads((out / "report.json").read_text())["rows"]}
    assert rows[victim.stem]["status"] == "not run"
    assert needle in rows[victim.stem]["problems"][0]
    assert [r["status"] for k, r in rows.items() if k != victim.stem] == ["passed"]
    assert f"FAILED {rows[victim.stem]['point']}: ignored results/sim/{victim.name}" in captured.out


@pytest.mark.parametrize("bad", ["a list", "empty object", "passed with mismatches", "not UTF-8", "a synth record"])
def test_a_bad_result_file_is_run_again_and_rewritten(bad: str, finished: Path, tmp_path: Path) -> None:
    """Resume (and --no-cache) must not crash on, or trust, a bad result file."""
    out = tmp_path / "out"
    shutil.copytree(finished, out)
    victim = sorted((out / "results" / "sim").glob("*.json"))[0]
    good = victim.read_bytes()
    victim.write_bytes(BAD_RESULT[bad][0](good))
    notes = io.StringIO()
    outcome = run_and_report(small_spec([1, 2]), out, jobs=1, runner=fake_runner, use_cache=False, formats=QUICK,
                        notes=notes)
    assert CALLS == [victim.stem]
    (line,) = notes.getvalue().splitlines()
    assert line.startswith(f"ignored results/sim/{victim.name}: ") and BAD_RESULT[bad][1] in line
    assert line.endswith(" again")
    assert victim.read_bytes() == good
    assert outcome.exit_status == 0


def test_a_bad_sweep_file_is_one_line_and_exit_2(finished: Path, tmp_path: Path,
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    out = tmp_path / "out"
    shutil.copytree(finished, out)
    sweep = json.loads((out / "sweep.json").read_text())
    del sweep["spec"]["synth"]
    (out / "sweep.json").write_text(json.dumps(sweep))
    capsys.readouterr()
    assert main(["report", "render", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "sweep.json: spec.synth: missing" in err and "Traceback" not in err
    assert main(["report", "merge", str(out), "-o", str(tmp_path / "m")]) == 2
    assert "spec.synth: missing" in capsys.readouterr().err


def test_merge_copies_only_valid_result_files(finished: Path, tmp_path: Path,
                                              capsys: pytest.CaptureFixture[str]) -> None:
    shard = tmp_path / "shard"
    shutil.copytree(finished, shard)
    victim = sorted((shard / "results" / "sim").glob("*.json"))[0]
    victim.write_text("[1, 2]")
    capsys.readouterr()
    assert main(["report", "merge", str(shard), "-o", str(tmp_path / "m"), "--formats", "csv"]) == 1
    err = capsys.readouterr().err
    assert f"ignored results/sim/{victim.name}: not a JSON object" in err and "Traceback" not in err
    assert not (tmp_path / "m" / "results" / "sim" / victim.name).exists()


def test_the_schemas_hold_every_field_the_writers_write() -> None:
    """If a writer gains a field, its schema must learn it too (else every record becomes a miss)."""
    import dataclasses

    from benchgen.sweep_records import EstimateRecord, SimRunRecord, SpecRecord
    from benchgen.synth import Estimate

    sim = SimReport(simulator="icarus", simulator_version="1", toplevel="t", seed=1).as_dict()
    assert set(SimRunRecord.model_fields) == set(sim) - {"per_test"}
    assert set(EstimateRecord.model_fields) == {f.name for f in dataclasses.fields(Estimate)}
    assert set(SpecRecord.model_fields) == set(small_spec().as_dict())


# ----------------------------------------------------------------------------- the code fingerprint


class _BenchgenOnly(ModuleFinder):
    """ModuleFinder that follows benchgen's own modules only (the rest is not ours to hash)."""

    def import_hook(self, name: str, caller: Any = None, fromlist: Any = None, level: int = -1) -> Any:
        if level == 0 and not name.startswith("benchgen"):
            return None
        return super().import_hook(name, caller, fromlist, level)


FINGERPRINT_PROBE = """
import json, sys
from pathlib import Path
import benchgen.sweep as sweep
files = [Path(p) for p in json.loads(sys.argv[1])]
sweep._FINGERPRINTS.clear()
before = sweep.code_fingerprint("bench")
missed = []
for f in files:
    text = f.read_bytes()
    f.write_bytes(text + b"\\n# changed\\n")
    sweep._FINGERPRINTS.clear()
    if sweep.code_fingerprint("bench") == before:
        missed.append(f.name)
    f.write_bytes(text)
print(json.dumps(missed))
"""


def test_bench_fingerprint_changes_with_every_module_the_bench_imports(tmp_path: Path) -> None:
    """Issue 11: functions.py (stimulus and judging) was left out, so a judging change hit stale results.

    The modules are found by modulefinder (bytecode, function-level imports too), independently of
    the fingerprint's own import scan; each is changed in a copy of the package in turn.
    """
    shutil.copytree(REPO / "benchgen", tmp_path / "benchgen", ignore=shutil.ignore_patterns("__pycache__"))
    shutil.copytree(REPO / "rtl_templates", tmp_path / "rtl_templates")
    finder = _BenchgenOnly(path=[str(tmp_path)])
    finder.import_hook("benchgen.sim")
    for f in sorted((tmp_path / "benchgen" / "bench").glob("*.py")):  # what generated benches import
        finder.import_hook(f"benchgen.bench.{f.stem}")
    ours = str(tmp_path / "benchgen")
    files = sorted({m.__file__ for m in finder.modules.values() if m.__file__ and m.__file__.startswith(ours)})
    names = {Path(f).name for f in files}
    assert {"model.py", "reference.py", "scoreboard.py", "core_tests.py", "atan2.py", "base.py"} <= names
    env = {**os.environ, "PYTHONPATH": str(tmp_path)}
    probe = subprocess.run([sys.executable, "-c", FINGERPRINT_PROBE, json.dumps(files)], env=env,
                           capture_output=True, text=True, check=True, cwd=tmp_path)
    assert json.loads(probe.stdout) == [], "modules the bench imports but the cache key ignores"
    # and the closure is not everything: a report change keeps the simulation cache
    assert "report.py" not in names and "sweep.py" not in names


def test_import_closure_follows_lazy_and_relative_imports(tmp_path: Path) -> None:
    from benchgen.sweep import import_closure

    pkg = tmp_path / "benchgen"
    (pkg / "sub").mkdir(parents=True)
    (pkg / "__init__.py").write_text("")
    (pkg / "sub" / "__init__.py").write_text("")
    (pkg / "a.py").write_text("def f():\n    from benchgen import b\n")
    (pkg / "b.py").write_text("from .sub import c\n")
    (pkg / "sub" / "c.py").write_text("from ..d import x\nimport numpy\n")
    (pkg / "d.py").write_text("x = 1\n")
    (pkg / "unused.py").write_text("")
    found = {p.relative_to(pkg).as_posix() for p in import_closure(pkg, ["benchgen.a"])}
    assert found == {"__init__.py", "a.py", "b.py", "sub/__init__.py", "sub/c.py", "d.py"}
