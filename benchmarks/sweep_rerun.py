"""Run a sweep cold, then again with nothing changed, and print the ratio of the wall times.

Both runs happen in this one invocation, side by side: the first with an empty cache into a new
folder, the second into another new folder with the cache the first one filled (so it measures
the cache, not the resume store). Target: the re-run takes under 20% of the first run.

With ``--cluster-check`` a third run goes through a Dask ``LocalCluster`` with two workers, with
its own empty cache, and its report tables are compared byte for byte with the local pool's.

Each run is what ``benchgen sweep`` does: the sweep, then its report.

    python benchmarks/sweep_rerun.py sim_projects/sweeps/nco_depth_width.toml --cluster-check
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path

from benchgen.report import collect, to_table
from benchgen.sweep_cli import sweep_and_report
from benchgen.sweep_config import load_sweep

STABLE_FILES = ("report.md", "report.csv", "junit.xml")


def _timed(label: str, **kwargs: object) -> tuple[float, object]:
    t0 = time.perf_counter()
    outcome, _ = sweep_and_report(**kwargs)  # type: ignore[arg-type]
    wall = time.perf_counter() - t0
    print(f"{label}: {wall:.1f} s, {outcome.ran} task(s) run, exit status {outcome.exit_status}", flush=True)
    return wall, outcome


def main() -> int:
    """Entry point."""
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("sweep", help="sweep TOML")
    ap.add_argument("--jobs", type=int, default=None)
    ap.add_argument("--cluster-check", action="store_true", help="also run on a 2-worker LocalCluster and compare")
    ap.add_argument("--keep", metavar="DIR", help="work in DIR instead of a temporary folder")
    args = ap.parse_args()

    spec = load_sweep(args.sweep)
    root = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="benchgen_sweep_"))
    root.mkdir(parents=True, exist_ok=True)
    cache = root / "cache"
    shutil.rmtree(cache, ignore_errors=True)
    for d in ("first", "rerun", "cluster"):
        shutil.rmtree(root / d, ignore_errors=True)

    first, out1 = _timed("first run (empty cache)", spec=spec, out_dir=root / "first", jobs=args.jobs,
                         cache_dir=cache, progress=sys.stderr)
    print(to_table(collect(out1.out_dir)))  # type: ignore[attr-defined]
    rerun, _ = _timed("re-run (nothing changed, new folder, same cache)", spec=spec, out_dir=root / "rerun",
                         jobs=args.jobs, cache_dir=cache, progress=None)
    print(f"re-run / first run = {rerun:.1f} s / {first:.1f} s = {rerun / first:.3f} (target < 0.20)")
    same = all((root / "first" / f).read_bytes() == (root / "rerun" / f).read_bytes() for f in STABLE_FILES)
    print(f"re-run report identical to the first: {same}")
    status = 0 if rerun / first < 0.20 and same else 1
    if args.cluster_check:
        _ = _timed("Dask LocalCluster, 2 workers, its own empty cache", spec=spec, out_dir=root / "cluster",
                         cluster="local", jobs=2, cache_dir=root / "cache_cluster", progress=sys.stderr)
        for f in STABLE_FILES:
            equal = (root / "first" / f).read_bytes() == (root / "cluster" / f).read_bytes()
            print(f"cluster {f} identical to the local pool's: {equal}")
            status |= 0 if equal else 1

    print(f"work folder: {root}")
    return status


if __name__ == "__main__":
    sys.exit(main())
