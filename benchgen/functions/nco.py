"""nco: a numerically controlled oscillator, the phase accumulator (with optional phase dither)
in front of the sine/cosine core.

The bit-true model is benchgen.nco (docs/nco.md states its rules and the timing of a change);
this module makes it a core kind. The core is streamed: each input token carries a frequency
word and a phase offset (``in_freq_word``, ``in_phase_offset``, both ``acc_width`` bits,
unsigned), and each accepted token is one sample. Token ``n`` sets both words at sample ``n``
(``benchgen.nco.run_stream`` with both fields of every token given): its phase offset moves
sample ``n`` itself and its frequency word the accumulator update after it. The accumulator and
the dither LFSR advance once per accepted token; idle clocks and output stalls advance neither.
A user who wants a steady tone sends the same words in every token.

The iterations are the sincos core's, sized as sincos (the phase path adds no error to the
core's own: the truncated code is exact), so a sized NCO has the iterations and guard bits of
the sincos core of the same angle and data widths. Outputs are judged against the exact sine
and cosine of the code the core was given.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import asdict, dataclass, fields, replace
from typing import Any, ClassVar

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath
from benchgen.errors import ConfigError
from benchgen.functions.base import Inputs, Outputs, PhaseFront, Port
from benchgen.functions.circular import CircularDatapath
from benchgen.functions.sincos import FUNCTION as SINCOS
from benchgen.functions.sincos import SinCos, ideal_sincos
from benchgen.hwlib import Builder, Start
from benchgen.lfsr import leap_map, lfsr_states
from benchgen.nco import Change, Nco, phase_path
from benchgen.spec import CoreSpec

__all__ = ["NcoCore", "NcoDatapath", "phase_of"]

FREQ_PORT = "in_freq_word"
PHASE_PORT = "in_phase_offset"
CODE_WIRE = "phase_code"


@dataclass(frozen=True, kw_only=True)
class NcoDatapath(CircularDatapath):
    """The sincos core's data path with the phase path's parameters.

    Attributes:
        acc_width: ``A``, bits of the accumulator and both words.
        dither_width: ``D``, phase dither bits (0: none).
        lfsr_width: ``L``, the dither LFSR's length.
        lfsr_seed: The LFSR's state after reset.
    """

    acc_width: int = 32
    dither_width: int = 0
    lfsr_width: int = 32
    lfsr_seed: int = (1 << 32) - 1

    def core(self) -> CircularDatapath:
        """The sine/cosine core's own data path (what benchgen.model.sincos runs)."""
        own = {f.name for f in fields(NcoDatapath)} - {f.name for f in fields(CircularDatapath)}
        values = {k: v for k, v in asdict(self).items() if k not in own}
        values["atan_table"] = tuple(values["atan_table"])
        values["shifts"] = tuple(values["shifts"])
        return CircularDatapath(**{**values, "function": SINCOS.name})

    def phase(self) -> Nco:
        """The phase path (benchgen.nco's parameters)."""
        return Nco(
            acc_width=self.acc_width, angle_width=self.angle_width, dither_width=self.dither_width,
            lfsr_width=self.lfsr_width, lfsr_seed=self.lfsr_seed,
        )  # fmt: skip


def _nco_of(spec: CoreSpec) -> Nco:
    """The phase path a spec asks for (raises ConfigError naming the field)."""
    return Nco(
        acc_width=spec.acc_width, angle_width=spec.angle_width, dither_width=spec.dither_width,
        lfsr_width=spec.lfsr_width, lfsr_seed=spec.lfsr_seed,
    )  # fmt: skip


def phase_of(dp: NcoDatapath, inputs: Mapping[str, npt.ArrayLike]) -> Any:
    """The phase path's registers for a stream of tokens from reset (benchgen.nco.PhasePath):
    every token loads both words at its own index."""
    fw = np.asarray(inputs[FREQ_PORT])
    po = np.asarray(inputs[PHASE_PORT])
    nco = dp.phase()
    mask = (1 << dp.acc_width) - 1
    changes = [Change(k, int(f) & mask, int(p) & mask) for k, (f, p) in enumerate(zip(fw.tolist(), po.tolist()))]
    return phase_path(nco, len(changes), changes=changes)


