"""A sweep's NCO points: the tone runs the whole NCO model, and the report shows it.

Without a simulator: the tone is measured on the bit-true model (benchgen.sweep_analysis), and the
report is written from a sweep run with the stand-in runner of tests/test_sweep.py.

Checks against the outside, each with its source: the worst phase-truncation spur
-(6.02 P - 3.92) dBc (H. T. Nicholas and H. Samueli 1987; FACTS.md gives 44.24 / 56.28 dBc for
P = 8 / 10), met within docs/nco.md's tolerance of 0.15 dB; coherent sampling and the SFDR and SNR
definitions of IEEE Std 1241 (benchgen.spectrum.measure_tone). The dither's effect is checked
against docs/nco.md's derivation with its tolerances (3.01 dB of SNR within 0.15 dB, the noise
peak within 2 dB).
"""

from __future__ import annotations

import csv
import io
import json
import math
from pathlib import Path
from typing import Any

import pytest

from benchgen.report_plots import _sfdr_phase_bits_figure, make_plots
from benchgen.sweep_analysis import analyse_models
from benchgen.sweep_config import parse_sweep
from benchgen.sweep_records import RecordError, check_model_analysis
from tests.test_sweep import fake_runner, run_and_report

#: docs/nco.md: the worst truncation spur against Nicholas-Samueli, 0.15 dB (rounded constants and
#: the amplitude error's share, with N >= P + 7).
NS_TOLERANCE_DB = 0.15
#: FACTS.md [mp]: -(6.02 P - 3.92) for P = 8 and 10.
FACTS = {8: 44.24, 10: 56.28}


def _nco(p: int, n: int, dither: int = 0) -> dict[str, Any]:
    return {"name": "lo", "function": "nco", "angle_width": p, "data_width": n, "acc_width": 32, "dither_width": dither}


@pytest.fixture(scope="module")
def analysis() -> dict[str, Any]:
    """P = 8 and 10 (N = P + 8), each without and with a 4-bit dither."""
    cores = [(f"p{p}_d{d}", _nco(p, p + 8, d)) for p in (8, 10) for d in (0, 4)]
    return analyse_models(cores)


def _tone(analysis: dict[str, Any], core_id: str) -> dict[str, Any]:
    return next(t for t in analysis["nco_tones"] if core_id in t["core_ids"])


def _word(tone: dict[str, Any], which: str) -> dict[str, Any]:
    return next(w for w in tone["words"] if w["word"] == which)


@pytest.mark.parametrize("p", [8, 10])
def test_the_nco_tone_at_its_worst_word_is_the_nicholas_samueli_spur(analysis: dict[str, Any], p: int) -> None:
    """The sweep's SFDR of an NCO is its phase-truncation spur, not the core's amplitude spurs
    (which the old tone, phase codes fed straight to the core, reported at over 100 dBc)."""
    assert not any(f"p{p}_d0" in t["core_ids"] for t in analysis["tones"])  # not the core-only tone
    tone = _tone(analysis, f"p{p}_d0")
    worst = _word(tone, "worst")
    ns = 6.02 * p - 3.92  # Nicholas and Samueli 1987
    assert ns == pytest.approx(FACTS[p], abs=0.005)
    assert tone["nicholas_samueli_sfdr_db"] == pytest.approx(ns, abs=0.005)
    assert worst["period"] == 2 and 1 << 14 <= worst["n_fft"] <= 1 << 16
    assert worst["predicted_sfdr_db"] == pytest.approx(ns, abs=0.005)
    assert "Nicholas and Samueli 1987" in worst["sfdr_source"]
    assert worst["sfdr_db"] == pytest.approx(ns, abs=NS_TOLERANCE_DB)
    # All the truncation error is that one spur (docs/nco.md): SNR = SFDR, as predicted.
    assert worst["snr_db"] == pytest.approx(worst["predicted_snr_db"], abs=0.1)
    # The kept spectrum is this word's, and its largest line after the carrier is the spur.
    assert tone["spectrum_word"] == "worst" and tone["bin_start"][0] == -worst["n_fft"] // 2
    levels = sorted(tone["bin_high_dbc"], reverse=True)
    assert levels[0] == pytest.approx(0.0, abs=1e-3) and levels[1] == pytest.approx(-worst["sfdr_db"], abs=0.01)
    # The frequency: the word's mean frequency, within what a phase error of one kept LSB
    # (2**-P turns) can move a least-squares slope over the record (about 3 E / n).
    assert abs(worst["freq_error"]) <= 3 * 2.0**-p / worst["n_fft"]
    assert tone["freq_resolution"] == 2.0**-32
    # The exact word drops no bit: only the core's amplitude quantisation is left, its SNR
    # within 0.5 dB of the core's RMS error's prediction (docs/nco.md's tolerance).
    exact = _word(tone, "exact")
    assert exact["period"] == 1 and exact["predicted_sfdr_db"] is None
    assert exact["snr_db"] == pytest.approx(exact["predicted_snr_db"], abs=0.5)
    assert exact["sfdr_db"] > worst["sfdr_db"] + 40


