"""Command line: ``benchgen generate``, ``sim``, ``demo``, ``sweep`` and ``report``."""

from __future__ import annotations

import sys
import time

try:
    # Ctrl-C while these load ends as it does later, with one line and exit status 130: the
    # console script imports this module before main() runs, so main's handler cannot cover it.
    import argparse
    import json
    import os
    from importlib import resources
    from collections.abc import Callable
    from pathlib import Path
    from typing import NoReturn

    from benchgen import __version__
    from benchgen.errors import BenchgenError, one_line
except KeyboardInterrupt:  # pragma: no cover - timing-dependent; tests/test_cli_errors.py injects it
    print("benchgen: interrupted", file=sys.stderr)
    raise SystemExit(130) from None

__all__ = ["MAX_SAMPLES", "MAX_SEED", "main"]

MAX_SAMPLES = 10**12
"""Most samples one run takes: days of simulation at the fastest engine's rate."""

MAX_SEED = 2**31 - 1
"""Largest seed: the range a sweep's seed has (docs/sweep.md), so one seed works in both."""


class UsageError(BenchgenError):
    """A command-line value that cannot work (exit status 2)."""

    exit_status = 2


class _Parser(argparse.ArgumentParser):
    """argparse, with its errors on one line like every other bad input (exit status 2)."""

    def error(self, message: str) -> NoReturn:
        self.exit(2, f"{self.prog}: error: {one_line(message, 600)} (see {self.prog} --help)\n")


def _whole_number(option: str, lo: int, hi: int, example: str) -> Callable[[str], int]:
    """An argparse type: a whole number from ``lo`` to ``hi``, written 20000, 20_000 or 2e4."""

    def parse(text: str) -> int:
        value: int | None = None
        try:
            value = int(text)
        except ValueError:
            try:
                number = float(text)
            except ValueError:
                number = float("nan")
            if number.is_integer():  # 1e6 and the like; nan and inf are not
                value = int(number)
        if value is None:
            raise argparse.ArgumentTypeError(
                f"{text!r} is not a whole number; give one from {lo} to {hi:,}, e.g. {option} {example}"
            )
        if not lo <= value <= hi:
            raise argparse.ArgumentTypeError(
                f"{text} is out of range; give a whole number from {lo} to {hi:,}, e.g. {option} {example}"
            )
        return value

    parse.__name__ = "whole number"  # what argparse calls the type in its own messages
    return parse


def _output_file(option: str, path: str | None) -> None:
    """Refuse an output path that cannot be written, before anything runs."""
    if path is None:
        return
    target = Path(path)
    folder = target.parent
    if target.is_dir():
        raise UsageError(f"{option} {path}: that is a folder; give a file name inside it")
    if not folder.is_dir():
        raise UsageError(f"{option} {path}: the folder '{folder}' does not exist; create it or give another path")
    if not os.access(folder, os.W_OK) or (target.exists() and not os.access(target, os.W_OK)):
        raise UsageError(f"{option} {path}: cannot write there (permission); give another path")


def _generate(args: argparse.Namespace) -> int:
    from benchgen.functions import function_of
    from benchgen.project import generate_project

    design = generate_project(args.config, args.output, progress=_Progress())
    dp, timing = design.datapath, design.timing
    print(
        f"wrote {args.output}: {design.spec.name}, {dp.iterations} iterations, {dp.guard_text()}, "
        f"latency {timing.latency_cycles}, one sample per {timing.cycles_per_sample} clock(s), "
        f"worst error {design.accuracy.max_error_lsb:.4f} LSB (model vs ideal, over {design.proof.describe()})"
    )
    note = function_of(dp).generate_note(design.spec, dp)
    if note:
        print(f"  {note}")
    return 0


class _Progress:
    """Progress lines on stdout (beside the "wrote" line; stderr keeps the one-line errors) for
    a generate that takes a while: silent for the first 2 seconds, then at most one line a
    second."""

    QUIET_SECONDS = 2.0

    def __init__(self) -> None:
        self.start = time.monotonic()
        self.last = 0.0

    def __call__(self, text: str) -> None:
        now = time.monotonic()
        if now - self.start < self.QUIET_SECONDS or now - self.last < 1.0:
            return
        self.last = now
        print(f"  sizing ({now - self.start:.0f} s): {text}", flush=True)


