"""The free-running NCO (``nco_mode = "free_running"``): its config, its ports, its description
against benchgen.nco.run given the registers that feed themselves, its simulation bit for bit
with loads mid-record on Icarus, Verilator and GHDL; and the phase sum's own register stage in
pipelined NCOs (docs/nco.md, "Free-running")."""

from __future__ import annotations

import json
import shutil
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.errors import ConfigError
from benchgen.hardware import build_core
from benchgen.lfsr import lfsr_states
from benchgen.nco import Change, run
from benchgen.netlist import evaluate as run_netlist
from benchgen.project import generate_project
from benchgen.sim import SimError, run_sim
from tests.conftest import require_simulator, write_config

BASE = {"name": "lo", "function": "nco", "angle_width": 10, "data_width": 12, "acc_width": 24, "dither_width": 3}
FREE = {**BASE, "nco_mode": "free_running"}


def _design(**values: Any) -> Any:
    return build_design(parse_config({**FREE, **values}))


# ----------------------------------------------------------------------------- config and ports


def test_free_running_is_valid_only_by_default_and_has_a_load_port_and_no_input_stream() -> None:
    design = _design()
    assert design.spec.handshake == "valid_only"
    names = [p.name for p in design.ports]
    assert names == ["clk", "rst", "load", "in_freq_word", "in_phase_offset", "out_valid", "out_cos", "out_sin"]
    assert next(p for p in design.ports if p.name == "load").role == "load"
    # one sample per clock, and the streamed core of the same config has the same timing
    streamed = build_design(parse_config({**BASE, "handshake": "valid_only"}))
    assert design.timing == streamed.timing and design.timing.cycles_per_sample == 1


@pytest.mark.parametrize(
    ("values", "field"),
    [
        ({"architecture": "iterative"}, "architecture"),
        ({"architecture": "iterative", "iterations_per_cycle": 2}, "architecture"),
        ({"handshake": "ready_valid"}, "handshake"),
        ({"tag_width": 4}, "tag_width"),
        ({"nco_mode": "free-runing"}, "nco_mode"),
        ({"nco_mode": 1}, "nco_mode"),
    ],
)
def test_what_a_free_running_core_cannot_be_is_refused_in_one_line_with_a_fix_that_is_accepted(
    values: dict[str, Any], field: str
) -> None:
    with pytest.raises(ConfigError) as err:
        parse_config({**FREE, **values})
    assert err.value.field == field
    assert "\n" not in str(err.value)
    fixed = {**FREE, **values, **err.value.suggestion}
    parse_config({k: v for k, v in fixed.items() if v is not None})


@pytest.mark.parametrize(
    ("written", "meant"),
    [("free-running", "free_running"), ("Free-Running NCO", "free_running"), ("continuous", "free_running"), ("stream", "streamed")],
)
def test_a_trade_spelling_of_the_mode_is_offered_its_value(written: str, meant: str) -> None:
    with pytest.raises(ConfigError) as err:
        parse_config({**BASE, "nco_mode": written})
    assert err.value.field == "nco_mode" and err.value.suggestion == {"nco_mode": meant}
    assert f'nco_mode = "{meant}"' in str(err.value)


def test_nco_mode_is_refused_for_other_functions() -> None:
    with pytest.raises(ConfigError) as err:
        parse_config({"name": "c", "function": "sincos", "nco_mode": "free_running"})
    assert err.value.field == "nco_mode" and "nco" in str(err.value)


def test_a_streamed_nco_keeps_its_manifest_config_without_the_mode(tmp_path: Path) -> None:
    """The default mode is left out of the manifest (so streamed projects keep their bytes);
    a free-running core's manifest states it and rebuilds the same design."""
    from benchgen.config import spec_to_dict

    assert "nco_mode" not in spec_to_dict(parse_config(BASE))
    config = spec_to_dict(parse_config(FREE))
    assert config["nco_mode"] == "free_running" and config["handshake"] == "valid_only"
    assert parse_config(config) == parse_config(FREE)


# ----------------------------------------------------------------------------- description


