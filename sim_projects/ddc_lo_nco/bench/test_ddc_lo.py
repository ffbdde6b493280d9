"""cocotb tests for ddc_lo: the checks live in benchgen.bench (generated file)."""

from pathlib import Path

from benchgen.bench.core_tests import bind, bind_tone

MANIFEST = Path(__file__).resolve().parent.parent / "manifest.json"

test_corners, test_random_full_rate, test_gaps_and_stalls, test_reset_mid_stream = bind(MANIFEST)
test_tone = bind_tone(MANIFEST)
