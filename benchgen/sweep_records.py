"""Schemas of everything a sweep or its report reads back from disk: cache entries, result records,
``sweep.json`` and ``model_analysis.json``.

A sweep trusts nothing it did not just compute. A cache entry or a result file may be empty,
cut short by a full disk, edited by hand, written by another benchgen, or hold bytes that are not
text; a record can also be well formed and still contradict itself (``"passed"`` with 5
mismatches). Each record is therefore checked against a strict schema before use: exact types (no
``"3"`` for 3, no ``true`` for 1), no unknown keys, values from closed sets where the set is
closed, and the rules that tie a verdict to its numbers. A record that fails is treated as absent:
a cache miss, or a task without a result, reported in one line naming the file and the fault.

The schemas use pydantic v2 in strict mode: it reports the path of the first bad field
(``sim.mismatches``) and checks types exactly, which a hand-written loader would have to
reimplement field by field. The checks return the record as it was read (a ``dict``), so the
bytes of reports built from it do not depend on the schema.

The shapes mirror what the writers produce: :meth:`benchgen.sim.SimReport.as_dict` (less
``per_test``) and :class:`benchgen.synth.Estimate`; tests keep them in step. The design summary
carries the manifest's ``config``, ``derived`` and ``error_budget``: the keys the report reads
are typed, the rest of the manifest belongs to :mod:`benchgen.project` and passes through.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_validator

__all__ = [
    "MODEL_ANALYSIS_FILE",
    "RESULTS_DIR",
    "RESULT_STATUSES",
    "SWEEP_FILE",
    "RecordError",
    "check_cache_entry",
    "check_model_analysis",
    "check_result",
    "check_sweep_file",
    "read_json_record",
    "read_model_analysis",
    "read_result",
    "read_sweep_file",
]

#: What an output folder holds: its sweep, and one result file per task under results/<kind>/.
SWEEP_FILE = "sweep.json"
RESULTS_DIR = "results"
#: What the bit-true model says about the sweep's cores (benchgen.sweep_analysis), for the report.
MODEL_ANALYSIS_FILE = "model_analysis.json"

#: Every status a result record may carry, by task kind (a closed set).
RESULT_STATUSES: dict[str, tuple[str, ...]] = {"sim": ("passed", "failed", "error"), "synth": ("ok", "error")}
#: Most first mismatches a record keeps (the sweep keeps 8; a longer list was not written by us).
MAX_FIRST_MISMATCHES = 8

NonNegInt = Annotated[int, Field(ge=0)]
PosInt = Annotated[int, Field(ge=1)]
NonNegFloat = Annotated[float, Field(ge=0)]
PosFloat = Annotated[float, Field(gt=0)]


class RecordError(ValueError):
    """A record that does not fit its schema; the message is one line naming the fault."""


class _Strict(BaseModel):
    # strict: no coercion ("3" is not 3, true is not 1); forbid: an unknown key means the record
    # was not written by this benchgen; no NaN or infinity (not JSON, and no verdict can rest on them).
    model_config = ConfigDict(strict=True, extra="forbid", frozen=True, allow_inf_nan=False)


class _Open(BaseModel):
    # The manifest's own tables: the keys the report reads are typed, the others pass through.
    model_config = ConfigDict(strict=True, extra="allow", frozen=True, allow_inf_nan=False)


# ----------------------------------------------------------------------------- the design summary


class CoreConfigRecord(_Open):
    """The manifest's ``config``: what the report shows of the core."""

    name: str
    function: str
    data_width: PosInt
    max_error_lsb: PosFloat
    angle_width: PosInt | None = None
    rounding: str | None = None
    architecture: Literal["pipelined", "iterative"] | None = None


class DerivedRecord(_Open):
    """The manifest's ``derived``: the sized numbers the report and plots compute with."""

    iterations: PosInt
    guard_bits: NonNegInt
    angle_guard_bits: NonNegInt | None = None
    architecture: Literal["pipelined", "iterative"]
    pipeline_depth: PosInt | None
    iterations_per_cycle: PosInt | None
    latency_cycles: NonNegInt
    cycles_per_sample: PosInt


class ErrorBudgetRecord(_Open):
    """The manifest's ``error_budget``."""

    max_error_lsb: PosFloat
    model_max_error_lsb: NonNegFloat
    model_rms_error_lsb: NonNegFloat