def _given(design: Any, loads: dict[int, tuple[int, int]], n: int, rng: np.random.Generator, *, honest: bool = True) -> tuple[dict[str, Any], Any]:
    """Inputs of the transparent evaluator for n samples of the free-running core, the
    registers that feed themselves given from the model, and the model's output.

    Between loads the word inputs hold random other words (the core must ignore them). With
    ``honest=False`` the load strobe is given low throughout: the select must then read the
    registers, and the result must differ from the model."""
    dp = design.datapath
    a = dp.acc_width
    model = run(dp.phase(), dp.core(), n, changes=[Change(k, *w) for k, w in sorted(loads.items())])
    fw, po = (model.path.freq_word.astype(np.int64), model.path.phase_offset.astype(np.int64))
    load = np.array([k in loads for k in range(n)], dtype=np.int64)
    junk = rng.integers(0, 1 << a, size=(n, 2), dtype=np.int64)
    # the word registers hold what was loaded before each sample (0 after reset)
    fw_reg = np.concatenate([[0], fw[:-1]])
    po_reg = np.concatenate([[0], po[:-1]])
    given = {
        "load": load if honest else np.zeros(n, dtype=np.int64),
        "in_freq_word": np.where(load == 1, fw, junk[:, 0]),
        "in_phase_offset": np.where(load == 1, po, junk[:, 1]),
        "acc_reg": model.path.accumulator.astype(np.int64),
        "fw_reg": fw_reg,
        "po_reg": po_reg,
    }
    if dp.dither_width:
        given["lfsr_reg"] = lfsr_states(dp.lfsr_width, dp.lfsr_seed, n, dp.dither_width).astype(np.int64)
    return given, model


@pytest.mark.parametrize("values", [{}, {"dither_width": 0, "pipeline_depth": 4, "clock_enable": True}])
def test_description_equals_benchgen_nco_run_given_the_registers(values: dict[str, Any]) -> None:
    """The select (a load acts in its own clock), the phase sum, the dither, the truncation and
    the core, evaluated with the registers that feed themselves given from the model, equal
    benchgen.nco.run on every sample; with the load strobe held low (the registers' words
    instead of the ports'), they differ: the check can fail."""
    design = _design(**values)
    module = build_core(design)
    rng = np.random.default_rng(14)
    n = 2048
    at = [0] + sorted(int(k) for k in rng.choice(np.arange(1, n), size=40, replace=False))
    loads = {k: (int(rng.integers(0, 1 << 24)), int(rng.integers(0, 1 << 24))) for k in at}
    given, model = _given(design, loads, n, rng)
    got = run_netlist(module, given)
    mask = (1 << 12) - 1
    assert np.array_equal(np.asarray(got["out_cos"]).astype(np.int64), model.cos.astype(np.int64) & mask)
    assert np.array_equal(np.asarray(got["out_sin"]).astype(np.int64), model.sin.astype(np.int64) & mask)
    stale, _ = _given(design, loads, n, np.random.default_rng(14), honest=False)
    off = run_netlist(module, stale)
    assert not np.array_equal(np.asarray(off["out_sin"]).astype(np.int64), model.sin.astype(np.int64) & mask)


def test_the_phase_sum_has_its_own_register_stage_in_a_pipeline() -> None:
    """A pipelined NCO registers the phase code before the fold (its latency counts the stage);
    an iterative one loads it straight into its iteration registers, as before."""
    for mode in ("streamed", "free_running"):
        extra = {"handshake": "valid_only"} if mode == "streamed" else {}
        nco = build_design(parse_config({**BASE, **extra, "nco_mode": mode}))
        sincos = build_design(parse_config({"name": "lo", "function": "sincos", "angle_width": 10, "data_width": 12}))
        assert nco.timing.front == 1
        assert nco.timing.latency_cycles == sincos.timing.latency_cycles + 1
        from benchgen.rtl import render_module

        text = render_module(build_core(nco))
        assert "wire in_fold = f0_phase_code_reg[9] ^ f0_phase_code_reg[8];" in text
    iterative = build_design(parse_config({**BASE, "architecture": "iterative"}))
    assert iterative.timing.front == 0


# ----------------------------------------------------------------------------- project and runner


