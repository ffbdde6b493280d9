"""Print the measured error tables of docs/error_analysis.md (bit-true model against the ideal).

Run: python scripts/error_tables.py   (a few minutes on a 2-core machine: it sizes some 40 cores; numbers depend only on the code)
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Any

import numpy as np
import numpy.typing as npt

from benchgen.algorithm import Datapath
from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.errors import ConfigError
from benchgen.functions import evaluate, function_errors, make_datapath, measure, sizing_inputs

GAIN_FUNCTIONS = ("rotate", "atan2", "sinhcosh", "exp", "sqrt")
ANGLE_FUNCTIONS = ("sincos", "rotate", "atan2")
HYPERBOLIC = ("sinhcosh", "exp", "atanh", "ln", "sqrt")


def _outputs(dp: Datapath, inputs: dict[str, npt.NDArray[Any]]) -> dict[str, npt.NDArray[Any]]:
    """The bit-true model's outputs."""
    return evaluate(dp, inputs)


def _spec_values(fn: str, width: int, gain: str) -> dict[str, object]:
    values: dict[str, object] = {"name": "c", "function": fn, "data_width": width}
    if fn in ANGLE_FUNCTIONS:
        values.update({"angle_width": width, "gain": gain})
    elif fn in GAIN_FUNCTIONS:
        values["gain"] = gain
    return values


def sized_table() -> None:
    print(
        "| function | width (data/angle) | gain | iterations | guard bits (x, y / z) | worst / RMS error (LSB) | measured on |"
    )
    print("|---|---|---|---|---|---|---|")
    for fn in ("sincos", "rotate", "atan2", "mul", "div", *HYPERBOLIC):
        for width in (12, 16):
            for gain in ("compensated", "raw") if fn in GAIN_FUNCTIONS else ("compensated",):
                d = build_design(parse_config(_spec_values(fn, width, gain)))
                a = d.accuracy
                on = _proof(d.proof)
                angle = width if fn in ANGLE_FUNCTIONS else "-"
                shown_gain = gain if fn in ANGLE_FUNCTIONS or fn in GAIN_FUNCTIONS else "-"
                print(
                    f"| {fn} | {width}/{angle} | {shown_gain} | {d.datapath.iterations} | {_guards(d.datapath)} | "
                    f"{a.max_error_lsb:.3f} / {a.rms_error_lsb:.3f} | {on} |"
                )


def _guards(dp: Datapath) -> str:
    """x and y's guard bits, and z's where the function sizes them apart."""
    return f"{dp.guard_bits}" if dp.angle_guard_bits is None else f"{dp.guard_bits} / {dp.angle_guard_bits}"


def _proof(proof: Any) -> str:
    if proof.exhaustive:
        return f"all {proof.inputs}"
    return f"{proof.random} random + {proof.directed} corners and directed"


def _widest(spec: Any, n: int) -> int:
    """n, or the most iterations a core without guard bits holds if that is fewer (a shift past
    the internal width only copies the sign, so make_datapath refuses it)."""
    while n > 1:
        try:
            make_datapath(spec, n, 0)
            return n
        except ConfigError:
            n -= 1
    return n


def sources_table() -> None:
    """Where the error of a 16-bit sincos comes from: vary one source at a time."""
    spec = parse_config({"name": "c", "function": "sincos", "data_width": 16, "angle_width": 16})
    sized = build_design(spec).datapath
    inputs, _ = sizing_inputs(sized)
    ns = _widest(spec, sized.iterations)
    print("| iterations | guard bits | shifted terms | worst / RMS error (LSB) | what dominates |")
    print("|---|---|---|---|---|")
    sized_size = (sized.iterations, sized.guard_bits)
    for n, g, rounded, note in (
        (12, 16, True, "angle residue after 12 iterations (guard bits make rounding negligible)"),
        (16, 16, True, "angle residue after 16 iterations"),
        (20, 16, True, "final rounding only (residue and internal rounding negligible)"),
        (ns, 0, True, f"rounding of the {ns} intermediate x, y with no guard bits"),
        (ns, 0, False, "the same, floored: each term's error is biased by -1/2 LSB of x, y"),
        (ns, 3, True, "intermediate rounding with 3 guard bits"),
        (ns, 3, False, "the same, floored"),
        (*sized_size, False, "the auto-sized core's size with floored terms: one guard bit short"),
        (sized.iterations, sized.guard_bits + 1, False, "floored terms need one guard bit more"),
        (*sized_size, True, "the auto-sized core (fewest adder bits): all sources below 1 LSB together"),
    ):
        # z follows the guard bits, but the sized core's rows are at the sized core's z guard bits
        zg = sized.angle_guard_bits if (n, g) == sized_size else None
        s = measure(replace(make_datapath(spec, n, g, zg), rounded_shifts=rounded), inputs)
        what = "rounded" if rounded else "floored"
        print(f"| {n} | {g} | {what} | {s.max_error_lsb:.3f} / {s.rms_error_lsb:.3f} | {note} |")


