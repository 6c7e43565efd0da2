"""Fitting bump-test data from the studio, and writing the fitted model into the case.

Plain Python (no Textual), so the form checks, the fit call and the case edit can be tested
without a terminal. The fit itself is :func:`robustff.fit.least_squares.fit_record` (the fit of
``robustff fit``); the edited case is checked by the loader through
:func:`robustff.tui.editing.validated`.
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING

from robustff.case import TIME_UNITS, Case
from robustff.errors import DataError
from robustff.plant.models import MODEL_KINDS, MODEL_PARAMETERS, TransferModel
from robustff.tui import editing

if TYPE_CHECKING:
    from robustff.fit.least_squares import FitResult

__all__ = [
    "FIT_BLOCKS",
    "FIT_INTERVALS",
    "FIT_RESAMPLES",
    "FORM_FIELDS",
    "FormError",
    "FitRequest",
    "parse_fit_form",
    "fit_from_request",
    "error_field",
    "csv_columns",
    "converted_model",
    "with_fitted_model",
]

#: Case blocks a fitted model can be written to.
FIT_BLOCKS: tuple[str, ...] = ("process", "disturbance")
#: How the studio computes the 95 % intervals (the Jacobian is the quick one).
FIT_INTERVALS: tuple[str, ...] = ("jacobian", "bootstrap")
#: Bootstrap refits in the studio (``robustff fit`` uses 200 by default).
FIT_RESAMPLES = 100
#: Keys of the form's fields, in screen order.
FORM_FIELDS: tuple[str, ...] = ("path", "input", "output", "time", "sample_time", "time_unit",
                                "kind", "block", "intervals")


class FormError(DataError):
    """A form entry that cannot be used; ``field`` is the key of the field to mark."""

    def __init__(self, field: str, message: str) -> None:
        super().__init__(message)
        self.field = field


@dataclass(frozen=True)
class FitRequest:
    """What the fit form asked for.

    Parameters
    ----------
    path : Path
        CSV file of the bump test.
    input_column, output_column : str
        Column names.
    time_column : str or None
        Column of sample times (or None with ``sample_time``).
    sample_time : float or None
        Fixed sample interval, data time units (or None with ``time_column``).
    time_unit : str or None
        "s", "min" or "h"; None when not given (the case's unit is assumed).
    kind : {"fopdt", "sopdt", "ipdt"}
    block : {"process", "disturbance"}
        The case's model the data describe.
    intervals : {"jacobian", "bootstrap"}
    """

    path: Path
    input_column: str
    output_column: str
    time_column: str | None
    sample_time: float | None
    time_unit: str | None
    kind: str
    block: str
    intervals: str = "jacobian"


def _choice(values: dict[str, str], field: str, allowed: tuple[str, ...]) -> str:
    value = values.get(field, "").strip()
    if value not in allowed:
        raise FormError(field, f"{field}: choose one of {', '.join(allowed)} (got {value!r})")
    return value


def parse_fit_form(values: dict[str, str]) -> FitRequest:
    """Check the form's texts and turn them into a request (the file is not read yet).

    Parameters
    ----------
    values : dict of str to str
        Texts by :data:`FORM_FIELDS` key (a blank ``time_unit`` means "not given").

    Raises
    ------
    FormError
        Naming the field at fault: a blank path or column, a missing file, neither or both of
        time column and sample time, a sample time that is not a positive number.
    """
    text = {key: values.get(key, "").strip() for key in FORM_FIELDS}
    if not text["path"]:
        raise FormError("path", "give the path of the CSV file")
    path = Path(text["path"]).expanduser()
    if not path.is_file():
        raise FormError("path", f"{path}: file not found")
    for field, what in (("input", "input (e.g. the valve %)"), ("output", "output (the CV)")):
        if not text[field]:
            raise FormError(field, f"give the name of the {what} column")
    if bool(text["time"]) == bool(text["sample_time"]):
        field = "time" if not text["time"] else "sample_time"
        raise FormError(field, "give either a time column or a fixed sample time (not both)")
    sample_time = None
    if text["sample_time"]:
        try:
            sample_time = float(text["sample_time"])
        except ValueError:
            raise FormError("sample_time", "the sample time must be a number "
                            f"(got {text['sample_time']!r})") from None
        if not (sample_time > 0 and math.isfinite(sample_time)):
            raise FormError("sample_time",
                            f"the sample time must be a positive number (got {sample_time:g})")
    unit = text["time_unit"] or None
    if unit is not None and unit not in TIME_UNITS:
        raise FormError("time_unit", f"the time unit must be one of {', '.join(TIME_UNITS)} "
                        f"(got {unit!r})")
    return FitRequest(path, text["input"], text["output"], text["time"] or None, sample_time,
                      unit, _choice(text, "kind", MODEL_KINDS), _choice(text, "block", FIT_BLOCKS),
                      _choice(text, "intervals", FIT_INTERVALS))


def fit_from_request(request: FitRequest, seed: int = 0) -> FitResult:
    """Read the record and fit it (least squares; intervals as requested).

    Returns
    -------
    robustff.fit.least_squares.FitResult
        Times in the data's time unit.

    Raises
    ------
    DataError
        Unusable data or a failed fit, the message naming the file.
    """
    from robustff.fit.least_squares import fit_record
    from robustff.fit.records import read_record

    record = read_record(request.path, request.input_column, request.output_column,
                         time_column=request.time_column, sample_time=request.sample_time,
                         time_unit=request.time_unit)
    try:
        return fit_record(record, request.kind, "least-squares", request.intervals,
                          resamples=FIT_RESAMPLES, seed=seed)
    except DataError as exc:
        if str(request.path) in str(exc):
            raise
        raise DataError(f"{request.path}: {exc}") from None
    except (ArithmeticError, ValueError) as exc:  # a numerical failure inside the optimiser
        raise DataError(f"{request.path}: the fit failed ({exc})") from None


def error_field(message: str, request: FitRequest) -> str | None:
    """The form field a reading or fitting error is about (None: the data as a whole)."""
    if "file not found" in message or "cannot read the file" in message or "is empty" in message:
        return "path"
    for field, name in (("input", request.input_column), ("output", request.output_column),
                        ("time", request.time_column)):
        if name and (f"column '{name}'" in message or f"no column '{name}'" in message):
            return field
    return None


def csv_columns(path: Path) -> list[str] | None:
    """The header names of a CSV file (lines starting with ``#`` skipped); None if unreadable."""
    try:
        with path.expanduser().open(encoding="utf-8-sig") as handle:
            for line in handle:
                if line.strip() and not line.lstrip().startswith("#"):
                    dialect = csv.Sniffer().sniff(line, ",;\t")
                    return [name.strip() for name in next(csv.reader([line], dialect))]
    except (OSError, UnicodeDecodeError, csv.Error):
        return None
    return None


def _rounded(value: float) -> float:
    """Four significant digits: what is written into the case (the fit is not more precise)."""
    return float(f"{value:.4g}")


def converted_model(model: TransferModel, data_unit: str | None,
                    case_unit: str) -> tuple[TransferModel, str]:
    """The fitted model in the case's time unit, and a sentence saying what was assumed.

    Parameters
    ----------
    model : TransferModel
        Fitted, times in ``data_unit``.
    data_unit : str or None
        Time unit of the data; None when unknown (the case's unit is assumed, nothing converted).
    case_unit : str
        The case's time unit.

    Returns
    -------
    (TransferModel, str)
        Times (and an IPDT slope gain, per time unit) converted; values to four significant
        digits (what an engineer writes in a case file; the fit's intervals are far wider).
    """
    from robustff.fit.write_case import time_factor

    if data_unit is None:
        factor = 1.0
        note = (f"the data's time unit was not given: its times are taken as the case's unit "
                f"({case_unit}), nothing converted")
    elif data_unit == case_unit:
        factor, note = 1.0, f"times in {case_unit}, the case's unit"
    else:
        factor = time_factor(data_unit, case_unit)
        note = f"times converted from {data_unit} to the case's {case_unit} (x {factor:g})"
    gain = model.gain / factor if model.integrating else model.gain
    return TransferModel(model.kind, _rounded(gain), _rounded(model.time_constant * factor),
                         _rounded(model.time_constant_2 * factor),
                         _rounded(model.dead_time * factor)), note


def with_fitted_model(case: Case, block: str, model: TransferModel) -> tuple[Case, list[str]]:
    """The case with ``block``'s nominal model replaced by ``model`` (validated by the loader).

    Uncertain parameters (and correlations) that the new model kind does not have are removed;
    rows whose range does not hold the new nominal value are reported, not changed.

    Returns
    -------
    (Case, list of str)
        The new case and notes for the user.

    Raises
    ------
    CaseError
        The loader's reason when the case would not load.
    """
    from robustff.case.sampling import distribution_bounds

    if block not in FIT_BLOCKS:
        raise DataError(f"a fitted model goes to one of {', '.join(FIT_BLOCKS)}, not {block!r}")
    if block == "disturbance" and case.disturbances:
        raise DataError("this case names its disturbances ([disturbance.NAME]): apply the fit "
                        "from the command line, robustff fit ... --block disturbance.NAME")
    keep = {f"{block}.{name}" for name in MODEL_PARAMETERS[model.kind]}
    gone = [row.key for row in case.uncertainty
            if row.key.startswith(f"{block}.") and row.key not in keep]
    rows = tuple(row for row in case.uncertainty if row.key not in gone)
    correlations = tuple(c for c in case.correlations if not {c.first, c.second} & set(gone))
    edited = replace(case, uncertainty=rows, correlations=correlations)
    edited = (replace(edited, process=model) if block == "process"
              else replace(edited, disturbance=model))
    changed = editing.validated(edited)
    notes = [f"removed the uncertainty of {key} ({model.kind.upper()} has no such parameter)"
             for key in gone]
    for row in changed.uncertainty:
        if row.key.startswith(f"{block}."):
            nominal = changed.nominal_value(row.key)
            low, high = distribution_bounds(row, nominal)
            if not low <= nominal <= high:
                notes.append(f"the uncertainty of {row.key} spans {low:.4g} .. {high:.4g} and "
                             f"misses the fitted {nominal:.4g}: edit its row")
    return changed, notes
