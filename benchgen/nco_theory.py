"""What theory says an NCO's spectrum should be, and frequency words to test it with.

Notation: accumulator of ``A`` bits, ``P`` phase bits kept (the core's angle width), ``B = A - P``
bits dropped, ``D`` bits of dither, ``N`` output bits, ``Delta = 2 pi / 2**P`` the kept phase LSB.

**Phase truncation** (H. T. Nicholas and H. Samueli, "An Analysis of the Output Spectrum of Direct
Digital Frequency Synthesizers in the Presence of Phase-Accumulator Truncation", 41st Annual
Frequency Control Symposium, 1987): the dropped part of the phase, ``e[n] = (n fw + c) mod 2**B``,
repeats with period ``M = 2**B / gcd(fw mod 2**B, 2**B)`` and takes the ``M`` values
``{0, 1, ..., M-1} * 2**B / M`` (plus a constant), each once per period, in an order set by the
odd part of the word. So the spur levels depend on the word only through that GCD, as Nicholas
and Samueli state: ``M = 1`` (the word a multiple of ``2**B``) is exact, with no truncation error
at all, and the worst case is ``M = 2`` (the dropped bits of the word ``100...0`` times an odd
number), whose spur is the Nicholas-Samueli bound ``-(6.02 P - 3.92)`` dBc.

The exact levels for every ``M``, derived here for the quadrature output ``exp(j phase)`` with an
ideal amplitude (no small-angle approximation): over one period the truncated phasor is the
ideal one times ``exp(-j Delta k / M)``, ``k`` running over ``0 .. M-1``, whose Fourier
coefficient ``m`` has magnitude ``sin(Delta/2) / (M |sin((Delta + 2 pi m) / (2 M))|)`` (a
geometric sum). ``m = 0`` is the carrier, ``m = -1`` the largest spur, so

    spur / carrier = sin(Delta / (2M)) / sin((2 pi - Delta) / (2M))

which is ``tan(Delta/4)`` at ``M = 2`` (20 log10 tan(pi / 2**(P+1)) is -(6.02 P - 3.92) dB
within 0.01 dB for P = 6 to 20, the difference being the rounding of 6.02 and 3.92) and falls
to ``1 / (2**P - 1)`` (about -6.02 P dB) as ``M`` grows: only 3.92 dB separate the best and
worst non-exact words. The spurs of a real (cosine) output have the same
levels relative to its carrier, at the mirror frequencies.

**Dither** (derived here; the classical result is that dither turns truncation spurs into noise):
adding ``D`` uniform bits ``u`` just below the kept LSB makes the kept phase ``floor(x + u)``;
its mean over the dither is ``x`` rounded up to a multiple of ``2**-D`` LSB. So to first order a
``D``-bit dither removes the spurs of every word with ``M <= 2**D`` entirely, and leaves those of
a word with ``M > 2**D`` at the level of ``P + D`` kept bits and period ``M / 2**D``. The price is
noise: a phase with dropped fraction ``f`` (in LSB) now errs by ``-f`` or ``1 - f`` at random with
variance ``g (1 - g)``, ``g = ceil(f 2**D) / 2**D``; for ``M <= 2**D`` the error power is
``Delta**2 (M**2 - 1) / (6 M**2)`` against ``Delta**2 (M**2 - 1) / (12 M**2)`` undithered: the
SNR falls by exactly 10 log10 2 = 3.01 dB.

**Amplitude quantisation**: the SNR of an ideally rounded full-scale ``N``-bit sine is 6.02 N +
1.76 dB (W. Kester, "Taking the Mystery out of the Infamous Formula SNR = 6.02N + 1.76 dB",
Analog Devices MT-001; IEEE Std 1241). The core's rounding is not ideal (its RMS error is about
0.35 LSB against 0.289 for ideal rounding; docs/error_analysis.md), so :func:`core_snr_db`
predicts from the core's own measured RMS error.

**Frequency**: the word ``fw`` gives exactly ``fw f_clk / 2**A`` on average (the accumulator is
exact modulo ``2**A``), so the resolution is ``f_clk / 2**A`` and a requested frequency is off by
at most half of that (:func:`freq_word_for`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

__all__ = [
    "WordChoice",
    "coherent_word",
    "core_snr_db",
    "dithered_phase_snr_db",
    "dithered_spur_dbc",
    "expected_max_noise_bin_db",
    "freq_word_for",
    "nicholas_samueli_worst_dbc",
    "truncation_period",
    "truncation_snr_db",
    "truncation_spur_dbc",
    "truncation_word",
    "word_near_seventh",
]


def nicholas_samueli_worst_dbc(phase_bits: int) -> float:
    """Worst phase-truncation spur, -(6.02 P - 3.92) dBc (Nicholas and Samueli 1987)."""
    return -(6.02 * phase_bits - 3.92)


def truncation_period(freq_word: int, acc_width: int, phase_bits: int) -> int:
    """``M``: the period of the dropped phase bits, 2**B / gcd(fw mod 2**B, 2**B); 1 when exact."""
    dropped = acc_width - phase_bits
    rest = freq_word % (1 << dropped)
    if rest == 0:
        return 1
    return (1 << dropped) // math.gcd(rest, 1 << dropped)


def _carrier_and_spur(period: int, phase_bits: int) -> tuple[float, float]:
    """Magnitudes of the carrier and the largest spur of the truncated unit phasor."""
    delta = 2 * math.pi / 2**phase_bits
    m = period
    carrier = math.sin(delta / 2) / (m * math.sin(delta / (2 * m)))
    spur = math.sin(delta / 2) / (m * math.sin((2 * math.pi - delta) / (2 * m)))
    return carrier, spur


def truncation_spur_dbc(period: int, phase_bits: int) -> float:
    """Largest phase-truncation spur for truncation period ``M`` (dBc; -inf when ``M = 1``).

    Exact for a quadrature output with an ideal amplitude (derived in the module docstring);
    ``M = 2`` gives the Nicholas-Samueli worst case.
    """
    if period == 1:
        return -math.inf
    carrier, spur = _carrier_and_spur(period, phase_bits)
    return 20 * math.log10(spur / carrier)


def truncation_snr_db(period: int, phase_bits: int) -> float:
    """Carrier over all the truncation error power, for period ``M`` (inf when exact).

    The truncated phasor has unit power, so the error power is 1 - |carrier|**2.
    """
    if period == 1:
        return math.inf
    carrier, _ = _carrier_and_spur(period, phase_bits)
    return 10 * math.log10(carrier**2 / (1 - carrier**2))


def dithered_spur_dbc(period: int, phase_bits: int, dither_bits: int) -> float:
    """First-order truncation spur with a ``D``-bit dither (derived here, module docstring).

    -inf when ``M <= 2**D`` (the dither cancels the spur to first order; what is left is noise
    and second-order terms far below), else the spur of ``P + D`` bits at period ``M / 2**D``.
    """
    if period <= 1 << dither_bits:
        return -math.inf
    return truncation_spur_dbc(period >> dither_bits, phase_bits + dither_bits)


def dithered_phase_snr_db(period: int, phase_bits: int, dither_bits: int) -> float:
    """Carrier over the phase error power with a ``D``-bit dither (small-angle, derived here).

    The error of a phase with dropped fraction ``f = j / M`` has mean ``g - f`` and variance
    ``g (1 - g)``, ``g = ceil(f 2**D) / 2**D``; the power is the variance of the means over
    ``j`` plus the mean of the variances, times ``Delta**2``. ``D = 0`` gives the undithered
    (M**2 - 1) / (12 M**2); ``2**D >= M`` gives twice that.
    """
    if period == 1:
        return math.inf
    scale = 1 << dither_bits
    means = []
    variances = []
    for j in range(period):
        f = Fraction(j, period)
        g = Fraction(math.ceil(f * scale), scale)
        means.append(g - f)
        variances.append(g * (1 - g))
    mu = sum(means, Fraction(0)) / period
    power = sum(((x - mu) ** 2 for x in means), Fraction(0)) / period + sum(variances, Fraction(0)) / period
    delta = 2 * math.pi / 2**phase_bits
    return -10 * math.log10(float(power) * delta**2)


def expected_max_noise_bin_db(bins: int) -> float:
    """How far the highest of ``bins`` bins of white noise lies above their mean, in dB.

    Each bin's power is exponentially distributed (complex Gaussian bins); the expected
    maximum of ``n`` such is the harmonic number H_n = ln n + 0.5772 + ... times the mean
    (order statistics of the exponential distribution; fact of the trade). A dithered NCO's
    SFDR is set by this noise peak, not by a spur.
    """
    harmonic = sum(1.0 / k for k in range(1, bins + 1)) if bins < 1 << 20 else math.log(bins) + 0.5772156649
    return 10 * math.log10(harmonic)


def core_snr_db(amplitude: int, rms_error_lsb: float) -> float:
    """SNR of the quadrature output from the core's RMS error per output (any rounding).

    The carrier is ``amplitude**2`` (a unit phasor times the amplitude), the noise the error
    power of both outputs, ``2 rms**2``. With ideal rounding (rms = 1/sqrt 12) this is
    6.02 N + 1.76 dB less the 20 log10 (2**(N-1) / amplitude) of not reaching full scale.
    """
    return 10 * math.log10(amplitude**2 / (2 * rms_error_lsb**2))


def coherent_word(acc_width: int, n_fft: int, cycles: int) -> int:
    """The word that puts ``cycles`` whole cycles in ``n_fft`` samples: cycles 2**A / n_fft.

    Raises:
        ValueError: if ``n_fft`` is not a power of two up to 2**A (no exact word exists).
    """
    if n_fft < 2 or n_fft & (n_fft - 1) or n_fft > 1 << acc_width:
        raise ValueError(f"n_fft must be a power of two up to 2**{acc_width}, not {n_fft}")
    return (cycles * ((1 << acc_width) // n_fft)) % (1 << acc_width)


@dataclass(frozen=True)
class WordChoice:
    """A coherent test word.

    Attributes:
        freq_word: The A-bit frequency word.
        cycles: Carrier cycles in the record (its FFT bin).
        period: ``M`` of :func:`truncation_period` (1: exact).
    """

    freq_word: int
    cycles: int
    period: int


def truncation_word(acc_width: int, phase_bits: int, n_fft: int, period: int, odd: int) -> WordChoice:
    """A word whose truncation period is ``period`` and which is coherent in ``n_fft`` samples.

    The carrier bin is ``odd * n_fft / (M 2**P)`` (``M = period``); the word is that bin times
    2**A / n_fft. ``period = 2`` is the Nicholas-Samueli worst case, ``period = 1`` an exact word
    (its carrier bin ``odd * max(1, n_fft / 2**P)``).

    Raises:
        ValueError: if ``odd`` is even, ``period`` not a power of two up to 2**(A-P), or the
            record too short to hold one period (n_fft must be at least M 2**P).
    """
    if odd % 2 == 0:
        raise ValueError(f"odd must be odd, not {odd}")
    if period < 1 or period & (period - 1) or period > 1 << (acc_width - phase_bits):
        top = 1 << (acc_width - phase_bits)
        raise ValueError(f"period must be a power of two up to 2**(A-P) = {top}, not {period}")
    if period == 1:
        cycles = odd * max(1, n_fft >> phase_bits)
    else:
        if n_fft < period << phase_bits:
            raise ValueError(f"a {n_fft}-point record cannot hold a truncation period of {period} at P = {phase_bits}")
        cycles = odd * (n_fft // (period << phase_bits))
    if not 0 < cycles < n_fft:
        raise ValueError(f"odd = {odd} puts the carrier outside the {n_fft}-point record")
    word = coherent_word(acc_width, n_fft, cycles)
    return WordChoice(freq_word=word, cycles=cycles, period=truncation_period(word, acc_width, phase_bits))


def _prime_at_least(x: int) -> int:
    """The smallest odd prime at or above ``x`` (at least 3): an odd carrier bin that no
    sub-multiple of the record repeats (IEEE Std 1241)."""
    c = max(3, x) | 1
    while any(c % d == 0 for d in range(3, math.isqrt(c) + 1, 2)):
        c += 2
    return c


def word_near_seventh(acc_width: int, phase_bits: int, n_fft: int, period: int) -> WordChoice:
    """:func:`truncation_word` with its carrier near f_clk / 7, away from DC, Nyquist and their
    images: the odd factor is the prime at or above the one that puts it there."""
    per_odd = max(1, n_fft // (period << phase_bits)) if period > 1 else max(1, n_fft >> phase_bits)
    return truncation_word(acc_width, phase_bits, n_fft, period, _prime_at_least(n_fft // 7 // per_odd))


def freq_word_for(frequency: Fraction | float, f_clk: Fraction | float, acc_width: int) -> tuple[int, Fraction]:
    """The nearest word to a frequency, and the exact frequency it gives (same unit as f_clk).

    The word is ``round(frequency 2**A / f_clk)`` modulo 2**A (a negative frequency wraps to the
    top half), so the error is at most half the resolution ``f_clk / 2**A``.
    """
    f = Fraction(frequency)
    clk = Fraction(f_clk)
    scaled = f * (1 << acc_width) / clk
    word = math.floor(scaled + Fraction(1, 2))
    return word % (1 << acc_width), word * clk / (1 << acc_width)
