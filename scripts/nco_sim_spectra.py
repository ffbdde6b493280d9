"""Print docs/nco.md's table of spectra measured in simulation: the generated NCO core on Icarus
and Verilator, 2**14 consecutive samples per word, against the truncation theory.

Run: PYTHONPATH=. python3 scripts/nco_sim_spectra.py [icarus] [verilator]
(about 45 s per simulator on a 2-core machine, plus Verilator's two builds; per-clock cocotb
bench, whose tone test records each spectrum; the numbers depend only on the code)
"""

from __future__ import annotations

import json
import math
import os
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

from benchgen.config import parse_config
from benchgen.design import build_design
from benchgen.nco_theory import (
    core_snr_db,
    dithered_phase_snr_db,
    expected_max_noise_bin_db,
    nicholas_samueli_worst_dbc,
    truncation_word,
)
from benchgen.project import generate_project
from benchgen.sim import run_sim

A, P, N = 32, 8, 14
RECORD = 1 << 14
BASE = {"name": "lo", "function": "nco", "angle_width": P, "data_width": N, "acc_width": A}


def _config(folder: Path, values: dict[str, Any]) -> Path:
    lines = [f'{k} = "{v}"' if isinstance(v, str) else f"{k} = {v}" for k, v in values.items()]
    path = folder / "lo.toml"
    path.write_text("\n".join(lines) + "\n")
    return path


def _tone(project: Path, simulator: str, word: int, cycles: int) -> tuple[dict[str, Any], float]:
    os.environ["BENCHGEN_TONE"] = json.dumps({"freq_word": word, "samples": RECORD, "cycles": cycles})
    start = time.monotonic()
    report = run_sim(project, simulator=simulator, samples=50, seed=3, mode="per-clock")
    if not report.passed:
        raise SystemExit(f"{simulator}: the run failed: {report.problems[:3]}")
    tone = next(t for t in report.per_test if t["test"] == "tone")["tone"]
    return tone, time.monotonic() - start


def main(simulators: list[str]) -> None:
    design = build_design(parse_config(BASE))
    amp = core_snr_db(design.datapath.amplitude, design.accuracy.rms_error_lsb)
    worst = truncation_word(A, P, RECORD, 2, 101)
    exact = truncation_word(A, P, RECORD, 1, 101)
    snr_dith = -10 * math.log10(10 ** (-dithered_phase_snr_db(2, P, A - P) / 10) + 10 ** (-amp / 10))
    floor = -(snr_dith + 10 * math.log10(RECORD))
    rows = [
        ("worst, M = 2", 0, worst, f"{-nicholas_samueli_worst_dbc(P):.2f}", f"{-nicholas_samueli_worst_dbc(P):.2f}"),
        ("exact, M = 1", 0, exact, "-", f"{amp:.2f}"),
        ("worst, M = 2", A - P, worst, f"{-floor - expected_max_noise_bin_db(RECORD - 2):.2f} (noise peak)", f"{snr_dith:.2f}"),
    ]
    print(f"A = {A}, P = {P}, N = {N}, {RECORD} samples; core RMS {design.accuracy.rms_error_lsb:.4f} LSB")
    print("| simulator | word | D | predicted SFDR | measured SFDR | predicted SNR | measured SNR | run (s) |")
    print("|---|---|---|---|---|---|---|---|")
    with tempfile.TemporaryDirectory() as tmp:
        projects = {}
        for d in (0, A - P):
            folder = Path(tmp) / f"d{d}"
            folder.mkdir()
            values = {**BASE, "dither_width": d} if d else BASE
            generate_project(_config(folder, values), folder / "proj")
            projects[d] = folder / "proj"
        for sim in simulators:
            for label, d, w, sfdr, snr in rows:
                m, seconds = _tone(projects[d], sim, w.freq_word, w.cycles)
                print(f"| {sim} | {label} | {d} | {sfdr} | {m['sfdr_dbc']:.2f} | {snr} | {m['snr_db']:.2f} | {seconds:.0f} |")


if __name__ == "__main__":
    main(sys.argv[1:] or ["icarus", "verilator"])
