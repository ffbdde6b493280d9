"""Bit-true model of a numerically controlled oscillator (NCO): phase accumulator, optional
phase dither, phase truncation, and the sine/cosine core.

The model is the specification the NCO's hardware is to match bit for bit; docs/nco.md states
the same rules with a worked timing example. For sample ``n = 0, 1, 2, ...``:

* ``fw[n]``, ``po[n]``: the frequency word and the phase offset in force at sample ``n``
  (A-bit unsigned registers, both 0 after reset unless given). A change scheduled at sample
  ``k`` sets them for every ``n >= k`` until the next change.
* ``acc[0] = 0`` (reset) and ``acc[n + 1] = (acc[n] + fw[n]) mod 2**A``: the accumulator
  register holds the phase of sample ``n``; its update uses the word in force at ``n``. So a
  new word scheduled at ``k`` is used from the next accumulator update on: ``acc[k]`` was already
  formed with the old word, and the first sample whose phase step is the new word is ``k + 1``
  (``acc[k + 1] - acc[k] = fw_new``). A new phase offset scheduled at ``k`` already moves
  sample ``k``.
* ``dither[n]``: 0 without dither; else the low ``D`` bits of the dither LFSR's state ``s[n]``,
  where ``s[0]`` is the seed and ``s[n + 1]`` is ``s[n]`` advanced by ``D`` steps of
  :func:`benchgen.lfsr.lfsr_step` (so consecutive samples get disjoint runs of ``D`` fresh bits
  of one maximal-length sequence). The LFSR advances once per sample whatever the words do.
* ``phase[n] = (acc[n] + po[n] + dither[n] * 2**(A - P - D)) mod 2**A``: the dither's top bit
  sits just below the kept phase LSB, so a ``D``-bit dither spans ``[0, 1)`` kept LSB in steps of
  ``2**-D`` LSB (with ``D = A - P`` it is uniform over the whole dropped range).
* ``code[n] = phase[n] >> (A - P)``: truncation (floor) to the ``P = angle_width`` bits of the
  core's binary angle input; ``(cos[n], sin[n])`` = :func:`benchgen.model.sincos` of ``code[n]``.

Free-running mode emits one sample per clock, with changes made through a load port at given
sample (= clock) indices: :func:`run`. Streamed mode emits one sample per input token; a token
may carry a new frequency word and/or phase offset, which take effect exactly as a change
scheduled at that token's index; the accumulator and the LFSR advance once per accepted token
(idle clocks and output stalls do not advance them): :func:`run_stream`. Both call the same
:func:`phase_path`.

Arithmetic is exact: uint64 arrays, whose wrap-around modulo 2**64 is also exact modulo 2**A for
every ``A <= 64``. Words may be given as signed values down to ``-2**(A-1)`` (a negative frequency
word is a clockwise phasor); they are taken modulo ``2**A``, as the A-bit register holds them.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any, NamedTuple

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath
from benchgen.errors import ConfigError
from benchgen.lfsr import LFSR_TAPS, MAX_LFSR_WIDTH, MIN_LFSR_WIDTH, lfsr_states
from benchgen.functions.sincos import FUNCTION as SINCOS

__all__ = [
    "DEFAULT_LFSR_WIDTH",
    "MAX_ACC_WIDTH",
    "Change",
    "Nco",
    "NcoOutput",
    "PhasePath",
    "phase_path",
    "run",
    "run_stream",
]

MAX_ACC_WIDTH = 64
"""Widest accumulator: the model's uint64 arithmetic is exact up to here."""
DEFAULT_LFSR_WIDTH = 32
"""Dither LFSR length unless the dither is wider: period 2**32 - 1 register states (each sample
takes one state), far beyond any record the bench measures."""


