"""cocotb tests for agc_ln_power: the checks live in benchgen.bench (generated file)."""

from pathlib import Path

from benchgen.bench.core_tests import bind

MANIFEST = Path(__file__).resolve().parent.parent / "manifest.json"

test_corners, test_random_full_rate, test_gaps_and_stalls, test_reset_mid_stream = bind(MANIFEST)