class DesignRecord(_Strict):
    """What a result records of the generated design (:func:`benchgen.sweep._design_summary`)."""

    toplevel: str
    function: str
    config: CoreConfigRecord
    derived: DerivedRecord
    error_budget: ErrorBudgetRecord
    rtl: list[str]  # the Verilog files: none for a VHDL-only core (hdl = "vhdl")
    ports: dict[str, PosInt] | None = None  # absent in results written before the report read it


# ----------------------------------------------------------------------------- simulation


def _scalar_row(row: dict[str, Any]) -> dict[str, Any]:
    for k, v in row.items():
        if v is not None and not isinstance(v, str | int | float):
            raise ValueError(f"value of '{k}' must be a number or a string, not {type(v).__name__}")
    return row


MismatchRow = Annotated[dict[str, Any], Field(min_length=1)]


class WorstSample(_Strict):
    """The sample with the largest error against the ideal in a run."""

    port: str
    error_lsb: NonNegFloat
    index: NonNegInt
    inputs: dict[str, int]
    test: str


class SimRunRecord(_Strict):
    """One simulation's measurements: :meth:`benchgen.sim.SimReport.as_dict` without ``per_test``.

    A pass is only believed when the numbers agree with it: every test ran and passed, samples
    were compared, none differed from the model, no problem was noted, and the worst error is
    within the budget (``<=``, as the stored worst error is rounded to 6 decimals; the bench
    itself fails a sample at ``>=`` the budget).
    """

    simulator: Literal["icarus", "verilator", "ghdl"]
    simulator_version: str
    mode: Literal["per-clock", "bulk", "bulk, exhaustive"]
    engine: Literal["cocotb", "C++ runner"]
    toplevel: str
    seed: int
    passed: bool
    tests: NonNegInt
    failed: NonNegInt
    samples: NonNegInt
    mismatches: NonNegInt
    max_error_lsb: NonNegFloat
    rms_error_lsb: NonNegFloat
    error_budget_lsb: PosFloat
    latency_cycles: NonNegInt | None
    expected_latency_cycles: NonNegInt
    cycles_per_sample: NonNegFloat | None
    expected_cycles_per_sample: PosInt
    sim_seconds: NonNegFloat
    build_seconds: NonNegFloat
    problems: list[str]
    over_budget: NonNegInt = 0
    worst_sample: WorstSample | None = None
    waves_file: str | None = None
    waves_note: str | None = None

    @model_validator(mode="after")
    def _consistent(self) -> SimRunRecord:
        if self.failed > self.tests:
            raise ValueError(f"failed = {self.failed} is more than tests = {self.tests}")
        if self.mismatches > self.samples:
            raise ValueError(f"mismatches = {self.mismatches} is more than samples = {self.samples}")
        if self.passed:
            for bad, why in (
                (self.tests == 0, "tests = 0"),
                (self.failed > 0, f"failed = {self.failed}"),
                (self.samples == 0, "samples = 0"),
                (self.mismatches > 0, f"mismatches = {self.mismatches}"),
                (self.over_budget > 0, f"over_budget = {self.over_budget}"),
                (bool(self.problems), f"{len(self.problems)} problem(s) noted"),
                (self.max_error_lsb > self.error_budget_lsb,
                 f"max_error_lsb = {self.max_error_lsb} is over the budget {self.error_budget_lsb}"),
            ):
                if bad:
                    raise ValueError(f"passed = true, yet {why}")
        return self