def _simulate(args: argparse.Namespace, project: Path) -> int:
    from benchgen.bench.bulk_plan import BULK_FROM_SAMPLES, bulk_plan
    from benchgen.sim import run_sim

    # Checked first: a report that cannot be written must not cost a simulation.
    _output_file("--json", args.json)
    _output_file("--csv", args.csv)
    _output_file("--html", args.html)
    csv_path = args.csv
    if args.html and not csv_path:
        # The HTML report's error figures are drawn from the per-sample CSV: kept beside the
        # report while it is written, then deleted.
        html = Path(args.html)
        csv_path = str(html.with_name(f".{html.name}.samples.csv"))

    if args.mode == "auto" and bulk_plan("auto", args.samples, args.exhaustive):
        why = "--exhaustive" if args.exhaustive else f"{args.samples} samples (>= {BULK_FROM_SAMPLES})"
        print(f"{why}: using the bulk bench (HDL streams whole blocks, Python checks whole arrays)")
    report = run_sim(
        project,
        simulator=args.simulator,
        samples=args.samples,
        seed=args.seed,
        waves=args.waves,
        csv_path=csv_path,
        mode=args.mode,
        exhaustive=args.exhaustive,
        bulk_engine=args.bulk_engine,
        waves_window=args.waves_window,
        waves_limit_mb=args.waves_limit,
    )
    print(report.table())
    print(f"  log: {report.log_file}")
    if report.waves_file:
        print(f"  waves: {report.waves_file} ({report.waves_note})")
    elif report.waves_note:
        print(f"  waves: {report.waves_note}")
    if args.html:
        from benchgen.project import design_from_manifest, load_manifest
        from benchgen.sim_report import write_html

        try:
            write_html(args.html, report, csv_path, design_from_manifest(load_manifest(project)))
        except OSError as exc:
            raise UsageError(f"--html {args.html}: cannot write it ({exc.strerror or exc})") from None
        finally:
            if csv_path != args.csv:
                Path(csv_path).unlink(missing_ok=True)
        print(f"  html: {args.html}")
    if args.json:
        try:
            Path(args.json).write_text(json.dumps(report.as_dict(), indent=2) + "\n")
        except OSError as exc:
            raise UsageError(f"--json {args.json}: cannot write it ({exc.strerror or exc})") from None
    return 0 if report.passed else 1


def _sim(args: argparse.Namespace) -> int:
    return _simulate(args, Path(args.project))


def _demo(args: argparse.Namespace) -> int:
    from benchgen.project import generate_project

    config = Path(str(resources.files("benchgen").joinpath("examples/demo.toml")))
    out = Path(args.output)
    # Said before anything is written: the demo makes a folder where it is run.
    print(f"benchgen demo writes its project into {out.resolve()} (another folder: -o DIR), "
          f"then simulates it on {args.simulator}.")
    print("Generating the demo core (a radio's down-converter oscillator) ...")
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


def _add_sim_options(p: argparse.ArgumentParser) -> None:
    from benchgen.simulators import DEFAULT_SIMULATOR, SIMULATORS, VHDL_SIMULATORS

    p.add_argument(
        "--simulator",
        choices=(*SIMULATORS, *VHDL_SIMULATORS),
        default=DEFAULT_SIMULATOR,
        help=f"simulator to build and run with (default {DEFAULT_SIMULATOR}: it comes with benchgen from PyPI "
        "and simulates faster; icarus builds faster, so a short run of a small core ends sooner there; "
        "ghdl runs the VHDL core)",
    )
    p.add_argument(
        "--samples",
        type=_whole_number("--samples", 1, MAX_SAMPLES, "20000"),
        default=20_000,
        help="random samples at full rate (default 20000; 1e6 style accepted)",
    )
    p.add_argument(
        "--seed",
        type=_whole_number("--seed", 0, MAX_SEED, "7"),
        default=None,
        help=f"random seed from 0 to {MAX_SEED} (printed in the report; default: from the clock)",
    )
    p.add_argument("--waves", action="store_true",
                   help="dump the whole run's waveforms to BUILD/<core>.fst (Icarus) or .vcd (Verilator); the "
                   "path is printed")
    p.add_argument("--waves-window", metavar="N", type=_whole_number("--waves-window", 1, 10**9, "100"),
                   default=None,
                   help="run without waves and, if a sample differs from the model, rerun the same seed dumping "
                   "only N clocks either side of the first one")
    p.add_argument("--waves-limit", metavar="MB", type=_whole_number("--waves-limit", 1, 10**9, "4000"),
                   default=1000,
                   help="largest whole-run dump, estimated before the run, in MB (default 1000)")
    p.add_argument("--json", metavar="PATH", help="write the report as JSON")
    p.add_argument("--csv", metavar="PATH",
                   help="write one row per sample: inputs, outputs, model, ideal, error in LSB per output")
    p.add_argument("--html", metavar="FILE",
                   help="write a one-file HTML report: summary, tests, error histogram and error against "
                   "the input per output")
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
    parser = _Parser(
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
    _add_sim_options(sim)
    sim.set_defaults(func=_sim)

    demo = sub.add_parser("demo", help="generate the demo core, simulate it and print the report")
    demo.add_argument("-o", "--output", default="benchgen_demo", help="project folder (default ./benchgen_demo)")
    _add_sim_options(demo)
    demo.set_defaults(func=_demo)

    from benchgen.sweep_cli import add_report_parser, add_sweep_parser

    add_sweep_parser(sub, _sweep)
    add_report_parser(sub, _report)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point; returns the exit status (0 pass, 1 verification failed, 2 bad input, 3 cannot
    run, 130 interrupted)."""
    try:
        # Parsing is inside: building the parser imports more modules, and Ctrl-C may come then.
        args = build_parser().parse_args(argv)
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
