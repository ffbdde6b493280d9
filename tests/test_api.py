"""The Python API (benchgen top level) and the bench pieces for users' own cocotb tests.

docs/api.md runs here: its ``pycon`` blocks as doctests, and its example of a core inside a
user's wrapper module on both simulators. The README's Python lines run too.
"""

from __future__ import annotations

import doctest
import json
import re
import subprocess
import sys
import tomllib
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from conftest import require_simulator

import benchgen
from benchgen.cli import main
from benchgen.functions import evaluate as evaluate_function

ROOT = Path(__file__).resolve().parent.parent
DOC = ROOT / "docs" / "api.md"
SMALL = {"name": "nco_core", "function": "sincos", "angle_width": 12, "data_width": 12}


def fenced(text: str, language: str) -> list[tuple[int, str]]:
    """The blocks fenced as ``language``, with the line each starts on."""
    found = []
    for match in re.finditer(rf"^```{language}\n(.*?)^```$", text, re.M | re.S):
        found.append((text[: match.start()].count("\n") + 2, match.group(1)))
    return found


def doc_files(text: str) -> dict[str, str]:
    """The example files of a page: each fenced block right after ``<!-- file: NAME -->``."""
    return {
        m.group(1): m.group(2)
        for m in re.finditer(r"^<!-- file: (\S+) -->\n```\w+\n(.*?)^```$", text, re.M | re.S)
    }


# ------------------------------------------------------------------------------ the docs page runs


def test_docs_page_examples_run_as_doctests() -> None:
    text = DOC.read_text()
    blocks = fenced(text, "pycon")
    assert len(blocks) >= 5
    parser, runner = doctest.DocTestParser(), doctest.DocTestRunner(optionflags=doctest.ELLIPSIS)
    globs: dict[str, Any] = {}
    examples = 0
    for line, block in blocks:
        test = parser.get_doctest(block, globs, f"docs/api.md:{line}", str(DOC), line)
        examples += len(test.examples)
        runner.run(test, clear_globs=False)
        globs = test.globs  # one session: later blocks use the names of earlier ones
    failed, attempted = runner.summarize(verbose=False)
    assert attempted == examples and failed == 0, f"{failed} of {attempted} examples of docs/api.md failed (see above)"


def test_docs_page_lists_every_public_name() -> None:
    text = DOC.read_text()
    for name in benchgen.__all__:
        if name not in ("__version__", "BenchgenError", "CoreSpec"):
            assert f"`{name}" in text, name


