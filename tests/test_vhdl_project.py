"""The `hdl` field: which languages a project's core is written in, and what generate and sim
do with it. A Verilog-only project is unchanged (tests/test_projects.py regenerates the
examples byte for byte)."""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import pytest
from conftest import write_config

from benchgen.cli import main
from benchgen.config import parse_config
from benchgen.errors import ConfigError
from benchgen.project import generate_project
from benchgen.sim import SimError, run_sim

GOOD = {"name": "v_core", "function": "sincos", "angle_width": 10, "data_width": 10}

BAD_HDL = [
    ("VHDL", '"vhdl"'),
    ("systemverilog", '"verilog"'),
    (["verilog", "vhld"], '["verilog", "vhdl"]'),
    (["vhdl", "vhdl"], '"vhdl"'),
    (["verilog", "vhdl", "verilog"], '["verilog", "vhdl"]'),
    ([], 'hdl = "verilog"'),
    (3, 'hdl = "verilog"'),
]


@pytest.mark.parametrize(("value", "fix"), BAD_HDL, ids=[str(v) for v, _ in BAD_HDL])
def test_a_bad_hdl_exits_2_with_one_line_and_a_fix_that_is_accepted(
    value: Any, fix: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    config = write_config(tmp_path / "c.toml", {**GOOD, "hdl": value})
    out = tmp_path / "project"
    status = main(["generate", str(config), "-o", str(out)])
    err = capsys.readouterr().err
    assert status == 2
    assert "field 'hdl'" in err and "Fix:" in err and fix in err, err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert not out.exists()
    with pytest.raises(ConfigError) as refused:
        parse_config({**GOOD, "hdl": value})
    assert refused.value.suggestion is not None
    assert parse_config({**GOOD, **refused.value.suggestion}).hdl  # the fix is accepted


@pytest.mark.parametrize(
    ("value", "hdl"),
    [("verilog", ("verilog",)), ("vhdl", ("vhdl",)), (["vhdl", "verilog"], ("verilog", "vhdl"))],
)
def test_hdl_values(value: Any, hdl: tuple[str, ...]) -> None:
    assert parse_config({**GOOD, "hdl": value}).hdl == hdl


def test_no_hdl_is_verilog_and_stays_out_of_the_manifest(tmp_path: Path) -> None:
    assert parse_config(GOOD).hdl == ("verilog",)
    out = tmp_path / "p"
    generate_project(write_config(tmp_path / "c.toml", GOOD), out)
    manifest = json.loads((out / "manifest.json").read_text())
    assert "hdl" not in manifest["config"] and "vhdl" not in manifest["files"]


def _generate(tmp_path: Path, name: str, **values: Any) -> tuple[Path, dict[str, Any]]:
    out = tmp_path / name
    generate_project(write_config(tmp_path / f"{name}.toml", {**GOOD, **values}), out)
    return out, json.loads((out / "manifest.json").read_text())


def test_both_languages_give_both_cores_from_one_description(tmp_path: Path) -> None:
    verilog_only, _ = _generate(tmp_path, "a")
    both, manifest = _generate(tmp_path, "b", hdl=["verilog", "vhdl"])
    assert manifest["files"]["vhdl"] == ["rtl/v_core.vhd"]
    assert manifest["files"]["rtl"] == ["rtl/v_core.v"]
    assert "rtl/v_core.vhd" in manifest["files"]["generated"]
    assert manifest["config"]["hdl"] == ["verilog", "vhdl"]
    vhdl = (both / "rtl" / "v_core.vhd").read_text()
    assert "entity v_core is" in vhdl and "use ieee.numeric_std.all;" in vhdl
    # The header (formats, error, latency, config) is the Verilog's, with VHDL comments.
    verilog_header = [line[3:] for line in (both / "rtl" / "v_core.v").read_text().splitlines() if line.startswith("// ")]
    vhdl_header = [line[3:] for line in vhdl.splitlines() if line.startswith("-- ")]
    assert verilog_header[:-1] == vhdl_header[: len(verilog_header) - 1]
    # The Verilog of a project with both languages differs from a Verilog-only one's only in
    # the config lines of its header.
    strip = lambda text: [x for x in text.splitlines() if "hdl" not in x]  # noqa: E731
    assert strip((both / "rtl" / "v_core.v").read_text()) == strip((verilog_only / "rtl" / "v_core.v").read_text())
    assert "rtl/v_core.vhd" in (both / "README.md").read_text()


def test_vhdl_only_writes_no_verilog_and_verilog_simulators_refuse_it(tmp_path: Path) -> None:
    out, manifest = _generate(tmp_path, "c", hdl="vhdl")
    assert manifest["files"]["rtl"] == []
    assert sorted(p.name for p in (out / "rtl").iterdir()) == ["v_core.vhd", "v_core_bulk.vhd"]
    assert "rtl/v_core.vhd" in (out / "v_core.core").read_text()  # FuseSoC: the VHDL (test_vhdl_tools.py)
    with pytest.raises(SimError, match='--simulator ghdl'):
        run_sim(out, simulator="icarus", samples=10)


def test_ghdl_refuses_a_project_without_vhdl(tmp_path: Path) -> None:
    out, _ = _generate(tmp_path, "d")
    with pytest.raises(SimError, match=r'hdl = \["verilog", "vhdl"\]'):
        run_sim(out, simulator="ghdl", samples=10)


def test_regenerating_without_vhdl_removes_the_vhdl_it_wrote(tmp_path: Path) -> None:
    out, _ = _generate(tmp_path, "f", hdl=["verilog", "vhdl"])
    generate_project(write_config(tmp_path / "f.toml", GOOD), out)
    assert not (out / "rtl" / "v_core.vhd").exists()
    assert (out / "rtl" / "v_core.v").exists()


# ----------------------------------------------------------------------------- on GHDL

# The VHDL cores of every function on GHDL against the model (20,000 samples each), and the
# Verilog and VHDL cores giving the same stream for each function, run in tests/test_sim.py
# (test_functions_on_ghdl, test_verilog_on_verilator_and_vhdl_on_ghdl_give_the_same_stream);
# the bulk bench on GHDL in tests/test_ghdl_bulk.py.


def test_a_missing_or_old_ghdl_is_one_clear_line(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                                monkeypatch: pytest.MonkeyPatch) -> None:
    """No ghdl on PATH, or a GHDL older than 2.0: exit 3 with how to install it, no traceback."""
    from benchgen import simulators
    from benchgen.simulators import SimulatorMissing, find_simulator

    out, _ = _generate(tmp_path, "g", hdl="vhdl")
    monkeypatch.setattr(simulators.shutil, "which", lambda name: None)
    with pytest.raises(SimulatorMissing, match="apt-get install ghdl"):
        find_simulator("ghdl")
    status = main(["sim", str(out), "--simulator", "ghdl"])
    err = capsys.readouterr().err
    assert status == 3 and "apt-get install ghdl" in err and "Traceback" not in err
    monkeypatch.setattr(simulators.shutil, "which", lambda name: f"/usr/bin/{name}")
    monkeypatch.setattr(simulators, "_run_version", lambda cmd, env=None: "GHDL 1.0.0 (Debian) [Dunoon edition]")
    with pytest.raises(SimulatorMissing, match="GHDL 1.0.0, but benchgen needs 2.0"):
        find_simulator("ghdl")


def test_a_core_named_like_a_port_in_another_case_is_refused_for_vhdl(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """VHDL ignores case: a port clk would hide an entity CLK (ghdl -Whide). Verilog tells them
    apart, so a Verilog-only core may keep the name."""
    for hdl, refused in (("verilog", False), (["verilog", "vhdl"], True)):
        config = write_config(tmp_path / "n.toml", {**GOOD, "name": "CLK", "hdl": hdl})
        out = tmp_path / f"n_{refused}"
        status = main(["generate", str(config), "-o", str(out)])
        err = capsys.readouterr().err
        if not refused:
            assert status == 0
            continue
        assert status == 2 and "field 'name'" in err and "Traceback" not in err and err.count("\n") == 1
        fix = re.search(r'name = "(\w+)"', err)
        assert fix is not None
        generate_project(write_config(tmp_path / "fixed.toml", {**GOOD, "name": fix.group(1), "hdl": hdl}),
                         tmp_path / "fixed")
