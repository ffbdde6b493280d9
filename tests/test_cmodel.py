"""The bit-true C model (benchgen.cmodel, printed by benchgen.cprinter) against the numpy model.

Every case is compiled with the system C compiler under ``-std=c99 -Wall -Wextra -pedantic
-Werror`` into one shared library, called through ctypes, and compared bit for bit with the
numpy model (benchgen.functions.evaluate): on every input where the input space has at most
2**20 codes, else on 10**6 seeded random inputs plus the corners and the directed worst cases.
Cores wider than the numpy model's int64 path (data wider than 40 bits: the model runs on
Python integers, about 100 times slower) are compared on 5,000 random inputs plus the corners
and directed cases, which is what keeps this file to seconds. Without a compiler the tests skip
with the reason; under CI=true they fail.
"""

from __future__ import annotations

import ctypes
import re
import shutil
import subprocess
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt
import pytest

from benchgen.algorithm import make_timing
from benchgen.cmodel import c_model_files, model_function_name, modelled
from benchgen.config import parse_config
from benchgen.cprinter import c_type
from benchgen.design import Design, Proof, build_design
from benchgen.functions import (
    FUNCTIONS,
    bench_corners,
    directed_inputs,
    enumerate_inputs,
    evaluate,
    front_stages,
    input_ports,
    input_space_bits,
    int64_model,
    join_inputs,
    make_datapath,
    output_ports,
    random_inputs,
)
from benchgen.project import render_project
from benchgen.reference import ErrorStats
from tests.conftest import IN_CI

STRICT = ["-std=c99", "-Wall", "-Wextra", "-pedantic", "-Werror"]
EXHAUSTIVE_BITS = 20
RANDOM_SAMPLES = 1_000_000
WIDE_SAMPLES = 5_000
SEED = 1313


def c_compiler() -> str:
    """The system C compiler; skips the test with the reason when there is none (fails in CI)."""
    for name in ("cc", "gcc", "clang"):
        path = shutil.which(name)
        if path:
            return path
    if IN_CI:
        pytest.fail("CI needs a C compiler (cc, gcc or clang on PATH) for the C model tests")
    pytest.skip("no C compiler (cc, gcc or clang) on PATH: the C model is not compiled here")


def quick_design(values: dict[str, Any], iterations: int, guard_bits: int) -> Design:
    """A design at a given size without its accuracy proof (the C model does not read it; the
    proof of a 64-bit core takes minutes)."""
    spec = parse_config(values)
    dp = make_datapath(spec, iterations, guard_bits)
    return Design(
        spec=spec,
        datapath=dp,
        timing=make_timing(spec, iterations, front_stages(spec, dp)),
        accuracy=ErrorStats(samples=0, max_error_lsb=0.0, rms_error_lsb=0.0, bias_lsb=0.0),
        proof=Proof("sampled", 0),
        auto_fields=(),
    )


