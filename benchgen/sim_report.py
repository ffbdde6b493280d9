"""One core's simulation report as a single HTML file (``benchgen sim --html FILE``).

The page holds the run's summary (the rows of :meth:`benchgen.sim.SimReport.rows`, samples over
the budget and the worst sample included), one line per test, the problems, and for every judged
output a figure of two panels: the histogram of its error against the ideal and its error against
the input. The figures are matplotlib PNGs embedded as base64 data, in the sweep report's style
(:mod:`benchgen.report`), so the file opens offline and can be mailed or attached to a ticket.

The per-sample errors come from the run's sample CSV (the ``error_<port>`` columns the benches
write), read once in chunks and folded into fixed-size summaries, so a run of 10^8 samples makes
a page of the same size as one of 10^4, in the same memory: a histogram of :data:`HIST_BINS`
bins over the run's largest error either side of zero, the smallest and largest error in each of
:data:`INPUT_BINS` bins of the input code (or, for two inputs, the largest magnitude in each cell
of a :data:`MAP_BINS` square map), and the first :data:`SCATTER_POINTS` samples as dots.
"""

from __future__ import annotations

import base64
import csv
import html
import itertools
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

from benchgen.functions import input_ports, output_ports
from benchgen.report import _CSS, _html_table
from benchgen.sim import SimReport

__all__ = ["CHUNK_ROWS", "HIST_BINS", "INPUT_BINS", "MAP_BINS", "SCATTER_POINTS", "ErrorSummary", "summarise_csv",
           "to_html", "write_html"]

HIST_BINS = 81
INPUT_BINS = 256
MAP_BINS = 64
SCATTER_POINTS = 20_000
CHUNK_ROWS = 100_000


@dataclass
class ErrorSummary:
    """One output's errors over a run, folded into fixed-size arrays.

    Attributes:
        port: Output port.
        inputs: The input ports the errors are plotted against (one, or two for a map).
        ranges: Per plotted input, its code range (lowest, highest).
        edges: Histogram bin edges (the run's largest error either side of zero).
        judged: Samples whose error the budget judges; unjudged: the others.
        hist: Judged samples per histogram bin.
        lo / hi: Smallest and largest error per input bin (NaN where no sample fell).
        worst_map: Two inputs: the largest error magnitude per map cell (rows: the second input).
        dots_x / dots_e: The first :data:`SCATTER_POINTS` judged samples, input and error.
    """

    port: str
    inputs: tuple[str, ...]
    ranges: tuple[tuple[int, int], ...]
    edges: npt.NDArray[np.float64]
    judged: int = 0
    unjudged: int = 0
    hist: npt.NDArray[np.int64] = field(default_factory=lambda: np.zeros(HIST_BINS, np.int64))
    lo: npt.NDArray[np.float64] = field(default_factory=lambda: np.full(INPUT_BINS, np.nan))
    hi: npt.NDArray[np.float64] = field(default_factory=lambda: np.full(INPUT_BINS, np.nan))
    worst_map: npt.NDArray[np.float64] = field(default_factory=lambda: np.full((MAP_BINS, MAP_BINS), np.nan))
    dots_x: list[float] = field(default_factory=list)
    dots_e: list[float] = field(default_factory=list)

    def _bin(self, values: npt.NDArray[np.float64], k: int, bins: int) -> npt.NDArray[np.int64]:
        lo, hi = self.ranges[k]
        pos = (values - lo) / (hi - lo + 1) * bins
        return np.clip(pos.astype(np.int64), 0, bins - 1)

    def add(self, columns: dict[str, npt.NDArray[np.float64]]) -> None:
        """Fold in one chunk of rows (input codes and this output's errors, NaN: not judged)."""
        err = columns[f"error_{self.port}"]
        ok = ~np.isnan(err)
        self.unjudged += int(np.count_nonzero(~ok))
        e = err[ok]
        if not e.size:
            return
        self.judged += int(e.size)
        # Clipped into the end bins: the edges span the run's largest error, so nothing should
        # fall outside, but the CSV rounds to six places.
        self.hist += np.histogram(np.clip(e, self.edges[0], self.edges[-1]), bins=self.edges)[0]
        xs = [columns[p][ok] for p in self.inputs]
        if len(self.inputs) == 1:
            b = self._bin(xs[0], 0, INPUT_BINS)
            np.fmin.at(self.lo, b, e)
            np.fmax.at(self.hi, b, e)
            room = SCATTER_POINTS - len(self.dots_x)
            if room > 0:
                self.dots_x += xs[0][:room].tolist()
                self.dots_e += e[:room].tolist()
        else:
            bx = self._bin(xs[0], 0, MAP_BINS)
            by = self._bin(xs[1], 1, MAP_BINS)
            np.fmax.at(self.worst_map, (by, bx), np.abs(e))


