"""The GHDL bulk bench against GHDL with no Python, measured side by side in one run.

Builds one VHDL core (by default the 16-bit, 16-iteration pipelined sine/cosine core of
benchmarks/bulk_speed.py) and measures, on this machine:

* the bulk bench on GHDL (cocotb drives rtl/NAME_bulk.vhd, numpy checks whole blocks): samples
  per second of its ``bulk_full_rate`` test, from the test's wall time in cocotb's results.xml
  (so GHDL's start-up, which compiles the design, is left out, as it is for Icarus in
  benchmarks/bulk_speed.py);
* a plain VHDL testbench with no Python: the same core, a 64-bit LFSR feeding every input port
  one new sample per clock, the consumer always ready, and a checksum of every output, printed
  at the end. It is run for N samples and for N/10, and its rate is taken from the difference,
  so GHDL's start-up is left out of it too. It runs once before and once after the bulk bench,
  and the mean of the two is used, since the machine may be shared.

The ratio of the two is what the issue's target (at least 85%) is about. The load average is
printed before and after.

    python benchmarks/ghdl_bulk.py [--samples 20000] [--config FILE] [--keep]
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

from benchgen.harness import BulkLayout, bulk_layout
from benchgen.project import design_from_manifest, generate_project, load_manifest
from benchgen.sim import run_sim
from benchgen.simulators import find_simulator

CORE = {
    "name": "bench_sincos",
    "function": "sincos",
    "architecture": "pipelined",
    "angle_width": 16,
    "data_width": 16,
    "iterations": 16,
    "guard_bits": 5,
    "max_error_lsb": 4.0,
    "hdl": "vhdl",
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


def plain_testbench(layout: BulkLayout) -> str:
    """A VHDL-2008 testbench with no Python: LFSR stimulus every clock, a checksum of the outputs.

    Generic ``SAMPLES``: how many samples go through; the checksum is reported when the last
    comes out, and the clock then stops, which ends the simulation.
    """
    in_w = 8 * layout.in_bytes
    copies = -(-in_w // 64)
    signals = [f"    signal {s.port} : std_logic_vector({s.width - 1} downto 0) := (others => '0');"
               for s in layout.inputs]
    signals += [f"    signal {s.port} : std_logic_vector({s.width - 1} downto 0);" for s in layout.outputs]
    ports = ["clk => clk", *layout.vhdl_controls, "in_valid => in_valid"]
    if layout.in_ready:
        ports.append("in_ready => in_ready")
    ports += [f"{s.port} => {s.port}" for s in layout.inputs]
    ports.append("out_valid => out_valid")
    if layout.out_ready:
        ports.append("out_ready => '1'")
    ports += [f"{s.port} => {s.port}" for s in layout.outputs]
    drive = "\n".join(f"                {s.port} <= std_logic_vector(word({s.msb} downto {s.lsb}));" for s in layout.inputs)
    fold = "\n".join(
        f"                    sum := (sum(62 downto 0) & sum(63)) xor resize(unsigned({s.port}), 64);"
        for s in layout.outputs
    )
    ready = "" if layout.in_ready else "\n    in_ready <= '1';"
    return f"""library ieee;
use ieee.std_logic_1164.all;
use ieee.numeric_std.all;

entity plain_tb is
    generic (SAMPLES : natural := 1000);
end entity;

architecture sim of plain_tb is
    signal clk : std_logic := '0';
    signal rst : std_logic := '1';
    signal done : boolean := false;
    signal in_valid : std_logic := '0';
    signal in_ready : std_logic;
    signal out_valid : std_logic;
{chr(10).join(signals)}
begin
    clk <= not clk after 5 ns when not done;{ready}

    dut : entity work.{layout.core}
        port map ({", ".join(ports)});

    stream : process (clk)
        variable lfsr : unsigned(63 downto 0) := x"0000000000000001";
        variable word : unsigned({64 * copies - 1} downto 0);
        variable sum : unsigned(63 downto 0) := (others => '0');
        variable clocks, sent, got : natural := 0;
    begin
        if rising_edge(clk) then
            clocks := clocks + 1;
            if clocks = 4 then
                rst <= '0';
            end if;
            if rst = '0' then
                if in_valid = '1' and in_ready = '1' then
                    sent := sent + 1;
                end if;
                -- A new sample whenever the last one was taken (x^64 + x^63 + x^61 + x^60 + 1).
                if in_valid = '0' or in_ready = '1' then
                    lfsr := lfsr(62 downto 0) & (lfsr(63) xor lfsr(62) xor lfsr(60) xor lfsr(59));
                    word := {" & ".join(["lfsr"] * copies)};
{drive}
                    in_valid <= '1' when sent < SAMPLES else '0';
                end if;
                if out_valid = '1' then
{fold}
                    got := got + 1;
                    if got = SAMPLES then
                        report "checksum " & to_hstring(sum) & " after " & integer'image(got) & " samples";
                        done <= true;
                    end if;
                end if;
            end if;
        end if;
    end process;
