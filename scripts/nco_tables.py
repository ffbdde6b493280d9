"""Print the measured-against-predicted tables of docs/nco.md (NCO bit-true model, spectra).

Run: PYTHONPATH=. python3 scripts/nco_tables.py   (about 20 s on a 2-core machine; the numbers
depend only on the code: the dither LFSR is seeded, every record is coherent unless a table
says otherwise)
"""

from __future__ import annotations

import functools
import math
from fractions import Fraction

from benchgen.config import parse_config
from benchgen.design import Design, build_design
from benchgen.nco import Nco, run
from benchgen.nco_sizing import size_nco
from benchgen.nco_theory import (
    core_snr_db,
    dithered_phase_snr_db,
    dithered_spur_dbc,
    expected_max_noise_bin_db,
    freq_word_for,
    nicholas_samueli_worst_dbc,
    truncation_snr_db,
    truncation_spur_dbc,
    truncation_word,
)
from benchgen.spectrum import ideal_snr_db, measure_frequency, measure_tone


@functools.cache
def _design(p: int, n: int) -> Design:
    return build_design(parse_config({"name": "c", "function": "sincos", "angle_width": p, "data_width": n}))


def _combine(*snrs: float) -> float:
    return -10 * math.log10(sum(10 ** (-s / 10) for s in snrs if math.isfinite(s)))


def _fmt(x: float) -> str:
    return "-" if not math.isfinite(x) else f"{x:.2f}"


