"""Plots of a sweep report (matplotlib, Agg back end), drawn from plain data: nothing is computed here.

The report's rows (:func:`benchgen.report.collect`) and the sweep's model analysis (error grids
and tones, measured by :mod:`benchgen.sweep_analysis` and read back from ``model_analysis.json``)
come in as lists of dictionaries; this module imports nothing of benchgen.

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

__all__ = ["make_plots", "one_per_core"]

Row = dict[str, Any]


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


def one_per_core(rows: list[Row]) -> list[Row]:
    """One row per core: a passed one where the core has one."""
    seen: dict[str, Row] = {}
    for r in rows:
        if r["core_id"] not in seen or (r["status"] == "passed" and seen[r["core_id"]]["status"] != "passed"):
            seen[r["core_id"]] = r
    return list(seen.values())


def _series_key(row: dict[str, Any], x_field: str) -> str:
    """The legend label of a row's line: the other axes' values ("" when the x axis is the only one)."""
    return ", ".join(f"{k}={v}" for k, v in row["axes"].items() if k != x_field)


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
        ax.plot(xs, ys, marker="o", label=label or "_nolegend_")
        depths += xs
    _depth_axis(ax, depths)
    ax.set_ylabel(ylabel)
    if from_zero:
        # Counts read against zero: a cropped axis would make a 10% change look like a doubling.
        ax.set_ylim(bottom=0)
    if any(series):
        # A sweep that varies only the x axis draws one line: a legend could only say "all".
        ax.legend(fontsize=8)
    return True


# ----------------------------------------------------------------------------- accuracy


def _error_plot(rows: list[Row], grids: list[dict[str, Any]]) -> bytes | None:
    """For each function and output width, the model's error curves with the simulated points on them."""
    if not grids:
        return None
    fig, axes = _figure(len(grids), 2)
    for i, grid in enumerate(grids):
        function, width, cores = grid["function"], grid["data_width"], set(grid["core_ids"])
        for col, (key, name) in enumerate((("max_error_lsb", "worst"), ("rms_error_lsb", "RMS"))):
            ax = axes[i][col]
            for curve in grid["curves"]:
                ax.plot(curve["iterations"], curve[key], marker=".", label=f"model, {curve['guard_bits']} guard bits")
            measured = [(r["iterations"], r[key]) for r in rows if r["core_id"] in cores and r["max_error_lsb"] is not None]
            if measured:
                ax.scatter([m[0] for m in measured], [m[1] for m in measured], marker="x", s=60, color="black",
                           zorder=5, label="simulated points")
            if col == 0:
                budget = grid["budget_lsb"]
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
            ax.set_title(f"{function}, {width}-bit data: {name} error against the ideal", fontsize=10)
            ax.grid(True, which="both", alpha=0.3)
            ax.legend(fontsize=7, ncol=2)
    return _png(fig)


# ----------------------------------------------------------------------------- timing, resources


def _latency_plot(all_rows: list[Row]) -> bytes | None:
    fig = _latency_figure(all_rows)
    return None if fig is None else _png(fig)


def _latency_figure(all_rows: list[Row]) -> Any:
    rows = [r for r in one_per_core(all_rows) if r["architecture"] == "pipelined" and r["pipeline_depth"]]
    if not rows:
        return None
    has_fmax = any(r["latency_ns"] is not None for r in rows)
    n = 3 if has_fmax else 2
    # Short titles, the Fmax source on a second line: three panels side by side leave each title
    # about a third of the width (tests/test_report.py checks they stand apart).
    fig, axes = _figure(1, n, width=14 if has_fmax else 11, height=3.8)
    _line_panel(axes[0][0], rows, lambda r: r["latency_cycles"] or r["expected_latency_cycles"], "latency (clocks)")
    axes[0][0].set_title("latency in clocks", fontsize=10)
    if has_fmax:
        t = next(r["fmax_target"] for r in rows if r["latency_ns"] is not None)
        _line_panel(axes[0][1], rows, lambda r: r["latency_ns"], "latency (ns)")
        axes[0][1].set_title(f"latency in time\n(at the {t} Fmax estimate)", fontsize=10)
        _line_panel(axes[0][2], rows, lambda r: r["throughput_msps"], "throughput (Msamples/s)")
        axes[0][2].set_title(f"throughput\n({t} Fmax estimate / clocks per sample)", fontsize=10)
    else:
        _line_panel(axes[0][1], rows, lambda r: 1.0 / (r["cycles_per_sample"] or 1), "samples per clock")
        axes[0][1].set_title("throughput (samples per clock)", fontsize=10)
    return fig


