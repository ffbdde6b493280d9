"""Sweep expansion, validation, sharding, resume and caching, without a simulator.

The simulator is replaced by a stand-in runner that generates each point's real project (so the
design numbers are real) and reports the bit-true model's own accuracy as the measurement.
"""

from __future__ import annotations

import json
import tomllib
from pathlib import Path
from typing import Any

import pytest

from benchgen.cli import main
from benchgen.sim import SimReport
from benchgen.sweep import (
    SweepOutcome,
    _generate_point_project,
    execute_task,
    load_results,
    make_tasks,
    parse_shard,
    select_shard,
)
from benchgen.sweep_cli import sweep_and_report
from benchgen.sweep_config import SweepError, SweepSpec, expand, load_sweep, parse_sweep

BASE = {"name": "tiny", "function": "sincos", "angle_width": 10, "data_width": 8, "iterations": 10, "guard_bits": 4,
        "max_error_lsb": 1.5}


def sweep_raw(**extra: Any) -> dict[str, Any]:
    raw: dict[str, Any] = {
        "sweep": {"name": "t", "simulators": ["icarus", "verilator"], "samples": 100, "seed": 5},
        "base": dict(BASE),
        "matrix": {"pipeline_depth": [1, 2, 5], "rounding": ["truncate", "half_even"]},
    }
    raw.update(extra)
    return raw


CALLS: list[str] = []
QUICK = ("json", "junit")  # the plots have their own tests (test_report.py)


def run_and_report(spec: SweepSpec, out: Path, *, formats: tuple[str, ...] = QUICK, **run: Any) -> SweepOutcome:
    """Run a sweep, then write its report, as ``benchgen sweep`` does."""
    return sweep_and_report(spec, out, formats=formats, **run)[0]


def fake_runner(task: Any, work_root: str, cache_dir: str | None) -> dict[str, Any]:
    """Stand-in for execute_task: real project generation, model accuracy as the 'measurement'."""
    CALLS.append(task.task_id)
    _, design = _generate_point_project(task.core, Path(work_root) / task.task_id)
    base = {"kind": task.kind, "task_id": task.task_id, "key": task.key, "label": task.label,
            "seconds": 0.01, "cached": False, "design": design}
    if task.kind == "synth":
        depth = design["derived"]["pipeline_depth"] or 1
        est = {"target": task.target, "part": "stand-in", "luts": 100 + 3 * depth, "ffs": 20 * depth,
               "carry": 50, "mux": 7 if task.target == "ecp5" else 0, "bram": 0, "dsp": 0, "cells": {"LUT4": 100 + 3 * depth},
               "fmax_mhz": 30.0 + 10 * depth, "clock_mhz": 100.0, "logic_cells": 110 + 20 * depth,
               "tools": {"yosys": "stand-in"}, "seconds": 0.1, "note": None, "wrapper_ffs": 0}
        return {**base, "status": "ok", "source_hash": "0" * 16, "estimate": est}
    budget = design["error_budget"]
    bad = task.core.get("pipeline_depth") == 2 and task.simulator == "verilator" and FAIL_ONE
    report = SimReport(
        simulator=task.simulator, simulator_version="stand-in", toplevel=design["toplevel"], seed=task.seed,
        passed=not bad, tests=4, failed=1 if bad else 0, samples=100, mismatches=3 if bad else 0,
        max_error_lsb=budget["model_max_error_lsb"], rms_error_lsb=budget["model_rms_error_lsb"],
        error_budget_lsb=budget["max_error_lsb"], latency_cycles=design["derived"]["latency_cycles"],
        expected_latency_cycles=design["derived"]["latency_cycles"], cycles_per_sample=1.0,
        expected_cycles_per_sample=design["derived"]["cycles_per_sample"], sim_seconds=0.1, build_seconds=0.1,
        problems=["random_full_rate: 3 of 100 samples differ from the model"] if bad else [],
    )
    sim = report.as_dict()
    sim.pop("per_test")
    mism = [{"test": "random_full_rate", "index": 7, "in_angle": 12, "out_cos": 5, "expected_out_cos": 4}] if bad else []
    return {**base, "status": "failed" if bad else "passed", "source_hash": "0" * 16, "sim": sim,
            "first_mismatches": mism}


