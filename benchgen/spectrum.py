"""Spectrum of a coherently sampled tone: SNR and SFDR, and the ideal quantisation limit.

Method per IEEE Std 1241 (ADC test methods): the tone completes an odd (here prime) number of
cycles in the record, so all its energy falls in one bin and no window is needed (rectangular);
SFDR is the carrier bin over the largest other bin; SNR is the carrier over all other bins except
DC. The ideal SNR of a full-scale N-bit sinusoid is 6.02 N + 1.76 dB (W. Kester, Analog Devices
MT-001).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

__all__ = [
    "DEFAULT_CYCLES",
    "ToneSpectrum",
    "analyse_tone",
    "coherent_phase_codes",
    "ideal_snr_db",
]

# A prime number of cycles in the record: no sub-multiple of the record repeats, so the phase codes
# visit as many distinct values as the record has samples (IEEE Std 1241 coherent sampling).
DEFAULT_CYCLES = 4099


def ideal_snr_db(bits: int) -> float:
    """6.02 N + 1.76 dB: SNR of an ideally quantised full-scale sine (Kester, MT-001)."""
    return 6.02 * bits + 1.76


def coherent_phase_codes(angle_width: int, n_fft: int, cycles: int = DEFAULT_CYCLES) -> npt.NDArray[np.int64]:
    """Binary-angle codes of a tone of ``cycles`` cycles in ``n_fft`` samples.

    The phase step is ``cycles * 2**angle_width / n_fft`` codes, an integer when ``n_fft`` is a
    power of two no larger than ``2**angle_width``, so the tone is exactly coherent.

    Raises:
        ValueError: if the record cannot be coherent at this angle width.
    """
    if n_fft & (n_fft - 1) or n_fft > 1 << angle_width:
        raise ValueError(f"n_fft must be a power of two up to 2**angle_width ({1 << angle_width}), not {n_fft}")
    if cycles % 2 == 0 or not 0 < cycles < n_fft // 2:
        raise ValueError(f"cycles must be odd and below n_fft/2 ({n_fft // 2}), not {cycles}")
    step = cycles * ((1 << angle_width) // n_fft)
    return (np.arange(n_fft, dtype=np.int64) * step) & ((1 << angle_width) - 1)


@dataclass(frozen=True)
class ToneSpectrum:
    """One-sided power spectrum of a record, relative to its carrier.

    Attributes:
        n_fft: Record length.
        carrier_bin: Bin of the tone.
        dbc: Power of each bin from DC to Nyquist, dB relative to the carrier (carrier = 0 dB).
        snr_db: Carrier over everything else but DC.
        sfdr_db: Carrier over the largest other bin (DC excluded).
        spur_bin: The largest other bin.
    """

    n_fft: int
    carrier_bin: int
    dbc: npt.NDArray[np.float64]
    snr_db: float
    sfdr_db: float
    spur_bin: int


def analyse_tone(samples: npt.ArrayLike, carrier_bin: int) -> ToneSpectrum:
    """SNR and SFDR of a coherently sampled real tone (rectangular window, IEEE Std 1241).

    Raises:
        ValueError: if the carrier bin is out of range or the record is empty of signal.
    """
    x = np.asarray(samples, dtype=np.float64)
    n = x.size
    if not 0 < carrier_bin < n // 2:
        raise ValueError(f"carrier bin {carrier_bin} is outside 1..{n // 2 - 1}")
    power = np.abs(np.fft.rfft(x)) ** 2
    carrier = power[carrier_bin]
    if carrier <= 0:
        raise ValueError("the record holds no energy at the carrier bin")
    others = power.copy()
    others[0] = 0.0
    others[carrier_bin] = 0.0
    noise = float(np.sum(others))
    spur_bin = int(np.argmax(others))
    spur = float(others[spur_bin])
    tiny = carrier * 1e-30
    dbc = 10 * np.log10(np.maximum(power, tiny) / carrier)
    return ToneSpectrum(
        n_fft=n,
        carrier_bin=carrier_bin,
        dbc=dbc,
        snr_db=float(10 * np.log10(carrier / max(noise, tiny))),
        sfdr_db=float(10 * np.log10(carrier / max(spur, tiny))),
        spur_bin=spur_bin,
    )