@dataclass(frozen=True, kw_only=True)
class Nco:
    """The NCO's phase path: everything in front of the sine/cosine core.

    Attributes:
        acc_width: Bits ``A`` of the phase accumulator, the frequency word and the phase offset;
            the frequency resolution is ``f_clk / 2**A``.
        angle_width: Bits ``P`` kept from the top of the phase: the core's ``angle_width``.
        dither_width: Bits ``D`` of phase dither added just below the kept bits (0: none).
        lfsr_width: Length ``L`` of the dither LFSR (a maximal-length register of benchgen.lfsr);
            ``None``: ``max(32, dither_width)``.
        lfsr_seed: The LFSR's state after reset, ``1 .. 2**L - 1``; ``None``: all ones.

    Raises:
        ConfigError: naming the field, when a value is out of range.
    """

    acc_width: int
    angle_width: int
    dither_width: int = 0
    lfsr_width: int | None = None
    lfsr_seed: int | None = None

    def __post_init__(self) -> None:
        a, p, d = self.acc_width, self.angle_width, self.dither_width
        width = max(DEFAULT_LFSR_WIDTH, d) if self.lfsr_width is None else self.lfsr_width
        seed = (1 << width) - 1 if self.lfsr_seed is None else self.lfsr_seed
        object.__setattr__(self, "lfsr_width", width)
        object.__setattr__(self, "lfsr_seed", seed)
        if not 3 <= p <= MAX_ACC_WIDTH:
            raise ConfigError("angle_width", p, f"3 to {MAX_ACC_WIDTH}", "set angle_width = 16")
        if not p <= a <= MAX_ACC_WIDTH:
            fix = max(p, min(32, MAX_ACC_WIDTH))
            raise ConfigError(
                "acc_width", a, f"angle_width ({p}) to {MAX_ACC_WIDTH}", f"set acc_width = {fix}",
                suggestion={"acc_width": fix},
            )  # fmt: skip
        if not 0 <= d <= a - p:
            raise ConfigError(
                "dither_width", d,
                f"0 to acc_width - angle_width = {a - p} (the dither lives in the dropped phase bits)",
                f"set dither_width = {min(max(d, 0), a - p)}", suggestion={"dither_width": min(max(d, 0), a - p)},
            )  # fmt: skip
        if width not in LFSR_TAPS:
            raise ConfigError(
                "lfsr_width", width, f"{MIN_LFSR_WIDTH} to {MAX_LFSR_WIDTH}",
                f"set lfsr_width = {DEFAULT_LFSR_WIDTH}", suggestion={"lfsr_width": DEFAULT_LFSR_WIDTH},
            )  # fmt: skip
        if d > width:
            raise ConfigError(
                "lfsr_width", width,
                f"at least dither_width ({d}): each sample takes D fresh bits from one register state",
                f"set lfsr_width = {max(d, MIN_LFSR_WIDTH)}", suggestion={"lfsr_width": max(d, MIN_LFSR_WIDTH)},
            )  # fmt: skip
        if not isinstance(seed, int) or not 0 < seed < 1 << width:
            raise ConfigError(
                "lfsr_seed", seed,
                f"1 to 2**{width} - 1 (the all-zero state never leaves itself)",
                "set lfsr_seed = 1", suggestion={"lfsr_seed": 1},
            )  # fmt: skip

    @property
    def dropped_bits(self) -> int:
        """``A - P``: accumulator bits below the kept phase."""
        return self.acc_width - self.angle_width

    def word(self, value: int, what: str = "freq_word") -> int:
        """An A-bit register value from a word given unsigned or signed (``-2**(A-1) .. 2**A - 1``).

        Raises:
            ValueError: naming the word, when it does not fit A bits either way.
        """
        a = self.acc_width
        if not isinstance(value, (int, np.integer)) or isinstance(value, bool):
            raise ValueError(f"{what} must be an integer, not {value!r}")
        v = int(value)
        if not -(1 << (a - 1)) <= v < 1 << a:
            raise ValueError(f"{what} {v} does not fit the {a}-bit accumulator: use -2**{a - 1} to 2**{a} - 1")
        return v % (1 << a)


