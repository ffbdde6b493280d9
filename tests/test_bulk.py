"""Bulk bench: word layout, mode choice, harness lint, and simulation runs on both simulators."""

from __future__ import annotations

import json
import subprocess
from pathlib import Path

import numpy as np
import pytest

from benchgen.bench.bulk import _pack, _unpack
from benchgen.bench.bulk_plan import BULK_FROM_SAMPLES, BulkError, bulk_plan, bulk_run_args
from benchgen.harness import bulk_files, bulk_layout, render_bulk_harness
from benchgen.project import generate_project, load_manifest
from benchgen.simulators import find_simulator, simulator_env
from tests.conftest import require_simulator, write_config

PORTS = {
    "clk": 1, "rst": 1, "in_valid": 1, "in_ready": 1, "out_valid": 1, "out_ready": 1,
    "in_angle": 13, "in_tag": 5, "out_cos": 12, "out_sin": 12, "out_tag": 5,
}


def _project(tmp_path: Path, **values: object) -> Path:
    config = {"name": "bulk_core", "function": "sincos", "angle_width": 12, "data_width": 12, "tag_width": 3}
    config.update(values)
    out = tmp_path / "proj"
    generate_project(write_config(tmp_path / "core.toml", config), out)
    return out


def test_layout_slots_are_byte_aligned_and_words_whole_32_bit_units() -> None:
    layout = bulk_layout({"toplevel": "c", "ports": PORTS})
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
    layout = bulk_layout({"toplevel": "c", "ports": PORTS})
    rng = np.random.default_rng(4)
    angle = rng.integers(0, 1 << 13, size=50)
    tag = rng.integers(0, 1 << 5, size=50)
    raw = _pack(layout, layout.inputs, {"in_angle": angle, "in_tag": tag}, 50)
    words = [int.from_bytes(raw[k * layout.in_bytes : (k + 1) * layout.in_bytes], "big") for k in range(50)]
    a, t = layout.inputs
    assert [(w >> a.lsb) & ((1 << a.width) - 1) for w in words] == angle.tolist()
    assert [(w >> t.lsb) & ((1 << t.width) - 1) for w in words] == tag.tolist()


def test_result_words_unpack_to_signed_outputs_and_unsigned_tags() -> None:
    layout = bulk_layout({"toplevel": "c", "ports": PORTS})
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
    out = _unpack(layout, np.frombuffer(blob, dtype=np.uint8), ("out_cos", "out_sin"))
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
    assert harness == render_bulk_harness(bulk_layout(manifest))
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


@pytest.mark.sim
@pytest.mark.parametrize("simulator", ["icarus", "verilator"])
def test_exhaustive_12_bit_check(tmp_path: Path, simulator: str) -> None:
    require_simulator(simulator)
    from benchgen.sim import run_sim

    project = _project(tmp_path)
    report = run_sim(project, simulator=simulator, exhaustive=True, seed=11)
    assert report.mode == "bulk, exhaustive"
    assert report.passed, report.problems
    assert report.samples == 1 << 12 and report.mismatches == 0
    assert report.latency_cycles == report.expected_latency_cycles
    assert report.cycles_per_sample == 1


@pytest.mark.sim
def test_one_flipped_bit_in_a_million_samples_is_found_and_reported(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    require_simulator("verilator")
    from benchgen.sim import run_sim

    project = _project(tmp_path)
    # Beyond the gaps-and-stalls test's samples, so only the full-rate run carries the fault.
    sample = int(np.random.default_rng().integers(400_000, 1_000_000))
    monkeypatch.setenv("BENCHGEN_BULK_FAULT", f"{sample}:out_sin:0")
    report = run_sim(project, simulator="verilator", samples=1_000_000, seed=29)
    assert not report.passed
    assert report.mismatches == 1
    full = next(t for t in report.per_test if t["test"] == "bulk_full_rate")
    (row,) = full["first_mismatches"]
    assert row["index"] == sample
    assert abs(row["got_out_sin"] - row["expected_out_sin"]) == 1
    assert row["got_out_cos"] == row["expected_out_cos"]
    assert "in_angle" in row and "seed 29" in full["problems"][0]
    gaps = next(t for t in report.per_test if t["test"] == "bulk_gaps_and_stalls")
    assert gaps["mismatches"] == 0 and not gaps["problems"]


@pytest.mark.sim
def test_idle_gaps_and_stalls_lose_and_duplicate_nothing(tmp_path: Path) -> None:
    require_simulator("verilator")
    from benchgen.sim import run_sim

    project = _project(tmp_path, tag_width=8)
    report = run_sim(project, simulator="verilator", samples=200_000, seed=3, mode="bulk")
    assert report.passed, report.problems
    gaps = next(t for t in report.per_test if t["test"] == "bulk_gaps_and_stalls")
    assert gaps["samples"] == 200_000 // 4 and gaps["mismatches"] == 0
    assert gaps["latency_cycles"][0] == report.expected_latency_cycles
    assert gaps["latency_cycles"][1] > report.expected_latency_cycles  # stalls did hold samples back
    results = Path(report.log_file).parent / "bench_results.jsonl"
    records = [json.loads(line) for line in results.read_text().splitlines()]
    assert {r["test"] for r in records} == {"bulk_full_rate", "bulk_gaps_and_stalls"}
