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

With ``nco_mode = "free_running"`` the core has no input stream: it takes a sample at every
(enabled) clock from reset, its words held in registers loaded through a ``load`` port, and a
load acts through a select in its own clock (``benchgen.nco.run``'s changes; docs/nco.md).
The per-sample model below still reads one token per sample: the words in force at each
sample, which is what a free-running record amounts to.

The iterations are the sincos core's, sized as sincos (the phase path adds no error to the
core's own: the truncated code is exact), so a sized NCO has the iterations and guard bits of
the sincos core of the same angle and data widths. Outputs are judged against the exact sine
and cosine of the code the core was given.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import asdict, dataclass, fields, replace
from typing import Any, ClassVar

import math
from collections.abc import Callable

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath
from benchgen.errors import ConfigError
from benchgen.functions.base import LOAD_PORT, Inputs, Outputs, PhaseFront, Port
from benchgen.functions.circular import CircularDatapath
from benchgen.functions.sincos import FUNCTION as SINCOS
from benchgen.functions.sincos import SinCos, ideal_sincos
from benchgen.hwlib import Builder, Start
from benchgen.lfsr import leap_map, lfsr_states
from benchgen.nco import Change, Nco, phase_path
from benchgen.netlist import Const, Mux
from benchgen.spec import NCO_MODES, CoreSpec

__all__ = [
    "MAX_SIZED_PHASE_BITS",
    "NcoCore",
    "NcoDatapath",
    "TARGET_FIELDS",
    "core_error_max_lsb",
    "phase_bits_for",
    "phase_of",
    "pick_sizes",
    "sfdr_bound_db",
    "snr_bound_db",
]

FREQ_PORT = "in_freq_word"
PHASE_PORT = "in_phase_offset"
CODE_WIRE = "phase_code"
TARGET_FIELDS = ("sfdr_dbc", "snr_db")
"""The spectral target's config fields (docs/nco.md, "Sizing for a spectral target")."""
PICKED_FIELDS = ("angle_width", "data_width")
"""The widths a spectral target picks when the config leaves them out."""
_DATA_WIDTHS = (3, 64)
"""data_width's range (benchgen.config.MIN_DATA_WIDTH, MAX_WIDTH; config sits a layer above)."""


# ---------------------------------------------------------------- sizing for a spectral target
# The bound and the picking rule; benchgen.nco_sizing derives the bound, adds the spectral
# measurement of the result and re-exports these (it sits above the sizer, this module below it).

MAX_SIZED_PHASE_BITS = 19
"""Largest P the sizer picks: its worst word repeats every 2**(P+1) samples, and the proof
measures a coherent record of that length (2**20 samples at most, about a second)."""


def _limits(phase_bits: int) -> tuple[float, float, float]:
    """(c_min, s_max, r_max) of the truncated unit phasor over all truncation periods."""
    delta = 2 * math.pi / 2**phase_bits
    c_min = math.sin(delta / 2) / (delta / 2)
    return c_min, math.sin(delta / 4), math.sqrt(1 - c_min**2)


def sfdr_bound_db(phase_bits: int, amplitude: float, error_max: float) -> float:
    """Guaranteed SFDR for every word (benchgen.nco_sizing derives it); amplitude and error in output LSBs."""
    c_min, s_max, _ = _limits(phase_bits)
    carrier = amplitude * c_min - error_max
    return -math.inf if carrier <= 0 else 20 * math.log10(carrier / (amplitude * s_max + error_max))


def snr_bound_db(phase_bits: int, amplitude: float, error_max: float) -> float:
    """Guaranteed SNR for every word (benchgen.nco_sizing derives it)."""
    c_min, _, r_max = _limits(phase_bits)
    carrier = amplitude * c_min - error_max
    return -math.inf if carrier <= 0 else 20 * math.log10(carrier / (amplitude * r_max + error_max))


def _target(name: str, value: float | None) -> float | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) or value <= 0:
        raise ConfigError(name, value, "a positive number of dB", f"set {name} = 80.0", suggestion={name: 80.0})
    return float(value)


