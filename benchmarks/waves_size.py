"""Waveform dump sizes against the estimate ``benchgen sim --waves`` refuses large dumps by.

For each core and simulator, runs the per-clock bench with a whole-run dump, then prints the
clocks the run took (from the results' simulated time), the signal bits the estimate counts
(:func:`benchgen.waves.signal_bits`), the dump's size, the measured bytes per bit per clock, and
the estimate against the measurement (a ratio of at least 1 means the estimate errs large, the
safe side for a limit). :data:`benchgen.waves.BYTES_PER_BIT_CLOCK` is set from these.

    python benchmarks/waves_size.py [--simulators icarus verilator ghdl] [--samples 4000]
"""

from __future__ import annotations

import argparse
import re
import tempfile
from pathlib import Path

from benchgen.functions import bench_corners, input_space_bits
from benchgen.project import design_from_manifest, generate_project, load_manifest
from benchgen.sim import run_sim
from benchgen.simulators import VHDL_SIMULATORS
from benchgen.waves import BYTES_PER_BIT_CLOCK, CLOCK_NS, FORMATS, estimate_bytes, estimate_clocks, signal_bits

CORES = {
    "sincos8_pipe": {"function": "sincos", "angle_width": 8, "data_width": 8, "max_error_lsb": 1.0},
    "sincos16_pipe": {"function": "sincos", "angle_width": 16, "data_width": 16, "max_error_lsb": 1.0},
    "sincos12_iter": {"function": "sincos", "angle_width": 12, "data_width": 12, "max_error_lsb": 1.0,
                      "architecture": "iterative"},
    "atan2_12_pipe": {"function": "atan2", "angle_width": 12, "data_width": 12, "max_error_lsb": 1.5},
}


def _toml(values: dict[str, object]) -> str:
    return "".join(f"{k} = {v!r}\n".replace("'", '"') for k, v in values.items())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--simulators", nargs="+", default=["icarus", "verilator"])
    parser.add_argument("--samples", type=int, default=4000)
    args = parser.parse_args()
    print(f"{'core':<15} {'sim':<10} {'clocks':>8} {'bits':>6} {'dump bytes':>11} {'B/bit/clk':>10} "
          f"{'estimate/measured':>18}")
    with tempfile.TemporaryDirectory() as tmp:
        for name, core in CORES.items():
            config = Path(tmp) / f"{name}.toml"
            # Both languages: the Verilog for Icarus and Verilator, the VHDL for GHDL.
            config.write_text(_toml({"name": name, **core}) + 'hdl = ["verilog", "vhdl"]\n')
            project = Path(tmp) / name
            generate_project(config, project)
            manifest = load_manifest(project)
            design = design_from_manifest(manifest)
            corners = len(next(iter(bench_corners(design.datapath).values())))
            estimated_clocks = estimate_clocks(
                samples=args.samples, cycles_per_sample=design.timing.cycles_per_sample,
                latency=design.timing.latency_cycles, bulk=False, exhaustive=False,
                space_bits=input_space_bits(design.datapath), corners=corners,
            )
            for sim in args.simulators:
                files = manifest["files"]["vhdl" if sim in VHDL_SIMULATORS else "rtl"]
                bits = signal_bits([project / r for r in files])
                report = run_sim(project, simulator=sim, samples=args.samples, seed=1, waves=True,
                                 mode="per-clock", waves_limit_mb=1e6)
                xml = (project / "build" / sim / "results.xml").read_text()
                stop = max(float(v) for v in re.findall(r'name="sim_time_stop" value="([0-9.]+)"', xml))
                clocks = int(stop / CLOCK_NS)
                size = Path(report.waves_file).stat().st_size
                rate = size / (clocks * bits)
                estimate = estimate_bytes(estimated_clocks, bits, sim)
                print(f"{name:<15} {sim:<10} {clocks:>8} {bits:>6} {size:>11} {rate:>10.4f} "
                      f"{estimate / size:>18.2f}")
    print(f"constants used: {BYTES_PER_BIT_CLOCK} bytes per bit per clock, by format {FORMATS}")


if __name__ == "__main__":
    main()
