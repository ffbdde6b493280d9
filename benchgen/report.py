"""Reports of a sweep (or a single run, a sweep of one point): table, JSON, CSV, Markdown, HTML, JUnit.

Everything is rebuilt from a sweep folder (``sweep.json``, ``model_analysis.json`` and
``results/``), so a report can be written again, or for merged shards, without running anything:
this module and :mod:`benchgen.report_plots` only read records and format them. The sweep
computed everything they show, the model's error curves and tones included
(:mod:`benchgen.sweep_analysis`).

The files are a function of the records alone: the same records give the same bytes. The tables,
CSV, Markdown and plots hold only results, never times, so the same sweep run anywhere (a local
pool, a Dask cluster, shards merged) gives the same files; the time each task took, as its result
records it, is in ``report.json``'s ``timing`` section, and the run's wall time only in the
terminal table.
"""

from __future__ import annotations

import base64
import csv
import html
import io
import json
import math
import xml.etree.ElementTree as ET
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from benchgen.errors import BenchgenError
from benchgen.report_plots import make_plots, one_per_core
from benchgen.sweep_records import (
    MODEL_ANALYSIS_FILE,
    RecordError,
    read_model_analysis,
    read_result,
    read_sweep_file,
)
from benchgen.synth import DEVICES

__all__ = [
    "ReportData",
    "ReportError",
    "collect",
    "error_dbfs",
    "estimate_note",
    "pareto_front",
    "to_csv",
    "to_html",
    "to_junit",
    "to_markdown",
    "to_table",
    "write_reports",
]

def estimate_note(targets: Iterable[str]) -> str:
    """What the resource and Fmax figures are, naming only the device families estimated for."""
    parts = [DEVICES[t].part if t in DEVICES else t for t in targets]
    devices = parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]
    return (
        "Resource and Fmax figures are estimates from the open toolchains Yosys and nextpnr (via the "
        f"yowasp wheels) for the {devices}. They compare design points with each other; "
        "they are not what a vendor's synthesis and timing flow will report. Each core is estimated inside a "
        "wrapper that registers every port, so every path is timed; the wrapper's flip-flops are taken out "
        "of the flip-flop counts but remain in the placed-cell counts."
    )


COLUMNS = (
    "point", "status", "simulator", "function", "architecture", "pipeline_depth", "iterations_per_cycle",
    "angle_width", "data_width", "iterations", "guard_bits", "angle_guard_bits", "rounding", "samples", "mismatches",
    "max_error_lsb", "rms_error_lsb", "budget_lsb", "model_max_error_lsb", "worst_port", "worst_port_width",
    "error_dbfs", "latency_cycles", "expected_latency_cycles", "cycles_per_sample",
)
RESOURCE_KEYS = ("luts", "mux", "ffs", "carry", "bram", "dsp", "logic_cells", "fmax_mhz", "note")


class ReportError(BenchgenError):
    """A folder that holds no sweep results."""

    exit_status = 2


@dataclass
class ReportData:
    """Everything a report shows.

    Attributes:
        name: Sweep name.
        digest: Sweep content hash.
        targets: Estimate targets.
        rows: One per point, in sweep order (deterministic values only).
        timing: Per task wall times and cache hits (not in the deterministic outputs).
        axes: Fields the sweep varies.
        missing: Task ids with no result (a result file that was ignored counts as none).
        shard: ``(i, N)`` or ``None``.
        ignored: One line per result file left out as invalid: the file and its fault.
        error_grids: The model's error curves, one per function and output width (``model_analysis.json``).
        tones: The model's coherent tones, one per distinct data path (``model_analysis.json``).
        nco_tones: The NCO model's words, one entry per distinct NCO (``model_analysis.json``;
            empty for a sweep without an NCO).
    """

    name: str
    digest: str
    targets: list[str]
    rows: list[dict[str, Any]]
    timing: dict[str, Any]
    axes: list[str]
    missing: list[str] = field(default_factory=list)
    shard: list[int] | None = None
    ignored: list[str] = field(default_factory=list)
    error_grids: list[dict[str, Any]] = field(default_factory=list)
    tones: list[dict[str, Any]] = field(default_factory=list)
    nco_tones: list[dict[str, Any]] = field(default_factory=list)

    @property
    def passed(self) -> int:
        """Points whose verification passed."""
        return sum(r["status"] == "passed" for r in self.rows)

    def verified_tones(self) -> list[dict[str, Any]]:
        """The tones of data paths whose RTL a simulation verified: a core with a passed point."""
        passed = {r["core_id"] for r in one_per_core(self.rows) if r["status"] == "passed"}
        return [t for t in self.tones if passed & set(t["core_ids"])]

    def verified_nco_tones(self) -> list[dict[str, Any]]:
        """The NCO tones of cores a simulation verified (a core with a passed point)."""
        passed = {r["core_id"] for r in one_per_core(self.rows) if r["status"] == "passed"}
        return [t for t in self.nco_tones if passed & set(t["core_ids"])]


