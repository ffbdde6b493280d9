"""The checked-in example projects are exactly what this benchgen generates from their configs."""

from __future__ import annotations

import json
import subprocess
import sys
from importlib import resources
from pathlib import Path

import pytest
from conftest import require_simulator

from benchgen.project import generate_project

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = sorted(p.parent for p in (ROOT / "sim_projects").glob("*/manifest.json"))


def files_of(folder: Path) -> dict[str, bytes]:
    return {
        str(p.relative_to(folder)): p.read_bytes()
        for p in sorted(folder.rglob("*"))
        if p.is_file() and "build" not in p.relative_to(folder).parts and "__pycache__" not in p.parts
    }


def test_there_are_examples() -> None:
    assert len(EXAMPLES) >= 3


@pytest.mark.parametrize("example", EXAMPLES, ids=[e.name for e in EXAMPLES])
def test_example_regenerates_byte_identical(example: Path, tmp_path: Path) -> None:
    out = tmp_path / example.name
    generate_project(example / "config.toml", out)
    want = files_of(example)
    got = files_of(out)
    assert sorted(got) == sorted(want), "file lists differ"
    for rel in want:
        assert got[rel] == want[rel], f"{example.name}/{rel} differs from a fresh generation: regenerate it"


def test_demo_config_is_the_radio_example() -> None:
    demo = resources.files("benchgen").joinpath("examples/demo.toml").read_text()
    assert demo == (ROOT / "sim_projects" / "radio_ddc_nco" / "config.toml").read_text()


def test_regeneration_over_an_existing_project_keeps_the_build(tmp_path: Path) -> None:
    example = EXAMPLES[0]
    out = tmp_path / "p"
    generate_project(example / "config.toml", out)
    (out / "build").mkdir()
    (out / "build" / "keep.txt").write_text("x")
    generate_project(example / "config.toml", out)
    assert (out / "build" / "keep.txt").read_text() == "x"
    assert files_of(out) == {k: v for k, v in files_of(example).items()}


@pytest.mark.sim
def test_project_runner_script_runs(tmp_path: Path) -> None:
    require_simulator("icarus")
    out = tmp_path / "motor"
    generate_project(ROOT / "sim_projects" / "motor_park_sincos" / "config.toml", out)
    proc = subprocess.run(
        [sys.executable, "run.py", "--simulator", "icarus", "--samples", "300", "--seed", "5", "--json", "r.json"],
        cwd=out,
        capture_output=True,
        text=True,
        timeout=600,
    )
    assert proc.returncode == 0, proc.stdout + proc.stderr
    report = json.loads((out / "r.json").read_text())
    for key in ("simulator", "samples", "mismatches", "max_error_lsb", "rms_error_lsb", "latency_cycles", "cycles_per_sample", "sim_seconds"):
        assert key in report
    assert report["mismatches"] == 0 and report["samples"] >= 300