FAIL_ONE = False


@pytest.fixture(autouse=True)
def _reset() -> None:
    global FAIL_ONE
    CALLS.clear()
    FAIL_ONE = False


def test_expansion_crosses_matrix_and_simulators_in_file_order() -> None:
    spec = parse_sweep(sweep_raw())
    points = expand(spec)
    assert len(points) == 3 * 2 * 2
    assert [p.core["pipeline_depth"] for p in points[:4]] == [1, 1, 1, 1]
    assert [p.simulator for p in points[:2]] == ["icarus", "verilator"]
    assert len({p.point_id for p in points}) == len(points)
    assert all(p.core["data_width"] == 8 for p in points)


def test_exclude_and_include() -> None:
    raw = sweep_raw(
        exclude=[{"pipeline_depth": 5}, {"rounding": "truncate", "simulator": "verilator"}],
        include=[{"architecture": "iterative", "iterations_per_cycle": 2}],
    )
    points = expand(parse_sweep(raw))
    assert not any(p.core.get("pipeline_depth") == 5 for p in points)
    assert not any(p.core.get("rounding") == "truncate" and p.simulator == "verilator" for p in points)
    iterative = [p for p in points if p.core.get("architecture") == "iterative"]
    assert [p.simulator for p in iterative] == ["icarus", "verilator"]
    # depths {1, 2} x roundings {truncate, half_even} x 2 simulators, less truncate on verilator, plus 2
    assert len(points) == 2 * 2 * 2 - 2 + 2


def test_bad_points_are_all_named_with_field_and_value() -> None:
    raw = sweep_raw(matrix={"pipeline_depth": [4, 16, 32]})
    with pytest.raises(SweepError) as info:
        expand(parse_sweep(raw))
    msg = str(info.value)
    assert "pipeline_depth=16" in msg and "pipeline_depth=32" in msg
    assert "field 'pipeline_depth' = 16" in msg
    assert "pipeline_depth=4:" not in msg
    assert len(info.value.problems) == 2


@pytest.mark.parametrize(
    ("table", "value", "needle"),
    [
        ("sweep", {"simulators": ["modelsim"]}, "sweep.simulators"),
        ("sweep", {"samples": 0}, "sweep.samples"),
        ("synth", {"targets": ["xc7"]}, "synth.targets"),
        ("matrix", {"data_width": 12}, "matrix.data_width"),
        ("matrix", {"simulator": ["icarus"]}, "matrix.simulator"),
        ("colour", {"x": 1}, "[colour]"),
    ],
)
def test_badly_shaped_tables_name_the_key(table: str, value: Any, needle: str) -> None:
    raw = sweep_raw()
    raw[table] = value
    with pytest.raises(SweepError) as info:
        parse_sweep(raw)
    assert needle in str(info.value)
    assert "Fix:" in str(info.value)


def test_unknown_core_field_in_matrix_suggests_the_spelling() -> None:
    raw = sweep_raw(matrix={"pipline_depth": [1, 2]})
    with pytest.raises(SweepError) as info:
        expand(parse_sweep(raw))
    assert "pipline_depth" in str(info.value) and "pipeline_depth" in str(info.value)


