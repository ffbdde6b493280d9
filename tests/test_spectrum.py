"""Coherent-tone spectrum: SNR against 6.02 N + 1.76 dB (Kester, MT-001), method per IEEE Std 1241."""

from __future__ import annotations

import numpy as np
import pytest

from benchgen.spectrum import analyse_tone, coherent_phase_codes, ideal_snr_db

N_FFT = 1 << 16
CYCLES = 4099  # prime, as in FACTS.md's [mp] measurement


@pytest.mark.parametrize("bits", [8, 12, 16])
def test_ideally_quantised_sine_meets_the_quantisation_law(bits: int) -> None:
    """Kester MT-001: SNR = 6.02 N + 1.76 dB; FACTS.md [mp] measured 49.95/74.03/98.10 dB here."""
    k = np.arange(N_FFT)
    amplitude = 2 ** (bits - 1) - 1
    x = np.round(amplitude * np.sin(2 * np.pi * CYCLES * k / N_FFT))
    s = analyse_tone(x, CYCLES)
    assert s.snr_db == pytest.approx(ideal_snr_db(bits), abs=0.5)
    assert s.sfdr_db > s.snr_db  # a single spur never holds all the noise of a coherent prime tone


def test_an_added_spur_sets_the_sfdr() -> None:
    k = np.arange(N_FFT)
    x = np.sin(2 * np.pi * CYCLES * k / N_FFT) + 1e-3 * np.sin(2 * np.pi * 3 * CYCLES * k / N_FFT)
    s = analyse_tone(x, CYCLES)
    assert s.spur_bin == 3 * CYCLES
    assert s.sfdr_db == pytest.approx(60.0, abs=0.01)  # 20 log10(1 / 1e-3)
    assert s.dbc[CYCLES] == pytest.approx(0.0)


def test_phase_codes_are_coherent_and_visit_distinct_codes() -> None:
    codes = coherent_phase_codes(16, N_FFT, CYCLES)
    assert len(np.unique(codes)) == N_FFT  # a prime cycle count visits every code once
    assert (codes[1] - codes[0]) == CYCLES
    with pytest.raises(ValueError):
        coherent_phase_codes(12, N_FFT, CYCLES)  # more samples than angle codes
    with pytest.raises(ValueError):
        coherent_phase_codes(16, N_FFT, 4098)  # even: repeats after half the record


def test_bad_carrier_bin_is_refused() -> None:
    with pytest.raises(ValueError, match="carrier bin"):
        analyse_tone(np.ones(64), 40)


def test_measure_tone_agrees_with_analyse_tone_on_a_coherent_real_tone() -> None:
    from benchgen.spectrum import measure_tone

    k = np.arange(N_FFT)
    x = np.round(2047 * np.sin(2 * np.pi * CYCLES * k / N_FFT))
    old = analyse_tone(x, CYCLES)
    new = measure_tone(x, CYCLES)
    assert new.window == "rectangular" and new.sided == "one"
    assert new.snr_db == pytest.approx(old.snr_db, abs=1e-9)
    assert new.sfdr_db == pytest.approx(old.sfdr_db, abs=1e-9)
    # quantisation noise is not white (harmonics stand 13 dB above its mean), so the floor
    # that leaves them out lies below -(SNR + 10 log10(bins)); white noise lies on it
    assert new.noise_floor_dbc < -(new.snr_db + 10 * np.log10(N_FFT // 2))
    noisy = np.sin(2 * np.pi * CYCLES * k / N_FFT) + np.random.default_rng(5).normal(0, 1e-3, N_FFT)
    white = measure_tone(noisy, CYCLES)
    assert white.snr_db == pytest.approx(10 * np.log10(0.5 / 1e-6), abs=0.1)
    assert white.noise_floor_dbc == pytest.approx(-(white.snr_db + 10 * np.log10(N_FFT // 2)), abs=0.1)


def test_complex_spectrum_keeps_the_image_apart_from_the_carrier() -> None:
    """A quadrature tone with 1e-3 of its mirror image (a -60 dBc I/Q image): the two-sided
    spectrum puts the image at -f (bin n - c) where a mixer sees it."""
    from benchgen.spectrum import measure_tone

    k = np.arange(N_FFT)
    t = 2 * np.pi * CYCLES * k / N_FFT
    z = np.exp(1j * t) + 1e-3 * np.exp(-1j * t)
    m = measure_tone(z, CYCLES)
    assert m.sided == "two"
    assert m.spur_bin == N_FFT - CYCLES
    assert m.sfdr_db == pytest.approx(60.0, abs=1e-6)


def test_blackman_harris_window_is_harris_1978() -> None:
    """Harris 1978, 4-term Blackman-Harris: coefficients sum to 1 at the centre, the ends are
    a0 - a1 + a2 - a3 = 6e-5, the highest sidelobe is -92 dB."""
    from benchgen.spectrum import blackman_harris_4

    w = blackman_harris_4(1 << 12)
    assert w[2048] == pytest.approx(1.0, abs=1e-12)
    assert w[0] == pytest.approx(0.35875 - 0.48829 + 0.14128 - 0.01168, abs=1e-12)
    spectrum = np.abs(np.fft.fft(np.concatenate([w, np.zeros(15 * w.size)]))) ** 2
    db = 10 * np.log10(spectrum / spectrum[0] + 1e-300)
    sidelobes = db[4 * 16 + 8 : 8 * w.size]  # past the main lobe (+-4 bins, 16x zero padding)
    assert -93.0 < sidelobes.max() < -91.5
