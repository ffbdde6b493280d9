"""The Python API: configs, cores, projects and the bit-true model, for scripts and notebooks.

Everything here is re-exported from the top-level :mod:`benchgen` package (lazily, so that
``import benchgen`` stays cheap). The command line does the same work through the same
functions; docs/api.md shows each one at work, and tests/test_api.py runs that page.

A bad config raises :class:`~benchgen.errors.ConfigError`, a project folder that cannot be
written or read raises :class:`~benchgen.project.ProjectError`, and inputs the model cannot take
raise :class:`ModelInputError`: each with one line naming what is wrong, the value and the fix.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from os import PathLike
from pathlib import Path
from typing import Any, TypeAlias

import numpy as np
import numpy.typing as npt

from benchgen.config import CoreSpec, load_config as _load_config_file, parse_config, spec_to_dict
from benchgen.design import Design, build_design
from benchgen.errors import BenchgenError, ConfigError, one_line, show_value
from benchgen.functions import input_ports, output_ports
from benchgen.fusesoc import core_file_name, vlnv
from benchgen.functions import evaluate as evaluate_function
from benchgen.project import (
    MANIFEST_NAME,
    ProjectError,
    design_from_manifest,
    load_manifest,
    manifest_for,
    write_project,
)
from benchgen.rtl import check_module_name

__all__ = [
    "Config",
    "Core",
    "ModelInputError",
    "Port",
    "Project",
    "design_core",
    "generate",
    "load_config",
    "open_project",
]

Config: TypeAlias = "str | PathLike[str] | Mapping[str, Any] | CoreSpec"
"""What names a core: a TOML file's path, a mapping of config fields, or a validated spec."""

# Ports up to this width travel as int64 arrays; wider ones (an unsigned 64-bit code does not
# fit int64) as arrays of Python integers, which the model then computes on exactly.
_INT64_PORT_BITS = 62


class ModelInputError(BenchgenError, ValueError):
    """Inputs the bit-true model cannot take: a missing or unknown port, a length that differs
    from the others, values that are not integer codes or lie outside the port's range."""

    exit_status = 2


@dataclass(frozen=True)
class Port:
    """A data port of a core (the clock, reset, handshake and tag ports are implied).

    Attributes:
        name: Port name, as in the RTL and the manifest.
        width: Bits.
        signed: Whether the port holds two's complement codes.
        format: What the codes mean (fixed-point format, range), as the manifest says.
    """

    name: str
    width: int
    signed: bool
    format: str

    @property
    def low(self) -> int:
        """Smallest code the port holds."""
        return -(1 << (self.width - 1)) if self.signed else 0

    @property
    def high(self) -> int:
        """Largest code the port holds."""
        return (1 << (self.width - 1)) - 1 if self.signed else (1 << self.width) - 1


