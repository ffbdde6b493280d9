"""Plots of a sweep report (matplotlib, Agg back end) and the sine-quality measurement.

Each plot is returned as PNG bytes, written with no timestamp or software tag so that the same
results give the same bytes. A plot that has nothing to show for a sweep (no estimates, no
pipelined cores) is left out rather than drawn empty.
"""

from __future__ import annotations

import io
import math
from collections.abc import Callable
from typing import Any

import numpy as np

from benchgen.report import ReportData

__all__ = ["make_plots", "model_error_grid", "sine_quality"]

MAX_PANELS = 4
SPECTRUM_FFT = 1 << 16


def _figure(rows: int, cols: int, width: float = 11.0, height: float = 3.4) -> tuple[Any, Any]:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(rows, cols, figsize=(width, height * rows), squeeze=False)
    return fig, axes


def _png(fig: Any) -> bytes:
    import matplotlib.pyplot as plt

    buf = io.BytesIO()
    fig.tight_layout()
    fig.savefig(buf, format="png", dpi=100, metadata={"Software": None})
    plt.close(fig)
    return buf.getvalue()


def _one_per_core(data: ReportData) -> list[dict[str, Any]]:
    seen: dict[str, dict[str, Any]] = {}
    for r in data.rows:
        if r["core_id"] not in seen or (r["status"] == "passed" and seen[r["core_id"]]["status"] != "passed"):
            seen[r["core_id"]] = r
    return list(seen.values())


def _series_key(row: dict[str, Any], x_field: str) -> str:
    parts = [f"{k}={v}" for k, v in row["axes"].items() if k != x_field]
    return ", ".join(parts) or "all"


def _series(rows: list[dict[str, Any]], x_field: str, y: Callable[[dict[str, Any]], Any]) -> dict[str, tuple[list[float], list[float]]]:
    out: dict[str, list[tuple[float, float]]] = {}
    for r in rows:
        xv, yv = r.get(x_field), y(r)
        if xv is None or yv is None:
            continue
        out.setdefault(_series_key(r, x_field), []).append((float(xv), float(yv)))
    return {k: ([p[0] for p in sorted(v)], [p[1] for p in sorted(v)]) for k, v in out.items()}


def _depth_axis(ax: Any, depths: list[float]) -> None:
    if depths and min(depths) > 0 and max(depths) / min(depths) >= 4:
        ax.set_xscale("log", base=2)
    ax.set_xticks(sorted(set(depths)))
    ax.set_xticklabels([f"{d:g}" for d in sorted(set(depths))])
    ax.set_xlabel("pipeline depth (register stages)")
    ax.grid(True, alpha=0.3)


def _line_panel(ax: Any, rows: list[dict[str, Any]], y: Callable[[dict[str, Any]], Any], ylabel: str,
                *, from_zero: bool = False) -> bool:
    series = _series(rows, "pipeline_depth", y)
    if not series:
        ax.set_visible(False)
        return False
    depths: list[float] = []
    for label, (xs, ys) in series.items():
        ax.plot(xs, ys, marker="o", label=label)
        depths += xs
    _depth_axis(ax, depths)
    ax.set_ylabel(ylabel)
    if from_zero:
        # Counts read against zero: a cropped axis would make a 10% change look like a doubling.
        ax.set_ylim(bottom=0)
    ax.legend(fontsize=8)
    return True


# ----------------------------------------------------------------------------- accuracy


def _spectral(function: str) -> bool:
    """Whether a function's outputs are a sinusoid of its angle (its spectrum is plotted)."""
    from benchgen.functions import function_named

    return function_named(function).spectral