def _plotted_inputs(ports: tuple[Any, ...]) -> tuple[Any, ...]:
    """One input: that one; two: both (a map); more (rotate's x, y, angle): the last, the angle."""
    if len(ports) == 2:
        return ports
    return (ports[-1],)


def _code_range(width: int, signed: bool) -> tuple[int, int]:
    return (-(1 << (width - 1)), (1 << (width - 1)) - 1) if signed else (0, (1 << width) - 1)


def summarise_csv(csv_path: str | Path, design: Any, span: float) -> list[ErrorSummary]:
    """Read a run's sample CSV in chunks and summarise each judged output's errors.

    Args:
        csv_path: The CSV the bench wrote (``error_<port>`` columns).
        design: The core's design (its ports).
        span: The largest error magnitude of the run (the report's ``max_error_lsb``): the
            histogram spans it either side of zero, so one pass over the file suffices.
    """
    dp = design.datapath
    plotted = _plotted_inputs(input_ports(dp))
    names = tuple(p.name for p in plotted)
    ranges = tuple(_code_range(p.width, p.signed) for p in plotted)
    reach = max(span, 1e-6) * 1.02
    edges = np.linspace(-reach, reach, HIST_BINS + 1)
    with Path(csv_path).open(newline="", encoding="utf-8") as fh:
        reader = csv.reader(fh)
        header = next(reader, None)
        if header is None:
            return []
        index = {name: k for k, name in enumerate(header)}
        summaries = [ErrorSummary(p.name, names, ranges, edges) for p in output_ports(dp)
                     if f"error_{p.name}" in index]
        wanted = list(names) + [f"error_{s.port}" for s in summaries]
        cols = [index[w] for w in wanted]
        while True:
            rows = list(itertools.islice(reader, CHUNK_ROWS))
            if not rows:
                break
            columns = {
                w: np.array([float(r[c]) if r[c] else math.nan for r in rows], dtype=np.float64)
                for w, c in zip(wanted, cols, strict=True)
            }
            for s in summaries:
                s.add(columns)
    return summaries


def _figure_of(s: ErrorSummary, budget: float) -> bytes:
    from benchgen.report_plots import _figure, _png

    fig, axes = _figure(1, 2, width=12, height=3.8)
    ax = axes[0][0]
    centres = (s.edges[:-1] + s.edges[1:]) / 2
    ax.bar(centres, s.hist, width=s.edges[1] - s.edges[0], color="#4878a8")
    for sign in (-1, 1):
        ax.axvline(sign * budget, color="red", linestyle="--", linewidth=1,
                   label=f"budget ±{budget:g} LSB" if sign > 0 else None)
    ax.set_xlabel(f"{s.port}: error against the ideal (LSB)")
    ax.set_ylabel("samples")
    ax.set_title(f"{s.port}: error histogram ({s.judged} judged samples)", fontsize=10)
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8)
    ax = axes[0][1]
    if len(s.inputs) == 1:
        lo, hi = s.ranges[0]
        centres = lo + (np.arange(INPUT_BINS) + 0.5) * (hi - lo + 1) / INPUT_BINS
        seen = ~np.isnan(s.lo)
        ax.fill_between(centres[seen], s.lo[seen], s.hi[seen], color="#4878a8", alpha=0.35, step="mid",
                        label=f"smallest to largest error in each of {INPUT_BINS} input bins")
        if s.dots_x:
            ax.scatter(s.dots_x, s.dots_e, s=2, color="black", alpha=0.3, label=f"first {len(s.dots_x)} samples")
        for sign in (-1, 1):
            ax.axhline(sign * budget, color="red", linestyle="--", linewidth=1)
        ax.set_xlabel(f"{s.inputs[0]} (input code)")
        ax.set_ylabel("error (LSB)")
        ax.set_title(f"{s.port}: error against {s.inputs[0]}", fontsize=10)
        ax.legend(fontsize=7, loc="upper right")
        ax.grid(True, alpha=0.3)
    else:
        (x0, x1), (y0, y1) = s.ranges
        im = ax.imshow(s.worst_map, origin="lower", aspect="auto", extent=(x0, x1, y0, y1), cmap="viridis")
        fig.colorbar(im, ax=ax, label="largest |error| in the cell (LSB)")
        ax.set_xlabel(f"{s.inputs[0]} (input code)")
        ax.set_ylabel(f"{s.inputs[1]} (input code)")
        ax.set_title(f"{s.port}: largest error over {s.inputs[0]} x {s.inputs[1]} ({MAP_BINS}x{MAP_BINS} cells)",
                     fontsize=10)
    return _png(fig)