class SimEntry(_Strict):
    """A simulation cache entry: the verdict and the measurements of one run."""

    status: Literal["passed", "failed"]
    source_hash: Annotated[str, Field(pattern=r"^[0-9a-f]{16}$")]
    sim: SimRunRecord
    first_mismatches: Annotated[list[MismatchRow], Field(max_length=MAX_FIRST_MISMATCHES)]

    @field_validator("first_mismatches")
    @classmethod
    def _rows(cls, rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
        return [_scalar_row(r) for r in rows]

    @model_validator(mode="after")
    def _verdict(self) -> SimEntry:
        if (self.status == "passed") != self.sim.passed:
            raise ValueError(f"status is '{self.status}' but sim.passed is {str(self.sim.passed).lower()}")
        if self.status == "passed" and self.first_mismatches:
            raise ValueError("status is 'passed' but first_mismatches lists mismatching samples")
        return self


# ----------------------------------------------------------------------------- estimates


class EstimateRecord(_Strict):
    """One resource and Fmax estimate: the fields of :class:`benchgen.synth.Estimate`."""

    target: str
    part: str
    luts: NonNegInt
    ffs: NonNegInt
    carry: NonNegInt
    mux: NonNegInt
    bram: NonNegInt
    dsp: NonNegInt
    cells: dict[str, NonNegInt]
    fmax_mhz: PosFloat | None
    clock_mhz: PosFloat | None
    logic_cells: NonNegInt | None
    tools: dict[str, str]
    seconds: NonNegFloat
    note: str | None
    wrapper_ffs: NonNegInt


class SynthEntry(_Strict):
    """An estimate cache entry."""

    status: Literal["ok"]
    source_hash: Annotated[str, Field(pattern=r"^[0-9a-f]{16}$")]
    estimate: EstimateRecord


# ----------------------------------------------------------------------------- result records


class _Identity(_Strict):
    task_id: Annotated[str, Field(min_length=1)]
    key: Annotated[str, Field(min_length=1)]
    label: str
    seconds: NonNegFloat


class SimResult(SimEntry, _Identity):
    """``results/sim/<task>.json`` of a point that ran."""

    kind: Literal["sim"]
    design: DesignRecord
    cached: bool


class SynthResult(SynthEntry, _Identity):
    """``results/synth/<task>.json`` of an estimate that was made."""

    kind: Literal["synth"]
    design: DesignRecord
    cached: bool


class ErrorResult(_Identity):
    """A task that could not run (either kind); it is retried on the next run."""

    kind: Literal["sim", "synth"]
    status: Literal["error"]
    error: str
    design: DesignRecord | None = None


# ----------------------------------------------------------------------------- sweep.json


class SynthSettingsRecord(_Strict):
    targets: list[str]
    place_and_route: bool
    clock_mhz: PosFloat


class SpecRecord(_Strict):
    """:meth:`benchgen.sweep_config.SweepSpec.as_dict`."""

    name: str
    base: dict[str, Any]
    matrix: dict[str, list[Any]]
    exclude: list[dict[str, Any]]
    include: list[dict[str, Any]]
    simulators: list[str]
    samples: PosInt
    seed: int
    synth: SynthSettingsRecord


class PointRecord(_Strict):
    point_id: Annotated[str, Field(min_length=1)]
    core_id: Annotated[str, Field(min_length=1)]
    label: str
    simulator: str
    axes: dict[str, Any]
    core: dict[str, Any]


class TaskRecord(_Strict):
    kind: Literal["sim", "synth"]
    task_id: Annotated[str, Field(min_length=1)]
    label: str


class SweepFileRecord(_Strict):
    """``sweep.json``: what an output folder holds (:func:`benchgen.sweep.write_sweep_file`)."""

    benchgen_version: str
    spec: SpecRecord
    digest: str
    shard: Annotated[list[PosInt], Field(min_length=2, max_length=2)] | None
    points: list[PointRecord]
    tasks: list[TaskRecord]


# ----------------------------------------------------------------------------- model_analysis.json


class ErrorCurveRecord(_Strict):
    """The model's worst and RMS error over iterations, at one number of guard bits."""

    guard_bits: NonNegInt
    iterations: Annotated[list[PosInt], Field(min_length=1)]
    max_error_lsb: list[NonNegFloat]
    rms_error_lsb: list[NonNegFloat]

    @model_validator(mode="after")
    def _same_length(self) -> ErrorCurveRecord:
        n = len(self.iterations)
        if len(self.max_error_lsb) != n or len(self.rms_error_lsb) != n:
            raise ValueError(f"{n} iterations but {len(self.max_error_lsb)} worst and {len(self.rms_error_lsb)} RMS errors")
        return self


class ErrorGridRecord(_Strict):
    """The error curves of one function at one output width, and the sweep's cores they stand for."""

    function: str
    data_width: PosInt
    budget_lsb: PosFloat
    core_ids: Annotated[list[str], Field(min_length=1)]
    curves: list[ErrorCurveRecord]


class ToneRecord(_Strict):
    """A coherent tone through one data path: its quality and its spectrum, kept in bins."""

    label: str
    bits: PosInt
    snr_db: float
    sfdr_db: float
    ideal_snr_db: float
    n_fft: PosInt
    cycles: PosInt
    bin_start: Annotated[list[NonNegInt], Field(min_length=1)]
    bin_low_dbc: list[float]
    bin_high_dbc: list[float]
    core_ids: Annotated[list[str], Field(min_length=1)]

    @model_validator(mode="after")
    def _bins(self) -> ToneRecord:
        n = len(self.bin_start)
        if len(self.bin_low_dbc) != n or len(self.bin_high_dbc) != n:
            raise ValueError(f"{n} bins but {len(self.bin_low_dbc)} low and {len(self.bin_high_dbc)} high levels")
        if any(lo > hi for lo, hi in zip(self.bin_low_dbc, self.bin_high_dbc, strict=True)):
            raise ValueError("a bin's low level is above its high level")
        return self


class NcoWordRecord(_Strict):
    """One coherent word through the whole NCO model: measured beside its prediction.

    ``word`` is ``"worst"`` (truncation period 2, the Nicholas-Samueli case) or ``"exact"`` (no
    bit dropped). The predictions name their source (``sfdr_source``, ``snr_source``); the exact
    word has no SFDR prediction. ``undithered_*`` is the same word through the same NCO without
    its dither (a dithered NCO's worst word only). ``freq_error`` is the measured mean frequency
    less the word's exact one, in cycles per sample (times f_clk for Hz).
    """

    word: Literal["worst", "exact"]
    freq_word: NonNegInt
    period: Literal[1, 2]
    n_fft: PosInt
    cycles: PosInt
    sfdr_db: float
    snr_db: float
    freq_error: float
    predicted_sfdr_db: float | None
    sfdr_source: str | None
    predicted_snr_db: float
    snr_source: str
    undithered_sfdr_db: float | None
    undithered_snr_db: float | None

    @model_validator(mode="after")
    def _word(self) -> NcoWordRecord:
        if self.period != (2 if self.word == "worst" else 1):
            raise ValueError(f"the {self.word} word has truncation period {self.period}")
        if (self.predicted_sfdr_db is None) != (self.sfdr_source is None):
            raise ValueError("an SFDR prediction needs its source, and a source its prediction")
        return self


class NcoToneRecord(_Strict):
    """An NCO's spectrum with its phase path (:func:`benchgen.sweep_analysis.nco_tone`).

    The bins are those of the complex spectrum of ``spectrum_word``'s record, from ``-n_fft/2``
    (``bin_start`` may be negative).
    """

    label: str
    bits: PosInt
    phase_bits: PosInt
    acc_width: PosInt
    dither_width: NonNegInt
    nicholas_samueli_sfdr_db: float
    ideal_snr_db: float
    freq_resolution: PosFloat
    words: Annotated[list[NcoWordRecord], Field(min_length=1, max_length=2)]
    spectrum_word: Literal["worst", "exact"]
    bin_start: Annotated[list[int], Field(min_length=1)]
    bin_low_dbc: list[float]
    bin_high_dbc: list[float]
    core_ids: Annotated[list[str], Field(min_length=1)]

    @model_validator(mode="after")
    def _consistent(self) -> NcoToneRecord:
        n = len(self.bin_start)
        if len(self.bin_low_dbc) != n or len(self.bin_high_dbc) != n:
            raise ValueError(f"{n} bins but {len(self.bin_low_dbc)} low and {len(self.bin_high_dbc)} high levels")
        if any(lo > hi for lo, hi in zip(self.bin_low_dbc, self.bin_high_dbc, strict=True)):
            raise ValueError("a bin's low level is above its high level")
        kinds = [w.word for w in self.words]
        if len(set(kinds)) != len(kinds):
            raise ValueError("a word is measured twice")
        if self.spectrum_word not in kinds:
            raise ValueError(f"the spectrum is the {self.spectrum_word} word's, which was not measured")
        return self


class ModelAnalysisRecord(_Strict):
    """``model_analysis.json`` (:func:`benchgen.sweep_analysis.analyse_models`, with the sweep's digest).

    ``nco_tones`` is there only when the sweep has an NCO.
    """

    digest: str
    error_grids: list[ErrorGridRecord]
    tones: list[ToneRecord]
    nco_tones: list[NcoToneRecord] = []


# ----------------------------------------------------------------------------- checking


def _problem(exc: ValidationError) -> str:
    """The first fault of a validation error as ``field.path: what is wrong``."""
    errors = exc.errors(include_url=False)
    first = errors[0]
    loc = ".".join(str(p) for p in first["loc"])
    msg = str(first["msg"]).removeprefix("Value error, ")
    if first["type"] == "missing":
        msg = "missing"
    elif first["type"] == "extra_forbidden":
        msg = "not a field of this record"
    more = f" (and {len(errors) - 1} more fault(s))" if len(errors) > 1 else ""
    return f"{loc}: {msg}{more}" if loc else f"{msg}{more}"


def _validate(model: type[BaseModel], data: Any) -> dict[str, Any]:
    if not isinstance(data, dict):
        raise RecordError(f"not a JSON object but {type(data).__name__} {_short(data)}")
    try:
        model.model_validate(data)
    except ValidationError as exc:
        raise RecordError(_problem(exc)) from None
    return data


def _short(value: Any) -> str:
    text = json.dumps(value)
    return text if len(text) <= 40 else text[:37] + "..."


def check_cache_entry(data: Any, kind: str) -> dict[str, Any]:
    """Return a cache entry of ``kind`` (``sim`` or ``synth``) if it fits its schema.

    Raises:
        RecordError: naming the first fault.
    """
    return _validate(SimEntry if kind == "sim" else SynthEntry, data)


def check_result(data: Any, kind: str) -> dict[str, Any]:
    """Return a result record of a ``kind`` task if it fits its schema and its status.

    Raises:
        RecordError: naming the first fault.
    """
    if not isinstance(data, dict):
        raise RecordError(f"not a JSON object but {type(data).__name__} {_short(data)}")
    status = data.get("status")
    allowed = RESULT_STATUSES[kind]
    if status not in allowed:
        raise RecordError(f"status: {_short(status) if 'status' in data else 'missing'} is not one of "
                          + ", ".join(allowed))
    if data.get("kind") != kind:
        raise RecordError(f"kind: {_short(data.get('kind'))} where '{kind}' belongs")
    if status == "error":
        return _validate(ErrorResult, data)
    return _validate(SimResult if kind == "sim" else SynthResult, data)


def check_sweep_file(data: Any) -> dict[str, Any]:
    """Return the content of a ``sweep.json`` if it fits its schema.

    Raises:
        RecordError: naming the first fault.
    """
    return _validate(SweepFileRecord, data)


def check_model_analysis(data: Any) -> dict[str, Any]:
    """Return the content of a ``model_analysis.json`` if it fits its schema.

    Raises:
        RecordError: naming the first fault.
    """
    return _validate(ModelAnalysisRecord, data)


def read_json_record(path: Path) -> Any:
    """The JSON value in ``path``.

    Raises:
        FileNotFoundError: if there is no file (a plain miss, not a fault).
        RecordError: if the file cannot be read, is not UTF-8 text, or is not JSON (e.g. cut short).
    """
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise
    except OSError as exc:
        raise RecordError(f"cannot be read ({exc.strerror or exc})") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise RecordError(f"is not UTF-8 text (byte 0x{raw[exc.start]:02x} at offset {exc.start})") from None
    try:
        return json.loads(text)
    except RecursionError:
        raise RecordError("is not JSON (nested too deeply)") from None
    except ValueError as exc:
        raise RecordError(f"is not JSON ({exc}){' (empty file)' if not text.strip() else ''}") from None


def _relative(path: Path, base: Path) -> str:
    return str(path.relative_to(base)) if path.is_relative_to(base) else str(path)


def read_result(out_dir: Path, kind: str, task_id: str) -> dict[str, Any] | None:
    """The result record of a task in the output folder ``out_dir``, or ``None`` if there is none.

    Raises:
        RecordError: if the file is there but is not a valid record of that task; the message is
            one line naming the file (relative to ``out_dir``) and the fault.
    """
    path = out_dir / RESULTS_DIR / kind / f"{task_id}.json"
    try:
        data = check_result(read_json_record(path), kind)
        if data["task_id"] != task_id:
            raise RecordError(f"task_id: {_short(data['task_id'])} where {_short(task_id)} belongs")
    except FileNotFoundError:
        return None
    except RecordError as exc:
        raise RecordError(f"{_relative(path, out_dir)}: {exc}") from None
    return data


def read_sweep_file(out_dir: Path) -> dict[str, Any]:
    """The ``sweep.json`` of an output folder.

    Raises:
        FileNotFoundError: if there is none.
        RecordError: if it is not a valid one; the message names the file and the fault.
    """
    path = out_dir / SWEEP_FILE
    try:
        return check_sweep_file(read_json_record(path))
    except RecordError as exc:
        raise RecordError(f"{path}: {exc}") from None


def read_model_analysis(out_dir: Path) -> dict[str, Any]:
    """The ``model_analysis.json`` of an output folder.

    Raises:
        FileNotFoundError: if there is none (a folder written before the sweep measured it).
        RecordError: if it is not a valid one; the message names the file and the fault.
    """
    path = out_dir / MODEL_ANALYSIS_FILE
    try:
        return check_model_analysis(read_json_record(path))
    except RecordError as exc:
        raise RecordError(f"{path}: {exc}") from None
