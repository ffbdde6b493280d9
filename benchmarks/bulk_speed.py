"""Volume verification speed, measured side by side in one run.

Builds one 16-iteration, 16-bit pipelined sine/cosine core and measures, on this machine:

* the per-clock cocotb bench (one Python await per clock), Verilator;
* the bulk bench on Verilator with its generated C++ runner (no cocotb in the loop), and, for
  reference, the same tests driven by cocotb on a --timing build;
* the bulk bench on Icarus (cocotb drives the HDL harness, numpy checks arrays);
* Icarus with file stimulus and file output and no Python at all;
* a raw Verilator C++ harness clocking the core alone (the ceiling);
* an exhaustive check of all 65,536 angles on Verilator, build included and excluded;
* the bit-true model, 10**6 samples, 16 iterations and a 24-bit core with 28 iterations.

Rates of cocotb tests come from the per-test wall time cocotb records in results.xml, rates of
the native runner from the wall time it records per test (``wall_seconds``), so simulator
start-up is left out of both (it is in the exhaustive wall times). The machine may be shared:
the load average is printed before and after, and every ratio is taken within this one run.

    python benchmarks/bulk_speed.py [--samples 1000000] [--naive-samples 20000] [--icarus-samples 50000]
                                   [--cocotb-samples 200000] [--raw-clocks 10000000] [--keep]
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np

from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.harness import bulk_layout, render_raw_harness
from benchgen.model import sincos
from benchgen.project import generate_project, load_manifest
from benchgen.sim import run_sim
from benchgen.simulators import find_simulator, simulator_env

CORE = {
    "name": "bench_sincos",
    "function": "sincos",
    "architecture": "pipelined",
    "angle_width": 16,
    "data_width": 16,
    "iterations": 16,
    "guard_bits": 5,
    "max_error_lsb": 4.0,
}


def _config(path: Path, values: dict[str, object]) -> Path:
    lines = [f'{k} = "{v}"' if isinstance(v, str) else f"{k} = {v}" for k, v in values.items()]
    path.write_text("\n".join(lines) + "\n")
    return path


def _test_seconds(results_xml: Path, test: str) -> float:
    for case in ET.parse(results_xml).getroot().iter("testcase"):
        if case.get("name") == test:
            return float(case.get("time", "nan"))
    raise RuntimeError(f"{test} not in {results_xml}")


def _cocotb_rate(report_dir: Path, per_test: list[dict], test: str, record: str) -> float:
    samples = next(t["samples"] for t in per_test if t["test"] == record)
    return samples / _test_seconds(report_dir / "results.xml", test)


def _native_rate(per_test: list[dict], record: str) -> float:
    test = next(t for t in per_test if t["test"] == record)
    return test["samples"] / test["wall_seconds"]


def _icarus_no_python(project: Path, work: Path, samples: int) -> float:
    """Samples per second of Icarus reading $readmemh stimulus and writing every output to a file."""
    manifest = load_manifest(project)
    top = manifest["toplevel"]
    a_w = manifest["ports"]["in_angle"]
    rng = np.random.default_rng(1)
    (work / "stim.hex").write_text("\n".join(f"{v:x}" for v in rng.integers(0, 1 << a_w, size=samples)) + "\n")
    tb = f"""`timescale 1ns / 1ps
module tb;
    reg clk = 0, rst = 1, in_valid = 0;
    reg [{a_w - 1}:0] in_angle = 0;
    reg [{a_w - 1}:0] mem [0:{samples - 1}];
    wire in_ready, out_valid;
    wire [{manifest['ports']['out_cos'] - 1}:0] out_cos, out_sin;
    integer fd, sent = 0, got = 0;
    {top} dut(.clk(clk), .rst(rst), .in_valid(in_valid), .in_ready(in_ready), .in_angle(in_angle),
        .out_valid(out_valid), .out_ready(1'b1), .out_cos(out_cos), .out_sin(out_sin));
    always #5 clk = ~clk;
    initial begin
        $readmemh("stim.hex", mem);
        fd = $fopen("out.txt", "w");
        repeat (3) @(posedge clk);
        rst <= 0;
    end
    always @(posedge clk) if (!rst) begin
        if (in_valid && in_ready) sent = sent + 1;
        in_valid <= sent < {samples};
        in_angle <= mem[sent < {samples} ? sent : 0];
        if (out_valid) begin
            $fwrite(fd, "%h %h\\n", out_cos, out_sin);
            got = got + 1;
            if (got == {samples}) begin $fclose(fd); $finish; end
        end
    end
endmodule
"""
    (work / "tb.v").write_text(tb)
    subprocess.run(["iverilog", "-g2005", "-o", str(work / "tb.vvp"), str(work / "tb.v"),
                    str(project / f"rtl/{top}.v")], check=True)
    t0 = time.perf_counter()
    subprocess.run(["vvp", "-n", str(work / "tb.vvp")], cwd=work, check=True, capture_output=True)
    seconds = time.perf_counter() - t0
    lines = (work / "out.txt").read_text().count("\n")
    assert lines == samples, f"the no-Python bench wrote {lines} of {samples} outputs"
    return samples / seconds


def _raw_verilator(project: Path, work: Path, clocks: int) -> tuple[float, float]:
    """Clocks per second of a raw C++ harness, and its build time."""
    info = find_simulator("verilator")
    manifest = load_manifest(project)
    top = manifest["toplevel"]
    (work / "main.cpp").write_text(render_raw_harness(bulk_layout(manifest)))
    t0 = time.perf_counter()
    with simulator_env(info):
        subprocess.run(
            [str(info.executable), "--cc", "--exe", "--build", "-O3", "-j", "2", "--top-module", top,
             "-Mdir", str(work / "obj"), str(project / f"rtl/{top}.v"), str(work / "main.cpp"), "-o", "raw"],
            check=True, capture_output=True,
        )
    build = time.perf_counter() - t0
    out = subprocess.run([str(work / "obj" / "raw"), str(clocks)], check=True, capture_output=True, text=True)
    fields = dict(zip(out.stdout.split()[::2], out.stdout.split()[1::2], strict=False))
    return clocks / float(fields["seconds"]), build


def _model_rate(values: dict[str, object], samples: int = 1_000_000) -> float:
    design = build_design(parse_config(values))
    angles = np.random.default_rng(2).integers(0, 1 << design.datapath.angle_width, size=samples)
    best = float("inf")
    for _ in range(3):
        t0 = time.perf_counter()
        sincos(design.datapath, angles)
        best = min(best, time.perf_counter() - t0)
    return samples / best


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=1_000_000, help="bulk samples on Verilator")
    ap.add_argument("--naive-samples", type=int, default=20_000, help="per-clock samples on Verilator")
    ap.add_argument("--icarus-samples", type=int, default=50_000, help="samples on Icarus (both ways)")
    ap.add_argument("--keep", action="store_true", help="keep the work folder")
    ap.add_argument("--raw-clocks", type=int, default=10_000_000, help="clocks of the raw harness")
    ap.add_argument("--cocotb-samples", type=int, default=200_000, help="cocotb-driven bulk samples on Verilator")
    args = ap.parse_args()
    load0 = os.getloadavg()
    work = Path(tempfile.mkdtemp(prefix="bulk_speed_"))
    try:
        project = work / "proj"
        generate_project(_config(work / "core.toml", CORE), project)
        rows: list[tuple[str, float, str]] = []

        naive = run_sim(project, simulator="verilator", samples=args.naive_samples, seed=1, mode="per-clock")
        naive_rate = _cocotb_rate(Path(naive.log_file).parent, naive.per_test, "test_random_full_rate", "random_full_rate")
        bulk_v = run_sim(project, simulator="verilator", samples=args.samples, seed=1, mode="bulk")
        bulk_v_rate = _native_rate(bulk_v.per_test, "bulk_full_rate")
        bulk_c = run_sim(
            project, simulator="verilator", samples=args.cocotb_samples, seed=1, mode="bulk", bulk_engine="cocotb"
        )
        bulk_c_rate = _cocotb_rate(Path(bulk_c.log_file).parent, bulk_c.per_test, "test_bulk_full_rate", "bulk_full_rate")
        raw_rate, raw_build = _raw_verilator(project, work, args.raw_clocks)
        bulk_i = run_sim(project, simulator="icarus", samples=args.icarus_samples, seed=1, mode="bulk")
        bulk_i_rate = _cocotb_rate(Path(bulk_i.log_file).parent, bulk_i.per_test, "test_bulk_full_rate", "bulk_full_rate")
        icarus_rate = _icarus_no_python(project, work, args.icarus_samples)
        for rep in (naive, bulk_v, bulk_c, bulk_i):
            assert rep.passed, rep.problems

        # Exhaustive: once from a clean build folder, then again on the cached build.
        shutil.rmtree(project / "build" / "verilator_native", ignore_errors=True)
        t0 = time.perf_counter()
        exh = run_sim(project, simulator="verilator", exhaustive=True, seed=1)
        exh_wall = time.perf_counter() - t0
        t0 = time.perf_counter()
        exh2 = run_sim(project, simulator="verilator", exhaustive=True, seed=2)
        exh2_wall = time.perf_counter() - t0
        for rep in (exh, exh2):
            assert rep.passed and rep.samples == 1 << 16, rep.problems
        assert exh2.build_seconds == 0.0, "the second exhaustive run rebuilt the runner"

        m16 = _model_rate({**CORE})
        m24 = _model_rate({**CORE, "angle_width": 24, "data_width": 24, "iterations": 28, "guard_bits": 6})

        rows = [
            ("cocotb per-clock loop, Verilator", naive_rate, "1.00x naive"),
            ("bulk bench, Verilator, C++ runner", bulk_v_rate,
             f"{bulk_v_rate / naive_rate:.1f}x naive (need >= 20); {100 * bulk_v_rate / raw_rate:.1f}% of raw (need >= 25)"),
            ("bulk bench, Verilator, cocotb-driven (old)", bulk_c_rate,
             f"{bulk_c_rate / naive_rate:.1f}x naive; {100 * bulk_c_rate / raw_rate:.1f}% of raw"),
            ("raw Verilator C++ harness (clocks/s)", raw_rate, f"{raw_rate / naive_rate:.1f}x naive; build {raw_build:.1f} s"),
            ("bulk bench, Icarus", bulk_i_rate,
             f"{100 * bulk_i_rate / icarus_rate:.1f}% of Icarus without Python (need >= 85)"),
            ("Icarus, $readmemh + file output, no Python", icarus_rate, "1.00x"),
            ("bit-true model, 16 iterations, 10^6 samples", m16, "need >= 5 M/s"),
            ("bit-true model, 24-bit core, 28 iterations", m24, ""),
        ]
        print(f"\nCore: {CORE['angle_width']}-bit angle, {CORE['data_width']}-bit outputs, "
              f"{CORE['iterations']} iterations, pipelined; work folder {work}")
        print(f"{'path':<46} {'samples/s':>12}  ratio")
        for name, rate, note in rows:
            print(f"{name:<46} {rate:>12,.0f}  {note}")
        test_alone = next(t["wall_seconds"] for t in exh2.per_test if t["test"] == "bulk_exhaustive")
        print("\nexhaustive 16-bit sincos on Verilator (65,536 angles):")
        print(f"  clean build folder: {exh_wall:.1f} s wall, of which build {exh.build_seconds:.1f} s "
              f"and run {exh.sim_seconds:.2f} s")
        print(f"  cached build:       {exh2_wall:.2f} s wall for the whole `benchgen sim` call "
              f"(need < 3 s after the build); runner {exh2.sim_seconds:.2f} s, test alone {test_alone:.2f} s")
        load1 = os.getloadavg()
        print(f"\nload average (1, 5, 15 min) before: {', '.join(f'{v:.2f}' for v in load0)}; "
              f"after: {', '.join(f'{v:.2f}' for v in load1)}; {os.cpu_count()} CPUs")
    finally:
        if not args.keep:
            shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
