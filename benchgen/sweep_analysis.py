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
* **NCO tones**: for a core with a phase accumulator in front of its sine/cosine core (an NCO),
  a tone of phase codes fed straight to the core would leave out what sets its spectrum, the
  accumulator, the truncation to ``P`` phase bits and the dither. So each distinct phase path
  and core (the first :data:`MAX_NCO_TONES`) runs the whole NCO model (:func:`benchgen.nco.run`)
  at two coherent words: the worst truncation word (period ``M = 2``, whose spur is the
  Nicholas-Samueli bound -(6.02 P - 3.92) dBc) and an exact word (no bit dropped, so only the
  core's amplitude quantisation is left), with SFDR, SNR and the frequency error of each beside
  what theory predicts for it (:mod:`benchgen.nco_theory`), and for a dithered NCO the same word
  without dither, so the report shows what the dither bought and what it cost.

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
from benchgen.functions.nco import NcoDatapath
from benchgen.nco import Nco, run
from benchgen.nco_theory import (
    core_snr_db,
    dithered_phase_snr_db,
    dithered_spur_dbc,
    expected_max_noise_bin_db,
    nicholas_samueli_worst_dbc,
    truncation_snr_db,
    word_near_seventh,
)
from benchgen.spectrum import analyse_tone, coherent_phase_codes, ideal_snr_db, measure_frequency, measure_tone

__all__ = ["MAX_GRID_WIDTHS", "MAX_NCO_TONES", "MAX_TONES", "SPECTRUM_BINS", "analyse_models", "nco_tone"]

#: (function, output width) pairs that get an error grid (one row of plots each).
MAX_GRID_WIDTHS = 3
#: Distinct data paths whose tone is measured (one spectrum panel each).
MAX_TONES = 4
#: Longest record the tone is measured over.
SPECTRUM_FFT = 1 << 16
#: Distinct NCOs (phase path and core) measured: one point each in the SFDR-against-phase-bits
#: plot, the first :data:`MAX_TONES` of them also a spectrum panel.
MAX_NCO_TONES = 12
#: Shortest record an NCO's word is measured over (IEEE Std 1241 asks for enough samples that
#: every code the word reaches is visited; 2^14 is what benchgen.nco_sizing measures).
NCO_MIN_FFT_BITS = 14
#: The exact word's record: long enough that a 16-bit phase visits every code once.
NCO_EXACT_FFT_BITS = 16
#: Longest record for the worst word. Its truncation period is 2 samples of 2^P codes, so a
#: coherent record with an odd carrier bin holds 2^(P+1) samples: 2^16 up to P = 15, and up to
#: 2^20 (about a second of model time) for P = 16 to 19, as benchgen.nco_sizing does. Past that
#: the worst word is not measured (the report says so) and only the exact word is.
NCO_MAX_FFT_BITS = 20
#: Bins the spectrum is kept in: each keeps the lowest and highest level of the FFT bins it
#: covers, which is what a line through all of them shows at a plot's resolution, at a small
#: fraction of the size (32769 levels for a 2^16-point FFT).
SPECTRUM_BINS = 1024
#: Inputs the error grid measures on at most (a slice of the sizing set when the space is larger).
GRID_INPUTS = 1 << 16
#: Fields that size or shape a core without changing its arithmetic: the grid varies the first
#: two itself, and the model is the same at every depth and architecture.
_SIZING_FIELDS = ("iterations", "guard_bits", "angle_guard_bits", "pipeline_depth", "iterations_per_cycle", "architecture")


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
    sized = function_named(spec.function).sizing_spec(spec)
    if sized.function != spec.function:
        # Another function's iterations behind logic that adds no error (an NCO's sine/cosine
        # core behind its phase path): its error is that core's at the code it is given, and the
        # sizer measures it so (benchgen.design). Measured the same way here, on the core's own
        # inputs; the whole NCO's model over 2^16 tokens would take seconds per curve point.
        spec = sized
        inputs, _ = sizing_inputs(make_datapath(spec, design.datapath.iterations, design.datapath.guard_bits, design.datapath.angle_guard_bits))
    else:
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


def _bins(dbc: np.ndarray, start: int) -> dict[str, list[Any]]:
    """A spectrum kept in :data:`SPECTRUM_BINS` bins, each its lowest and highest level.

    ``start`` is the FFT bin of ``dbc[0]`` (negative for the lower half of a complex spectrum).
    """
    edges = np.linspace(0, dbc.size, min(SPECTRUM_BINS, dbc.size) + 1).astype(np.int64)
    lows = np.minimum.reduceat(dbc, edges[:-1])
    highs = np.maximum.reduceat(dbc, edges[:-1])
    return {
        "bin_start": [int(e) + start for e in edges[:-1]],
        # Levels to 0.001 dB: far finer than a plot shows, and short in JSON.
        "bin_low_dbc": [round(float(v), 3) for v in lows],
        "bin_high_dbc": [round(float(v), 3) for v in highs],
    }


def _tone(design: Design) -> dict[str, Any]:
    dp = design.datapath
    n_fft = min(SPECTRUM_FFT, 1 << dp.angle_width)
    cycles = _coherent_cycles(n_fft)
    sine = function_named(design.spec.function).tone(dp, coherent_phase_codes(dp.angle_width, n_fft, cycles))
    spec = analyse_tone(np.asarray(sine, dtype=np.float64), cycles)
    return {
        "label": f"{dp.data_width}-bit out, {dp.angle_width}-bit angle, {dp.iterations} it., {dp.guard_bits} guard",
        "bits": dp.data_width,
        "snr_db": round(spec.snr_db, 2),
        "sfdr_db": round(spec.sfdr_db, 2),
        "ideal_snr_db": round(ideal_snr_db(dp.data_width), 2),
        "n_fft": n_fft,
        "cycles": cycles,
        **_bins(spec.dbc, 0),
    }


def _short(value: float) -> float:
    """A measured frequency error kept to 6 significant digits: short in JSON, and the same bytes
    from run to run."""
    return float(f"{value:.6g}")


def _combined_snr_db(*snrs: float) -> float:
    """SNR of independent noises added: their powers add."""
    return -10 * math.log10(sum(10 ** (-s / 10) for s in snrs if math.isfinite(s)))


def _nco_word(nco: Nco, design: Design, which: str) -> dict[str, Any] | None:
    """The whole NCO model at one coherent word, measured and predicted (None: no such record).

    ``which`` is ``"worst"`` (truncation period M = 2, the carrier near f_clk/7) or ``"exact"``
    (M = 1, a 2^16 record).
    """
    dp = design.datapath
    assert isinstance(dp, NcoDatapath)
    core = dp.core()
    a, p, d = nco.acc_width, nco.angle_width, nco.dither_width
    period = 2 if which == "worst" else 1
    if period > 1 << nco.dropped_bits:
        return None  # every phase bit is kept: no bit is ever dropped, no worst word exists
    bits = max(NCO_MIN_FFT_BITS, p + 1) if which == "worst" else NCO_EXACT_FFT_BITS
    if bits > NCO_MAX_FFT_BITS:
        return None
    n = 1 << bits
    word = word_near_seventh(a, p, n, period)
    out = run(nco, core, n, freq_word=word.freq_word)
    samples = out.complex()
    m = measure_tone(samples, word.cycles)
    f = measure_frequency(samples, word.freq_word, a)
    amp_snr = core_snr_db(core.amplitude, design.accuracy.rms_error_lsb)
    record: dict[str, Any] = {
        "word": which,
        "freq_word": word.freq_word,
        "period": word.period,
        "n_fft": n,
        "cycles": word.cycles,
        "sfdr_db": round(m.sfdr_db, 2),
        "snr_db": round(m.snr_db, 2),
        "freq_error": _short(f.error),
    }
    if which == "exact":
        # No bit dropped (and a dither below the kept LSB never carries into it): what is left is
        # the core's amplitude quantisation. No theory here predicts its spurs.
        record.update(predicted_sfdr_db=None, sfdr_source=None, predicted_snr_db=round(amp_snr, 2),
                      snr_source="core RMS error: benchgen.nco_theory.core_snr_db")
    elif d == 0:
        record.update(
            predicted_sfdr_db=round(-nicholas_samueli_worst_dbc(p), 2),
            sfdr_source="Nicholas and Samueli 1987: 6.02 P - 3.92",
            predicted_snr_db=round(_combined_snr_db(truncation_snr_db(2, p), amp_snr), 2),
            snr_source="truncation, derived in docs/nco.md, and core RMS error",
        )
    else:
        snr = _combined_snr_db(dithered_phase_snr_db(2, p, d), amp_snr)
        spur = dithered_spur_dbc(2, p, d)
        if spur == -math.inf:
            # The dither removes the first-order spur: the largest bin is the highest noise bin.
            sfdr = snr + 10 * math.log10(n) - expected_max_noise_bin_db(n - 2)
            source = "noise peak of the dithered floor, derived in docs/nco.md"
        else:  # pragma: no cover - any dither (D >= 1) cancels the M = 2 spur to first order
            sfdr, source = -spur, "dithered spur, derived in docs/nco.md"
        record.update(predicted_sfdr_db=round(sfdr, 2), sfdr_source=source, predicted_snr_db=round(snr, 2),
                      snr_source="dithered truncation, derived in docs/nco.md, and core RMS error")
    if d and which == "worst":
        plain = measure_tone(run(Nco(acc_width=a, angle_width=p), core, n, freq_word=word.freq_word).complex(),
                             word.cycles)
        record.update(undithered_sfdr_db=round(plain.sfdr_db, 2), undithered_snr_db=round(plain.snr_db, 2))
    else:
        record.update(undithered_sfdr_db=None, undithered_snr_db=None)
    # The complex spectrum over [-f_clk/2, f_clk/2): an NCO's spurs below zero are distinct from
    # those above (a complex mixer sees them there).
    record["spectrum"] = _bins(np.fft.fftshift(m.dbc), -(n // 2))
    return record


def nco_tone(design: Design) -> dict[str, Any]:
    """The NCO's spectrum with its phase path: the worst truncation word and an exact word.

    Each word is coherent in its record (rectangular window, IEEE Std 1241), run through the
    whole NCO model from reset (:func:`benchgen.nco.run`), measured on the quadrature output
    (complex FFT, :func:`benchgen.spectrum.measure_tone`) with its frequency error
    (:func:`benchgen.spectrum.measure_frequency`), and given the prediction of
    :mod:`benchgen.nco_theory` with its source. The spectrum kept is the worst word's (the
    exact word's where no worst word is measured).

    Args:
        design: A design whose data path is an NCO's (:class:`benchgen.functions.nco.NcoDatapath`).
    """
    dp = design.datapath
    assert isinstance(dp, NcoDatapath)
    nco = dp.phase()
    words = [w for w in (_nco_word(nco, design, "worst"), _nco_word(nco, design, "exact")) if w is not None]
    shown = words[0]
    dither = f"{dp.dither_width}-bit dither" if dp.dither_width else "no dither"
    return {
        "label": (f"{dp.angle_width} phase bits, {dp.data_width}-bit out, {dp.acc_width}-bit acc., {dither}, "
                  f"{dp.iterations} it., {dp.guard_bits} guard"),
        "bits": dp.data_width,
        "phase_bits": dp.angle_width,
        "acc_width": dp.acc_width,
        "dither_width": dp.dither_width,
        "nicholas_samueli_sfdr_db": round(-nicholas_samueli_worst_dbc(dp.angle_width), 2),
        "ideal_snr_db": round(ideal_snr_db(dp.data_width), 2),
        "freq_resolution": 2.0**-dp.acc_width,
        "words": [{k: v for k, v in w.items() if k != "spectrum"} for w in words],
        "spectrum_word": shown["word"],
        **shown["spectrum"],
    }


def analyse_models(cores: Iterable[tuple[str, Mapping[str, Any]]]) -> dict[str, Any]:
    """Error grids and tones for a sweep's distinct cores (``(core_id, config)`` in sweep order).

    Returns:
        ``{"error_grids": [...], "tones": [...]}``, and ``"nco_tones"`` when the sweep has an NCO
        (so a sweep without one keeps the bytes it had), as
        :class:`benchgen.sweep_records.ModelAnalysisRecord` describes; each entry names the
        ``core_ids`` it stands for, so the report can show only those whose simulations passed.
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
    nco_tones: dict[tuple[Any, ...], dict[str, Any]] = {}
    for core_id, _, design in designs:
        if not function_named(design.spec.function).spectral:
            continue
        dp = design.datapath
        key = (design.spec.function, dp.angle_width, dp.data_width, dp.iterations, dp.guard_bits, design.spec.rounding)
        if isinstance(dp, NcoDatapath):
            # Its spectrum is the phase path's as much as the core's: measured through both.
            key += (dp.acc_width, dp.dither_width, dp.lfsr_width, dp.lfsr_seed)
            if key in nco_tones:
                nco_tones[key]["core_ids"].append(core_id)
            elif len(nco_tones) < MAX_NCO_TONES:
                nco_tones[key] = {**nco_tone(design), "core_ids": [core_id]}
            continue
        if key in tones:
            tones[key]["core_ids"].append(core_id)
        elif len(tones) < MAX_TONES:
            tones[key] = {**_tone(design), "core_ids": [core_id]}
    out: dict[str, Any] = {"error_grids": grids, "tones": list(tones.values())}
    if nco_tones:
        out["nco_tones"] = list(nco_tones.values())
    return out