def phase_bits_for(sfdr_dbc: float | None = None, snr_db: float | None = None) -> int:
    """The fewest phase bits whose truncation alone can meet the targets (an ideal amplitude).

    Raises:
        ConfigError: for a target beyond :data:`MAX_SIZED_PHASE_BITS`, or no target at all.
    """
    sfdr = _target("sfdr_dbc", sfdr_dbc)
    snr = _target("snr_db", snr_db)
    if sfdr is None and snr is None:
        raise ConfigError(
            "sfdr_dbc", None, "a required SFDR and/or SNR", "set sfdr_dbc = 80.0", suggestion={"sfdr_dbc": 80.0}
        )
    big = float(1 << 40)  # an amplitude so large the core's error does not count

    def meets(p: int) -> bool:
        return (sfdr is None or sfdr_bound_db(p, big, 0.0) > sfdr) and (snr is None or snr_bound_db(p, big, 0.0) > snr)

    for p in range(3, MAX_SIZED_PHASE_BITS + 1):
        if meets(p):
            return p
    top = MAX_SIZED_PHASE_BITS
    if sfdr is not None and sfdr_bound_db(top, big, 0.0) <= sfdr:
        field, value, limit = "sfdr_dbc", sfdr, sfdr_bound_db(top, big, 0.0)
    else:
        field, value, limit = "snr_db", snr, snr_bound_db(top, big, 0.0)
    best = math.floor(limit * 10) / 10  # rounded down, so the suggestion is reachable
    raise ConfigError(
        field, value,
        f"at most {best} dB: the sizer proves its result on a coherent record of 2**(P+1) samples, P <= {top}",
        f"set {field} = {best}", suggestion={field: best},
    )  # fmt: skip


def core_error_max_lsb(dp: Datapath) -> float:
    """Largest ``|e|`` of the quadrature output over every angle code, in output LSBs.

    ``e = (cos - a cos t) + j (sin - a sin t)`` against the exact values (float64 ideal,
    benchgen.reference); every one of the 2**P codes is evaluated.
    """
    if isinstance(dp, NcoDatapath):
        dp = dp.core()
    worst = 0.0
    step = 1 << 16
    for lo in range(0, 1 << dp.angle_width, step):
        codes = np.arange(lo, min(lo + step, 1 << dp.angle_width), dtype=np.int64)
        out = SINCOS.model(dp, {"in_angle": codes})
        ic, is_ = ideal_sincos(dp, codes)
        e = np.hypot(out["out_cos"].astype(np.float64) - ic, out["out_sin"].astype(np.float64) - is_)
        worst = max(worst, float(np.max(e)))
    return worst


def _target_text(sfdr_dbc: float | None, snr_db: float | None) -> str:
    parts = ([f"sfdr_dbc = {sfdr_dbc:g}"] if sfdr_dbc is not None else []) + (
        [f"snr_db = {snr_db:g}"] if snr_db is not None else []
    )
    return " and ".join(parts)


def _meets(p: int, amplitude: float, err: float, sfdr_dbc: float | None, snr_db: float | None) -> bool:
    return (sfdr_dbc is None or sfdr_bound_db(p, amplitude, err) >= sfdr_dbc) and (
        snr_db is None or snr_bound_db(p, amplitude, err) >= snr_db
    )


