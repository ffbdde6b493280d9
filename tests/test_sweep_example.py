"""The checked-in example sweeps are current: each report is what its records give, byte for byte.

``sim_projects/sweeps/NAME/`` holds the records of a full run of ``sim_projects/sweeps/NAME.toml``
(``sweep.json``, ``model_analysis.json``, ``results/``) and the report written from them, all
made by one command (docs/sweep.md):

    benchgen sweep sim_projects/sweeps/NAME.toml -o sim_projects/sweeps/NAME --formats json,csv,md,junit

``nco_depth_width`` is a sincos core over pipeline depth and output width on both simulators,
with estimates; ``nco_phase_bits`` an NCO over phase bits and dither on Icarus (docs/nco.md).

Running it again takes minutes (simulations and place and route), so the test rebuilds the report
from the checked-in records only, which is exactly the report step of that command.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path
from typing import Any

import pytest

from benchgen.report import write_reports
from benchgen.sweep import make_tasks
from benchgen.sweep_config import expand, load_sweep
from benchgen.sweep_records import MODEL_ANALYSIS_FILE, RESULTS_DIR, SWEEP_FILE, read_model_analysis, read_result, read_sweep_file

ROOT = Path(__file__).resolve().parent.parent
EXAMPLES = sorted(p.with_suffix("") for p in (ROOT / "sim_projects" / "sweeps").glob("*.toml"))
#: The formats the documented command writes (report.html would add the plots again, embedded).
FORMATS = ("json", "csv", "md", "junit")
RECORDS = (SWEEP_FILE, MODEL_ANALYSIS_FILE, RESULTS_DIR)
#: What a run leaves in the folder that is not checked in (.gitignore): builds and the lock.
NOT_CHECKED_IN = ("work", ".benchgen.lock")


def _files(folder: Path, leave_out: tuple[str, ...]) -> dict[str, bytes]:
    return {
        p.relative_to(folder).as_posix(): p.read_bytes()
        for p in sorted(folder.rglob("*"))
        if p.is_file() and p.relative_to(folder).parts[0] not in leave_out
    }


def test_there_are_the_two_examples() -> None:
    assert [e.name for e in EXAMPLES] == ["nco_depth_width", "nco_phase_bits"]


@pytest.mark.parametrize("example", EXAMPLES, ids=[e.name for e in EXAMPLES])
def test_the_checked_in_report_is_what_its_records_give(example: Path, tmp_path: Path) -> None:
    copy = tmp_path / "example"
    copy.mkdir()
    for name in RECORDS:
        src = example / name
        if src.is_dir():
            shutil.copytree(src, copy / name)
        else:
            shutil.copyfile(src, copy / name)
    write_reports(copy, formats=FORMATS)
    made = _files(copy, RECORDS)
    checked_in = _files(example, RECORDS + NOT_CHECKED_IN)
    assert sorted(checked_in) == sorted(made), "regenerate the example with the command in docs/sweep.md"
    stale = [name for name in made if made[name] != checked_in[name]]
    assert not stale, f"these differ from what the records give: {stale}; regenerate with the command in docs/sweep.md"


def _strings(value: Any) -> list[str]:
    if isinstance(value, str):
        return [value]
    if isinstance(value, dict):
        return [s for k, v in value.items() for s in (*_strings(k), *_strings(v))]
    if isinstance(value, list):
        return [s for v in value for s in _strings(v)]
    return []


@pytest.mark.parametrize("example", EXAMPLES, ids=[e.name for e in EXAMPLES])
def test_the_checked_in_records_are_a_whole_passing_run_of_the_sweep_file(example: Path) -> None:
    """Every task of the sweep file has a valid, passing result; no record names a path of the
    machine that ran it (so the report rebuilt from them is the same anywhere)."""
    spec = load_sweep(example.with_suffix(".toml"))
    assert read_sweep_file(example)["digest"] == spec.digest(), "the sweep file changed: regenerate the example"
    assert read_model_analysis(example)["digest"] == spec.digest()
    tasks = make_tasks(spec, expand(spec, validate=False))
    results = {t.task_id: read_result(example, t.kind, t.task_id) for t in tasks}
    missing = [tid for tid, r in results.items() if r is None]
    assert not missing, f"no result for {missing}"
    assert all(r is not None and r["status"] in ("passed", "ok") for r in results.values())
    records = [example / SWEEP_FILE, example / MODEL_ANALYSIS_FILE, *sorted((example / RESULTS_DIR).rglob("*.json"))]
    absolute = [(p.name, s) for p in records for s in _strings(json.loads(p.read_text())) if s.startswith("/") or ":\\" in s]
    assert not absolute, absolute[:3]


@pytest.mark.parametrize("example", EXAMPLES, ids=[e.name for e in EXAMPLES])
def test_the_checked_in_model_analysis_is_what_the_model_gives_today(example: Path) -> None:
    """Each example keeps its model analysis byte for byte: nco_depth_width (a sincos sweep)
    shows that the tones and error grids of a sweep without an NCO are measured as they always
    were, nco_phase_bits that the NCO's words are measured the same way run after run."""
    from benchgen.sweep_analysis import analyse_models

    sweep = read_sweep_file(example)
    cores: dict[str, dict[str, Any]] = {}
    for p in sweep["points"]:
        cores.setdefault(p["core_id"], dict(p["core"]))
    made = json.dumps({"digest": sweep["digest"], **analyse_models(cores.items())}, indent=1, sort_keys=True) + "\n"
    assert made == (example / MODEL_ANALYSIS_FILE).read_text(encoding="utf-8")