def test_readme_use_section_shows_the_api_in_five_lines(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    readme = (ROOT / "README.md").read_text()
    use = readme[readme.index("## Use") : readme.index("\n## ", readme.index("## Use") + 1)]
    blocks = fenced(use, "python")
    assert len(blocks) == 1
    code = blocks[0][1]
    assert len([line for line in code.splitlines() if line.strip()]) == 5
    monkeypatch.chdir(tmp_path)
    scope: dict[str, Any] = {}
    exec(compile(code, "README.md", "exec"), scope)  # noqa: S102 - the README's own lines
    project = benchgen.open_project(tmp_path / "nco_core")
    assert project.core.name == "nco_core" and (tmp_path / "nco_core" / "rtl" / "nco_core.v").is_file()
    assert set(scope["out"]) == {"out_cos", "out_sin"}


# ------------------------------------------------------------------------------ the package's front


def test_all_is_sorted_and_every_name_is_there() -> None:
    assert benchgen.__all__ == sorted(benchgen.__all__)
    for name in benchgen.__all__:
        assert getattr(benchgen, name) is not None
    assert set(benchgen.__all__) <= set(dir(benchgen))
    with pytest.raises(AttributeError):
        benchgen.no_such_name  # noqa: B018
    from benchgen import bench

    assert bench.__all__ == sorted(bench.__all__) == ["CoreChecker", "StreamDriver", "StreamMonitor"]


def test_import_benchgen_loads_neither_numpy_nor_the_generator() -> None:
    """The command line imports benchgen first; the API's names load on first use."""
    code = (
        "import sys, benchgen; import benchgen.bench; "
        "print(sorted(m for m in sys.modules if m.split('.')[0] in ('numpy', 'cocotb') or (m.startswith('benchgen.') and m != 'benchgen.bench')))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "[]"
    code = "import sys, benchgen; benchgen.design_core; print('numpy' in sys.modules)"
    assert subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip() == "True"


# ------------------------------------------------------------------------------ configs and cores


def test_load_config_from_a_mapping_and_from_a_file(config_file) -> None:  # type: ignore[no-untyped-def]
    from_dict = benchgen.load_config(SMALL)
    from_file = benchgen.load_config(config_file(**SMALL))
    assert from_dict == from_file and isinstance(from_dict, benchgen.CoreSpec)
    with pytest.raises(benchgen.ConfigError) as info:
        benchgen.load_config(config_file(**{**SMALL, "rounding": "nearest"}))
    assert "core.toml" in str(info.value) and info.value.field == "rounding"
    with pytest.raises(benchgen.ConfigError, match="mapping of config fields"):
        benchgen.load_config(42)  # type: ignore[arg-type]


def test_a_budget_no_size_meets_is_a_config_error_with_a_fix_that_works() -> None:
    with pytest.raises(benchgen.ConfigError) as info:
        benchgen.design_core({**SMALL, "iterations": 4})
    assert info.value.field == "iterations" and info.value.suggestion
    fixed = {**SMALL, "iterations": 4, **info.value.suggestion}
    if fixed.get("iterations") == "auto":
        assert benchgen.design_core(fixed).iterations > 4
    else:
        assert benchgen.design_core(fixed).max_error_lsb < fixed["max_error_lsb"]


@pytest.mark.parametrize(
    "values",
    [
        {"function": "rotate", "data_width": 10, "angle_width": 9},
        {"function": "atan2", "data_width": 10, "angle_width": 12},
        {"function": "div", "data_width": 10},
        {"function": "exp", "data_width": 10},
        {"function": "sincos", "data_width": 10, "angle_width": 10, "angle_unit": "radians"},
    ],
    ids=lambda v: v["function"] + ("_rad" if v.get("angle_unit") else ""),
)
def test_model_is_the_bit_true_model_on_random_inputs(values: dict[str, Any]) -> None:
    core = benchgen.design_core({"name": "c", **values})
    rng = np.random.default_rng(7)
    inputs = {p.name: rng.integers(p.low, p.high + 1, 5000) for p in core.inputs}
    got = core.model(**inputs)
    want = evaluate_function(core.design.datapath, inputs)
    assert list(got) == [p.name for p in core.outputs]
    for name, values_out in got.items():
        assert values_out.dtype == np.int64 and values_out.shape == (5000,)
        assert np.array_equal(values_out, np.asarray(want[name]).astype(np.int64)), name
    for port in core.outputs:  # every output code fits its port
        assert got[port.name].min() >= port.low and got[port.name].max() <= port.high


def test_model_takes_64_bit_codes_exactly() -> None:
    core = benchgen.design_core({"name": "c", "function": "ln", "data_width": 64, "max_error_lsb": 4})
    top = 2**64 - 1
    out = core.model(in_w=[top, 1, 0])
    assert out["out_domain_error"].tolist() == [0, 0, 1]
    # The same code as a uint64 array: numpy would have made the list's 2**64 - 1 a float.
    assert core.model(in_w=np.array([top], dtype=np.uint64))["out_ln"].tolist() == out["out_ln"][:1].tolist()
    assert out["out_ln"][1] < 0 and out["out_ln"][0] == 0  # ln(1 - 2^-64) rounds to 0; ln(2^-64) < 0


@pytest.mark.parametrize(
    ("inputs", "words"),
    [
        ({"in_x": [1]}, ["'in_x' is not an input", "in_angle"]),
        ({}, ["'in_angle' is missing"]),
        ({"in_angle": np.array([0.5])}, ["float64 values, not integer codes", "np.rint", "0 to 4095"]),
        ({"in_angle": [1, 2.5]}, ["holds 2.5, not an integer code", "np.rint"]),
        ({"in_angle": [True]}, ["not an integer code"]),
        ({"in_angle": ["7"]}, ["'7', not an integer code"]),
        ({"in_angle": [0, -1]}, ["holds -1 at index 1", "0 .. 4095"]),
        ({"in_angle": np.array([4095, 9000])}, ["holds 9000 at index 1"]),
        ({"in_angle": [[1, 2], [3]]}, ["not an integer code"]),
    ],
)
def test_model_input_errors_name_the_port_and_the_fix(inputs: dict[str, Any], words: list[str]) -> None:
    core = benchgen.design_core(SMALL)
    with pytest.raises(benchgen.ModelInputError) as info:
        core.model(**inputs)
    message = str(info.value)
    assert message.startswith("nco_core.model: ") and "\n" not in message
    for word in words:
        assert word in message
    assert isinstance(info.value, ValueError) and isinstance(info.value, benchgen.BenchgenError)


def test_model_input_shapes_must_agree_and_a_name_is_given_once() -> None:
    core = benchgen.design_core({"name": "c", "function": "mul", "data_width": 8})
    with pytest.raises(benchgen.ModelInputError, match=r"in_a has shape \(2,\) but in_b has shape \(3,\)"):
        core.model(in_a=[1, 2], in_b=[1, 2, 3])
    with pytest.raises(benchgen.ModelInputError, match="given twice"):
        core.model({"in_a": [1]}, in_a=[1], in_b=[1])
    assert core.model(in_a=-128, in_b=-128)["out_product"].shape == ()
    assert core.model(in_a=[], in_b=[])["out_product"].shape == (0,)


# ------------------------------------------------------------------------------ projects


def test_generate_from_a_mapping_matches_the_command_line(tmp_path: Path) -> None:
    fields = {**SMALL, "max_error_lsb": 1.5, "tag_width": 2, "vlnv_vendor": "acme"}
    project = benchgen.generate(fields, tmp_path / "api")
    assert tomllib.loads(project.config_path.read_text()) == fields
    assert main(["generate", str(project.config_path), "-o", str(tmp_path / "cli")]) == 0
    for path in project.files:
        rel = path.relative_to(project.path)
        assert path.read_bytes() == (tmp_path / "cli" / rel).read_bytes(), rel
    assert sorted(p.name for p in project.files) == sorted(p.name for p in (tmp_path / "cli").rglob("*") if p.is_file())
    assert project.core_file.read_text().count("acme:cores:nco_core:") == 2


def test_generate_from_a_file_and_open_it_again(tmp_path: Path) -> None:
    example = ROOT / "sim_projects" / "motor_park_sincos"
    project = benchgen.generate(example / "config.toml", tmp_path / "p")
    assert project.config_path.read_text() == (example / "config.toml").read_text()
    opened = benchgen.open_project(example)
    assert opened.manifest == json.loads((example / "manifest.json").read_text())
    assert opened.core.latency_cycles == opened.manifest["derived"]["latency_cycles"]
    assert opened.core.max_error_lsb == pytest.approx(opened.manifest["error_budget"]["model_max_error_lsb"], abs=1e-6)
    assert opened.rtl_files == [example / "rtl" / "park_angle_sincos.v"]


def test_a_project_with_an_edited_manifest_is_refused(tmp_path: Path) -> None:
    project = benchgen.generate(SMALL, tmp_path / "p")
    manifest = json.loads(project.manifest_path.read_text())
    manifest["derived"]["latency_cycles"] = 3
    project.manifest_path.write_text(json.dumps(manifest))
    with pytest.raises(benchgen.ProjectError, match="regenerate"):
        benchgen.open_project(project.path)
    with pytest.raises(benchgen.ProjectError, match="not a benchgen project"):
        benchgen.open_project(tmp_path)


def test_a_bad_config_writes_nothing(tmp_path: Path) -> None:
    with pytest.raises(benchgen.ConfigError):
        benchgen.generate({**SMALL, "data_width": 2}, tmp_path / "p")
    assert not (tmp_path / "p").exists()


# ------------------------------------------------------------------------------ the wrapper example


def wrapper_example(tmp_path: Path) -> Path:
    """docs/api.md's example files in a folder, with the core generated as the page says."""
    files = doc_files(DOC.read_text())
    assert set(files) == {"nco_core.toml", "nco_top.v", "test_nco_top.py", "run_nco_top.py"}
    for name, text in files.items():
        (tmp_path / name).write_text(text)
    benchgen.generate(tmp_path / "nco_core.toml", tmp_path / "nco_core")
    return tmp_path


def run_example(folder: Path, simulator: str, module: str = "test_nco_top") -> tuple[int, int]:
    """The page's runner, run for ``module`` (a test module in ``folder``)."""
    source = (folder / "run_nco_top.py").read_text().replace('"test_nco_top"', repr(module))
    scope: dict[str, Any] = {"__file__": str(folder / "run_nco_top.py"), "__name__": "docs_runner"}
    try:
        exec(compile(source, str(folder / "run_nco_top.py"), "exec"), scope)  # noqa: S102
        return scope["run"](simulator)
    finally:
        sys.path[:] = [p for p in sys.path if p != str(folder)]


@pytest.mark.sim
@pytest.mark.parametrize("simulator", ["icarus", "verilator"])
def test_docs_wrapper_example_passes(simulator: str, tmp_path: Path) -> None:
    require_simulator(simulator)
    folder = wrapper_example(tmp_path)
    assert run_example(folder, simulator) == (1, 0)


CHECKER_EDGES = '''
"""The checker judges what it watches: wrong outputs fail it, a reset drops what is in flight."""

from pathlib import Path

import cocotb
import numpy as np
from cocotb.clock import Clock
from cocotb.triggers import ClockCycles

from benchgen.bench import CoreChecker, StreamDriver

CORE = Path(__file__).resolve().parent / "nco_core"


async def started(dut):
    Clock(dut.clk, 10, unit="ns").start()
    dut.m_ready.value = 1
    dut.rst.value = 1
    await ClockCycles(dut.clk, 3)
    dut.rst.value = 0
    return StreamDriver(dut.clk, dut.s_valid, dut.s_ready, {"freq": dut.s_freq, "sync": dut.s_sync})


@cocotb.test()
async def test_halved_outputs_are_not_the_core(dut):
    driver = await started(dut)
    # Pointed at the wrapper's outputs, which are the core's halved: every sample is wrong.
    checker = CoreChecker(dut.u_nco, CORE, ports={
        "out_valid": dut.m_valid, "out_ready": dut.m_ready, "out_cos": dut.m_i, "out_sin": dut.m_q,
        "out_tag": dut.m_sync,
    })
    checker.start()
    rng = np.random.default_rng(1)
    await driver.send({"freq": rng.integers(1, 1 << 16, 300), "sync": np.zeros(300, dtype=np.int64)})
    await checker.drain()
    result = checker.stop(check=False)
    assert result.samples == 300
    assert result.mismatches >= 290, result.mismatches  # halving 0 or -1 leaves a few alone
    assert any("differ from the bit-true model" in p for p in result.problems)
    assert result.max_error_lsb > 1000
    try:
        checker.stop()
    except AssertionError as exc:
        assert "differ from the bit-true model" in str(exc)
    else:
        raise AssertionError("stop() did not fail")


@cocotb.test()
async def test_a_reset_drops_what_is_in_flight(dut):
    driver = await started(dut)
    checker = CoreChecker(dut.u_nco, CORE)
    checker.start()
    rng = np.random.default_rng(2)
    sender = cocotb.start_soon(driver.send({"freq": rng.integers(0, 1 << 16, 400), "sync": np.zeros(400, dtype=np.int64)}))
    await ClockCycles(dut.clk, 60)
    assert checker.in_flight > 0
    sender.cancel()
    dut.s_valid.value = 0
    dut.rst.value = 1
    await ClockCycles(dut.clk, 2)
    dut.rst.value = 0
    await driver.send({"freq": rng.integers(0, 1 << 16, 200), "sync": np.zeros(200, dtype=np.int64)})
    await checker.drain()
    result = checker.stop()  # no problem: what the reset dropped is not missing
    assert result.extra["dropped_by_reset"] > 0
    assert result.samples >= 200 and result.mismatches == 0
    assert result.latency_cycles[0] >= checker.design.timing.latency_cycles
'''


@pytest.mark.sim
def test_the_checker_finds_wrong_outputs_and_follows_a_reset(tmp_path: Path) -> None:
    require_simulator("icarus")
    folder = wrapper_example(tmp_path)
    (folder / "test_checker_edges.py").write_text(CHECKER_EDGES)
    assert run_example(folder, "icarus", "test_checker_edges") == (2, 0)