def _resource_plot(all_rows: list[Row], targets: list[str]) -> bytes | None:
    rows = [r for r in one_per_core(all_rows) if r["architecture"] == "pipelined" and r["pipeline_depth"]]
    if not rows or not targets:
        return None
    panels = [("luts", "LUT4"), ("ffs", "flip-flops"), ("carry", "carry cells"), ("fmax_mhz", "Fmax (MHz)")]
    fig, axes = _figure(len(targets), len(panels), width=14, height=3.3)
    drew = False
    for i, t in enumerate(targets):
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


def _pareto_plot(all_rows: list[Row], targets: list[str], axis_names: list[str]) -> bytes | None:
    rows = [r for r in one_per_core(all_rows) if r["status"] == "passed"]
    if len(rows) < 2:
        return None
    with_area = all(r["area"] is not None for r in rows)
    use_ns = all(r["latency_ns"] is not None and r["throughput_msps"] is not None for r in rows)
    lat = [r["latency_ns"] if use_ns else r["latency_cycles"] for r in rows]
    rate = [r["throughput_msps"] if use_ns else 1.0 / (r["cycles_per_sample"] or 1) for r in rows]
    rate_unit = "MS/s" if use_ns else "samples/clock"
    # The worst over the core's simulators, on the one scale the front is judged on (dBFS).
    err = []
    for r in rows:
        values = [q["error_dbfs"] for q in all_rows if q["core_id"] == r["core_id"] and q["status"] == "passed"]
        known = [v for v in values if v is not None]
        err.append(max(known) if known else float("nan"))
    fig, axes = _figure(1, 1, width=9, height=6)
    ax = axes[0][0]
    if with_area:
        x = [r["area"] for r in rows]
        sc = ax.scatter(x, lat, c=err, cmap="viridis_r", s=60, zorder=3)
        fig.colorbar(sc, ax=ax, label="worst error (dB of full scale; lower is better)")
        ax.set_xlabel(f"area: {targets[0]} logic cells (estimate)")
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
    for r, xv, yv, f, tp in zip(rows, x, y, front, rate, strict=True):
        label = ", ".join(f"{v}" for v in r["axes"].values()) + f" ({tp:g} {rate_unit})"
        ax.annotate(label, (xv, yv), textcoords="offset points", xytext=(6, 6), fontsize=7 if f else 6,
                    color="black" if f else "grey", fontweight="bold" if f else "normal")
    ax.text(0.01, 0.01, "labels: " + ", ".join(axis_names) + f" (throughput in {rate_unit})", transform=ax.transAxes,
            fontsize=7, color="grey")
    ax.set_ylabel(("latency (ns)" if use_ns else "latency (clocks)") if with_area
                  else "worst error (dB of full scale)")
    ax.set_title("Pareto front: area, latency, throughput (max) and worst error in dBFS" if with_area
                 else "Pareto front: latency, throughput (max) and worst error in dBFS")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8)
    return _png(fig)


# ----------------------------------------------------------------------------- sine quality


