"""Command line: ``benchgen generate``, ``sim``, ``demo``, ``sweep`` and ``report``."""

from __future__ import annotations

import argparse
import json
import os
import sys
import time
from importlib import resources
from pathlib import Path

from benchgen import __version__
from benchgen.errors import BenchgenError

__all__ = ["main"]


def _generate(args: argparse.Namespace) -> int:
    from benchgen.project import generate_project

    design = generate_project(args.config, args.output, progress=_Progress())
    dp, timing = design.datapath, design.timing
    print(
        f"wrote {args.output}: {design.spec.name}, {dp.iterations} iterations, {dp.guard_bits} guard bits, "
        f"latency {timing.latency_cycles}, one sample per {timing.cycles_per_sample} clock(s), "
        f"worst error {design.accuracy.max_error_lsb:.4f} LSB (model vs ideal, over {design.proof.describe()})"
    )
    return 0


class _Progress:
    """Progress lines on stderr for a generate that takes a while: silent for the first
    2 seconds, then at most one line a second."""

    QUIET_SECONDS = 2.0

    def __init__(self) -> None:
        self.start = time.monotonic()
        self.last = 0.0

    def __call__(self, text: str) -> None:
        now = time.monotonic()
        if now - self.start < self.QUIET_SECONDS or now - self.last < 1.0:
            return
        self.last = now
        print(f"  sizing ({now - self.start:.0f} s): {text}", file=sys.stderr, flush=True)


def _simulate(args: argparse.Namespace, project: Path) -> int:
    from benchgen.bench.bulk_plan import BULK_FROM_SAMPLES, bulk_plan
    from benchgen.sim import run_sim

    if args.mode == "auto" and bulk_plan("auto", args.samples, args.exhaustive):
        why = "--exhaustive" if args.exhaustive else f"{args.samples} samples (>= {BULK_FROM_SAMPLES})"
        print(f"{why}: using the bulk bench (HDL streams whole blocks, Python checks whole arrays)")
    report = run_sim(
        project,
        simulator=args.simulator,
        samples=args.samples,
        seed=args.seed,
        waves=args.waves,
        csv_path=args.csv,
        mode=args.mode,
        exhaustive=args.exhaustive,
        bulk_engine=args.bulk_engine,
    )
    print(report.table())
    print(f"  log: {report.log_file}")
    if args.json:
        Path(args.json).write_text(json.dumps(report.as_dict(), indent=2) + "\n")
    return 0 if report.passed else 1


def _sim(args: argparse.Namespace) -> int:
    return _simulate(args, Path(args.project))


def _demo(args: argparse.Namespace) -> int:
    from benchgen.project import generate_project

    config = Path(str(resources.files("benchgen").joinpath("examples/demo.toml")))
    out = Path(args.output)
    print(f"Generating the demo core (a radio's down-converter oscillator) into {out} ...")
    generate_project(config, out)
    print((out / "README.md").read_text().split("\n\n")[1])
    print(f"\nSimulating on {args.simulator} ...")
    return _simulate(args, out)


def _sweep(args: argparse.Namespace) -> int:
    from benchgen.sweep_cli import run_sweep_command

    return run_sweep_command(args)


def _report(args: argparse.Namespace) -> int:
    from benchgen.sweep_cli import run_report_command

    return run_report_command(args)


def _add_sim_options(p: argparse.ArgumentParser, default_sim: str | None) -> None:
    p.add_argument(
        "--simulator",
        choices=("icarus", "verilator"),
        default=default_sim,
        required=default_sim is None,
        help="simulator to build and run with",
    )
    p.add_argument("--samples", type=int, default=20_000, help="random samples at full rate (default 20000)")
    p.add_argument("--seed", type=int, default=None, help="random seed (printed in the report; default: from the clock)")
    p.add_argument("--waves", action="store_true", help="record waveforms (FST on Icarus, VCD on Verilator)")
    p.add_argument("--json", metavar="PATH", help="write the report as JSON")
    p.add_argument("--csv", metavar="PATH", help="write one row per sample: input, outputs, model, ideal")
    p.add_argument(
        "--mode",
        choices=("auto", "per-clock", "bulk"),
        default="auto",
        help="bench: per-clock cocotb loop, or bulk (HDL streams whole blocks); auto picks bulk "
        "from 100000 samples on",
    )
    p.add_argument(
        "--exhaustive",
        action="store_true",
        help="check every input code once, a quarter at full rate and the rest under idle gaps and "
        "output stalls (bulk bench; input spaces up to 2^24 codes)",
    )
    p.add_argument(
        "--bulk-engine",
        choices=("auto", "native", "cocotb"),
        default="auto",
        help="what drives a bulk run: native (a generated C++ runner, Verilator only) or cocotb; "
        "auto picks native on Verilator unless --waves is given",
    )


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (exposed for documentation and tests)."""
    parser = argparse.ArgumentParser(
        prog="benchgen",
        description="Generate, simulate and verify shift-and-add (CORDIC) function cores.",
    )
    parser.add_argument("--version", action="version", version=f"benchgen {__version__}")
    sub = parser.add_subparsers(dest="command", required=True)

    gen = sub.add_parser("generate", help="write a simulation project from a config file")
    gen.add_argument("config", help="TOML config of one core")
    gen.add_argument("-o", "--output", required=True, help="project folder to write")
    gen.set_defaults(func=_generate)

    sim = sub.add_parser("sim", help="build a project and run its bench")
    sim.add_argument("project", help="project folder written by 'benchgen generate'")
    _add_sim_options(sim, None)
    sim.set_defaults(func=_sim)

    demo = sub.add_parser("demo", help="generate the demo core, simulate it and print the report")
    demo.add_argument("-o", "--output", default="benchgen_demo", help="project folder (default ./benchgen_demo)")
    _add_sim_options(demo, "verilator")
    demo.set_defaults(func=_demo)

    from benchgen.sweep_cli import add_report_parser, add_sweep_parser

    add_sweep_parser(sub, _sweep)
    add_report_parser(sub, _report)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point; returns the exit status (0 pass, 1 verification failed, 2 bad input, 3 cannot run)."""
    args = build_parser().parse_args(argv)
    try:
        return int(args.func(args))
    except BenchgenError as exc:
        print(f"benchgen: error: {exc}", file=sys.stderr)
        return exc.exit_status
    except BrokenPipeError:
        # The reader of our output (e.g. `| head`) went away: stop quietly, without a verdict.
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1
    except KeyboardInterrupt:
        print("benchgen: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
