"""Reports from a sweep folder: HTML works offline (every plot embedded and decodable), tables hold every point."""

from __future__ import annotations

import base64
import csv
import io
import json
from html.parser import HTMLParser
from pathlib import Path

import pytest

from benchgen.report import collect, pareto_front, to_table
from benchgen.sweep_cli import FORMATS
from benchgen.sweep_config import parse_sweep
from tests.test_sweep import fake_runner, run_and_report, sweep_raw

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


class _Page(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.images: list[str] = []
        self.external: list[str] = []
        self.cells: list[str] = []
        self._in_td = False

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        a = dict(attrs)
        if tag == "img":
            self.images.append(a.get("src") or "")
        if tag in ("script", "link") and (a.get("src") or a.get("href")):
            self.external.append(a.get("src") or a.get("href") or "")
        self._in_td = tag == "td"

    def handle_data(self, data: str) -> None:
        if self._in_td:
            self.cells.append(data)

    def handle_endtag(self, tag: str) -> None:
        if tag == "td":
            self._in_td = False


@pytest.fixture(scope="module")
def sweep_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("report") / "out"
    spec = parse_sweep(sweep_raw(synth={"targets": ["ice40"]}))
    run_and_report(spec, out, jobs=1, runner=fake_runner, use_cache=False, formats=FORMATS)
    return out


def test_html_is_one_offline_file_with_every_plot_embedded(sweep_dir: Path) -> None:
    from matplotlib.image import imread

    page = _Page()
    page.feed((sweep_dir / "report.html").read_text())
    assert not page.external
    assert len(page.images) >= 5  # error, latency, resources, Pareto, spectrum
    for src in page.images:
        assert src.startswith("data:image/png;base64,")
        png = base64.b64decode(src.split(",", 1)[1], validate=True)
        assert png.startswith(PNG_MAGIC)
        pixels = imread(io.BytesIO(png), format="png")
        assert pixels.shape[0] > 100 and pixels.shape[1] > 100
        assert pixels.std() > 0.01  # not a blank canvas


def test_tables_hold_every_point(sweep_dir: Path) -> None:
    sweep = json.loads((sweep_dir / "sweep.json").read_text())
    labels = [p["label"] for p in sweep["points"]]
    page = _Page()
    page.feed((sweep_dir / "report.html").read_text())
    for label in labels:
        assert label in page.cells
    rows = list(csv.DictReader(io.StringIO((sweep_dir / "report.csv").read_text())))
    assert [r["point"] for r in rows] == labels
    assert all(r["ice40_luts"] for r in rows)
    md = (sweep_dir / "report.md").read_text()
    assert all(f"| {label} |" in md for label in labels)
    for img in (sweep_dir / "plots").glob("*.png"):
        assert f"plots/{img.name}" in md
    table = to_table(collect(sweep_dir))
    assert all(label in table for label in labels)


def test_report_states_estimates_are_open_flow_estimates(sweep_dir: Path) -> None:
    html = (sweep_dir / "report.html").read_text()
    assert "Yosys" in html and "nextpnr" in html and "not what a vendor" in html


def test_sine_quality_is_beside_the_ideal(sweep_dir: Path) -> None:
    doc = json.loads((sweep_dir / "report.json").read_text())
    sq = doc["sine_quality"]
    assert sq
    for s in sq:
        assert s["ideal_snr_db"] == pytest.approx(6.02 * s["bits"] + 1.76)  # Kester MT-001
        # A core cannot beat ideal quantisation of its output width by more than chance allows.
        assert s["snr_db"] < s["ideal_snr_db"] + 1.0
        assert s["snr_db"] > s["ideal_snr_db"] - 6.0


def test_pareto_front_marks_non_dominated_points() -> None:
    pts = [(1.0, 5.0, 1.0), (2.0, 4.0, 1.0), (2.0, 5.0, 1.0), (3.0, 3.0, 0.5), (3.0, 3.0, 0.6)]
    assert pareto_front(pts) == [True, True, False, True, False]


def test_pareto_rows_agree_with_the_front(sweep_dir: Path) -> None:
    data = collect(sweep_dir)
    cores = {r["core_id"]: r for r in data.rows if r["status"] == "passed"}
    flagged = {c for c, r in cores.items() if r["pareto"]}
    assert flagged

    def objectives(r: dict) -> tuple[float, ...]:  # all minimised
        return (r["area"], r["latency_ns"], -r["throughput_msps"], r["error_dbfs"])

    for c in flagged:
        a = objectives(cores[c])
        for other in cores.values():
            b = objectives(other)
            assert not (all(y <= x for x, y in zip(a, b)) and b != a)


def test_report_render_rebuilds_the_same_tables(sweep_dir: Path, tmp_path: Path) -> None:
    from benchgen.cli import main

    before = (sweep_dir / "report.csv").read_bytes()
    status = main(["report", "render", str(sweep_dir), "--formats", "csv"])
    assert status == 0
    assert (sweep_dir / "report.csv").read_bytes() == before


def test_merge_of_shards_equals_the_whole(tmp_path: Path) -> None:
    from benchgen.cli import main

    spec = parse_sweep(sweep_raw())
    whole = tmp_path / "whole"
    run_and_report(spec, whole, jobs=1, runner=fake_runner, use_cache=False, formats=("csv", "junit"))
    for i in (1, 2):
        run_and_report(spec, tmp_path / f"s{i}", jobs=1, runner=fake_runner, use_cache=False, shard=(i, 2),
                  formats=("csv",))
    part = (tmp_path / "s1" / "report.csv").read_text().splitlines()
    assert 1 < len(part) < len((whole / "report.csv").read_text().splitlines())
    assert main(["report", "merge", str(tmp_path / "s1"), "-o", str(tmp_path / "m1"), "--formats", "csv"]) == 1
    status = main(["report", "merge", str(tmp_path / "s1"), str(tmp_path / "s2"), "-o", str(tmp_path / "m"),
                   "--formats", "csv,junit"])
    assert status == 0
    assert (tmp_path / "m" / "report.csv").read_bytes() == (whole / "report.csv").read_bytes()
    assert (tmp_path / "m" / "junit.xml").read_bytes() == (whole / "junit.xml").read_bytes()


def test_ecp5_mux_cells_stand_beside_its_luts(tmp_path: Path) -> None:
    """ECP5's PFUMX / L6MUX21 count is a column beside its LUT4s; iCE40 has no such cells."""
    from benchgen.report import to_csv, to_markdown

    raw = sweep_raw(synth={"targets": ["ice40", "ecp5"]})
    raw["matrix"] = {"pipeline_depth": [1, 2]}
    out = tmp_path / "out"
    run_and_report(parse_sweep(raw), out, jobs=1, runner=fake_runner, use_cache=False, formats=("json",))
    data = collect(out)
    header = to_markdown(data).split("## Points", 1)[1].strip().splitlines()[0]
    cols = [c.strip() for c in header.strip("|").split("|")]
    assert cols[cols.index("ecp5 LUT") + 1] == "ecp5 mux"
    assert "ice40 mux" not in cols
    assert cols[cols.index("ice40 LUT") + 1] == "ice40 FF"
    rows = list(csv.DictReader(io.StringIO(to_csv(data))))
    # fake_runner reports 7 mux cells on ECP5 and none on iCE40.
    assert [r["ecp5_mux"] for r in rows] == ["7"] * len(rows)
    assert [r["ice40_mux"] for r in rows] == ["0"] * len(rows)
    assert "ecp5 mux" in to_table(data).splitlines()[0]


def test_estimate_note_names_only_the_families_estimated(sweep_dir: Path) -> None:
    """The sweep estimated for iCE40 alone: its note must not claim an ECP5 estimate too."""
    from benchgen.report import estimate_note

    html = (sweep_dir / "report.html").read_text()
    note = html.split('<p class="note">', 1)[1].split("</p>", 1)[0]
    assert "iCE40 HX8K" in note and "ECP5" not in note
    md = (sweep_dir / "report.md").read_text()
    assert "ECP5" not in md.split("## Points", 1)[0]
    assert "the iCE40 HX8K CT256 and ECP5 LFE5U-25F CABGA256." in estimate_note(["ice40", "ecp5"])


def _depth_only_sweep(tmp_path: Path, targets: list[str]) -> Path:
    raw = sweep_raw(synth={"targets": targets})
    raw["sweep"]["simulators"] = ["icarus"]
    raw["matrix"] = {"pipeline_depth": [1, 2, 5]}
    out = tmp_path / "out"
    run_and_report(parse_sweep(raw), out, jobs=1, runner=fake_runner, use_cache=False, formats=("json",))
    return out


def _boxes_overlap(a: object, b: object) -> bool:
    return bool(a.x0 < b.x1 and b.x0 < a.x1 and a.y0 < b.y1 and b.y0 < a.y1)  # type: ignore[attr-defined]


def test_latency_figure_titles_stand_apart_and_carry_no_empty_legend(tmp_path: Path) -> None:
    """Each panel's title is drawn clear of its neighbours' (as laid out in the PNG), and a sweep
    that varies only the depth draws one line per panel with no legend (it could only say "all")."""
    import matplotlib.pyplot as plt

    from benchgen.report_plots import _latency_figure

    data = collect(_depth_only_sweep(tmp_path, ["ice40"]))
    fig = _latency_figure(data.rows)
    assert fig is not None
    fig.tight_layout()
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    axes = [ax for ax in fig.axes if ax.get_visible()]
    assert len(axes) == 3
    titles = [ax.title.get_window_extent(renderer) for ax in axes]
    for i in range(len(titles)):
        assert titles[i].x0 >= 0 and titles[i].x1 <= fig.bbox.width  # inside the picture
        for j in range(i + 1, len(titles)):
            assert not _boxes_overlap(titles[i], titles[j]), (axes[i].get_title(), axes[j].get_title())
    for ax in axes:
        assert ax.get_legend() is None
        assert [line.get_label() for line in ax.get_lines()] != ["all"]
    plt.close(fig)


def _core_row(core_id: str, *, cells: int, latency_ns: float, msps: float, error_lsb: float, width: int) -> dict:
    import math

    return {"core_id": core_id, "status": "passed", "ice40_logic_cells": cells, "latency_ns": latency_ns,
            "latency_cycles": 4, "throughput_msps": msps, "cycles_per_sample": 1, "max_error_lsb": error_lsb,
            "data_width": width, "error_dbfs": 20 * math.log10(error_lsb / 2**width)}


def test_pareto_judges_accuracy_on_one_scale_across_output_widths() -> None:
    """0.73 LSB of an 18-bit output is 64 times smaller than 0.55 LSB of a 12-bit one."""
    from benchgen.report import _mark_pareto, error_dbfs

    assert error_dbfs(0.5, 16) == pytest.approx(-102.35, abs=0.01)  # 20 log10(0.5 / 65536)
    wide = _core_row("w18", cells=100, latency_ns=40, msps=100, error_lsb=0.73, width=18)
    narrow = _core_row("w12", cells=100, latency_ns=40, msps=100, error_lsb=0.55, width=12)
    _mark_pareto([wide, narrow], ["ice40"])
    assert wide["pareto"] and not narrow["pareto"]


def test_pareto_keeps_the_fastest_core() -> None:
    """A core with twice the throughput stays on the front though it is larger, slower to answer
    and less accurate: throughput is an objective of its own."""
    from benchgen.report import _mark_pareto

    fast = _core_row("fast", cells=200, latency_ns=50, msps=200, error_lsb=0.9, width=16)
    small = _core_row("small", cells=100, latency_ns=40, msps=100, error_lsb=0.5, width=16)
    _mark_pareto([fast, small], ["ice40"])
    assert fast["pareto"] and small["pareto"]


@pytest.mark.parametrize("function", ["atan2", "sqrt"])
def test_error_against_iterations_is_drawn_for_any_function(tmp_path: Path, function: str) -> None:
    """The model's error curves are measured (benchgen.sweep_analysis) and drawn for every
    function, not only the spectral ones; at a core's own size the curve agrees with the sizer's
    proof (it measures a subset of the proven inputs)."""
    from benchgen.report_plots import make_plots

    raw = sweep_raw()
    raw["sweep"]["simulators"] = ["icarus"]
    raw["base"] = {"name": "t", "function": function, "data_width": 8, "max_error_lsb": 1.5}
    if function == "atan2":
        raw["base"]["angle_width"] = 8
    raw["matrix"] = {"max_error_lsb": [1.0, 2.0]}
    out = tmp_path / "out"
    run_and_report(parse_sweep(raw), out, jobs=1, runner=fake_runner, use_cache=False, formats=("json",))
    data = collect(out)
    plots = make_plots(data.rows, data.targets, data.axes, data.error_grids, data.verified_tones())
    assert "Error against iterations and guard bits" in plots
    (grid,) = data.error_grids
    assert grid["function"] == function and grid["data_width"] == 8
    assert sorted(grid["core_ids"]) == sorted({r["core_id"] for r in data.rows})
    shorter = 0
    for r in data.rows:
        curve = next(c for c in grid["curves"] if c["guard_bits"] == r["guard_bits"])
        worst = dict(zip(curve["iterations"], curve["max_error_lsb"], strict=True))
        assert 0 < worst[r["iterations"]] <= r["model_max_error_lsb"] + 1e-6  # the manifest rounds to 6 places
        fewest = min(curve["iterations"])  # the grid starts at 4 iterations at the least
        if fewest < r["iterations"]:
            assert worst[fewest] > worst[r["iterations"]]  # fewer iterations, larger error
            shorter += 1
    assert shorter  # the tighter budget takes more than the fewest iterations the grid draws


def _report_files(folder: Path) -> dict[str, bytes]:
    names = ["report.json", "report.csv", "report.md", "report.html", "junit.xml"]
    files = {n: (folder / n).read_bytes() for n in names if (folder / n).is_file()}
    files.update({f"plots/{p.name}": p.read_bytes() for p in sorted((folder / "plots").glob("*.png"))})
    return files


def test_report_runs_nothing(sweep_dir: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """Rendering reads records only: with sizing, the model and the spectrum unusable, every
    file comes out the same (the sweep measured the model once, into model_analysis.json)."""
    import shutil

    import benchgen.config
    import benchgen.design
    import benchgen.functions
    import benchgen.spectrum
    from benchgen.report import write_reports

    def refuse(*args: object, **kwargs: object) -> None:
        raise AssertionError("the report ran a computation")

    for module, name in ((benchgen.config, "parse_config"), (benchgen.design, "build_design"),
                         (benchgen.functions, "make_datapath"), (benchgen.functions, "measure"),
                         (benchgen.functions, "function_named"), (benchgen.spectrum, "analyse_tone")):
        monkeypatch.setattr(module, name, refuse)
    copy = tmp_path / "copy"
    shutil.copytree(sweep_dir, copy)
    write_reports(copy, formats=FORMATS)
    assert _report_files(copy) == _report_files(sweep_dir)


def test_the_sweep_writes_no_report_and_its_report_is_a_function_of_the_records(tmp_path: Path) -> None:
    """The sweep leaves the report to its caller; what ``benchgen sweep`` writes, ``report render``
    rebuilds byte for byte from the records (no wall time or run count in any file)."""
    from benchgen.cli import main
    from benchgen.sweep import run_sweep

    spec = parse_sweep(sweep_raw(matrix={"pipeline_depth": [1, 2]}))
    bare = run_sweep(spec, tmp_path / "bare", jobs=1, runner=fake_runner, use_cache=False)
    assert bare.exit_status == 0
    assert not list((tmp_path / "bare").glob("report.*")) and (tmp_path / "bare" / "model_analysis.json").is_file()
    out = tmp_path / "out"
    run_and_report(spec, out, jobs=1, runner=fake_runner, use_cache=False, formats=FORMATS)
    first = _report_files(out)
    assert "report.json" in first and "report.html" in first
    assert main(["report", "render", str(out), "--formats", ",".join(FORMATS)]) == 0
    assert _report_files(out) == first


def test_a_folder_without_the_model_analysis_is_refused_in_one_line(sweep_dir: Path, tmp_path: Path,
                                                                    capsys: pytest.CaptureFixture[str]) -> None:
    """A folder an older benchgen wrote has no model_analysis.json: the report says to re-run."""
    import shutil

    from benchgen.cli import main

    old = tmp_path / "old"
    shutil.copytree(sweep_dir, old)
    (old / "model_analysis.json").unlink()
    assert main(["report", "render", str(old), "--formats", "csv"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert "model_analysis.json" in err and "run the same 'benchgen sweep' command into it again" in err
    (old / "model_analysis.json").write_text('{"digest": "x", "error_grids": [], "tones": [{}]}')
    assert main(["report", "render", str(old), "--formats", "csv"]) == 2
    assert "tones.0" in capsys.readouterr().err


def test_tones_show_only_data_paths_a_simulation_verified(sweep_dir: Path) -> None:
    """A tone's RTL must have passed a simulation before the report shows its quality."""
    from dataclasses import replace

    data = collect(sweep_dir)
    assert data.tones and data.verified_tones() == data.tones
    failed = [dict(r, status="failed") for r in data.rows]
    assert replace(data, rows=failed).verified_tones() == []


def test_error_grid_stops_each_curve_at_the_widest_core_it_can_build() -> None:
    """The grid reaches past the sweep's iterations; where that passes the internal width the
    curve ends there (the report's own grid once sized its inputs at the largest iterations and
    guard bits and failed, so a 12-bit, 20-iteration, 7-guard-bit sweep got no report)."""
    from benchgen.sweep_analysis import analyse_models

    core = {"name": "t", "function": "sincos", "angle_width": 10, "data_width": 8, "iterations": 13,
            "guard_bits": 4, "max_error_lsb": 1.5}
    (grid,) = analyse_models([("c", core)])["error_grids"]
    ends = {c["guard_bits"]: c["iterations"][-1] for c in grid["curves"]}
    # The internal width is data_width + guard_bits + 1: no more iterations than that.
    assert ends == {0: 9, 2: 11, 4: 13}
    assert grid["core_ids"] == ["c"] and grid["budget_lsb"] == 1.5
