"""The allocator settings of run and tune: applied on glibc, left alone where the user set them."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from robustff.cli import memory_reuse

pytestmark = pytest.mark.skipif(sys.platform != "linux", reason="glibc's mallopt is Linux only")


@pytest.mark.parametrize("name", ["MALLOC_MMAP_THRESHOLD_", "MALLOC_TRIM_THRESHOLD_"])
def test_a_users_own_allocator_setting_is_left_alone(monkeypatch, name: str) -> None:
    monkeypatch.setenv(name, "65536")
    assert memory_reuse._libc() is None


def test_kept_blocks_spare_the_search_most_of_its_page_faults() -> None:
    # In fresh interpreters, a short robust search on the pasteuriser (1,000 plants, a long
    # window: megabytes of scratch per chunk, allocated and freed at every evaluation), with
    # glibc's defaults and after keep_large_blocks: the minor page faults (getrusage; the
    # kernel counts one per page it hands out) fall several-fold (measured 243,000 -> 31,000;
    # the whole search 2.1 -> 1.7 s).
    code = """
import resource, sys
from robustff.case import load_case
from robustff.tune.search import robust_search
if sys.argv[1] == "keep":
    from robustff.cli.memory_reuse import keep_large_blocks
    keep_large_blocks()
case = load_case(sys.argv[2])
before = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
robust_search(case, jobs=2, samples=1000, max_evaluations=4)
print(resource.getrusage(resource.RUSAGE_SELF).ru_minflt - before)
"""
    case = Path(__file__).resolve().parents[2] / "cases" / "pasteuriser-tempering-tank.toml"
    env = {k: v for k, v in os.environ.items() if not k.startswith("MALLOC_")}
    faults = {mode: int(subprocess.run([sys.executable, "-c", code, mode, str(case)],
                                       capture_output=True, text=True, check=True,
                                       env=env).stdout.split()[-1])
              for mode in ("default", "keep")}
    assert faults["keep"] * 3 < faults["default"], faults
