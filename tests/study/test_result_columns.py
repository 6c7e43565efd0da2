"""A large study's metrics kept in column files give the same results as kept in memory."""

from __future__ import annotations

import gc
import json
import threading
from pathlib import Path

import numpy as np
import pytest

import robustff.study.result_columns as result_columns
from robustff.case import load_case, parse_case
from robustff.cli import main
from robustff.study import run_study
from robustff.study.result_columns import (
    ColumnFiles,
    LazyColumn,
    SpilledMetrics,
    arm_metrics,
    metric_column,
    spills,
)
from robustff.study.summary import summarize_study

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "cases" / "wash-water-heater.toml"
PERCENTILES = (5.0, 50.0, 95.0)


def _with_design() -> str:
    return DEMO.read_text() + '\n[[design]]\nname = "soft"\ngain_factor = 0.6\n'


def test_columns_read_back_exactly_in_any_range(tmp_path: Path) -> None:
    rng = np.random.default_rng(3)
    files = ColumnFiles(tmp_path)
    parts = [rng.standard_normal(n) for n in (5, 0, 17, 1)]
    parts[2][4] = np.nan
    flags = [rng.random(p.size) > 0.5 for p in parts]
    for values, flag in zip(parts, flags, strict=True):
        files.append("x", values)
        files.append("flag", flag)
    whole, whole_flags = np.concatenate(parts), np.concatenate(flags)
    np.testing.assert_array_equal(files.read("x"), whole)  # NaN in the same place
    np.testing.assert_array_equal(files.read("flag"), whole_flags)
    assert files.read("flag").dtype == np.bool_
    np.testing.assert_array_equal(files.read("x", 3, 9), whole[3:9])
    np.testing.assert_array_equal(files.read("x", 20, 99), whole[20:])
    column = LazyColumn(files, "x", 20)  # the first 20 values only
    assert len(column) == 20 and column.shape == (20,) and column.dtype == np.float64
    np.testing.assert_array_equal(column[2:11], whole[2:11])
    np.testing.assert_array_equal(column[15:40], whole[15:20])
    np.testing.assert_array_equal(np.asarray(column), whole[:20])
    np.testing.assert_array_equal(column[::2], whole[:20:2])
    with pytest.raises(ValueError, match="one-dimensional"):
        files.append("x", np.zeros((2, 2)))


@pytest.mark.parametrize("pending_bytes", [0, 100, result_columns.PENDING_BYTES])
def test_appends_are_written_in_batches_and_every_read_sees_them(tmp_path: Path, monkeypatch,
                                                                 pending_bytes: int) -> None:
    # Appended values wait in memory until PENDING_BYTES of them are held (0: written at once);
    # a read in between must see them all.
    monkeypatch.setattr(result_columns, "PENDING_BYTES", pending_bytes)
    rng = np.random.default_rng(11)
    files = ColumnFiles(tmp_path)
    seen: list[np.ndarray] = []
    for size in (3, 7, 0, 12, 5, 9):
        values = rng.standard_normal(size)
        seen.append(values)
        files.append("y", values)
        on_disk = (files.path / "0.bin").stat().st_size if (files.path / "0.bin").exists() else 0
        assert on_disk <= 8 * files.rows("y")
        if pending_bytes == 0:
            assert on_disk == 8 * files.rows("y")  # nothing held back
        np.testing.assert_array_equal(files.read("y"), np.concatenate(seen))
        np.testing.assert_array_equal(files.read("y", 2, 6), np.concatenate(seen)[2:6])
    if pending_bytes > 1000:  # a large threshold: held until a read
        files.append("y", np.ones(4))
        assert (files.path / "0.bin").stat().st_size == 8 * (files.rows("y") - 4)
        assert files.read("y")[-4:].tolist() == [1.0] * 4


