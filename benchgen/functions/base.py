"""What every function module provides, and the helpers they share.

A function module holds one class, a subclass of :class:`Function`, that owns everything about
that function: which config fields apply, its data path (widths and constants, a
:class:`~benchgen.algorithm.Datapath` subclass of its own), its ports and formats, the bit-true
model of its input and output logic around the shared iteration kernel, the ideal and how
outputs are judged, its corners and directed worst-case inputs, and its hardware input and
output logic (described with :mod:`benchgen.netlist` through :mod:`benchgen.hwlib`). The
iterations, the handshake and the output buffer are generic (:mod:`benchgen.hardware`).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, ClassVar

import mpmath
import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath
from benchgen.spec import CoreSpec
from benchgen.model import INT64_MODEL_BITS, to_signed
from benchgen.reference import errors_lsb

if TYPE_CHECKING:
    from benchgen.hwlib import Builder, Final, Start

__all__ = [
    "IDEAL_DPS",
    "LOAD_PORT",
    "CorePort",
    "Function",
    "Inputs",
    "Outputs",
    "PhaseFront",
    "Port",
    "below",
    "fixed_doc",
    "octave",
    "pack",
    "signed_octaves",
    "uniform",
]

Inputs = dict[str, npt.NDArray[Any]]
Outputs = dict[str, npt.NDArray[Any]]

IDEAL_DPS = 40
"""Decimal digits of every mpmath ideal (wide formats)."""

WIDE_DATA_BITS = 40
"""Past this data width the model runs on Python integers."""

WIDE_ANGLE_BITS = 56
"""Past this angle width the model runs on Python integers."""


@dataclass(frozen=True)
class Port:
    """A data port of a core (the handshake, clock, reset and tag ports are implied).

    Attributes:
        name: Port name.
        width: Bits.
        signed: Read as two's complement.
        doc: Its format, for headers and manifests.
    """

    name: str
    width: int
    signed: bool
    doc: str


LOAD_PORT = "load"
"""A free-running core's load strobe: high at a clock edge, the data inputs are loaded."""


@dataclass(frozen=True)
class CorePort:
    """A port of a core's module: the one description of its interface.

    The data ports are the function's (:class:`Port`, whose format they carry); clock, reset,
    handshake and tag are the ones every core has (:func:`benchgen.functions.core_ports`). The
    manifest's ``ports``, the hardware's port list, the bulk harness's word layout and the
    estimate flow's port-register wrapper are all read from it.

    Attributes:
        name: Port name.
        width: Bits.
        direction: ``in`` or ``out``.
        role: ``clock``, ``reset``, ``enable`` (the clock enable, where the config asks for
            one), ``handshake``, ``load`` (a free-running core's load strobe), ``data`` (the
            function's) or ``tag``.
        signed: Read as two's complement (data ports only).
        doc: The data port's format, for headers and manifests (empty for the others).
        active_low: The reset acts while the port is low (the reset port only).
    """

    name: str
    width: int
    direction: str
    role: str
    signed: bool = False
    doc: str = ""
    active_low: bool = False

    @property
    def payload(self) -> bool:
        """Whether the port carries the sample itself (a data or tag port), not the clock, the
        reset or the handshake. Payload ports are vectors even at one bit."""
        return self.role in ("data", "tag")


@dataclass(frozen=True)
class PhaseFront:
    """A phase accumulator in front of the iterations (an NCO; docs/nco.md gives the rules).

    At every taken sample the core reads ``phase = acc + offset + dither * 2**(A - P - D)``
    (modulo ``2**A``) and feeds its top ``P`` bits to the iterations as the angle; the same
    clock edge loads ``acc + freq`` into the accumulator and advances the dither LFSR.

    Attributes:
        acc_width: ``A``, bits of the accumulator and of both words.
        angle_width: ``P``, bits kept (the core's angle).
        dither_width: ``D``, dither bits below the kept LSB (0: no LFSR is built).
        lfsr_width: ``L``, the dither LFSR's length.
        lfsr_seed: Its state after reset.
        lfsr_leap: The LFSR's ``D``-step map, the image of each one-bit state
            (benchgen.lfsr.leap_map): bit ``j`` of the next state is the XOR of the state bits
            ``i`` whose image has bit ``j`` set.
        freq_port: The input port of the frequency word.
        phase_port: The input port of the phase offset.
        angle: The name of the wire that carries the kept bits to the function's input logic.
        load_port: Free-running: the port whose high level at a clock edge loads both words
            into registers of their own (they act at once through a select, docs/nco.md); empty:
            streamed, every taken sample reads the words from its own input token.
    """

    acc_width: int
    angle_width: int
    dither_width: int
    lfsr_width: int
    lfsr_seed: int
    lfsr_leap: tuple[int, ...]
    freq_port: str
    phase_port: str
    angle: str
    load_port: str = ""


