"""cocotb tests for dac_tone: the checks live in benchgen.bench (generated file)."""

from pathlib import Path

from benchgen.bench.free_running import bind

MANIFEST = Path(__file__).resolve().parent.parent / "manifest.json"

test_loads_full_rate, test_reset_mid_run, test_tone = bind(MANIFEST)
