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


def _narrow_core_is_exact(dp: Any) -> bool:
    """Whether the core without saturation and one bit narrower gives the wide core's bits."""
    narrow = replace(dp, xy_width=dp.xy_width - 1, saturates=False)
    wide, thin = _outputs_every_code(dp), _outputs_every_code(narrow)
    return all(np.array_equal(wide[k], thin[k]) for k in wide)


def test_narrowed_cores_give_the_wide_cores_bits_and_refused_ones_would_not_always() -> None:
    narrowed = refused = refused_wrong = 0
    for case in CASES:
        spec = _spec(case)
        dp = make_datapath(spec, case["iterations"], case["guard_bits"])
        final = final_datapath(spec, case["iterations"], case["guard_bits"])
        if final.saturates:
            assert final == dp
            refused += 1
            refused_wrong += not _narrow_core_is_exact(dp)
            continue
        narrowed += 1
        assert final == replace(dp, xy_width=dp.xy_width - 1, saturates=False), case
        assert _narrow_core_is_exact(dp), case
    # The set reaches both answers, and some refusals are forced (the narrow core would be
    # wrong), so neither branch of the proof goes untested.
    assert narrowed >= 10 and refused >= 10 and refused_wrong >= 5, (narrowed, refused, refused_wrong)


def test_the_auto_sized_16_bit_core_is_narrowed_and_states_it() -> None:
    """The core docs/hardware.md measures: sized for 1 LSB, it needs neither saturation nor
    headroom, and its header and manifest say why."""
    design = build_design(parse_config({"name": "c", "function": "sincos", "angle_width": 16, "data_width": 16}))
    dp = design.datapath
    wide = make_datapath(design.spec, dp.iterations, dp.guard_bits)
    assert not dp.saturates and dp.xy_width == wide.xy_width - 1 == 16 + dp.guard_bits
    notes = " ".join(function_of(dp).header_notes(dp))
    assert "no saturation" in notes and "65536 angle codes" in notes


def test_raw_gain_and_wide_angles_keep_their_saturation() -> None:
    """The proof runs only where it can evaluate every code on the int64 model."""
    raw = _spec({"data_width": 8, "angle_width": 8, "iterations": 8, "guard_bits": 2, "gain": "raw"})
    assert final_datapath(raw, 8, 2).saturates is not None  # decided by evaluation, either way
    wide = parse_config({"name": "c", "function": "sincos", "angle_width": 22, "data_width": 16, "iterations": 18,
                         "guard_bits": 5, "max_error_lsb": 1e6})
    assert final_datapath(wide, 18, 5).saturates  # 2^22 codes: beyond the proof's reach


@pytest.mark.parametrize("handshake", ["ready_valid", "valid_only"])
def test_narrowed_description_equals_the_model_on_every_code(handshake: str) -> None:
    """The printed hardware of a narrowed core (no saturation cells) against the model."""
    from benchgen.hardware import build_core
    from benchgen.netlist import Wire, evaluate

    design = build_design(parse_config({"name": "c", "function": "sincos", "angle_width": 10, "data_width": 8,
                                        "handshake": handshake}))
    assert not design.datapath.saturates
    module = build_core(design)
    wires = [st.sig.name for st in module.body if isinstance(st, Wire)]
    assert "fin_out_cos" in wires and not any(w.endswith(("_over", "_under")) for w in wires), "saturation left in"
    codes = np.arange(1 << 10, dtype=np.int64)
    got = evaluate(module, {"in_angle": codes})
    want = SINCOS.model(design.datapath, {"in_angle": codes})
    for port in ("out_cos", "out_sin"):
        assert np.array_equal(np.asarray(got[port], dtype=np.int64), np.asarray(want[port], dtype=np.int64) & 0xFF)