def collect(out_dir: str | Path) -> ReportData:
    """Gather a sweep folder's results into rows.

    Every result file is checked against its schema (:mod:`benchgen.sweep_records`); one that
    does not fit is left out, so its point shows as ``not run`` with one problem line naming the
    file and the fault (also in :attr:`ReportData.ignored`), and the rest of the report is made.

    Raises:
        ReportError: if the folder holds no sweep, its ``sweep.json`` is not a valid one, or it
            holds no valid ``model_analysis.json`` of that sweep (one written before the sweep
            measured it: running the sweep again into the folder writes it).
    """
    out = Path(out_dir)
    try:
        sweep = read_sweep_file(out)
    except FileNotFoundError:
        raise ReportError(f"'{out}' holds no sweep.json: give a folder written by 'benchgen sweep -o'") from None
    except RecordError as exc:
        raise ReportError(f"{exc}; run the sweep again into a new folder") from None
    rerun = "run the same 'benchgen sweep' command into it again, which writes it (finished tasks come from the cache)"
    try:
        analysis = read_model_analysis(out)
    except FileNotFoundError:
        raise ReportError(f"'{out}' holds no {MODEL_ANALYSIS_FILE} (an older benchgen wrote it): {rerun}") from None
    except RecordError as exc:
        raise ReportError(f"{exc}; {rerun}") from None
    if analysis["digest"] != sweep["digest"]:
        raise ReportError(f"'{out / MODEL_ANALYSIS_FILE}' belongs to another sweep than its sweep.json: {rerun}")
    spec = sweep["spec"]
    targets = list(spec["synth"]["targets"])
    task_kinds = {t["task_id"]: t["kind"] for t in sweep["tasks"]}
    task_ids = set(task_kinds)
    results: dict[str, dict[str, Any]] = {}
    ignored: dict[str, str] = {}
    for tid in sorted(task_ids):
        try:
            data = read_result(out, task_kinds[tid], tid)
        except RecordError as exc:
            ignored[tid] = f"ignored {exc}"
            continue
        if data is not None:
            results[tid] = data
    rows = []
    timing: dict[str, Any] = {}
    for p in sweep["points"]:
        if p["point_id"] not in task_ids:
            continue
        res = results.get(p["point_id"])
        row = _row(p, res, targets, results, ignored)
        if p["point_id"] in ignored:
            row["problems"] = [ignored[p["point_id"]]]
        rows.append(row)
        if res:
            timing[p["point_id"]] = {
                "seconds": res.get("seconds"),
                "cached": res.get("cached", False),
                "build_seconds": res.get("sim", {}).get("build_seconds"),
                "sim_seconds": res.get("sim", {}).get("sim_seconds"),
            }
    for tid in sorted(task_ids):
        if tid in results and results[tid]["kind"] == "synth":
            timing[tid] = {"seconds": results[tid].get("seconds"), "cached": results[tid].get("cached", False)}
    _mark_pareto(rows, targets)
    nco_tones = analysis.get("nco_tones", [])
    if nco_tones:
        _nco_columns(rows, nco_tones)
    return ReportData(
        name=spec["name"],
        digest=sweep["digest"],
        targets=targets,
        rows=rows,
        timing=timing,
        axes=list(spec["matrix"]),
        missing=sorted(t for t in task_ids if t not in results),
        shard=sweep.get("shard"),
        ignored=[ignored[t] for t in sorted(ignored)],
        error_grids=analysis["error_grids"],
        tones=analysis["tones"],
        nco_tones=nco_tones,
    )


#: The NCO's own columns, in a sweep that has an NCO (a sweep without one keeps its columns):
#: the whole NCO model at its worst truncation word, phase path included, beside the
#: Nicholas-Samueli prediction (or, dithered, the predicted noise peak).
NCO_COLUMNS = ("nco_worst_word_sfdr_dbc", "nco_predicted_sfdr_dbc", "nco_worst_word_snr_db")


