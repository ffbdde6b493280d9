"""An NCO sized from its spectral target in the config (``sfdr_dbc``, ``snr_db``): the widths it
picks, the ones it keeps, what it refuses, what the manifest, the RTL header and ``benchgen
generate`` state, and the generated core in simulation.

The phase-bit rule rests on Nicholas and Samueli 1987 (worst truncation spur -(6.02 P - 3.92)
dBc), the output width on the guaranteed bound derived in benchgen/nco_sizing.py, the
measurement on IEEE Std 1241 (coherent sampling, SFDR and SNR as defined there), all through
benchgen.nco_sizing's own measurement (spectrum_checks)."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import pytest

from benchgen.api import open_project
from benchgen.cli import main
from benchgen.config import parse_config, spec_to_dict
from benchgen.design import build_design
from benchgen.errors import ConfigError
from benchgen.nco import Nco, run
from benchgen.nco_sizing import size_nco, spectrum_checks
from benchgen.nco_theory import nicholas_samueli_worst_dbc, truncation_word
from benchgen.sim import run_sim
from benchgen.spectrum import measure_tone
from tests.conftest import require_simulator, write_config

# 60 dBc: P = 11, N = 14 (docs/nco.md's sizing table); small enough that every check is quick.
TARGET = 60.0
LO = {"name": "lo_core", "function": "nco", "sfdr_dbc": TARGET}


def _worst(checks: Any) -> Any:
    return next(c for c in checks if c.period == 2)


def test_a_config_with_sfdr_dbc_meets_it_and_one_phase_bit_fewer_misses_it() -> None:
    """The widths come from nco_sizing.size_nco's rule; the model of the generated core meets the
    target at every word the sizer measures, the worst truncation word (M = 2) among them, and
    the same core with one phase bit fewer misses it at its worst word."""
    design = build_design(parse_config(LO))
    dp = design.datapath
    sized = size_nco(sfdr_dbc=TARGET)
    assert (dp.angle_width, dp.data_width) == (sized.nco.angle_width, sized.design.datapath.data_width) == (11, 14)
    assert (dp.iterations, dp.guard_bits) == (sized.design.datapath.iterations, sized.design.datapath.guard_bits)
    assert design.spec.target_picks == ("angle_width", "data_width")

    checks = spectrum_checks(dp.phase(), dp.core())
    assert all(c.sfdr_db >= TARGET for c in checks), [(c.label, c.sfdr_db) for c in checks]
    worst = _worst(checks)
    assert worst.sfdr_db == pytest.approx(-nicholas_samueli_worst_dbc(11), abs=0.2)  # 62.30 dBc

    fewer = build_design(parse_config({k: v for k, v in spec_to_dict(design.spec).items() if k != "sfdr_dbc"}
                                      | {"angle_width": dp.angle_width - 1}))
    worse = _worst(spectrum_checks(Nco(acc_width=dp.acc_width, angle_width=dp.angle_width - 1), fewer.datapath.core()))
    assert worse.sfdr_db < TARGET - 3  # 56.28 dBc


def test_snr_db_alone_and_both_targets_pick_the_sizers_widths() -> None:
    for target in ({"snr_db": 50.0}, {"sfdr_dbc": 66.0, "snr_db": 60.0}):
        dp = build_design(parse_config({"name": "lo_core", "function": "nco", **target})).datapath
        sized = size_nco(**target)
        assert (dp.angle_width, dp.data_width) == (sized.nco.angle_width, sized.design.datapath.data_width)
        bounds = dp.target_bounds()
        assert bounds is not None and bounds[2] >= target["snr_db"]


def test_a_width_given_beside_the_target_is_kept() -> None:
    """angle_width = 12 (one more than the target needs) is kept; data_width is still picked,
    the fewest for which the bound holds at 12 phase bits (12: the smaller truncation spur
    leaves more room for the amplitude error than at 11 bits, which need 14)."""
    design = build_design(parse_config({**LO, "angle_width": 12}))
    assert design.datapath.angle_width == 12 and design.spec.target_picks == ("data_width",)
    bounds = design.datapath.target_bounds()
    assert bounds is not None and bounds[1] >= TARGET
    n = design.datapath.data_width
    assert n == 12
    with pytest.raises(ConfigError) as err:
        build_design(parse_config({**LO, "angle_width": 12, "data_width": n - 1}))
    assert err.value.field == "data_width" and err.value.suggestion == {"data_width": n}


@pytest.mark.parametrize(
    ("values", "field"),
    [
        ({"sfdr_dbc": -3}, "sfdr_dbc"),
        ({"sfdr_dbc": "72"}, "sfdr_dbc"),
        ({"sfdr_dbc": True}, "sfdr_dbc"),
        ({"snr_db": float("nan")}, "snr_db"),
        ({"snr_db": float("inf")}, "snr_db"),
        ({"sfdr_dbc": 200.0}, "sfdr_dbc"),  # beyond what the sizer can prove (P <= 19)
        ({"angle_width": 10}, "angle_width"),  # fewer phase bits than 60 dBc needs (11)
        ({"angle_width": 24}, "angle_width"),  # more codes than the bound is measured over
        ({"angle_width": 11, "data_width": 12}, "data_width"),  # the bound needs 14
        ({"dither_width": 4}, "dither_width"),  # the bound is the undithered NCO's
        ({"acc_width": 8}, "acc_width"),  # below the 11 phase bits the target picks
    ],
)
def test_bad_target_values_are_refused_in_one_line_with_a_fix_that_is_accepted(values: dict[str, Any], field: str) -> None:
    config = {**LO, **values}
    with pytest.raises(ConfigError) as err:
        build_design(parse_config(config))
    assert err.value.field == field
    assert "\n" not in str(err.value) and field in err.value.fix
    fixed = {k: v for k, v in {**config, **(err.value.suggestion or {})}.items() if v is not None}
    build_design(parse_config(fixed))


def test_targets_are_refused_for_other_functions() -> None:
    for field in ("sfdr_dbc", "snr_db"):
        with pytest.raises(ConfigError) as err:
            parse_config({"name": "c", "function": "sincos", field: 60.0})
        assert err.value.field == field and "nco" in str(err.value)


def test_generate_states_the_target_and_the_sizes(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """The generate summary, the manifest and the RTL header state the target, the sizes and
    the guaranteed bound; the manifest's config rebuilds the same core (the project opens)."""
    config = write_config(tmp_path / "lo.toml", LO)
    assert main(["generate", str(config), "-o", str(tmp_path / "p")]) == 0
    printed = capsys.readouterr().out
    assert "spectral target sfdr_dbc = 60: angle_width = 11 (picked), data_width = 14 (picked)" in printed
    manifest = json.loads((tmp_path / "p" / "manifest.json").read_text())
    assert manifest["config"]["sfdr_dbc"] == TARGET
    assert (manifest["config"]["angle_width"], manifest["config"]["data_width"]) == (11, 14)
    target = manifest["error_budget"]["nco"]["target"]
    assert target["sfdr_dbc"] == TARGET and target["snr_db"] is None
    assert TARGET <= target["sfdr_bound_dbc"] <= -nicholas_samueli_worst_dbc(11)
    rtl = (tmp_path / "p" / "rtl" / "lo_core.v").read_text()
    assert "target         sfdr_dbc = 60: 11 phase bits and 14 output bits" in rtl
    assert f"guarantee SFDR >= {target['sfdr_bound_dbc']:.2f} dBc" in rtl
    assert open_project(tmp_path / "p").core.design.datapath.angle_width == 11
    # Without a target the manifest has no target entry (projects without one keep their bytes).
    plain = {k: v for k, v in manifest["config"].items() if k not in ("sfdr_dbc",)}
    assert "target" not in json.loads(json.dumps(_nco_extras(plain)))


