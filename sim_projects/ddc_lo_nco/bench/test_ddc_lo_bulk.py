"""Bulk cocotb tests for ddc_lo: the checks live in benchgen.bench.bulk (generated file)."""

from pathlib import Path

from benchgen.bench.bulk import bind

MANIFEST = Path(__file__).resolve().parent.parent / "manifest.json"

test_bulk_full_rate, test_bulk_gaps_and_stalls, test_bulk_exhaustive = bind(MANIFEST)
