"""Bulk bench: word layout, mode choice, harness lint, and simulation runs on both simulators.

Verilator runs go through the generated C++ runner (benchgen.bench.bulk_native); Icarus through
cocotb. The Verilator tests share one project per module, so the runner is built once and the
later tests reuse the cached build.
"""

from __future__ import annotations

import json
import subprocess
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from benchgen.bench.bulk_check import BulkFunction, FaultError, pack, parse_fault, unpack
from benchgen.bench.bulk_plan import BULK_FROM_SAMPLES, BulkError, bulk_plan, bulk_run_args
from benchgen.functions import CorePort
from benchgen.harness import (
    BulkLayout,
    bulk_files,
    bulk_layout,
    native_names,
    render_bulk_harness,
    render_native_harness,
    render_native_main,
)
from benchgen.project import design_from_manifest, generate_project, load_manifest
from benchgen.simulators import find_simulator, simulator_env
from tests.conftest import require_simulator, write_config

PORTS = (
    CorePort("clk", 1, "in", "clock"), CorePort("rst", 1, "in", "reset"),
    CorePort("in_valid", 1, "in", "handshake"), CorePort("in_ready", 1, "out", "handshake"),
    CorePort("in_angle", 13, "in", "data"), CorePort("in_tag", 5, "in", "tag"),
    CorePort("out_valid", 1, "out", "handshake"), CorePort("out_ready", 1, "in", "handshake"),
    CorePort("out_sin", 12, "out", "data", True), CorePort("out_cos", 12, "out", "data", True),
    CorePort("out_tag", 5, "out", "tag"),
)


def _layout(manifest: dict[str, Any], **kw: Any) -> BulkLayout:
    """The layout of a project's harness, from the design its manifest describes."""
    design = design_from_manifest(manifest)
    return bulk_layout(design.spec.name, design.ports, **kw)


def _project(tmp_path: Path, **values: object) -> Path:
    config = {"name": "bulk_core", "function": "sincos", "angle_width": 12, "data_width": 12, "tag_width": 3}
    config.update(values)
    if config["function"] not in ("sincos", "rotate", "atan2"):
        del config["angle_width"]  # no angle port
    out = tmp_path / "proj"
    generate_project(write_config(tmp_path / "core.toml", config), out)
    return out


