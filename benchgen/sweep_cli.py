"""The ``benchgen sweep`` and ``benchgen report`` commands (parsers and handlers).

This is where a sweep and its report meet: :func:`sweep_and_report` runs the sweep
(:mod:`benchgen.sweep`, which saves results and knows nothing of reports), then writes the
report from the folder (:mod:`benchgen.report`, which reads records and runs nothing).
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Iterable
from pathlib import Path
from typing import TYPE_CHECKING, Any

from benchgen.errors import BenchgenError

if TYPE_CHECKING:
    from benchgen.sweep import SweepOutcome
    from benchgen.sweep_config import SweepSpec

__all__ = ["add_report_parser", "add_sweep_parser", "run_report_command", "run_sweep_command", "sweep_and_report"]

FORMATS = ("json", "csv", "md", "html", "junit")


class UsageError(BenchgenError):
    """A command-line value that cannot work."""

    exit_status = 2


def _formats(text: str) -> tuple[str, ...]:
    items = tuple(f.strip() for f in text.split(",") if f.strip())
    bad = [f for f in items if f not in FORMATS]
    if bad:
        raise UsageError(f"--formats {text!r}: '{bad[0]}' is not a report format; use a comma list of {', '.join(FORMATS)}")
    return items


def add_sweep_parser(sub: Any, handler: Callable[[argparse.Namespace], int]) -> None:
    """Add ``benchgen sweep``."""
    p = sub.add_parser(
        "sweep",
        help="run every point of a sweep file (or one core config) and write its report",
        description="Expand a sweep file, validate every point, run them in parallel (cached and "
        "resumable) and write report.{json,csv,md,html} and junit.xml into the output folder. "
        "Exit status: 0 all points passed, 1 a point failed, 2 bad input or an output folder in use by "
        "another sweep, 130 interrupted (re-run to resume).",
    )
    p.add_argument("file", help="sweep TOML (see docs/sweep.md), or a single core config for a one-point report")
    p.add_argument("-o", "--output", required=True, help="output folder (re-using it resumes an interrupted sweep)")
    p.add_argument("-j", "--jobs", type=int, default=None, help="parallel workers (default: the CPU count)")
    p.add_argument("--cluster", metavar="ADDRESS", default=None,
                   help="run on a Dask distributed scheduler (tcp://host:port), or 'local' for a LocalCluster")
    p.add_argument("--shard", metavar="I/N", default=None, help="run only shard I of N (1-based); merge with 'benchgen report merge'")
    p.add_argument("--cache", metavar="DIR", default=None, help="build and estimate cache (default $BENCHGEN_CACHE_DIR or ~/.cache/benchgen)")
    p.add_argument("--no-cache", action="store_true", help="neither read nor write the cache")
    p.add_argument("--simulator", action="append", choices=("icarus", "verilator", "ghdl"), default=None,
                   help="override the sweep's simulators (repeatable); without it and without simulators in the file "
                        "(a single core config), verilator (ghdl for a VHDL-only core)")
    p.add_argument("--formats", default=",".join(FORMATS), help=f"report files to write (default {','.join(FORMATS)})")
    p.add_argument("--dry-run", action="store_true", help="validate and list the points, run nothing")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=handler)


def add_report_parser(sub: Any, handler: Callable[[argparse.Namespace], int]) -> None:
    """Add ``benchgen report render`` and ``benchgen report merge``."""
    p = sub.add_parser("report", help="rewrite a sweep's report, or merge the shards of a sweep")
    rsub = p.add_subparsers(dest="report_command", required=True)
    r = rsub.add_parser("render", help="write the report files of a sweep folder again and print its table")
    r.add_argument("folder", help="a folder written by 'benchgen sweep -o'")
    r.add_argument("--formats", default=",".join(FORMATS), help="report files to write")
    r.set_defaults(func=handler)
    m = rsub.add_parser("merge", help="join shard folders of one sweep into one folder and report")
    m.add_argument("folders", nargs="+", help="shard output folders")
    m.add_argument("-o", "--output", required=True, help="merged folder to write")
    m.add_argument("--formats", default=",".join(FORMATS), help="report files to write")
    m.set_defaults(func=handler)


def sweep_and_report(spec: SweepSpec, out_dir: str | Path, *, formats: Iterable[str] = FORMATS,
                     **run: Any) -> tuple[SweepOutcome, list[Path]]:
    """Run a sweep, then write its report files into its folder.

    Args:
        spec: The sweep.
        out_dir: Output folder.
        formats: Report files to write (of :data:`FORMATS`).
        **run: The other arguments of :func:`benchgen.sweep.run_sweep`.

    Returns:
        What the sweep did, and the report files written.
    """
    from benchgen.report import write_reports
    from benchgen.sweep import run_sweep

    outcome = run_sweep(spec, out_dir, **run)
    return outcome, write_reports(outcome.out_dir, formats=formats)


def run_sweep_command(args: argparse.Namespace) -> int:
    """Handler of ``benchgen sweep``."""
    from dataclasses import replace

    from benchgen.report import collect, to_table
    from benchgen.sweep import parse_shard
    from benchgen.sweep_config import expand, load_sweep

    formats = _formats(args.formats)
    if args.jobs is not None and args.jobs < 1:
        raise UsageError(f"--jobs {args.jobs}: give at least 1 (or leave it out for the CPU count)")
    spec = load_sweep(args.file)
    if args.simulator:
        spec = replace(spec, simulators=tuple(dict.fromkeys(args.simulator)))
    shard = parse_shard(args.shard)
    if args.dry_run:
        points = expand(spec)
        for p in points:
            print(p.label)
        print(f"{len(points)} point(s), all valid; synthesis targets: {', '.join(spec.synth.targets) or 'none'}")
        return 0
    outcome, files = sweep_and_report(
        spec, args.output, formats=formats, jobs=args.jobs, cluster=args.cluster, shard=shard,
        cache_dir=args.cache, use_cache=not args.no_cache, progress=None if args.quiet else sys.stderr,
        notes=sys.stderr,
    )
    print(to_table(collect(outcome.out_dir), wall_seconds=outcome.wall_seconds, ran=outcome.ran))
    for f in files:
        print(f"  wrote {f}")
    return outcome.exit_status


def run_report_command(args: argparse.Namespace) -> int:
    """Handler of ``benchgen report render|merge``."""
    from benchgen.report import collect, to_table, write_reports
    from benchgen.sweep import lock_folder, merge_shards

    formats = _formats(args.formats)
    if args.report_command == "merge":
        out = Path(args.output)
        with lock_folder(out):
            merge_shards([Path(f) for f in args.folders], out, notes=sys.stderr)
            files = write_reports(out, formats=formats)
    else:
        out = Path(args.folder)
        collect(out)  # a folder that holds no sweep is refused before anything is written into it
        # A sweep still writing into the folder would race with these report files.
        with lock_folder(out, fix="wait for it to finish, then render again"):
            files = write_reports(out, formats=formats)
    data = collect(out)
    for line in data.ignored:
        print(f"benchgen: {line}", file=sys.stderr)
    print(to_table(data))
    for f in files:
        print(f"  wrote {f}")
    failed = any(r["status"] != "passed" for r in data.rows) or bool(data.missing)
    return 1 if failed else 0