def fixed_doc(width: int, frac: int, signed: bool) -> str:
    """A fixed-point format in words: kind, width, fraction bits and range."""
    kind = "two's complement" if signed else "unsigned"
    lo = -(2.0 ** (width - 1 - frac)) if signed else 0.0
    hi = 2.0 ** (width - 1 - frac) if signed else 2.0 ** (width - frac)
    return f"{kind} fixed point, {width} bits with {frac} fraction bits, [{lo:g}, {hi:g})"


def uniform(rng: np.random.Generator, width: int, count: int, signed: bool) -> npt.NDArray[Any]:
    """``count`` uniform random codes of a ``width``-bit port (signed values where signed)."""
    if width <= 62:
        vals = rng.integers(0, 1 << width, size=count, dtype=np.int64)
        return to_signed(vals, width) if signed else vals
    hi = rng.integers(0, 1 << 62, size=count, dtype=np.int64)
    lo = rng.integers(0, 1 << (width - 62), size=count, dtype=np.int64)
    vals = np.array([(int(h) << (width - 62)) | int(v) for h, v in zip(hi, lo, strict=True)], dtype=object)
    return to_signed(vals, width) if signed else vals


def pack(columns: Mapping[str, list[int]], widths: Mapping[str, int]) -> Inputs:
    """Columns of Python integers as arrays (int64 while every port fits, else objects)."""
    dtype: Any = np.int64 if max(widths.values()) <= 62 else object
    return {k: np.array(v, dtype=dtype) for k, v in columns.items()}


def below(rng: np.random.Generator, bound: int) -> int:
    """A uniform integer in [0, bound) for any bound (Python integers past int64)."""
    if bound <= 1:
        return 0
    if bound < 1 << 62:
        return int(rng.integers(0, bound))
    return int(rng.integers(0, 1 << 62)) * bound >> 62


def octave(rng: np.random.Generator, bits: int) -> int:
    """A random magnitude of exactly ``bits`` bits (1 has one bit)."""
    return (1 << (bits - 1)) + below(rng, 1 << (bits - 1))


def signed_octaves(rng: np.random.Generator, width: int, per: int) -> list[int]:
    """``per`` random values of each magnitude octave of a signed ``width``-bit port, both signs."""
    out: list[int] = []
    for bits in range(1, width):
        for _ in range(per):
            v = octave(rng, bits)
            out.append(-v if rng.integers(0, 2) else v)
    return out