SMALL = {
    "sincos": {"data_width": 8, "angle_width": 8},
    "rotate": {"data_width": 5, "angle_width": 5},
    "atan2": {"data_width": 7, "angle_width": 7},
    "mul": {"data_width": 7},
    "div": {"data_width": 7},
    "sinhcosh": {"data_width": 9},
    "exp": {"data_width": 9},
    "atanh": {"data_width": 9},
    "ln": {"data_width": 9},
    "sqrt": {"data_width": 9},
    # an NCO's C model is the sincos core behind its accumulator (benchgen.cmodel.modelled)
    "nco": {"data_width": 8, "angle_width": 8, "acc_width": 12, "dither_width": 2},
}
VARIANTS = {
    "sincos": [{"gain": "raw"}, {"angle_unit": "radians"}],
    "rotate": [{"gain": "raw", "angle_unit": "radians", "angle_width": 6}],
    "atan2": [{"prenormalise": False}, {"gain": "raw", "angle_unit": "radians"}],
    "sinhcosh": [{"gain": "raw"}],
    "exp": [{"gain": "raw"}],
    "sqrt": [{"gain": "raw"}],
}
# Larger cores: exhaustive up to 2**20 codes, 10**6 random beyond.
LARGE: list[tuple[str, dict[str, Any], int, int]] = [
    ("sincos", {"data_width": 16, "angle_width": 16}, 18, 5),
    ("atan2", {"data_width": 12, "angle_width": 14}, 16, 5),
    ("mul", {"data_width": 16}, 18, 4),
    ("div", {"data_width": 16, "architecture": "iterative", "iterations_per_cycle": 4}, 18, 4),
    ("ln", {"data_width": 20}, 22, 5),
    ("exp", {"data_width": 24, "rounding": "truncate"}, 26, 5),
    ("sqrt", {"data_width": 24}, 26, 5),
]
# Internal widths above 64 bits: the multi-limb path (a 64-bit sqrt's constant product is 139 bits).
WIDE: list[tuple[str, dict[str, Any], int, int]] = [
    ("sincos", {"data_width": 64, "angle_width": 64}, 62, 6),
    ("atan2", {"data_width": 63, "angle_width": 64}, 62, 6),
    ("mul", {"data_width": 63, "rounding": "half_up"}, 62, 6),
    ("div", {"data_width": 63, "architecture": "iterative", "iterations_per_cycle": 7}, 62, 6),
    ("exp", {"data_width": 60}, 62, 6),
    ("ln", {"data_width": 64, "rounding": "truncate"}, 62, 6),
    ("sqrt", {"data_width": 64}, 62, 6),
    ("sqrt", {"data_width": 64, "gain": "raw", "architecture": "iterative", "iterations_per_cycle": 62}, 62, 6),
]


@dataclass
class Case:
    """One core to compile and compare."""

    label: str
    design: Design
    function: str = ""


def _cases() -> list[Case]:
    out: list[Case] = []

    def add(label: str, design: Design) -> None:
        # the design the C model prints: an NCO's is the core behind its accumulator
        out.append(Case(label, modelled(design)[0], design.spec.function))

    k = 0
    for fn in FUNCTIONS:
        base = {"function": fn.name, **SMALL[fn.name], "max_error_lsb": 3.0}
        for rounding in ("half_even", "half_up", "truncate"):
            k += 1
            add(f"{fn.name}-{rounding}", build_design(parse_config({"name": f"m{k}", **base, "rounding": rounding})))
        for variant in VARIANTS.get(fn.name, []):
            k += 1
            label = "-".join([fn.name, *(f"{a}={b}" for a, b in variant.items())])
            add(label, build_design(parse_config({"name": f"m{k}", **base, **variant})))
        # Iterative: several clocks per sample (printed from the pipelined twin), and all in
        # one clock (printed from its own description); a pipeline of two stages.
        for arch in (
            {"architecture": "iterative", "iterations_per_cycle": 3},
            {"architecture": "iterative", "rounding": "truncate"},
            {"pipeline_depth": 2, "rounding": "half_up"},
        ):
            k += 1
            label = "-".join([fn.name, *(f"{a}={b}" for a, b in arch.items())])
            design = build_design(parse_config({"name": f"m{k}", **base, **arch}))
            if arch.get("architecture") == "iterative" and "iterations_per_cycle" not in arch:
                # every iteration in one clock
                design = quick_design(
                    {"name": f"m{k}", **base, **arch, "iterations_per_cycle": design.datapath.iterations},
                    design.datapath.iterations, design.datapath.guard_bits,
                )
            add(label, design)
    for fn_name, values, n, g in LARGE + WIDE:
        k += 1
        label = "-".join([fn_name, *(f"{a}={b}" for a, b in values.items())])
        add(label, quick_design({"name": f"m{k}", "function": fn_name, **values, "max_error_lsb": 3.0}, n, g))
    return out


CASES = _cases()


def _wrapper(design: Design) -> str:
    """A C loop over arrays (64-bit per code) around the model's one-sample function."""
    dp = design.datapath
    ins, outs = input_ports(dp), output_ports(dp)

    def t(p: Any) -> str:
        return "int64_t" if p.signed else "uint64_t"

    args = [f"const {t(p)} *{p.name}" for p in ins] + [f"{t(p)} *{p.name}" for p in outs]
    call = [f"({c_type(p.width, p.signed)}){p.name}[i]" for p in ins] + [f"&o_{p.name}" for p in outs]
    lines = [
        f'#include "{design.spec.name}.h"',
        f"void run_{design.spec.name}(long n, {', '.join(args)});",
        f"void run_{design.spec.name}(long n, {', '.join(args)})",
        "{",
        "    long i;",
        "    for (i = 0; i < n; i++) {",
        *[f"        {c_type(p.width, p.signed)} o_{p.name};" for p in outs],
        f"        {model_function_name(design)}({', '.join(call)});",
        *[f"        {p.name}[i] = o_{p.name};" for p in outs],
        "    }",
        "}",
    ]
    return "\n".join(lines) + "\n"


