"""First-use defects of the command line: hostile or careless inputs end in one clear line.

Each case here failed before its fix (a silently accepted value, a misleading line, a lost file
mode); the table is meant to grow as new careless inputs are found.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

import pytest

from robustff.atomic import write_text_atomic
from robustff.case import load_case, save_case
from robustff.cli import EXIT_OK, EXIT_USAGE, main

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "cases" / "syrup-dilution.toml"


def run_cli(argv: list[str]) -> int:
    try:
        return main(argv)
    except SystemExit as exc:
        return int(exc.code or 0)


@pytest.fixture(autouse=True)
def _in_tmp(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(tmp_path)


REFUSED_ARGUMENTS = [
    # (arguments after "run CASE", words the one-line error must contain)
    (["--samples", "5"], ["--samples", "from 10"]),  # case files require 10 or more
    (["--samples", "1000000000"], ["--samples", "10,000,000"]),
    (["--samples", "-1"], ["--samples", "from 10"]),
    (["--jobs", "-1"], ["--jobs", ">= 1"]),
    (["--jobs", "0"], ["--jobs", ">= 1"]),
    (["--seed", str(2**70)], ["--seed", "9,223,372,036,854,775,807"]),
    (["--seed", "-3"], ["--seed"]),
    (["--sample", "100"], ["unrecognized", "--sample"]),  # no silent prefix matching
    (["--cluster", "tcp://127.0.0.1:99999"], ["--cluster", "99999"]),
    (["--cluster", "localhost"], ["--cluster", "tcp://HOST:PORT"]),
    (["--samples-format", "xlsx"], ["--samples-format", "csv", "npy"]),
    (["--paper", "A3"], ["--paper", "A4", "Letter"]),
]


@pytest.mark.parametrize(("extra", "words"), REFUSED_ARGUMENTS)
def test_run_refuses_bad_arguments_in_one_line(
    extra: list[str], words: list[str], capsys: pytest.CaptureFixture[str], tmp_path: Path
) -> None:
    status = run_cli(["run", str(DEMO), "--out", str(tmp_path / "out"), *extra])
    err = capsys.readouterr().err
    assert status == EXIT_USAGE
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1, err
    for word in words:
        assert word in err, err
    assert not (tmp_path / "out").exists()


@pytest.mark.parametrize("extra", [["--samples", "5"], ["--seed", str(2**64)], ["--sample", "50"]])
def test_tune_refuses_the_same_numbers(
    extra: list[str], capsys: pytest.CaptureFixture[str]
) -> None:
    assert run_cli(["tune", str(DEMO), *extra]) == EXIT_USAGE
    assert "Traceback" not in capsys.readouterr().err


def test_the_largest_seed_a_case_allows_is_accepted(tmp_path: Path) -> None:
    status = run_cli(["run", str(DEMO), "--samples", "20", "--jobs", "1",
                      "--seed", str(2**63 - 1), "--out", str(tmp_path / "out")])
    assert status == EXIT_OK


def test_case_file_with_a_byte_order_mark_is_read(tmp_path: Path) -> None:
    text = DEMO.read_text(encoding="utf-8")
    with_bom = tmp_path / "bom.toml"
    with_bom.write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    assert load_case(with_bom).title == load_case(DEMO).title


@pytest.mark.skipif(os.name != "posix", reason="POSIX permission bits")
def test_atomic_write_keeps_an_existing_files_mode(tmp_path: Path) -> None:
    target = tmp_path / "shared.toml"
    target.write_text("old\n")
    target.chmod(0o644)
    write_text_atomic(target, "new\n")
    assert stat.S_IMODE(target.stat().st_mode) == 0o644
    target.chmod(0o640)
    write_text_atomic(target, "newer\n")
    assert stat.S_IMODE(target.stat().st_mode) == 0o640
    assert target.read_text() == "newer\n"


@pytest.mark.skipif(os.name != "posix", reason="POSIX permission bits")
def test_a_new_file_gets_the_umask_mode_not_0600(tmp_path: Path) -> None:
    old = os.umask(0o022)
    try:
        save_case(load_case(DEMO), tmp_path / "copy.toml")
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "copy.toml").stat().st_mode) == 0o644


@pytest.mark.skipif(os.name != "posix" or os.geteuid() == 0,
                    reason="POSIX permissions; root can write anywhere")
def test_unwritable_existing_out_folder_is_refused_before_the_study(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "locked"
    out.mkdir()
    out.chmod(0o555)
    try:
        status = run_cli(["run", str(DEMO), "--samples", "20", "--out", str(out)])
    finally:
        out.chmod(0o755)
    err = capsys.readouterr().err
    assert status == EXIT_USAGE and "cannot write" in err
    assert "samples" not in capsys.readouterr().out


def test_no_feedforward_is_not_reported_as_a_harm_probability(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    text = DEMO.read_text().replace('structure = "lead-lag-delay"', 'structure = "none"')
    assert 'structure = "none"' in text
    case = tmp_path / "none.toml"
    case.write_text(text)
    assert run_cli(["run", str(case), "--samples", "30", "--jobs", "1",
                    "--out", str(tmp_path / "out")]) == EXIT_OK
    out = capsys.readouterr().out
    assert "No feedforward in this case" in out
    assert "worse in 0.0 %" not in out


def test_quick_start_commands_use_a_virtual_environment() -> None:
    # PEP 668: a system Python may refuse global installs, so both commands must install into
    # a virtual environment, and CI must run the README's test command as written.
    readme = (ROOT / "README.md").read_text()
    block = readme.split("## Quick start", 1)[1].split("```")[1].strip().splitlines()
    assert len(block) == 2
    for command in block:
        assert command.startswith("python3 -m venv .venv && .venv/bin/pip install ")
    assert block[1].endswith(".venv/bin/python -m pytest")
    assert "README.md" in (ROOT / ".ci" / "run").read_text()


def test_studio_without_a_terminal_refuses_in_one_line(tmp_path: Path) -> None:
    import subprocess
    import sys

    done = subprocess.run([sys.executable, "-m", "robustff", "studio", str(DEMO)],
                          capture_output=True, text=True, stdin=subprocess.DEVNULL, timeout=60,
                          cwd=tmp_path, check=False)
    assert done.returncode == EXIT_USAGE
    assert "needs a terminal" in done.stderr and "\x1b[" not in done.stderr + done.stdout
