"""Waveforms: one name on both simulators, the path printed, large dumps refused before the run,
and a dump of only a window around the first failure (benchgen.waves)."""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import pytest

from benchgen.cli import main
from benchgen.waves import CLOCK_NS, dump_span, signal_bits, waves_file
from tests.conftest import require_simulator, write_config

CORE = {"name": "wv_sc", "function": "sincos", "angle_width": 8, "data_width": 8, "max_error_lsb": 1.0}
WINDOW = 20


@pytest.fixture(scope="module")
def project(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("waves")
    out = root / "good"
    assert main(["generate", str(write_config(root / "c.toml", CORE)), "-o", str(out)]) == 0
    return out


def _broken(project: Path, where: Path) -> Path:
    """A copy whose cos output is one LSB off whenever the sine output is 37 (a few angles)."""
    shutil.copytree(project, where, ignore=shutil.ignore_patterns("build"))
    rtl = where / "rtl" / "wv_sc.v"
    text = rtl.read_text()
    assert "assign out_cos = out_cos_reg;" in text
    rtl.write_text(text.replace("assign out_cos = out_cos_reg;",
                                "assign out_cos = out_cos_reg ^ {7'd0, out_sin_reg == 8'sd37};"))
    return where


def test_signal_bits_counts_what_a_dump_records(tmp_path: Path) -> None:
    src = tmp_path / "m.v"
    src.write_text(
        "module m (input wire clk, input wire [7:0] a, output wire signed [15:0] y);\n"
        "    reg [3:0] r, s;  // two 4-bit registers\n"
        "    wire w;\n"
        "    reg [31:0] mem [0:1023];  // a memory: not dumped\n"
        "    integer k;\n"
        "    localparam [13:0] C = 14'h1;\n"
        "endmodule\n"
    )
    assert signal_bits([src]) == 1 + 8 + 16 + 2 * 4 + 1 + 32


@pytest.fixture(scope="module")
def vhdl_project(tmp_path_factory: pytest.TempPathFactory) -> Path:
    root = tmp_path_factory.mktemp("waves_vhdl")
    out = root / "good"
    assert main(["generate", str(write_config(root / "c.toml", {**CORE, "hdl": "vhdl"})), "-o", str(out)]) == 0
    return out


def test_signal_bits_resolves_named_widths_in_verilog_and_vhdl(tmp_path: Path) -> None:
    """The printers write widths through named constants (``[XY_W-1:0]``, ``unsigned(XY_W - 1
    downto 0)``); each such vector counts its bits, in either language, and a generated core's
    two texts count nearly alike (one description, two printers)."""
    v = tmp_path / "m.v"
    v.write_text(
        "module m (input wire clk, input wire [7:0] a);\n"
        "    localparam XY_W = 25;  // data bits plus guard bits\n"
        "    localparam [XY_W-1:0] K = 25'h1;\n"
        "    wire [XY_W-1:0] s0_x, s0_y;\n"
        "    reg [XY_W - 1 : 0] s0_x_reg;\n"
        "endmodule\n"
    )
    assert signal_bits([v]) == 1 + 8 + 3 * 25
    vhd = tmp_path / "m.vhd"
    vhd.write_text(
        "entity m is\n    port (\n        clk : in  std_logic;\n"
        "        a   : in  std_logic_vector(7 downto 0)\n    );\nend entity;\n"
        "architecture rtl of m is\n"
        "    constant XY_W : natural := 25;  -- data bits plus guard bits\n"
        "    constant K : unsigned(XY_W - 1 downto 0) := 25x\"0000001\";\n"
        "    signal s0_x, s0_y : unsigned(XY_W - 1 downto 0);\n"
        "    signal s0_x_reg : signed(xy_w - 1 downto 0);\n"
        "    signal advance : std_logic;\n"
        "begin\nend architecture;\n"
    )
    assert signal_bits([vhd]) == 1 + 8 + 3 * 25 + 1


def test_generated_cores_count_alike_in_both_languages(tmp_path: Path) -> None:
    config = write_config(tmp_path / "c.toml", {**CORE, "name": "wv_both", "hdl": ["verilog", "vhdl"]})
    assert main(["generate", str(config), "-o", str(tmp_path / "p")]) == 0
    verilog, vhdl = (signal_bits([tmp_path / "p" / "rtl" / f"wv_both.{ext}"]) for ext in ("v", "vhd"))
    assert verilog > 40 * CORE["data_width"]  # every stage's x, y and z, not the ports alone
    assert abs(verilog - vhdl) <= 0.05 * verilog


def test_a_window_on_ghdl_is_refused_in_one_line(vhdl_project: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """GHDL dumps only whole runs: the window is refused before anything runs (no GHDL needed),
    and the fix it names (--waves) is accepted by the same check."""
    status = main(["sim", str(vhdl_project), "--simulator", "ghdl", "--waves-window", "20"])
    err = capsys.readouterr().err
    assert status == 2 and err.count("\n") == 1 and "Traceback" not in err
    assert "--waves-window does not run on ghdl" in err and "use --waves" in err
    assert not (vhdl_project / "build").exists()
    from benchgen.project import design_from_manifest, load_manifest
    from benchgen.sim import _check_waves_size

    manifest = load_manifest(vhdl_project)
    _check_waves_size(vhdl_project, manifest, design_from_manifest(manifest), "ghdl", 20_000, False, False, 1000)


def test_a_dump_over_the_limit_is_refused_before_anything_runs(project: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """Needs no simulator: the estimate comes from the design and the sample count."""
    from benchgen.project import design_from_manifest, load_manifest
    from benchgen.sim import _check_waves_size

    status = main(["sim", str(project), "--simulator", "icarus", "--waves", "--samples", "2000000",
                   "--waves-limit", "5"])
    err = capsys.readouterr().err
    assert status == 2
    assert err.count("\n") == 1 and "Traceback" not in err
    assert "would be about" in err and "limit of 5 MB" in err and "--waves-window" in err
    assert not (project / "build").exists()  # nothing was built or run
    suggested = int(re.search(r"--waves-limit (\d+)", err).group(1))
    manifest = load_manifest(project)
    # The limit it suggests is one the check then accepts.
    _check_waves_size(project, manifest, design_from_manifest(manifest), "icarus", 2_000_000, True, False, suggested)


@pytest.mark.sim
def test_waves_path_is_printed_and_named_by_the_core(project: Path, tmp_path: Path,
                                                    capsys: pytest.CaptureFixture[str]) -> None:
    require_simulator("icarus")
    report = tmp_path / "r.json"
    assert main(["sim", str(project), "--simulator", "icarus", "--samples", "200", "--seed", "2", "--waves",
                 "--json", str(report)]) == 0
    out = capsys.readouterr().out
    dump = waves_file(project / "build" / "icarus", "wv_sc", "icarus")
    assert dump.name == "wv_sc.fst" and waves_file(dump.parent, "wv_sc", "verilator").name == "wv_sc.vcd"
    assert f"waves: {dump} (the whole run)" in out
    assert json.loads(report.read_text())["waves_file"] == str(dump)
    start, end = dump_span(dump)
    assert start == 0 and end > 200 * CLOCK_NS * 1000  # the whole run, in ps


@pytest.mark.sim
def test_ghdl_dumps_the_whole_run_under_the_same_name(vhdl_project: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """GHDL writes <core>.ghw in its build folder (the base name every simulator uses), printed."""
    require_simulator("ghdl")
    assert main(["sim", str(vhdl_project), "--simulator", "ghdl", "--samples", "200", "--seed", "2", "--waves"]) == 0
    dump = waves_file(vhdl_project / "build" / "ghdl", "wv_sc", "ghdl")
    assert dump.name == "wv_sc.ghw"
    assert f"waves: {dump} (the whole run)" in capsys.readouterr().out
    assert dump.read_bytes()[:9] == b"GHDLwave\n"  # GHDL's own format, which GTKWave reads


@pytest.mark.sim
def test_window_dumps_only_around_the_first_mismatch(project: Path, tmp_path: Path,
                                                     capsys: pytest.CaptureFixture[str]) -> None:
    """Per-clock bench on Icarus: the run fails, the rerun dumps WINDOW clocks either side of the
    first mismatching output and nothing else; a passing run writes no dump and says why."""
    require_simulator("icarus")
    report = tmp_path / "r.json"
    assert main(["sim", str(project), "--simulator", "icarus", "--samples", "200", "--seed", "3",
                 "--waves-window", str(WINDOW), "--json", str(report)]) == 0
    assert "no waves written: no sample differed from the model" in capsys.readouterr().out
    assert json.loads(report.read_text())["waves_file"] is None

    broken = _broken(project, tmp_path / "broken")
    assert main(["sim", str(broken), "--simulator", "icarus", "--samples", "300", "--seed", "3",
                 "--waves-window", str(WINDOW), "--json", str(report)]) == 1
    run = json.loads(report.read_text())
    first = next(t["first_failure"]["time_ns"] for t in run["per_test"] if t.get("first_failure"))
    start, end = dump_span(run["waves_file"])
    assert start == 1000 * (first - WINDOW * CLOCK_NS)
    assert 1000 * (first + WINDOW * CLOCK_NS) <= end <= 1000 * (first + (WINDOW + 1) * CLOCK_NS)
    assert Path(run["waves_file"]) == waves_file(broken / "build" / "icarus_window", "wv_sc", "icarus")
    assert f"waves: {run['waves_file']}" in capsys.readouterr().out


@pytest.mark.sim
def test_bulk_window_finds_the_failing_output_clock(project: Path, tmp_path: Path) -> None:
    """Bulk bench on Icarus: the extra pass finds when output k of a block is handed over. At full
    rate (the corners block) outputs leave one per clock, so output k + 5 leaves 5 clocks after
    output k; the window of a failed bulk run is centred on the time found."""
    require_simulator("icarus")
    from benchgen.project import load_manifest
    from benchgen.sim import SimReport, _rerun
    from benchgen.simulators import find_simulator
    from benchgen.waves import FAR_NS, WavesPlan

    broken = _broken(project, tmp_path / "broken")
    report = tmp_path / "r.json"
    assert main(["sim", str(broken), "--simulator", "icarus", "--samples", "2000", "--seed", "3", "--mode", "bulk",
                 "--waves-window", str(WINDOW), "--json", str(report)]) == 1
    run = json.loads(report.read_text())
    assert run["per_test"][0]["first_failure"]["block"] == 0  # in the corners block, at full rate
    start, end = dump_span(run["waves_file"])
    at = int(re.search(r"output at (\d+) ns", run["waves_note"]).group(1))
    assert start == 1000 * (at - WINDOW * CLOCK_NS) and end >= 1000 * (at + WINDOW * CLOCK_NS)

    info = find_simulator("icarus")
    scratch = SimReport(simulator="icarus", simulator_version=info.version, toplevel="wv_sc", seed=3)
    build = tmp_path / "find"
    build.mkdir()
    times = []
    for k in (10, 15):
        found = build / f"t{k}.txt"
        plan = WavesPlan(path=build / "unused.fst", start_ns=FAR_NS, find=(0, k), found=found)
        _rerun(scratch, broken, load_manifest(broken), info, build, 2000, 3, plan, True, False)
        times.append(int(found.read_text()))
    assert times[1] - times[0] == 5 * CLOCK_NS
    assert not (build / "unused.fst").exists()  # the find pass dumps nothing


@pytest.mark.sim
def test_verilator_dump_shows_the_failing_output_at_the_recorded_time(project: Path, tmp_path: Path) -> None:
    """Verilator writes <core>.vcd through the bound watcher; at the clock edge where the bench
    saw the first mismatch (the time a window is centred on), the dump holds the wrong value."""
    require_simulator("verilator")
    broken = _broken(project, tmp_path / "broken")
    report = tmp_path / "r.json"
    assert main(["sim", str(broken), "--simulator", "verilator", "--samples", "200", "--seed", "3", "--waves",
                 "--json", str(report)]) == 1
    run = json.loads(report.read_text())
    dump = Path(run["waves_file"])
    assert dump == waves_file(broken / "build" / "verilator", "wv_sc", "verilator")
    test = next(t for t in run["per_test"] if t.get("first_failure"))
    at_ps = 1000 * test["first_failure"]["time_ns"]
    wrong = test["first_mismatches"][0]["got_out_cos"]
    # The core's out_cos as it stood just before that edge (what the handshake took).
    codes: dict[str, str] = {}
    value = None
    time = 0
    with dump.open() as fh:
        for line in fh:
            if line.startswith("$var") or line.strip().startswith("$var"):
                parts = line.split()
                if parts[4] == "out_cos" and "ident" not in codes:
                    codes["ident"] = parts[3]
            elif line.startswith("#"):
                time = int(line[1:])
                if time >= at_ps:
                    break
            elif line.startswith("b") and codes and line.split()[1] == codes["ident"]:
                value = int(line.split()[0][1:], 2)
    assert value is not None
    assert (value - 256 if value >= 128 else value) == wrong


@pytest.mark.parametrize("name", ["benchgen_waves", "benchgen_waves_root"])
def test_a_core_cannot_take_the_watcher_modules_name(name: str) -> None:
    """The watcher is compiled beside the core; a core of the same name would not build."""
    from benchgen.config import parse_config
    from benchgen.errors import ConfigError

    with pytest.raises(ConfigError) as refused:
        parse_config({**CORE, "name": name})
    assert refused.value.field == "name" and "reserved" in str(refused.value)
