"""The NCO as a core (``function = "nco"``): its config, its sizing, its description against the
bit-true model of benchgen.nco, and its simulation on Icarus and Verilator, bit for bit and by
its spectrum against the truncation theory (docs/nco.md)."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.errors import ConfigError
from benchgen.functions import evaluate, random_inputs
from benchgen.functions.nco import NcoDatapath, phase_of
from benchgen.hardware import build_core
from benchgen.lfsr import lfsr_states
from benchgen.nco import Nco, run, run_stream
from benchgen.nco_theory import (
    core_snr_db,
    dithered_phase_snr_db,
    expected_max_noise_bin_db,
    nicholas_samueli_worst_dbc,
    truncation_word,
)
from benchgen.netlist import evaluate as run_netlist
from benchgen.project import generate_project
from benchgen.sim import run_sim
from tests.conftest import require_simulator, write_config

BASE = {"name": "lo", "function": "nco", "angle_width": 10, "data_width": 12, "acc_width": 24, "dither_width": 3}


def _design(**values: Any) -> Any:
    return build_design(parse_config({**BASE, **values}))


# ----------------------------------------------------------------------------- config and sizing


@pytest.mark.parametrize(
    ("values", "field"),
    [
        ({"dither_width": 15}, "dither_width"),  # more than acc_width - angle_width = 14
        ({"acc_width": 8}, "acc_width"),  # below angle_width
        ({"angle_unit": "radians"}, "angle_unit"),
        ({"lfsr_width": 3, "dither_width": 4}, "lfsr_width"),
        ({"lfsr_seed": 0}, "lfsr_seed"),
        ({"lfsr_width": 4, "lfsr_seed": 16}, "lfsr_seed"),
    ],
)
def test_bad_nco_fields_are_refused_naming_the_field_with_a_fix_that_is_accepted(values: dict[str, Any], field: str) -> None:
    with pytest.raises(ConfigError) as err:
        parse_config({**BASE, **values})
    assert err.value.field == field
    assert "\n" not in str(err.value)
    fixed = {**BASE, **values, **err.value.suggestion}
    parse_config({k: v for k, v in fixed.items() if v is not None})


def test_nco_fields_are_refused_for_other_functions() -> None:
    with pytest.raises(ConfigError) as err:
        parse_config({"name": "c", "function": "sincos", "acc_width": 32})
    assert err.value.field == "acc_width" and "nco" in str(err.value)


def test_an_nco_is_sized_as_the_sincos_core_it_drives() -> None:
    """The truncated code is exact, so the NCO's core has the sincos core's size and proof."""
    nco = _design()
    sincos = build_design(parse_config({"name": "lo", "function": "sincos", "angle_width": 10, "data_width": 12}))
    assert (nco.datapath.iterations, nco.datapath.guard_bits) == (sincos.datapath.iterations, sincos.datapath.guard_bits)
    assert nco.accuracy == sincos.accuracy
    assert nco.datapath.core() == sincos.datapath
    assert nco.datapath.phase() == Nco(acc_width=24, angle_width=10, dither_width=3)


# ----------------------------------------------------------------------------- model


def test_the_core_model_is_benchgen_nco_streamed() -> None:
    """The function's model is run_stream with both words in every token."""
    design = _design()
    dp = design.datapath
    inputs = random_inputs(dp, np.random.default_rng(1), 500)
    got = evaluate(dp, inputs)
    tokens = list(zip(inputs["in_freq_word"].tolist(), inputs["in_phase_offset"].tolist(), strict=True))
    want = run_stream(dp.phase(), dp.core(), tokens)
    assert np.array_equal(got["out_cos"], want.cos) and np.array_equal(got["out_sin"], want.sin)


@pytest.mark.parametrize("dither", [0, 3, 14])
def test_block_by_block_model_equals_the_model_of_the_whole_stream(dither: int) -> None:
    """The bulk bench checks a long stream in blocks, carrying the state (accumulator, LFSR)."""
    design = _design(dither_width=dither)
    dp = design.datapath
    fn = design_fn(dp)
    inputs = random_inputs(dp, np.random.default_rng(2), 3000)
    whole = evaluate(dp, inputs)
    state = fn.initial_state(dp)
    parts = []
    for lo, hi in ((0, 1), (1, 1000), (1000, 1777), (1777, 3000)):
        out, _, state = fn.model_run(dp, {k: v[lo:hi] for k, v in inputs.items()}, state)
        parts.append(out)
    for port in ("out_cos", "out_sin"):
        assert np.array_equal(np.concatenate([p[port] for p in parts]), whole[port])


def design_fn(dp: NcoDatapath) -> Any:
    from benchgen.functions import function_of

    return function_of(dp)


# ----------------------------------------------------------------------------- description


