"""Spectrum of a tone: SNR and SFDR (coherent or windowed, real or complex), frequency, and the
ideal quantisation limit.

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
    "BLACKMAN_HARRIS_4",
    "BLACKMAN_HARRIS_4_LOBE",
    "DEFAULT_CYCLES",
    "FrequencyMeasurement",
    "ToneMeasurement",
    "ToneSpectrum",
    "analyse_tone",
    "blackman_harris_4",
    "coherent_phase_codes",
    "ideal_snr_db",
    "measure_frequency",
    "measure_tone",
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


# --- Spectrum of an NCO's output: complex or real, coherent or windowed -------------------------

BLACKMAN_HARRIS_4 = (0.35875, 0.48829, 0.14128, 0.01168)
"""Coefficients of the 4-term Blackman-Harris window, highest sidelobe -92 dB (F. J. Harris, "On
the Use of Windows for Harmonic Analysis with the Discrete Fourier Transform", Proc. IEEE 66(1):
51-83, 1978, section V and Table I)."""
BLACKMAN_HARRIS_4_LOBE = 4
"""Half-width of that window's main lobe in bins (4 cosine terms: zeros at +-4 bins, Harris 1978)."""


def blackman_harris_4(n: int) -> npt.NDArray[np.float64]:
    """The 4-term Blackman-Harris window of ``n`` points, DFT-even (periodic) as Harris 1978 uses it."""
    k = np.arange(n, dtype=np.float64)
    a0, a1, a2, a3 = BLACKMAN_HARRIS_4
    t = 2 * np.pi * k / n
    return a0 - a1 * np.cos(t) + a2 * np.cos(2 * t) - a3 * np.cos(3 * t)


@dataclass(frozen=True)
class ToneMeasurement:
    """SFDR and SNR of one tone in a record, per IEEE Std 1241's definitions.

    Attributes:
        n_fft: Record length.
        sided: ``"two"`` (complex record, complex FFT, bins 0 .. n-1, negative frequencies at the
            top) or ``"one"`` (real record, bins 0 .. n/2).
        window: ``"rectangular"`` (coherent) or ``"blackman-harris-4"``.
        carrier_bin: Bin of the carrier (its nearest bin when windowed).
        dbc: Power of each bin relative to the carrier's bin (carrier = 0 dB), for plots.
        sfdr_db: Carrier over the largest other spur (dBc).
        spur_bin: Where that spur is.
        snr_db: Carrier over everything else but DC.
        noise_floor_dbc: Mean power of one bin outside the carrier, DC and the spurs,
            relative to the carrier (dBc per bin). A spur is a bin more than 13 dB above that
            mean (found by repeating the cut until no bin is left out anew): white-noise bins
            are exponentially distributed and exceed 20 times their mean with probability
            e**-20, so none is cut. For white noise it lies 10 log10(bins) below -SNR (the
            FFT's processing gain). -inf when no bin is left: a record that repeats within
            itself (an undithered NCO at a short-period word) has lines only, no noise.
        dc_dbc: Power at DC (the DC lobe when windowed) relative to the carrier: reported, not
            counted in SFDR or SNR (IEEE Std 1241 excludes DC).
    """

    n_fft: int
    sided: str
    window: str
    carrier_bin: int
    dbc: npt.NDArray[np.float64]
    sfdr_db: float
    spur_bin: int
    snr_db: float
    noise_floor_dbc: float
    dc_dbc: float


_SPUR_OVER_MEAN = 20.0  # 13 dB: above this a bin counts as a spur, not noise, in the noise floor


def _db(ratio: float) -> float:
    return float(10 * np.log10(ratio)) if ratio > 0 else -float("inf")


