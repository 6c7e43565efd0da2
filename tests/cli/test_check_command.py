"""``robustff check``: demo cases pass, malformed cases exit 2 naming the key, no traceback."""

from __future__ import annotations

import filecmp
from pathlib import Path

import pytest
from case_texts import MALFORMED

from robustff import CAUTION
from robustff.cli import main
from robustff.demo import DEMO_CASES, demo_case_path
from robustff.errors import CaseError

ROOT = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize("name", DEMO_CASES)
def test_demo_case_checks_clean(name, capsys):
    assert main(["check", str(ROOT / "cases" / f"{name}.toml")]) == 0
    out = capsys.readouterr().out
    assert "Nominal models:" in out and "Uncertainty (" in out and "Study: 2000 samples" in out
    assert "Design from the nominal models:" in out and "Feedback (" in out
    assert out.rstrip().endswith(CAUTION)


def test_check_prints_units_and_the_not_realizable_delay(capsys):
    main(["check", str(demo_case_path("wash-water-heater"))])
    out = capsys.readouterr().out
    assert "controlled variable:  outlet temperature [degC]" in out
    assert "gain in degC per %" in out
    assert "process.gain" in out and "uniform 0.45 .. 0.75 degC per %" in out
    assert "not realizable" in out  # disturbance dead time 3 s < process dead time 8 s


def test_demo_copies_in_the_package_match_cases_folder():
    for name in DEMO_CASES:
        assert filecmp.cmp(ROOT / "cases" / f"{name}.toml", demo_case_path(name), shallow=False)
    assert set(DEMO_CASES) <= {p.stem for p in (ROOT / "cases").glob("*.toml")}
    with pytest.raises(CaseError):
        demo_case_path("no-such-plant")


@pytest.mark.parametrize("label", sorted(MALFORMED))
def test_malformed_case_exits_2_naming_the_key(label, tmp_path, capsys):
    text, key = MALFORMED[label]
    path = tmp_path / "case.toml"
    path.write_text(text, encoding="utf-8")
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    assert any(line.startswith(f"robustff: error: {path}: ") and key in line
               for line in err.splitlines()), err


def test_missing_file_exits_2(tmp_path, capsys):
    assert main(["check", str(tmp_path / "none.toml")]) == 2
    assert "no such case file" in capsys.readouterr().err


def test_design_error_exits_2(tmp_path, capsys):
    # An integrating process with a self-regulating disturbance has no static/lead-lag
    # feedforward: the tuning layer refuses it with a DesignError.
    text = demo_case_path("surge-tank-level").read_text(encoding="utf-8").replace(
        'model = "ipdt"\ngain = 0.4', 'model = "fopdt"\ngain = 0.4\ntime_constant = 2.0')
    path = tmp_path / "mixed.toml"
    path.write_text(text, encoding="utf-8")
    assert main(["check", str(path)]) == 2
    assert "feedforward" in capsys.readouterr().err
