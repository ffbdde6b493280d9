"""Peak memory of a Verilator bulk run against its sample count, measured side by side in one run.

Builds one small pipelined 12-bit sine/cosine core, builds its C++ runner once (a warm-up run),
then runs the bulk bench (``bulk_full_rate`` and ``bulk_gaps_and_stalls``) at each sample count,
each in a fresh Python process, and prints the peak resident set size of that process tree:

* ``python``: the peak of the process that runs ``benchgen.sim.run_sim`` and checks the blocks
  (``resource.getrusage(RUSAGE_SELF).ru_maxrss``);
* ``runner``: the peak of the Verilator runner it starts (``VmHWM`` in ``/proc/PID/status``,
  read every 0.2 s while it runs);
* ``child``: the largest child process waited for (``RUSAGE_CHILDREN``), which is the runner or
  the short ``verilator --version`` probe (the build is cached by the warm-up, so no compiler
  runs in a measured process);
* ``tree``: python + runner, the two processes that run side by side: an upper bound of the
  tree's peak while the samples flow (the two peaks need not coincide).

The ratio of the largest run's peak to the smallest's is the figure of merit: memory flat in the
sample count gives a ratio close to 1. Only the standard library measures (``resource`` and
``/proc``, so Linux only; sizes in KiB as the kernel gives them).

    python benchmarks/bulk_memory.py [--samples 1000000 10000000 100000000] [--keep]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

from benchgen.project import generate_project

CORE = {
    "name": "mem_sincos",
    "function": "sincos",
    "architecture": "pipelined",
    "angle_width": 12,
    "data_width": 12,
    "tag_width": 4,
}


def _config(path: Path, values: dict[str, object]) -> Path:
    lines = [f'{k} = "{v}"' if isinstance(v, str) else f"{k} = {v}" for k, v in values.items()]
    path.write_text("\n".join(lines) + "\n")
    return path


def _runner_peaks(stop: threading.Event, peaks: dict[int, int]) -> None:
    """Peak RSS (VmHWM, KiB) of each bulk runner this process starts, sampled until ``stop``."""
    me = str(os.getpid())
    while not stop.wait(0.2):
        for entry in Path("/proc").iterdir():
            if not entry.name.isdigit():
                continue
            try:
                fields = dict(line.split(":", 1) for line in (entry / "status").read_text().splitlines() if ":" in line)
                # The status Name is cut to 15 characters; the command line is whole.
                command = (entry / "cmdline").read_bytes().split(b"\0")[0]
            except OSError:
                continue  # ended meanwhile
            if fields.get("PPid", "").strip() == me and command.endswith(b"_bulk_run") and "VmHWM" in fields:
                pid = int(entry.name)
                peaks[pid] = max(peaks.get(pid, 0), int(fields["VmHWM"].split()[0]))


def _child(project: Path, samples: int) -> None:
    """One measured run, in this (fresh) process; prints one JSON line."""
    from benchgen.sim import run_sim

    stop = threading.Event()
    peaks: dict[int, int] = {}
    sampler = threading.Thread(target=_runner_peaks, args=(stop, peaks), daemon=True)
    sampler.start()
    t0 = time.perf_counter()
    report = run_sim(project, simulator="verilator", samples=samples, seed=1, mode="bulk")
    seconds = time.perf_counter() - t0
    stop.set()
    sampler.join()
    print(
        json.dumps(
            {
                "samples": report.samples,
                "passed": report.passed,
                "seconds": seconds,
                "python_kib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
                "runner_kib": max(peaks.values(), default=0),
                "child_kib": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss,
                "problems": report.problems[:3],
            }
        )
    )


def _measure(project: Path, samples: int) -> dict[str, object]:
    proc = subprocess.run(
        [sys.executable, __file__, "--child", str(project), str(samples)],
        capture_output=True,
        text=True,
        check=False,
    )
    if proc.returncode != 0:
        raise SystemExit(f"run of {samples} samples failed:\n{proc.stderr[-3000:]}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--samples", type=int, nargs="+", default=[10**6, 10**7, 10**8])
    parser.add_argument("--keep", action="store_true", help="keep the project folder")
    parser.add_argument("--child", nargs=2, metavar=("PROJECT", "SAMPLES"), help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        _child(Path(args.child[0]), int(args.child[1]))
        return

    work = Path(tempfile.mkdtemp(prefix="bulk_memory_"))
    try:
        project = work / "proj"
        generate_project(_config(work / "core.toml", CORE), project)
        print(f"load average before: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
        warm = _measure(project, 100_000)  # builds the runner; later runs reuse it
        print(f"warm-up (build): {warm['seconds']:.1f} s")
        rows = []
        print(f"{'samples asked':>14}  {'checked':>11}  {'python MiB':>10}  {'runner MiB':>10}  {'child MiB':>9}  "
              f"{'tree MiB':>8}  {'seconds':>8}  result")  # fmt: skip
        for n in args.samples:
            r = _measure(project, n)
            py, rn, ch = (float(r[k]) / 1024 for k in ("python_kib", "runner_kib", "child_kib"))  # type: ignore[arg-type]
            rows.append((n, py, rn, py + rn))
            verdict = "PASS" if r["passed"] else f"FAIL {r['problems']}"
            print(f"{n:>14,}  {r['samples']:>11,}  {py:>10.1f}  {rn:>10.1f}  {ch:>9.1f}  {py + rn:>8.1f}  "
                  f"{r['seconds']:>8.1f}  {verdict}")  # fmt: skip
        (n0, py0, rn0, tr0), (n1, py1, rn1, tr1) = rows[0], rows[-1]
        runner = f"{rn1 / rn0:.2f}x" if rn0 else "not seen"
        print(
            f"ratio {n1:.0e} / {n0:.0e} samples: python {py1 / py0:.2f}x, runner {runner}, "
            f"tree {tr1 / tr0:.2f}x (flat memory: close to 1)"
        )
        print(f"load average after: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")
    finally:
        if args.keep:
            print(f"kept {work}")
        else:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
