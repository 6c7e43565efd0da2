"""Exports of a study: ``summary.json``, ``percentiles.csv``, ``percentiles.md``, ``samples.csv``
and ``samples-units.csv`` (the unit of each samples column).

All files of one run are written into a fresh temporary folder beside the destination, which then
replaces the destination in one rename, so a folder never mixes files of two runs and an
interrupted write leaves the previous results untouched. A destination folder that holds files
robustff did not write is refused rather than replaced.
"""

from __future__ import annotations

import csv
import io
import json
import os
import shutil
import tempfile
from collections.abc import Callable, Sequence
from pathlib import Path

from robustff import CAUTION
from robustff.atomic import write_text_atomic
from robustff.case.text import printable_title
from robustff.engine.metrics import METRIC_NAMES
from robustff.errors import RobustffError
from robustff.jsonvalues import json_safe
from robustff.output.samples_file import sample_columns, samples_file_name, write_samples
from robustff.output.samples_units import SAMPLES_UNITS_FILE, samples_units_csv
from robustff.study import StudyResult
from robustff.study.frequency import frequency_csv
from robustff.study.summary import study_frequencies
from robustff.study.summary_types import ARMS, Summary, percentile_value

__all__ = [
    "RESULT_FILES",
    "percentile_rows",
    "percentiles_markdown",
    "percentiles_csv",
    "risk_sentence",
    "write_results",
    "check_output_folder",
    "json_safe",
]

RESULT_FILES: tuple[str, ...] = ("summary.json", "percentiles.csv", "percentiles.md", "samples.csv",
                                 SAMPLES_UNITS_FILE, "frequency.csv")
#: Written instead of ``samples.csv`` when asked for (``--samples-format npy``).
OPTIONAL_RESULT_FILES: tuple[str, ...] = ("samples.npy",)
_ARM_LABELS = {"fb": "feedback only", "fbff": "feedback + feedforward"}


def percentile_rows(
    summary: Summary, percentiles: Sequence[float], metrics: Sequence[str] = METRIC_NAMES
) -> list[list[str]]:
    """Table rows ``[metric, arm, unit, P.., ...]``, values to 4 significant digits."""
    rows = []
    for name in metrics:
        for arm in ARMS:
            stats = summary["metrics"][name][arm]
            cells = [_number(percentile_value(stats, p)) for p in percentiles]
            rows.append([name, arm, summary["units"][name], *cells])
    return rows


def _number(value: float | None) -> str:
    return "n/a" if value is None else f"{value:.4g}"


def risk_sentence(summary: Summary, metric: str = "iae") -> str:
    """One line on the probability that feedforward makes ``metric`` worse."""
    harm = summary["ff_worse"][metric]
    label = "IAE" if metric == "iae" else metric.replace("_", " ")
    if summary["design"]["feedforward"]["structure"] == "none":
        return (
            f'No feedforward in this case ([feedforward] structure = "none"): both arms are '
            f"feedback only, so there is no {label} change to judge"
        )
    low, high = harm["ci95"]
    # The interval bounds are None exactly when the probability is (no usable sample).
    if harm["probability"] is None or low is None or high is None:
        return f"Feedforward makes {label} worse: no usable samples (unstable in both arms)"
    return (
        f"Feedforward makes {label} "
        f"worse in {100 * harm['probability']:.1f} % of plants "
        f"(95 % interval {100 * low:.1f} to {100 * high:.1f} %, {harm['count']} of {harm['n']})"
    )


def percentiles_csv(summary: Summary, percentiles: Sequence[float]) -> str:
    """``percentiles.csv``: one row per metric and arm, the percentiles, and the run's state.

    Every row ends with ``samples`` (samples simulated) and ``partial`` (``true`` when the run
    was interrupted), so a table read on its own still tells an interrupted run from a full one.
    """
    header = ["metric", "arm", "unit", *[f"p{p:g}" for p in percentiles], "samples", "partial"]
    state = [str(summary["samples"]), "true" if summary["partial"] else "false"]
    rows = [[*row, *state] for row in percentile_rows(summary, percentiles)]
    return _csv_text([header, *rows])


def percentiles_markdown(summary: Summary, percentiles: Sequence[float]) -> str:
    """The Markdown report: percentile table, risk lines, unstable counts and the caution."""
    header = ["metric", "arm", "unit", *[f"P{p:g}" for p in percentiles]]
    lines = [
        f"# {printable_title(summary['title'])}",
        "",
        f"Samples: {summary['samples']} of {summary['requested']}"
        + (" (PARTIAL: the run was interrupted)" if summary["partial"] else "")
        + f"; seed {summary['seed']}; sampling {summary['sampling']}.",
        "",
        "| " + " | ".join(header) + " |",
        "|" + "---|" * len(header),
    ]
    lines += ["| " + " | ".join(row) + " |" for row in percentile_rows(summary, percentiles)]
    lines += [
        "",
        "Arms: fb = " + _ARM_LABELS["fb"] + ", fbff = " + _ARM_LABELS["fbff"] + ".",
        "",
        "- " + risk_sentence(summary, "iae"),
        "- " + risk_sentence(summary, "peak_deviation"),
        f"- Unstable loops: fb {summary['unstable']['fb']}, fbff {summary['unstable']['fbff']} "
        "(feedback only, with feedforward; excluded from the percentiles).",
        "- " + summary["convergence"]["ff_worse_iae"]["message"],
        *[f"- warning: {warning}" for warning in summary["warnings"]],
        "",
        CAUTION,
        "",
    ]
    return "\n".join(lines)