def test_columns_held_back_are_read_safely_from_several_threads(tmp_path: Path) -> None:
    # The summary reads spilled columns from a pool of threads: the first reads write the held
    # values while the others read (this raised "dictionary changed size during iteration").
    from concurrent.futures import ThreadPoolExecutor

    files = ColumnFiles(tmp_path)
    expected = {f"c{key}": np.arange(key, key + 500.0) for key in range(60)}
    for name, values in expected.items():
        for part in np.array_split(values, 5):
            files.append(name, part)
    for _ in range(3):
        with ThreadPoolExecutor(8) as pool:
            read = dict(zip(expected, pool.map(files.read, expected), strict=True))
        for name, values in expected.items():
            np.testing.assert_array_equal(read[name], values)
        files.append("c0", np.array([-1.0]))
        expected["c0"] = np.append(expected["c0"], -1.0)


@pytest.mark.skipif(not Path("/proc/self/fd").is_dir(), reason="counts open files in /proc")
def test_more_columns_than_open_files_a_process_may_have(tmp_path: Path) -> None:
    # A study with many designs has hundreds of columns: none is kept open between chunks.
    import resource

    soft, hard = resource.getrlimit(resource.RLIMIT_NOFILE)
    resource.setrlimit(resource.RLIMIT_NOFILE, (len(list(Path("/proc/self/fd").iterdir()))
                                                + 16, hard))
    try:
        files = ColumnFiles(tmp_path)
        for chunk in range(2):
            for key in range(100):
                files.append(f"c{key}", np.full(3, key + 0.5 * chunk))
    finally:
        resource.setrlimit(resource.RLIMIT_NOFILE, (soft, hard))
    np.testing.assert_array_equal(files.read("c7"), [7, 7, 7, 7.5, 7.5, 7.5])
    assert files.rows("c99") == 6


def test_the_column_folder_goes_with_its_object(tmp_path: Path) -> None:
    files = ColumnFiles(tmp_path)
    files.append("x", np.arange(4.0))
    folder = files.path
    assert folder.parent == tmp_path and folder.name.startswith(".robustff-columns-")
    files.close()
    assert not folder.exists()
    again = ColumnFiles(tmp_path)
    again.append("x", np.arange(4.0))
    folder = again.path
    del again
    gc.collect()
    assert not folder.exists()


def test_spilled_metrics_and_arm_views_agree_with_the_arrays(tmp_path: Path) -> None:
    rng = np.random.default_rng(5)
    arrays = {name: rng.standard_normal((12, 2)) for name in ("iae", "ise")}
    files = ColumnFiles(tmp_path)
    for name, values in arrays.items():
        for arm, key in enumerate(("fb", "fbff")):
            files.append(f"{key}|{name}", values[:7, arm])
            files.append(f"{key}|{name}", values[7:, arm])
    spilled = SpilledMetrics(files, ("iae", "ise"), ("fb", "fbff"), 10)  # a prefix of rows
    assert list(spilled) == ["iae", "ise"] and len(spilled) == 2
    for name, values in arrays.items():
        np.testing.assert_array_equal(spilled[name], values[:10])
        for arm in (0, 1):
            np.testing.assert_array_equal(arm_metrics(spilled, arm)[name], values[:10, arm])
            np.testing.assert_array_equal(arm_metrics(arrays, arm)[name], values[:, arm])
            np.testing.assert_array_equal(np.asarray(metric_column(spilled, name, arm)),
                                          values[:10, arm])
    with pytest.raises(KeyError):
        spilled["itae"]


def test_the_threshold_counts_metrics_arms_and_samples(monkeypatch) -> None:
    monkeypatch.setattr(result_columns, "SPILL_BYTES", 1000)
    assert not spills(62, 1, 2)  # 992 bytes
    assert spills(63, 1, 2)


def _summary_without_timing(summary: dict) -> dict:
    text = json.dumps(summary, sort_keys=True, default=str)
    out = json.loads(text)
    out.pop("elapsed_seconds", None)
    out["reproducibility"].pop("created", None)  # the clock, to the second
    return out


