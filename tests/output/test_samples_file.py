"""The per-sample table written in row blocks: samples.csv and samples.npy, atomic streams."""

from __future__ import annotations

import io
import os
import stat
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from robustff.atomic import open_atomic
from robustff.case import load_case
from robustff.cli import main
from robustff.cli.run_command import SAMPLES_FORMATS as CLI_SAMPLES_FORMATS
from robustff.errors import RobustffError
from robustff.output.result_files import write_results
from robustff.output.samples_file import (
    SAMPLES_FORMATS,
    sample_columns,
    write_samples,
    write_samples_csv,
    write_samples_npy,
)
from robustff.study import run_study
from robustff.study.summary import summarize_study

DEMO = Path(__file__).resolve().parents[2] / "cases" / "syrup-dilution.toml"
PERCENTILES = (5.0, 50.0, 95.0)


@pytest.fixture(scope="module")
def study():
    result = run_study(load_case(DEMO), samples=130, seed=11, jobs=1, margins=False)
    return result, summarize_study(result, PERCENTILES)


def _columns(n: int = 23) -> list[tuple[str, np.ndarray]]:
    rng = np.random.default_rng(5)
    values = rng.lognormal(0.0, 3.0, n)
    values[3] = np.nan  # an unstable sample's metric
    return [
        ("sample", np.arange(n, dtype=np.int64)),
        ("process.gain", rng.normal(1.0, 0.2, n)),
        ("iae_fb", values),
        ("unstable_fb", np.isnan(values)),
    ]


def _whole_table_text(columns) -> str:
    # The table formatted in one piece by numpy.savetxt (how samples.csv was written before).
    buffer = io.StringIO()
    buffer.write(",".join(h for h, _ in columns) + "\n")
    table = np.column_stack([np.asarray(v, dtype=float) for _, v in columns])
    np.savetxt(buffer, table, delimiter=",", fmt="%.10g")
    return buffer.getvalue()


@pytest.mark.parametrize("block", [1, 5, 23, 1000])
def test_csv_in_blocks_equals_the_table_written_in_one_piece(tmp_path: Path, block: int) -> None:
    columns = _columns()
    write_samples_csv(tmp_path / "samples.csv", columns, rows_per_block=block)
    assert (tmp_path / "samples.csv").read_text() == _whole_table_text(columns)


def test_csv_of_no_samples_is_the_header_alone(tmp_path: Path) -> None:
    columns = [(h, v[:0]) for h, v in _columns()]
    write_samples_csv(tmp_path / "samples.csv", columns)
    assert (tmp_path / "samples.csv").read_text() == "sample,process.gain,iae_fb,unstable_fb\n"


@pytest.mark.parametrize("block", [1, 7, 1000])
def test_npy_loads_back_every_column_exactly(tmp_path: Path, block: int) -> None:
    columns = _columns()
    write_samples_npy(tmp_path / "samples.npy", columns, rows_per_block=block)
    table = np.load(tmp_path / "samples.npy")  # no pickle needed: plain structured records
    assert table.dtype.names == tuple(h for h, _ in columns)
    assert table.dtype["sample"] == np.int64 and table.dtype["unstable_fb"] == np.bool_
    for header, values in columns:
        np.testing.assert_array_equal(table[header], values)
    # numpy's own writer, the whole array at once, gives the same bytes
    reference = tmp_path / "reference.npy"
    np.save(reference, table)
    assert (tmp_path / "samples.npy").read_bytes() == reference.read_bytes()
    frame = pd.DataFrame(table)
    assert list(frame.columns) == [h for h, _ in columns]


def test_columns_of_unequal_length_are_refused_and_nothing_is_left(tmp_path: Path) -> None:
    columns = [*_columns(), ("iae_fbff", np.zeros(3))]
    for writer in (write_samples_csv, write_samples_npy):
        with pytest.raises(ValueError, match="lengths"):
            writer(tmp_path / "samples.out", columns)
    assert list(tmp_path.iterdir()) == []


def test_unknown_format_is_refused(tmp_path: Path) -> None:
    with pytest.raises(RobustffError, match="parquet"):
        write_samples(tmp_path, _columns(), "parquet")


class _FailingColumn(np.ndarray):
    """A column whose second block cannot be read (a failure halfway through the file)."""

    def __getitem__(self, index):
        if isinstance(index, slice) and (index.start or 0) > 0:
            raise OSError("no space left on device")
        return super().__getitem__(index)


@pytest.mark.parametrize("writer", [write_samples_csv, write_samples_npy])
def test_a_failure_halfway_keeps_the_old_file_and_its_mode(tmp_path: Path, writer) -> None:
    target = tmp_path / "samples.out"
    target.write_text("old\n")
    target.chmod(0o640)
    columns = [(h, np.asarray(v).view(_FailingColumn)) for h, v in _columns(50)]
    with pytest.raises(OSError, match="no space"):
        writer(target, columns, rows_per_block=10)
    assert target.read_text() == "old\n"
    assert [p.name for p in tmp_path.iterdir()] == [target.name]  # no temporary file left
    writer(target, _columns(50), rows_per_block=10)
    assert target.read_bytes() != b"old\n"
    assert stat.S_IMODE(target.stat().st_mode) == 0o640


def test_open_atomic_gives_a_new_file_the_umask_mode(tmp_path: Path) -> None:
    umask = os.umask(0o027)
    try:
        with open_atomic(tmp_path / "new.bin", binary=True) as stream:
            stream.write(b"\x00\x01")
    finally:
        os.umask(umask)
    assert (tmp_path / "new.bin").read_bytes() == b"\x00\x01"
    assert stat.S_IMODE((tmp_path / "new.bin").stat().st_mode) == 0o640


def test_study_table_in_both_formats_holds_the_same_values(tmp_path: Path, study) -> None:
    result, summary = study
    write_results(result, summary, tmp_path / "csv", PERCENTILES)
    write_results(result, summary, tmp_path / "npy", PERCENTILES, samples_format="npy")
    assert not (tmp_path / "npy" / "samples.csv").exists()
    assert not (tmp_path / "csv" / "samples.npy").exists()
    text = pd.read_csv(tmp_path / "csv" / "samples.csv")
    binary = pd.DataFrame(np.load(tmp_path / "npy" / "samples.npy"))
    assert list(binary.columns) == list(text.columns) == [h for h, _ in sample_columns(result)]
    assert len(binary) == result.samples == 130
    np.testing.assert_array_equal(binary["iae_fbff"], result.metrics["iae"][:, 1])
    np.testing.assert_allclose(binary.to_numpy(float), text.to_numpy(float), rtol=1e-9)


def test_cli_option_writes_samples_npy_and_agrees_with_the_library(tmp_path: Path) -> None:
    assert tuple(CLI_SAMPLES_FORMATS) == SAMPLES_FORMATS  # one list of formats
    out = tmp_path / "out"
    status = main(["run", str(DEMO), "--samples", "40", "--jobs", "1", "--out", str(out),
                   "--samples-format", "npy"])
    assert status == 0
    assert (out / "samples.npy").exists() and not (out / "samples.csv").exists()
    # the folder written with npy may be replaced by a later run (its files are robustff's)
    assert main(["run", str(DEMO), "--samples", "40", "--jobs", "1", "--out", str(out)]) == 0
    assert (out / "samples.csv").exists() and not (out / "samples.npy").exists()