def small_vector_table() -> None:
    """atan2 angle error against vector length (16-bit, sized cores), with and without the
    prenormalisation."""
    cores = {}
    for pre in (True, False):
        cores[pre] = build_design(
            parse_config(
                {"name": "c", "function": "atan2", "data_width": 16, "angle_width": 16, "prenormalise": pre}
            )
        ).datapath
    print("| vector length (LSB) | prenormalised (default): worst / RMS | prenormalise = false: worst / RMS |")
    print("|---|---|---|")
    for r in (1, 2, 8, 32, 128, 512, 2048, 8192, 32000):
        cells = []
        for pre in (True, False):
            rng = np.random.default_rng(1)
            t = rng.uniform(-math.pi, math.pi, 20000)
            x = np.round(r * np.cos(t)).astype(np.int64)
            y = np.round(r * np.sin(t)).astype(np.int64)
            keep = (x != 0) | (y != 0)
            inputs = {"in_x": x[keep], "in_y": y[keep]}
            out = _outputs(cores[pre], inputs)
            ideal = np.arctan2(inputs["in_y"], inputs["in_x"]) / (2 * np.pi) * 2**16
            e = (out["out_angle"] - ideal + 2**15) % 2**16 - 2**15
            cells.append(f"{np.max(np.abs(e)):.2f} / {np.sqrt(np.mean(e * e)):.2f}")
        print(f"| {r} | " + " | ".join(cells) + " |")
    print(
        f"\n(angle LSBs; numpy's arctan2 is the ideal. Prenormalised: the budget holds for every "
        f"vector but (0, 0); without: from length {1 << (cores[False].data_width - 5)})"
    )


def div_octave_table() -> None:
    """div error per octave of |den|: every pair of each octave band, or 10^5 random ones."""
    octaves = ((1, 4), (4, 8), (8, 16), (16, 32), (32, 64), (64, 128), (128, 256), (256, 512), (512, None))
    head = ["< 4" if lo == 1 else f"{lo}-{hi - 1}" if hi else f">= {lo}" for lo, hi in octaves]
    print("| core | iterations / guard bits | " + " | ".join(head) + " |")
    print("|---|---|" + "---|" * len(head))
    rng = np.random.default_rng(3)
    for width in (12, 16, 18):
        d = build_design(parse_config({"name": "c", "function": "div", "data_width": width}))
        dp = d.datapath
        top = (1 << (width - 1)) - 1
        cells = []
        for lo, hi in octaves:
            hi = hi if hi is not None else top + 1
            mag = rng.integers(lo, hi, size=100_000)
            den = np.where(rng.integers(0, 2, size=mag.size) == 1, -mag, mag)
            span = np.minimum(2 * mag - 1, top)
            num = (rng.random(mag.size) * (2 * span + 1)).astype(np.int64) - span
            inputs = {"in_num": num, "in_den": den}
            e = function_errors(dp, inputs, _outputs(dp, inputs))["out_quotient"]
            cells.append(f"{np.nanmax(np.abs(e)):.3f}")
        print(f"| {width}-bit default | {dp.iterations} / {dp.guard_bits} | " + " | ".join(cells) + " |")
    print("\n(worst error in output LSBs over 10^5 random in-domain pairs per band; the sized cores are")
    print("proven over every pair at 12 bits, over 10^6 random pairs plus the directed set beyond)")


def _worst_rms(e: np.ndarray) -> str:
    e = np.abs(e[~np.isnan(e)])
    if e.size == 0:
        return "-"
    return f"{np.max(e):.3f} / {np.sqrt(np.mean(e * e)):.3f}"