@pytest.fixture(scope="module")
def both_ways(tmp_path_factory):
    """The same study (a demo case plus one more design) with its metrics in memory and in
    column files."""
    case = parse_case(_with_design())
    kept = run_study(case, samples=150, seed=4, jobs=2, chunk_size=40)
    patch = pytest.MonkeyPatch()
    patch.setattr(result_columns, "SPILL_BYTES", 0)
    try:
        folder = tmp_path_factory.mktemp("spill")
        spilled = run_study(case, samples=150, seed=4, jobs=2, chunk_size=40,
                            spill_folder=folder)
    finally:
        patch.undo()
    return kept, spilled, folder


def test_a_spilled_study_summarises_exactly_as_one_kept_in_memory(both_ways) -> None:
    kept, spilled, folder = both_ways
    assert isinstance(spilled.metrics, SpilledMetrics) and isinstance(kept.metrics, dict)
    assert any(path.name.startswith(".robustff-columns-") for path in folder.iterdir())
    for name, values in kept.metrics.items():
        np.testing.assert_array_equal(spilled.metrics[name], values)
    for a, b in zip(kept.design_arms(), spilled.design_arms(), strict=True):
        assert a.name == b.name
        np.testing.assert_array_equal(a.unstable, b.unstable)
        for name in a.metrics:
            np.testing.assert_array_equal(np.asarray(b.metrics[name]), a.metrics[name])
    one = _summary_without_timing(summarize_study(kept, PERCENTILES))
    two = _summary_without_timing(summarize_study(spilled, PERCENTILES))
    assert one == two
    assert len(one["designs"]) == 2


def test_a_stopped_spilled_study_keeps_exactly_the_finished_samples(tmp_path: Path,
                                                                       monkeypatch) -> None:
    case = load_case(DEMO)
    monkeypatch.setattr(result_columns, "SPILL_BYTES", 0)
    cancel = threading.Event()
    result = run_study(case, samples=200, seed=2, jobs=1, chunk_size=50, margins=False,
                       cancel=cancel, progress=lambda done, total: cancel.set(),
                       spill_folder=tmp_path)
    assert result.partial and 0 < result.samples < 200
    monkeypatch.setattr(result_columns, "SPILL_BYTES", 10**12)
    whole = run_study(case, samples=200, seed=2, jobs=1, chunk_size=50, margins=False)
    for name, values in whole.metrics.items():
        np.testing.assert_array_equal(result.metrics[name], values[:result.samples])


@pytest.mark.parametrize("samples_format", ["csv", "npy"])
def test_the_command_writes_the_same_files_either_way(tmp_path: Path, monkeypatch,
                                                      samples_format: str) -> None:
    case = tmp_path / "case.toml"
    case.write_text(_with_design())
    arguments = ["run", str(case), "--samples", "90", "--jobs", "2",
                 "--samples-format", samples_format]
    assert main([*arguments, "--out", str(tmp_path / "memory")]) == 0
    monkeypatch.setattr(result_columns, "SPILL_BYTES", 0)
    assert main([*arguments, "--out", str(tmp_path / "files")]) == 0
    table = f"samples.{samples_format}"
    assert ((tmp_path / "memory" / table).read_bytes()
            == (tmp_path / "files" / table).read_bytes())
    one, two = (json.loads((tmp_path / folder / "summary.json").read_text())
                for folder in ("memory", "files"))
    for summary in (one, two):
        for key in ("elapsed_seconds", "reproducibility"):  # the clock and the command line
            summary.pop(key, None)
    assert one == two
    # the column folder went with the study
    assert not [path for path in tmp_path.iterdir() if path.name.startswith(".robustff-col")]


def test_the_statistics_worked_out_in_two_threads_equal_the_serial_ones(both_ways,
                                                                        monkeypatch) -> None:
    import robustff.study.summary as summary_module

    kept, spilled, _ = both_ways
    serial = _summary_without_timing(summarize_study(kept, PERCENTILES))
    monkeypatch.setattr(summary_module, "PARALLEL_SAMPLES", 0)
    for result in (kept, spilled):
        assert _summary_without_timing(summarize_study(result, PERCENTILES)) == serial
