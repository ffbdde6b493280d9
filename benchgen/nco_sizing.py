"""Sizing an NCO for a spectral target: phase bits, output width, iterations and guard bits.

Given a required SFDR (dBc) and/or SNR (dB) of the quadrature output, :func:`size_nco` picks

1. ``P``, the phase bits to the core: the fewest for which the phase truncation alone can meet
   the target. For SFDR the truncation's worst word (period ``M = 2``; Nicholas and Samueli
   1987, :mod:`benchgen.nco_theory`) must leave a spur below the target; for SNR its noisiest
   word (``M`` large: error power ``Delta**2 / 12``) must. With ``P - 1`` bits the worst word's
   truncation spur alone is above the target, whatever the output width: one phase bit fewer
   misses (up to the amplitude error's small share, see below; tests/test_nco.py measures it).
2. ``N``, the output width: the fewest bits for which the guaranteed bound below meets the
   target, building the core for each candidate with :func:`benchgen.design.build_design`
   (iterations and guard bits sized by it to ``max_error_lsb``).
3. Then it measures the spectrum of the bit-true model (:func:`benchgen.nco.run`) at the words
   that stress it: the worst truncation word (``M = 2``), ``M = 4``, a long-period word, and an
   exact word with a phase offset, each coherent (IEEE Std 1241) and long enough for its
   truncation period, and reports each measured SFDR and SNR.

**The bound** (derived here; it holds for every frequency word and phase offset, no dither).
The output is ``y[n] = a exp(j phi[n]) + e[n]``, where ``a`` is the core's amplitude, ``phi`` the
truncated phase and ``e`` the core's error against the exact cosine and sine of the code it was
given, ``|e[n]| <= E`` (measured on every code, so exact up to the float64 ideal, which is off by
under 1e-3 LSB: benchgen.reference). A Fourier coefficient of ``e`` is at most its mean
magnitude, so no spur of ``e`` exceeds ``E`` and its power is at most ``E**2``. With
``c_min = sinc(Delta / 2)`` the smallest carrier and ``s_max = sin(Delta / 4)`` the largest spur of
the truncated unit phasor (both over all ``M``, :mod:`benchgen.nco_theory`), and the error's
non-carrier RMS at most ``r_max = sqrt(1 - c_min**2)``:

    SFDR >= 20 log10((a c_min - E) / (a s_max + E))
    SNR  >= 20 log10((a c_min - E) / (a r_max + E))

The bound counts the amplitude error as if it all fell on the worst spur and at its largest, so
the measured margin is usually several dB; the measurements show by how much.

Cost note: in a CORDIC core extra phase bits cost almost nothing (the internal angle already
carries ``N + 2 + guard`` fraction bits; benchgen.algorithm), so a user may well give the core
more phase bits than the minimum this picks; the minimum is what the target needs.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from benchgen.algorithm import Datapath
from benchgen.config import parse_config
from benchgen.design import Design, build_design
from benchgen.functions.nco import (
    MAX_SIZED_PHASE_BITS,
    core_error_max_lsb,
    phase_bits_for,
    pick_sizes,
    sfdr_bound_db,
    snr_bound_db,
)
from benchgen.functions.sincos import FUNCTION as SINCOS
from benchgen.nco import Nco, run
from benchgen.nco_theory import word_near_seventh
from benchgen.spectrum import measure_tone

__all__ = [
    "MAX_SIZED_PHASE_BITS",
    "NcoSizing",
    "SpectrumCheck",
    "core_error_max_lsb",
    "phase_bits_for",
    "sfdr_bound_db",
    "size_nco",
    "snr_bound_db",
    "spectrum_checks",
]

_MIN_FFT_BITS = 14
_LONG_FFT_BITS = 16
_MAX_FFT_BITS = 20


@dataclass(frozen=True)
class SpectrumCheck:
    """One measured word.

    Attributes:
        label: What the word stresses.
        freq_word: The frequency word.
        phase_offset: The phase offset.
        n_fft: Record length.
        cycles: The carrier's bin.
        period: Its truncation period ``M`` (1: exact).
        sfdr_db: Measured SFDR (dBc).
        snr_db: Measured SNR (dB).
    """

    label: str
    freq_word: int
    phase_offset: int
    n_fft: int
    cycles: int
    period: int
    sfdr_db: float
    snr_db: float


def spectrum_checks(nco: Nco, dp: Datapath) -> tuple[SpectrumCheck, ...]:
    """Measure the quadrature spectrum of the model at the words that stress phase truncation.

    Each word is coherent in its record (rectangular window; IEEE Std 1241) and the record holds
    whole truncation periods. The carrier sits near f_clk/7, on an odd bin.
    """
    a, p = nco.acc_width, nco.angle_width
    plans: list[tuple[str, int, int, int]] = []  # label, fft bits, period, phase offset
    for label, period in (("worst truncation word (M = 2)", 2), ("M = 4", 4)):
        bits = max(_MIN_FFT_BITS, p + period.bit_length() - 1)
        if bits <= _MAX_FFT_BITS and period <= 1 << nco.dropped_bits:
            plans.append((label, bits, period, 0))
    long_bits = min(_MAX_FFT_BITS, max(_LONG_FFT_BITS, p + 4))
    long_period = min(1 << max(long_bits - p, 0), 1 << nco.dropped_bits)
    if long_period > 4:
        plans.append((f"long period (M = {long_period})", long_bits, long_period, 0))
    plans.append(("exact word, phase offset 1/3 turn", _MIN_FFT_BITS, 1, (1 << a) // 3))
    checks = []
    for label, bits, period, offset in plans:
        n_fft = 1 << bits
        word = word_near_seventh(a, p, n_fft, period)
        out = run(nco, dp, n_fft, freq_word=word.freq_word, phase_offset=offset)
        m = measure_tone(out.complex(), word.cycles)
        checks.append(
            SpectrumCheck(label, word.freq_word, offset, n_fft, word.cycles, word.period, m.sfdr_db, m.snr_db)
        )
    return tuple(checks)


@dataclass(frozen=True)
class NcoSizing:
    """The sized NCO and its proof.

    Attributes:
        sfdr_dbc: The required SFDR (None: none required).
        snr_db: The required SNR (None: none required).
        nco: The phase path (accumulator, ``P`` kept bits, no dither).
        design: The sine/cosine core as build_design made it.
        error_max_lsb: Largest ``|e|`` of the core over every code (output LSBs).
        sfdr_bound_db: Guaranteed SFDR over all words.
        snr_bound_db: Guaranteed SNR over all words.
        checks: The measured words.
    """

    sfdr_dbc: float | None
    snr_db: float | None
    nco: Nco
    design: Design
    error_max_lsb: float
    sfdr_bound_db: float
    snr_bound_db: float
    checks: tuple[SpectrumCheck, ...]

    @property
    def met(self) -> bool:
        """Whether every measured word meets every target."""
        return all(
            (self.sfdr_dbc is None or c.sfdr_db >= self.sfdr_dbc) and (self.snr_db is None or c.snr_db >= self.snr_db)
            for c in self.checks
        )

    def core_config(self) -> dict[str, Any]:
        """The sincos core's config values (sizes explicit, so build_design reproduces it)."""
        dp = self.design.datapath
        return {
            "name": self.design.spec.name,
            "function": SINCOS.name,
            "architecture": self.design.spec.architecture,
            "angle_width": dp.angle_width,
            "data_width": dp.data_width,
            "iterations": dp.iterations,
            "guard_bits": dp.guard_bits,
            "angle_guard_bits": dp.angle_guard_bits,
            "rounding": dp.rounding,
            "shifted_terms": "rounded" if dp.rounded_shifts else "floored",
            "max_error_lsb": self.design.spec.max_error_lsb,
        }