def _project(tmp_path: Path, config: dict[str, Any]) -> Path:
    tmp_path.mkdir(parents=True, exist_ok=True)
    out = tmp_path / "proj"
    generate_project(write_config(tmp_path / "lo.toml", config), out)
    return out


def test_a_free_running_project_has_no_bulk_harness_and_bulk_runs_are_refused(tmp_path: Path) -> None:
    project = _project(tmp_path, FREE)
    manifest = json.loads((project / "manifest.json").read_text())
    assert not any("_bulk" in f for f in manifest["files"]["generated"])
    assert "benchgen.bench.free_running" in (project / "bench" / "test_lo.py").read_text()
    for kwargs in ({"mode": "bulk"}, {"mode": "auto", "exhaustive": True}):
        with pytest.raises(SimError, match="free-running core has no input stream") as err:
            run_sim(project, simulator="icarus", samples=10, **kwargs)
        assert "\n" not in str(err.value)


# ----------------------------------------------------------------------------- simulation

# Variants run bit for bit against benchgen.nco.run with loads of both words at random clocks
# (the load test), a reset mid-run and a tone with a load mid-record: dither, a clock enable and
# an asynchronous active-low reset on Icarus; the defaults with a 48-bit accumulator and 2
# register stages on Verilator; the VHDL with dither on GHDL.
VARIANTS = {
    "dither_enable_async": {"clock_enable": True, "reset_style": "asynchronous", "reset_polarity": "active_low"},
    "wide_short": {"acc_width": 48, "dither_width": 0, "pipeline_depth": 2},
    "vhdl": {"hdl": "vhdl", "dither_width": 14},
}
SIM_CASES = [("dither_enable_async", "icarus"), ("wide_short", "verilator"), ("vhdl", "ghdl")]


@pytest.mark.sim
@pytest.mark.parametrize(("variant", "simulator"), SIM_CASES)
def test_free_running_core_matches_the_model_bit_for_bit_in_simulation(
    tmp_path: Path, simulator: str, variant: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    require_simulator(simulator)
    monkeypatch.setenv("BENCHGEN_TONE", json.dumps({"samples": 1024}))
    report = run_sim(_project(tmp_path, {**FREE, **VARIANTS[variant]}), simulator=simulator, samples=1500, seed=14)
    assert report.mode == "per-clock"
    assert report.passed, report.problems
    assert report.tests == 3 and report.mismatches == 0
    assert report.latency_cycles == build_design(parse_config({**FREE, **VARIANTS[variant]})).timing.latency_cycles
    loads = next(t for t in report.per_test if t["test"] == "loads_full_rate")
    assert loads["samples"] == 1500 and loads["loads"] >= 10
    tone = next(t for t in report.per_test if t["test"] == "tone")
    assert tone["samples"] == 1024 + 256


@pytest.mark.sim
def test_the_bench_catches_a_load_that_acts_through_the_register_only(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The same core with the offset's select removed (a load then moves the sample after it,
    not its own) fails the bench: the load timing is checked, not assumed."""
    require_simulator("icarus")
    monkeypatch.setenv("BENCHGEN_TONE", json.dumps({"samples": 512}))
    project = _project(tmp_path, FREE)
    rtl = project / "rtl" / "lo.v"
    text = rtl.read_text()
    select = "wire [23:0] po = load ? in_phase_offset : po_reg;"
    assert select in text
    rtl.write_text(text.replace(select, "wire [23:0] po = po_reg;"))
    report = run_sim(project, simulator="icarus", samples=600, seed=14)
    assert not report.passed and report.mismatches > 0
    shutil.rmtree(project / "build", ignore_errors=True)


def test_the_core_checker_refuses_a_free_running_core_in_one_line(tmp_path: Path) -> None:
    """CoreChecker pairs each output with an accepted input; a free-running core has none, so
    it says so instead of failing on a missing in_valid."""
    from benchgen.bench.checker import CoreChecker
    from benchgen.project import ProjectError

    project = _project(tmp_path, FREE)
    with pytest.raises(ProjectError, match="free-running") as err:
        CoreChecker(None, project)
    assert "\n" not in str(err.value)