def _nco_extras(config: dict[str, Any]) -> dict[str, Any]:
    from benchgen.project import manifest_for

    return manifest_for(build_design(parse_config(config)))["error_budget"]["nco"]


@pytest.mark.sim
def test_a_core_sized_from_sfdr_dbc_meets_it_in_simulation(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The generated core on Verilator at its worst truncation word (M = 2, coherent, 2**12
    samples): every sample matches the model bit for bit, and the SFDR the bench measures meets
    the target and equals the model's."""
    require_simulator("verilator")
    project = tmp_path / "p"
    assert main(["generate", str(write_config(tmp_path / "lo.toml", LO)), "-o", str(project)]) == 0
    dp = open_project(project).core.design.datapath
    record = 1 << 12
    word = truncation_word(dp.acc_width, dp.angle_width, record, 2, 293)
    monkeypatch.setenv("BENCHGEN_TONE", json.dumps({"freq_word": word.freq_word, "samples": record, "cycles": word.cycles}))
    report = run_sim(project, simulator="verilator", samples=50, seed=5, mode="per-clock")
    assert report.passed and report.mismatches == 0, report.problems
    tone = next(t for t in report.per_test if t["test"] == "tone")["tone"]
    assert tone["truncation_period"] == 2
    assert tone["sfdr_dbc"] >= TARGET
    model = run(dp.phase(), dp.core(), record, freq_word=word.freq_word)
    assert measure_tone(model.complex(), word.cycles).sfdr_db == pytest.approx(tone["sfdr_dbc"], abs=1e-3)