def _given(dp: NcoDatapath, inputs: dict[str, Any], acc_shift: int = 0, lfsr_step: int = 0) -> dict[str, Any]:
    path = phase_of(dp, inputs)
    n = len(path.codes)
    given = {**inputs, "acc_reg": (path.accumulator.astype(np.int64) + acc_shift) % (1 << dp.acc_width)}
    if dp.dither_width:
        states = lfsr_states(dp.lfsr_width, dp.lfsr_seed, n + lfsr_step, dp.dither_width)[lfsr_step:]
        given["lfsr_reg"] = states.astype(np.int64)
    return given


@pytest.mark.parametrize("values", [{}, {"pipeline_depth": 3, "rounding": "truncate", "max_error_lsb": 2.0}, {"acc_width": 10, "dither_width": 0},
                                    {"dither_width": 14, "handshake": "valid_only"}])
def test_description_equals_the_model_given_the_accumulator(values: dict[str, Any]) -> None:
    """The phase sum, the dither's place, the truncation and the core, evaluated from the
    model's accumulator and LFSR values, equal the model on every sample; the same with the
    accumulator one kept LSB off, or the LFSR one sample ahead, differ (the check can fail)."""
    design = _design(**values)
    dp = design.datapath
    module = build_core(design)
    inputs = random_inputs(dp, np.random.default_rng(3), 2048)
    want = evaluate(dp, inputs)
    got = run_netlist(module, _given(dp, inputs))
    mask = (1 << dp.out_width) - 1
    for port in ("out_cos", "out_sin"):
        assert np.array_equal(np.asarray(got[port]).astype(np.int64), np.asarray(want[port]).astype(np.int64) & mask)
    off = run_netlist(module, _given(dp, inputs, acc_shift=1 << (dp.acc_width - dp.angle_width)))
    assert not np.array_equal(np.asarray(off["out_cos"]).astype(np.int64), np.asarray(want["out_cos"]).astype(np.int64) & mask)
    if dp.dither_width:
        ahead = run_netlist(module, _given(dp, inputs, lfsr_step=1))
        assert not np.array_equal(np.asarray(ahead["out_sin"]).astype(np.int64), np.asarray(want["out_sin"]).astype(np.int64) & mask)


def test_evaluator_refuses_a_name_that_is_not_in_the_description() -> None:
    design = _design()
    inputs = random_inputs(design.datapath, np.random.default_rng(4), 8)
    with pytest.raises(ValueError, match="no signal named acc_regs"):
        run_netlist(build_core(design), {**inputs, "acc_regs": np.zeros(8, dtype=np.int64)})


# ----------------------------------------------------------------------------- simulation

# Variants run bit for bit against the model (every test of the bench, the tone test's change of
# word and offset mid-stream among them): the defaults with dither and a tag; an iterative core
# with an asynchronous active-low reset, a clock enable and a 32-bit accumulator; a valid-only
# pipeline of 3 stages with a dither over every dropped bit; the VHDL of an iterative core.
VARIANTS = {
    "default": {"tag_width": 4},
    "iterative_async_en": {"architecture": "iterative", "iterations_per_cycle": 2, "reset_style": "asynchronous",
                           "reset_polarity": "active_low", "clock_enable": True, "acc_width": 32, "dither_width": 0},
    "valid_only_full_dither": {"handshake": "valid_only", "pipeline_depth": 3, "dither_width": 14},
    "vhdl_iterative": {"architecture": "iterative", "iterations_per_cycle": 3, "hdl": "vhdl"},
}
# (variant, simulator): Verilator builds cost ~25 s each, and the spectral test below runs the
# whole bench on the default pipeline (undithered and fully dithered) there already.
SIM_CASES = [
    ("default", "icarus"),
    ("iterative_async_en", "icarus"),
    ("iterative_async_en", "verilator"),
    ("valid_only_full_dither", "icarus"),
    ("vhdl_iterative", "ghdl"),
]


def _project(tmp_path: Path, config: dict[str, Any]) -> Path:
    tmp_path.mkdir(parents=True, exist_ok=True)
    out = tmp_path / "proj"
    generate_project(write_config(tmp_path / "lo.toml", config), out)
    return out


@pytest.mark.sim
@pytest.mark.parametrize(("variant", "simulator"), SIM_CASES)
def test_nco_matches_the_model_bit_for_bit_in_simulation(tmp_path: Path, simulator: str, variant: str, monkeypatch: pytest.MonkeyPatch) -> None:
    require_simulator(simulator)
    monkeypatch.setenv("BENCHGEN_TONE", json.dumps({"samples": 1024}))
    report = run_sim(_project(tmp_path, {**BASE, **VARIANTS[variant]}), simulator=simulator, samples=1500, seed=14, mode="per-clock")
    assert report.passed, report.problems
    assert report.tests == 5 and report.mismatches == 0
    tone = next(t for t in report.per_test if t["test"] == "tone")
    assert tone["samples"] == 1024 + 256