def pick_sizes(
    sfdr_dbc: float | None,
    snr_db: float | None,
    build: Callable[[int, int], Datapath],
    *,
    angle_width: int | None = None,
    data_width: int | None = None,
) -> tuple[int, int, Datapath, float]:
    """The phase bits ``P`` and output width ``N`` for a spectral target (benchgen.nco_sizing).

    ``P`` is the fewest phase bits whose truncation alone can meet the target
    (:func:`phase_bits_for`); ``N`` the fewest output bits for which the guaranteed bound meets
    it, each candidate built (and its iterations and guard bits sized) by ``build``. A width
    given (not ``None``) is kept, and refused if the target cannot be met with it.

    Args:
        sfdr_dbc: Required SFDR of the quadrature output, dBc (None: none).
        snr_db: Required SNR, dB (None: none).
        build: ``build(P, N)``: the sized core's data path at those widths.
        angle_width: ``P`` fixed by the user (None: pick it).
        data_width: ``N`` fixed by the user (None: pick it).

    Returns:
        ``(P, N, data path, E)``, ``E`` the core's largest complex error in output LSBs.

    Raises:
        ConfigError: naming the target or the fixed width, with a fix the tool accepts.
    """
    needed = phase_bits_for(sfdr_dbc, snr_db)
    p = needed if angle_width is None else angle_width
    if not needed <= p <= MAX_SIZED_PHASE_BITS:
        raise ConfigError(
            "angle_width", p,
            f"{needed} to {MAX_SIZED_PHASE_BITS} with {_target_text(sfdr_dbc, snr_db)} (fewer phase bits miss "
            "the target; the bound is proven over every one of the 2**angle_width codes)",
            f"remove angle_width (the target then picks {needed})", suggestion={"angle_width": None},
        )  # fmt: skip
    lo, hi = _DATA_WIDTHS
    for n in [data_width] if data_width is not None else range(lo, hi + 1):
        amp = float((1 << (n - 1)) - 1)
        # No core errs by less than half an LSB per output, so skip widths even that cannot meet.
        if not _meets(p, amp, 0.5, sfdr_dbc, snr_db):
            continue
        dp = build(p, n)
        err = core_error_max_lsb(dp)
        if _meets(p, dp.amplitude, err, sfdr_dbc, snr_db):
            return p, n, dp, err
    if data_width is not None:
        _, n_needed, _, _ = pick_sizes(sfdr_dbc, snr_db, build, angle_width=p)
        raise ConfigError(
            "data_width", data_width,
            f"at least {n_needed} with angle_width = {p} for {_target_text(sfdr_dbc, snr_db)} (the guaranteed "
            "bound, docs/nco.md)",
            f"set data_width = {n_needed}", suggestion={"data_width": n_needed},
        )  # fmt: skip
    raise ConfigError(  # pragma: no cover - a 64-bit output meets any target P <= 19 can
        TARGET_FIELDS[0], sfdr_dbc, "a target some output width up to 64 bits meets", "lower the target"
    )



@dataclass(frozen=True, kw_only=True)
class NcoDatapath(CircularDatapath):
    """The sincos core's data path with the phase path's parameters.

    Attributes:
        acc_width: ``A``, bits of the accumulator and both words.
        dither_width: ``D``, phase dither bits (0: none).
        lfsr_width: ``L``, the dither LFSR's length.
        lfsr_seed: The LFSR's state after reset.
        sfdr_dbc: The spectral target's SFDR, dBc (None: none).
        snr_db: The spectral target's SNR, dB (None: none).
        nco_mode: ``streamed`` or ``free_running`` (benchgen.spec.NCO_MODES).
    """

    acc_width: int = 32
    dither_width: int = 0
    lfsr_width: int = 32
    lfsr_seed: int = (1 << 32) - 1
    sfdr_dbc: float | None = None
    snr_db: float | None = None
    nco_mode: str = NCO_MODES[0]

    def constants(self) -> dict[str, object]:
        # The target is no constant of the core: the manifest states it with its bound
        # (manifest_extras), and a core without one keeps the manifest it had; likewise the
        # mode, stated only where it is not the default.
        out = {k: v for k, v in super().constants().items() if k not in TARGET_FIELDS}
        if self.nco_mode == NCO_MODES[0]:
            del out["nco_mode"]
        return out

    @property
    def free_running(self) -> bool:
        """Whether the NCO runs free: one sample per clock, the words loaded through a port."""
        return self.nco_mode == "free_running"

    def target_bounds(self) -> tuple[float, float, float] | None:
        """``(E, SFDR bound, SNR bound)`` of this core when it has a spectral target (else None):
        the core's largest complex error over every code and what it guarantees for every word."""
        if self.sfdr_dbc is None and self.snr_db is None:
            return None
        err = core_error_max_lsb(self.core())
        return (
            err,
            sfdr_bound_db(self.angle_width, self.amplitude, err),
            snr_bound_db(self.angle_width, self.amplitude, err),
        )

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


