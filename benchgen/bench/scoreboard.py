"""Checks of a capture against the bit-true model and the ideal, and the per-test record.

Every output sample is compared bit for bit with the model; the error against the ideal is
checked against the budget in the manifest. A failure names the first mismatching samples with
their input, the expected and the observed values, and the seed that reproduces the run.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

__all__ = ["CheckResult", "compare", "record", "write_csv_rows"]

SAMPLES_ENV = "BENCHGEN_SAMPLES"
"""How many random samples a bench runs (set by ``benchgen sim``)."""
RESULTS_ENV = "BENCHGEN_RESULTS"
CSV_ENV = "BENCHGEN_CSV"
FIRST_MISMATCHES = 8


@dataclass
class CheckResult:
    """Outcome of one test's comparisons.

    Attributes:
        test: Test name.
        samples: Output samples compared.
        mismatches: Samples whose outputs differ from the model in any bit.
        max_error_lsb: Worst error against the ideal, output LSBs.
        rms_error_lsb: RMS error against the ideal.
        problems: Human-readable failures (empty when the test passed).
        first_mismatches: The first few mismatching samples.
        latency_cycles: (min, max) latency seen, or None.
        cycles_per_sample: Measured input spacing at full rate, or None.
        extra: Further fields of the record, added after the ones above (the bulk bench puts
            its per-port error statistics here).
    """

    test: str
    samples: int = 0
    mismatches: int = 0
    max_error_lsb: float = 0.0
    rms_error_lsb: float = 0.0
    sum_sq_error: float = 0.0
    error_count: int = 0
    problems: list[str] = field(default_factory=list)
    first_mismatches: list[dict[str, Any]] = field(default_factory=list)
    latency_cycles: tuple[int, int] | None = None
    cycles_per_sample: float | None = None
    extra: dict[str, Any] = field(default_factory=dict)

    def as_dict(self) -> dict[str, Any]:
        """JSON-friendly form."""
        return {
            "test": self.test,
            "samples": self.samples,
            "mismatches": self.mismatches,
            "max_error_lsb": self.max_error_lsb,
            "rms_error_lsb": self.rms_error_lsb,
            "sum_sq_error": self.sum_sq_error,
            "error_count": self.error_count,
            "problems": self.problems,
            "first_mismatches": self.first_mismatches,
            "latency_cycles": list(self.latency_cycles) if self.latency_cycles else None,
            "cycles_per_sample": self.cycles_per_sample,
            **self.extra,
        }


def compare(
    result: CheckResult,
    *,
    inputs: dict[str, npt.NDArray[Any]],
    got: dict[str, npt.NDArray[Any]],
    expected: dict[str, npt.NDArray[Any]],
    errors: dict[str, npt.NDArray[np.float64]],
    budget_lsb: float,
    seed: int,
) -> None:
    """Compare outputs bit for bit with the model and within ``budget_lsb`` of the ideal.

    Args:
        result: Where the outcome accumulates.
        inputs: Per input port, the accepted inputs, in order.
        got: Per output port, what the core produced, in order.
        expected: Per output port, the model's prediction for the same inputs.
        errors: Per numeric output port, its error against the ideal in its LSBs, NaN where
            the budget does not apply (see benchgen.functions.function_errors).
        budget_lsb: The largest error allowed against the ideal.
        seed: The seed that reproduces this run.
    """
    n_in = len(next(iter(inputs.values())))
    n_out = len(next(iter(got.values())))
    if n_out != n_in:
        result.problems.append(f"{n_in} samples went in but {n_out} came out")
    n = min(n_in, n_out)
    result.samples += n
    bad = np.zeros(n, dtype=bool)
    for port, exp in expected.items():
        bad |= np.asarray(got[port][:n] != exp[:n], dtype=bool)
    count = int(bad.sum())
    result.mismatches += count
    if count:
        idx = np.flatnonzero(bad)[:FIRST_MISMATCHES]
        rows = []
        for k in idx:
            row: dict[str, Any] = {"index": int(k)}
            row.update({f"{p}": int(v[k]) for p, v in inputs.items()})
            row.update({f"expected_{p}": int(v[k]) for p, v in expected.items()})
            row.update({f"got_{p}": int(v[k]) for p, v in got.items()})
            rows.append(row)
        result.first_mismatches.extend(rows)
        lines = "\n".join("  " + ", ".join(f"{a}={b}" for a, b in r.items()) for r in rows)
        result.problems.append(
            f"{count} of {n} samples differ from the bit-true model (seed {seed}, rerun with --seed {seed}); "
            f"first ones:\n{lines}"
        )
    for port, all_err in errors.items():
        err = np.asarray(all_err[:n], dtype=np.float64)
        judged = ~np.isnan(err)
        if judged.any():
            mag = np.where(judged, np.abs(err), -1.0)
            worst = float(np.max(mag))
            result.max_error_lsb = max(result.max_error_lsb, worst)
            result.sum_sq_error += float(np.sum(err[judged] ** 2))
            result.error_count += int(judged.sum())
            over = int(np.count_nonzero(mag >= budget_lsb))
            result.extra["over_budget"] = int(result.extra.get("over_budget", 0)) + over
            k = int(np.argmax(mag))
            known = result.extra.get("worst_sample")
            if known is None or worst > known["error_lsb"]:
                result.extra["worst_sample"] = {
                    "port": port, "error_lsb": worst, "index": k, "inputs": {p: int(v[k]) for p, v in inputs.items()}
                }
            if over:
                result.problems.append(
                    f"{port}: {over} of {int(judged.sum())} judged samples are not below the budget "
                    f"{budget_lsb} LSB; the worst, {worst:.4f} LSB, at sample {k} (input "
                    + ", ".join(f"{p}={int(v[k])}" for p, v in inputs.items())
                    + f"; seed {seed})"
                )
    if result.error_count:
        result.rms_error_lsb = float(np.sqrt(result.sum_sq_error / result.error_count))


def record(result: CheckResult) -> None:
    """Append the result to the JSON-lines file named by ``BENCHGEN_RESULTS`` (if set)."""
    path = os.environ.get(RESULTS_ENV)
    if not path:
        return
    with Path(path).open("a", encoding="utf-8") as fh:
        fh.write(json.dumps(result.as_dict()) + "\n")


def write_csv_rows(test: str, columns: dict[str, npt.NDArray[Any]], path: str | Path | None = None) -> None:
    """Append one row per sample to the CSV at ``path`` (default: ``BENCHGEN_CSV``, if set).

    The benches write, per sample: the test, the inputs, the outputs, ``model_<port>`` (the
    bit-true model), ``ideal_<port>`` (the exact value, in output LSBs) and ``error_<port>``
    (output minus ideal, in that output's LSBs; empty where the budget does not judge the
    sample). The header is written when the file is new. Rows are formatted a column at a time and
    written in one go, so the bulk bench can stream every block of a long run to disk.
    """
    path = path if path is not None else os.environ.get(CSV_ENV)
    if not path:
        return
    names = list(columns)
    target = Path(path)
    new = not target.exists()
    cols = [_column_text(columns[c]) for c in names]
    with target.open("a", encoding="utf-8") as fh:
        if new:
            fh.write("test," + ",".join(names) + "\n")
        fh.write("".join(f"{test},{','.join(row)}\n" for row in zip(*cols, strict=True)))


def _column_text(values: npt.NDArray[Any]) -> list[str]:
    arr = np.asarray(values)
    if arr.dtype.kind == "f":
        # NaN is an error the budget does not judge (an atan2 angle of a tiny vector, ...): empty.
        return ["" if v != v else f"{v:.6f}" for v in arr.tolist()]
    if arr.dtype.kind in "iub":
        return [str(int(v)) for v in arr.tolist()]
    return [_fmt(v) for v in arr]


def _fmt(v: Any) -> str:
    if isinstance(v, float | np.floating):
        return f"{float(v):.6f}"
    return str(int(v))
