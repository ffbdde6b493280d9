"""Sizing time: the every-input proof against sampled sizing, measured side by side in one run.

For each core whose input space has 2^24 codes, sizes it from scratch twice in this process:

* ``every input``: what ``benchgen generate`` does: the search set, then every input code in
  chunks for each candidate the search set lets through, until one passes;
* ``sampled``: the same search with the full check on 10^6 seeded random inputs plus the
  corners and directed worst cases (the sizer's method beyond 2^24 codes), forced by lowering
  the every-input limit for the run.

It prints both times, their ratio, the sizes each method picks and the worst error each claims,
and the worst error of the sampled pick over every input (a sampled pick can miss the budget:
that is why the proof covers every input where it can). The issue's target: a 2^24-code core
sized and proved in under 30 s on the 2-core machine.

    python benchmarks/sizing_speed.py [--only atan2 div ...]
"""

from __future__ import annotations

import argparse
import time
from typing import Any

import numpy as np

import benchgen.design as design_mod
from benchgen.config import parse_config
from benchgen.design import build_design, clear_sizing_cache
from benchgen.functions import enumerate_inputs, evaluate, function_errors, input_space_bits

CORES: dict[str, dict[str, Any]] = {
    "atan2": {"function": "atan2", "data_width": 12, "angle_width": 12},
    "div": {"function": "div", "data_width": 12},
    "mul": {"function": "mul", "data_width": 12},
    "rotate": {"function": "rotate", "data_width": 8, "angle_width": 8},
    "sincos": {"function": "sincos", "data_width": 24, "angle_width": 24},
    "ln": {"function": "ln", "data_width": 24},
    "atanh": {"function": "atanh", "data_width": 24},
}


def _size(values: dict[str, Any], limit_bits: int) -> tuple[float, Any]:
    clear_sizing_cache()
    saved = design_mod.EXHAUSTIVE_LIMIT_BITS
    design_mod.EXHAUSTIVE_LIMIT_BITS = limit_bits
    try:
        t0 = time.perf_counter()
        d = build_design(parse_config({"name": "core", **values}))
        return time.perf_counter() - t0, d
    finally:
        design_mod.EXHAUSTIVE_LIMIT_BITS = saved
        clear_sizing_cache()


def _size_text(design: Any) -> str:
    """iterations/guard bits, and /z's guard bits where the function sizes them apart."""
    dp = design.datapath
    text = f"{dp.iterations}/{dp.guard_bits}"
    return text if dp.angle_guard_bits is None else f"{text}/{dp.angle_guard_bits}"


def _every_input_worst(dp: Any) -> float:
    total = 1 << input_space_bits(dp)
    worst = 0.0
    for lo in range(0, total, 1 << 20):
        inputs = enumerate_inputs(dp, lo, min(total, lo + (1 << 20)))
        for e in function_errors(dp, inputs, evaluate(dp, inputs)).values():
            judged = np.abs(e[~np.isnan(e)])
            worst = max(worst, float(judged.max()) if judged.size else 0.0)
    return worst


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", nargs="*", choices=sorted(CORES), help="cores to measure (default: all)")
    args = parser.parse_args()
    names = args.only or list(CORES)
    print("| core | every input: time, size, worst | sampled: time, size, claimed / every-input worst | time ratio |")
    print("|---|---|---|---|")
    for name in names:
        values = CORES[name]
        t_all, d_all = _size(values, 24)
        t_smp, d_smp = _size(values, 20)
        assert d_all.proof.exhaustive and not d_smp.proof.exhaustive
        true_worst = _every_input_worst(d_smp.datapath)
        budget = d_all.spec.max_error_lsb
        flag = " (over budget)" if true_worst >= budget else ""
        print(
            f"| {name} {values.get('data_width')} bits, 2^{input_space_bits(d_all.datapath)} inputs "
            f"| {t_all:.1f} s, {_size_text(d_all)}, "
            f"{d_all.accuracy.max_error_lsb:.4f} LSB "
            f"| {t_smp:.1f} s, {_size_text(d_smp)}, "
            f"{d_smp.accuracy.max_error_lsb:.4f} / {true_worst:.4f} LSB{flag} "
            f"| {t_all / t_smp:.2f}x |",
            flush=True,
        )
    print("\nsize = iterations/guard bits(/z's guard bits: sincos, rotate); budget 1.0 LSB; target: every input in under 30 s")


if __name__ == "__main__":
    main()
