"""Fixtures shared by the studio's pilot tests."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from robustff.demo import demo_case_path


@pytest.fixture
def case_file(tmp_path: Path) -> Path:
    """A writable copy of the wash-water heater demo case."""
    path = tmp_path / "heater.toml"
    shutil.copy(demo_case_path("wash-water-heater"), path)
    return path