def _nco_columns(rows: list[dict[str, Any]], nco_tones: list[dict[str, Any]]) -> None:
    """Give each NCO point its NCO's worst-word SFDR and SNR, where a simulation of the core
    passed (as the tone tables, which show only verified data paths)."""
    passed = {r["core_id"] for r in one_per_core(rows) if r["status"] == "passed"}
    worst = {}
    for t in nco_tones:
        word = next((w for w in t["words"] if w["word"] == "worst"), None)
        for cid in t["core_ids"]:
            if word is not None and cid in passed:
                worst[cid] = word
    for r in rows:
        w = worst.get(r["core_id"])
        r["nco_worst_word_sfdr_dbc"] = None if w is None else w["sfdr_db"]
        r["nco_predicted_sfdr_dbc"] = None if w is None else w["predicted_sfdr_db"]
        r["nco_worst_word_snr_db"] = None if w is None else w["snr_db"]


def _row(point: dict[str, Any], res: dict[str, Any] | None, targets: list[str],
         results: dict[str, dict[str, Any]], ignored: dict[str, str]) -> dict[str, Any]:
    core = point["core"]
    row: dict[str, Any] = {c: None for c in COLUMNS}
    row.update(point=point["label"], point_id=point["point_id"], core_id=point["core_id"],
               simulator=point["simulator"], axes=point["axes"], status="not run", problems=[],
               first_mismatches=[])
    design = (res or {}).get("design")
    if design is None:
        for t in targets:
            design = results.get(f"{point['core_id']}__{t}", {}).get("design") or design
    cfg = design["config"] if design else core
    derived = design["derived"] if design else {}
    row.update(
        function=cfg.get("function"),
        architecture=derived.get("architecture", cfg.get("architecture", "pipelined")),
        pipeline_depth=derived.get("pipeline_depth", cfg.get("pipeline_depth")),
        iterations_per_cycle=derived.get("iterations_per_cycle", cfg.get("iterations_per_cycle")),
        angle_width=cfg.get("angle_width"),
        data_width=cfg.get("data_width"),
        iterations=derived.get("iterations", cfg.get("iterations")),
        guard_bits=derived.get("guard_bits", cfg.get("guard_bits")),
        angle_guard_bits=derived.get("angle_guard_bits", cfg.get("angle_guard_bits")),
        rounding=cfg.get("rounding", "half_even"),
        expected_latency_cycles=derived.get("latency_cycles"),
        budget_lsb=design["error_budget"]["max_error_lsb"] if design else cfg.get("max_error_lsb"),
        model_max_error_lsb=design["error_budget"]["model_max_error_lsb"] if design else None,
    )
    if res:
        row["status"] = res["status"]
        if res["status"] == "error":
            row["problems"] = [res.get("error", "could not run")]
        sim = res.get("sim")
        if sim:
            row.update(
                samples=sim["samples"], mismatches=sim["mismatches"], max_error_lsb=sim["max_error_lsb"],
                rms_error_lsb=sim["rms_error_lsb"], latency_cycles=sim["latency_cycles"],
                cycles_per_sample=sim["cycles_per_sample"], simulator_version=sim["simulator_version"],
            )
            row["problems"] = list(sim.get("problems", []))
            row["first_mismatches"] = res.get("first_mismatches", [])
            worst = sim.get("worst_sample") or {}
            row["worst_port"] = worst.get("port")
    ports = (design or {}).get("ports") or {}
    if row["worst_port"] in ports:
        row["worst_port_width"] = int(ports[row["worst_port"]])
    elif row["max_error_lsb"] is not None:
        row["worst_port_width"] = row["data_width"]  # a result from before the ports were recorded
    row["error_dbfs"] = error_dbfs(row["max_error_lsb"], row["worst_port_width"])
    row["estimates"] = {}
    for t in targets:
        s = results.get(f"{point['core_id']}__{t}")
        if s and s.get("status") == "ok":
            e = s["estimate"]
            row["estimates"][t] = {k: e.get(k) for k in RESOURCE_KEYS}
            for k in RESOURCE_KEYS:
                row[f"{t}_{k}"] = e.get(k)
        else:
            for k in RESOURCE_KEYS:
                row[f"{t}_{k}"] = None
            sid = f"{point['core_id']}__{t}"
            row["estimates"][t] = {"error": ignored[sid] if sid in ignored else (s or {}).get("error", "not run")}
    _derive(row, targets)
    return row


def _derive(row: dict[str, Any], targets: list[str]) -> None:
    """Latency in ns and throughput in samples per second, at the first target's estimated Fmax."""
    row["latency_ns"] = row["throughput_msps"] = None
    for t in targets:
        fmax = row.get(f"{t}_fmax_mhz")
        if fmax:
            lat = row["latency_cycles"] or row["expected_latency_cycles"]
            cps = row["cycles_per_sample"] or 1
            row["latency_ns"] = round(lat * 1000.0 / fmax, 2) if lat else None
            row["throughput_msps"] = round(fmax / cps, 2)
            row["fmax_target"] = t
            break