@pytest.fixture(scope="module")
def sincos12(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """One 12-bit sine/cosine project with 8-bit tags, shared so Verilator builds its runner once."""
    return _project(tmp_path_factory.mktemp("sincos12"), tag_width=8)


def test_layout_slots_are_byte_aligned_and_words_whole_32_bit_units() -> None:
    layout = bulk_layout("c", PORTS)
    assert [s.port for s in layout.inputs] == ["in_angle", "in_tag"]
    assert [s.port for s in layout.outputs] == ["out_cos", "out_sin", "out_tag"]
    for slots, size in ((layout.inputs, layout.in_bytes), (layout.outputs, layout.out_bytes)):
        assert size % 4 == 0
        end = 0
        for s in slots:
            assert s.byte_offset == end and 8 * s.nbytes >= s.width
            end += s.nbytes
        assert end <= size


def test_stimulus_words_are_big_endian_with_each_port_in_its_slot() -> None:
    layout = bulk_layout("c", PORTS)
    rng = np.random.default_rng(4)
    angle = rng.integers(0, 1 << 13, size=50)
    tag = rng.integers(0, 1 << 5, size=50)
    raw = pack(layout, {"in_angle": angle, "in_tag": tag}, 50, big_endian=True)
    words = [int.from_bytes(raw[k * layout.in_bytes : (k + 1) * layout.in_bytes], "big") for k in range(50)]
    a, t = layout.inputs
    assert [(w >> a.lsb) & ((1 << a.width) - 1) for w in words] == angle.tolist()
    assert [(w >> t.lsb) & ((1 << t.width) - 1) for w in words] == tag.tolist()


def test_result_words_unpack_to_signed_outputs_and_unsigned_tags() -> None:
    layout = bulk_layout("c", PORTS)
    rng = np.random.default_rng(5)
    cos = rng.integers(-(1 << 11), 1 << 11, size=64)
    sin = rng.integers(-(1 << 11), 1 << 11, size=64)
    tag = rng.integers(0, 1 << 5, size=64)
    c, s, t = layout.outputs
    blob = b"".join(
        (
            ((int(x) & 0xFFF) << c.lsb) | ((int(y) & 0xFFF) << s.lsb) | (int(z) << t.lsb)
        ).to_bytes(layout.out_bytes, "little")
        for x, y, z in zip(cos, sin, tag, strict=True)
    )
    out = unpack(layout, np.frombuffer(blob, dtype=np.uint8), ("out_cos", "out_sin"))
    assert out["out_cos"].tolist() == cos.tolist()
    assert out["out_sin"].tolist() == sin.tolist()
    assert out["out_tag"].tolist() == tag.tolist()


def test_auto_mode_picks_bulk_for_large_runs_and_exhaustive_needs_it() -> None:
    assert not bulk_plan("auto", BULK_FROM_SAMPLES - 1, False)
    assert bulk_plan("auto", BULK_FROM_SAMPLES, False)
    assert bulk_plan("auto", 10, True)
    assert not bulk_plan("per-clock", 10**7, False)
    with pytest.raises(BulkError, match="per-clock"):
        bulk_plan("per-clock", 10, True)


def test_exhaustive_refuses_input_spaces_beyond_24_bits(tmp_path: Path) -> None:
    project = _project(tmp_path, angle_width=25, data_width=8)
    with pytest.raises(BulkError, match="2\\^25"):
        bulk_run_args(project, load_manifest(project), "icarus", True)


def test_project_carries_the_harness_and_leaves_the_core_alone(tmp_path: Path) -> None:
    project = _project(tmp_path)
    manifest = load_manifest(project)
    names = bulk_files(manifest)
    harness = (project / names.rtl).read_text()
    assert harness == render_bulk_harness(_layout(manifest))
    assert f"module {names.toplevel};" in harness and "bulk_core core (" in harness
    core = (project / "rtl/bulk_core.v").read_text()
    assert names.toplevel not in core and "$fopen" not in core


@pytest.mark.sim
def test_harness_is_lint_clean(tmp_path: Path) -> None:
    require_simulator("verilator")
    info = find_simulator("verilator")
    project = _project(tmp_path)
    names = bulk_files(load_manifest(project))
    with simulator_env(info):
        proc = subprocess.run(
            [str(info.executable), "--lint-only", "-Wall", "--timing", "--top-module", names.toplevel,
             str(project / "rtl/bulk_core.v"), str(project / names.rtl)],
            capture_output=True, text=True, check=False,
        )
    assert proc.returncode == 0, proc.stderr


def test_stimulus_words_for_the_runner_are_little_endian() -> None:
    layout = bulk_layout("c", PORTS)
    raw = pack(layout, {"in_angle": np.array([0x1234]), "in_tag": np.array([0x1F])}, 1, big_endian=False)
    a, t = layout.inputs
    word = int.from_bytes(raw, "little")
    assert (word >> a.lsb) & 0x1FFF == 0x1234 and (word >> t.lsb) & 0x1F == 0x1F


@pytest.mark.parametrize(
    ("function", "ports"),
    [("sincos", ["in_angle"]), ("rotate", ["in_x", "in_y", "in_angle"]), ("atan2", ["in_x", "in_y"])],
)
def test_the_input_space_is_every_port_concatenated_in_port_order(
    tmp_path: Path, function: str, ports: list[str]
) -> None:
    project = _project(tmp_path, function=function, angle_width=6, data_width=6)
    fn = BulkFunction(design_from_manifest(load_manifest(project)))
    assert fn.inputs == tuple(ports)
    assert fn.space_bits == 6 * len(ports)
    every = fn.enumerate(0, 1 << fn.space_bits)
    # Every combination once: the codes read back are 0 .. 2^bits - 1 in order.
    assert fn._code(every).tolist() == list(range(1 << fn.space_bits))
    # A table lookup gives the model's own answers.
    rng = np.random.default_rng(8)
    sample = fn.random(rng, 500)
    direct, ideal_direct = fn.predict(sample)
    fn.tabulate()
    assert fn.tabulated
    looked_up, ideal_looked_up = fn.predict(sample)
    for port in direct:
        assert looked_up[port].tolist() == direct[port].tolist()
        np.testing.assert_allclose(np.asarray(ideal_looked_up[port], float), np.asarray(ideal_direct[port], float))


@pytest.mark.parametrize("prenormalise", [True, False])
def test_atan2_angle_errors_of_short_vectors(tmp_path: Path, prenormalise: bool) -> None:
    """The bulk bench judges what the core promises: every non-zero vector's angle when
    prenormalised, only vectors of at least 2^(b-5) otherwise."""
    project = _project(tmp_path, function="atan2", angle_width=10, data_width=10, prenormalise=prenormalise)
    design = design_from_manifest(load_manifest(project))
    fn = BulkFunction(design)
    inputs = {"in_x": np.array([1, 400, 0]), "in_y": np.array([1, 300, 0])}
    expected, ideal = fn.predict(inputs)
    errors = fn.errors(inputs, expected, ideal)
    assert np.isnan(errors["out_angle"][2]) and not np.isnan(errors["out_angle"][1])
    assert np.isnan(errors["out_angle"][0]) != prenormalise
    assert not np.isnan(errors["out_magnitude"]).any()


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("12:out_sin", "SAMPLE:PORT:BIT"),
        ("x:out_sin:0", "SAMPLE:PORT:BIT"),
        ("12:out_tan:0", "one of out_cos, out_sin, out_tag"),
        ("12:out_sin:12", "bits 0..11"),
    ],
)
def test_a_malformed_fault_names_the_value_and_the_form(text: str, message: str) -> None:
    layout = bulk_layout("c", PORTS)
    with pytest.raises(FaultError, match=message):
        parse_fault(text, layout)
    assert parse_fault("7:out_sin:3", layout) == (7, 1 << (layout.outputs[1].lsb + 3))


