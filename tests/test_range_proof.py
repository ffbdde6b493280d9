"""The range proof that lets a sine/cosine core drop its output saturation and x/y headroom bit.

benchgen.functions.final_datapath narrows a core only after evaluating every angle code
(SinCos.proved_range). These tests hold the claim it rests on, independently of the proof's
own code: where it narrows, a model that wraps every register at the narrower width (the
Python-integer path, benchgen.model.iterate_wrapping) and has no saturation gives the same
bits as the wide, saturating core on every code; and where such a narrow core would give other
bits, the proof refuses.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

import numpy as np
import pytest

from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.functions import final_datapath, function_of, make_datapath
from benchgen.functions.sincos import FUNCTION as SINCOS

# Small sine/cosine cores of every rounding, at sizes from crude to fine, in both angle units.
CASES = [
    {"data_width": b, "angle_width": a, "iterations": n, "guard_bits": g, "rounding": r, "angle_unit": u}
    for b, a in ((6, 8), (8, 10))
    for n in (3, 5, 8, 12)
    for g in (0, 1, 3)
    for r in ("truncate", "half_up", "half_even")
    for u in ("turns", "radians")
    if n <= b + g  # a core's iterations fit its internal width
]


def _spec(case: dict[str, Any]) -> Any:
    return parse_config({"name": "c", "function": "sincos", "max_error_lsb": 1e6, **case})


def _outputs_every_code(dp: Any) -> dict[str, np.ndarray]:
    """The model on every angle code through the Python-integer path: every register wraps at
    its width, so a value too wide for the narrow core would show."""
    codes = np.array(list(range(1 << dp.angle_width)), dtype=object)
    out = SINCOS.model(dp, {"in_angle": codes})
    return {k: np.asarray(v, dtype=np.int64) for k, v in out.items()}


def _same_bits(wide: Any, narrow: Any) -> bool:
    """Whether the narrowed core gives the wide core's bits on every code."""
    a, b = _outputs_every_code(wide), _outputs_every_code(narrow)
    return all(np.array_equal(a[k], b[k]) for k in a)


def test_narrowed_cores_give_the_wide_cores_bits_and_refused_ones_would_not_always() -> None:
    counts = {"no saturation": 0, "most negative moved": 0, "refused": 0, "refused, narrow wrong": 0}
    for case in CASES:
        spec = _spec(case)
        dp = make_datapath(spec, case["iterations"], case["guard_bits"])
        final = final_datapath(spec, case["iterations"], case["guard_bits"])
        if not final.xy_narrowed:
            assert final == dp, case
            counts["refused"] += 1
            # the narrow core, saturating, would have given other bits on some code
            counts["refused, narrow wrong"] += not _same_bits(dp, replace(dp, xy_width=dp.xy_width - 1, xy_narrowed=True))
            continue
        assert final == replace(dp, xy_width=dp.xy_width - 1, xy_narrowed=True, saturates=final.saturates), case
        assert _same_bits(dp, final), case
        if final.saturates:
            counts["most negative moved"] += 1
            # where saturation is kept it is needed: without it some code would differ
            assert not _same_bits(dp, replace(final, saturates=False)), case
        else:
            counts["no saturation"] += 1
    # The set reaches every answer, and some refusals are forced (the narrow core would be
    # wrong), so no branch of the proof goes untested.
    assert min(counts.values()) >= 3, counts


def test_the_auto_sized_16_bit_core_is_narrowed_and_states_it() -> None:
    """The core docs/hardware.md measures: sized for 1 LSB, it needs neither saturation nor
    headroom, and its header and manifest say why."""
    design = build_design(parse_config({"name": "c", "function": "sincos", "angle_width": 16, "data_width": 16}))
    dp = design.datapath
    wide = make_datapath(design.spec, dp.iterations, dp.guard_bits)
    assert not dp.saturates and dp.xy_narrowed and dp.xy_width == wide.xy_width - 1 == 16 + dp.guard_bits
    notes = " ".join(function_of(dp).header_notes(dp))
    assert "no saturation" in notes and "65536 angle codes" in notes


def test_raw_gain_and_wide_angles_keep_their_saturation() -> None:
    """The proof runs only where it can evaluate every code on the int64 model."""
    raw = _spec({"data_width": 8, "angle_width": 8, "iterations": 8, "guard_bits": 2, "gain": "raw"})
    assert final_datapath(raw, 8, 2).saturates is not None  # decided by evaluation, either way
    wide = parse_config({"name": "c", "function": "sincos", "angle_width": 22, "data_width": 16, "iterations": 18,
                         "guard_bits": 5, "max_error_lsb": 1e6})
    assert final_datapath(wide, 18, 5) == make_datapath(wide, 18, 5)  # 2^22 codes: beyond the proof's reach


@pytest.mark.parametrize(
    ("extra", "saturates"),
    [
        ({"handshake": "ready_valid"}, False),
        ({"handshake": "valid_only"}, False),
        # truncation (floor) reaches the most negative code: narrowed, that code moved up
        ({"iterations": 10, "guard_bits": 2, "angle_guard_bits": 2, "rounding": "truncate", "max_error_lsb": 4.0},
         True),
    ],
)
def test_narrowed_description_equals_the_model_on_every_code(extra: dict[str, Any], saturates: bool) -> None:
    """The printed hardware of a narrowed core against the model, on every code."""
    from benchgen.hardware import build_core
    from benchgen.netlist import Wire, evaluate

    design = build_design(parse_config({"name": "c", "function": "sincos", "angle_width": 10, "data_width": 8, **extra}))
    assert design.datapath.xy_narrowed and design.datapath.saturates == saturates
    module = build_core(design)
    wires = [st.sig.name for st in module.body if isinstance(st, Wire)]
    assert "fin_out_cos" in wires and not any(w.endswith(("_over", "_under")) for w in wires), "full saturation left in"
    assert any(w.endswith("_min") for w in wires) == saturates
    codes = np.arange(1 << 10, dtype=np.int64)
    got = evaluate(module, {"in_angle": codes})
    want = SINCOS.model(design.datapath, {"in_angle": codes})
    for port in ("out_cos", "out_sin"):
        assert np.array_equal(np.asarray(got[port], dtype=np.int64), np.asarray(want[port], dtype=np.int64) & 0xFF)