def error_dbfs(error_lsb: float | None, width: int | None) -> float | None:
    """A worst error as a fraction of its output's full scale, in dB: 20 log10(error / 2^width).

    An output of ``width`` bits spans 2^width codes, so one LSB of a 12-bit output is 16 times
    one LSB of a 16-bit output. On this scale every core's accuracy compares with every other's
    whatever its output width (lower is better: -6.02 dB per bit, 0.5 LSB of a 16-bit output
    is -102.3 dBFS). ``None`` when there is no error to scale, or it is exactly zero (no finite
    dB value; the Pareto front counts it as the best).
    """
    if error_lsb is None or width is None or error_lsb <= 0:
        return None
    return round(20.0 * math.log10(error_lsb) - 20.0 * width * math.log10(2.0), 2)


def _area(row: dict[str, Any], targets: list[str]) -> float | None:
    if not targets:
        return None
    t = targets[0]
    if row.get(f"{t}_logic_cells"):
        return float(row[f"{t}_logic_cells"])
    luts, ffs = row.get(f"{t}_luts"), row.get(f"{t}_ffs")
    if luts is None:
        return None
    # A logic cell of either family holds one LUT and one FF: the larger count bounds the cells.
    return float(max(luts, ffs or 0))


def pareto_front(items: list[tuple[float, ...]]) -> list[bool]:
    """For each item (all objectives to minimise), whether no other item dominates it."""
    flags = []
    for a in items:
        dominated = any(
            all(b_i <= a_i for a_i, b_i in zip(a, b, strict=True)) and any(b_i < a_i for a_i, b_i in zip(a, b, strict=True))
            for b in items
        )
        flags.append(not dominated)
    return flags


def _mark_pareto(rows: list[dict[str, Any]], targets: list[str]) -> None:
    """Mark each core on the front of area, latency, throughput and worst error (dBFS).

    Area, latency and error are minimised, throughput maximised. Throughput is samples per second
    (the estimated Fmax over clocks per sample) where every core has an Fmax, else samples per
    clock; latency likewise in ns or clocks. The error is the worst over the core's simulators,
    on the one scale of :func:`error_dbfs`, so cores of different output widths compare fairly.
    """
    cores: dict[str, list[dict[str, Any]]] = {}
    for r in rows:
        r["pareto"] = False
        r["area"] = _area(r, targets)
        if r["status"] == "passed":
            cores.setdefault(r["core_id"], []).append(r)
    keys, objs = [], []
    in_time = all(rs[0]["latency_ns"] is not None and rs[0]["throughput_msps"] is not None for rs in cores.values())
    for core_id, rs in cores.items():
        r0 = rs[0]
        latency = r0["latency_ns"] if in_time else r0["latency_cycles"]
        rate = r0["throughput_msps"] if in_time else 1.0 / (r0["cycles_per_sample"] or 1)
        err = max((-math.inf if r["error_dbfs"] is None else r["error_dbfs"]) for r in rs)
        obj = [float(latency or 0), -float(rate), err]
        if r0["area"] is not None:
            obj.insert(0, r0["area"])
        keys.append(core_id)
        objs.append(tuple(obj))
    if len({len(o) for o in objs}) > 1:
        return  # some cores lack an area: a mixed front would mislead
    for core_id, flag in zip(keys, pareto_front(objs), strict=True):
        for r in cores[core_id]:
            r["pareto"] = flag


# ----------------------------------------------------------------------------- text formats


def _fmt(v: Any, digits: int = 3) -> str:
    if v is None:
        return "-"
    if isinstance(v, float):
        return f"{v:.{digits}f}"
    return str(v)


def _summary_columns(data: ReportData) -> list[tuple[str, str]]:
    cols = [("point", "point"), ("status", "status"), ("max_error_lsb", "worst err LSB"),
            ("error_dbfs", "worst err dBFS"), ("rms_error_lsb", "RMS err LSB"), ("latency_cycles", "latency clk"),
            ("cycles_per_sample", "clk/sample")]
    for t in data.targets:
        cols.append((f"{t}_luts", f"{t} LUT"))
        if t in DEVICES and DEVICES[t].mux_cells:
            # Beside the LUTs: PFUMX / L6MUX21 join LUT4s into wider functions (ECP5).
            cols.append((f"{t}_mux", f"{t} mux"))
        cols += [(f"{t}_ffs", f"{t} FF"), (f"{t}_carry", f"{t} carry"),
                 (f"{t}_bram", f"{t} BRAM"), (f"{t}_dsp", f"{t} DSP"), (f"{t}_fmax_mhz", f"{t} Fmax MHz")]
    if data.nco_tones:
        cols += [("nco_worst_word_sfdr_dbc", "NCO SFDR dBc (phase path incl.)"),
                 ("nco_predicted_sfdr_dbc", "predicted SFDR dBc")]
    cols += [("pareto", "Pareto")]
    return cols