def _write(design: Design, folder: Path, *, config_text: str = "") -> list[Path]:
    sources = []
    for rel, text in c_model_files(design, config_text=config_text).items():
        path = folder / Path(rel).name
        path.write_text(text)
        if path.suffix == ".c":
            sources.append(path)
    wrap = folder / f"run_{design.spec.name}.c"
    wrap.write_text(_wrapper(design))
    return [*sources, wrap]


def _compile(sources: list[Path], out: Path, *, extra: list[str] | None = None) -> None:
    cmd = [c_compiler(), *STRICT, "-O0", "-shared", "-fPIC", *(extra or []), "-o", str(out), *map(str, sources)]
    done = subprocess.run(cmd, capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stderr[-4000:]


@pytest.fixture(scope="module")
def library(tmp_path_factory: pytest.TempPathFactory) -> ctypes.CDLL:
    """Every case's model in one shared library, compiled once (one compiler run, at -O0: compiling is the slow part)."""
    c_compiler()
    folder = tmp_path_factory.mktemp("cmodel")
    sources: list[Path] = []
    for case in CASES:
        sources += _write(case.design, folder)
    _compile(sources, folder / "models.so")
    return ctypes.CDLL(str(folder / "models.so"))


def _codes(values: Any, signed: bool) -> npt.NDArray[Any]:
    """Codes as int64 (signed ports) or uint64 (unsigned ports, where the low 64 bits count)."""
    arr = np.asarray(values)
    if signed:
        return np.array([int(v) for v in arr], dtype=np.int64) if arr.dtype == object else arr.astype(np.int64)
    if arr.dtype == object:
        return np.array([int(v) & 0xFFFF_FFFF_FFFF_FFFF for v in arr], dtype=np.uint64)
    return arr.astype(np.int64).view(np.uint64)


def _inputs(design: Design) -> dict[str, npt.NDArray[Any]]:
    dp = design.datapath
    bits = input_space_bits(dp)
    if bits <= EXHAUSTIVE_BITS:
        return enumerate_inputs(dp, 0, 1 << bits)
    count = RANDOM_SAMPLES if int64_model(dp) else WIDE_SAMPLES
    return join_inputs(
        random_inputs(dp, np.random.default_rng(SEED), count), bench_corners(dp), directed_inputs(dp, seed=SEED, per_octave=8)
    )


def run_c(lib: ctypes.CDLL, design: Design, inputs: dict[str, Any]) -> dict[str, npt.NDArray[Any]]:
    """The C model's outputs for the inputs, by output port name."""
    dp = design.datapath
    ins = [np.ascontiguousarray(_codes(inputs[p.name], p.signed)) for p in input_ports(dp)]
    n = len(ins[0])
    outs = {p.name: np.zeros(n, dtype=np.int64 if p.signed else np.uint64) for p in output_ports(dp)}
    ptrs = [ctypes.c_void_p(a.ctypes.data) for a in [*ins, *outs.values()]]
    getattr(lib, f"run_{design.spec.name}")(ctypes.c_long(n), *ptrs)
    return outs


def mismatches(lib: ctypes.CDLL, design: Design, inputs: dict[str, Any]) -> dict[str, int]:
    """Samples where the C model and the numpy model differ, per output port (none: empty)."""
    got = run_c(lib, design, inputs)
    want = evaluate(design.datapath, inputs)
    bad = {}
    for p in output_ports(design.datapath):
        diff = int(np.count_nonzero(_codes(want[p.name], p.signed) != got[p.name]))
        if diff:
            bad[p.name] = diff
    return bad


@pytest.mark.parametrize("case", CASES, ids=[c.label for c in CASES])
def test_c_model_equals_the_numpy_model(library: ctypes.CDLL, case: Case) -> None:
    inputs = _inputs(case.design)
    assert len(next(iter(inputs.values()))) >= min(1 << input_space_bits(case.design.datapath), WIDE_SAMPLES)
    assert mismatches(library, case.design, inputs) == {}


def test_cases_cover_every_function_and_the_wide_path() -> None:
    """The matrix reaches what it claims: every function, both architectures (and the twin),
    every rounding, and signals wider than 64 bits (the multi-limb helpers are printed)."""
    assert {c.function for c in CASES} == {f.name for f in FUNCTIONS}
    assert {c.design.spec.rounding for c in CASES} == {"half_even", "half_up", "truncate"}
    texts = {c.label: "".join(c_model_files(c.design).values()) for c in CASES}
    twins = [label for label, text in texts.items() if "printed from the pipelined core" in text]
    assert twins and all("iterations_per_cycle" in label for label in twins)
    one_clock = [c for c in CASES if c.design.spec.architecture == "iterative" and len(c.design.timing.stages) == 1]
    assert one_clock and not any("printed from the pipelined core" in texts[c.label] for c in one_clock)
    wide = [label for label, text in texts.items() if "bgw_add(" in text]
    assert any(label.startswith("sqrt") for label in wide) and any(label.startswith("sincos") for label in wide)
    assert "bgw_mul(" in texts[next(c.label for c in CASES if c.label.startswith("sqrt-data_width=64"))]


def test_a_changed_constant_in_the_c_is_caught(tmp_path: Path) -> None:
    """The comparison can fail: one angle constant off by one LSB in the printed C shows."""
    design = next(c.design for c in CASES if c.label == "sincos-half_even")
    sources = _write(design, tmp_path)
    source = sources[0]
    text = source.read_text()
    pattern = re.compile(r"static const uint64_t ATAN_3 = UINT64_C\((0x[0-9a-f]+|\d+)\);")
    found = pattern.search(text)
    assert found, "no ATAN_3 in the C model"
    source.write_text(pattern.sub(f"static const uint64_t ATAN_3 = UINT64_C({int(found.group(1), 0) + 1});", text))
    _compile(sources, tmp_path / "bad.so")
    lib = ctypes.CDLL(str(tmp_path / "bad.so"))
    assert mismatches(lib, design, _inputs(design)) != {}


def test_comment_text_cannot_break_the_c(tmp_path: Path) -> None:
    """Config lines land in the C header comment: a comment end, a comment start and a trigraph
    that would splice lines are made harmless, and the file still compiles under -Werror."""
    design = next(c.design for c in CASES if c.label == "ln-half_even")
    config = 'name = "m"  # */ int oops; /* ??/\n# ??= ??( trailing ??/\n'
    sources = _write(design, tmp_path, config_text=config)
    header = sources[0].with_suffix(".h").read_text()
    assert "*/ int oops" not in header and "??" not in header and "int oops;" in header
    _compile(sources, tmp_path / "m.so")
    lib = ctypes.CDLL(str(tmp_path / "m.so"))
    assert mismatches(lib, design, _inputs(design)) == {}


def test_header_is_c_plus_plus_clean(tmp_path: Path) -> None:
    """The header declares the function with C linkage for a C++ test bench."""
    cxx = shutil.which("c++") or shutil.which("g++") or shutil.which("clang++")
    if cxx is None:
        pytest.skip("no C++ compiler on PATH")
    design = next(c.design for c in CASES if c.label == "atan2-half_even")
    sources = _write(design, tmp_path)
    main = tmp_path / "main.cpp"
    ins, outs = input_ports(design.datapath), output_ports(design.datapath)
    main.write_text(
        f'#include "{design.spec.name}.h"\n'
        "int main() {\n"
        + "".join(f"    {c_type(p.width, p.signed)} {p.name} = 0;\n" for p in outs)
        + f"    {model_function_name(design)}({', '.join(['1'] * len(ins) + ['&' + p.name for p in outs])});\n"
        "    return 0;\n}\n"
    )
    obj = tmp_path / "model.o"
    cc = subprocess.run([c_compiler(), *STRICT, "-c", "-o", str(obj), str(sources[0])], capture_output=True, text=True)
    assert cc.returncode == 0, cc.stderr
    cpp = subprocess.run(
        [cxx, "-std=c++11", "-Wall", "-Wextra", "-pedantic", "-Werror", "-o", str(tmp_path / "main"), str(main), str(obj)],
        capture_output=True, text=True,
    )
    assert cpp.returncode == 0, cpp.stderr
    assert subprocess.run([str(tmp_path / "main")], check=False).returncode == 0


def test_project_writes_and_lists_the_c_model() -> None:
    """generate writes c/NAME.h and c/NAME.c, lists them as its own, and names the function."""
    design = next(c.design for c in CASES if c.label == "mul-half_even")
    files = render_project(design, 'name = "m"\n')
    import json

    manifest = json.loads(files["manifest.json"])
    name = design.spec.name
    assert {f"c/{name}.h", f"c/{name}.c"} <= set(manifest["files"]["generated"]) <= set(files)
    assert manifest["files"]["c_model"] == {"header": f"c/{name}.h", "source": f"c/{name}.c", "function": f"{name}_model"}
    assert f"void {name}_model(" in files[f"c/{name}.h"] and f"c/{name}.h" in files["README.md"]


def test_docs_example_compiles_and_agrees(tmp_path: Path) -> None:
    """docs/c_model.md's C example, built as the page says, prints the numpy model's codes."""
    text = (Path(__file__).resolve().parent.parent / "docs" / "c_model.md").read_text()
    example = re.search(r"```c\n(.*?)```", text, re.S)
    assert example, "no C example in docs/c_model.md"
    design = quick_design({"name": "nco_core", "function": "sincos", "data_width": 16, "angle_width": 16}, 18, 5)
    _write(design, tmp_path)
    (tmp_path / "main.c").write_text(example.group(1))
    done = subprocess.run(
        [c_compiler(), *STRICT, "-O2", "-I", str(tmp_path), str(tmp_path / "main.c"), str(tmp_path / "nco_core.c"),
         "-o", str(tmp_path / "main")],
        capture_output=True, text=True,
    )
    assert done.returncode == 0, done.stderr
    printed = subprocess.run([str(tmp_path / "main")], capture_output=True, text=True, check=True).stdout.split()
    want = evaluate(design.datapath, {"in_angle": np.array([8192])})
    assert printed == [str(int(want["out_cos"][0])), str(int(want["out_sin"][0]))]


# ----------------------------------------------------------------------------- every node kind


def _node_module(width: int) -> tuple[Any, list[Any], list[Any]]:
    """A description that applies every kind of expression to two ``width``-bit values (built
    from 64-bit input ports) and outputs each result in 64-bit pieces."""
    from benchgen.cprinter import CPort
    from benchgen.netlist import Add, And, Assign, Cat, Cmp, Const, Mul, Mux, Neg, Not, Or, Rep, Shl, Slice, Sra, Xor
    from benchgen.netlist import Module as NetModule

    def zeros_above(e: Any) -> Any:
        return e if e.width == width else Cat((Const(0, width - e.width), e))

    m = NetModule(name="nodes")
    chunks = [min(64, width - lo) for lo in range(0, width, 64)]
    inputs: list[CPort] = []

    def value(tag: str) -> Any:
        parts = []
        for k, w in enumerate(chunks):
            inputs.append(CPort(f"{tag}{k}", w, False))
            parts.append(m.port(f"{tag}{k}", w, "in", vector=True))
        return m.wire(f"{tag}_all", Cat(tuple(reversed(parts))) if len(parts) > 1 else parts[0])

    a, b = value("a"), value("b")
    inputs.append(CPort("amount", 8, False))
    inputs.append(CPort("sel", 1, False))
    amount, sel = m.port("amount", 8, "in", vector=True), m.port("sel", 1, "in")
    half = max(1, width // 2)
    results = {
        "add": Add(a, b),
        "addc": Add(a, b, sel),
        "sub": Add(a, b, subtract=True),
        "neg": Neg(a),
        "mul": Mul(a, b),
        "not": Not(a),
        "and": And(a, b),
        "or": Or(a, b),
        "xor": Xor(a, b),
        "mux": Mux(sel, a, b),
        "shl": Shl(a, amount),
        "sra": Sra(a, amount),
        "top": zeros_above(Slice(a, width - 1, width - half)),
        "mid": zeros_above(Slice(a, half, half - 2)) if width >= 4 else Not(a),
        "rep": Rep(width, sel),
        "rep2": zeros_above(Rep(width // 2, Slice(b, 1, 0))) if width >= 2 else Rep(1, b),
        "const": Add(a, Const(-3, width)),
    }
    for op in ("==", "!=", "<", "<=", ">", ">="):
        for signed in (False, True):
            results[f"cmp{'s' if signed else 'u'}{len(results)}"] = zeros_above(Cmp(op, a, b, signed))
    outputs: list[CPort] = []
    for name, expr in results.items():
        sig = m.wire(f"r_{name}", expr)
        for k, w in enumerate(chunks):
            port = m.port(f"o_{name}_{k}", w, "out", vector=True)
            m.add(Assign(port, Slice(sig, 64 * k + w - 1, 64 * k)))
            outputs.append(CPort(f"o_{name}_{k}", w, False))
    return m, inputs, outputs


@pytest.mark.parametrize("width", [1, 7, 63, 64, 65, 100, 139, 192])
def test_every_node_kind_prints_as_the_evaluator_computes(width: int, tmp_path: Path) -> None:
    """The printer against netlist.evaluate on random values and the edges (0, all ones, the
    sign bit, shifts past the width), for widths on both sides of 64 and limb boundaries."""
    from benchgen.cmodel import render_c_model
    from benchgen.netlist import evaluate as run_netlist

    module, inputs, outputs = _node_module(width)
    h, c = render_c_model(module, "nodes_model", inputs, outputs, stem="nodes")
    assert ("bg_wide" in c) == (width > 64)
    (tmp_path / "nodes.h").write_text(h)
    (tmp_path / "nodes.c").write_text(c)
    args = [f"const uint64_t *{p.name}" for p in inputs] + [f"uint64_t *{p.name}" for p in outputs]
    call = [f"({c_type(p.width, False)}){p.name}[i]" for p in inputs] + [f"&o_{p.name}" for p in outputs]
    (tmp_path / "run.c").write_text(
        '#include "nodes.h"\n'
        f"void run_nodes(long n, {', '.join(args)});\n"
        f"void run_nodes(long n, {', '.join(args)})\n{{\n    long i;\n    for (i = 0; i < n; i++) {{\n"
        + "".join(f"        {c_type(p.width, False)} o_{p.name};\n" for p in outputs)
        + f"        nodes_model({', '.join(call)});\n"
        + "".join(f"        {p.name}[i] = o_{p.name};\n" for p in outputs)
        + "    }\n}\n"
    )
    _compile([tmp_path / "nodes.c", tmp_path / "run.c"], tmp_path / "nodes.so")
    lib = ctypes.CDLL(str(tmp_path / "nodes.so"))
    rng = np.random.default_rng(width)
    n = 3000
    values: dict[str, list[int]] = {}
    for p in inputs:
        top = (1 << p.width) - 1
        edges = [0, top, 1 << (p.width - 1), top >> 1, 1]
        drawn = [int(x) << 2 | int(x) & 3 for x in rng.integers(0, 1 << 62, n, dtype=np.int64)]
        # every fourth value an edge (zero, all ones, the sign bit alone, the largest positive)
        values[p.name] = [edges[k // 4 % len(edges)] if k % 4 == 0 else x & top for k, x in enumerate(drawn)]
    # Shift amounts around the width and 64, where C's own shifts would be undefined.
    spread = [0, 1, 63, 64, 65, max(0, width - 1), width, min(255, width + 1), 255]
    values["amount"] = [spread[k % len(spread)] if k % 2 else v for k, v in enumerate(values["amount"])]
    arrays = {k: np.array(v, dtype=np.uint64) for k, v in values.items()}
    outs = {p.name: np.zeros(n, dtype=np.uint64) for p in outputs}
    ptrs = [ctypes.c_void_p(arrays[p.name].ctypes.data) for p in inputs] + [ctypes.c_void_p(outs[p.name].ctypes.data) for p in outputs]
    lib.run_nodes(ctypes.c_long(n), *ptrs)
    want = run_netlist(module, {k: np.array(v, dtype=object) for k, v in values.items()})
    bad = [p.name for p in outputs if [int(x) for x in want[p.name]] != [int(x) for x in outs[p.name]]]
    assert bad == []