class Core:
    """A sized and proven core: its numbers, its ports and its bit-true model.

    Make one with :func:`design_core` (or read one from a project with :func:`open_project`);
    the constructor is not part of the API.

    Attributes:
        design: Everything derived (spec, data path, timing, accuracy, proof), for the layers
            below this API.
        config_text: The config as TOML text (what :func:`generate` writes to ``config.toml``).
    """

    def __init__(self, design: Design, config_text: str) -> None:
        self.design = design
        self.config_text = config_text

    def __repr__(self) -> str:
        return (
            f"<Core {self.name}: {self.function}, {self.architecture}, {self.iterations} iterations, "
            f"latency {self.latency_cycles}, worst error {self.max_error_lsb:.4f} LSB>"
        )

    @property
    def spec(self) -> CoreSpec:
        """The validated configuration."""
        return self.design.spec

    @property
    def name(self) -> str:
        """Module name of the core."""
        return self.spec.name

    @property
    def function(self) -> str:
        """What the core computes (``sincos``, ``atan2``, ...)."""
        return self.spec.function

    @property
    def architecture(self) -> str:
        """``pipelined`` or ``iterative``."""
        return self.design.timing.architecture

    @property
    def iterations(self) -> int:
        """Rotation iterations (sized when the config says ``auto``)."""
        return self.design.datapath.iterations

    @property
    def guard_bits(self) -> int:
        """Fraction bits kept inside the data path below the output LSB."""
        return self.design.datapath.guard_bits

    @property
    def angle_guard_bits(self) -> int | None:
        """z's guard bits where the function sizes them apart from x and y's (an angle input:
        sincos, rotate, nco); ``None`` where z's fraction bits follow :attr:`guard_bits`."""
        return self.design.datapath.angle_guard_bits

    @property
    def latency_cycles(self) -> int:
        """Clocks from an input handshake to its output handshake."""
        return self.design.timing.latency_cycles

    @property
    def cycles_per_sample(self) -> int:
        """Clocks between samples at full rate."""
        return self.design.timing.cycles_per_sample

    @property
    def error_budget_lsb(self) -> float:
        """The budget: every judged output stays strictly below this error, in output LSBs."""
        return self.spec.max_error_lsb

    @property
    def max_error_lsb(self) -> float:
        """Worst error of the bit-true model against the ideal, in output LSBs, over the proof."""
        return self.design.accuracy.max_error_lsb

    @property
    def rms_error_lsb(self) -> float:
        """RMS error of the bit-true model against the ideal over the proof, in output LSBs."""
        return self.design.accuracy.rms_error_lsb

    @property
    def proof(self) -> str:
        """Over what the worst error was measured, in one phrase."""
        return self.design.proof.describe()

    @property
    def exhaustive(self) -> bool:
        """Whether the worst error was measured over every input code."""
        return self.design.proof.exhaustive

    @property
    def inputs(self) -> tuple[Port, ...]:
        """Data inputs, in port order."""
        return tuple(Port(p.name, p.width, p.signed, p.doc) for p in input_ports(self.design.datapath))

    @property
    def outputs(self) -> tuple[Port, ...]:
        """Data outputs, in port order."""
        return tuple(Port(p.name, p.width, p.signed, p.doc) for p in output_ports(self.design.datapath))

    @property
    def vlnv(self) -> str:
        """The core's FuseSoC name, ``vendor:library:name:version``."""
        return vlnv(self.spec)

    def manifest(self) -> dict[str, Any]:
        """Every derived number, as the project's ``manifest.json`` holds it (without the list
        of generated files, which only a written project has)."""
        return manifest_for(self.design)

    def model(
        self, inputs: Mapping[str, npt.ArrayLike] | None = None, /, **ports: npt.ArrayLike
    ) -> dict[str, npt.NDArray[Any]]:
        """Evaluate the bit-true model: the exact output codes the RTL gives for these inputs.

        Give the input codes by port name, as keywords or as one mapping: integers or integer
        arrays (all of one shape), each code inside its port's range (:attr:`Port.low` to
        :attr:`Port.high`). Flags such as ``out_domain_error`` come out as 0/1 codes.

        Args:
            inputs: Input codes by port name (or give them as keywords).
            **ports: Input codes by port name.

        Returns:
            Output codes by port name, arrays of the inputs' shape (int64, or Python integers for
            ports wider than 62 bits).

        Raises:
            ModelInputError: for a missing or unknown port, shapes that differ, values that are
                not integers, or a code outside its port's range.
        """
        given: dict[str, Any] = dict(inputs or {})
        twice = sorted(set(given) & set(ports))
        if twice:
            raise ModelInputError(f"{self.name}.model: '{twice[0]}' is given twice; give each input once")
        given.update(ports)
        names = [p.name for p in self.inputs]
        listed = ", ".join(names)
        unknown = sorted(set(given) - set(names), key=str)
        if unknown:
            raise ModelInputError(
                f"{self.name}.model: {show_value(unknown[0])} is not an input of this {self.function} core; "
                f"its inputs are {listed}"
            )
        missing = [n for n in names if n not in given]
        if missing:
            raise ModelInputError(f"{self.name}.model: input '{missing[0]}' is missing; give {listed}")
        arrays = {port.name: _codes(self.name, port, given[port.name]) for port in self.inputs}
        shape = arrays[names[0]].shape
        for name in names[1:]:
            if arrays[name].shape != shape:
                raise ModelInputError(
                    f"{self.name}.model: {names[0]} has shape {shape} but {name} has shape "
                    f"{arrays[name].shape}; give every input the same number of values"
                )
        count = math.prod(shape)
        if count == 0:
            return {p.name: np.zeros(shape, dtype=np.int64) for p in self.outputs}
        flat = {name: arr.reshape(-1) for name, arr in arrays.items()}
        out = evaluate_function(self.design.datapath, flat)
        return {p.name: _as_codes(out[p.name]).reshape(shape) for p in self.outputs}