def _cell(row: dict[str, Any], key: str) -> str:
    v = row.get(key)
    if key == "pareto":
        return "yes" if v else ""
    if key == "cycles_per_sample" and isinstance(v, float):
        return f"{v:g}"
    if key.endswith("fmax_mhz") or key == "error_dbfs":
        return _fmt(v, 1)
    if key in NCO_COLUMNS:
        return _fmt(v, 2)
    return _fmt(v)


def to_table(data: ReportData, *, wall_seconds: float | None = None, ran: int | None = None) -> str:
    """A terminal table: one line per point, then the counts and failures."""
    cols = _summary_columns(data)
    cells = [[h for _, h in cols]] + [[_cell(r, k) for k, _ in cols] for r in data.rows]
    widths = [max(len(c[i]) for c in cells) for i in range(len(cols))]
    lines = ["  ".join(c.ljust(w) for c, w in zip(line, widths, strict=True)).rstrip() for line in cells]
    lines.insert(1, "  ".join("-" * w for w in widths))
    lines.append("")
    lines.append(_counts(data))
    if wall_seconds is not None:
        cached = sum(1 for t in data.timing.values() if t.get("cached"))
        lines.append(f"wall time {wall_seconds:.1f} s; tasks run now: {ran}, of which from cache: {cached}")
    for r in data.rows:
        if r["status"] != "passed":
            lines.append(f"FAILED {r['point']}: " + "; ".join(r["problems"][:3] or [r["status"]]))
    return "\n".join(lines)


def _counts(data: ReportData) -> str:
    failed = sum(r["status"] in ("failed", "error") for r in data.rows)
    notrun = sum(r["status"] == "not run" for r in data.rows)
    text = f"{data.passed} of {len(data.rows)} points passed, {failed} failed"
    if notrun:
        text += f", {notrun} not run"
    if data.missing:
        text += f"; {len(data.missing)} task(s) without a result"
    return text


def _csv_columns(data: ReportData) -> list[str]:
    cols = list(COLUMNS)
    for t in data.targets:
        cols += [f"{t}_{k}" for k in RESOURCE_KEYS]
    cols += ["latency_ns", "throughput_msps", "area", "pareto"]
    if data.nco_tones:
        cols += list(NCO_COLUMNS)
    return cols + ["problems"]


def to_csv(data: ReportData) -> str:
    """One row per point, every column."""
    buf = io.StringIO()
    cols = _csv_columns(data)
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(cols)
    for r in data.rows:
        w.writerow(["; ".join(r[c]) if c == "problems" else ("" if r.get(c) is None else r.get(c)) for c in cols])
    return buf.getvalue()


def _tone_summary(tones: list[dict[str, Any]]) -> list[dict[str, Any]]:
    keys = ("label", "bits", "snr_db", "sfdr_db", "ideal_snr_db", "n_fft", "cycles")
    return [{k: t[k] for k in keys} for t in tones]


def _nco_summary(tones: list[dict[str, Any]]) -> list[dict[str, Any]]:
    keys = ("label", "bits", "phase_bits", "acc_width", "dither_width", "nicholas_samueli_sfdr_db",
            "ideal_snr_db", "freq_resolution", "words")
    return [{k: t[k] for k in keys} for t in tones]


#: What the NCO tables say of their numbers, with the source of each check.
NCO_NOTE = (
    "The whole NCO model (accumulator, truncation to P phase bits, dither, core; verified bit for bit "
    "against the RTL by the simulations above) at two coherent words (IEEE Std 1241: rectangular window, "
    "complex FFT of cos + j sin): the worst truncation word (period M = 2), whose spur Nicholas and "
    "Samueli 1987 predict at -(6.02 P - 3.92) dBc, and an exact word (no bit dropped: the core's amplitude "
    "quantisation alone, SNR predicted from the core's RMS error; 6.02 N + 1.76 dB is the ideal, Kester "
    "MT-001). With dither the predicted SFDR is the noise peak of the dithered floor and 'without dither' "
    "is the same word through the same NCO with no dither (both derived in docs/nco.md). Frequency error: "
    "measured mean frequency less the word's exact one, in units of f_clk (the resolution is f_clk / 2^A)."
)