class Change(NamedTuple):
    """A change of the NCO's words at a sample index (``None``: that word stays as it is).

    The phase offset applies to sample ``index`` itself; the frequency word to the accumulator
    update from sample ``index`` to ``index + 1`` (see the module docstring).
    """

    index: int
    freq_word: int | None = None
    phase_offset: int | None = None


@dataclass(frozen=True)
class PhasePath:
    """Every register of the phase path, one entry per sample (uint64 arrays).

    Attributes:
        freq_word: The frequency word in force at each sample.
        phase_offset: The phase offset in force at each sample.
        accumulator: ``acc[n]``.
        dither: ``dither[n]`` (D-bit values, before their shift into place).
        phase: ``phase[n]``, the A-bit sum before truncation.
        codes: ``code[n]``, the P-bit angle fed to the core (int64; object when P > 62).
    """

    freq_word: npt.NDArray[np.uint64]
    phase_offset: npt.NDArray[np.uint64]
    accumulator: npt.NDArray[np.uint64]
    dither: npt.NDArray[np.uint64]
    phase: npt.NDArray[np.uint64]
    codes: npt.NDArray[Any]


@dataclass(frozen=True)
class NcoOutput:
    """The phase path and the core's outputs.

    Attributes:
        path: The phase path's registers.
        cos: Signed cosine outputs of the core, one per sample.
        sin: Signed sine outputs.
    """

    path: PhasePath
    cos: npt.NDArray[Any]
    sin: npt.NDArray[Any]

    @property
    def codes(self) -> npt.NDArray[Any]:
        """The phase codes fed to the core."""
        return self.path.codes

    def complex(self) -> npt.NDArray[np.complex128]:
        """``cos + j sin`` as complex128, for the spectrum of the quadrature output."""
        return np.asarray(self.cos, dtype=np.float64) + 1j * np.asarray(self.sin, dtype=np.float64)


def _normalise(nco: Nco, n: int, changes: Iterable[Change | tuple[Any, ...]]) -> list[Change]:
    out: list[Change] = []
    last = -1
    for raw in changes:
        ch = Change(*raw)
        if not isinstance(ch.index, (int, np.integer)) or isinstance(ch.index, bool):
            raise ValueError(f"a change's sample index must be an integer, not {ch.index!r}")
        if not last < ch.index < n:
            raise ValueError(
                f"change at sample {ch.index}: indices must rise strictly and lie in 0 .. {n - 1} "
                f"(the record has {n} samples)"
            )
        last = int(ch.index)
        fw = None if ch.freq_word is None else nco.word(ch.freq_word, "freq_word")
        po = None if ch.phase_offset is None else nco.word(ch.phase_offset, "phase_offset")
        out.append(Change(int(ch.index), fw, po))
    return out


def _held(n: int, start: int, changes: list[Change], field: int) -> npt.NDArray[np.uint64]:
    """A register value per sample: ``start``, replaced at each change that sets ``field``."""
    starts = [0]
    values = [start]
    for ch in changes:
        value = ch[field]
        if value is None:
            continue
        if ch.index == starts[-1]:
            values[-1] = value
        else:
            starts.append(ch.index)
            values.append(value)
    lengths = np.diff(np.array(starts + [n], dtype=np.int64))
    return np.repeat(np.array(values, dtype=np.uint64), lengths)


