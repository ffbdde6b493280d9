"""Sweeps of VHDL cores: GHDL as a sweep simulator, and estimates of a VHDL core read from the
Verilog of the same description (the bundled Yosys reads no VHDL)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest
from tests.test_synth import require_yowasp

from benchgen.cli import main
from benchgen.sweep import VERILOG_TWIN_NOTE
from benchgen.sweep_config import SweepError, expand, parse_sweep
from tests.conftest import require_simulator
from tests.test_sweep import run_and_report

BASE = {"name": "v_nco", "function": "sincos", "angle_width": 10, "data_width": 8, "iterations": 10,
        "guard_bits": 3, "max_error_lsb": 1.5}


def _sweep(hdl: Any, simulators: list[str] | None, **extra: Any) -> dict[str, Any]:
    sweep: dict[str, Any] = {"name": "vhdl_sweep", "samples": 200, "seed": 3}
    if simulators is not None:
        sweep["simulators"] = simulators
    return {"sweep": sweep, "base": {**BASE, "hdl": hdl}, "matrix": {"pipeline_depth": [2, 4]}, **extra}


@pytest.mark.parametrize("hdl", ["vhdl", ["verilog", "vhdl"]])
def test_a_sweep_takes_ghdl_for_a_core_with_vhdl(hdl: Any) -> None:
    points = expand(parse_sweep(_sweep(hdl, ["ghdl"])))
    assert [p.simulator for p in points] == ["ghdl", "ghdl"]


def test_a_vhdl_only_core_run_as_a_sweep_defaults_to_ghdl() -> None:
    assert parse_sweep(_sweep("vhdl", None)).simulators == ("ghdl",)
    assert parse_sweep(_sweep(["verilog", "vhdl"], None)).simulators == ("verilator",)


@pytest.mark.parametrize(
    ("hdl", "simulator", "fixed"),
    [("vhdl", "verilator", ["ghdl"]), ("verilog", "ghdl", ["verilator"])],
)
def test_a_simulator_that_cannot_read_the_core_is_refused_with_a_fix(
    hdl: str, simulator: str, fixed: list[str], tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    with pytest.raises(SweepError) as refused:
        expand(parse_sweep(_sweep(hdl, [simulator])))
    problems = refused.value.problems
    assert len(problems) == 2 and all("\n" not in p for p in problems)  # one line a point
    assert f"on {simulator}" in problems[0] and 'hdl = ["verilog", "vhdl"]' in problems[0]
    # Both fixes the message offers are accepted.
    expand(parse_sweep(_sweep(["verilog", "vhdl"], [simulator])))
    expand(parse_sweep(_sweep(hdl, fixed)))
    # On the command line: exit 2, the line, no traceback.
    sweep_file = tmp_path / "s.toml"
    sweep_file.write_text(
        '[sweep]\nname = "s"\nsimulators = ["' + simulator + '"]\n[base]\n'
        + "".join(f"{k} = {v!r}\n".replace("'", '"') for k, v in BASE.items()) + f'hdl = "{hdl}"\n'
    )
    status = main(["sweep", str(sweep_file), "-o", str(tmp_path / "out"), "--dry-run"])
    err = capsys.readouterr().err
    assert status == 2 and "Fix:" in err and "Traceback" not in err


@pytest.mark.sim
@pytest.mark.synth
def test_a_tiny_vhdl_sweep_on_ghdl_with_estimates_from_the_verilog(tmp_path: Path) -> None:
    """Two depths of a VHDL-only core on GHDL (200 samples each) with iCE40 estimates (Yosys
    only): every point verified, and each estimate made from the Verilog twin, which the
    report says."""
    require_simulator("ghdl")
    require_yowasp()
    spec = parse_sweep(_sweep("vhdl", ["ghdl"], synth={"targets": ["ice40"]}))
    out = tmp_path / "out"
    outcome = run_and_report(spec, out, jobs=1, cache_dir=tmp_path / "cache", formats=("md", "json"))
    assert outcome.exit_status == 0, outcome.failed
    sims = [r for r in outcome.results.values() if r["kind"] == "sim"]
    estimates = [r for r in outcome.results.values() if r["kind"] == "synth"]
    assert len(sims) == 2 and len(estimates) == 2
    for r in sims:
        assert r["status"] == "passed" and r["sim"]["simulator"] == "ghdl"
        assert r["sim"]["mismatches"] == 0 and r["sim"]["samples"] >= 200
    ffs = set()
    for r in estimates:
        assert r["status"] == "ok" and r["estimate"]["note"] == VERILOG_TWIN_NOTE
        assert r["estimate"]["luts"] > 0 and r["estimate"]["ffs"] > 0
        ffs.add(r["estimate"]["ffs"])
    assert len(ffs) == 2  # each depth estimated from its own Verilog, not one cached text
    assert "the bundled Yosys reads no VHDL" in (out / "report.md").read_text()