def _nco_rows(tones: list[dict[str, Any]]) -> list[list[str]]:
    out = []
    for t in tones:
        for w in t["words"]:
            predicted = "-" if w["predicted_sfdr_db"] is None else f"{w['predicted_sfdr_db']:.2f} ({w['sfdr_source']})"
            plain = ("-" if w["undithered_sfdr_db"] is None
                     else f"{w['undithered_sfdr_db']:.2f} / {w['undithered_snr_db']:.2f}")
            out.append([
                t["label"], f"{w['word']} (M = {w['period']})", f"{w['n_fft']} samples, bin {w['cycles']}",
                f"{w['sfdr_db']:.2f}", predicted, f"{w['snr_db']:.2f}", f"{w['predicted_snr_db']:.2f}", plain,
                f"{w['freq_error']:.3g}",
            ])
    return out


NCO_HEADER = ["NCO", "word", "record", "SFDR dBc (NCO, phase path incl.)", "predicted SFDR dBc (source)",
              "SNR dB", "predicted SNR dB", "without dither SFDR / SNR", "freq. error (f_clk)"]


def to_json(data: ReportData) -> str:
    """The rows, the counts, the sine quality and (separately) the time each task took."""
    doc = {
        "sweep": data.name,
        "digest": data.digest,
        "shard": data.shard,
        "targets": data.targets,
        "estimate_note": estimate_note(data.targets) if data.targets else None,
        "points": len(data.rows),
        "passed": data.passed,
        "missing_tasks": data.missing,
        "rows": data.rows,
        "sine_quality": _tone_summary(data.verified_tones()),
        "timing": {"tasks": data.timing},
    }
    if data.nco_tones:
        doc["nco_spectrum"] = _nco_summary(data.verified_nco_tones())
    return json.dumps(doc, indent=1, sort_keys=True) + "\n"


def _md_table(header: list[str], rows: list[list[str]]) -> str:
    out = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    out += ["| " + " | ".join(c.replace("|", "\\|") for c in r) + " |" for r in rows]
    return "\n".join(out)


def to_markdown(data: ReportData, plots: dict[str, str] | None = None) -> str:
    """A Markdown report; ``plots`` maps a plot title to a relative image path."""
    spectra = data.verified_tones()
    parts = [f"# Sweep report: {data.name}", "", _counts(data) + f" (sweep digest `{data.digest}`).", ""]
    if data.shard:
        parts += [f"Shard {data.shard[0]} of {data.shard[1]}: merge the shards with `benchgen report merge`.", ""]
    if data.targets:
        parts += [f"> {estimate_note(data.targets)}", ""]
    cols = _summary_columns(data)
    parts += ["## Points", "", _md_table([h for _, h in cols], [[_cell(r, k) for k, _ in cols] for r in data.rows]), ""]
    front = [r for r in data.rows if r["pareto"]]
    if front:
        seen: set[str] = set()
        parts += ["## Pareto front (area, latency, throughput, worst error in dB of full scale)", ""]
        for r in front:
            if r["core_id"] in seen:
                continue
            seen.add(r["core_id"])
            parts.append(f"- {r['point'].rsplit(' ', 1)[0]}: {_front_line(r)}")
        parts.append("")
    if spectra:
        parts += ["## Sine quality (coherent tone, bit-true model)", "",
                  ("SNR and SFDR per IEEE Std 1241 (coherent sampling, rectangular window); ideal SNR "
                   "6.02 N + 1.76 dB (Kester, MT-001)."), ""]
        parts.append(_md_table(
            ["core", "N (bits)", "SNR dB", "ideal SNR dB", "SFDR dBc"],
            [[s["label"], str(s["bits"]), f"{s['snr_db']:.2f}", f"{s['ideal_snr_db']:.2f}", f"{s['sfdr_db']:.2f}"]
             for s in spectra],
        ))
        parts.append("")
    nco = data.verified_nco_tones()
    if nco:
        parts += ["## NCO spectrum (whole NCO, bit-true model)", "", NCO_NOTE, "",
                  _md_table(NCO_HEADER, _nco_rows(nco)), ""]
    if plots:
        parts += ["## Plots", ""]
        for title, path in plots.items():
            parts += [f"### {title}", "", f"![{title}]({path})", ""]
    notes = sorted({f"{r['point'].rsplit(' ', 1)[0]} ({t}): {e['note']}" for r in data.rows
                    for t, e in r["estimates"].items() if e.get("note")})
    if notes:
        parts += ["## Estimate notes", ""] + [f"- {n}" for n in notes] + [""]
    bad = [r for r in data.rows if r["status"] != "passed"]
    if bad:
        parts += ["## Failures", ""]
        for r in bad:
            parts.append(f"### {r['point']} ({r['status']})")
            parts.append("")
            parts += [f"- {p}" for p in r["problems"]] or ["- no result"]
            if r["first_mismatches"]:
                keys = list(r["first_mismatches"][0])
                parts += ["", "First mismatches:", "",
                          _md_table(keys, [[str(m.get(k)) for k in keys] for m in r["first_mismatches"]])]
            parts.append("")
    return "\n".join(parts).rstrip() + "\n"


