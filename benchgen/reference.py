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

from benchgen.algorithm import Datapath
from benchgen.model import to_signed

__all__ = ["ErrorStats", "FLOAT64_MAX_DATA_WIDTH", "error_stats", "errors_lsb", "ideal_sincos"]

FLOAT64_MAX_DATA_WIDTH = 40


def ideal_sincos(
    dp: Datapath, angles: npt.ArrayLike, *, use_mpmath: bool = False, dps: int = 40
) -> tuple[npt.NDArray[np.float64], npt.NDArray[np.float64]]:
    """amplitude * cos and amplitude * sin of binary angles, as float64 arrays.

    Args:
        dp: The core's data path (for the angle width and amplitude).
        angles: Angle codes, taken modulo 2**angle_width.
        use_mpmath: Force the mpmath path (``dps`` decimal digits).
        dps: mpmath precision.
    """
    raw = np.asarray(angles)
    n_bits = dp.angle_width
    if use_mpmath or dp.data_width > FLOAT64_MAX_DATA_WIDTH:
        codes = [int(a) % (1 << n_bits) for a in raw.ravel()]
        cos = np.empty(len(codes), dtype=object)
        sin = np.empty(len(codes), dtype=object)
        with mpmath.workdps(dps):
            scale = (
                1 / mpmath.mpf(2) ** dp.angle_frac if dp.radians else 2 * mpmath.pi / mpmath.mpf(2) ** n_bits
            )
            amp = mpmath.mpf(dp.amplitude)
            for k, code in enumerate(codes):
                signed = code - (1 << n_bits) if code >> (n_bits - 1) else code
                t = signed * scale
                cos[k] = amp * mpmath.cos(t)
                sin[k] = amp * mpmath.sin(t)
        return cos.reshape(raw.shape), sin.reshape(raw.shape)
    if raw.dtype == object:
        raw = np.array([int(a) % (1 << n_bits) for a in raw.ravel()], dtype=np.uint64).reshape(raw.shape)
    codes = raw.astype(np.int64) & np.int64((1 << n_bits) - 1) if n_bits < 64 else raw.astype(np.uint64)
    signed = to_signed(codes.astype(np.int64), n_bits) if n_bits < 64 else codes.astype(np.int64)
    scale = 1.0 / 2.0**dp.angle_frac if dp.radians else 2.0 * np.pi / 2.0**n_bits
    t = signed.astype(np.float64) * scale
    return dp.amplitude * np.cos(t), dp.amplitude * np.sin(t)


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
