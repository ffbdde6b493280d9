"""Config fuzzing: no config, however wrong, gives a traceback, a half-written project, or an
accepted core that fails lint or simulation.

The first part runs ``benchgen generate`` in-process on configs drawn by hypothesis over every
field: valid values, wrong types, out-of-range numbers, unknown fields, nested tables, malformed
TOML text, byte-order marks and huge values. The second (``sim``) part draws a few accepted cores
from a fixed seed and lints and simulates each on both simulators.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import random
import subprocess
import tempfile
from pathlib import Path
from typing import Any

import pytest
from conftest import require_simulator
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from benchgen.cli import main
from benchgen.sim import run_sim
from benchgen.simulators import find_simulator, simulator_env

FUNCTIONS = ("sincos", "rotate", "atan2", "mul", "div", "sinhcosh", "exp", "atanh", "ln", "sqrt")
FIELDS = (
    "name", "function", "architecture", "pipeline_depth", "iterations_per_cycle", "angle_width",
    "data_width", "iterations", "guard_bits", "angle_guard_bits", "rounding", "tag_width", "max_error_lsb", "gain",
    "angle_unit", "vlnv_vendor", "vlnv_library", "handshake", "sfdr_dbc", "snr_db", "shifted_terms",
)  # fmt: skip
# Widths of valid configs stay small: sizing runs the model, and 12 bits keep each run short.
SMALL_WIDTH = (3, 12)

# Values that are right for some field, so that many drawn configs get far into the checks.
VALID: dict[str, list[Any]] = {
    "name": ["nco", "core_a", "Dds2", "x" * 115],
    "function": list(FUNCTIONS),
    "architecture": ["pipelined", "iterative"],
    "pipeline_depth": [1, 2, 3, 5],
    "iterations_per_cycle": [1, 2, 3],
    "iterations": ["auto", 4, 8, 12],
    "guard_bits": ["auto", 0, 2, 4],
    # z's own guard bits: sincos and rotate only (the functions drawn here with an angle input)
    "angle_guard_bits": ["auto", 0, 2, 5],
    "rounding": ["truncate", "half_up", "half_even"],
    "tag_width": [0, 1, 5],
    "max_error_lsb": [1.0, 1.5, 2.0, 4.0, 1e6],
    "gain": ["compensated", "raw"],
    "angle_unit": ["turns", "radians"],
    "vlnv_vendor": ["benchgen", "acme.dsp", "Lab-7"],
    "vlnv_library": ["cores", "radio_ip", "1.x"],
    "handshake": ["ready_valid", "valid_only"],
    # sincos and rotate here (nco is not drawn); "rounded" in pipelined cores only
    "shifted_terms": ["auto", "rounded", "floored"],
    # The NCO's spectral target: refused for every function drawn here (none is an NCO).
    "sfdr_dbc": [40.0, 60, 72.5],
    "snr_db": [40.0, 70],
}

scalars = st.one_of(
    st.integers(min_value=-(2**70), max_value=2**70),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=40),
    st.booleans(),
    st.sampled_from(["auto", "", "std", "abc\n", "é", "x" * 5000, "1e9", "16"]),
)
values = st.recursive(
    scalars,
    lambda inner: st.one_of(
        st.lists(inner, max_size=3), st.dictionaries(st.text(max_size=8), inner, max_size=3)
    ),
    max_leaves=8,
)


ANGLE_FUNCTIONS = ("sincos", "rotate", "atan2")
GAIN_FUNCTIONS = ("sincos", "rotate", "atan2", "sinhcosh", "exp", "sqrt")


@st.composite
def valid_configs(draw: st.DrawFn) -> dict[str, Any]:
    """A config every field of which fits the others (sizing may still refuse its budget)."""
    function = draw(st.sampled_from(FUNCTIONS))
    config: dict[str, Any] = {"name": draw(st.sampled_from(VALID["name"])), "function": function}
    config["data_width"] = draw(st.integers(*SMALL_WIDTH))
    if function in ANGLE_FUNCTIONS:
        config["angle_unit"] = draw(st.sampled_from(VALID["angle_unit"]))
        config["angle_width"] = draw(st.integers(6 if config["angle_unit"] == "radians" else 3, SMALL_WIDTH[1]))
    if function in GAIN_FUNCTIONS:
        config["gain"] = draw(st.sampled_from(VALID["gain"]))
    if function in ("sincos", "rotate") and draw(st.booleans()):
        config["angle_guard_bits"] = draw(st.sampled_from(VALID["angle_guard_bits"]))
    arch = draw(st.sampled_from(VALID["architecture"]))
    config["architecture"] = arch
    if arch == "pipelined" and draw(st.booleans()):
        config["pipeline_depth"] = draw(st.sampled_from(VALID["pipeline_depth"]))
    if arch == "iterative" and draw(st.booleans()):
        config["iterations_per_cycle"] = draw(st.sampled_from(VALID["iterations_per_cycle"]))
    if function in ("sincos", "rotate") and draw(st.booleans()):
        config["shifted_terms"] = draw(st.sampled_from(VALID["shifted_terms"]))
    for field in ("iterations", "guard_bits", "rounding", "tag_width", "max_error_lsb", "vlnv_vendor", "vlnv_library",
                  "handshake"):
        if draw(st.booleans()):
            config[field] = draw(st.sampled_from(VALID[field]))
    return config


@st.composite
def configs(draw: st.DrawFn) -> dict[str, Any]:
    """A valid config with some damage: a field set to anything, one removed, one unknown added."""
    config = draw(valid_configs())
    for _ in range(draw(st.sampled_from([0, 0, 1, 2]))):
        config[draw(st.sampled_from(FIELDS))] = draw(values)
    if not draw(st.integers(0, 9)):
        config.pop(draw(st.sampled_from(sorted(config))))
    if not draw(st.integers(0, 5)):
        config[draw(st.text(min_size=1, max_size=12))] = draw(values)  # an unknown field, maybe a table
    return config


def toml_value(value: Any) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, float) and not math.isfinite(value):
        return "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf")
    if isinstance(value, dict):
        return "{" + ", ".join(f"{json.dumps(k)} = {toml_value(v)}" for k, v in value.items()) + "}"
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    return repr(value)


def toml_text(config: dict[str, Any]) -> str:
    return "".join(f"{json.dumps(k)} = {toml_value(v)}\n" for k, v in config.items())


@st.composite
def config_texts(draw: st.DrawFn) -> bytes:
    text = toml_text(draw(configs()))
    damage = draw(st.integers(0, 9))
    if damage == 0:  # cut off anywhere
        text = text[: draw(st.integers(0, len(text)))]
    elif damage == 1:  # a stray character
        at = draw(st.integers(0, len(text)))
        text = text[:at] + draw(st.sampled_from(['"', "[", "=", "\n", "]]", "\x00", "\\"])) + text[at:]
    elif damage == 2:
        text = "[" + ".".join(["a"] * draw(st.integers(1, 1500))) + "]\n" + text
    elif damage == 3:
        text += "# " + "c" * draw(st.integers(0, 30_000)) + "\n"
    data = text.encode("utf-8", errors="surrogatepass")
    if draw(st.booleans()):
        data = b"\xef\xbb\xbf" + data  # a UTF-8 byte-order mark
    if not draw(st.integers(0, 19)):
        data = draw(st.binary(max_size=64))
    return data


def run_generate(data: bytes) -> tuple[int, str, Path, tempfile.TemporaryDirectory[str]]:
    folder = tempfile.TemporaryDirectory(prefix="fuzz")
    config = Path(folder.name) / "core.toml"
    config.write_bytes(data)
    out = Path(folder.name) / "project"
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        try:
            status = main(["generate", str(config), "-o", str(out)])
        except SystemExit as exc:  # only argparse exits; generate's arguments are fixed here
            status = int(exc.code or 0)
    return status, err.getvalue(), out, folder


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(config_texts())
def test_generate_never_gives_a_traceback(data: bytes) -> None:
    status, err, out, folder = run_generate(data)
    event(f"exit status {status}")
    with folder:
        assert status in (0, 2), err
        assert "Traceback" not in err
        if status == 2:
            assert err.count("\n") == 1 and len(err) < 4000, err
            assert not out.exists()
            assert [p.name for p in Path(folder.name).iterdir()] == ["core.toml"]  # nothing half-written
        else:
            manifest = json.loads((out / "manifest.json").read_text())
            assert (out / manifest["files"]["rtl"][0]).is_file()


def accepted_configs(count: int, seed: int) -> list[dict[str, Any]]:
    """``count`` configs drawn from the valid values with a fixed seed, each one generate accepts."""
    rng = random.Random(seed)
    found: list[dict[str, Any]] = []
    while len(found) < count:
        function = rng.choice(FUNCTIONS)
        # Small widths always: a short simulation then covers a good share of the inputs.
        config: dict[str, Any] = {"name": f"fuzz_core{len(found)}", "function": function, "data_width": rng.randint(6, 10)}
        if function in ANGLE_FUNCTIONS:
            config["angle_width"] = rng.randint(6, 10)
        # The FuseSoC name changes no RTL, and the NCO's target applies to none of these functions:
        # left out, so the seed draws the cores it always drew.
        others = [
            f for f in FIELDS
            if f not in ("name", "function", "angle_width", "data_width", "vlnv_vendor", "vlnv_library", "sfdr_dbc",
                         "snr_db")
        ]  # fmt: skip
        for field in rng.sample(others, rng.randint(0, 5)):
            config[field] = rng.choice(VALID[field])
        status, err, out, folder = run_generate(toml_text(config).encode())
        folder.cleanup()
        if status == 0:
            found.append(config)
    return found


@pytest.mark.sim
def test_accepted_configs_lint_and_simulate(tmp_path: Path) -> None:
    """Four accepted cores (seed 4: four functions, both architectures, a tag): verilator -Wall
    and Icarus -g2005 -Wall find nothing, and a short run passes on both simulators."""
    require_simulator("icarus")
    require_simulator("verilator")
    verilator = find_simulator("verilator")
    problems = []
    for config in accepted_configs(4, seed=4):
        text = toml_text(config)
        project = tmp_path / config["name"]
        (tmp_path / f"{config['name']}.toml").write_text(text)
        assert main(["generate", str(tmp_path / f"{config['name']}.toml"), "-o", str(project)]) == 0
        rtl = project / "rtl" / f"{config['name']}.v"
        with simulator_env(verilator):
            lint = subprocess.run([str(verilator.executable), "--lint-only", "-Wall", str(rtl)], capture_output=True, text=True)
        if lint.returncode != 0 or "%Warning" in lint.stderr:
            problems.append(f"{text}verilator lint:\n{lint.stderr[:600]}")
        icarus = subprocess.run(
            ["iverilog", "-g2005", "-Wall", "-o", str(tmp_path / "a.out"), str(rtl)], capture_output=True, text=True
        )
        if icarus.returncode != 0 or icarus.stderr.strip():
            problems.append(f"{text}iverilog:\n{icarus.stderr[:600]}")
        for simulator in ("icarus", "verilator"):
            report = run_sim(project, simulator=simulator, samples=200, seed=4, mode="per-clock")
            if not report.passed:
                problems.append(f"{text}{simulator}:\n{report.table()}")
    assert not problems, "\n\n".join(problems)