def _as_codes(values: npt.ArrayLike) -> npt.NDArray[Any]:
    """Model outputs as integer codes: int64, or Python integers where the model computed on
    them (a wide core's flags come out of it as Python booleans)."""
    arr = np.asarray(values)
    if arr.dtype == object:
        return np.array([int(v) for v in arr.reshape(-1)], dtype=object).reshape(arr.shape)
    return arr.astype(np.int64)


def _is_int(value: object) -> bool:
    """Whether a Python or numpy value is an integer (booleans are not codes)."""
    return isinstance(value, int | np.integer) and not isinstance(value, bool | np.bool_)


def _give(port: Port) -> str:
    """The fix for inputs that are not integer codes."""
    return (
        f"give integers from {port.low} to {port.high}, e.g. np.rint(scaled).astype(np.int64) for "
        "real values scaled to codes (docs/number_formats.md gives each port's scale)"
    )


def _codes(core: str, port: Port, value: Any) -> npt.NDArray[Any]:
    """``value`` as an array of the port's codes, or a :class:`ModelInputError` saying why not."""
    where = f"{core}.model: {port.name}"
    # Python integers (a list, a scalar) are read as they are: numpy would turn a list holding
    # 2**64 - 1 and 1 into floats, and so round the code.
    as_python = not isinstance(value, np.ndarray | np.generic)
    try:
        arr = np.asarray(value, dtype=object) if as_python else np.asarray(value)
    except (ValueError, TypeError) as exc:  # ragged nested lists
        raise ModelInputError(f"{where} is not an array of codes ({one_line(str(exc), 120)})") from None
    if arr.dtype == object:
        flat = arr.reshape(-1)
        bad = next((v for v in flat if not _is_int(v)), None)
        if bad is not None:
            raise ModelInputError(f"{where} holds {show_value(bad)}, not an integer code; {_give(port)}")
        ints = [int(v) for v in flat]
    elif arr.dtype.kind in "iu":
        ints = None
    else:
        raise ModelInputError(f"{where} holds {arr.dtype} values, not integer codes; {_give(port)}")
    if arr.size:
        if ints is not None:
            lo, hi = min(ints), max(ints)
        else:
            lo, hi = int(arr.min()), int(arr.max())
        if lo < port.low or hi > port.high:
            bad_value = lo if lo < port.low else hi
            if ints is not None:
                index = ints.index(bad_value)
            else:
                index = int(np.flatnonzero(arr.reshape(-1) == bad_value)[0])
            kind = "signed" if port.signed else "unsigned"
            raise ModelInputError(
                f"{where} holds {bad_value} at index {index}, outside the port's range {port.low} .. "
                f"{port.high} ({port.width}-bit {kind}); give codes in that range"
                + (", e.g. a negative code as itself, not as its unsigned bit pattern" if port.signed else "")
            )
    if port.width > _INT64_PORT_BITS:
        wide = ints if ints is not None else [int(v) for v in arr.reshape(-1)]
        return np.array(wide, dtype=object).reshape(arr.shape)
    return arr.astype(np.int64) if ints is None else np.array(ints, dtype=np.int64).reshape(arr.shape)


class Project:
    """A generated project folder, read back: its manifest, its core and its files.

    Open one with :func:`open_project`, or get one from :func:`generate`; the constructor is
    not part of the API.

    Attributes:
        path: The project folder.
        manifest: ``manifest.json``, as read.
        core: The core the project was generated from (rebuilt from the manifest, not sized
            again).
    """

    def __init__(self, path: Path, manifest: dict[str, Any], core: Core) -> None:
        self.path = path
        self.manifest = manifest
        self.core = core

    def __repr__(self) -> str:
        return f"<Project {self.core.name} at {str(self.path)!r}>"

    @property
    def rtl_files(self) -> list[Path]:
        """The core's Verilog files."""
        return [self.path / rel for rel in self.manifest["files"]["rtl"]]

    @property
    def manifest_path(self) -> Path:
        """``manifest.json``: what a bench (``benchgen.bench.CoreChecker``) is bound to."""
        return self.path / MANIFEST_NAME

    @property
    def config_path(self) -> Path:
        """The project's ``config.toml``."""
        return self.path / "config.toml"

    @property
    def core_file(self) -> Path:
        """The FuseSoC core description (CAPI2) of the core."""
        return self.path / core_file_name(self.core.spec)

    @property
    def files(self) -> list[Path]:
        """Every file benchgen wrote into the folder (and will replace on a regenerate)."""
        return [self.path / rel for rel in self.manifest["files"].get("generated", [])]