@pytest.mark.parametrize("p", [8, 10])
def test_dither_trades_the_worst_spur_for_noise(analysis: dict[str, Any], p: int) -> None:
    """docs/nco.md (derived there): a dither with M <= 2**D removes the worst spur; the SFDR is
    then the noise peak (within 2 dB) and the SNR falls by 10 log10 2 = 3.01 dB (within 0.15)."""
    plain = _word(_tone(analysis, f"p{p}_d0"), "worst")
    tone = _tone(analysis, f"p{p}_d4")
    dith = _word(tone, "worst")
    assert tone["dither_width"] == 4
    assert dith["freq_word"] == plain["freq_word"]
    assert (dith["undithered_sfdr_db"], dith["undithered_snr_db"]) == (plain["sfdr_db"], plain["snr_db"])
    assert "noise peak" in dith["sfdr_source"] and "docs/nco.md" in dith["sfdr_source"]
    assert dith["sfdr_db"] == pytest.approx(dith["predicted_sfdr_db"], abs=2.0)
    assert dith["sfdr_db"] > plain["sfdr_db"] + 25
    assert plain["snr_db"] - dith["snr_db"] == pytest.approx(10 * math.log10(2), abs=0.15)
    assert dith["snr_db"] == pytest.approx(dith["predicted_snr_db"], abs=0.15)


def test_the_nco_analysis_fits_its_schema_and_a_bad_one_does_not(analysis: dict[str, Any]) -> None:
    record = {"digest": "d", **analysis}
    assert check_model_analysis(json.loads(json.dumps(record))) == record
    bad = json.loads(json.dumps(record))
    bad["nco_tones"][0]["words"][0]["period"] = 1  # a worst word must have period 2
    with pytest.raises(RecordError, match="nco_tones.0.words.0"):
        check_model_analysis(bad)
    bad = json.loads(json.dumps(record))
    bad["nco_tones"][0]["words"][0]["sfdr_source"] = None  # a prediction without its source
    with pytest.raises(RecordError, match="source"):
        check_model_analysis(bad)


def test_sfdr_against_phase_bits_plots_each_nco_beside_the_prediction(analysis: dict[str, Any]) -> None:
    """One point per NCO at its measured worst-word SFDR, dithered ones apart, over the
    Nicholas-Samueli line, its source named in the legend."""
    tones = analysis["nco_tones"]
    fig = _sfdr_phase_bits_figure(tones)
    ax = fig.axes[0]
    by_gid = {c.get_gid(): c for c in ax.collections}
    want_plain = sorted((t["phase_bits"], _word(t, "worst")["sfdr_db"]) for t in tones if t["dither_width"] == 0)
    want_dith = sorted((t["phase_bits"], _word(t, "worst")["sfdr_db"]) for t in tones if t["dither_width"])
    assert sorted(map(tuple, by_gid["measured_undithered"].get_offsets().tolist())) == want_plain
    assert sorted(map(tuple, by_gid["measured_dithered"].get_offsets().tolist())) == want_dith
    assert [p for p, _ in want_plain] == [8, 10] and [p for p, _ in want_dith] == [8, 10]
    (line,) = [ln for ln in ax.lines if ln.get_gid() == "nicholas_samueli"]
    xs, ys = line.get_xdata(), line.get_ydata()
    assert min(xs) < 8 and max(xs) > 10
    assert all(y == pytest.approx(6.02 * x - 3.92) for x, y in zip(xs, ys, strict=True))
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any("Nicholas and Samueli 1987" in s for s in labels)
    assert any("with dither" in s for s in labels) and any("docs/nco.md" in s for s in labels)
    assert "IEEE Std 1241" in ax.get_title()
    import matplotlib.pyplot as plt

    plt.close(fig)
    plots = make_plots([], [], [], [], [], tones)
    assert set(plots) == {"Spectrum of the NCO at its worst truncation word", "SFDR against phase bits"}
    assert all(png.startswith(b"\x89PNG\r\n\x1a\n") for png in plots.values())
    assert make_plots([], [], [], [], []) == {}  # a sweep without an NCO draws neither


def test_a_sweep_of_ncos_reports_the_nco_sfdr_with_its_phase_path(tmp_path: Path) -> None:
    """The report of an NCO sweep: the NCO's own columns (the worst word's SFDR, phase path
    included, beside its prediction), the NCO table and the two plots."""
    raw = {
        "sweep": {"name": "nco_bits", "simulators": ["icarus"], "samples": 100, "seed": 5},
        "base": {"name": "lo", "function": "nco", "data_width": 16, "acc_width": 32},
        "matrix": {"angle_width": [8, 10]},
    }
    out = tmp_path / "out"
    run_and_report(parse_sweep(raw), out, jobs=1, runner=fake_runner, use_cache=False, formats=("json", "csv", "md"))
    rows = list(csv.DictReader(io.StringIO((out / "report.csv").read_text())))
    assert [float(r["nco_worst_word_sfdr_dbc"]) for r in rows] == pytest.approx([44.24, 56.28], abs=NS_TOLERANCE_DB)
    assert [float(r["nco_predicted_sfdr_dbc"]) for r in rows] == [44.24, 56.28]
    md = (out / "report.md").read_text()
    assert "NCO SFDR dBc (phase path incl.)" in md and "## NCO spectrum" in md and "Nicholas and Samueli 1987" in md
    assert (out / "plots" / "sfdr_against_phase_bits.png").is_file()
    assert "plots/spectrum_of_the_nco_at_its_worst_truncation_word.png" in md
    doc = json.loads((out / "report.json").read_text())
    assert [t["phase_bits"] for t in doc["nco_spectrum"]] == [8, 10]
    assert doc["sine_quality"] == []  # the core-only tone is not an NCO's spectrum