# Spectra: 2**14 consecutive samples of the simulated core, coherent words (IEEE Std 1241).
# P = 8 kept bits, N = 14 output bits, A = 32: the worst word (M = 2) undithered must show the
# Nicholas-Samueli spur -(6.02 P - 3.92) = -44.24 dBc (within 0.15 dB, as the model test); an
# exact word (M = 1) no truncation spur, its SNR the core's amplitude quantisation (within 0.5 dB
# of core_snr_db from the sized core's RMS error); the worst word with a full dither (D = 24)
# loses the spur for a noise peak (within 2 dB of the order-statistics prediction) and 3.01 dB
# of SNR (within 0.1 dB of the derived phase SNR combined with the amplitude SNR).
SPECTRAL = {"name": "lo", "function": "nco", "angle_width": 8, "data_width": 14, "acc_width": 32}
RECORD = 1 << 14


def _spectrum(project: Path, simulator: str, word: int, cycles: int, monkeypatch: pytest.MonkeyPatch) -> dict[str, Any]:
    monkeypatch.setenv("BENCHGEN_TONE", json.dumps({"freq_word": word, "samples": RECORD, "cycles": cycles}))
    report = run_sim(project, simulator=simulator, samples=50, seed=3, mode="per-clock")
    assert report.passed, report.problems
    return next(t for t in report.per_test if t["test"] == "tone")["tone"]


@pytest.mark.sim
@pytest.mark.parametrize("simulator", ["icarus", "verilator"])
def test_spectra_in_simulation_meet_the_truncation_theory(tmp_path: Path, simulator: str, monkeypatch: pytest.MonkeyPatch) -> None:
    require_simulator(simulator)
    a, p = 32, 8
    plain = _project(tmp_path / "plain", SPECTRAL)
    dithered = _project(tmp_path / "dithered", {**SPECTRAL, "dither_width": a - p})
    design = build_design(parse_config(SPECTRAL))
    amp_snr = core_snr_db(design.datapath.amplitude, design.accuracy.rms_error_lsb)

    worst = truncation_word(a, p, RECORD, 2, 101)
    m = _spectrum(plain, simulator, worst.freq_word, worst.cycles, monkeypatch)
    assert m["truncation_period"] == 2
    assert m["sfdr_dbc"] == pytest.approx(-nicholas_samueli_worst_dbc(p), abs=0.15)
    assert m["predicted_spur_dbc"] == pytest.approx(nicholas_samueli_worst_dbc(p), abs=0.02)

    exact = truncation_word(a, p, RECORD, 1, 101)
    e = _spectrum(plain, simulator, exact.freq_word, exact.cycles, monkeypatch)
    assert e["truncation_period"] == 1 and e["predicted_spur_dbc"] is None
    assert e["snr_db"] == pytest.approx(amp_snr, abs=0.5)
    assert e["sfdr_dbc"] > m["sfdr_dbc"] + 20

    d = _spectrum(dithered, simulator, worst.freq_word, worst.cycles, monkeypatch)
    phase_snr = dithered_phase_snr_db(2, p, a - p)
    snr = -10 * math.log10(10 ** (-phase_snr / 10) + 10 ** (-amp_snr / 10))
    assert d["snr_db"] == pytest.approx(snr, abs=0.1)
    assert m["snr_db"] - d["snr_db"] == pytest.approx(10 * math.log10(2), abs=0.15)
    floor = -(snr + 10 * math.log10(RECORD))
    assert d["noise_floor_dbc"] == pytest.approx(floor, abs=0.5)
    assert d["sfdr_dbc"] == pytest.approx(-floor - expected_max_noise_bin_db(RECORD - 2), abs=2.0)
    assert d["sfdr_dbc"] > m["sfdr_dbc"] + 25
    # the model's own record of the same words gives the same numbers (the simulation is the model)
    model = run(Nco(acc_width=a, angle_width=p), design.datapath.core(), RECORD, freq_word=worst.freq_word)
    from benchgen.spectrum import measure_tone

    assert measure_tone(model.complex(), worst.cycles).sfdr_db == pytest.approx(m["sfdr_dbc"], abs=1e-3)


@pytest.mark.sim
@pytest.mark.parametrize("simulator", ["icarus", "verilator"])
def test_bulk_bench_carries_the_nco_state_from_block_to_block(tmp_path: Path, simulator: str) -> None:
    """The bulk bench (cocotb on Icarus, the C++ runner on Verilator) checks a long stream
    block by block: the model carries the accumulator and the LFSR across blocks and starts
    again at each test's reset (Function.model_run), so every sample matches."""
    require_simulator(simulator)
    report = run_sim(_project(tmp_path, {**BASE, "tag_width": 2}), simulator=simulator, samples=30_000, seed=9, mode="bulk")
    assert report.passed, report.problems
    assert report.mode == "bulk" and report.mismatches == 0 and report.samples > 30_000