def measure_tone(samples: npt.ArrayLike, cycles: float, *, window: str | None = None) -> ToneMeasurement:
    """SFDR, SNR and noise floor of a tone of ``cycles`` cycles per record.

    A complex record (``cos + j sin`` of an NCO) is analysed with the complex FFT over the whole
    band ``[-f_s/2, f_s/2)``: a quadrature output's spurs at negative frequencies (its image, or
    truncation spurs that fold below zero) are distinct from those at positive ones, and a mixer
    fed with it sees them there; a one-sided spectrum would fold the two halves together. A
    real record uses the one-sided spectrum (rfft).

    Coherent (``cycles`` an integer, IEEE Std 1241): rectangular window; the carrier is one bin,
    every spur one bin. Otherwise the 4-term Blackman-Harris window (Harris 1978): each tone is
    the power summed over its main lobe (+-4 bins), the carrier over the lobe around
    ``cycles``, the largest spur over the lobe around the highest remaining bin, so neither
    depends on where between bins a tone falls; by Parseval the noise then needs no window
    correction (the window scales tone and noise power alike).

    Args:
        samples: The record (real or complex).
        cycles: Carrier frequency in cycles per record (f / f_s * n); negative or above n/2 for
            a complex record means a negative frequency.
        window: Force ``"rectangular"`` or ``"blackman-harris-4"``; by default rectangular when
            ``cycles`` is an integer.

    Raises:
        ValueError: for a carrier outside the spectrum, an unknown window, or a silent record.
    """
    x = np.asarray(samples)
    n = x.size
    two_sided = np.iscomplexobj(x)
    if window is None:
        window = "rectangular" if float(cycles).is_integer() else "blackman-harris-4"
    if window not in ("rectangular", "blackman-harris-4"):
        raise ValueError(f"window must be 'rectangular' or 'blackman-harris-4', not {window!r}")
    lobe = 0 if window == "rectangular" else BLACKMAN_HARRIS_4_LOBE
    if two_sided:
        carrier = int(round(cycles)) % n
        if carrier <= lobe or n - carrier <= lobe:
            raise ValueError(f"carrier at {cycles} cycles is on the DC lobe of a {n}-point record")
        xw = x.astype(np.complex128) * (blackman_harris_4(n) if lobe else 1.0)
        power = np.abs(np.fft.fft(xw)) ** 2
    else:
        carrier = int(round(cycles))
        if not lobe < carrier < n // 2 - lobe:
            raise ValueError(
                f"carrier at {cycles} cycles is outside {lobe + 1} .. {n // 2 - lobe - 1} for a real record"
            )
        xw = x.astype(np.float64) * (blackman_harris_4(n) if lobe else 1.0)
        power = np.abs(np.fft.rfft(xw)) ** 2
    bins = power.size
    offsets = np.arange(-lobe, lobe + 1)

    def lobe_bins(centre: int) -> npt.NDArray[np.int64]:
        idx = centre + offsets
        return idx % bins if two_sided else idx[(idx >= 0) & (idx < bins)]

    carrier_idx = lobe_bins(carrier)
    carrier_power = float(np.sum(power[carrier_idx]))
    if carrier_power <= 0:
        raise ValueError("the record holds no energy at the carrier")
    dc_idx = lobe_bins(0)
    dc_power = float(np.sum(power[dc_idx]))
    others = power.copy()
    others[carrier_idx] = 0.0
    others[dc_idx] = 0.0
    excluded = np.zeros(bins, dtype=bool)
    excluded[carrier_idx] = True
    excluded[dc_idx] = True
    noise = float(np.sum(others))
    rest = power[~excluded]
    keep = np.ones(rest.size, dtype=bool)
    while True:
        mean = float(np.mean(rest[keep])) if keep.any() else 0.0
        if mean <= 0.0:
            break
        cut = keep & (rest > _SPUR_OVER_MEAN * mean)
        if not cut.any():
            break
        keep &= ~cut
    floor = mean
    spur_bin = int(np.argmax(others))
    spur_power = float(np.sum(others[lobe_bins(spur_bin)]))
    peak = float(power[carrier])
    return ToneMeasurement(
        n_fft=n,
        sided="two" if two_sided else "one",
        window=window,
        carrier_bin=carrier,
        dbc=10 * np.log10(np.maximum(power, peak * 1e-30) / peak),
        sfdr_db=_db(carrier_power / max(spur_power, carrier_power * 1e-30)),
        spur_bin=spur_bin,
        snr_db=_db(carrier_power / max(noise, carrier_power * 1e-30)),
        noise_floor_dbc=_db(floor / carrier_power),
        dc_dbc=_db(dc_power / carrier_power),
    )


@dataclass(frozen=True)
class FrequencyMeasurement:
    """Mean frequency of a quadrature tone against its frequency word.

    Attributes:
        exact: The word's exact frequency, freq_word / 2**A, in cycles per sample (f / f_clk).
        measured: The measured mean frequency, cycles per sample.
        error: measured - exact, cycles per sample (multiply by f_clk for Hz).
        resolution: One step of the word, 2**-A cycles per sample (f_clk / 2**A).
    """

    exact: float
    measured: float
    error: float
    resolution: float


def measure_frequency(samples: npt.ArrayLike, freq_word: int, acc_width: int) -> FrequencyMeasurement:
    """Mean frequency of ``cos + j sin`` samples, by a least-squares line through their phase.

    The record is first turned back by the word's exact phase ``n freq_word / 2**A`` (formed in
    exact integers, then scaled), so what is left is the phase error alone: small, no unwrapping
    ambiguity near Nyquist, and its slope is the frequency error directly. A bounded phase
    error e (|e| <= E turns) moves the least-squares slope of an n-point record by at most
    about 3 E / n cycles per sample, which is the resolution of this measurement.

    Raises:
        ValueError: for a real record (a real tone's phase needs its quadrature partner).
    """
    x = np.asarray(samples)
    if not np.iscomplexobj(x):
        raise ValueError("measure_frequency needs the complex (cos + j sin) record")
    n = x.size
    k = np.arange(n, dtype=np.uint64)
    word = int(freq_word) % (1 << acc_width)
    nominal = (k * np.uint64(word)) & np.uint64((1 << acc_width) - 1)  # exact mod 2**A (2**A divides 2**64)
    turns = nominal.astype(np.float64) / 2.0**acc_width
    residual = np.unwrap(np.angle(x * np.exp(-2j * np.pi * turns))) / (2 * np.pi)
    t = np.arange(n, dtype=np.float64)
    slope = float(np.polyfit(t - t.mean(), residual, 1)[0])
    exact = word / 2.0**acc_width
    exact = exact - 1.0 if exact >= 0.5 else exact  # a word above half a turn is a negative frequency
    return FrequencyMeasurement(exact=exact, measured=exact + slope, error=slope, resolution=2.0**-acc_width)
