"""What the bit-true model says about a sweep's cores, measured once per sweep for its report.

Two views of a sweep that no single point gives, both from the model alone (the simulations have
already shown, point by point, that the RTL equals the model bit for bit):

* **Error grids**: for each function and output width (the first :data:`MAX_GRID_WIDTHS`, in
  sweep order), the worst and RMS error against the ideal over a range of iterations and guard
  bits around the sweep's own cores, so the report can draw the curves its simulated points sit
  on. Any function: its model against its ideal, judged as the bench judges it
  (:func:`benchgen.functions.measure`).
* **Tones**: SNR, SFDR and the spectrum of a coherent tone through each distinct data path of a
  spectral function (the first :data:`MAX_TONES`), as IEEE Std 1241 measures them.

The sweep computes this when it starts (from its points alone, not from their results, so an
interrupted sweep or a shard has it too) and writes it to ``model_analysis.json``
(:mod:`benchgen.sweep_records` holds its schema); the report only reads and draws it. It is a
function of the sweep's points and benchgen's code: the same sweep gives the same bytes.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from typing import Any

import numpy as np

from benchgen.config import parse_config
from benchgen.design import Design, build_design
from benchgen.errors import ConfigError
from benchgen.functions import function_named, make_datapath, measure, sizing_inputs
from benchgen.spectrum import analyse_tone, coherent_phase_codes, ideal_snr_db

__all__ = ["MAX_GRID_WIDTHS", "MAX_TONES", "SPECTRUM_BINS", "analyse_models"]

#: (function, output width) pairs that get an error grid (one row of plots each).
MAX_GRID_WIDTHS = 3
#: Distinct data paths whose tone is measured (one spectrum panel each).
MAX_TONES = 4
#: Longest record the tone is measured over.
SPECTRUM_FFT = 1 << 16
#: Bins the spectrum is kept in: each keeps the lowest and highest level of the FFT bins it
#: covers, which is what a line through all of them shows at a plot's resolution, at a small
#: fraction of the size (32769 levels for a 2^16-point FFT).
SPECTRUM_BINS = 1024
#: Inputs the error grid measures on at most (a slice of the sizing set when the space is larger).
GRID_INPUTS = 1 << 16
#: Fields that size or shape a core without changing its arithmetic: the grid varies the first
#: two itself, and the model is the same at every depth and architecture.
_SIZING_FIELDS = ("iterations", "guard_bits", "pipeline_depth", "iterations_per_cycle", "architecture")


def _coherent_cycles(n_fft: int) -> int:
    """A prime near n_fft/16 (4099 for 2**16, as in FACTS.md)."""
    target = max(3, n_fft // 16 + 3)
    for c in range(target, 2, -1):
        if c % 2 and all(c % d for d in range(3, int(c**0.5) + 1, 2)):
            return c
    return 3


def _designs(cores: Iterable[tuple[str, Mapping[str, Any]]]) -> list[tuple[str, Mapping[str, Any], Design]]:
    """Each distinct core, sized as ``benchgen generate`` sizes it."""
    out = []
    for core_id, core in cores:
        try:
            design = build_design(parse_config(dict(core)))
        except ConfigError:
            continue  # the sweep refuses such a point before it runs; nothing to show for it
        out.append((core_id, core, design))
    return out


def _error_grid(core: Mapping[str, Any], design: Design, its: list[int], gbs: list[int]) -> list[dict[str, Any]]:
    """Worst and RMS error (LSB) of the model over iterations for each guard bits.

    Measured on every input where the space is small, else on a slice of 2^16 of the sizing
    set's inputs: the curves show the trend; the sizing in :mod:`benchgen.design` is what proves
    each core's budget.
    """
    raw = {k: v for k, v in core.items() if k not in _SIZING_FIELDS}
    raw["max_error_lsb"] = 1e6  # every size is measured, whether it meets the core's budget or not
    spec = parse_config(raw)
    n_range = list(range(max(4, min(its) - 6), max(its) + 3))
    g_list = sorted(set(gbs) | {0, 2, max(0, math.ceil(math.log2(max(its))))})[:6]
    # The core's own inputs: which ones the sizing uses does not depend on the size.
    inputs, _ = sizing_inputs(design.datapath)
    count = len(next(iter(inputs.values())))
    step = max(1, count // GRID_INPUTS)
    inputs = {k: v[::step] for k, v in inputs.items()}
    curves = []
    for g in g_list:
        points: list[tuple[int, float, float]] = []
        for n in n_range:
            try:
                dp = make_datapath(spec, n, g)
            except ConfigError:
                continue  # too wide for the core's internal width: no such core
            s = measure(dp, inputs)
            points.append((n, float(s.max_error_lsb), float(s.rms_error_lsb)))
        if points:
            curves.append({
                "guard_bits": g,
                "iterations": [p[0] for p in points],
                "max_error_lsb": [p[1] for p in points],
                "rms_error_lsb": [p[2] for p in points],
            })
    return curves


def _tone(design: Design) -> dict[str, Any]:
    dp = design.datapath
    n_fft = min(SPECTRUM_FFT, 1 << dp.angle_width)
    cycles = _coherent_cycles(n_fft)
    sine = function_named(design.spec.function).tone(dp, coherent_phase_codes(dp.angle_width, n_fft, cycles))
    spec = analyse_tone(np.asarray(sine, dtype=np.float64), cycles)
    dbc = spec.dbc
    edges = np.linspace(0, dbc.size, min(SPECTRUM_BINS, dbc.size) + 1).astype(np.int64)
    lows = np.minimum.reduceat(dbc, edges[:-1])
    highs = np.maximum.reduceat(dbc, edges[:-1])
    return {
        "label": f"{dp.data_width}-bit out, {dp.angle_width}-bit angle, {dp.iterations} it., {dp.guard_bits} guard",
        "bits": dp.data_width,
        "snr_db": round(spec.snr_db, 2),
        "sfdr_db": round(spec.sfdr_db, 2),
        "ideal_snr_db": round(ideal_snr_db(dp.data_width), 2),
        "n_fft": n_fft,
        "cycles": cycles,
        # Levels to 0.001 dB: far finer than a plot shows, and short in JSON.
        "bin_start": [int(e) for e in edges[:-1]],
        "bin_low_dbc": [round(float(v), 3) for v in lows],
        "bin_high_dbc": [round(float(v), 3) for v in highs],
    }


def analyse_models(cores: Iterable[tuple[str, Mapping[str, Any]]]) -> dict[str, Any]:
    """Error grids and tones for a sweep's distinct cores (``(core_id, config)`` in sweep order).

    Returns:
        ``{"error_grids": [...], "tones": [...]}``, as :class:`benchgen.sweep_records.ModelAnalysisRecord`
        describes; each entry names the ``core_ids`` it stands for, so the report can show only
        those whose simulations passed.
    """
    designs = _designs(cores)
    grids = []
    # One grid per function and output width, in the sweep's order: a sweep of several functions
    # shows each one's curves (a 16-bit atan2 and a 16-bit sincos are different curves).
    groups = list(dict.fromkeys((d.spec.function, d.spec.data_width) for _, _, d in designs))[:MAX_GRID_WIDTHS]
    for function, width in groups:
        at_width = [(cid, core, d) for cid, core, d in designs
                    if (d.spec.function, d.spec.data_width) == (function, width)]
        its = sorted({d.datapath.iterations for _, _, d in at_width})
        gbs = sorted({d.datapath.guard_bits for _, _, d in at_width})
        first = at_width[0]
        grids.append({
            "function": function,
            "data_width": width,
            "budget_lsb": float(first[2].spec.max_error_lsb),
            "core_ids": [cid for cid, _, _ in at_width],
            "curves": _error_grid(first[1], first[2], its, gbs),
        })
    tones: dict[tuple[Any, ...], dict[str, Any]] = {}
    for core_id, _, design in designs:
        if not function_named(design.spec.function).spectral:
            continue
        dp = design.datapath
        key = (design.spec.function, dp.angle_width, dp.data_width, dp.iterations, dp.guard_bits, design.spec.rounding)
        if key in tones:
            tones[key]["core_ids"].append(core_id)
        elif len(tones) < MAX_TONES:
            tones[key] = {**_tone(design), "core_ids": [core_id]}
    return {"error_grids": grids, "tones": list(tones.values())}