def test_runner_main_copies_each_slot_into_its_port_and_masks_the_padding() -> None:
    layout = bulk_layout("c", PORTS)
    module, binary = native_names(layout)
    main = render_native_main(layout)
    assert f'#include "V{module}.h"' in main and binary in main
    assert "top_.stim_in_angle = load_bits(word + 0, 2) & 0x1fffULL;" in main
    assert "top_.stim_in_tag = load_bits(word + 2, 1) & 0x1fULL;" in main
    harness = render_native_harness(layout)
    assert f"module {module} (" in harness and "c core (" in harness
    assert "$fopen" not in harness and "#" not in harness.split("module", 1)[1].split("endmodule")[0]
    assert render_native_main(layout) == main and render_native_harness(layout) == harness


@pytest.mark.sim
def test_runner_harness_is_lint_clean(tmp_path: Path) -> None:
    require_simulator("verilator")
    info = find_simulator("verilator")
    project = _project(tmp_path, function="rotate", angle_width=10, data_width=10)
    layout = _layout(load_manifest(project))
    module, _ = native_names(layout)
    harness = tmp_path / f"{module}.v"  # named after its module, as the runner build names it
    harness.write_text(render_native_harness(layout))
    with simulator_env(info):
        proc = subprocess.run(
            [str(info.executable), "--lint-only", "-Wall", "--top-module", module,
             str(project / f"rtl/{layout.core}.v"), str(harness)],
            capture_output=True, text=True, check=False,
        )  # fmt: skip
    assert proc.returncode == 0, proc.stderr


@pytest.mark.sim
@pytest.mark.parametrize("simulator", ["icarus", "verilator"])
def test_exhaustive_12_bit_check(sincos12: Path, simulator: str) -> None:
    require_simulator(simulator)
    from benchgen.sim import run_sim

    report = run_sim(sincos12, simulator=simulator, exhaustive=True, seed=11)
    assert report.mode == "bulk, exhaustive"
    assert report.passed, report.problems
    assert report.samples == 1 << 12 and report.mismatches == 0
    assert report.latency_cycles == report.expected_latency_cycles
    assert report.cycles_per_sample == 1
    (record,) = [json.loads(line) for line in (Path(report.log_file).parent / "bench_results.jsonl").open()]
    assert record["test"] == "bulk_exhaustive" and record["samples"] == 1 << 12