def model_error_grid(core: dict[str, Any], iterations: list[int], guard_bits: list[int]) -> dict[int, dict[int, tuple[float, float]]]:
    """Worst and RMS error (LSB) of the bit-true model for each guard bits -> iterations.

    Measured on every input where the space is small, else on 2^16 of the sizing set's inputs.
    """
    from benchgen.config import parse_config
    from benchgen.errors import ConfigError
    from benchgen.functions import make_datapath, measure, sizing_inputs

    raw = {k: v for k, v in core.items() if k not in ("iterations", "guard_bits", "pipeline_depth", "iterations_per_cycle")}
    spec = parse_config(raw)
    # Every input where the space is small, else a slice of the sizing set: the curves show the
    # trend; the sizing in benchgen.design is what proves a core's budget.
    inputs, _ = sizing_inputs(make_datapath(spec, max(iterations), max(guard_bits)))
    count = len(next(iter(inputs.values())))
    step = max(1, count // 65536)
    inputs = {k: v[::step] for k, v in inputs.items()}
    grid: dict[int, dict[int, tuple[float, float]]] = {}
    for g in guard_bits:
        for n in iterations:
            try:
                dp = make_datapath(spec, n, g)
            except ConfigError:
                continue
            s = measure(dp, inputs)
            grid.setdefault(g, {})[n] = (s.max_error_lsb, s.rms_error_lsb)
    return grid


def _error_plot(data: ReportData) -> bytes | None:
    cores = [r for r in _one_per_core(data) if _spectral(r["function"]) and r["iterations"]]
    if not cores:
        return None
    widths = sorted({r["data_width"] for r in cores})[:3]
    fig, axes = _figure(len(widths), 2)
    for i, width in enumerate(widths):
        at_width = [r for r in cores if r["data_width"] == width]
        its = sorted({r["iterations"] for r in at_width})
        gbs = sorted({r["guard_bits"] for r in at_width})
        n_range = list(range(max(4, min(its) - 6), max(its) + 3))
        g_list = sorted(set(gbs) | {0, 2, max(0, math.ceil(math.log2(max(its))))})[:6]
        grid = model_error_grid(_core_of(data, at_width[0]), n_range, g_list)
        for col, (idx, name) in enumerate(((0, "worst"), (1, "RMS"))):
            ax = axes[i][col]
            for g in g_list:
                pts = sorted(grid.get(g, {}).items())
                if pts:
                    ax.plot([p[0] for p in pts], [p[1][idx] for p in pts], marker=".", label=f"model, {g} guard bits")
            measured = [(r["iterations"], r["max_error_lsb" if idx == 0 else "rms_error_lsb"]) for r in data.rows
                        if r["data_width"] == width and _spectral(r["function"]) and r["max_error_lsb"] is not None]
            if measured:
                ax.scatter([m[0] for m in measured], [m[1] for m in measured], marker="x", s=60, color="black",
                           zorder=5, label="simulated points")
            if idx == 0:
                budget = at_width[0]["budget_lsb"]
                if budget:
                    ax.axhline(budget, color="red", linestyle="--", linewidth=1, label=f"budget {budget:g} LSB")
                ax.axhline(0.5, color="grey", linestyle=":", linewidth=1, label="0.5 LSB (correct rounding)")
            else:
                ax.axhline(1 / math.sqrt(12), color="grey", linestyle=":", linewidth=1, label="0.289 LSB (ideal rounding)")
            ax.set_yscale("log")
            from matplotlib.ticker import FormatStrFormatter, NullFormatter

            ax.yaxis.set_major_formatter(FormatStrFormatter("%g"))
            ax.yaxis.set_minor_formatter(NullFormatter())
            ax.set_xlabel("iterations")
            ax.set_ylabel(f"{name} error (output LSB)")
            ax.set_title(f"{width}-bit outputs: {name} error against the ideal")
            ax.grid(True, which="both", alpha=0.3)
            ax.legend(fontsize=7, ncol=2)
    return _png(fig)


def _core_of(data: ReportData, row: dict[str, Any]) -> dict[str, Any]:
    return {
        "name": "core",
        "function": row["function"],
        "architecture": "pipelined",
        "angle_width": row["angle_width"],
        "data_width": row["data_width"],
        "rounding": row["rounding"],
        "max_error_lsb": 1e6,
    }


# ----------------------------------------------------------------------------- timing, resources


def _latency_plot(data: ReportData) -> bytes | None:
    rows = [r for r in _one_per_core(data) if r["architecture"] == "pipelined" and r["pipeline_depth"]]
    if not rows:
        return None
    has_fmax = any(r["latency_ns"] is not None for r in rows)
    n = 3 if has_fmax else 2
    fig, axes = _figure(1, n, height=3.8)
    _line_panel(axes[0][0], rows, lambda r: r["latency_cycles"] or r["expected_latency_cycles"], "latency (clocks)")
    axes[0][0].set_title("latency in clocks")
    if has_fmax:
        t = next(r["fmax_target"] for r in rows if r["latency_ns"] is not None)
        _line_panel(axes[0][1], rows, lambda r: r["latency_ns"], f"latency (ns) at {t} Fmax estimate")
        axes[0][1].set_title(f"latency in time ({t} estimate)")
        _line_panel(axes[0][2], rows, lambda r: r["throughput_msps"], "throughput (Msamples/s)")
        axes[0][2].set_title(f"throughput ({t} Fmax estimate / clocks per sample)")
    else:
        _line_panel(axes[0][1], rows, lambda r: 1.0 / (r["cycles_per_sample"] or 1), "samples per clock")
        axes[0][1].set_title("throughput (samples per clock)")
    return _png(fig)


def _resource_plot(data: ReportData) -> bytes | None:
    rows = [r for r in _one_per_core(data) if r["architecture"] == "pipelined" and r["pipeline_depth"]]
    if not rows or not data.targets:
        return None
    panels = [("luts", "LUT4"), ("ffs", "flip-flops"), ("carry", "carry cells"), ("fmax_mhz", "Fmax (MHz)")]
    fig, axes = _figure(len(data.targets), len(panels), width=14, height=3.3)
    drew = False
    for i, t in enumerate(data.targets):
        for j, (key, name) in enumerate(panels):
            column = f"{t}_{key}"

            def value(r: dict[str, Any], k: str = column) -> Any:
                return r.get(k)

            ok = _line_panel(axes[i][j], rows, value, name, from_zero=True)
            if ok:
                axes[i][j].set_title(f"{t}: {name} (estimate)")
                drew = True
    if not drew:
        import matplotlib.pyplot as plt

        plt.close(fig)
        return None
    return _png(fig)


def _pareto_plot(data: ReportData) -> bytes | None:
    rows = [r for r in _one_per_core(data) if r["status"] == "passed"]
    if len(rows) < 2:
        return None
    with_area = all(r["area"] is not None for r in rows)
    use_ns = all(r["latency_ns"] is not None for r in rows)
    lat = [r["latency_ns"] if use_ns else r["latency_cycles"] for r in rows]
    err = [max(q["max_error_lsb"] for q in data.rows if q["core_id"] == r["core_id"] and q["status"] == "passed")
           for r in rows]
    fig, axes = _figure(1, 1, width=9, height=6)
    ax = axes[0][0]
    if with_area:
        x = [r["area"] for r in rows]
        sc = ax.scatter(x, lat, c=err, cmap="viridis", s=60, zorder=3)
        fig.colorbar(sc, ax=ax, label="worst error (LSB)")
        ax.set_xlabel(f"area: {data.targets[0]} logic cells (estimate)")
        y = lat
    else:
        x = lat
        y = err
        ax.scatter(x, y, s=60, zorder=3)
        ax.set_xlabel("latency (ns)" if use_ns else "latency (clocks)")
    front = [r["pareto"] for r in rows]
    fx = [xv for xv, f in zip(x, front, strict=True) if f]
    fy = [yv for yv, f in zip(y, front, strict=True) if f]
    ax.scatter(fx, fy, s=220, facecolors="none", edgecolors="red", linewidths=2, zorder=4, label="on the Pareto front")
    for r, xv, yv, f in zip(rows, x, y, front, strict=True):
        label = ", ".join(f"{v}" for v in r["axes"].values())
        ax.annotate(label, (xv, yv), textcoords="offset points", xytext=(6, 6), fontsize=7 if f else 6,
                    color="black" if f else "grey", fontweight="bold" if f else "normal")
    ax.text(0.01, 0.01, "labels: " + ", ".join(data.axes), transform=ax.transAxes, fontsize=7, color="grey")
    ax.set_ylabel(("latency (ns)" if use_ns else "latency (clocks)") if with_area else "worst error (LSB)")
    ax.set_title("Pareto front: area x latency x worst error (all minimised)" if with_area
                 else "Pareto front: latency x worst error")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8)
    return _png(fig)