def _front_line(r: dict[str, Any]) -> str:
    lat = f"{r['latency_ns']} ns" if r["latency_ns"] is not None else f"{r['latency_cycles']} clocks"
    area = f"{r['area']:.0f} cells" if r["area"] is not None else "area not estimated"
    rate = (f"{r['throughput_msps']} MS/s" if r["throughput_msps"] is not None
            else f"{1.0 / (r['cycles_per_sample'] or 1):g} samples per clock")
    dbfs = "-" if r["error_dbfs"] is None else f"{r['error_dbfs']:.1f} dBFS"
    return (f"{area}, latency {lat}, throughput {rate}, worst error {r['max_error_lsb']} LSB of "
            f"{r['worst_port_width']} bits ({dbfs})")


def to_junit(data: ReportData) -> str:
    """JUnit XML, one test case per point; a point fails on a mismatch or a missing estimate."""
    suite = ET.Element("testsuite", name=f"benchgen.sweep.{data.name}")
    failures = errors = 0
    for r in data.rows:
        case = ET.SubElement(suite, "testcase", classname=f"benchgen.sweep.{data.name}", name=r["point"])
        if r["status"] == "failed":
            failures += 1
            msg = "; ".join(r["problems"][:3]) or "verification failed"
            text = "\n".join(r["problems"]) + "\n" + "\n".join(json.dumps(m) for m in r["first_mismatches"])
            ET.SubElement(case, "failure", message=msg).text = text
        elif r["status"] in ("error", "not run"):
            errors += 1
            ET.SubElement(case, "error", message="; ".join(r["problems"][:1]) or r["status"]).text = "\n".join(r["problems"])
        else:
            bad = {t: e["error"] for t, e in r["estimates"].items() if "error" in e}
            if bad:
                errors += 1
                ET.SubElement(case, "error", message="estimate not made: " + "; ".join(f"{t}: {m}" for t, m in bad.items()))
        out = [f"worst error {r['max_error_lsb']} LSB, RMS {r['rms_error_lsb']} LSB, latency {r['latency_cycles']}"]
        out += [f"{t}: {json.dumps(e, sort_keys=True)}" for t, e in r["estimates"].items()]
        ET.SubElement(case, "system-out").text = "\n".join(out)
    suite.set("tests", str(len(data.rows)))
    suite.set("failures", str(failures))
    suite.set("errors", str(errors))
    ET.indent(suite)
    return '<?xml version="1.0" encoding="utf-8"?>\n' + ET.tostring(suite, encoding="unicode") + "\n"


# ----------------------------------------------------------------------------- HTML

