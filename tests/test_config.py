"""Config validation: every bad input exits with status 2, one clear message, and no files."""

from __future__ import annotations

from pathlib import Path

import pytest

from benchgen.cli import main
from benchgen.config import parse_config
from benchgen.errors import ConfigError

GOOD = {"name": "nco_core", "function": "sincos", "angle_width": 12, "data_width": 12}


def run_generate(config: Path, out: Path, capsys: pytest.CaptureFixture[str]) -> tuple[int, str]:
    status = main(["generate", str(config), "-o", str(out)])
    captured = capsys.readouterr()
    return status, captured.err


# (values to change, field named, words the message must contain)
BAD_CASES = [
    ({"data_width": 0}, "data_width", ["0", "3 to 64"]),
    ({"data_width": 65}, "data_width", ["65", "3 to 64"]),
    ({"angle_width": 0}, "angle_width", ["0", "3 to 64"]),
    ({"angle_width": 65}, "angle_width", ["65", "3 to 64"]),
    ({"iterations": 40, "guard_bits": 2}, "iterations", ["40", "internal width", "15"]),
    ({"name": "module"}, "name", ["'module'", "reserved word"]),
    ({"name": "logic"}, "name", ["'logic'", "reserved word"]),
    ({"name": "3phase"}, "name", ["'3phase'", "identifier", "core_3phase"]),
    ({"name": "nco-core"}, "name", ["'nco-core'", "nco_core"]),
    ({"data_wdith": 16}, "data_wdith", ["not a known field", "did you mean 'data_width'"]),
    ({"rounding": "half_evne"}, "rounding", ["'half_evne'", 'rounding = "half_even"']),
    ({"data_width": "16"}, "data_width", ["'16'", "whole number", "str"]),
    ({"data_width": 16.5}, "data_width", ["16.5", "whole number"]),
    ({"iterations": "many"}, "iterations", ["'many'", '"auto"']),
    ({"tag_width": -1}, "tag_width", ["-1", "0 to 64"]),
    ({"architecture": "systolic"}, "architecture", ["'systolic'", "pipelined", "iterative"]),
    ({"function": "tan"}, "function", ["'tan'", "sincos"]),
    ({"pipeline_depth": 30, "iterations": 16}, "pipeline_depth", ["30", "at most 16"]),
    ({"architecture": "iterative", "pipeline_depth": 3}, "pipeline_depth", ['"pipelined"']),
    ({"iterations_per_cycle": 2}, "iterations_per_cycle", ['"iterative"']),
    ({"max_error_lsb": 0.1}, "max_error_lsb", ["0.1", "0.5"]),
    ({"function": "div", "angle_width": 12}, "angle_width", ['"div"', "no angle", "remove angle_width"]),
    ({"angle_unit": "degrees"}, "angle_unit", ["'degrees'", '"turns"', '"radians"']),
    ({"angle_unit": "radians", "angle_width": 5}, "angle_width", ["5", "at least 6"]),
    ({"iterations": 6}, "iterations", ["6", "max_error_lsb", "LSB"]),
    ({"rounding": "truncate"}, "max_error_lsb", ["1.0", "LSB"]),
]


@pytest.mark.parametrize(("change", "field", "words"), BAD_CASES, ids=[c[1] + "-" + str(i) for i, c in enumerate(BAD_CASES)])
def test_bad_value_exits_2_with_message_and_no_files(
    change: dict[str, object], field: str, words: list[str], config_file, tmp_path: Path, capsys
) -> None:
    config = config_file(**{**GOOD, **change})
    out = tmp_path / "project"
    status, err = run_generate(config, out, capsys)
    assert status == 2
    assert f"field '{field}'" in err
    assert "Fix:" in err
    for word in words:
        assert word in err, f"{word!r} missing from: {err}"
    assert str(config) in err  # the message names the file
    assert "Traceback" not in err
    assert err.count("\n") == 1  # one message, one line
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == [config.name]  # no staging left over