def test_cli_bad_sweep_exits_2_without_traceback(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    f = tmp_path / "s.toml"
    f.write_text('[base]\nname = "c"\nfunction = "sincos"\ndata_width = 12\niterations = 12\n'
                 "[matrix]\npipeline_depth = [8, 13]\n")
    status = main(["sweep", str(f), "-o", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert status == 2
    assert "pipeline_depth=13" in err and "Traceback" not in err
    assert not (tmp_path / "out").exists()  # nothing ran


def test_shards_partition_the_tasks() -> None:
    spec = parse_sweep(sweep_raw(synth={"targets": ["ice40"]}))
    tasks = make_tasks(spec, expand(spec))
    shards = [select_shard(tasks, (i, 3)) for i in (1, 2, 3)]
    ids = [t.task_id for s in shards for t in s]
    assert sorted(ids) == sorted(t.task_id for t in tasks)
    assert len(set(ids)) == len(ids)
    assert all(s for s in shards)
    with pytest.raises(SweepError):
        parse_shard("0/3")
    with pytest.raises(SweepError):
        parse_shard("4/3")
    assert parse_shard("2/3") == (2, 3)


def test_interrupted_sweep_resumes_without_redoing_finished_points(tmp_path: Path) -> None:
    spec = parse_sweep(sweep_raw())
    out = tmp_path / "out"
    total = len(make_tasks(spec, expand(spec)))

    def stop_after_five(result: dict[str, Any]) -> None:
        if len(CALLS) == 5:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        run_and_report(spec, out, jobs=1, runner=fake_runner, on_result=stop_after_five, use_cache=False,
                  formats=QUICK)
    first = list(CALLS)
    saved = {p.name: p.read_bytes() for p in (out / "results" / "sim").glob("*.json")}
    assert len(saved) == 5
    CALLS.clear()
    outcome = run_and_report(spec, out, jobs=1, runner=fake_runner, use_cache=False, formats=QUICK)
    assert outcome.ran == total - 5
    assert not set(CALLS) & set(first)
    assert sorted(CALLS + first) == sorted(t.task_id for t in outcome.tasks)
    for name, data in saved.items():
        assert (out / "results" / "sim" / name).read_bytes() == data  # finished points untouched
    assert outcome.exit_status == 0


def test_changed_sweep_reruns_only_changed_points(tmp_path: Path) -> None:
    spec = parse_sweep(sweep_raw())
    run_and_report(spec, tmp_path / "o", jobs=1, runner=fake_runner, use_cache=False, formats=QUICK)
    CALLS.clear()
    raw = sweep_raw()
    raw["sweep"]["samples"] = 200  # every sim task changes
    outcome = run_and_report(parse_sweep(raw), tmp_path / "o", jobs=1, runner=fake_runner, use_cache=False, formats=QUICK)
    assert outcome.ran == len(outcome.tasks)


def test_failed_point_is_reported_and_others_still_run(tmp_path: Path) -> None:
    global FAIL_ONE
    FAIL_ONE = True
    spec = parse_sweep(sweep_raw())
    outcome = run_and_report(spec, tmp_path / "o", jobs=1, runner=fake_runner, use_cache=False,
                        formats=("junit", "md"))
    assert outcome.exit_status == 1
    bad = [t for t in outcome.failed]
    assert bad and all("pipeline_depth-2" in t and "verilator" in t for t in bad)
    assert sum(r["status"] == "passed" for r in outcome.results.values()) == len(outcome.tasks) - len(bad)
    junit = (tmp_path / "o" / "junit.xml").read_text()
    assert junit.count("<testcase") == len(outcome.tasks)
    assert junit.count("<failure") == len(bad)
    assert '"index": 7' in junit  # the first mismatch travels into the failure text
    md = (tmp_path / "o" / "report.md").read_text()
    assert "First mismatches" in md and "expected_out_cos" in md


def test_error_results_are_retried_on_resume(tmp_path: Path) -> None:
    spec = parse_sweep(sweep_raw())
    run_and_report(spec, tmp_path / "o", jobs=1, runner=fake_runner, use_cache=False, formats=QUICK)
    tasks = make_tasks(spec, expand(spec))
    victim = tmp_path / "o" / "results" / "sim" / f"{tasks[0].task_id}.json"
    data = json.loads(victim.read_text())
    data["status"] = "error"
    victim.write_text(json.dumps(data))
    assert tasks[0].task_id not in load_results(tmp_path / "o", tasks)
    CALLS.clear()
    run_and_report(spec, tmp_path / "o", jobs=1, runner=fake_runner, use_cache=False, formats=QUICK)
    assert CALLS == [tasks[0].task_id]


def test_sim_cache_hit_skips_the_simulator(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """A second run of the same point in a new folder reads the cache instead of simulating."""
    import benchgen.sim
    import benchgen.simulators
    from benchgen.simulators import SimulatorInfo

    runs: list[str] = []

    def fake_run_sim(project: Path, **kw: Any) -> SimReport:
        runs.append(str(project))
        return SimReport(simulator=kw["simulator"], simulator_version="9", toplevel="tiny", seed=kw["seed"],
                         passed=True, tests=4, samples=1, max_error_lsb=0.5, rms_error_lsb=0.3,
                         error_budget_lsb=1.5, latency_cycles=1, expected_latency_cycles=1,
                         cycles_per_sample=1.0, expected_cycles_per_sample=1)

    monkeypatch.setattr(benchgen.sim, "run_sim", fake_run_sim)
    version = {"v": "9"}
    monkeypatch.setattr(benchgen.simulators, "find_simulator",
                        lambda name: SimulatorInfo(name=name, executable=Path("/x"), version=version["v"]))
    spec = parse_sweep(sweep_raw(matrix={"pipeline_depth": [2]}, sweep={"simulators": ["icarus"]}))
    task = make_tasks(spec, expand(spec))[0]
    cache = str(tmp_path / "cache")
    r1 = execute_task(task, str(tmp_path / "w1"), cache)
    r2 = execute_task(task, str(tmp_path / "w2"), cache)
    assert (r1["cached"], r2["cached"]) == (False, True)
    assert len(runs) == 1
    version["v"] = "10"  # a new simulator version must miss the cache
    r3 = execute_task(task, str(tmp_path / "w3"), cache)
    assert r3["cached"] is False and len(runs) == 2
    assert r1["status"] == r2["status"] == "passed"


def test_example_sweep_is_valid_and_covers_the_required_grid() -> None:
    path = Path(__file__).resolve().parent.parent / "sim_projects" / "sweeps" / "nco_depth_width.toml"
    spec = load_sweep(path)
    points = expand(spec)
    raw = tomllib.loads(path.read_text())
    assert raw["matrix"]["pipeline_depth"] == [1, 2, 4, 8, 16]
    assert raw["matrix"]["data_width"] == [12, 16, 18]
    assert {p.simulator for p in points} == {"icarus", "verilator"}
    assert len(points) == 30
    assert set(spec.synth.targets) == {"ice40", "ecp5"}


def test_single_core_config_is_a_one_point_sweep(tmp_path: Path) -> None:
    f = tmp_path / "core.toml"
    f.write_text("".join(f"{k} = {json.dumps(v)}\n" for k, v in BASE.items()))
    points = expand(load_sweep(f))
    assert len(points) == 1 and points[0].simulator == "verilator"


def test_one_default_simulator_everywhere(tmp_path: Path) -> None:
    """demo, sim, a single-config sweep and a sweep file without simulators all pick Verilator."""
    from benchgen.cli import build_parser

    f = tmp_path / "core.toml"
    f.write_text("".join(f"{k} = {json.dumps(v)}\n" for k, v in BASE.items()))
    raw = sweep_raw()
    del raw["sweep"]["simulators"]
    parser = build_parser()
    chosen = {
        "demo": parser.parse_args(["demo"]).simulator,
        "sim": parser.parse_args(["sim", "project"]).simulator,
        "single config": expand(load_sweep(f))[0].simulator,
        "sweep file": parse_sweep(raw).simulators,
    }
    assert chosen == {"demo": "verilator", "sim": "verilator", "single config": "verilator",
                      "sweep file": ("verilator",)}
