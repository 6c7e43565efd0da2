"""The layering rules are checked, not hoped for (see ARCHITECTURE.md, "Layers" and "Habits").

The numerical core never imports the shells (robustff.cli, robustff.tui), argparse, textual or
matplotlib; and nothing on the ``robustff run`` path imports python-control, scipy.signal,
textual or matplotlib (slow to import, and not needed for a batch study).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

DEMO = Path(__file__).resolve().parents[1] / "cases" / "syrup-dilution.toml"

CORE_MODULES = ("robustff.engine", "robustff.study", "robustff.study.summary", "robustff.stats",
                "robustff.case.sampling", "robustff.engine.metrics", "robustff.design.tuning", "robustff.case")
CORE_FORBIDDEN = ("textual", "matplotlib", "control", "argparse", "rich", "robustff.cli",
                  "robustff.tui")
RUN_FORBIDDEN = ("textual", "matplotlib", "control", "scipy.signal", "robustff.tui")


def _loaded_after(code: str, cwd: Path) -> list[str]:
    """Names in ``sys.modules`` after running ``code`` in a fresh interpreter."""
    script = code + "\nimport json, sys\nprint(json.dumps(sorted(sys.modules)))\n"
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                          cwd=cwd, timeout=120, check=False)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.strip().splitlines()[-1])


def _offenders(loaded: list[str], forbidden: tuple[str, ...]) -> list[str]:
    return [name for name in loaded
            if any(name == bad or name.startswith(bad + ".") for bad in forbidden)]


def test_core_imports_no_shell_or_ui_library(tmp_path: Path) -> None:
    loaded = _loaded_after("\n".join(f"import {name}" for name in CORE_MODULES), tmp_path)
    assert "robustff.study" in loaded and "robustff.engine" in loaded
    assert _offenders(loaded, CORE_FORBIDDEN) == []


def test_the_offender_check_would_catch_an_import(tmp_path: Path) -> None:
    # Guard against a check that cannot fail: a known import must show up.
    loaded = _loaded_after("import robustff.cli", tmp_path)
    assert {"argparse", "robustff.cli"} <= set(_offenders(loaded, CORE_FORBIDDEN))


def test_run_command_imports_no_slow_or_ui_library(tmp_path: Path) -> None:
    code = (
        "from robustff.cli import main\n"
        f"status = main(['run', {str(DEMO)!r}, '--samples', '20', '--jobs', '1',"
        " '--out', 'out'])\n"
        "assert status == 0, status\n"
    )
    loaded = _loaded_after(code, tmp_path)
    assert (tmp_path / "out" / "summary.json").exists()
    assert "robustff.cli.run_command" in loaded and "robustff.study" in loaded
    assert _offenders(loaded, RUN_FORBIDDEN) == []