def phase_path(
    nco: Nco,
    n: int,
    *,
    freq_word: int = 0,
    phase_offset: int = 0,
    changes: Iterable[Change | tuple[Any, ...]] = (),
) -> PhasePath:
    """The phase path's registers for ``n`` samples from reset.

    Args:
        nco: The phase path's parameters.
        n: Number of samples.
        freq_word: The frequency word loaded before sample 0 (a change at index 0 overrides it).
        phase_offset: The phase offset loaded before sample 0.
        changes: ``Change(index, freq_word, phase_offset)`` (or plain tuples), indices rising.

    Raises:
        ValueError: for a word that does not fit A bits or a change index out of order or range.
    """
    if n < 1:
        raise ValueError(f"the record needs at least one sample, not {n}")
    a, p, d = nco.acc_width, nco.angle_width, nco.dither_width
    mask = np.uint64((1 << a) - 1)
    schedule = _normalise(nco, n, changes)
    fw = _held(n, nco.word(freq_word, "freq_word"), schedule, 1)
    po = _held(n, nco.word(phase_offset, "phase_offset"), schedule, 2)
    acc = np.empty(n, dtype=np.uint64)
    acc[0] = 0
    # Exclusive running sum: acc[n] holds the words of samples 0 .. n-1 (uint64 wraps mod 2**64).
    np.cumsum(fw[:-1], out=acc[1:])
    acc &= mask
    if d:
        assert nco.lfsr_width is not None and nco.lfsr_seed is not None  # set by Nco.__post_init__
        dither = lfsr_states(nco.lfsr_width, nco.lfsr_seed, n, d) & np.uint64((1 << d) - 1)
    else:
        dither = np.zeros(n, dtype=np.uint64)
    phase = (acc + po + (dither << np.uint64(nco.dropped_bits - d))) & mask
    top = phase >> np.uint64(nco.dropped_bits)
    codes: npt.NDArray[Any] = top.astype(np.int64) if p <= 62 else np.array([int(c) for c in top], dtype=object)
    return PhasePath(freq_word=fw, phase_offset=po, accumulator=acc, dither=dither, phase=phase, codes=codes)


def _check_core(nco: Nco, dp: Datapath) -> None:
    if dp.function != SINCOS.name or dp.angle_unit != "turns":
        raise ValueError(
            f"an NCO drives a sincos core with a binary angle (turns), not {dp.function} in {dp.angle_unit}"
        )
    if dp.angle_width != nco.angle_width:
        raise ValueError(f"the core's angle_width is {dp.angle_width} but the NCO keeps {nco.angle_width} phase bits")


def run(
    nco: Nco,
    dp: Datapath,
    n: int,
    *,
    freq_word: int = 0,
    phase_offset: int = 0,
    changes: Iterable[Change | tuple[Any, ...]] = (),
) -> NcoOutput:
    """Free-running NCO: ``n`` consecutive samples from reset, one per clock.

    Args:
        nco: The phase path.
        dp: The sine/cosine core's data path (``angle_width`` must equal ``nco.angle_width``).
        n: Number of samples.
        freq_word: Frequency word loaded before sample 0.
        phase_offset: Phase offset loaded before sample 0.
        changes: Loads at given sample indices (see :class:`Change` for when each takes effect).
    """
    _check_core(nco, dp)
    path = phase_path(nco, n, freq_word=freq_word, phase_offset=phase_offset, changes=changes)
    out = SINCOS.model(dp, {"in_angle": path.codes})
    return NcoOutput(path=path, cos=out["out_cos"], sin=out["out_sin"])


def run_stream(
    nco: Nco,
    dp: Datapath,
    tokens: Sequence[tuple[int | None, int | None]],
    *,
    freq_word: int = 0,
    phase_offset: int = 0,
) -> NcoOutput:
    """Streamed NCO: one output per input token, in order.

    Args:
        nco: The phase path.
        dp: The sine/cosine core's data path.
        tokens: ``(freq_word or None, phase_offset or None)`` per token; a value is a load that
            takes effect as a change at that token's index (:class:`Change`), ``None`` keeps the
            register.
        freq_word: Frequency word after reset.
        phase_offset: Phase offset after reset.
    """
    changes = [Change(k, fw, po) for k, (fw, po) in enumerate(tokens) if fw is not None or po is not None]
    return run(nco, dp, len(tokens), freq_word=freq_word, phase_offset=phase_offset, changes=changes)