def test_missing_field(config_file, tmp_path: Path, capsys) -> None:
    config = config_file(function="sincos")
    status, err = run_generate(config, tmp_path / "p", capsys)
    assert status == 2 and "field 'name'" in err and "add a line" in err
    assert not (tmp_path / "p").exists()


def test_missing_file(tmp_path: Path, capsys) -> None:
    status, err = run_generate(tmp_path / "nope.toml", tmp_path / "p", capsys)
    assert status == 2
    assert "nope.toml" in err and "does not exist" in err and "Fix:" in err
    assert not (tmp_path / "p").exists()


def test_not_toml(tmp_path: Path, capsys) -> None:
    bad = tmp_path / "bad.toml"
    bad.write_text('name = "x\nfunction = sincos\n')
    status, err = run_generate(bad, tmp_path / "p", capsys)
    assert status == 2 and "not valid TOML" in err and "line" in err
    assert not (tmp_path / "p").exists()


def test_refuses_foreign_output_folder(config_file, tmp_path: Path, capsys) -> None:
    out = tmp_path / "mine"
    out.mkdir()
    (out / "notes.txt").write_text("keep me")
    status, err = run_generate(config_file(**GOOD), out, capsys)
    assert status == 2 and "not a benchgen project" in err
    assert [p.name for p in out.iterdir()] == ["notes.txt"]


def test_good_config_defaults() -> None:
    spec = parse_config({"name": "a", "function": "sincos"})
    assert (spec.architecture, spec.angle_width, spec.data_width, spec.rounding) == ("pipelined", 16, 16, "half_even")
    assert spec.iterations is None and spec.guard_bits is None and spec.pipeline_depth is None


def test_error_object_fields() -> None:
    with pytest.raises(ConfigError) as info:
        parse_config({**GOOD, "data_width": 65})
    assert (info.value.field, info.value.value) == ("data_width", 65)
    assert "data_width = 64" in info.value.fix


# What an engineer writes, and what the hint must offer: by meaning where a trade name is known
# (spelling alone sends "atan" to atanh and "convergent" to truncate).
MEANT = [
    ("function", "atan", "atan2"),
    ("function", "arctan", "atan2"),
    ("function", "hypot", "atan2"),
    ("function", "magnitude", "atan2"),
    ("function", "sin", "sincos"),
    ("function", "Cosine", "sincos"),
    ("function", "log", "ln"),
    ("function", "divide", "div"),
    ("function", "multiply", "mul"),
    ("rounding", "convergent", "half_even"),
    ("rounding", "round_half_even", "half_even"),
    ("rounding", "RNE", "half_even"),
    ("rounding", "floor", "truncate"),
    ("rounding", "Half-Even", "half_even"),
    ("architecture", "pipeline", "pipelined"),
    ("architecture", "sequential", "iterative"),
]


@pytest.mark.parametrize(("field", "written", "meant"), MEANT)
def test_did_you_mean_ranks_by_meaning(field: str, written: str, meant: str) -> None:
    base = {**GOOD, "max_error_lsb": 1.5}
    if field == "function" and meant not in ("sincos", "atan2"):
        base.pop("angle_width")
    with pytest.raises(ConfigError) as refused:
        parse_config({**base, field: written})
    assert refused.value.field == field
    assert f'use {field} = "{meant}"' in str(refused.value)
    assert refused.value.suggestion == {field: meant}
    parse_config({**base, **refused.value.suggestion})  # the fix offered is one the tool accepts


def test_every_synonym_points_at_a_value_its_field_accepts() -> None:
    """The trade-name table (functions' own ``synonyms`` included) offers only accepted values,
    and never shadows a real one."""
    from benchgen.config import ARCHITECTURES, FUNCTIONS, ROUNDING_MODES, SYNONYMS
    from benchgen.spec import NCO_MODES

    choices = {"function": FUNCTIONS, "rounding": ROUNDING_MODES, "architecture": ARCHITECTURES, "nco_mode": NCO_MODES}
    assert set(SYNONYMS) == set(choices)
    for field, table in SYNONYMS.items():
        assert table and set(table.values()) <= set(choices[field]), field
        assert not set(table) & set(choices[field]), field
