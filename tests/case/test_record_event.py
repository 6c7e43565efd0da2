"""``disturbance-record`` events: reading the file, the window they set, notes and refusals."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from robustff.case import load_case, parse_case, save_case
from robustff.design.case_review import review_case
from robustff.engine.scenario import event_profiles
from robustff.errors import CaseError

CASE = '''
title = "Fictional mixing tank, feed flow replayed"
time_unit = "{unit}"
[process]
model = "fopdt"
gain = 1.2
time_constant = 4.0
dead_time = 1.0
[disturbance]
model = "fopdt"
gain = -0.5
time_constant = 3.0
dead_time = 0.5
[simulation]
{duration}step = {step}
[[event]]
kind = "disturbance-record"
at = {at}
file = "feed.csv"
time_column = "time"
value_column = "flow"
{extra}
'''


def write_case(folder: Path, csv: str, *, unit: str = "min", duration: str = "", step: float = 0.5,
               at: float = 0.0, extra: str = "") -> Path:
    (folder / "feed.csv").write_text(csv, encoding="utf-8")
    path = folder / "tank.toml"
    path.write_text(CASE.format(unit=unit, duration=duration, step=step, at=at, extra=extra),
                    encoding="utf-8")
    return path


PLAIN = "time,flow\n0,10\n1,10\n2,12\n3,12\n4,11\n"


def test_window_left_out_covers_the_record_and_the_profile_follows_it(tmp_path: Path) -> None:
    case = load_case(write_case(tmp_path, PLAIN, at=1.0))
    # last row at 1 + 4 min: scans at 0, 0.5, ..., 5.0 -> 11 scans, window 5.5 min
    assert case.simulation.duration == pytest.approx(5.5)
    disturbance = event_profiles(case)[0][0]
    t = np.arange(disturbance.size) * 0.5
    expected = np.interp(t - 1.0, [0, 1, 2, 3, 4], [0, 0, 2, 2, 1])
    expected[t < 1.0] = 0.0
    np.testing.assert_allclose(disturbance, expected, atol=1e-12)
    assert review_case(case).warnings == ()  # nothing assumed: no warning
    assert case.events[0].size == pytest.approx(2.0)  # the largest deviation, signed


def test_baseline_mean_is_the_time_average_and_time_unit_converts(tmp_path: Path) -> None:
    # record times in minutes, case in seconds; mean over the record by the trapezoidal rule:
    # (10 + 11 + 12 + 11.5) / 4 = 11.125 (the four intervals between rows at 0..4 min)
    case = load_case(write_case(tmp_path, PLAIN, unit="s", step=30.0,
                                extra='time_unit = "min"\nbaseline = "mean"'))
    record = case.events[0].record
    assert record.baseline_value == pytest.approx(11.125)
    np.testing.assert_allclose(record.times, [0, 60, 120, 180, 240])
    assert case.simulation.duration == pytest.approx(270.0)
    disturbance = event_profiles(case)[0][0]
    assert disturbance[0] == pytest.approx(10 - 11.125)
    assert disturbance[3] == pytest.approx(11 - 11.125)  # 90 s: halfway from 10 to 12


def test_gaps_interpolated_or_held_with_a_warning(tmp_path: Path) -> None:
    csv = "time;flow\n0;10,0\n1;\n2;12,0\n3;NA\n5;14,0\n"
    # interpolated: 11 at 1 min, 12 + 2/3 at 3 min (between 12 at 2 and 14 at 5); held: 10, 12
    for gaps, at_one, at_three in (("interpolate", 1.0, 2.0 + 2.0 / 3.0), ("hold", 0.0, 2.0)):
        case = load_case(write_case(tmp_path, csv, step=1.0, extra=f'gaps = "{gaps}"'))
        disturbance = event_profiles(case)[0][0]
        assert disturbance[1] == pytest.approx(at_one)
        assert disturbance[3] == pytest.approx(at_three)
        warnings = [w.message for w in review_case(case).warnings]
        assert any("1 missing value(s) from 1 to 1 min" in w for w in warnings), warnings
        assert any("missing value(s) from 3 to 3 min" in w for w in warnings), warnings


def test_window_longer_than_the_record_holds_its_last_value_with_a_warning(
        tmp_path: Path) -> None:
    case = load_case(write_case(tmp_path, PLAIN, duration="duration = 10.0\n"))
    disturbance = event_profiles(case)[0][0]
    assert np.all(disturbance[-6:] == pytest.approx(1.0))
    warnings = [w.message for w in review_case(case).warnings]
    assert any("runs past the record's end at 4 min" in w for w in warnings), warnings
    short = load_case(write_case(tmp_path, PLAIN, duration="duration = 2.0\n"))
    assert any("before the record" in w.message for w in review_case(short).warnings)


def test_day_first_timestamps_are_clock_time(tmp_path: Path) -> None:
    csv = "time;flow\n14.03.2026 23:59:00;1,5\n15.03.2026 00:00:00;2,5\n15.03.2026 00:01:00;2,0\n"
    case = load_case(write_case(tmp_path, csv, step=0.25))
    np.testing.assert_allclose(case.events[0].record.times, [0.0, 1.0, 2.0])  # min
    np.testing.assert_allclose(case.events[0].record.values, [0.0, 1.0, 0.5])


@pytest.mark.parametrize(("csv", "extra", "message"), [
    ("time,flow\n0,1\n2,2\n1,3\n", "", "line 4: column 'time' does not increase"),
    ("time,level\n0,1\n1,2\n", "", "no column 'flow'; the columns are: time, level"),
    ("time,flow\n0,1\n1,high\n", "", "line 3: column 'flow' has the non-numeric value 'high'"),
    ("time,flow\n0,1\n1,\n", "", "fewer than two rows have both a time and a value"),
    (PLAIN, 'baseline = "median"', "event[1].baseline: must be one of 'first', 'mean'"),
    (PLAIN, 'size = 3.0', "event[1].size: unknown key for kind = 'disturbance-record'"),
], ids=["times go back", "no such column", "text cell", "too few values", "bad baseline",
        "size given"])
def test_bad_records_are_refused_naming_the_key_and_the_line(tmp_path: Path, csv: str,
                                                             extra: str, message: str) -> None:
    with pytest.raises(CaseError) as caught:
        load_case(write_case(tmp_path, csv, extra=extra))
    assert message in str(caught.value)


def test_missing_record_file_is_one_clear_problem(tmp_path: Path) -> None:
    path = write_case(tmp_path, PLAIN)
    (tmp_path / "feed.csv").unlink()
    with pytest.raises(CaseError) as caught:
        load_case(path)
    assert "event[1].file: cannot be replayed" in str(caught.value)
    assert "file not found" in str(caught.value)


def test_save_and_reload_keeps_the_record_keys_and_the_file_relative(tmp_path: Path) -> None:
    path = write_case(tmp_path, PLAIN, extra='time_unit = "min"\nbaseline = "mean"\ngaps = "hold"')
    case = load_case(path)
    original = path.read_text(encoding="utf-8")
    save_case(case, path, original)
    text = path.read_text(encoding="utf-8")
    assert 'file = "feed.csv"' in text and 'baseline = "mean"' in text and 'gaps = "hold"' in text
    again = load_case(path)
    assert again.events == case.events
    np.testing.assert_array_equal(again.events[0].record.values, case.events[0].record.values)
    # the text form reads a relative file from the folder it is given
    assert parse_case(text, base_dir=tmp_path).events == case.events


def test_saving_into_another_folder_keeps_the_record_readable(tmp_path: Path) -> None:
    case = load_case(write_case(tmp_path, PLAIN))
    elsewhere = tmp_path / "copies" / "2026"
    elsewhere.mkdir(parents=True)
    target = elsewhere / "tank.toml"
    save_case(case, target, (tmp_path / "tank.toml").read_text(encoding="utf-8"))
    assert 'file = "../../feed.csv"' in target.read_text(encoding="utf-8")
    copy = load_case(target)
    np.testing.assert_array_equal(copy.events[0].record.values, case.events[0].record.values)
    # saved back beside its record, the file is named as before
    save_case(copy, tmp_path / "again.toml")
    assert 'file = "feed.csv"' in (tmp_path / "again.toml").read_text(encoding="utf-8")


def test_the_text_of_a_case_reads_back_from_the_folder_its_records_came_from(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    from robustff.case import case_to_toml
    from robustff.case.record_section import records_folder

    case = load_case(write_case(tmp_path, PLAIN))
    assert case.events[0].record.folder == tmp_path
    monkeypatch.chdir(tmp_path.parent)  # elsewhere: the working folder does not help
    again = parse_case(case_to_toml(case), source="edit", base_dir=records_folder(case))
    assert again.events == case.events
