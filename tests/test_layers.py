"""The structure holds: imports point one way through the layers, and each function's name is a
fact of its own module only (docs/architecture.md draws the layers)."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from benchgen.functions import FUNCTIONS

ROOT = Path(__file__).resolve().parent.parent
PACKAGE = ROOT / "benchgen"

# Bottom to top. A module may import from its own layer's modules or any layer below, never above;
# benchgen.bench.* and benchgen.functions.* count as one module each.
LAYERS: list[list[str]] = [
    ["errors", "spec"],
    ["algorithm", "reference", "simulators", "lfsr"],
    ["model", "netlist", "spectrum"],
    ["hwlib", "verilog", "vhdl", "cprinter"],
    ["functions", "nco"],
    ["config", "nco_theory"],
    ["design", "nco_sizing"],
    ["hardware"],
    ["rtl"],
    ["harness", "synth", "fusesoc", "waves", "cmodel"],
    ["project", "api"],
    ["bench"],
    ["sim"],
    ["sweep_records", "sweep_config", "sweep_analysis"],
    ["sweep"],
    ["report_plots"],
    ["report"],
    ["sim_report"],
    ["sweep_cli"],
    ["cli"],
]
LEVEL = {name: k for k, layer in enumerate(LAYERS) for name in layer}


def _unit(module: str) -> str | None:
    """The layer unit of a dotted benchgen module name (None: not benchgen's)."""
    parts = module.split(".")
    if parts[0] != "benchgen":
        return None
    if len(parts) == 1:
        return "__init__"
    return parts[1]


def _imports(path: Path) -> list[tuple[str, int]]:
    """Every benchgen module a file imports (at any depth: lazy imports count), with its line."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    here = ".".join(path.relative_to(ROOT).with_suffix("").parts)
    out = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out += [(a.name, node.lineno) for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = here.split(".")[: -node.level]
                name = ".".join(base + ([node.module] if node.module else []))
            else:
                name = node.module or ""
            out.append((name, node.lineno))
            # from benchgen import model: the imported names that are modules
            if name == "benchgen":
                out += [
                    (f"benchgen.{a.name}", node.lineno)
                    for a in node.names
                    if (PACKAGE / f"{a.name}.py").is_file() or (PACKAGE / a.name).is_dir()
                ]
    return out


def _sources() -> list[Path]:
    return sorted(p for p in PACKAGE.rglob("*.py"))


def test_every_module_has_a_layer() -> None:
    units = {_unit(".".join(p.relative_to(ROOT).with_suffix("").parts)) for p in _sources()}
    assert units - {"__init__"} <= set(LEVEL), f"give these a layer: {sorted(units - set(LEVEL) - {'__init__'})}"


def test_imports_point_down_the_layers() -> None:
    wrong = []
    for path in _sources():
        me = _unit(".".join(path.relative_to(ROOT).with_suffix("").parts))
        if me == "__init__":
            continue
        for name, line in _imports(path):
            target = _unit(name)
            if target is None or target == me or target == "__init__":
                continue
            if LEVEL[target] > LEVEL[me]:
                wrong.append(f"{path.relative_to(ROOT)}:{line} ({me}, layer {LEVEL[me]}) imports {name} (layer {LEVEL[target]})")
    assert not wrong, "imports that run up the layers:\n" + "\n".join(wrong)


def test_the_layer_test_sees_an_upward_import(tmp_path: Path) -> None:
    """The check can fail: a model module that imported the CLI would be reported."""
    bad = tmp_path / "benchgen" / "model.py"
    bad.parent.mkdir()
    bad.write_text("def f():\n    from benchgen.cli import main\n    return main\n")
    names = [n for n, _ in _imports_from(bad, tmp_path)]
    assert "benchgen.cli" in names and LEVEL["cli"] > LEVEL["model"]


def _imports_from(path: Path, root: Path) -> list[tuple[str, int]]:
    global ROOT
    saved, ROOT = ROOT, root
    try:
        return _imports(path)
    finally:
        ROOT = saved


def _string_constants(path: Path) -> list[tuple[str, int]]:
    """String literals of a file, docstrings left out (they describe; they decide nothing)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    docstrings = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Module | ast.ClassDef | ast.FunctionDef | ast.AsyncFunctionDef) and node.body:
            first = node.body[0]
            if isinstance(first, ast.Expr) and isinstance(first.value, ast.Constant) and isinstance(first.value.value, str):
                docstrings.add(id(first.value))
    return [
        (node.value, node.lineno)
        for node in ast.walk(tree)
        if isinstance(node, ast.Constant) and isinstance(node.value, str) and id(node) not in docstrings
    ]


@pytest.mark.parametrize("function", [f.name for f in FUNCTIONS])
def test_a_function_name_is_a_literal_only_in_its_own_module(function: str) -> None:
    """No code decides anything by a function's name except the function's own module (the
    registry lists the modules, not names)."""
    own = PACKAGE / "functions" / f"{function}.py"
    found = [
        f"{path.relative_to(ROOT)}:{line}"
        for path in _sources()
        if path != own
        for text, line in _string_constants(path)
        if text == function
    ]
    assert not found, f'"{function}" appears as a literal outside its module: {found}'


@pytest.mark.parametrize("template", ["module.v.j2", "module.vhd.j2"])
def test_the_core_templates_only_lay_out_printed_text(template: str) -> None:
    """The core's templates (Verilog and VHDL) hold no test of a function and no arithmetic:
    they print the parts Python made (header, ports, constants, body) and nothing else."""
    text = (ROOT / "rtl_templates" / template).read_text()
    statements = [s.strip() for s in text.split("{%")[1:]]
    assert statements and all(s.split()[0] in ("for", "endfor") for s in statements)
    for expr in (s.split("}}")[0] for s in text.split("{{")[1:]):
        assert not any(op in expr for op in ("+", "-", "*", "/", "function", "dp.")), expr