def size_nco(
    *,
    sfdr_dbc: float | None = None,
    snr_db: float | None = None,
    acc_width: int = 32,
    max_error_lsb: float = 1.0,
    rounding: str = "half_even",
    architecture: str = "pipelined",
    name: str = "nco_core",
) -> NcoSizing:
    """Pick P, N, iterations and guard bits for the targets and measure the result.

    Args:
        sfdr_dbc: Required SFDR of the quadrature output, dBc.
        snr_db: Required SNR, dB.
        acc_width: Accumulator bits (sets the frequency resolution, not the spectrum).
        max_error_lsb: The core's error budget for build_design.
        rounding: The core's output rounding.
        architecture: The core's architecture (does not change the numbers).
        name: The core's name.

    Raises:
        ConfigError: naming the field, for a target out of reach or a bad core field.
    """
    built: dict[tuple[int, int], Design] = {}

    def build(p: int, n: int) -> Datapath:
        config = {
            "name": name,
            "function": SINCOS.name,
            "architecture": architecture,
            "angle_width": p,
            "data_width": n,
            "rounding": rounding,
            "max_error_lsb": max_error_lsb,
        }
        built[p, n] = build_design(parse_config(config))
        return built[p, n].datapath

    p, n, dp, err = pick_sizes(sfdr_dbc, snr_db, build)
    nco = Nco(acc_width=acc_width, angle_width=p)
    return NcoSizing(
        sfdr_dbc=sfdr_dbc,
        snr_db=snr_db,
        nco=nco,
        design=built[p, n],
        error_max_lsb=err,
        sfdr_bound_db=sfdr_bound_db(p, dp.amplitude, err),
        snr_bound_db=snr_bound_db(p, dp.amplitude, err),
        checks=spectrum_checks(nco, dp),
    )