end architecture;
"""


def _plain_seconds(work: Path, samples: int) -> tuple[float, str]:
    t0 = time.perf_counter()
    proc = subprocess.run(
        ["ghdl", "-r", "--std=08", "plain_tb", f"-gSAMPLES={samples}", "--ieee-asserts=disable"],
        cwd=work, capture_output=True, text=True, check=True,
    )
    seconds = time.perf_counter() - t0
    line = next((ln for ln in (proc.stdout + proc.stderr).splitlines() if "checksum" in ln), "")
    if f"after {samples} samples" not in line:
        raise RuntimeError(f"the plain testbench did not finish {samples} samples:\n{proc.stdout}{proc.stderr}")
    return seconds, line.split("checksum ", 1)[1]


def plain_rate(project: Path, work: Path, samples: int) -> tuple[float, float, str]:
    """Samples per second of the plain testbench, start-up excluded and included, and its checksum."""
    small = max(1, samples // 10)
    t_small, _ = _plain_seconds(work, small)
    t_full, checksum = _plain_seconds(work, samples)
    return (samples - small) / max(t_full - t_small, 1e-9), samples / t_full, checksum


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=20_000, help="samples of each bench")
    ap.add_argument("--config", type=Path, help="a core config to use instead (hdl must include vhdl)")
    ap.add_argument("--keep", action="store_true", help="keep the work folder")
    args = ap.parse_args()
    info = find_simulator("ghdl")
    load0 = os.getloadavg()
    work = Path(tempfile.mkdtemp(prefix="ghdl_bulk_"))
    try:
        project = work / "proj"
        generate_project(args.config or _config(work / "core.toml", CORE), project)
        manifest = load_manifest(project)
        layout = bulk_layout(manifest["toplevel"], design_from_manifest(manifest).ports)
        plain = work / "plain"
        plain.mkdir()
        (plain / "plain_tb.vhd").write_text(plain_testbench(layout))
        sources = [str(project / rel) for rel in manifest["files"]["vhdl"]]
        subprocess.run(["ghdl", "-a", "--std=08", *sources, "plain_tb.vhd"], cwd=plain, check=True)
        subprocess.run(["ghdl", "-e", "--std=08", "plain_tb"], cwd=plain, check=True)

        before, before_all, checksum = plain_rate(project, plain, args.samples)
        bulk = run_sim(project, simulator="ghdl", samples=args.samples, seed=1, mode="bulk")
        after, after_all, _ = plain_rate(project, plain, args.samples)
        if not bulk.passed:
            print("the bulk run failed:", bulk.problems, file=sys.stderr)
            return 1
        record = next(t for t in bulk.per_test if t["test"] == "bulk_full_rate")
        seconds = _test_seconds(Path(bulk.log_file).parent / "results.xml", "test_bulk_full_rate")
        bulk_rate = record["samples"] / seconds
        plain_mean = (before + after) / 2
        load1 = os.getloadavg()

        print(f"GHDL {info.version}; core {layout.core} ({manifest['toplevel']}), {args.samples:,} samples a bench")
        print(f"load average before {load0[0]:.1f} {load0[1]:.1f}, after {load1[0]:.1f} {load1[1]:.1f}")
        print(f"{'path':<56}{'samples/s':>12}  ratio")
        print(f"{'bulk bench, GHDL (bulk_full_rate, ' + format(record['samples'], ',') + ' samples)':<56}"
              f"{bulk_rate:>12,.0f}  {100 * bulk_rate / plain_mean:.1f}% of GHDL without Python (need >= 85)")
        print(f"{'plain VHDL testbench, no Python (before, after)':<56}{plain_mean:>12,.0f}  "
              f"1.00x ({before:,.0f}, {after:,.0f}; start-up left out)")
        print(f"{'plain VHDL testbench, start-up included (before, after)':<56}"
              f"{(before_all + after_all) / 2:>12,.0f}  ({before_all:,.0f}, {after_all:,.0f})")
        print(f"plain testbench checksum {checksum}; the whole bulk run (2 tests, start-up included) "
              f"{bulk.sim_seconds:.1f} s")
        return 0
    finally:
        if args.keep:
            print(f"work folder kept: {work}")
        else:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