def _no_build(p: int, n: int) -> Datapath:  # pragma: no cover - pick_sizes refuses before it builds
    raise AssertionError("validate only checks the phase bits")


def _nco_of(spec: CoreSpec) -> Nco:
    """The phase path a spec asks for (raises ConfigError naming the field)."""
    return Nco(
        acc_width=spec.acc_width, angle_width=spec.angle_width, dither_width=spec.dither_width,
        lfsr_width=spec.lfsr_width, lfsr_seed=spec.lfsr_seed,
    )  # fmt: skip


def _check_free_running(spec: CoreSpec) -> None:
    """Refuse what a free-running NCO cannot be (raises ConfigError naming the field)."""
    mode = 'with nco_mode = "free_running"'
    if spec.architecture != "pipelined":
        raise ConfigError(
            "architecture", spec.architecture,
            f'"pipelined" {mode} (one sample every clock; an iterative core takes one every few clocks)',
            'set architecture = "pipelined" and remove iterations_per_cycle (or set nco_mode = "streamed")',
            suggestion={"architecture": "pipelined", "iterations_per_cycle": None},
        )  # fmt: skip
    if spec.handshake != "valid_only":
        raise ConfigError(
            "handshake", spec.handshake,
            f'"valid_only" {mode} (no out_ready: the sink takes the sample of every clock)',
            'set handshake = "valid_only" (or remove it: the free-running default)',
            suggestion={"handshake": "valid_only"},
        )  # fmt: skip
    if spec.tag_width:
        raise ConfigError(
            "tag_width", spec.tag_width, f"0 {mode} (there is no input stream to carry a tag)",
            "remove tag_width", suggestion={"tag_width": None},
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
    options: ClassVar[tuple[str, ...]] = (
        "acc_width", "dither_width", "lfsr_width", "lfsr_seed", *TARGET_FIELDS, "nco_mode", "angle_guard_bits",
        "shifted_terms", "table_head",
    )  # fmt: skip
    angle_signal: ClassVar[str] = CODE_WIRE

    # ---------------------------------------------------------------- config and data path

    def validate(self, spec: CoreSpec) -> None:
        super().validate(spec)
        if spec.angle_unit != "turns":
            raise ConfigError(
                "angle_unit", spec.angle_unit, 'turns (the accumulator is a binary angle)', 'set angle_unit = "turns"',
                suggestion={"angle_unit": "turns"},
            )  # fmt: skip
        if spec.sfdr_dbc is not None or spec.snr_db is not None:
            if spec.dither_width:
                raise ConfigError(
                    "dither_width", spec.dither_width,
                    "0 with a spectral target (sfdr_dbc, snr_db): the sizing bound is the undithered NCO's",
                    "remove dither_width (or remove the target and give angle_width and data_width)",
                    suggestion={"dither_width": None},
                )  # fmt: skip
            needed = phase_bits_for(spec.sfdr_dbc, spec.snr_db)  # refuses a target out of reach
            if "angle_width" in spec.target_picks:
                spec = replace(spec, angle_width=needed)
            elif not needed <= spec.angle_width <= MAX_SIZED_PHASE_BITS:
                pick_sizes(spec.sfdr_dbc, spec.snr_db, _no_build, angle_width=spec.angle_width)  # raises
        _nco_of(spec)
        if spec.nco_mode == "free_running":
            _check_free_running(spec)

    def sizing_spec(self, spec: CoreSpec) -> CoreSpec:
        # The truncated code is exact: the core's error is the sincos core's at that code.
        return replace(
            spec, function=SINCOS.name, acc_width=32, dither_width=0, lfsr_width=None, lfsr_seed=None,
            sfdr_dbc=None, snr_db=None, target_picks=(), nco_mode=NCO_MODES[0],
        )  # fmt: skip

    def resolve_spec(self, spec: CoreSpec, build: Callable[[CoreSpec], Datapath]) -> CoreSpec:
        """The widths for the spectral target (:func:`pick_sizes`): those the config left out are
        picked, those it gave are kept and refused if they miss it. ``target_picks`` stays, to
        say which were picked; the config of the manifest holds the widths themselves."""
        if spec.sfdr_dbc is None and spec.snr_db is None:
            return spec

        def candidate(p: int, n: int) -> Datapath:
            return build(replace(spec, angle_width=p, data_width=n, sfdr_dbc=None, snr_db=None, target_picks=()))

        p, n, _, _ = pick_sizes(
            spec.sfdr_dbc, spec.snr_db, candidate,
            angle_width=None if "angle_width" in spec.target_picks else spec.angle_width,
            data_width=None if "data_width" in spec.target_picks else spec.data_width,
        )  # fmt: skip
        return replace(spec, angle_width=p, data_width=n)

    def datapath(self, spec: CoreSpec, iterations: int, guard_bits: int) -> NcoDatapath:
        base = SinCos.datapath(self, spec, iterations, guard_bits)
        nco = _nco_of(spec)
        assert nco.lfsr_width is not None and nco.lfsr_seed is not None  # set by Nco
        values = asdict(base)
        values["atan_table"] = tuple(values["atan_table"])
        values["shifts"] = tuple(values["shifts"])
        return NcoDatapath(
            **values, acc_width=nco.acc_width, dither_width=nco.dither_width,
            lfsr_width=nco.lfsr_width, lfsr_seed=nco.lfsr_seed, sfdr_dbc=spec.sfdr_dbc, snr_db=spec.snr_db,
            nco_mode=spec.nco_mode,
        )  # fmt: skip

    # ---------------------------------------------------------------- ports and documents

    def input_ports(self, dp: Datapath) -> tuple[Port, ...]:
        assert isinstance(dp, NcoDatapath)
        a = dp.acc_width
        if dp.free_running:
            return (
                Port(FREQ_PORT, a, False, f"unsigned, {a} bits: phase step per clock, f = word f_clk / 2^{a}; loaded on load"),
                Port(PHASE_PORT, a, False, f"unsigned, {a} bits: phase offset, in 2^-{a} turn; loaded on load"),
            )
        return (
            Port(FREQ_PORT, a, False, f"unsigned, {a} bits: phase step per sample, f = word f_clk / 2^{a}"),
            Port(PHASE_PORT, a, False, f"unsigned, {a} bits: phase offset of this sample, in 2^-{a} turn"),
        )

    def free_running(self, dp: Datapath) -> bool:
        assert isinstance(dp, NcoDatapath)
        return dp.free_running

    def describe(self, dp: Datapath) -> str:
        assert isinstance(dp, NcoDatapath)
        dither = f", {dp.dither_width} dither bits" if dp.dither_width else ", no dither"
        free = "free-running " if dp.free_running else ""
        return (
            f"{free}NCO: {dp.acc_width}-bit phase accumulator{dither}, phase truncated to {dp.angle_width} bits, "
            f"{dp.data_width}-bit cosine and sine"
        )

    def header_notes(self, dp: Datapath) -> list[str]:
        assert isinstance(dp, NcoDatapath)
        b = dp.acc_width - dp.angle_width
        if dp.free_running:
            notes = [
                "load           high at a clock edge: in_freq_word and in_phase_offset are loaded (and act",
                "               at that edge's sample already); no input stream, one sample per clock",
                f"phase          acc + po + dither * 2^{b - dp.dither_width}, top {dp.angle_width} of {dp.acc_width} bits kept (floor);",
                "               acc <= acc + fw at every clock; fw, po the loaded words or, in the clock",
                "               of a load, the ports' (docs/nco.md)",
            ]
        else:
            notes = [
                f"phase          acc + in_phase_offset + dither * 2^{b - dp.dither_width}, top {dp.angle_width} of {dp.acc_width} bits kept",
                "               (floor); acc <= acc + in_freq_word at each taken sample (docs/nco.md)",
            ]
        if dp.dither_width:
            notes.append(
                f"dither         low {dp.dither_width} bits of a {dp.lfsr_width}-bit XOR LFSR (seed {dp.lfsr_seed:#x}), "
                f"{dp.dither_width} steps per sample"
            )
        bounds = dp.target_bounds()
        if bounds is not None:
            err, sfdr, snr = bounds
            target = _target_text(dp.sfdr_dbc, dp.snr_db)
            notes += [
                f"target         {target}: {dp.angle_width} phase bits and {dp.data_width} output bits",
                f"               guarantee SFDR >= {sfdr:.2f} dBc, SNR >= {snr:.2f} dB for every word and offset",
                f"               (core error <= {err:.4f} LSB over every code; bound in docs/nco.md, no dither)",
            ]
        return notes + super().header_notes(dp)

    def generate_note(self, spec: CoreSpec, dp: Datapath) -> str:
        assert isinstance(dp, NcoDatapath)
        bounds = dp.target_bounds()
        if bounds is None:
            return ""
        _, sfdr, snr = bounds
        sizes = ", ".join(
            f"{k} = {getattr(dp, k)}" + (" (picked)" if k in spec.target_picks else " (given)") for k in PICKED_FIELDS
        )
        return (
            f"spectral target {_target_text(dp.sfdr_dbc, dp.snr_db)}: {sizes}, {dp.iterations} iterations, "
            f"{dp.guard_text()}; guaranteed SFDR >= {sfdr:.2f} dBc, SNR >= {snr:.2f} dB for every word"
        )

    def manifest_extras(self, dp: Datapath) -> dict[str, Any]:
        assert isinstance(dp, NcoDatapath)
        return {
            "nco": {
                "acc_width": dp.acc_width,
                "dither_width": dp.dither_width,
                "lfsr_width": dp.lfsr_width,
                "lfsr_seed": dp.lfsr_seed,
                "judged": "each output against the exact cosine and sine of the phase code the core was given",
                **self._target_extras(dp),
            }
        }

    def _target_extras(self, dp: NcoDatapath) -> dict[str, Any]:
        """The spectral target and what the core guarantees for it (only when there is one, so a
        project without a target keeps its manifest)."""
        bounds = dp.target_bounds()
        if bounds is None:
            return {}
        err, sfdr, snr = bounds
        return {
            "target": {
                "sfdr_dbc": dp.sfdr_dbc,
                "snr_db": dp.snr_db,
                "angle_width": dp.angle_width,
                "data_width": dp.data_width,
                "core_error_max_lsb": round(err, 6),
                "sfdr_bound_dbc": round(sfdr, 4),
                "snr_bound_db": round(snr, 4),
                "bound": "for every frequency word and phase offset, no dither (docs/nco.md)",
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
            load_port=LOAD_PORT if dp.free_running else "",
        )  # fmt: skip

    def front_stages(self, dp: Datapath) -> int:
        # The A-bit sum acc + offset + dither is a long carry chain: in a pipeline the phase
        # code gets a register of its own instead of sharing the first iteration's clock.
        return 1

    def hw_inputs(self, b: Builder, dp: Datapath) -> Start:
        # The front stage (benchgen.hardware) has formed the phase code; it is registered here
        # in a pipeline (a wire elsewhere), and the fold reads the register.
        assert isinstance(dp, CircularDatapath)
        code = b.stage({CODE_WIRE: b.sig(CODE_WIRE)})[CODE_WIRE]
        return self.hw_start(b, dp, code)


FUNCTION = NcoCore()