class NcoCore(SinCos):
    """The NCO: accumulator, offset, dither and truncation, then the sincos iterations."""

    name: ClassVar[str] = "nco"
    summary: ClassVar[str] = "numerically controlled oscillator: phase accumulator, optional dither, sine and cosine"
    synonyms: ClassVar[tuple[str, ...]] = ("dds", "oscillator", "local_oscillator")
    options: ClassVar[tuple[str, ...]] = ("acc_width", "dither_width", "lfsr_width", "lfsr_seed")
    angle_signal: ClassVar[str] = CODE_WIRE

    # ---------------------------------------------------------------- config and data path

    def validate(self, spec: CoreSpec) -> None:
        if spec.angle_unit != "turns":
            raise ConfigError(
                "angle_unit", spec.angle_unit, 'turns (the accumulator is a binary angle)', 'set angle_unit = "turns"',
                suggestion={"angle_unit": "turns"},
            )  # fmt: skip
        _nco_of(spec)

    def sizing_spec(self, spec: CoreSpec) -> CoreSpec:
        # The truncated code is exact: the core's error is the sincos core's at that code.
        return replace(spec, function=SINCOS.name, acc_width=32, dither_width=0, lfsr_width=None, lfsr_seed=None)

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> NcoDatapath:
        base = SinCos.datapath(self, spec, iterations, guard_bits)
        nco = _nco_of(spec)
        assert nco.lfsr_width is not None and nco.lfsr_seed is not None  # set by Nco
        values = asdict(base)
        values["atan_table"] = tuple(values["atan_table"])
        values["shifts"] = tuple(values["shifts"])
        return NcoDatapath(
            **values, acc_width=nco.acc_width, dither_width=nco.dither_width,
            lfsr_width=nco.lfsr_width, lfsr_seed=nco.lfsr_seed,
        )  # fmt: skip

    # ---------------------------------------------------------------- ports and documents

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        assert isinstance(dp, NcoDatapath)
        a = dp.acc_width
        return (
            Port(FREQ_PORT, a, False, f"unsigned, {a} bits: phase step per sample, f = word f_clk / 2^{a}"),
            Port(PHASE_PORT, a, False, f"unsigned, {a} bits: phase offset of this sample, in 2^-{a} turn"),
        )

    def describe(self, dp: Datapath) -> str:
        assert isinstance(dp, NcoDatapath)
        dither = f", {dp.dither_width} dither bits" if dp.dither_width else ", no dither"
        return (
            f"NCO: {dp.acc_width}-bit phase accumulator{dither}, phase truncated to {dp.angle_width} bits, "
            f"{dp.data_width}-bit cosine and sine"
        )

    def header_notes(self, dp: Datapath) -> list[str]:
        assert isinstance(dp, NcoDatapath)
        b = dp.acc_width - dp.angle_width
        notes = [
            f"phase          acc + in_phase_offset + dither * 2^{b - dp.dither_width}, top {dp.angle_width} of {dp.acc_width} bits kept",
            "               (floor); acc <= acc + in_freq_word at each taken sample (docs/nco.md)",
        ]
        if dp.dither_width:
            notes.append(
                f"dither         low {dp.dither_width} bits of a {dp.lfsr_width}-bit XOR LFSR (seed {dp.lfsr_seed:#x}), "
                f"{dp.dither_width} steps per sample"
            )
        return notes + super().header_notes(dp)

    def manifest_extras(self, dp: Datapath) -> dict[str, Any]:
        assert isinstance(dp, NcoDatapath)
        return {
            "nco": {
                "acc_width": dp.acc_width,
                "dither_width": dp.dither_width,
                "lfsr_width": dp.lfsr_width,
                "lfsr_seed": dp.lfsr_seed,
                "judged": "each output against the exact cosine and sine of the phase code the core was given",
            }
        }

    # ---------------------------------------------------------------- model

    def model_bits(self, dp: Datapath) -> int:
        return SINCOS.model_bits(dp)

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        """benchgen.nco's streamed NCO from reset, one sample per token (both words loaded)."""
        assert isinstance(dp, NcoDatapath)
        path = phase_of(dp, inputs)
        return SINCOS.model(dp.core(), {"in_angle": path.codes})

    def initial_state(self, dp: Datapath) -> tuple[int, int]:
        """``(accumulator, LFSR state)`` after reset."""
        assert isinstance(dp, NcoDatapath)
        return 0, dp.lfsr_seed

    def model_run(self, dp: Datapath, inputs: Inputs, state: Any) -> tuple[Outputs, Outputs, Any]:
        """benchgen.nco's model from a state: an accumulator ``acc0`` adds to every sample's
        phase as an offset would (the accumulator's update does not read the offset), and the
        LFSR starts from its state as from a seed."""
        assert isinstance(dp, NcoDatapath)
        acc0, s0 = state
        mask = (1 << dp.acc_width) - 1
        fw = [int(v) & mask for v in np.asarray(inputs[FREQ_PORT]).tolist()]
        po = [(int(v) + acc0) & mask for v in np.asarray(inputs[PHASE_PORT]).tolist()]
        dtype: Any = np.int64 if dp.acc_width <= 62 else object
        there = replace(dp, lfsr_seed=s0)
        path = phase_of(there, {FREQ_PORT: np.array(fw, dtype=dtype), PHASE_PORT: np.array(po, dtype=dtype)})
        core = dp.core()
        out = SINCOS.model(core, {"in_angle": path.codes})
        cos, sin = ideal_sincos(core, path.codes)
        acc_end = (acc0 + int(path.accumulator[-1]) + fw[-1]) & mask
        s_end = int(lfsr_states(dp.lfsr_width, s0, len(fw) + 1, dp.dither_width)[-1]) if dp.dither_width else s0
        return out, {"out_cos": cos, "out_sin": sin}, (acc_end, s_end)

    def tone(self, dp: Datapath, angles: npt.NDArray[Any]) -> npt.NDArray[Any]:
        assert isinstance(dp, NcoDatapath)
        return SINCOS.tone(dp.core(), angles)

    # ---------------------------------------------------------------- stimulus

    def _offsets(self, dp: NcoDatapath, codes: list[int], steps: list[int] | None = None) -> Inputs:
        shift = dp.acc_width - dp.angle_width
        mask = (1 << dp.acc_width) - 1
        dtype: Any = np.int64 if dp.acc_width <= 62 else object
        po = [(int(c) << shift) & mask for c in codes]
        fw = steps if steps is not None else [0] * len(codes)
        return {FREQ_PORT: np.array(fw, dtype=dtype), PHASE_PORT: np.array(po, dtype=dtype)}

    def corners(self, dp: Datapath) -> Inputs:
        """The angle corners as phase offsets at a standing accumulator, then the accumulator's
        own corners: the largest and smallest steps, wrap-around and a step of one LSB."""
        assert isinstance(dp, NcoDatapath)
        a = dp.acc_width
        top = (1 << a) - 1
        codes = [int(c) % (1 << dp.angle_width) for c in self.angle_corners(dp.angle_width, False, dp.angle_frac)]
        steps = [0] * len(codes)
        tail = [top, top, 1 << (a - 1), 1 << (a - 1), 1, 1, top, 1 << (a - 2), 1 << (a - 2), 3 << (a - 2), 5, top - 4]
        codes += [0] * len(tail)
        steps += tail
        out = self._offsets(dp, codes, steps)
        out[PHASE_PORT][-4:] = np.array([top, 1 << (a - 1), 0, top >> 1], dtype=out[PHASE_PORT].dtype)
        return out

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        """The sincos core's directed angles as phase offsets (the accumulator standing)."""
        assert isinstance(dp, NcoDatapath)
        codes = SINCOS.directed(dp.core(), rng, per_octave)["in_angle"]
        return self._offsets(dp, [int(c) for c in codes])

    # ---------------------------------------------------------------- ideal

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        assert isinstance(dp, NcoDatapath)
        cos, sin = ideal_sincos(dp.core(), phase_of(dp, inputs).codes)
        return {"out_cos": cos, "out_sin": sin}

    # ---------------------------------------------------------------- hardware

    def phase_front(self, dp: Datapath) -> PhaseFront | None:
        assert isinstance(dp, NcoDatapath)
        leap = leap_map(dp.lfsr_width, dp.dither_width) if dp.dither_width else ()
        return PhaseFront(
            acc_width=dp.acc_width, angle_width=dp.angle_width, dither_width=dp.dither_width,
            lfsr_width=dp.lfsr_width, lfsr_seed=dp.lfsr_seed, lfsr_leap=leap,
            freq_port=FREQ_PORT, phase_port=PHASE_PORT, angle=CODE_WIRE,
        )  # fmt: skip

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        # The front stage (benchgen.hardware) has formed the phase code; the fold reads it.
        return SinCos.hw_inputs(self, b, dp)


FUNCTION = NcoCore()
