"""Generated VHDL-2008: analyses with every GHDL warning on and nothing reported, elaborates for
synthesis, is byte-identical, and computes what the description computes (every node kind)."""

from __future__ import annotations

import re
import subprocess
from pathlib import Path

import numpy as np
import pytest
from conftest import require_simulator
from test_rtl import cases

from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.netlist import (
    Add,
    And,
    Cat,
    Cmp,
    Const,
    Expr,
    Module,
    Mul,
    Mux,
    Neg,
    Not,
    Or,
    Param,
    Rep,
    Shl,
    Sig,
    Slice,
    Sra,
    Xor,
    evaluate,
)
from benchgen.rtl import render_vhdl_core, render_vhdl_module
from benchgen.vhdl import RESERVED_WORDS, literal, module_parts

# Every warning GHDL 2.0's analyser has (`ghdl opts-help`; it has no -Wall): a generated file
# must pass with all of them on, as the Verilog passes verilator -Wall.
GHDL_WARNINGS = [
    f"-W{w}"
    for w in (
        "binding reserved library vital-generic delayed-checks body specs unused nested-comment directive "
        "parenthesis port port-bounds hide static others pure analyze-assert attribute useless shared "
        "runtime-error missing-xref default-binding"
    ).split()
]


def ghdl(*args: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    return subprocess.run(["ghdl", *args], capture_output=True, text=True, cwd=cwd, check=False)


@pytest.fixture(scope="module")
def rendered(tmp_path_factory: pytest.TempPathFactory) -> list[Path]:
    """The VHDL of every function, architecture, size and rounding of the Verilog lint test."""
    folder = tmp_path_factory.mktemp("vhdl")
    files = []
    for cfg in cases():
        path = folder / f"{cfg['name']}.vhd"
        path.write_text(render_vhdl_core(build_design(parse_config(cfg))))
        files.append(path)
    return files


@pytest.mark.sim
def test_ghdl_analyses_every_core_with_all_warnings_and_says_nothing(rendered: list[Path]) -> None:
    require_simulator("ghdl")
    failures = []
    for path in rendered:
        proc = ghdl("-a", "--std=08", *GHDL_WARNINGS, path.name, cwd=path.parent)
        if proc.returncode != 0 or proc.stdout.strip() or proc.stderr.strip():
            failures.append(f"{path.name}:\n{(proc.stdout + proc.stderr)[:800]}")
    assert not failures, "\n".join(failures[:5])


@pytest.mark.sim
def test_ghdl_synthesises_every_core(rendered: list[Path], tmp_path: Path) -> None:
    """`ghdl --synth` elaborates each core to a netlist: synthesizable, not only simulatable."""
    require_simulator("ghdl")
    failures = []
    # Every other file: the cases alternate the rounding innermost, so this is every function
    # and architecture once (the analysis test above reads them all).
    for path in rendered[::2]:
        if ghdl("-a", "--std=08", f"--workdir={tmp_path}", str(path), cwd=tmp_path).returncode:
            failures.append(f"{path.name}: does not analyse")
            continue
        proc = ghdl("--synth", "--std=08", f"--workdir={tmp_path}", path.stem, cwd=tmp_path)
        if proc.returncode != 0 or proc.stderr.strip():
            failures.append(f"{path.name}:\n{proc.stderr[:800]}")
        elif f"entity {path.stem} is" not in proc.stdout:
            failures.append(f"{path.name}: no netlist printed")
    assert not failures, "\n".join(failures[:5])


def test_same_config_gives_byte_identical_vhdl() -> None:
    for cfg in cases()[:12]:
        first = render_vhdl_core(build_design(parse_config(cfg)), config_text="a = 1\n")
        second = render_vhdl_core(build_design(parse_config(dict(cfg))), config_text="a = 1\n")
        assert first == second


def test_literals_are_sized_and_exact() -> None:
    assert literal(0x1193F, 19) == '19x"1193f"'
    assert literal(-1, 5) == '5x"1f"'  # two's complement, the top digit's unused bits zero
    assert literal(1, 1) == "'1'"
    assert literal(2**70 + 5, 72) == '72x"400000000000000005"'


def _declared(text: str) -> list[str]:
    """Names the VHDL declares: ports, constants, signals, functions, process labels."""
    names = re.findall(r"^\s+(\w+)\s+:\s+(?:in|out)\s", text, re.M)
    names += re.findall(r"^\s+(?:constant|signal)\s+(\w+)\s+:", text, re.M)
    names += re.findall(r"^\s+(\w+)\s+:\s+process\b", text, re.M)
    names += sorted(set(re.findall(r"^\s+function\s+(\w+)", text, re.M)))
    return names


def test_declared_names_are_distinct_without_case_and_not_reserved(rendered: list[Path]) -> None:
    """VHDL ignores case: the description's constant X_START and wire x_start (exp) would be
    one name, and exp's wire `rem` is a reserved word; the printer renames them."""
    seen_renamed = False
    for path in rendered:
        text = path.read_text()
        names = _declared(text)
        lower = [n.lower() for n in names]
        assert len(set(lower)) == len(lower), [n for n in names if lower.count(n.lower()) > 1]
        assert not set(lower) & RESERVED_WORDS
        seen_renamed |= "rem_s" in lower or "x_start_s" in lower
    assert seen_renamed  # the cases hold the clashes this test is about


def test_the_renamed_signal_is_renamed_everywhere() -> None:
    m = Module(name="clash")
    a = m.port("a", 8, "in", vector=True)
    y = m.port("y", 8, "out", vector=True)
    p = m.param("X_START", 3, 8)
    x = m.wire("x_start", Add(a, p))
    r = m.wire("rem", Xor(x, p))
    from benchgen.netlist import Assign

    m.add(Assign(y, r))
    body = "\n".join(module_parts(m)["body"])  # type: ignore[arg-type]
    assert "x_start_s <= unsigned(a) + X_START;" in body
    assert "rem_s <= x_start_s xor X_START;" in body
    assert "y <= std_logic_vector(rem_s);" in body


# ----------------------------------------------------------------------------- every node kind


def _node_module() -> Module:
    """A combinational module using every expression kind, at one bit and wider, so the
    printer's handling of each (types, widths, wrapping, signedness) is simulated."""
    m = Module(name="nodes")
    a = m.port("a", 7, "in", vector=True)
    b = m.port("b", 7, "in", vector=True)
    s = m.port("s", 3, "in", vector=True)
    c = m.port("c", 1, "in")
    t = m.port("t", 1, "in", vector=True)
    k = m.param("K", 0x45, 7, "a constant")
    outs: dict[str, Expr] = {
        "o_add": Add(a, b, c),
        "o_sub": Add(a, b, subtract=True),
        "o_addk": Add(a, Not(k), Const(1, 1)),
        "o_mul": Mul(a, b),
        "o_neg": Neg(a),
        "o_and": And(a, Not(b)),
        "o_or": Or(a, k),
        "o_xor": Xor(a, Const(0x2A, 7)),
        "o_mux": Mux(c, a, Mux(Cmp("<", a, b, signed=True), b, k)),
        "o_shl": Shl(a, s),
        "o_sra": Sra(a, s),
        "o_cat": Cat((Slice(a, 6, 4), Rep(2, c), Slice(b, 1, 0))),
        "o_rep": Rep(7, Slice(b, 3, 3)),
        "o_sext": Cat((Rep(3, Slice(a, 6, 6)), Slice(a, 6, 3))),
        "o_bits": Cat((
            Cmp("==", a, b), Cmp("!=", a, k), Cmp("<", a, b), Cmp("<=", a, b, signed=True),
            Cmp(">", a, b, signed=True), Cmp(">=", a, b), Xor(c, Slice(t, 0, 0)),
        )),
        "o_onebit": Cat((
            Add(c, t[0], Slice(a, 0, 0)), Mul(c, t[0]), Neg(c), Mux(t[0], c, Not(c)),
            Shl(t[0], Slice(s, 0, 0)), Sra(c, s), And(Or(c, t[0]), Not(Slice(a, 2, 2))),
        )),
    }
    for name, e in outs.items():
        out = m.port(name, e.width, "out", vector=True)
        w = m.wire(f"w_{name}", e)
        from benchgen.netlist import Assign

        m.add(Assign(out, w))
    flag = m.port("o_flag", 1, "out", vector=True)
    from benchgen.netlist import Assign

    m.add(Assign(flag, Cmp(">=", a, k)))
    assert isinstance(k, Param)
    return m


def _bench(module: Module, vectors: dict[str, np.ndarray], expected: dict[str, np.ndarray]) -> str:
    """A VHDL test bench with no Python in the loop: drives each vector, asserts each output."""
    ins = [p.sig for p in module.ports if p.direction == "in"]
    outs = [p.sig for p in module.ports if p.direction == "out"]
    n = len(next(iter(vectors.values())))

    def slv(sig: Sig) -> str:
        return f"std_logic_vector({sig.width - 1} downto 0)" if sig.vector or sig.width > 1 else "std_logic"

    def value(sig: Sig, v: int) -> str:
        if not (sig.vector or sig.width > 1):
            return f"'{v & 1}'"
        return '"' + format(int(v) & ((1 << sig.width) - 1), f"0{sig.width}b") + '"'

    lines = ["library ieee;", "use ieee.std_logic_1164.all;", "entity tb is", "end entity;",
             "architecture sim of tb is"]
    lines += [f"    signal {s.name} : {slv(s)};" for s in ins + outs]
    lines += ["begin", f"    dut : entity work.{module.name} port map ("]
    lines += [",\n".join(f"        {s.name} => {s.name}" for s in ins + outs), "    );",
              "    process", "    begin"]
    for i in range(n):
        lines += [f"        {s.name} <= {value(s, int(vectors[s.name][i]))};" for s in ins]
        lines.append("        wait for 1 ns;")
        for s in outs:
            lines.append(
                f"        assert {s.name} = {value(s, int(expected[s.name][i]))} "
                f'report "vector {i}: {s.name}" severity failure;'
            )
    lines += ['        report "all vectors passed";', "        wait;", "    end process;", "end architecture;"]
    return "\n".join(lines) + "\n"


@pytest.mark.sim
def test_every_node_kind_computes_what_the_description_computes(tmp_path: Path) -> None:
    """The description evaluated in numpy (netlist.evaluate, the check of every core against
    the model) and its VHDL run in GHDL agree on every output for random and corner inputs:
    widths, wrapping, signed compares and shifts, and one-bit values are printed right."""
    require_simulator("ghdl")
    module = _node_module()
    rng = np.random.default_rng(5)
    n = 300
    corners = [0, 1, 63, 64, 127]
    vectors = {
        "a": np.concatenate([np.array(corners), rng.integers(0, 128, n)]),
        "b": np.concatenate([np.array(corners[::-1]), rng.integers(0, 128, n)]),
        "s": np.concatenate([np.array([0, 1, 3, 6, 7]), rng.integers(0, 8, n)]),
        "c": np.concatenate([np.array([0, 1, 0, 1, 1]), rng.integers(0, 2, n)]),
        "t": np.concatenate([np.array([1, 0, 0, 1, 1]), rng.integers(0, 2, n)]),
    }
    expected = evaluate(module, vectors)
    (tmp_path / "nodes.vhd").write_text(render_vhdl_module(module))
    (tmp_path / "tb.vhd").write_text(_bench(module, vectors, expected))
    for f in ("nodes.vhd", "tb.vhd"):
        proc = ghdl("-a", "--std=08", *GHDL_WARNINGS, f, cwd=tmp_path)
        assert proc.returncode == 0 and not proc.stderr.strip(), proc.stderr
    proc = ghdl("--elab-run", "--std=08", "tb", "--assert-level=error", cwd=tmp_path)
    assert proc.returncode == 0, (proc.stdout + proc.stderr)[:2000]
    assert "all vectors passed" in proc.stdout + proc.stderr