def _spectrum_plot(tones: list[dict[str, Any]]) -> bytes | None:
    """Each tone's spectrum: per bin, the band from its lowest to its highest FFT level."""
    if not tones:
        return None
    fig, axes = _figure(len(tones), 1, width=11, height=3.0)
    for ax_row, s in zip(axes, tones, strict=True):
        ax = ax_row[0]
        low, high = np.asarray(s["bin_low_dbc"]), np.asarray(s["bin_high_dbc"])
        floor = max(float(np.min(low)), -200.0)
        f = np.asarray(s["bin_start"] + [s["n_fft"] // 2 + 1], dtype=np.float64) / s["n_fft"]
        # One step per bin; the last level is repeated so the band reaches the last bin's end.
        ax.fill_between(f, np.maximum(np.append(low, low[-1]), floor), np.maximum(np.append(high, high[-1]), floor),
                        step="post", linewidth=0.5, color="C0")
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


# ----------------------------------------------------------------------------- NCO spectrum

#: NCO spectra drawn (one panel each); every measured NCO is a point of the SFDR plot.
MAX_NCO_SPECTRA = 4


def _word(tone: dict[str, Any], which: str) -> dict[str, Any] | None:
    return next((w for w in tone["words"] if w["word"] == which), None)


def _nco_spectrum_plot(tones: list[dict[str, Any]]) -> bytes | None:
    """Each NCO's complex spectrum at its worst truncation word, with the prediction beside it."""
    if not tones:
        return None
    shown = tones[:MAX_NCO_SPECTRA]
    fig, axes = _figure(len(shown), 1, width=11, height=3.2)
    for ax_row, t in zip(axes, shown, strict=True):
        ax = ax_row[0]
        w = _word(t, t["spectrum_word"])
        assert w is not None  # the record's schema holds the spectrum's word
        low, high = np.asarray(t["bin_low_dbc"]), np.asarray(t["bin_high_dbc"])
        floor = max(float(np.min(low)), -200.0)
        f = np.asarray(t["bin_start"] + [w["n_fft"] // 2], dtype=np.float64) / w["n_fft"]
        ax.fill_between(f, np.maximum(np.append(low, low[-1]), floor), np.maximum(np.append(high, high[-1]), floor),
                        step="post", linewidth=0.5, color="C0")
        ax.axhline(-w["sfdr_db"], color="red", linestyle="--", linewidth=1,
                   label=f"largest spur: SFDR {w['sfdr_db']:.2f} dBc (measured)")
        if w["predicted_sfdr_db"] is not None:
            ax.axhline(-w["predicted_sfdr_db"], color="green", linestyle=":", linewidth=1.5,
                       label=f"predicted {w['predicted_sfdr_db']:.2f} dBc: {w['sfdr_source']}")
        ax.set_ylim(floor - 5, 5)
        ax.set_xlim(-0.5, 0.5)
        ax.set_xlabel("frequency (fraction of f_clk; cos + j sin, complex FFT)")
        ax.set_ylabel("dBc")
        what = "worst truncation word (M = 2)" if w["word"] == "worst" else "exact word (no bit dropped)"
        ax.set_title(f"NCO, {t['label']}: {what}, bin {w['cycles']} of {w['n_fft']}", fontsize=10)
        lines = [f"SNR {w['snr_db']:.2f} dB (predicted {w['predicted_snr_db']:.2f})"]
        if w["undithered_sfdr_db"] is not None:
            lines.append(f"without dither: SFDR {w['undithered_sfdr_db']:.2f} dBc, SNR {w['undithered_snr_db']:.2f} dB")
        exact = _word(t, "exact")
        if exact is not None and w["word"] != "exact":
            lines.append(f"exact word: SFDR {exact['sfdr_db']:.2f} dBc, SNR {exact['snr_db']:.2f} dB "
                         f"(ideal 6.02 N + 1.76 = {t['ideal_snr_db']:.2f}, Kester MT-001)")
        lines.append(f"frequency error {w['freq_error']:.3g} f_clk (resolution f_clk / 2^{t['acc_width']})")
        ax.text(0.99, 0.95, "\n".join(lines), transform=ax.transAxes, ha="right", va="top", fontsize=7,
                bbox={"facecolor": "white", "alpha": 0.85, "edgecolor": "#ccc"})
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize=7, loc="lower left")
    return _png(fig)


def _sfdr_phase_bits_figure(tones: list[dict[str, Any]]) -> Any:
    """Measured worst-word SFDR of each NCO against its phase bits, beside Nicholas-Samueli.

    Undithered and dithered NCOs are marked apart; a dithered one's prediction (its noise peak)
    is drawn as a hollow marker; the exact words show the core's own ceiling. None when no NCO
    has a worst word measured.
    """
    worst = [(t, _word(t, "worst")) for t in tones]
    measured = [(t, w) for t, w in worst if w is not None]
    if not measured:
        return None
    fig, axes = _figure(1, 1, width=9, height=5.5)
    ax = axes[0][0]
    ps = sorted({t["phase_bits"] for t, _ in measured})
    line = np.linspace(ps[0] - 0.5, ps[-1] + 0.5, 50)
    ax.plot(line, 6.02 * line - 3.92, color="black", linestyle="--", linewidth=1, gid="nicholas_samueli",
            label="-(6.02 P - 3.92) dBc, worst truncation spur (Nicholas and Samueli 1987)")
    plain = [(t["phase_bits"], w["sfdr_db"]) for t, w in measured if t["dither_width"] == 0]
    dithered = [(t["phase_bits"], w["sfdr_db"], w["predicted_sfdr_db"]) for t, w in measured if t["dither_width"]]
    if plain:
        ax.scatter([p for p, _ in plain], [v for _, v in plain], marker="o", s=50, color="C0", zorder=4,
                   gid="measured_undithered", label="measured, worst word (M = 2), no dither")
    if dithered:
        ax.scatter([p for p, _, _ in dithered], [v for _, v, _ in dithered], marker="^", s=60, color="C1",
                   zorder=4, gid="measured_dithered", label="measured, worst word (M = 2), with dither")
        ax.scatter([p for p, _, _ in dithered], [v for _, _, v in dithered], marker="^", s=110, facecolors="none",
                   edgecolors="C1", zorder=3, gid="predicted_dithered",
                   label="predicted with dither: noise peak (derived here, docs/nco.md)")
    exact = [(t["phase_bits"], w["sfdr_db"]) for t in tones for w in [_word(t, "exact")] if w is not None]
    if exact:
        ax.scatter([p for p, _ in exact], [v for _, v in exact], marker="x", s=40, color="grey", zorder=2,
                   gid="exact", label="exact word (no bit dropped): the core's amplitude spurs")
    ax.set_xticks(ps)
    ax.set_xlabel("phase bits P kept from the accumulator (angle_width)")
    ax.set_ylabel("SFDR (dBc), bit-true NCO model")
    ax.set_title("SFDR against phase bits (whole NCO: accumulator, truncation, dither, core; "
                 "coherent, IEEE Std 1241)", fontsize=9)
    ax.grid(True, alpha=0.3)
    # Below the line on the right: the points rise with P, so that corner stays empty.
    ax.legend(fontsize=7, loc="lower right")
    return fig


def _sfdr_phase_bits_plot(tones: list[dict[str, Any]]) -> bytes | None:
    fig = _sfdr_phase_bits_figure(tones)
    return None if fig is None else _png(fig)


def make_plots(rows: list[Row], targets: list[str], axis_names: list[str], grids: list[dict[str, Any]],
               tones: list[dict[str, Any]], nco_tones: list[dict[str, Any]] | None = None) -> dict[str, bytes]:
    """Every plot that has something to show, by title.

    Args:
        rows: The report's rows (one per point).
        targets: Estimate targets.
        axis_names: The fields the sweep varies (they label the Pareto points).
        grids: The model's error grids, one per function and output width.
        tones: The tones to show (their spectra, one panel each).
        nco_tones: The NCOs to show (a spectrum panel each, the first four, and a point each in
            the SFDR-against-phase-bits plot).
    """
    nco = nco_tones or []
    plots: dict[str, bytes | None] = {
        "Error against iterations and guard bits": _error_plot(rows, grids),
        "Latency and throughput against pipeline depth": _latency_plot(rows),
        "Resources and Fmax against pipeline depth": _resource_plot(rows, targets),
        "Pareto front": _pareto_plot(rows, targets, axis_names),
        "Spectrum of a coherent tone": _spectrum_plot(tones),
        "Spectrum of the NCO at its worst truncation word": _nco_spectrum_plot(nco),
        "SFDR against phase bits": _sfdr_phase_bits_plot(nco),
    }
    return {k: v for k, v in plots.items() if v is not None}