def hyperbolic_sources_table() -> None:
    """Where the error of 16-bit exp and ln comes from: vary one source at a time."""
    print("| function | iterations | guard bits | worst / RMS error (LSB) | what dominates |")
    print("|---|---|---|---|---|")
    specs = {fn: parse_config({"name": "c", "function": fn, "data_width": 16}) for fn in ("exp", "ln")}
    sized = {fn: build_design(spec).datapath for fn, spec in specs.items()}
    ne, nl = (_widest(specs[fn], sized[fn].iterations) for fn in ("exp", "ln"))
    rows = {
        "exp": (
            (12, 16, "angle residue after 12 iterations (last shift 11)"),
            (16, 16, "angle residue after 16 iterations (last shift 14)"),
            (
                24,
                16,
                "final rounding only (a mantissa that rounds to 2.0 is 1.0 at the next exponent)",
            ),
            (ne, 0, f"rounding of the {ne} intermediate x, y and of r with no guard bits"),
            (ne, 3, "intermediate rounding with 3 guard bits"),
        ),
        "ln": (
            (10, 16, "angle residue after 10 iterations, doubled by ln m = 2 z"),
            (14, 16, "angle residue after 14 iterations, doubled"),
            (24, 16, "final rounding only"),
            (
                nl,
                0,
                f"rounding of the {nl} intermediate x, y, z and of the e ln 2 table with no guard bits",
            ),
            (nl, 3, "intermediate rounding with 3 guard bits"),
        ),
    }
    for fn, cases in rows.items():
        spec = specs[fn]
        inputs, _ = sizing_inputs(sized[fn])
        mine = (sized[fn].iterations, sized[fn].guard_bits)
        for n, g, note in (*(c for c in cases if c[:2] != mine), (*mine, "the auto-sized core")):
            s = measure(make_datapath(spec, n, g), inputs)  # exp, ln: z follows the guard bits
            print(f"| {fn} | {n} | {g} | {s.max_error_lsb:.3f} / {s.rms_error_lsb:.3f} | {note} |")


ATANH_BANDS = ((0.0, 0.5), (0.5, 0.75), (0.75, 0.8), (0.8, None))


def atanh_edge_table() -> None:
    """atanh error in bands of |u| up to the domain limit: sized cores and a few others."""
    head = ["[0, 0.5)", "[0.5, 0.75)", "[0.75, 0.8)", "[0.8, limit]"]
    print("| data width | iterations | guard bits | " + " | ".join(head) + " | measured on |")
    print("|---|---|---|" + "---|" * len(head) + "---|")
    for width in (16, 24):
        spec = parse_config({"name": "c", "function": "atanh", "data_width": width})
        d = build_design(spec)
        sized = d.datapath
        inputs, exhaustive = sizing_inputs(sized)
        u = np.abs(inputs["in_u"].astype(np.float64)) / 2.0**sized.in_frac
        on = f"all {u.size}" if exhaustive else f"{u.size} random + corners and directed"
        others = ((17, 3), (18, 6), (20, 8)) if width == 16 else ((25, 8), (26, 6), (27, 6))
        mine = (sized.iterations, sized.guard_bits)
        for n, g in (mine, *(o for o in others if o != mine)):
            dp = make_datapath(spec, n, g)
            e = function_errors(dp, inputs, _outputs(dp, inputs))["out_atanh"]
            cells = []
            for lo, hi in ATANH_BANDS:
                band = (u >= lo) & ((u < hi) if hi is not None else np.ones_like(u, dtype=bool))
                cells.append(_worst_rms(e[band]))
            mark = " (sized)" if (n, g) == (sized.iterations, sized.guard_bits) else ""
            print(f"| {width} | {n}{mark} | {g} | " + " | ".join(cells) + f" | {on} |")
    lim = make_datapath(parse_config({"name": "c", "function": "atanh", "data_width": 16}), 17, 6)
    limit = lim.domain_limit / 2.0**lim.in_frac
    slopes = [1 / (1 - v * v) / 2 for v in (0.5, 0.75, 0.8, limit)]
    print(
        "| slope at the band's top: output LSBs per input LSB | | | "
        + " | ".join(f"{s:.2f}" for s in slopes)
        + " | d atanh u / du = 1/(1-u^2); the output LSB is two input LSBs |"
    )
    print(
        f"\n(16-bit limit: |u| <= {lim.domain_limit} / 2^{lim.in_frac} = {limit:.6f}; beyond it out_domain_error = 1)"
    )


