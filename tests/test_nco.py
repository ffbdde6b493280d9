"""The NCO model (benchgen/nco.py) against its definition in exact integers, and its measured
spectrum against theory, each check with its source beside it:

* worst phase-truncation spur -(6.02 P - 3.92) dBc: H. T. Nicholas and H. Samueli, 41st Annual
  Frequency Control Symposium, 1987 (values for P = 6/8/10/12 in ../shared/FACTS.md [mp]);
* the spur for every truncation period M, and what a D-bit dither does: derived in
  benchgen/nco_theory.py (marked "derived here");
* amplitude quantisation SNR 6.02 N + 1.76 dB: W. Kester, Analog Devices MT-001; IEEE Std 1241;
* coherent sampling, SFDR and SNR definitions: IEEE Std 1241; the 4-term Blackman-Harris
  window: F. J. Harris, Proc. IEEE 66(1), 1978;
* frequency resolution f_clk / 2**A: exact integer arithmetic of the accumulator.
"""

from __future__ import annotations

import functools
import math
import random
from fractions import Fraction

import numpy as np
import pytest

from benchgen.algorithm import Datapath
from benchgen.config import parse_config
from benchgen.design import Design, build_design
from benchgen.errors import ConfigError
from benchgen.lfsr import lfsr_step
from benchgen.functions import evaluate
from benchgen.nco import Change, Nco, phase_path, run, run_stream
from benchgen.nco_theory import (
    core_snr_db,
    dithered_phase_snr_db,
    dithered_spur_dbc,
    expected_max_noise_bin_db,
    freq_word_for,
    nicholas_samueli_worst_dbc,
    truncation_period,
    truncation_snr_db,
    truncation_spur_dbc,
    truncation_word,
)
from benchgen.functions.sincos import ideal_sincos
from benchgen.spectrum import ideal_snr_db, measure_frequency, measure_tone


@functools.cache
def _design(angle_width: int, data_width: int) -> Design:
    return build_design(parse_config({"name": "c", "function": "sincos", "angle_width": angle_width, "data_width": data_width}))


def _core(angle_width: int, data_width: int) -> Datapath:
    return _design(angle_width, data_width).datapath


def _reference(nco: Nco, n: int, fw0: int, po0: int, changes: list[Change]) -> list[tuple[int, int, int, int]]:
    """The NCO's definition, sample by sample in Python integers: (acc, dither, phase, code)."""
    a, p, d = nco.acc_width, nco.angle_width, nco.dither_width
    assert nco.lfsr_width is not None and nco.lfsr_seed is not None
    full = 1 << a
    at = {c.index: c for c in changes}
    fw, po, acc, lfsr = fw0 % full, po0 % full, 0, nco.lfsr_seed
    rows = []
    for k in range(n):
        if k in at:
            if at[k].freq_word is not None:
                fw = at[k].freq_word % full
            if at[k].phase_offset is not None:
                po = at[k].phase_offset % full
        dither = lfsr & ((1 << d) - 1)
        phase = (acc + po + (dither << (a - p - d))) % full
        rows.append((acc, dither, phase, phase >> (a - p)))
        acc = (acc + fw) % full
        for _ in range(d):
            lfsr = lfsr_step(lfsr, nco.lfsr_width)
    return rows


# --- the model: exact arithmetic, timing of changes, modes ---------------------------------------


