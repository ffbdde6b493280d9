"""What a new user meets first: the demo, the README's use section, the report's times."""

from __future__ import annotations

from pathlib import Path

import pytest

from benchgen.cli import build_parser, main
from benchgen.errors import BenchgenError
from benchgen.sim import SimReport

ROOT = Path(__file__).resolve().parent.parent


def test_a_fast_build_is_not_reported_as_zero_seconds() -> None:
    """Icarus compiles a core in tens of milliseconds; "0.0 s" read as if no build had run."""
    report = SimReport(simulator="icarus", simulator_version="11.0", toplevel="t", seed=1,
                       build_seconds=0.021, sim_seconds=8.71)
    line = next(x for x in report.table().splitlines() if "build / sim time" in x)
    assert "21 ms / 8.7 s" in line
    assert "0.0 s" not in line


def test_demo_says_where_it_writes_before_writing(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                                  capsys: pytest.CaptureFixture[str]) -> None:
    """The first thing the demo prints is the full path of the folder it is about to create."""
    import benchgen.project

    monkeypatch.chdir(tmp_path)
    seen: list[str] = []

    class Stop(BenchgenError):
        exit_status = 2

    def stand_in(config: object, out: object, **kwargs: object) -> None:
        seen.append(capsys.readouterr().out)
        assert not (tmp_path / "benchgen_demo").exists()
        raise Stop("stopped before writing")

    monkeypatch.setattr(benchgen.project, "generate_project", stand_in)
    assert main(["demo"]) == 2
    assert seen, "generate_project was not reached"
    first = seen[0].splitlines()[0]
    assert str(tmp_path / "benchgen_demo") in first
    assert "-o" in first


def _use_section() -> str:
    text = (ROOT / "README.md").read_text()
    return text.split("## Use", 1)[1].split("\n## ", 1)[0]


def test_readme_use_section_shows_every_subcommand() -> None:
    parser = build_parser()
    sub = next(a for a in parser._actions if a.dest == "command")
    commands = sorted(sub.choices)  # type: ignore[arg-type]
    use = _use_section()
    missing = [c for c in commands if f"benchgen {c}" not in use]
    assert not missing, f"README's Use section shows no example of: {missing}"


def _demo_block() -> str:
    text = (ROOT / "README.md").read_text()
    after = text.split("`benchgen demo --seed 1`, run in `/home/you`, printed this", 1)[1]
    lines = after.split("\n\n", 1)[1].split("\n")
    block = []
    for line in lines:
        if line and not line.startswith("    "):
            break
        block.append(line[4:])
    return "\n".join(block).strip("\n")


def _masked(text: str) -> str:
    """What may differ between runs and machines: the wall times and the simulator's version."""
    import re

    text = re.sub(r"(build / sim time\s+).*", r"\1TIMES", text)
    return re.sub(r"(simulator\s+verilator )\S+", r"\1VERSION", text)


@pytest.mark.sim
def test_readme_shows_what_the_demo_prints(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                                           capsys: pytest.CaptureFixture[str]) -> None:
    from tests.conftest import require_simulator

    require_simulator("verilator")
    monkeypatch.chdir(tmp_path)
    assert main(["demo", "--seed", "1"]) == 0
    printed = capsys.readouterr().out.replace(str(tmp_path), "/home/you").strip("\n")
    assert _masked(printed) == _masked(_demo_block())
