"""Reports of one core's run: the sample CSV's error columns and the one-file HTML report."""

from __future__ import annotations

import base64
import csv
import io
import json
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from benchgen.bench.scoreboard import write_csv_rows
from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.functions import evaluate, function_errors, ideal_outputs, output_ports, random_inputs
from benchgen.sim import SimReport
from benchgen.sim_report import write_html
from tests.conftest import require_simulator, write_config

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


class _Page(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.images: list[str] = []
        self.external: list[str] = []
        self.rows: list[list[str]] = []
        self._cell: list[str] | None = None

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        if tag == "img":
            self.images.append(a.get("src") or "")
        if tag in ("script", "link", "iframe") or (tag == "a" and (a.get("href") or "").startswith("http")):
            self.external.append(tag)
        if tag == "tr":
            self.rows.append([])
        if tag in ("td", "th"):
            self._cell = []

    def handle_data(self, data: str) -> None:
        if self._cell is not None:
            self._cell.append(data)

    def handle_endtag(self, tag: str) -> None:
        if tag in ("td", "th") and self._cell is not None:
            self.rows[-1].append("".join(self._cell))
            self._cell = None


def _check_images(page: _Page, count: int) -> None:
    from matplotlib.image import imread

    assert not page.external, page.external
    assert len(page.images) == count
    for src in page.images:
        assert src.startswith("data:image/png;base64,")
        png = base64.b64decode(src.split(",", 1)[1], validate=True)
        assert png.startswith(PNG_MAGIC)
        pixels = imread(io.BytesIO(png), format="png")
        assert pixels.shape[0] > 100 and pixels.shape[1] > 100
        assert pixels.std() > 0.01  # not a blank canvas


def _summary(page: _Page) -> dict[str, str]:
    return {r[0]: r[1] for r in page.rows if len(r) == 2}


def test_html_report_is_one_offline_file_with_the_numbers(tmp_path: Path) -> None:
    """Built from a report and a CSV as the bench writes them (no simulator): every output's
    figure is embedded and decodes, and the tables hold the report's numbers, over-budget count
    and worst sample included."""
    design = build_design(parse_config({"name": "t", "function": "atan2", "angle_width": 8, "data_width": 8,
                                        "max_error_lsb": 1.5}))
    dp = design.datapath
    inputs = random_inputs(dp, np.random.default_rng(5), 3000)
    got = evaluate(dp, inputs)
    ideal = ideal_outputs(dp, inputs)
    errors = function_errors(dp, inputs, got, ideal)
    columns = {**inputs, **{p.name: got[p.name] for p in output_ports(dp)}}
    columns.update({f"error_{p}": e for p, e in errors.items()})
    samples_csv = tmp_path / "samples.csv"
    write_csv_rows("random_full_rate", columns, samples_csv)
    worst = max(float(np.nanmax(np.abs(e))) for e in errors.values())
    report = SimReport(
        simulator="icarus", simulator_version="11.0", toplevel="t", seed=9, passed=False, tests=1, failed=1,
        samples=3000, mismatches=0, max_error_lsb=worst, rms_error_lsb=0.4, error_budget_lsb=1.5, over_budget=7,
        worst_sample={"port": "out_angle", "error_lsb": worst, "index": 12, "inputs": {"in_x": -3, "in_y": 5},
                      "test": "random_full_rate"},
        per_test=[{"test": "random_full_rate", "samples": 3000, "mismatches": 0, "max_error_lsb": worst,
                   "rms_error_lsb": 0.4, "over_budget": 7, "problems": ["out_angle: 7 of 2990 judged samples"]}],
        problems=["random_full_rate: out_angle: 7 of 2990 judged samples are not below the budget"],
    )
    out = tmp_path / "report.html"
    write_html(out, report, samples_csv, design)
    page = _Page()
    page.feed(out.read_text())
    _check_images(page, count=len(errors))  # out_angle and out_magnitude
    summary = _summary(page)
    assert summary["samples over budget"] == "7"
    assert summary["samples checked"] == "3000"
    assert summary["worst error vs ideal"].startswith(f"{worst:.4f} LSB")
    assert summary["result"] == "FAIL"
    tests = next(r for r in page.rows if r and r[0] == "random_full_rate")
    assert tests[5] == "7"  # the over-budget column
    worst_row = next(r for r in page.rows if r and r[0] == "out_angle")
    assert worst_row[1] == f"{worst:.6f}" and worst_row[-2:] == ["-3", "5"]
    judged = int(np.count_nonzero(~np.isnan(errors["out_angle"])))
    assert f"{judged} judged samples, {3000 - judged} not judged" in out.read_text()


@pytest.mark.sim
def test_sim_csv_has_error_columns_and_html_matches_the_run(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """benchgen sim --csv --html on Icarus: the error columns are output minus ideal in LSB, their
    largest magnitude is the report's worst error, and the HTML holds that run's numbers."""
    require_simulator("icarus")
    from benchgen.cli import main

    config = write_config(tmp_path / "c.toml", {"name": "rep_sc", "function": "sincos", "angle_width": 8,
                                                "data_width": 8, "max_error_lsb": 1.0})
    project = tmp_path / "p"
    assert main(["generate", str(config), "-o", str(project)]) == 0
    files = {k: tmp_path / f"run.{k}" for k in ("csv", "html", "json")}
    status = main(["sim", str(project), "--simulator", "icarus", "--samples", "300", "--seed", "4",
                   *[a for k, f in files.items() for a in (f"--{k}", str(f))]])
    assert status == 0
    out = capsys.readouterr().out
    run = json.loads(files["json"].read_text())
    rows = list(csv.DictReader(files["csv"].open()))
    assert len(rows) == run["samples"]
    worst = 0.0
    for r in rows:
        for port in ("out_cos", "out_sin"):
            err = float(r[f"error_{port}"])
            assert err == pytest.approx(int(r[port]) - float(r[f"ideal_{port}"]), abs=2e-6)
            worst = max(worst, abs(err))
    assert worst == pytest.approx(run["max_error_lsb"], abs=2e-6)
    page = _Page()
    page.feed(files["html"].read_text())
    _check_images(page, count=2)
    summary = _summary(page)
    assert summary["samples checked"] == str(run["samples"])
    assert summary["samples over budget"] == str(run["over_budget"])
    assert summary["worst error vs ideal"].startswith(f"{run['max_error_lsb']:.4f} LSB")
    # Icarus's real build (iverilog to bytecode, tens of ms) is measured and shown as such.
    assert run["build_seconds"] > 0
    assert "build / sim time      0.0 s" not in out