def load_config(source: str | PathLike[str] | Mapping[str, Any]) -> CoreSpec:
    """Read and validate a config, from a TOML file or from a mapping of its fields.

    The fields and their ranges are those of a config file (docs/config.md).

    Args:
        source: The path of a TOML file, or the fields as a mapping (e.g. a ``dict``).

    Returns:
        The validated, frozen spec.

    Raises:
        ConfigError: on the first field that is missing, unknown, of the wrong type or out of
            range (or a file that cannot be read), naming the field, the value and the fix.
    """
    if isinstance(source, Mapping):
        return parse_config(dict(source))
    if isinstance(source, str | PathLike):
        return _load_config_file(Path(source))
    raise ConfigError(
        "", f"a config given as a {type(source).__name__}",
        "the path of a TOML file or a mapping of config fields",
        'pass e.g. {"name": "nco_core", "function": "sincos"} or "core.toml"',
    )  # fmt: skip


def design_core(config: Config, *, progress: Callable[[str], None] | None = None) -> Core:
    """Size and prove a core: iterations and guard bits (where ``auto``), latency, accuracy.

    Args:
        config: A TOML file's path, a mapping of config fields, or a spec from
            :func:`load_config`.
        progress: Called with a short line now and then while a long proof runs.

    Returns:
        The core, with its bit-true model.

    Raises:
        ConfigError: for a bad config, or one whose budget no size meets (the fix names a
            budget or size that works).
    """
    source = None
    if isinstance(config, CoreSpec):
        spec, text = config, _toml_text(spec_to_dict(config))
    elif isinstance(config, Mapping):
        spec = load_config(config)
        text = _toml_text(dict(config))
    else:
        spec = load_config(config)
        source = str(config)
        text = Path(config).read_text(encoding="utf-8")
    try:
        design = build_design(spec, progress=progress)
        check_module_name(design)
    except ConfigError as exc:
        raise (exc.with_source(source) if source else exc) from None
    return Core(design, text)


def generate(
    config: Config | Core, out_dir: str | PathLike[str], *, progress: Callable[[str], None] | None = None
) -> Project:
    """Write a core's project folder: RTL, bench, manifest, runner, README, FuseSoC core file.

    As ``benchgen generate``: into a new or empty folder, or over a project benchgen wrote
    before, replacing only the files its manifest lists, all or nothing.

    Args:
        config: A config (as for :func:`design_core`) or a core it returned.
        out_dir: The project folder.
        progress: As for :func:`design_core`.

    Returns:
        The project, read back.

    Raises:
        ConfigError: for a bad config; nothing is written.
        ProjectError: if the folder holds something that is not a benchgen project, is busy
            with another generate, or cannot be written (an old project is then unchanged).
    """
    core = config if isinstance(config, Core) else design_core(config, progress=progress)
    write_project(core.design, core.config_text, out_dir)
    return open_project(out_dir)


def open_project(path: str | PathLike[str]) -> Project:
    """Read a generated project folder and rebuild its core from the manifest.

    Args:
        path: The project folder (the one holding ``manifest.json``).

    Raises:
        ProjectError: if the folder is not a benchgen project, or its manifest was edited or
            written by a benchgen that derives different numbers (regenerate it).
    """
    folder = Path(path)
    manifest = load_manifest(folder)
    design = design_from_manifest(manifest)
    config = folder / "config.toml"
    try:
        text = config.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        text = _toml_text(spec_to_dict(design.spec))  # the manifest holds the same fields
    return Project(folder, manifest, Core(design, text))


def _toml_text(fields: Mapping[str, Any]) -> str:
    """A config file's text for validated fields (strings, whole numbers, numbers, booleans).

    Strings are written as JSON strings, whose escapes are all TOML basic-string escapes.
    """
    lines = []
    for key, value in fields.items():
        if isinstance(value, bool):
            text = "true" if value else "false"
        elif isinstance(value, int):
            text = str(value)
        elif isinstance(value, float):
            text = repr(value)
        else:
            text = json.dumps(str(value), ensure_ascii=False)
        lines.append(f"{key} = {text}")
    return "\n".join(lines) + "\n"
