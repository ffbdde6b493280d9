"""Print the measured error tables of docs/error_analysis.md (bit-true model against the ideal).

Run: python scripts/error_tables.py   (about a minute; numbers depend only on the code)
"""

from __future__ import annotations

import math

import numpy as np

from benchgen.algorithm import make_datapath
from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.functions import measure, sizing_inputs
from benchgen.model import atan2


def sized_table() -> None:
    print("| function | width (data/angle) | gain | iterations | guard bits | worst / RMS error (LSB) | measured on |")
    print("|---|---|---|---|---|---|---|")
    for fn in ("sincos", "rotate", "atan2", "mul", "div"):
        for width in (12, 16):
            for gain in (("compensated", "raw") if fn in ("rotate", "atan2") else ("compensated",)):
                values = {"name": "c", "function": fn, "data_width": width}
                if fn not in ("mul", "div"):
                    values.update({"angle_width": width, "gain": gain})
                d = build_design(parse_config(values))
                a = d.accuracy
                on = f"all {a.samples}" if d.accuracy_exhaustive else f"{a.samples} random + corners"
                print(
                    f"| {fn} | {width}/{width if fn not in ('mul', 'div') else '-'} | {gain if fn not in ('mul', 'div') else '-'} | {d.datapath.iterations} | {d.datapath.guard_bits} | "
                    f"{a.max_error_lsb:.3f} / {a.rms_error_lsb:.3f} | {on} |"
                )


def sources_table() -> None:
    """Where the error of a 16-bit sincos comes from: vary one source at a time."""
    spec = parse_config({"name": "c", "function": "sincos", "data_width": 16, "angle_width": 16})
    inputs, _ = sizing_inputs(make_datapath(spec, 17, 8))
    print("| iterations | guard bits | worst / RMS error (LSB) | what dominates |")
    print("|---|---|---|---|")
    for n, g, note in (
        (12, 16, "angle residue after 12 iterations (guard bits make rounding negligible)"),
        (16, 16, "angle residue after 16 iterations"),
        (20, 16, "final rounding only (residue and internal rounding negligible)"),
        (17, 0, "rounding of the 17 intermediate x, y with no guard bits"),
        (17, 3, "intermediate rounding with 3 guard bits"),
        (17, 8, "the auto-sized core: all sources just below 1 LSB together"),
    ):
        s = measure(make_datapath(spec, n, g), inputs)
        print(f"| {n} | {g} | {s.max_error_lsb:.3f} / {s.rms_error_lsb:.3f} | {note} |")


def small_vector_table() -> None:
    """atan2 angle error against vector length (16-bit, sized core)."""
    d = build_design(parse_config({"name": "c", "function": "atan2", "data_width": 16, "angle_width": 16}))
    dp = d.datapath
    rng = np.random.default_rng(1)
    print("| vector length (LSB) | worst / RMS angle error (angle LSB) |")
    print("|---|---|")
    for r in (2, 8, 32, 128, 512, 2048, 8192, 32000):
        t = rng.uniform(-math.pi, math.pi, 20000)
        x = np.round(r * np.cos(t)).astype(np.int64)
        y = np.round(r * np.sin(t)).astype(np.int64)
        keep = (x != 0) | (y != 0)
        inputs = {"in_x": x[keep], "in_y": y[keep]}
        out = atan2(dp, inputs["in_x"], inputs["in_y"])
        ideal = np.arctan2(inputs["in_y"], inputs["in_x"]) / (2 * np.pi) * 2**16
        e = (out["out_angle"] - ideal + 2**15) % 2**16 - 2**15
        print(f"| {r} | {np.max(np.abs(e)):.2f} / {np.sqrt(np.mean(e * e)):.2f} |")
    print(f"\n(the angle budget applies from length {1 << (dp.data_width - 5)})")


def main() -> None:
    print("## Sized cores (max_error_lsb = 1.0, half_even)\n")
    sized_table()
    print("\n## Error sources, 16-bit sincos\n")
    sources_table()
    print("\n## atan2 angle error against vector length, 16-bit core\n")
    small_vector_table()


if __name__ == "__main__":
    main()