class Function:
    """One function of the tool: subclass it in a module of its own and register it.

    Class attributes say what applies; methods take the function's own data path.

    Attributes:
        name: The config value of ``function``.
        coordinates: ``circular``, ``linear`` or ``hyperbolic`` (Walther 1971).
        mode: ``rotation`` or ``vectoring``.
        angle_ports: Whether ``angle_width`` and ``angle_unit`` apply (an angle port).
        gain_applies: Whether ``gain`` applies (the result carries the rotation's gain).
        options: Further config fields that apply to this function only.
        min_iterations: The fewest iterations a core needs.
        summary: One line for docs and READMEs.
        unscaled_outputs: Outputs a raw gain does not scale (an angle).
        spectral: Whether its outputs are a sinusoid of the input (spectrum plots apply).
        synonyms: Trade names an engineer may write for it (``atan`` for ``atan2``): the config's
            "did you mean" hint offers this function for them before any spelling match.
    """

    name: ClassVar[str]
    coordinates: ClassVar[str]
    mode: ClassVar[str]
    angle_ports: ClassVar[bool] = False
    gain_applies: ClassVar[bool] = False
    options: ClassVar[tuple[str, ...]] = ()
    min_iterations: ClassVar[int] = 1
    summary: ClassVar[str] = ""
    unscaled_outputs: ClassVar[frozenset[str]] = frozenset()
    spectral: ClassVar[bool] = False
    synonyms: ClassVar[tuple[str, ...]] = ()

    # ---------------------------------------------------------------- config and data path

    def validate(self, spec: CoreSpec) -> None:
        """Check the fields only this function reads (its ``options``).

        Raises:
            ConfigError: naming the field, for a value the function cannot build.
        """

    def resolve_spec(self, spec: CoreSpec, build: Callable[[CoreSpec], Datapath]) -> CoreSpec:
        """The spec with the sizes a target of the function's own picks filled in (the NCO's
        spectral target picks its widths); ``build`` sizes a candidate spec and returns its
        data path. Most functions have no such target: the spec as it is."""
        return spec

    def generate_note(self, spec: CoreSpec, dp: Datapath) -> str:
        """A line ``benchgen generate`` prints after its summary (empty: none)."""
        return ""

    def sizing_spec(self, spec: CoreSpec) -> CoreSpec:
        """The spec the sizer sizes: the core's own, unless the function is another one's
        iterations behind extra logic that adds no error (then that function's spec)."""
        return spec

    def no_angle_reason(self) -> str:
        """Why ``angle_width`` and ``angle_unit`` do not apply (when they do not)."""
        return "its ports carry no angle"

    def no_gain_reason(self) -> str:
        """Why ``gain`` does not apply (when it does not)."""
        return "its result is the angle z, which the gain does not scale"

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> Datapath:
        """The data path at a size.

        Raises:
            ConfigError: if the iterations do not fit the internal width.
        """
        raise NotImplementedError

    def widen_hint(self) -> str:
        """The width field to raise when no size meets the budget."""
        return "angle_width" if self.angle_ports else "data_width"

    # ---------------------------------------------------------------- ports and documents

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        """Data inputs, in port order."""
        raise NotImplementedError

    def output_ports(self, dp: Datapath) -> tuple[Port, ...]:
        """Data outputs, in port order."""
        raise NotImplementedError

    def describe(self, dp: Datapath) -> str:
        """What the core computes, in one sentence (the project README's first line)."""
        raise NotImplementedError

    def gain_label(self, dp: Datapath) -> str:
        """The README row that states the gain."""
        return f"gain K (iterations {dp.iterations}; raw outputs are 1/K times the exact)"

    def header_gain(self, dp: Datapath) -> str:
        """The RTL header's line about the gain (empty when there is none)."""
        return ""

    def header_notes(self, dp: Datapath) -> list[str]:
        """Lines of the RTL header after the port formats: the rounding, what is defined where."""
        return [f"rounding       {dp.rounding} where guard bits are dropped; data outputs saturate to +-{dp.out_max}"]

    def atan_comment(self, dp: Datapath, i: int) -> str:
        """The comment beside iteration i's z constant."""
        raise NotImplementedError

    def manifest_extras(self, dp: Datapath) -> dict[str, Any]:
        """Function-specific entries of the manifest's ``error_budget``."""
        return {}

    # ---------------------------------------------------------------- model

    def model_bits(self, dp: Datapath) -> int:
        """Bits of the widest intermediate of the model (int64 below INT64_MODEL_BITS)."""
        return max(dp.xy_width, dp.z_width, dp.angle_width) + 2

    def int64_model(self, dp: Datapath) -> bool:
        """Whether the model runs on int64 (else on Python integers, about 100x slower)."""
        if dp.data_width > WIDE_DATA_BITS or dp.angle_width > WIDE_ANGLE_BITS:
            return False
        return self.model_bits(dp) <= INT64_MODEL_BITS

    def model(self, dp: Datapath, inputs: Mapping[str, npt.ArrayLike]) -> Outputs:
        """The bit-true outputs for the inputs, by output port."""
        raise NotImplementedError

    def initial_state(self, dp: Datapath) -> Any:
        """The state a core holds from sample to sample, as after reset (None: it holds none,
        and :meth:`model` maps each sample alone)."""
        return None

    def model_run(self, dp: Datapath, inputs: Inputs, state: Any) -> tuple[Outputs, Outputs, Any]:
        """A stateful core's bit-true outputs, ideal and state after a run of samples that starts
        in ``state`` (a bench checks a long stream block by block with it)."""
        raise NotImplementedError(f"{self.name} holds no state")

    def tone(self, dp: Datapath, angles: npt.NDArray[Any]) -> npt.NDArray[Any]:
        """A spectral function's sinusoidal output for angle codes (see ``spectral``)."""
        raise NotImplementedError(f"{self.name} has no sinusoidal output")

    # ---------------------------------------------------------------- stimulus

    def corners(self, dp: Datapath) -> Inputs:
        """Boundary inputs."""
        raise NotImplementedError

    def directed(self, dp: Datapath, rng: np.random.Generator, per_octave: int) -> Inputs:
        """Inputs aimed at the function's worst regions (see functions.directed_inputs)."""
        raise NotImplementedError

    # ---------------------------------------------------------------- ideal and judging

    def ideal(self, dp: Datapath, inputs: Inputs) -> Outputs:
        """The exact answer for each judged output, gain-free, in output LSBs (float64 or mpmath)."""
        raise NotImplementedError

    def judge(self, dp: Datapath, inputs: Inputs, outputs: Outputs, ideal: Outputs) -> dict[str, npt.NDArray[np.float64]]:
        """Per judged output, its error in LSBs against the ideal; NaN where not judged."""
        return {name: errors_lsb(outputs[name], ideal[name]) for name in ideal}

    def apply_gain(self, dp: Datapath, ideal: Outputs) -> Outputs:
        """Scale a gain-free ideal by a raw core's growth (1/K_n circular, A_n hyperbolic)."""
        if dp.gain_mode == "compensated":
            return ideal
        keep = self.unscaled_outputs
        if any(np.asarray(v).dtype == object for v in ideal.values()):
            with mpmath.workdps(IDEAL_DPS):
                big = 1 / mpmath.mpf(dp.gain)
                return {k: (v if k in keep else np.array([e * big for e in v], dtype=object)) for k, v in ideal.items()}
        growth = 1.0 / float(dp.gain)
        return {k: (v if k in keep else v * growth) for k, v in ideal.items()}

    # ---------------------------------------------------------------- hardware

    def front_stages(self, dp: Datapath) -> int:
        """Register stages a pipeline gives this function's input logic (its hw_inputs then
        calls ``Builder.stage`` that many times); 0 for input logic short enough to share the
        first iteration's clock."""
        return 0

    def z_start_range(self, dp: Datapath) -> tuple[int, int] | None:
        """Bounds of z as the iterations start (z codes), over every input, where the function
        can state them for a rotation; None keeps z at its full width through the pipeline."""
        return None

    def carries(self, dp: Datapath) -> tuple[bool, bool]:
        """Whether the core carries y and z at all."""
        return True, True

    def final_values(self, dp: Datapath) -> tuple[bool, bool, bool]:
        """Which of x, y, z the last iteration must form."""
        return True, True, False

    def drops(self, dp: Datapath) -> dict[str, int]:
        """Bits each coordinate's final value loses to output rounding (truncation forms only
        the kept bits of the last iteration)."""
        if dp.mode == "vectoring":
            return {"x": dp.guard_bits, "y": 0, "z": dp.z_frac - dp.angle_frac}
        return {"x": dp.guard_bits, "y": dp.guard_bits, "z": 0}

    def side_signals(self, dp: Datapath) -> list[tuple[str, int]]:
        """Per-sample values that travel beside x, y, z: (name, width); the input logic forms
        ``in_<name>``."""
        return []

    def phase_front(self, dp: Datapath) -> PhaseFront | None:
        """The phase accumulator in front of the iterations, for a function that has one."""
        return None

    #: Whether the start vector is one of a few constants that the input logic can hand back
    #: as a select and its vectors (:class:`benchgen.hwlib.Start`), so that a pipeline reads
    #: the first iterations' x and y from a table (sine/cosine).
    start_table: ClassVar[bool] = False

    def proved_range(self, dp: Datapath) -> Datapath:
        """``dp`` without logic that no input can reach, where every input proves it so.

        A function whose input space can be enumerated may return the data path without its
        output saturation and x/y headroom bit (``saturates = False``), after evaluating every
        input (:func:`benchgen.functions.final_datapath`). The default keeps both.
        """
        return dp

    def free_running(self, dp: Datapath) -> bool:
        """Whether the core has no input stream: it makes one sample per (enabled) clock from
        reset and its data inputs are loaded through a ``load`` port (a free-running NCO)."""
        return False

    def hw_constants(self, b: Builder, dp: Datapath) -> None:
        """Named constants declared before the iterations (beyond the atan table)."""

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        """Describe the input logic; return the start values."""
        raise NotImplementedError

    def hw_outputs(self, b: Builder, dp: Datapath, final: Final, side: Mapping[str, Any]) -> None:
        """Describe the output logic: a ``fin_<port>`` wire per output port."""
        raise NotImplementedError