def _csv_text(rows: list[list]) -> str:
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\n").writerows(rows)
    return buffer.getvalue()


def check_output_folder(folder: Path) -> None:
    """Refuse a destination that exists and holds files robustff did not write.

    Raises
    ------
    RobustffError
    """
    if folder.exists() and not folder.is_dir():
        raise RobustffError(f"--out {folder}: exists and is not a folder")
    # An existing folder must itself be writable (results are written into it); otherwise the
    # nearest existing ancestor, where the folder will be created.
    start = folder if folder.is_dir() else (folder.parent if str(folder.parent) else Path("."))
    existing = next((p for p in (start, *start.parents) if p.exists()), Path("."))
    try:  # a real probe: permissions alone do not tell (read-only or special file systems)
        os.rmdir(tempfile.mkdtemp(prefix=".robustff-probe.", dir=existing))
    except OSError as exc:
        reason = exc.strerror or exc
        raise RobustffError(f"--out {folder}: cannot write in {existing} ({reason})") from None
    if folder.is_dir():
        foreign = sorted(
            p.name
            for p in folder.iterdir()
            if p.name not in RESULT_FILES + OPTIONAL_RESULT_FILES
            and not p.name.startswith(("report", "plot-"))
        )
        if foreign:
            raise RobustffError(
                f"--out {folder}: the folder holds files robustff did not write "
                f"({', '.join(foreign[:3])}); choose another folder or empty it"
            )


def write_results(
    result: StudyResult,
    summary: Summary,
    folder: str | Path,
    percentiles: Sequence[float],
    extra: Callable[[Path], None] | None = None,
    samples_format: str = "csv",
    samples_file: Path | None = None,
) -> Path:
    """Write the result files into ``folder``, replacing an earlier run's files as a whole.

    Parameters
    ----------
    result : StudyResult
    summary : Summary
        From :func:`robustff.study.summary.summarize_study`; written as ``summary.json``
        (the only writer of that file; see ``docs/summary.schema.json``).
    folder : path
    percentiles : sequence of float
    extra : callable(Path), optional
        Writes further files (plots, HTML report) into the temporary folder before it is moved.
    samples_format : {"csv", "npy"}
        The per-sample table as ``samples.csv`` (default) or ``samples.npy``
        (see :mod:`robustff.output.samples_file`).
    samples_file : Path, optional
        ``samples.csv`` already written while the study ran
        (:meth:`robustff.output.samples_file.SamplesCsvStream.finish`): moved into the folder
        instead of written again (only with the ``csv`` format).

    Returns
    -------
    Path
        The destination folder.
    """
    folder = Path(folder)
    samples_file_name(samples_format)  # an unknown format is refused before anything is written
    check_output_folder(folder)
    folder.parent.mkdir(parents=True, exist_ok=True)
    staging = Path(tempfile.mkdtemp(prefix=f".{folder.name}.", dir=folder.parent))
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(staging, 0o777 & ~umask)  # mkdtemp's 0700 would hide results on a shared server
    try:
        # Each file is flushed to disk before the folder is swapped in, so a crash right after
        # the swap cannot leave a result folder with empty files.
        write_text_atomic(staging / "summary.json",
                          json.dumps(json_safe(summary), indent=2, allow_nan=False) + "\n")
        write_text_atomic(staging / "percentiles.csv", percentiles_csv(summary, percentiles))
        write_text_atomic(staging / "percentiles.md", percentiles_markdown(summary, percentiles))
        if samples_file is not None and samples_format == "csv":
            os.replace(samples_file, staging / samples_file_name(samples_format))
        else:
            write_samples(staging, sample_columns(result), samples_format)
        write_text_atomic(staging / SAMPLES_UNITS_FILE, samples_units_csv(result, summary))
        write_text_atomic(staging / "frequency.csv",
                          frequency_csv(study_frequencies(result), result.case.time_unit))
        if extra is not None:
            extra(staging)
        _replace_folder(staging, folder)
    except BaseException:
        shutil.rmtree(staging, ignore_errors=True)
        raise
    return folder


def _replace_folder(staging: Path, folder: Path) -> None:
    old = None
    if folder.exists():
        old = folder.with_name(f".{folder.name}.old-{os.getpid()}")
        os.replace(folder, old)
    os.replace(staging, folder)
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)
