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