def octave_table() -> None:
    """ln and sqrt error per normalising octave w in [2^-(e+1), 2^-e), 16-bit sized cores."""
    width = 16
    dps = {
        fn: build_design(parse_config({"name": "c", "function": fn, "data_width": width})).datapath
        for fn in ("ln", "sqrt")
    }
    inputs = {"in_w": np.arange(1, 1 << width, dtype=np.int64)}
    errs = {}
    for fn, dp in dps.items():
        errs[fn] = function_errors(dp, inputs, _outputs(dp, inputs))[f"out_{fn}"]
    for fn, dp in dps.items():
        print(f"{fn}: {dp.iterations} iterations, {dp.guard_bits} guard bits")
    print()
    w = inputs["in_w"]
    e_of = width - 1 - np.floor(np.log2(w)).astype(np.int64)
    lnf = dps["ln"].out_frac
    print(
        "| e | w in | codes | ln worst / RMS (LSB) | ln slope at the octave's bottom (output LSBs per input LSB) | sqrt worst / RMS (LSB) | sqrt slope at the octave's bottom |"
    )
    print("|---|---|---|---|---|---|---|")
    for e in range(width):
        sel = e_of == e
        w_lo = 2.0 ** -(e + 1)
        ln_slope = 2.0**lnf * 2.0**-width / w_lo
        sqrt_slope = 1 / (2 * math.sqrt(w_lo))
        print(
            f"| {e} | [2^-{e + 1}, 2^-{e}) | {int(np.sum(sel))} | {_worst_rms(errs['ln'][sel])} | {ln_slope:.4g} | "
            f"{_worst_rms(errs['sqrt'][sel])} | {sqrt_slope:.4g} |"
        )
    print("\n(w = 0: ln flagged with out_domain_error = 1; sqrt gives 0 exactly)")


def exp_table() -> None:
    """exp: formats, exponent, mantissa error and the relative error of mantissa 2^exponent.

    The exponent is floor(t / ln 2), or one above where the mantissa rounded up to 2.0 and
    became 1.0; the mantissa is judged at the core's own exponent (function_errors).
    """
    print(
        "| data width | gain | L | t range | exponent range (port bits) | mantissa range | "
        "inputs where exponent = floor(t / ln 2) + 1 (mantissa there; worst error there, LSB at that exponent) | "
        "inputs with any other exponent | "
        "inputs whose ideal mantissa at floor(t / ln 2) rounds to 2 (of them, exponent + 1) | "
        "mantissa worst / RMS (LSB) | "
        "worst relative error of mantissa 2^exponent | measured on |"
    )
    print("|---|---|---|---|---|---|---|---|---|---|---|---|")
    budgets = set()
    for width in (12, 16):
        for gain in ("compensated", "raw"):
            spec = parse_config({"name": "c", "function": "exp", "data_width": width, "gain": gain})
            dp = build_design(spec).datapath
            budgets.add(spec.max_error_lsb)
            inputs, _ = sizing_inputs(dp)
            out = _outputs(dp, inputs)
            t = inputs["in_t"].astype(np.float64) / 2.0**dp.in_frac
            q = out["out_exponent"].astype(np.int64)
            code = out["out_mantissa"].astype(np.int64)
            m = code.astype(np.float64) / 2.0**dp.out_frac
            floor_q = np.floor(t / math.log(2.0)).astype(np.int64)
            e = function_errors(dp, inputs, out)["out_mantissa"]
            scale = float(dp.gain) if gain == "raw" else 1.0  # a raw mantissa is A_n e^r
            ideal_m = np.exp(t - floor_q * math.log(2.0)) * 2.0**dp.out_frac / scale
            top = ideal_m >= dp.out_max + 0.5
            up = q == floor_q + 1
            if np.any(up):
                ones = np.unique(m[up])
                shown = ", ".join(f"{v:.6f}" for v in ones)
                up_cell = f"{int(np.sum(up))} ({shown}; {np.max(np.abs(e[up])):.3f})"
            else:
                up_cell = "0"
            other = int(np.sum((q != floor_q) & ~(up & (code == 1 << (width - 1)))))
            top_cell = f"{int(np.sum(top))} ({int(np.sum(top & up))})" if np.any(top) else "0"
            rel = np.abs(m * scale * np.exp2(q.astype(np.float64)) / np.exp(t) - 1)
            lo_t, hi_t = -(2.0**dp.int_bits), 2.0**dp.int_bits - 2.0**-dp.in_frac
            print(
                f"| {width} | {gain} | {dp.int_bits} | [{lo_t:g}, {hi_t:.6g}] | [{q.min()}, {q.max()}] ({dp.exp_width}) | "
                f"[{m.min():.6f}, {m.max():.6f}] | {up_cell} | {other} | {top_cell} | {_worst_rms(e)} | "
                f"{np.max(rel):.3g} (2^{math.log2(np.max(rel)):.2f}) | all {t.size} |"
            )
    print(
        "\n(raw: the mantissa is A_n e^r, and mantissa 2^exponent is multiplied by 1/A_n before comparing;"
        f" errors in LSBs are at the core's own exponent; max_error_lsb = {', '.join(f'{v:g}' for v in sorted(budgets))})"
    )


