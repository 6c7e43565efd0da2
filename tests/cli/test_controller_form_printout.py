"""`robustff check` and `robustff run` show the tuning in the case's form and in ideal form."""

from __future__ import annotations

from pathlib import Path

from robustff.cli import main

DEMO = Path(__file__).resolve().parents[2] / "cases" / "wash-water-heater.toml"


def _series_case(tmp_path: Path) -> Path:
    text = DEMO.read_text()
    text = text.replace('unit = "degC"\n', 'unit = "degC"\nrange = [0.0, 120.0]\n', 1)
    text = text.replace('form = "pi"\ntuning = "simc"\n',
                        'form = "pid"\ntuning = "manual"\nstructure = "series"\n'
                        "proportional_band = 60.0\nrepeats = 0.025\ntd = 4.0\n"
                        "setpoint_weight = 0.5\n")
    assert "proportional_band" in text and "range = [0.0, 120.0]" in text
    path = tmp_path / "series.toml"
    path.write_text(text)
    return path


# Series PB = 60 % on 0 .. 120 degC and a % output: Kc' = (100/60) x 100/120 = 1.389 %/degC,
# Ti' = 1/0.025 = 40 s, Td' = 4 s; ideal (Astrom and Hagglund, Advanced PID Control, 2006,
# section 3.4, from memory) Kc = 1.389 x 44/40 = 1.528 %/degC, Ti = 44 s, Td = 160/44 = 3.636 s.
SERIES_LINE = ("series form, as the control system takes it: PB = 60 % (Kc' = 1.389 %/degC, "
               "1.667 %/%), 0.025 repeats/s (Ti' = 40 s), Td' = 4 s")
IDEAL_LINE = "PID, ideal form: Kc = 1.528 %/degC (1.833 %/%, PB = 54.55 %), Ti = 44 s"


def test_check_and_run_print_both_forms(tmp_path, capsys):
    case = _series_case(tmp_path)
    assert main(["check", str(case)]) == 0
    checked = capsys.readouterr().out
    assert main(["run", str(case), "--samples", "20", "--jobs", "1",
                 "--out", str(tmp_path / "out")]) == 0
    ran = capsys.readouterr().out
    for out in (checked, ran):
        assert SERIES_LINE in out and IDEAL_LINE in out
        assert "setpoint weight b = 0.5 (proportional)" in out


def test_check_refuses_a_band_and_a_gain_together(tmp_path, capsys):
    case = _series_case(tmp_path)
    case.write_text(case.read_text().replace("proportional_band = 60.0\n",
                                             "proportional_band = 60.0\nkc = 1.4\n"))
    assert main(["check", str(case)]) == 2
    err = capsys.readouterr().err
    assert "feedback.proportional_band: give the gain once: kc or proportional_band" in err
    assert "Traceback" not in err