def worst_spur_table() -> None:
    print("| A | P | N | record | Nicholas-Samueli -(6.02P-3.92) | exact, M = 2 | measured SFDR | measured SNR |")
    print("|---|---|---|---|---|---|---|---|")
    for a, p, n, bits in ((32, 6, 14, 14), (32, 8, 16, 14), (32, 10, 18, 14), (48, 12, 20, 14), (48, 13, 20, 14), (48, 14, 20, 15), (64, 15, 22, 16)):
        size = 1 << bits
        w = truncation_word(a, p, size, 2, max(3, size // 7 // max(1, size >> (p + 1))) | 1)
        m = measure_tone(run(Nco(acc_width=a, angle_width=p), _design(p, n).datapath, size, freq_word=w.freq_word).complex(), w.cycles)
        print(
            f"| {a} | {p} | {n} | 2^{bits} | {-nicholas_samueli_worst_dbc(p):.2f} | {-truncation_spur_dbc(2, p):.2f} | "
            f"{m.sfdr_db:.2f} | {m.snr_db:.2f} |"
        )


def period_table() -> None:
    a, p, n, size = 32, 10, 18, 1 << 16
    print(f"A = {a}, P = {p}, N = {n}, 2^16-point records, carrier on an odd multiple of 2^16 / (M 2^P).")
    print()
    print("| M (period of the dropped bits) | gcd(fw mod 2^B, 2^B) | predicted SFDR | measured SFDR | predicted SNR (phase) | measured SNR |")
    print("|---|---|---|---|---|---|")
    for period in (1, 2, 4, 8, 16, 64):
        w = truncation_word(a, p, size, period, 101)
        m = measure_tone(run(Nco(acc_width=a, angle_width=p), _design(p, n).datapath, size, freq_word=w.freq_word).complex(), w.cycles)
        gcd = (1 << (a - p)) // period if period > 1 else 1 << (a - p)
        print(
            f"| {period} | 2^{gcd.bit_length() - 1} | {_fmt(-truncation_spur_dbc(period, p))} | {m.sfdr_db:.2f} | "
            f"{_fmt(truncation_snr_db(period, p))} | {m.snr_db:.2f} |"
        )


def dither_table() -> None:
    a, p, n, size = 32, 8, 18, 1 << 14
    d = _design(p, n)
    amp = core_snr_db(d.datapath.amplitude, d.accuracy.rms_error_lsb)
    peak = expected_max_noise_bin_db(size - 2)
    print(f"A = {a}, P = {p}, N = {n}, 2^14-point records, LFSR of 32 bits (D = 24: 32), seed all ones.")
    print()
    print("| M | D | predicted SFDR | measured SFDR | predicted SNR | measured SNR | noise floor (dBc/bin) |")
    print("|---|---|---|---|---|---|---|")
    for period in (2, 4, 16, 64):
        w = truncation_word(a, p, size, period, 101)
        for dither in (0, 1, 2, 4, a - p):
            m = measure_tone(
                run(Nco(acc_width=a, angle_width=p, dither_width=dither), d.datapath, size, freq_word=w.freq_word).complex(), w.cycles
            )
            snr = _combine(dithered_phase_snr_db(period, p, dither), amp)
            spur = dithered_spur_dbc(period, p, dither)
            noise_peak = snr + 10 * math.log10(size) - peak if dither else math.inf
            predicted = min(-spur, noise_peak)
            note = "" if predicted == -spur else " (noise peak)"
            print(
                f"| {period} | {dither} | {_fmt(predicted)}{note} | {m.sfdr_db:.2f} | {snr:.2f} | {m.snr_db:.2f} | "
                f"{_fmt(m.noise_floor_dbc)} |"
            )


def exact_word_table() -> None:
    a, p, size, cycles = 32, 16, 1 << 16, 4099
    print(f"A = {a}, P = {p}, exact words (fw a multiple of 2^(A-P)), 2^16 points, {cycles} cycles.")
    print()
    print("| N | 6.02 N + 1.76 (Kester) | core RMS error (LSB) | predicted from the RMS | measured SNR | measured SFDR |")
    print("|---|---|---|---|---|---|")
    for n in (8, 12, 16, 20):
        d = _design(p, n)
        w = truncation_word(a, p, size, 1, cycles)
        m = measure_tone(run(Nco(acc_width=a, angle_width=p), d.datapath, size, freq_word=w.freq_word).complex(), w.cycles)
        rms = d.accuracy.rms_error_lsb
        print(
            f"| {n} | {ideal_snr_db(n):.2f} | {rms:.3f} | {core_snr_db(d.datapath.amplitude, rms):.2f} | {m.snr_db:.2f} | {m.sfdr_db:.2f} |"
        )


def frequency_table() -> None:
    f_clk = Fraction(122_880_000)
    target = Fraction(10_700_000)
    print(f"f_clk = 122.88 MHz, requested 10.7 MHz; measured on 2^16 samples, P = 16, N = 18.")
    print()
    print("| A | resolution f_clk/2^A (Hz) | word | exact frequency (Hz) | set error (Hz) | measured error (Hz) | 3E/n bound (Hz) |")
    print("|---|---|---|---|---|---|---|")
    size = 1 << 16
    d = _design(16, 18)
    for a in (24, 32, 48):
        word, exact = freq_word_for(target, f_clk, a)
        out = run(Nco(acc_width=a, angle_width=16), d.datapath, size, freq_word=word)
        m = measure_frequency(out.complex(), word, a)
        bound = 3 * (2.0**-16 + 2.0 / d.datapath.amplitude / (2 * math.pi)) / size
        print(
            f"| {a} | {float(f_clk / (1 << a)):.3e} | {word:#x} | {float(exact):.6f} | {float(exact - target):+.3e} | "
            f"{m.error * float(f_clk):+.3e} | {bound * float(f_clk):.1e} |"
        )


def sizing_table() -> None:
    print("| target | P | N | iterations / guard (x, y / z) | E (LSB) | SFDR / SNR bound | measured min SFDR / SNR | P - 1: worst-word SFDR / long-word SNR |")
    print("|---|---|---|---|---|---|---|---|")
    for sfdr, snr in ((60.0, None), (72.0, None), (84.0, None), (96.0, None), (None, 70.0), (90.0, 80.0)):
        s = size_nco(sfdr_dbc=sfdr, snr_db=snr)
        dp = s.design.datapath
        p = dp.angle_width
        fewer = build_design(parse_config(s.core_config() | {"angle_width": p - 1}))
        nco = Nco(acc_width=32, angle_width=p - 1)
        size = max(1 << 14, 1 << p)
        w = truncation_word(32, p - 1, size, 2, max(3, size // 7 // max(1, size >> p)) | 1)
        worst = measure_tone(run(nco, fewer.datapath, size, freq_word=w.freq_word).complex(), w.cycles)
        long_size = max(1 << 16, 1 << (p + 3))
        w = truncation_word(32, p - 1, long_size, long_size >> (p - 1), 4099)
        noisy = measure_tone(run(nco, fewer.datapath, long_size, freq_word=w.freq_word).complex(), w.cycles)
        label = " and ".join(x for x in (f"SFDR {sfdr:g} dBc" if sfdr else "", f"SNR {snr:g} dB" if snr else "") if x)
        print(
            f"| {label} | {p} | {dp.data_width} | {dp.iterations} / {dp.guard_bits} / {dp.angle_guard_bits} | {s.error_max_lsb:.3f} | "
            f"{s.sfdr_bound_db:.2f} / {s.snr_bound_db:.2f} | {min(c.sfdr_db for c in s.checks):.2f} / "
            f"{min(c.snr_db for c in s.checks):.2f} | {worst.sfdr_db:.2f} / {noisy.snr_db:.2f} |"
        )


def main() -> None:
    for title, table in (
        ("Worst truncation spur (M = 2) against Nicholas and Samueli", worst_spur_table),
        ("Spur and SNR against the truncation period M", period_table),
        ("Dither: spurs traded for noise", dither_table),
        ("Exact words: amplitude quantisation", exact_word_table),
        ("Frequency resolution and error", frequency_table),
        ("Sizing for a spectral target", sizing_table),
    ):
        print(f"### {title}")
        print()
        table()
        print()


if __name__ == "__main__":
    main()
