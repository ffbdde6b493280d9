"""What a VHDL project carries besides its core: the FuseSoC core file (the VHDL with a GHDL lint
target, for a VHDL-only project) and the runner (run.py names and picks GHDL)."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
import yaml  # FuseSoC's own dependency: the .core file is YAML
from conftest import require_simulator, write_config

from benchgen import __version__
from benchgen.project import generate_project

BASE = {"name": "v_core", "function": "sincos", "angle_width": 10, "data_width": 10}


def _project(tmp_path: Path, name: str, hdl: str | None) -> Path:
    """A project with ``hdl`` (a TOML value) or without the field."""
    config = write_config(tmp_path / f"{name}.toml", BASE)
    if hdl is not None:
        config.write_text(config.read_text() + f"hdl = {hdl}\n")
    out = tmp_path / name
    generate_project(config, out)
    return out


def fusesoc(cores_root: Path, *args: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    """Run FuseSoC with its configuration and caches inside ``cwd`` (never the user's home)."""
    env = {**os.environ}
    for var in ("XDG_CONFIG_HOME", "XDG_CACHE_HOME", "XDG_DATA_HOME"):
        env[var] = str(cwd / "xdg" / var.lower())
    return subprocess.run(
        [sys.executable, "-m", "fusesoc.main", "--cores-root", str(cores_root), *args],
        cwd=cwd, env=env, capture_output=True, text=True, timeout=300,
    )  # fmt: skip


def test_a_vhdl_only_project_has_a_core_file_listing_its_vhdl(tmp_path: Path) -> None:
    out = _project(tmp_path, "vhdl", '"vhdl"')
    manifest = json.loads((out / "manifest.json").read_text())
    assert "v_core.core" in manifest["files"]["generated"]
    core: dict[str, Any] = yaml.safe_load((out / "v_core.core").read_text())
    assert core["name"] == f"benchgen:cores:v_core:{__version__}"
    assert core["filesets"]["rtl"] == {"files": ["rtl/v_core.vhd"], "file_type": "vhdlSource-2008"}
    lint = core["targets"]["lint"]
    assert lint["toplevel"] == "v_core" and lint["flow_options"]["tool"] == "ghdl"
    assert "-Werror" in lint["flow_options"]["analyze_options"]
    assert "fusesoc --cores-root . run --target lint" in (out / "README.md").read_text()


def test_a_project_with_both_languages_keeps_the_verilog_core_file(tmp_path: Path) -> None:
    """The core file of a project with Verilog is the same with or without the VHDL beside it."""
    both = _project(tmp_path, "both", '["verilog", "vhdl"]')
    verilog = _project(tmp_path, "verilog", None)
    assert (both / "v_core.core").read_text() == (verilog / "v_core.core").read_text()


@pytest.mark.sim
def test_fusesoc_ghdl_lint_target_passes_and_catches_a_warning(tmp_path: Path) -> None:
    """FuseSoC (edalize's GHDL back end, offline) analyses the VHDL with every warning as an
    error and elaborates it; a nested block comment, which GHDL only warns about, fails it."""
    require_simulator("ghdl")
    out = _project(tmp_path, "p", '"vhdl"')
    name = f"benchgen:cores:v_core:{__version__}"
    run = fusesoc(out, "run", "--target", "lint", name, cwd=tmp_path)
    assert run.returncode == 0, run.stdout + run.stderr
    assert "ghdl -m --std=08" in run.stdout and "-Werror" in run.stdout  # analysed and elaborated
    assert "ghdl -r --std=08" in run.stdout
    rtl = out / "rtl" / "v_core.vhd"
    rtl.write_text(rtl.read_text().replace("architecture rtl of v_core is\n",
                                           "architecture rtl of v_core is\n    /* stray /* probe */\n", 1))
    broken = fusesoc(out, "run", "--target", "lint", name, cwd=tmp_path)
    assert broken.returncode != 0
    assert "'/*' found within a block comment" in broken.stdout + broken.stderr


@pytest.mark.parametrize(
    ("hdl", "usage"),
    [
        (None, "python run.py --simulator verilator|icarus [options]"),
        ('["verilog", "vhdl"]', "python run.py --simulator verilator|icarus|ghdl [options]"),
        ('"vhdl"', "python run.py [--simulator ghdl] [options]"),
    ],
)
def test_the_runner_names_the_simulators_of_the_core_languages(hdl: str | None, usage: str, tmp_path: Path) -> None:
    out = _project(tmp_path, "r", hdl)
    assert usage in (out / "run.py").read_text().splitlines()[0]


@pytest.mark.sim
def test_the_runner_of_a_vhdl_only_project_runs_ghdl_by_default(tmp_path: Path) -> None:
    """Without --simulator, benchgen sim would pick Verilator, which reads no VHDL."""
    require_simulator("ghdl")
    out = _project(tmp_path, "r", '"vhdl"')
    proc = subprocess.run(
        [sys.executable, "run.py", "--samples", "40", "--seed", "5", "--json", "r.json"],
        cwd=out, capture_output=True, text=True, timeout=600,
    )  # fmt: skip
    assert proc.returncode == 0, proc.stdout + proc.stderr
    report = json.loads((out / "r.json").read_text())
    assert report["simulator"] == "ghdl" and report["mismatches"] == 0 and report["samples"] >= 40