def round_trip_table() -> None:
    """exp(ln w) through the two 16-bit sized cores: out_ln fed to in_t unchanged."""
    width = 16
    dl = build_design(parse_config({"name": "c", "function": "ln", "data_width": width})).datapath
    de = build_design(parse_config({"name": "c", "function": "exp", "data_width": width})).datapath
    w = np.arange(1, 1 << width, dtype=np.int64)
    ln_out = _outputs(dl, {"in_w": w})["out_ln"]
    back = _outputs(de, {"in_t": ln_out})
    value = (
        back["out_mantissa"].astype(np.float64)
        / 2.0**de.out_frac
        * np.exp2(back["out_exponent"].astype(np.float64))
    )
    wv = w.astype(np.float64) / 2.0**width
    rel = np.abs(value / wv - 1)
    lsb = np.abs(value - wv) * 2.0**width
    print("| w in | worst relative error of exp(ln w) | worst absolute error (input LSBs) |")
    print("|---|---|---|")
    for lo, hi in ((1, 16), (16, 256), (256, 4096), (4096, 1 << width)):
        sel = (w >= lo) & (w < hi)
        print(f"| [{lo}, {hi}) / 2^{width} | {np.max(rel[sel]):.3g} | {np.max(lsb[sel]):.3g} |")
    print(
        f"\n(the ln output LSB is 2^-{dl.out_frac} = {2.0**-dl.out_frac:.3g}: a relative step of e^t)"
    )


def isqrt_check() -> None:
    """sqrt read as an integer square root: 16-bit sized core, every W."""
    width = 16
    dp = build_design(parse_config({"name": "c", "function": "sqrt", "data_width": width})).datapath
    w = np.arange(1 << width, dtype=np.int64)
    out = _outputs(dp, {"in_w": w})["out_sqrt"]
    half = width // 2
    exact = np.array([math.isqrt(int(v)) for v in w])
    floor_off = int(np.sum((out >> half) != exact))
    nearest = np.round(np.sqrt(w.astype(np.float64)))
    round_off = int(np.sum(np.round(out / 2.0**half) != nearest))
    first = w[(out >> half) != exact][:3].tolist()
    print(f"out_sqrt = sqrt(W) with {half} fraction bits; of {w.size} codes W:")
    print(
        f"- floor(out_sqrt / 2^{half}) != isqrt(W) for {floor_off} (W just below a square, e.g. {first})"
    )
    print(f"- round(out_sqrt / 2^{half}) != round(sqrt(W)) for {round_off}")


def main() -> None:
    print("## Sized cores (max_error_lsb = 1.0, half_even)\n")
    sized_table()
    print("\n## Error sources, 16-bit sincos\n")
    sources_table()
    print("\n## atan2 angle error against vector length, 16-bit core\n")
    small_vector_table()
    print("\n## div error against the size of the denominator\n")
    div_octave_table()
    print("\n## Error sources, 16-bit exp and ln\n")
    hyperbolic_sources_table()
    print("\n## atanh error near the domain edge (worst / RMS, LSB)\n")
    atanh_edge_table()
    print("\n## ln and sqrt error per normalising octave, 16-bit sized cores\n")
    octave_table()
    print("\n## exp: exponent and mantissa\n")
    exp_table()
    print("\n## exp(ln w) round trip, 16-bit sized cores\n")
    round_trip_table()
    print("\n## sqrt as an integer square root, 16-bit sized core\n")
    isqrt_check()


if __name__ == "__main__":
    main()