def _test_rows(report: SimReport) -> list[list[str]]:
    rows = []
    for t in report.per_test:
        rows.append([
            t["test"], str(t["samples"]), str(t["mismatches"]), f"{t['max_error_lsb']:.4f}",
            f"{t['rms_error_lsb']:.4f}", str(t.get("over_budget", 0)), "; ".join(t["problems"]) or "passed",
        ])
    return rows


def to_html(report: SimReport, summaries: list[ErrorSummary]) -> str:
    """The page: summary, tests, problems, worst sample and one figure per judged output."""
    verdict = "PASS" if report.passed else "FAIL"
    title = f"Simulation report: {report.toplevel}"
    parts = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{html.escape(title)}</title><style>{_CSS}</style></head><body>",
        f"<h1>{html.escape(title)}: {verdict}</h1>",
        ("<p>Every output sample was compared bit for bit with the bit-true model; errors are "
         "against the ideal, in LSBs of the output they fell on.</p>"),
        "<h2>Summary</h2>",
        _html_table(["", "value"], [[k.strip(), v] for k, v in report.rows()] + [["result", verdict]]),
    ]
    if report.worst_sample:
        w = report.worst_sample
        keys = ["port", "error (LSB)", "test", "sample"] + list(w["inputs"])
        values = [w["port"], f"{w['error_lsb']:.6f}", str(w.get("test", "")), str(w.get("index", ""))]
        values += [str(v) for v in w["inputs"].values()]
        parts += ["<h2>Worst sample</h2>", _html_table(keys, [values])]
    parts += ["<h2>Tests</h2>",
              _html_table(["test", "samples", "mismatches", "worst err LSB", "RMS err LSB", "over budget", "result"],
                          _test_rows(report),
                          ["failed" if t["problems"] else "" for t in report.per_test])]
    if report.problems:
        parts += ["<h2>Problems</h2><ul>", *(f"<li><pre>{html.escape(p)}</pre></li>" for p in report.problems),
                  "</ul>"]
    if summaries:
        parts.append("<h2>Error per output</h2>")
        parts.append("<p>Left: how the judged errors spread. Right: the error against the input code. Red "
                     "dashes: the budget. Samples the budget does not judge (flagged, or an angle of a vector "
                     "too short to have one) are counted apart.</p>")
        for s in summaries:
            png = _figure_of(s, report.error_budget_lsb)
            uri = "data:image/png;base64," + base64.b64encode(png).decode("ascii")
            parts += [f"<h3>{html.escape(s.port)}</h3>",
                      f"<p>{s.judged} judged samples, {s.unjudged} not judged.</p>",
                      f'<img alt="{html.escape(s.port)}: error histogram and error against the input" src="{uri}">']
    parts.append("</body></html>")
    return "\n".join(parts) + "\n"


def write_html(path: str | Path, report: SimReport, csv_path: str | Path | None, design: Any) -> None:
    """Write the one-file report of a run; the error figures need the run's sample CSV.

    The CSV is read once, in chunks of :data:`CHUNK_ROWS` rows, so memory stays flat in the
    run's length. The file is written whole or not at all (a temporary file renamed over it).
    """
    summaries = []
    if csv_path and Path(csv_path).is_file():
        summaries = summarise_csv(csv_path, design, max(report.max_error_lsb, report.error_budget_lsb))
    target = Path(path)
    tmp = target.with_name(f".{target.name}.tmp")
    tmp.write_text(to_html(report, summaries), encoding="utf-8")
    tmp.replace(target)
