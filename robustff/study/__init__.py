"""The study: the parallel Monte Carlo runner and the typed ``summary.json`` statistics."""

from __future__ import annotations

from robustff.study.runner import (
    CHUNK_SIZE,
    ProgressCallback,
    RowsCallback,
    SampleRows,
    StudyResult,
    chunk_spans,
    noise_seeds,
    run_study,
)

__all__ = ["StudyResult", "SampleRows", "run_study", "noise_seeds", "chunk_spans", "CHUNK_SIZE",
           "ProgressCallback", "RowsCallback"]