@pytest.mark.parametrize(
    ("acc_width", "angle_width", "dither_width", "lfsr_width"),
    [(32, 12, 0, None), (32, 12, 20, None), (48, 16, 5, 17), (64, 14, 12, 40), (64, 20, 44, 44), (16, 16, 0, None)],
)
def test_phase_path_matches_its_definition_in_exact_integers(
    acc_width: int, angle_width: int, dither_width: int, lfsr_width: int | None
) -> None:
    """Every register of every sample, including wraps and changes of both words mid-record."""
    rng = random.Random(acc_width * 1000 + dither_width)
    nco = Nco(acc_width=acc_width, angle_width=angle_width, dither_width=dither_width, lfsr_width=lfsr_width)
    full = 1 << acc_width
    n = 600
    changes = [
        Change(0, rng.randrange(full), None),
        Change(37, rng.randrange(full), rng.randrange(full)),
        Change(38, None, rng.randrange(full)),
        Change(200, full - 1, None),  # the largest word: a phase step of -1
        Change(401, -(full // 2), 5),  # a signed word, read modulo 2**A
    ]
    po_start = rng.randrange(full)
    path = phase_path(nco, n, freq_word=rng.randrange(full), phase_offset=po_start, changes=changes)
    # The start word is overridden by the change at 0 (which leaves the start offset as it is).
    ref = _reference(nco, n, changes[0].freq_word or 0, po_start, changes[1:])
    assert [int(v) for v in path.accumulator] == [r[0] for r in ref]
    assert [int(v) for v in path.dither] == [r[1] for r in ref]
    assert [int(v) for v in path.phase] == [r[2] for r in ref]
    assert [int(v) for v in path.codes] == [r[3] for r in ref]


def test_start_words_are_those_given_and_a_change_at_zero_overrides_them() -> None:
    nco = Nco(acc_width=32, angle_width=12)
    path = phase_path(nco, 4, freq_word=100, phase_offset=7)
    assert [int(v) for v in path.accumulator] == [0, 100, 200, 300]
    assert [int(v) for v in path.phase] == [7, 107, 207, 307]
    path = phase_path(nco, 3, freq_word=100, phase_offset=7, changes=[(0, 5, None)])
    assert [int(v) for v in path.phase] == [7, 12, 17]


@pytest.mark.parametrize("acc_width", [24, 32, 48, 64])
def test_accumulator_wraps_modulo_2_to_a(acc_width: int) -> None:
    """acc[n] = n fw mod 2**A exactly, over many wraps (closed form in Python integers)."""
    full = 1 << acc_width
    nco = Nco(acc_width=acc_width, angle_width=12)
    n = 50_000
    for fw in (full - 3, (full // 3) | 1, 1 << (acc_width - 1), 12345):
        acc = phase_path(nco, n, freq_word=fw).accumulator
        idx = [0, 1, 2, 17, 4095, 4096, n // 2, n - 1]
        assert [int(acc[i]) for i in idx] == [i * fw % full for i in idx]
        assert int(acc[-1]) == (n - 1) * fw % full


def test_word_change_takes_effect_on_the_documented_sample() -> None:
    """A change at sample k: the offset moves sample k itself; the word is used from the next
    accumulator update, so acc[k] - acc[k-1] is the old word and acc[k+1] - acc[k] the new one
    (docs/nco.md, "When a change takes effect")."""
    nco = Nco(acc_width=32, angle_width=16)
    k = 10
    old_fw, new_fw, old_po, new_po = 1000, 77777, 3, 1 << 30
    path = phase_path(nco, 20, freq_word=old_fw, phase_offset=old_po, changes=[Change(k, new_fw, new_po)])
    acc = [int(v) for v in path.accumulator]
    phase = [int(v) for v in path.phase]
    assert acc[k] - acc[k - 1] == old_fw
    assert acc[k + 1] - acc[k] == new_fw
    assert acc[k] == k * old_fw
    assert phase[k - 1] == acc[k - 1] + old_po
    assert phase[k] == acc[k] + new_po
    assert int(path.freq_word[k - 1]) == old_fw and int(path.freq_word[k]) == new_fw


def test_streamed_tokens_act_as_changes_at_their_index() -> None:
    """Streamed mode: token n's loads act exactly as a change at sample n (one output per token)."""
    nco = Nco(acc_width=32, angle_width=12, dither_width=6)
    dp = _core(12, 12)
    tokens: list[tuple[int | None, int | None]] = [(None, None)] * 30
    tokens[0] = (1 << 24, None)
    tokens[9] = (None, 1 << 31)
    tokens[17] = ((1 << 32) - (1 << 22), 0)
    streamed = run_stream(nco, dp, tokens)
    scheduled = run(nco, dp, 30, changes=[Change(0, 1 << 24), Change(9, None, 1 << 31), Change(17, (1 << 32) - (1 << 22), 0)])
    assert np.array_equal(streamed.codes, scheduled.codes)
    assert np.array_equal(streamed.cos, scheduled.cos) and np.array_equal(streamed.sin, scheduled.sin)
    assert len(streamed.cos) == len(tokens)


def test_outputs_are_the_core_model_of_the_codes() -> None:
    nco = Nco(acc_width=40, angle_width=14, dither_width=8)
    dp = _core(14, 16)
    out = run(nco, dp, 5000, freq_word=0x12_3456_789B)
    ref = evaluate(dp, {"in_angle": out.codes})
    assert np.array_equal(out.cos, ref["out_cos"]) and np.array_equal(out.sin, ref["out_sin"])
    assert out.complex().dtype == np.complex128


def test_dither_values_are_uniform_d_bit_windows() -> None:
    """Disjoint runs of D bits of one m-sequence: every D-bit value nearly equally often."""
    d = 6
    path = phase_path(Nco(acc_width=32, angle_width=12, dither_width=d), 1 << 16)
    counts = np.bincount(path.dither.astype(np.int64), minlength=1 << d)
    expected = (1 << 16) / (1 << d)
    assert counts.size == 1 << d
    assert np.all(np.abs(counts - expected) < 5 * math.sqrt(expected))


def test_bad_parameters_name_their_field() -> None:
    with pytest.raises(ConfigError, match="acc_width") as exc:
        Nco(acc_width=10, angle_width=12)
    assert exc.value.suggestion == {"acc_width": 32}
    Nco(acc_width=32, angle_width=12)  # the suggestion is accepted
    with pytest.raises(ConfigError, match="dither_width"):
        Nco(acc_width=20, angle_width=16, dither_width=5)
    with pytest.raises(ConfigError, match="lfsr_width"):
        Nco(acc_width=48, angle_width=8, dither_width=20, lfsr_width=16)
    with pytest.raises(ConfigError, match="lfsr_seed"):
        Nco(acc_width=32, angle_width=8, dither_width=4, lfsr_width=8, lfsr_seed=256)
    nco = Nco(acc_width=16, angle_width=8)
    with pytest.raises(ValueError, match="freq_word"):
        phase_path(nco, 10, freq_word=1 << 16)
    with pytest.raises(ValueError, match="rise strictly"):
        phase_path(nco, 10, changes=[(5, 1, None), (5, 2, None)])
    with pytest.raises(ValueError, match="record has 10"):
        phase_path(nco, 10, changes=[(10, 1, None)])
    with pytest.raises(ValueError, match="angle_width"):
        run(nco, _core(12, 12), 10)


# --- frequency: resolution and measured error ---------------------------------------------------


def test_frequency_resolution_is_f_clk_over_2_to_a() -> None:
    """Words fw and fw + 1 differ by exactly f_clk / 2**A: measured on the output (A = 24, where
    the step, 6e-8 cycles/sample, is far above the measurement's resolution) and exactly on the
    accumulator for every A."""
    a, p, n = 24, 16, 1 << 15
    nco = Nco(acc_width=a, angle_width=p)
    dp = _core(p, 18)
    fw = 0x2A_AAAB
    f1 = measure_frequency(run(nco, dp, n, freq_word=fw).complex(), fw, a)
    f2 = measure_frequency(run(nco, dp, n, freq_word=fw + 1).complex(), fw + 1, a)
    assert f1.resolution == 2.0**-a
    assert (f2.measured - f1.measured) == pytest.approx(2.0**-a, rel=0.01)
    for acc_width in (32, 48, 64):
        full = 1 << acc_width
        w = (full // 7) | 1
        nco = Nco(acc_width=acc_width, angle_width=12)
        a1 = phase_path(nco, 1000, freq_word=w).accumulator
        a2 = phase_path(nco, 1000, freq_word=w + 1).accumulator
        # unwrapped, the phases part by exactly one LSB of the accumulator per sample
        assert all((int(y) - int(x)) % full == k for k, (x, y) in enumerate(zip(a1, a2, strict=True)))


@pytest.mark.parametrize(("acc_width", "angle_width", "data_width", "dither"), [(32, 8, 16, 0), (32, 12, 16, 0), (48, 14, 18, 34), (64, 16, 20, 8)])
def test_measured_frequency_error_is_within_the_measurement_resolution(
    acc_width: int, angle_width: int, data_width: int, dither: int
) -> None:
    """Truncation and the core move the phase by a bounded error only, so the mean frequency is
    the word's exact f_clk fw / 2**A: the measured error stays below 3 E / n, E the largest phase
    error in turns (one kept LSB plus the core's error of about 1 LSB of amplitude)."""
    n = 1 << 14
    nco = Nco(acc_width=acc_width, angle_width=angle_width, dither_width=dither)
    dp = _core(angle_width, data_width)
    full = 1 << acc_width
    for fw in (full // 10 + 12345, full - full // 3 - 777):  # positive and negative frequencies
        m = measure_frequency(run(nco, dp, n, freq_word=fw).complex(), fw, acc_width)
        e_turns = 2.0**-angle_width + 2.0 / dp.amplitude / (2 * math.pi)
        assert abs(m.error) <= 3 * e_turns / n
        assert m.exact == pytest.approx((fw / full) - (1 if fw >= full // 2 else 0))


def test_freq_word_for_a_frequency_is_within_half_the_resolution() -> None:
    """f = fw f_clk / 2**A exactly; the nearest word errs by at most f_clk / 2**(A+1)."""
    f_clk = Fraction(122_880_000)
    for a in (24, 32, 48):
        for f in (Fraction(10_700_000), Fraction(-455_000), Fraction(30_720_000), Fraction(1, 3)):
            word, exact = freq_word_for(f, f_clk, a)
            assert 0 <= word < 1 << a
            assert abs(exact - f) <= f_clk / (1 << (a + 1))
            signed = word - (1 << a) if word >= 1 << (a - 1) else word
            assert exact == signed * f_clk / (1 << a)
    assert freq_word_for(Fraction(30_720_000), f_clk, 32)[0] == 1 << 30  # f_clk / 4 is exact


def test_frequency_measurement_needs_the_quadrature_record() -> None:
    with pytest.raises(ValueError, match="complex"):
        measure_frequency(np.ones(64), 1, 8)


# --- spectrum against theory --------------------------------------------------------------------

# (A, P, N, log2 n_fft): N well above P so the amplitude's share of the spur is < 0.1 dB.
TRUNCATION_CONFIGS = [(32, 6, 14, 14), (32, 8, 16, 14), (32, 10, 18, 14), (48, 12, 20, 14), (48, 13, 20, 14), (64, 15, 22, 16)]


@pytest.mark.parametrize(("acc_width", "angle_width", "data_width", "fft_bits"), TRUNCATION_CONFIGS)
def test_worst_truncation_spur_is_nicholas_samueli(acc_width: int, angle_width: int, data_width: int, fft_bits: int) -> None:
    """Nicholas and Samueli 1987: the worst word (dropped bits 100...0 times an odd number,
    M = 2) puts a spur at -(6.02 P - 3.92) dBc; measured within 0.15 dB (the rounded constants
    and the amplitude error's share). FACTS.md [mp]: 32.20 / 44.24 / 56.28 / 68.32 dBc for
    P = 6 / 8 / 10 / 12."""
    n = 1 << fft_bits
    w = truncation_word(acc_width, angle_width, n, 2, odd=_odd_near(n // 7 // max(1, n >> (angle_width + 1))))
    assert w.period == truncation_period(w.freq_word, acc_width, angle_width) == 2
    out = run(Nco(acc_width=acc_width, angle_width=angle_width), _core(angle_width, data_width), n, freq_word=w.freq_word)
    m = measure_tone(out.complex(), w.cycles)
    assert m.window == "rectangular" and m.sided == "two"
    assert m.sfdr_db == pytest.approx(-nicholas_samueli_worst_dbc(angle_width), abs=0.15)
    facts = {6: 32.20, 8: 44.24, 10: 56.28, 12: 68.32}
    if angle_width in facts:
        assert -nicholas_samueli_worst_dbc(angle_width) == pytest.approx(facts[angle_width], abs=0.005)
    # the spur sits half a sample rate from the carrier: the truncation error alternates
    assert (m.spur_bin - w.cycles) % n == n // 2
    # all the truncation error is that one spur: SNR = SFDR (to the amplitude noise)
    assert m.snr_db == pytest.approx(m.sfdr_db, abs=0.1)


def _odd_near(x: int) -> int:
    return max(3, x) | 1


@pytest.mark.parametrize("period", [2, 4, 8, 16, 64])
def test_spur_depends_on_the_word_only_through_the_gcd(period: int) -> None:
    """Nicholas and Samueli 1987: the spurs depend on the word only through gcd(fw mod 2**B,
    2**B), i.e. on M. Three words of one M and different odd parts, one with a phase offset,
    give the same SFDR, and it is the exact level derived here for that M (within 0.05 dB)."""
    a, p, n = 32, 8, 1 << 14
    dp = _core(p, 18)
    nco = Nco(acc_width=a, angle_width=p)
    results = []
    for odd, offset in ((7, 0), (101, 0), (2**p // 3 | 1, 123_456_789)):
        w = truncation_word(a, p, n, period, odd)
        assert w.period == period
        m = measure_tone(run(nco, dp, n, freq_word=w.freq_word, phase_offset=offset).complex(), w.cycles)
        results.append(m)
    predicted = -truncation_spur_dbc(period, p)
    for m in results:
        assert m.sfdr_db == pytest.approx(predicted, abs=0.05)
        assert m.snr_db == pytest.approx(truncation_snr_db(period, p), abs=0.05)
    assert predicted >= -nicholas_samueli_worst_dbc(p) - 1e-9  # M = 2 is the worst
    assert predicted <= 6.02 * p + 0.01  # and no word does better than about 6.02 P


def test_exact_words_have_no_truncation_error_and_meet_the_quantisation_law() -> None:
    """A word that is a multiple of 2**(A-P) never drops a bit: the codes are exact, and the
    SNR is that of the core's amplitude quantisation. Kester MT-001 / IEEE Std 1241: an ideal
    N-bit rounding gives 6.02 N + 1.76 dB; the core's rounding (RMS 0.31 to 0.32 LSB, not 0.289)
    costs up to 2 dB of that. Predicted from the core's own RMS error within 0.5 dB."""
    a, p, n, cycles = 32, 16, 1 << 16, 4099  # FACTS.md's [mp] record: 2**16 points, 4099 cycles
    nco = Nco(acc_width=a, angle_width=p)
    for data_width in (12, 16):
        design = _design(p, data_width)
        w = truncation_word(a, p, n, 1, cycles)
        assert w.period == 1 and w.freq_word % (1 << (a - p)) == 0
        out = run(nco, design.datapath, n, freq_word=w.freq_word)
        assert np.all(out.path.phase & np.uint64((1 << (a - p)) - 1) == 0)
        m = measure_tone(out.complex(), cycles)
        kester = ideal_snr_db(data_width)
        ic, is_ = ideal_sincos(design.datapath, out.codes)
        rms = float(np.sqrt(np.mean(np.concatenate([out.cos - ic, out.sin - is_]) ** 2)))
        assert kester - 2.0 <= m.snr_db <= kester + 0.3
        assert m.snr_db == pytest.approx(core_snr_db(design.datapath.amplitude, rms), abs=0.5)
        assert m.snr_db == pytest.approx(core_snr_db(design.datapath.amplitude, design.accuracy.rms_error_lsb), abs=0.5)
        assert m.sfdr_db > m.snr_db + 10  # no spur holds the quantisation noise of a long-period tone


def test_real_output_has_the_same_truncation_spur() -> None:
    """The cosine alone (one-sided spectrum) shows the same worst spur, at the mirror frequency
    n/2 - carrier (Nicholas and Samueli 1987)."""
    a, p, n = 32, 8, 1 << 14
    w = truncation_word(a, p, n, 2, 37)
    out = run(Nco(acc_width=a, angle_width=p), _core(p, 16), n, freq_word=w.freq_word)
    m = measure_tone(out.cos, w.cycles)
    assert m.sided == "one"
    assert m.sfdr_db == pytest.approx(-nicholas_samueli_worst_dbc(p), abs=0.1)
    assert m.spur_bin == n // 2 - w.cycles


def test_windowed_measurement_of_a_non_coherent_word() -> None:
    """A worst-case word (M = 2) whose period, 2**(P+1) = 2**15 samples, is longer than the
    2**14-sample record: its tone falls half-way between two bins, the worst place. The
    4-term Blackman-Harris window (Harris 1978) still measures the spur within 0.3 dB of
    Nicholas and Samueli; the rectangular window on the same record is swamped by leakage
    (why IEEE Std 1241 asks for coherent sampling or a window)."""
    a, p, n = 32, 14, 1 << 14
    fw = ((2 * 2345 + 1) << (a - p - 1)) % (1 << a)  # dropped bits 100...0 times an odd number
    assert truncation_period(fw, a, p) == 2
    cycles = fw * n / 2**a
    assert cycles % 1 == 0.5
    out = run(Nco(acc_width=a, angle_width=p), _core(p, 22), n, freq_word=fw)
    m = measure_tone(out.complex(), cycles)
    assert m.window == "blackman-harris-4"
    assert m.sfdr_db == pytest.approx(-nicholas_samueli_worst_dbc(p), abs=0.3)
    # The window's own leakage outside its main lobe (about -87 dBc for a tone half-way between
    # bins) adds to the noise: measured on an ideal tone of the same frequency, then combined.
    ideal = np.exp(2j * np.pi * cycles * np.arange(n) / n)
    leak_snr = measure_tone(ideal, cycles).snr_db
    assert 85 < leak_snr < 90
    expected = -10 * math.log10(10 ** (-truncation_snr_db(2, p) / 10) + 10 ** (-leak_snr / 10))
    assert m.snr_db == pytest.approx(expected, abs=0.3)
    leaky = measure_tone(out.complex(), round(cycles), window="rectangular")
    assert leaky.sfdr_db < m.sfdr_db - 30


# --- dither --------------------------------------------------------------------------------------


def test_full_dither_trades_the_worst_spur_for_noise() -> None:
    """A dither over the whole dropped range (D = A - P) at the worst word, P = 8: the
    -44.2 dBc spur is gone (the largest bin is a noise peak, predicted from order statistics
    within 2 dB), the SNR falls by 3.01 dB (derived here: error power Delta^2/8 against
    Delta^2/16; within 0.1 dB), and a noise floor appears where the undithered output had
    lines only (predicted per bin within 0.5 dB)."""
    a, p, n = 32, 8, 1 << 14
    design = _design(p, 18)
    dp = design.datapath
    w = truncation_word(a, p, n, 2, 101)
    plain = measure_tone(run(Nco(acc_width=a, angle_width=p), dp, n, freq_word=w.freq_word).complex(), w.cycles)
    d = a - p
    dith = measure_tone(run(Nco(acc_width=a, angle_width=p, dither_width=d), dp, n, freq_word=w.freq_word).complex(), w.cycles)
    amp_snr = core_snr_db(dp.amplitude, design.accuracy.rms_error_lsb)
    phase_snr = dithered_phase_snr_db(2, p, d)
    snr = -10 * math.log10(10 ** (-phase_snr / 10) + 10 ** (-amp_snr / 10))
    assert plain.sfdr_db == pytest.approx(44.24, abs=0.05)
    assert dithered_spur_dbc(2, p, d) == -math.inf
    assert dith.snr_db == pytest.approx(snr, abs=0.1)
    assert plain.snr_db - dith.snr_db == pytest.approx(10 * math.log10(2), abs=0.1)
    floor = -(snr + 10 * math.log10(n))
    assert dith.noise_floor_dbc == pytest.approx(floor, abs=0.5)
    # Undithered, the output repeats every 2**(P+1) = 512 samples: its spectrum is lines only
    # (the spur and the core's amplitude lines), no noise floor at all; dithered, it has one.
    assert plain.noise_floor_dbc == -math.inf
    predicted_sfdr = -floor - expected_max_noise_bin_db(n - 2)
    assert dith.sfdr_db == pytest.approx(predicted_sfdr, abs=2.0)  # the spur falls ~29 dB
    assert dith.sfdr_db > plain.sfdr_db + 25


@pytest.mark.parametrize(("dither", "period"), [(1, 2), (1, 4), (1, 16), (2, 8), (2, 64), (3, 64)])
def test_partial_dither_acts_as_more_phase_bits(dither: int, period: int) -> None:
    """Derived here: a D-bit dither cancels (to first order) the spurs of words with M <= 2**D
    and leaves those of M > 2**D at the level of P + D kept bits with period M / 2**D; its SNR
    is predicted by dithered_phase_snr_db. Measured within 0.15 dB (SNR) and, for the spur,
    within 0.1 dB plus what the noise in its bin can move it."""
    a, p, n = 32, 8, 1 << 14
    design = _design(p, 18)
    w = truncation_word(a, p, n, period, 101)
    out = run(Nco(acc_width=a, angle_width=p, dither_width=dither), design.datapath, n, freq_word=w.freq_word)
    m = measure_tone(out.complex(), w.cycles)
    amp_snr = core_snr_db(design.datapath.amplitude, design.accuracy.rms_error_lsb)
    snr = -10 * math.log10(10 ** (-dithered_phase_snr_db(period, p, dither) / 10) + 10 ** (-amp_snr / 10))
    assert m.snr_db == pytest.approx(snr, abs=0.15)
    spur = dithered_spur_dbc(period, p, dither)
    noise_peak = snr + 10 * math.log10(n) - expected_max_noise_bin_db(n - 2)
    if spur == -math.inf:
        assert m.sfdr_db == pytest.approx(noise_peak, abs=2.0)
    else:
        assert -spur < noise_peak - 3  # the case measures a spur, not a noise peak
        # The noise in the spur's own bin moves it: amplitude ratio 10**(-gap/20) of the spur,
        # gap = spur over the per-bin noise; allow twice that (about 2 sigma) plus 0.1 dB.
        gap = snr + 10 * math.log10(n) + spur
        tolerance = 0.1 + 20 * math.log10(1 + 2 * 10 ** (-gap / 20))
        assert m.sfdr_db == pytest.approx(-spur, abs=tolerance)
        assert m.sfdr_db > -truncation_spur_dbc(period, p) + 2.0  # better than undithered


# --- the theory's own formulas ---------------------------------------------------------------------


def test_exact_spur_formula_meets_nicholas_samueli_and_its_limits() -> None:
    """Derived here: M = 2 gives tan(Delta/4), within 0.01 dB of Nicholas and Samueli's
    -(6.02 P - 3.92) for P = 6 to 20; large M tends to 1/(2**P - 1); the levels fall with M."""
    for p in range(6, 21):
        assert truncation_spur_dbc(2, p) == pytest.approx(20 * math.log10(math.tan(math.pi / 2 ** (p + 1))), abs=1e-9)
        assert truncation_spur_dbc(2, p) == pytest.approx(nicholas_samueli_worst_dbc(p), abs=0.01)
        levels = [truncation_spur_dbc(1 << k, p) for k in range(1, 12)]
        assert levels == sorted(levels, reverse=True)
        assert levels[-1] == pytest.approx(-20 * math.log10(2**p - 1), abs=0.01)
    assert truncation_spur_dbc(1, 10) == -math.inf and truncation_snr_db(1, 10) == math.inf


def test_dither_formula_costs_exactly_3_db_once_it_resolves_the_period() -> None:
    """Derived here: with 2**D >= M the phase error power doubles; with D = 0 it is the
    undithered truncation's (small-angle: within 0.01 dB of the exact truncation_snr_db)."""
    for p in (8, 12):
        for period in (2, 4, 16, 64):
            plain = dithered_phase_snr_db(period, p, 0)
            assert plain == pytest.approx(truncation_snr_db(period, p), abs=0.01)
            full = dithered_phase_snr_db(period, p, period.bit_length() - 1)
            assert plain - full == pytest.approx(10 * math.log10(2), abs=1e-9)
            assert dithered_phase_snr_db(period, p, 24) == pytest.approx(full, abs=1e-9)


def test_truncation_words_are_refused_where_they_cannot_exist() -> None:
    with pytest.raises(ValueError, match="odd"):
        truncation_word(32, 8, 1 << 14, 2, 4)
    with pytest.raises(ValueError, match="period"):
        truncation_word(32, 8, 1 << 14, 3, 5)
    with pytest.raises(ValueError, match="cannot hold"):
        truncation_word(32, 14, 1 << 14, 2, 5)  # M = 2 at P = 14 repeats every 2**15 samples
    w = truncation_word(48, 12, 1 << 16, 8, 5)
    assert w.period == truncation_period(w.freq_word, 48, 12) == 8 and w.cycles == 5 * (1 << 16) // (8 << 12)