# ----------------------------------------------------------------------------- sine quality


def _coherent_cycles(n_fft: int) -> int:
    """A prime near n_fft/16 (4099 for 2**16, as in FACTS.md)."""
    target = max(3, n_fft // 16 + 3)
    for c in range(target, 2, -1):
        if c % 2 and all(c % d for d in range(3, int(c**0.5) + 1, 2)):
            return c
    return 3


def sine_quality(data: ReportData) -> list[dict[str, Any]]:
    """SNR/SFDR of a coherent tone through the bit-true model, one per distinct sine data path."""
    from benchgen.config import parse_config
    from benchgen.design import build_design
    from benchgen.functions import function_named
    from benchgen.spectrum import analyse_tone, coherent_phase_codes, ideal_snr_db

    seen: dict[tuple[Any, ...], dict[str, Any]] = {}
    for r in _one_per_core(data):
        if not _spectral(r["function"]) or r["status"] != "passed":
            continue
        key = (r["angle_width"], r["data_width"], r["iterations"], r["guard_bits"], r["rounding"])
        if key in seen or len(seen) >= MAX_PANELS:
            continue
        core = _core_of(data, r) | {"iterations": r["iterations"], "guard_bits": r["guard_bits"]}
        dp = build_design(parse_config(core)).datapath
        n_fft = min(SPECTRUM_FFT, 1 << dp.angle_width)
        cycles = _coherent_cycles(n_fft)
        sine = function_named(r["function"]).tone(dp, coherent_phase_codes(dp.angle_width, n_fft, cycles))
        spec = analyse_tone(np.asarray(sine, dtype=np.float64), cycles)
        seen[key] = {
            "label": f"{dp.data_width}-bit out, {dp.angle_width}-bit angle, {dp.iterations} it., {dp.guard_bits} guard",
            "bits": dp.data_width,
            "snr_db": round(spec.snr_db, 2),
            "sfdr_db": round(spec.sfdr_db, 2),
            "ideal_snr_db": round(ideal_snr_db(dp.data_width), 2),
            "n_fft": n_fft,
            "cycles": cycles,
            "_dbc": spec.dbc,
        }
    return list(seen.values())


def _spectrum_plot(spectra: list[dict[str, Any]]) -> bytes | None:
    if not spectra:
        return None
    fig, axes = _figure(len(spectra), 1, width=11, height=3.0)
    for ax_row, s in zip(axes, spectra, strict=True):
        ax = ax_row[0]
        dbc = s["_dbc"]
        f = np.arange(dbc.size) / s["n_fft"]
        floor = max(float(np.min(dbc)), -200.0)
        ax.plot(f, np.maximum(dbc, floor), linewidth=0.5)
        ax.axhline(-s["sfdr_db"], color="red", linestyle="--", linewidth=1, label=f"largest spur: SFDR {s['sfdr_db']:.1f} dBc")
        ax.set_ylim(floor - 5, 5)
        ax.set_xlim(0, 0.5)
        ax.set_xlabel("frequency (fraction of the sample rate)")
        ax.set_ylabel("dBc")
        ax.set_title(f"{s['label']}: {s['cycles']} cycles in {s['n_fft']} samples")
        ax.text(0.99, 0.95, f"SNR {s['snr_db']:.2f} dB; ideal 6.02 N + 1.76 = {s['ideal_snr_db']:.2f} dB "
                f"(Kester MT-001)\nSFDR {s['sfdr_db']:.1f} dBc", transform=ax.transAxes, ha="right", va="top",
                fontsize=8, bbox={"facecolor": "white", "alpha": 0.85, "edgecolor": "#ccc"})
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize=8, loc="lower right")
    return _png(fig)


def make_plots(data: ReportData, spectra: list[dict[str, Any]]) -> dict[str, bytes]:
    """Every plot that has something to show, by title."""
    plots: dict[str, bytes | None] = {
        "Error against iterations and guard bits": _error_plot(data),
        "Latency and throughput against pipeline depth": _latency_plot(data),
        "Resources and Fmax against pipeline depth": _resource_plot(data),
        "Pareto front": _pareto_plot(data),
        "Spectrum of a coherent tone": _spectrum_plot(spectra),
    }
    return {k: v for k, v in plots.items() if v is not None}
