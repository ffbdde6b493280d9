"""Would the C model speed up the accuracy proof? C against numpy, measured side by side in one run.

The sizing proof (benchgen.design) runs the bit-true numpy model over every input (or 10^6
random ones) and judges each output against the ideal (``measure``). For each core below this
script times, on the same inputs in this process:

* ``numpy model``: ``benchgen.functions.evaluate`` (int64 arrays, or Python integers past 40
  data bits);
* ``C model``: the generated C (compiled here with the system compiler at -O2) through ctypes,
  one call per sample inside a C loop over the arrays, plus the conversions to and from numpy;
* ``whole measure``: ``benchgen.functions.measure`` (model + ideal + error), the step the
  proof repeats, to show which share of it the model is.

It prints samples per second of each and the ratios; it checks the two models agree on every
sample first. Nothing here is wired into the sizing (the lead decides that).

    python benchmarks/cmodel_speed.py [--samples 1000000]
"""

from __future__ import annotations

import argparse
import ctypes
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from test_cmodel import _codes, _write, quick_design, run_c  # noqa: E402 - the tests' harness

from benchgen.functions import evaluate, int64_model, measure, output_ports, random_inputs  # noqa: E402

CORES: list[tuple[str, dict[str, Any], int, int]] = [
    ("sincos 16-bit", {"function": "sincos", "data_width": 16, "angle_width": 16}, 18, 5),
    ("sincos 24-bit", {"function": "sincos", "data_width": 24, "angle_width": 24}, 26, 5),
    ("atan2 12-bit", {"function": "atan2", "data_width": 12, "angle_width": 12}, 14, 5),
    ("ln 24-bit", {"function": "ln", "data_width": 24}, 26, 5),
    ("sqrt 24-bit", {"function": "sqrt", "data_width": 24}, 26, 5),
    ("div 16-bit", {"function": "div", "data_width": 16}, 18, 4),
    ("sqrt 48-bit (Python-int model)", {"function": "sqrt", "data_width": 48}, 50, 6),
    ("sincos 64-bit (Python-int model, multi-limb C)", {"function": "sincos", "data_width": 64, "angle_width": 64}, 62, 6),
]


def _best(fn: Any, repeats: int) -> float:
    best = float("inf")
    for _ in range(repeats):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--samples", type=int, default=1_000_000)
    parser.add_argument("--wide-samples", type=int, default=20_000, help="samples for the Python-int models")
    args = parser.parse_args()
    cc = shutil.which("cc") or shutil.which("gcc")
    if cc is None:
        print("no C compiler on PATH")
        return 1
    folder = Path(tempfile.mkdtemp(prefix="cmodel_speed_"))
    designs = [quick_design({"name": f"s{k}", **values, "max_error_lsb": 3.0}, n, g) for k, (_, values, n, g) in enumerate(CORES)]
    sources = [p for d in designs for p in _write(d, folder)]
    subprocess.run([cc, "-std=c99", "-O2", "-shared", "-fPIC", "-o", str(folder / "m.so"), *map(str, sources)], check=True)
    lib = ctypes.CDLL(str(folder / "m.so"))
    print(f"{'core':<48s} {'samples':>9s} {'numpy/s':>10s} {'C/s':>10s} {'C / numpy':>9s} {'model share of measure':>23s}")
    for (label, _, _, _), design in zip(CORES, designs, strict=True):
        dp = design.datapath
        count = args.samples if int64_model(dp) else args.wide_samples
        inputs = random_inputs(dp, np.random.default_rng(7), count)
        got = run_c(lib, design, inputs)
        want = evaluate(dp, inputs)
        assert all(np.array_equal(_codes(want[p.name], p.signed), got[p.name]) for p in output_ports(dp)), label
        repeats = 3 if count >= 100_000 else 1
        t_np = _best(lambda: evaluate(dp, inputs), repeats)
        t_c = _best(lambda: run_c(lib, design, inputs), repeats)
        t_measure = _best(lambda: measure(dp, inputs), 1)
        print(
            f"{label:<48s} {count:>9d} {count / t_np:>10.3g} {count / t_c:>10.3g} {t_np / t_c:>8.1f}x "
            f"{t_np / t_measure:>22.0%}"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