_CSS = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:2em auto;max-width:1200px;color:#222;padding:0 1em}
h1{font-size:1.6em}h2{margin-top:1.6em;border-bottom:1px solid #ccc}
table{border-collapse:collapse;font-size:.85em;margin:.5em 0}
th,td{border:1px solid #ccc;padding:.25em .5em;text-align:right}th{background:#f0f0f0}
td:first-child,th:first-child{text-align:left}
tr.failed td,tr.error td{background:#fde2e2}tr.pareto td{font-weight:600}
.note{background:#fff8e0;border-left:4px solid #e0b000;padding:.5em 1em}
img{max-width:100%;height:auto;display:block;margin:.5em 0 1.5em}
code{background:#f4f4f4;padding:0 .2em}
"""


def _html_table(header: list[str], rows: list[list[str]], classes: list[str] | None = None) -> str:
    head = "".join(f"<th>{html.escape(h)}</th>" for h in header)
    body = []
    for k, r in enumerate(rows):
        cls = f' class="{classes[k]}"' if classes and classes[k] else ""
        body.append(f"<tr{cls}>" + "".join(f"<td>{html.escape(c)}</td>" for c in r) + "</tr>")
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def to_html(data: ReportData, plots: dict[str, bytes]) -> str:
    """One self-contained HTML file: tables, and every plot embedded as a PNG data URI."""
    spectra = data.verified_tones()
    cols = _summary_columns(data)
    classes = [" ".join(c for c in (r["status"], "pareto" if r["pareto"] else "") if c) for r in data.rows]
    parts = [
        "<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
        f"<title>Sweep report: {html.escape(data.name)}</title><style>{_CSS}</style></head><body>",
        f"<h1>Sweep report: {html.escape(data.name)}</h1>",
        (f"<p>{html.escape(_counts(data))} (sweep digest <code>{data.digest}</code>). "
         "Every point's outputs were compared bit for bit with the bit-true model; errors are against the ideal.</p>"),
    ]
    if data.targets:
        parts.append(f'<p class="note">{html.escape(estimate_note(data.targets))}</p>')
    parts += ["<h2>Points</h2>", ("<p>Bold rows are on the Pareto front of area, latency, throughput (samples per "
                                "second) and worst error in dB of full scale.</p>"),
              _html_table([h for _, h in cols], [[_cell(r, k) for k, _ in cols] for r in data.rows], classes)]
    if spectra:
        parts += ["<h2>Sine quality</h2>",
                  ("<p>Coherent tone through the bit-true model (verified bit for bit against the RTL by the "
                  "simulations above). SNR and SFDR per IEEE Std 1241; ideal SNR 6.02&nbsp;N&nbsp;+&nbsp;1.76&nbsp;dB "
                  "(Kester, MT-001).</p>"),
                  _html_table(["core", "N (bits)", "SNR dB", "ideal SNR dB", "SFDR dBc"],
                              [[s["label"], str(s["bits"]), f"{s['snr_db']:.2f}", f"{s['ideal_snr_db']:.2f}",
                                f"{s['sfdr_db']:.2f}"] for s in spectra])]
    nco = data.verified_nco_tones()
    if nco:
        parts += ["<h2>NCO spectrum</h2>", f"<p>{html.escape(NCO_NOTE)}</p>", _html_table(NCO_HEADER, _nco_rows(nco))]
    if plots:
        parts.append("<h2>Plots</h2>")
        for title, png in plots.items():
            uri = "data:image/png;base64," + base64.b64encode(png).decode("ascii")
            parts += [f"<h3>{html.escape(title)}</h3>", f'<img alt="{html.escape(title)}" src="{uri}">']
    notes = sorted({f"{r['point'].rsplit(' ', 1)[0]} ({t}): {e['note']}" for r in data.rows
                    for t, e in r["estimates"].items() if e.get("note")})
    if notes:
        parts += ["<h2>Estimate notes</h2><ul>", *(f"<li>{html.escape(n)}</li>" for n in notes), "</ul>"]
    bad = [r for r in data.rows if r["status"] != "passed"]
    if bad:
        parts.append("<h2>Failures</h2>")
        for r in bad:
            parts.append(f"<h3>{html.escape(r['point'])} ({html.escape(r['status'])})</h3><ul>")
            parts += [f"<li>{html.escape(p)}</li>" for p in r["problems"]]
            parts.append("</ul>")
            if r["first_mismatches"]:
                keys = list(r["first_mismatches"][0])
                parts += ["<p>First mismatches:</p>",
                          _html_table(keys, [[str(m.get(k)) for k in keys] for m in r["first_mismatches"]])]
    parts.append("</body></html>")
    return "\n".join(parts) + "\n"


# ----------------------------------------------------------------------------- writing


def write_reports(
    out_dir: str | Path,
    *,
    formats: Iterable[str] = ("table", "json", "csv", "md", "html", "junit"),
    wall_seconds: float | None = None,
    ran: int | None = None,
    stream: Any = None,
) -> list[Path]:
    """Write the chosen report formats into ``out_dir`` (``table`` prints to ``stream``).

    The files depend on the folder's records alone; ``wall_seconds`` and ``ran`` (the run that
    just finished) go only into the printed table.
    """
    out = Path(out_dir)
    data = collect(out)
    formats = set(formats)
    written: list[Path] = []

    def put(name: str, text: str | bytes) -> None:
        path = out / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(text, bytes):
            path.write_bytes(text)
        else:
            path.write_text(text, encoding="utf-8", newline="\n")
        written.append(path)

    if "json" in formats:
        put("report.json", to_json(data))
    if "csv" in formats:
        put("report.csv", to_csv(data))
    if "junit" in formats:
        put("junit.xml", to_junit(data))
    if "md" in formats or "html" in formats:
        plots = make_plots(data.rows, data.targets, data.axes, data.error_grids, data.verified_tones(),
                           data.verified_nco_tones())
        names = {title: f"plots/{_file_name(title)}.png" for title in plots}
        if "md" in formats:
            for title, png in plots.items():
                put(names[title], png)
            put("report.md", to_markdown(data, names))
        if "html" in formats:
            put("report.html", to_html(data, plots))
    if "table" in formats and stream is not None:
        stream.write(to_table(data, wall_seconds=wall_seconds, ran=ran) + "\n")
    return written


def _file_name(title: str) -> str:
    return "".join(c if c.isalnum() else "_" for c in title.lower()).strip("_")[:60]
