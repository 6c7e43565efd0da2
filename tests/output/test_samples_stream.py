"""samples.csv written while the study runs: the same bytes as the table written afterwards.

``robustff run`` formats each finished chunk's rows while the next chunks are simulated
(:class:`robustff.output.samples_file.SamplesCsvStream` fed by ``run_study``'s ``on_rows``);
the file must equal :func:`write_samples_csv` on the finished study, other designs' columns
included, for a whole run and for a run stopped after some chunks, and leave nothing behind.
"""

from __future__ import annotations

import threading
from pathlib import Path

import pytest

from robustff.case import load_case
from robustff.cli import main
from robustff.output.samples_file import SamplesCsvStream, sample_columns, write_samples_csv
from robustff.study import SampleRows, run_study

CASES = Path(__file__).resolve().parents[2] / "cases"
WITH_DESIGNS = CASES / "rinse-water-heater.toml"  # lists [[design]] tables


def _table(result, path: Path) -> bytes:
    write_samples_csv(path, sample_columns(result))
    return path.read_bytes()


def test_streamed_table_equals_the_table_written_afterwards(tmp_path: Path) -> None:
    case = load_case(WITH_DESIGNS)
    assert case.designs  # the other designs' columns are streamed too
    stream = SamplesCsvStream(tmp_path / "out")
    seen: list[SampleRows] = []

    def on_rows(rows: SampleRows) -> None:
        seen.append(rows)
        stream.add(rows)

    result = run_study(case, samples=130, seed=3, jobs=2, chunk_size=40, margins=False,
                       on_rows=on_rows)
    assert [rows.start for rows in seen] == [0, 40, 80, 120]  # four chunks, in order
    path = stream.finish(result)
    assert path is not None and path.name.endswith(".part")
    assert path.read_bytes() == _table(result, tmp_path / "whole.csv")
    assert "unstable_fbff." in path.read_text().splitlines()[0]


def test_a_stopped_run_streams_exactly_its_finished_chunks(tmp_path: Path) -> None:
    stream = SamplesCsvStream(tmp_path / "out")
    cancel = threading.Event()

    def progress(done: int, total: int) -> None:
        if done >= 60:
            cancel.set()  # as Ctrl-C: no new chunk starts

    result = run_study(load_case(WITH_DESIGNS), samples=200, seed=3, jobs=1, chunk_size=30,
                       margins=False, on_rows=stream.add, progress=progress, cancel=cancel)
    assert result.partial and result.samples == 60
    path = stream.finish(result)
    assert path is not None
    assert path.read_bytes() == _table(result, tmp_path / "whole.csv")


def test_rows_that_do_not_match_the_study_are_not_used(tmp_path: Path) -> None:
    # An interrupt between a chunk's arrival and its rows: finish() gives None and removes the
    # file, so the caller writes the table from the study instead.
    result = run_study(load_case(WITH_DESIGNS), samples=50, seed=3, jobs=1, chunk_size=25,
                       margins=False)
    stream = SamplesCsvStream(tmp_path / "out")
    rows = result.rows()
    first = SampleRows(0, rows.names, rows.parameters[:25], {k: v[:25] for k, v in
                                                            rows.metrics.items()},
                       rows.unstable[:25], [])
    stream.add(first)
    assert stream.finish(result) is None
    assert not stream.path.exists()
    with pytest.raises(ValueError, match="follow"):
        other = SamplesCsvStream(tmp_path / "other")
        other.add(SampleRows(5, rows.names, rows.parameters[:1],
                             {k: v[:1] for k, v in rows.metrics.items()}, rows.unstable[:1],
                             []))
    other.discard()
    assert not other.path.exists()


def test_the_command_leaves_one_table_and_no_partial_file(tmp_path: Path) -> None:
    out = tmp_path / "results"
    assert main(["run", str(WITH_DESIGNS), "--samples", "60", "--jobs", "1",
                 "--out", str(out)]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["results"]  # no .part left over
    lines = (out / "samples.csv").read_text().splitlines()
    assert len(lines) == 61 and lines[0].startswith("sample,")
    assert [line.split(",")[0] for line in lines[1:]] == [str(i) for i in range(60)]