@pytest.mark.sim
def test_one_flipped_bit_in_a_million_samples_is_found_and_reported(
    sincos12: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    require_simulator("verilator")
    from benchgen.sim import run_sim

    # Beyond the gaps-and-stalls test's samples, so only the full-rate run carries the fault.
    sample = int(np.random.default_rng().integers(400_000, 1_000_000))
    monkeypatch.setenv("BENCHGEN_BULK_FAULT", f"{sample}:out_sin:0")
    report = run_sim(sincos12, simulator="verilator", samples=1_000_000, seed=29)
    assert report.mode == "bulk" and Path(report.log_file).parent.name == "verilator_native"
    assert not report.passed
    assert report.mismatches == 1
    full = next(t for t in report.per_test if t["test"] == "bulk_full_rate")
    (row,) = full["first_mismatches"]
    assert row["index"] == sample
    assert abs(row["got_out_sin"] - row["expected_out_sin"]) == 1
    assert row["got_out_cos"] == row["expected_out_cos"]
    assert row["got_out_tag"] == row["expected_out_tag"] == row["in_tag"]
    assert "in_angle" in row and "seed 29" in full["problems"][0]
    gaps = next(t for t in report.per_test if t["test"] == "bulk_gaps_and_stalls")
    assert gaps["mismatches"] == 0 and not gaps["problems"]


@pytest.mark.sim
@pytest.mark.parametrize("simulator", ["icarus", "verilator"])
def test_idle_gaps_and_stalls_lose_and_duplicate_nothing(sincos12: Path, simulator: str) -> None:
    require_simulator(simulator)
    from benchgen.sim import run_sim

    samples = 200_000 if simulator == "verilator" else 16_000
    report = run_sim(sincos12, simulator=simulator, samples=samples, seed=3, mode="bulk")
    assert report.passed, report.problems
    gaps = next(t for t in report.per_test if t["test"] == "bulk_gaps_and_stalls")
    assert gaps["samples"] == max(4000, samples // 4) and gaps["mismatches"] == 0
    assert gaps["latency_cycles"][0] == report.expected_latency_cycles
    assert gaps["latency_cycles"][1] > report.expected_latency_cycles  # stalls did hold samples back
    assert gaps["cycles_per_sample"] > 1  # and idle clocks spread the inputs out
    results = Path(report.log_file).parent / "bench_results.jsonl"
    records = [json.loads(line) for line in results.read_text().splitlines()]
    assert {r["test"] for r in records} == {"bulk_full_rate", "bulk_gaps_and_stalls"}


@pytest.mark.sim
def test_the_runner_build_is_reused_while_the_sources_stay_the_same(sincos12: Path) -> None:
    require_simulator("verilator")
    from benchgen.sim import run_sim

    first = run_sim(sincos12, simulator="verilator", samples=100_000, seed=4)
    again = run_sim(sincos12, simulator="verilator", samples=100_000, seed=4)
    assert first.passed and again.passed, first.problems + again.problems
    assert again.build_seconds == 0.0
    assert again.per_test[0]["samples"] == first.per_test[0]["samples"]


@pytest.mark.sim
def test_atan2_exhaustive_on_the_runner(tmp_path: Path) -> None:
    require_simulator("verilator")
    from benchgen.sim import run_sim

    # 8-bit x and y: all 65,536 vectors, the short ones' angles exempt from the budget.
    project = _project(tmp_path, function="atan2", angle_width=10, data_width=8, tag_width=2)
    report = run_sim(project, simulator="verilator", exhaustive=True, seed=5)
    assert report.passed, report.problems
    assert report.samples == 1 << 16 and report.mismatches == 0
    assert report.latency_cycles == report.expected_latency_cycles


@pytest.mark.sim
@pytest.mark.parametrize(("function", "simulator"), [("ln", "icarus"), ("exp", "verilator"), ("atanh", "icarus"), ("sqrt", "verilator")])
def test_hyperbolic_exhaustive_with_flags_and_side_values(function: str, simulator: str, tmp_path: Path) -> None:
    """Every 12-bit input once: flags (ln at w = 0, atanh beyond the range), exp's exponent and
    the normalising shifts of ln and sqrt travel with their samples, bit for bit."""
    require_simulator(simulator)
    from benchgen.sim import run_sim

    project = _project(tmp_path, function=function, data_width=12, tag_width=3, pipeline_depth=4)
    report = run_sim(project, simulator=simulator, exhaustive=True, seed=12)
    assert report.passed, report.problems
    assert report.samples == 1 << 12 and report.mismatches == 0
    assert report.max_error_lsb < 1.0
    assert report.latency_cycles == report.expected_latency_cycles == 4 + 1  # depth + the output register


@pytest.mark.sim
def test_rotate_bulk_run_on_icarus(tmp_path: Path) -> None:
    require_simulator("icarus")
    from benchgen.sim import run_sim

    project = _project(tmp_path, function="rotate", angle_width=8, data_width=8, tag_width=2, angle_unit="radians")
    csv = tmp_path / "samples.csv"
    report = run_sim(project, simulator="icarus", samples=6000, seed=6, mode="bulk", csv_path=csv)
    assert report.passed, report.problems
    assert report.samples == 6000 + 4000 + len(BulkFunction(design_from_manifest(load_manifest(project))).corners()["in_x"])
    # The cocotb engine streams the CSV too: a header, then one row per sample.
    assert len(csv.read_text().splitlines()) == 1 + report.samples


@pytest.mark.sim
def test_a_malformed_fault_stops_the_run_with_a_message(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    require_simulator("verilator")
    from benchgen.sim import run_sim

    monkeypatch.setenv("BENCHGEN_BULK_FAULT", "5:out_sine:0")
    with pytest.raises(BulkError, match="out_sine"):
        run_sim(_project(tmp_path), simulator="verilator", samples=100_000, seed=1)


def test_a_runner_that_dies_is_reported_not_waited_for(tmp_path: Path) -> None:
    from benchgen.bench.bulk_check import full_rate_plan
    from benchgen.bench.bulk_native import _NativeBench, _Session, _Test

    project = _project(tmp_path)
    design = design_from_manifest(load_manifest(project))
    layout = _layout(load_manifest(project))
    log_path = tmp_path / "sim.log"
    bench = _NativeBench(design, layout, 7, None, log_path)
    plan = full_rate_plan(bench.function, bench.rng(1), 50_000, layout.block)
    with log_path.open("wb") as log:
        session = _Session(Path("/bin/true"), log, layout)  # ends at once, answers nothing
        result = bench.run_test(session, _Test("bulk_full_rate", 1, plan, True, 50_000))
        session.close()
    assert result.problems and "seed 7" in result.problems[0] and str(log_path) in result.problems[0]


# ---- exhaustive runs under idle gaps and output stalls ----


def _codes(fn: BulkFunction, blocks: list[dict[str, np.ndarray]]) -> list[int]:
    return [int(c) for b in blocks for c in fn._code(b)]


@pytest.mark.parametrize("bits", [12, 4])
def test_exhaustive_plan_puts_every_code_through_full_rate_and_the_stall_patterns(tmp_path: Path, bits: int) -> None:
    from benchgen.bench.bulk_check import GAP_PATTERNS, exhaustive_plan

    project = _project(tmp_path, angle_width=bits, data_width=max(bits, 4))
    manifest = load_manifest(project)
    fn = BulkFunction(design_from_manifest(manifest))
    total = 1 << fn.space_bits
    plan = exhaustive_plan(fn, _layout(manifest).block)
    # One segment per pattern: full rate, idle gaps, output stalls, both; each checked as applied.
    assert [(s.idle, s.stall) for s in plan] == list(GAP_PATTERNS)
    assert all(s.pattern_check for s in plan)
    # Only the full-rate share is timed against the manifest's latency and rate.
    assert [s.timed for s in plan] == [not (i or st) for i, st in GAP_PATTERNS]
    shares = [_codes(fn, list(s.blocks())) for s in plan]
    if bits == 12:
        # Every code exactly once, and each pattern's share spread over the whole space.
        assert sorted(c for share in shares for c in share) == list(range(total))
        for share in shares:
            assert min(share) < total // 4 and max(share) >= 3 * total // 4
    else:
        from benchgen.bench.bulk_check import EXHAUSTIVE_MIN_CHUNK

        # Too small to share out: every code under every pattern, often enough to show it.
        for share in shares:
            assert set(share) == set(range(total)) and len(share) >= EXHAUSTIVE_MIN_CHUNK


def _drop_when_stalled(project: Path, core: str) -> None:
    """Mutate the output buffer: an arriving sample overwrites the one held for a stalled consumer
    (and a stalled output register empties), so samples are lost only when out_ready is low."""
    rtl = project / "rtl" / f"{core}.v"
    text = rtl.read_text()
    good = "wire take_to_out = ready_reg & out_free;"
    assert text.count(good) == 1
    rtl.write_text(text.replace(good, "wire take_to_out = ready_reg;"))


@pytest.mark.sim
@pytest.mark.parametrize("simulator", ["verilator", "icarus"])
def test_exhaustive_run_fails_a_core_that_loses_samples_when_stalled(
    sincos12: Path, tmp_path: Path, simulator: str
) -> None:
    import re
    import shutil

    from benchgen.cli import main

    require_simulator(simulator)
    if simulator == "verilator":
        # The unmutated core passes (its runner build is shared with the module's other tests).
        assert main(["sim", str(sincos12), "--simulator", simulator, "--exhaustive", "--seed", "5"]) == 0
    mutated = tmp_path / "mutated"
    shutil.copytree(sincos12, mutated, ignore=shutil.ignore_patterns("build"))
    _drop_when_stalled(mutated, "bulk_core")
    out = tmp_path / "report.json"
    status = main(["sim", str(mutated), "--simulator", simulator, "--exhaustive", "--seed", "5", "--json", str(out)])
    assert status == 1
    report = json.loads(out.read_text())
    (record,) = report["per_test"]
    assert record["test"] == "bulk_exhaustive" and record["mismatches"] > 0
    # The lost samples are named: blocks under stalls that gave back fewer samples than went in.
    counts = [re.search(r"(\d+) of (\d+) samples went in and (\d+) came out", p) for p in record["problems"]]
    lost = [m for m in counts if m and int(m.group(3)) < int(m.group(1))]
    assert lost and all("stall" in p for p in record["problems"] if "came out" in p)


@pytest.mark.sim
def test_exhaustive_run_fails_an_iterative_core_whose_output_register_is_overwritten(tmp_path: Path) -> None:
    """An iterative core's single output register (no skid buffer) must not take a result while
    the consumer stalls: the unmutated core passes every code under stalls, and a core whose
    output register loads whatever the iterations hand over loses samples and fails."""
    import shutil

    from benchgen.cli import main

    require_simulator("verilator")
    (tmp_path / "good").mkdir()
    project = _project(tmp_path / "good", angle_width=10, data_width=10, tag_width=0, architecture="iterative")
    assert main(["sim", str(project), "--simulator", "verilator", "--exhaustive", "--seed", "3"]) == 0
    mutated = tmp_path / "mutated"
    shutil.copytree(project, mutated, ignore=shutil.ignore_patterns("build"))
    rtl = mutated / "rtl" / "bulk_core.v"
    good = "assign o_to_out = fin_valid & out_free;"
    text = rtl.read_text()
    assert text.count(good) == 1 and "spare_valid_reg" not in text
    rtl.write_text(text.replace(good, "assign o_to_out = fin_valid;"))
    out = tmp_path / "report.json"
    status = main(["sim", str(mutated), "--simulator", "verilator", "--exhaustive", "--seed", "3", "--json", str(out)])
    assert status == 1
    (record,) = json.loads(out.read_text())["per_test"]
    assert record["mismatches"] > 0


# ---- memory flat in the sample count ----


def _random_blocks(rng: np.random.Generator, count: int) -> list[tuple[dict, dict, dict, dict]]:
    """Blocks of (inputs, got, expected, errors) with mismatches, NaNs and tied errors."""
    blocks = []
    for _ in range(count):
        n = int(rng.integers(1, 300))
        inputs = {"in_angle": rng.integers(0, 4096, n), "in_tag": rng.integers(0, 16, n)}
        expected = {"out_sin": rng.integers(-2048, 2048, n), "out_tag": inputs["in_tag"].copy()}
        got = {k: v.copy() for k, v in expected.items()}
        flip = rng.random(n) < 0.02
        got["out_sin"][flip] += 1
        # Errors on a grid of 1/64 LSB, so equal magnitudes (ties) are common; some not judged.
        err = np.round(rng.normal(0.1, 0.4, n) * 64) / 64
        err[rng.random(n) < 0.1] = np.nan
        other = np.round(rng.normal(-0.2, 0.3, n) * 64) / 64
        blocks.append((inputs, got, expected, {"out_sin": err, "out_cos": other}))
    return blocks


def test_streaming_statistics_match_one_pass_over_all_samples() -> None:
    from benchgen.bench.bulk_check import Tally
    from benchgen.bench.scoreboard import CheckResult, compare

    rng = np.random.default_rng(21)
    blocks = _random_blocks(rng, 60)
    tally = Tally(CheckResult(test="t"), seed=1, budget=1.0)
    offset = 0
    for inputs, got, expected, errors in blocks:
        tally.add(offset, inputs, got, expected, errors)
        offset += len(inputs["in_angle"])
    streamed = tally.finish()

    def joined(k: int) -> dict[str, np.ndarray]:
        return {p: np.concatenate([b[k][p] for b in blocks]) for p in blocks[0][k]}

    inputs, got, expected, errors = joined(0), joined(1), joined(2), joined(3)
    whole = CheckResult(test="t")
    compare(whole, inputs=inputs, got=got, expected=expected, errors=errors, budget_lsb=1.0, seed=1)
    assert streamed.samples == whole.samples == offset
    assert streamed.mismatches == whole.mismatches > 8
    assert streamed.first_mismatches == whole.first_mismatches  # global sample numbers, first 8
    assert streamed.error_count == whole.error_count
    assert streamed.max_error_lsb == whole.max_error_lsb
    assert streamed.sum_sq_error == pytest.approx(whole.sum_sq_error, rel=1e-12)
    assert streamed.rms_error_lsb == pytest.approx(whole.rms_error_lsb, rel=1e-12)
    by_port = streamed.as_dict()["error_by_port"]
    from benchgen.bench.bulk_check import WORST_SAMPLES

    for port, err in errors.items():
        judged = ~np.isnan(err)
        stats = by_port[port]
        assert stats["error_count"] == int(judged.sum())
        assert stats["max_error_lsb"] == float(np.max(np.abs(err[judged])))
        assert stats["mean_error_lsb"] == pytest.approx(float(np.mean(err[judged])), rel=1e-12)
        assert stats["rms_error_lsb"] == pytest.approx(float(np.sqrt(np.mean(err[judged] ** 2))), rel=1e-12)
        # The worst samples: largest magnitude first, the earlier sample first among equal ones.
        mag = np.where(judged, np.abs(err), -1.0)
        order = np.lexsort((np.arange(len(mag)), -mag))[:WORST_SAMPLES]
        assert [w["index"] for w in stats["worst"]] == order.tolist()
        assert [w["error_lsb"] for w in stats["worst"]] == mag[order].tolist()
        assert [w["in_angle"] for w in stats["worst"]] == inputs["in_angle"][order].tolist()


def _retained(obj: object, seen: set[int] | None = None) -> int:
    """Elements reachable from ``obj``: array sizes, container lengths, 1 per scalar or string."""
    seen = set() if seen is None else seen
    if isinstance(obj, np.ndarray):
        return int(obj.size)
    if not isinstance(obj, dict | list | tuple | set) and not hasattr(obj, "__dict__"):
        return 1
    if id(obj) in seen:
        return 0
    seen.add(id(obj))
    if isinstance(obj, dict):
        return len(obj) + sum(_retained(k, seen) + _retained(v, seen) for k, v in obj.items())
    if isinstance(obj, list | tuple | set):
        return len(obj) + sum(_retained(v, seen) for v in obj)
    return _retained(vars(obj), seen)


def test_a_tally_holds_the_same_after_ten_blocks_or_three_hundred(tmp_path: Path) -> None:
    """A core that loses a sample and gets others wrong in every block: the tally keeps counts,
    the first few mismatches and problems, and the worst samples, not one entry per block."""
    from benchgen.bench.bulk_check import Block, Tally, check_block
    from benchgen.bench.scoreboard import CheckResult

    project = _project(tmp_path)
    manifest = load_manifest(project)
    fn = BulkFunction(design_from_manifest(manifest))
    layout = _layout(manifest)
    rng = np.random.default_rng(3)

    def fed(blocks: int) -> int:
        tally = Tally(CheckResult(test="t"), seed=1, budget=1.0)
        for _ in range(blocks):
            stim = fn.random(rng, 256)
            model, _ = fn.predict(stim)
            got = {p: v[:-1].copy() for p, v in model.items()}  # the last sample lost
            got[fn.outputs[0]][::50] += 3  # and some wrong
            block = Block(outputs=got, sent=256, received=255, cycles=300, lat_min=13, lat_max=13,
                          first_in=0, last_in=255, idle_count=0, stall_count=0,
                          loaded_bytes=256 * layout.in_bytes)  # fmt: skip
            check_block(tally, fn, stim, block, "w", layout.in_bytes)
        tally.finish()
        assert tally.result.mismatches > 0 and tally.result.problems
        return _retained(tally)

    assert fed(300) == fed(10)


class _PerfectRunner:
    """Stands in for the runner process: answers every block with the model's own outputs."""

    def __init__(self, fn: BulkFunction, latency: int, in_bytes: int) -> None:
        import queue

        self.fn, self.latency, self.in_bytes = fn, latency, in_bytes
        self.replies: queue.Queue = queue.Queue()
        self.broken = False

    def reset(self, seeds: tuple[int, int]) -> None:
        pass

    def block(self, stim: dict, *, idle: float, stall: float, fault: object) -> None:
        from benchgen.bench.bulk_check import Block

        n = len(stim["in_angle"])
        outputs, _ = self.fn.predict(stim)
        outputs["out_tag"] = stim["in_tag"]
        self.replies.put(Block(outputs=outputs, sent=n, received=n, cycles=n + self.latency,
                               lat_min=self.latency, lat_max=self.latency, first_in=0, last_in=n - 1,
                               idle_count=int(idle > 0), stall_count=int(stall > 0),
                               loaded_bytes=n * self.in_bytes))  # fmt: skip

    def reply(self, signed: tuple[str, ...]) -> object:
        return self.replies.get(timeout=30)

    def close(self, *, kill: bool = False) -> int:
        return 0


def test_the_runner_loop_keeps_no_block_once_checked(tmp_path: Path) -> None:
    """Peak Python memory of a bulk test is the same for 16 blocks as for 160 (tracemalloc counts
    numpy's buffers): each block is checked and dropped as it arrives."""
    import tracemalloc

    from benchgen.bench.bulk_check import full_rate_plan
    from benchgen.bench.bulk_native import _NativeBench, _Test

    project = _project(tmp_path)
    manifest = load_manifest(project)
    design = design_from_manifest(manifest)
    layout = _layout(manifest, block=1024)
    bench = _NativeBench(design, layout, 7, None, tmp_path / "sim.log")
    bench.function.tabulate()  # before measuring: the table is a fixed cost
    runner = _PerfectRunner(bench.function, design.timing.latency_cycles, layout.in_bytes)

    def peak(samples: int) -> int:
        plan = full_rate_plan(bench.function, bench.rng(1), samples, layout.block)
        tracemalloc.start()
        try:
            result = bench.run_test(runner, _Test("bulk_full_rate", 1, plan, True, samples))  # type: ignore[arg-type]
            return tracemalloc.get_traced_memory()[1]
        finally:
            tracemalloc.stop()
            assert result.samples > samples and not result.problems, result.problems

    small, large = peak(16 * 1024), peak(160 * 1024)
    # Held blocks would add 144 blocks x 1024 samples x 3 ports x 8 bytes = 3.5 MB.
    assert large < small + 1_000_000, (small, large)


@pytest.mark.sim
def test_a_bulk_run_streams_every_sample_to_the_csv(sincos12: Path, tmp_path: Path) -> None:
    """--csv in bulk mode: one row per sample of every test, appended block by block."""
    require_simulator("verilator")
    from benchgen.sim import run_sim

    csv = tmp_path / "samples.csv"
    report = run_sim(sincos12, simulator="verilator", samples=100_000, seed=8, csv_path=csv)
    assert report.passed, report.problems
    with csv.open() as fh:
        header = fh.readline().strip().split(",")
        assert header == ["test", "in_angle", "out_cos", "out_sin", "model_out_cos", "model_out_sin",
                          "ideal_out_cos", "ideal_out_sin", "error_out_cos", "error_out_sin"]  # fmt: skip
        tests = np.loadtxt(fh, delimiter=",", usecols=0, dtype=str)
    assert {t: int(np.count_nonzero(tests == t)) for t in set(tests)} == {
        t["test"]: t["samples"] for t in report.per_test
    }
    values = np.loadtxt(csv, delimiter=",", skiprows=1, usecols=range(1, 10))
    # The core is right, so every row's outputs are the model's, within a LSB of the ideal.
    np.testing.assert_array_equal(values[:, 1:3], values[:, 3:5])
    assert np.max(np.abs(values[:, 1:3] - values[:, 5:7])) < 1.0
    # The error columns are the outputs less the ideal, in LSB (both printed to six places).
    np.testing.assert_allclose(values[:, 7:9], values[:, 1:3] - values[:, 5:7], atol=2e-6)


def test_a_port_wider_than_a_slot_is_refused() -> None:
    """A slot holds at most the widest port a core may have (config.MAX_PORT_WIDTH)."""
    from benchgen.config import MAX_PORT_WIDTH

    wide = CorePort("in_x", MAX_PORT_WIDTH + 1, "in", "data")
    with pytest.raises(ValueError, match=f"{MAX_PORT_WIDTH + 1} bits is wider than the {MAX_PORT_WIDTH} bits"):
        bulk_layout("c", (*PORTS, wide))
    assert bulk_layout("c", (*PORTS, CorePort("in_x", MAX_PORT_WIDTH, "in", "data"))).inputs[1].nbytes == 8
