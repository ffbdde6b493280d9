"""Ideal values and error metrics.

The ideal is the exact function of the exact input, scaled to the output amplitude, with no
rounding. For outputs up to 40 bits it is computed in float64: a binary angle k / 2**N is exact
in float64 (N <= 53) or within 2**-53 relative, 2*pi*k/2**N then carries at most about 2**-51 rad
of error, and numpy's sin/cos add about one ulp, so the ideal is off by less than
2**-51 * 2**39 < 1e-3 output LSB. Wider outputs, and any caller that asks, use mpmath.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import mpmath
import numpy as np
import numpy.typing as npt


__all__ = ["FLOAT64_MAX_DATA_WIDTH", "ErrorStats", "error_stats", "errors_lsb"]

FLOAT64_MAX_DATA_WIDTH = 40


@dataclass(frozen=True)
class ErrorStats:
    """Error of outputs against the ideal, in output LSBs, over all outputs given.

    Attributes:
        samples: Number of input samples.
        max_error_lsb: Largest absolute error.
        rms_error_lsb: Root mean square error.
        bias_lsb: Mean error (signed).
    """

    samples: int
    max_error_lsb: float
    rms_error_lsb: float
    bias_lsb: float

    def as_dict(self) -> dict[str, Any]:
        """JSON-friendly form."""
        return {
            "samples": self.samples,
            "max_error_lsb": round(self.max_error_lsb, 6),
            "rms_error_lsb": round(self.rms_error_lsb, 6),
            "bias_lsb": round(self.bias_lsb, 6),
        }


def errors_lsb(outputs: npt.ArrayLike, ideal: npt.ArrayLike) -> npt.NDArray[np.float64]:
    """outputs - ideal as float64, exact to float64 precision even for wide outputs.

    With mpmath ideals the difference is formed in mpmath before it is rounded to float64;
    forming it in float64 would lose the low bits of outputs wider than 53 bits.
    """
    ideal_arr = np.asarray(ideal)
    out_arr = np.asarray(outputs)
    if ideal_arr.dtype == object:
        with mpmath.workdps(40):
            diff = [float(mpmath.mpf(int(o)) - i) for o, i in zip(out_arr.ravel(), ideal_arr.ravel(), strict=True)]
        return np.array(diff, dtype=np.float64).reshape(out_arr.shape)
    return out_arr.astype(np.float64) - ideal_arr.astype(np.float64)


def error_stats(
    outputs: list[npt.ArrayLike] | tuple[npt.ArrayLike, ...],
    ideals: list[npt.ArrayLike] | tuple[npt.ArrayLike, ...],
) -> ErrorStats:
    """Pool the errors of several output channels (e.g. cos and sin) against their ideals."""
    errs = np.concatenate([errors_lsb(o, i).ravel() for o, i in zip(outputs, ideals, strict=True)])
    samples = int(np.asarray(outputs[0]).size)
    if errs.size == 0:
        return ErrorStats(0, 0.0, 0.0, 0.0)
    return ErrorStats(
        samples=samples,
        max_error_lsb=float(np.max(np.abs(errs))),
        rms_error_lsb=float(np.sqrt(np.mean(errs * errs))),
        bias_lsb=float(np.mean(errs)),
    )
