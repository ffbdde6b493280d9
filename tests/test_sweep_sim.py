"""Sweeps that really simulate: a tiny Icarus sweep, an interrupted and resumed one, a broken point,
and the same sweep on a Dask LocalCluster giving the same report as the local pool."""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import pytest

import benchgen.sweep as sweep_mod
from benchgen.sweep import run_sweep
from tests.test_sweep import run_and_report
from benchgen.sweep_config import parse_sweep
from tests.conftest import require_simulator

pytestmark = pytest.mark.sim

STABLE = ("report.csv", "report.md", "junit.xml")


def tiny(depths: list[int]) -> Any:
    return parse_sweep({
        "sweep": {"name": "tiny_sim", "simulators": ["icarus"], "samples": 300, "seed": 11},
        "base": {"name": "tiny_nco", "function": "sincos", "angle_width": 10, "data_width": 8,
                 "iterations": 10, "guard_bits": 4, "max_error_lsb": 1.5},
        "matrix": {"pipeline_depth": depths},
    })


def test_interrupted_real_sweep_resumes_and_verifies_every_point(tmp_path: Path) -> None:
    require_simulator("icarus")
    spec = tiny([1, 3, 10])
    out = tmp_path / "out"
    seen: list[str] = []

    def stop(result: dict[str, Any]) -> None:
        seen.append(result["task_id"])
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        run_sweep(spec, out, jobs=1, cache_dir=tmp_path / "cache", on_result=stop)
    done = out / "results" / "sim" / f"{seen[0]}.json"
    before = done.read_bytes()
    outcome = run_and_report(spec, out, jobs=1, cache_dir=tmp_path / "cache", formats=("junit", "csv"))
    assert outcome.ran == 2
    assert done.read_bytes() == before
    assert outcome.exit_status == 0, outcome.failed
    for r in outcome.results.values():
        assert r["status"] == "passed"
        assert r["sim"]["mismatches"] == 0 and r["sim"]["samples"] >= 300
        assert r["sim"]["latency_cycles"] == r["design"]["derived"]["latency_cycles"]
    junit = (out / "junit.xml").read_text()
    assert junit.count("<testcase") == 3 and "<failure" not in junit


def _break_lsb(project: Path) -> None:
    """Wrap the core so that bit 0 of out_cos is inverted: every sample must then mismatch."""
    manifest = json.loads((project / "manifest.json").read_text())
    top, ports = manifest["toplevel"], manifest["ports"]
    rtl = project / manifest["files"]["rtl"][0]
    text = re.sub(rf"\bmodule\s+{top}\b", f"module {top}_inner", rtl.read_text(), count=1)
    outputs = {"in_ready", "out_valid", "out_cos", "out_sin", "out_tag"}
    decl = []
    for name, width in ports.items():
        kind = "output" if name in outputs else "input"
        decl.append(f"    {kind} wire {'' if width == 1 else f'[{width - 1}:0] '}{name}")
    conns = ", ".join(f".{n}({'cos_inner' if n == 'out_cos' else n})" for n in ports)
    w = ports["out_cos"]
    text += (f"\nmodule {top} (\n" + ",\n".join(decl) + "\n);\n"
             f"    wire [{w - 1}:0] cos_inner;\n"
             f"    {top}_inner core ({conns});\n"
             f"    assign out_cos = cos_inner ^ {w}'d1;\nendmodule\n")
    rtl.write_text(text)


def test_a_point_that_fails_verification_is_reported_and_the_others_run(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    require_simulator("icarus")
    real = sweep_mod._generate_point_project

    def generate(core: dict[str, Any], folder: Path) -> tuple[Path, dict[str, Any]]:
        project, design = real(core, folder)
        if core.get("pipeline_depth") == 3:
            _break_lsb(project)
        return project, design

    monkeypatch.setattr(sweep_mod, "_generate_point_project", generate)
    outcome = run_and_report(tiny([1, 3, 10]), tmp_path / "out", jobs=1, use_cache=False, formats=("junit", "md"))
    status = {r["task_id"].split("__")[0]: r["status"] for r in outcome.results.values()}
    assert status == {"pipeline_depth-1": "passed", "pipeline_depth-3": "failed", "pipeline_depth-10": "passed"}
    assert outcome.exit_status == 1
    bad = next(r for r in outcome.results.values() if r["status"] == "failed")
    assert bad["first_mismatches"]
    assert bad["sim"]["mismatches"] > 0
    md = (tmp_path / "out" / "report.md").read_text()
    assert "## Failures" in md and "First mismatches" in md
    junit = (tmp_path / "out" / "junit.xml").read_text()
    assert junit.count("<failure") == 1


def test_dask_local_cluster_gives_the_same_report_as_the_local_pool(tmp_path: Path) -> None:
    require_simulator("icarus")
    pytest.importorskip("distributed")
    spec = tiny([2, 5])
    pool = run_and_report(spec, tmp_path / "pool", jobs=2, cache_dir=tmp_path / "c1", formats=STABLE_FORMATS)
    dask = run_and_report(spec, tmp_path / "dask", jobs=2, cluster="local", cache_dir=tmp_path / "c2",
                     formats=STABLE_FORMATS)
    assert pool.exit_status == dask.exit_status == 0
    assert dask.ran == pool.ran == 2
    assert not any(r["cached"] for r in dask.results.values())  # its own cache: really ran on the cluster
    for f in STABLE:
        assert (tmp_path / "pool" / f).read_bytes() == (tmp_path / "dask" / f).read_bytes(), f


STABLE_FORMATS = ("csv", "md", "junit")
